"""The command line: parse arguments, call one function per command, report problems.

Exit codes: 0 success, 1 input problems, 2 usage errors. Bad input never shows a traceback:
every :class:`~atlas.errors.AtlasError` is printed as ``file:line: message`` lines.
"""

from __future__ import annotations

import json
import os
import sys
import time
from contextlib import contextmanager
from pathlib import Path

import click
from rich.console import Console

from .errors import AtlasError, Problem

err = Console(stderr=True, highlight=False, soft_wrap=True)


def _print_problems(problems: list[Problem]) -> None:
    for p in problems:
        style = "yellow" if p.level == "warning" else "red"
        err.print(p.format(), style=style, markup=False)


@contextmanager
def _progress(quiet: bool = False):
    """A status line that names each stage as it starts (on a terminal), else plain lines."""
    started = time.perf_counter()
    if quiet:
        yield lambda _msg: None
        return
    if err.is_terminal:
        with err.status("Starting") as status:
            def step(msg: str) -> None:
                status.update(msg)
                err.print(f"[dim]{time.perf_counter() - started:6.1f}s[/dim] {msg}",
                          markup=True, highlight=False)
            yield step
    else:
        yield lambda msg: err.print(f"{time.perf_counter() - started:6.1f}s {msg}",
                                    markup=False)


def _run(fn):
    try:
        return fn()
    except AtlasError as exc:
        _print_problems(exc.problems)
        n = sum(1 for p in exc.problems if p.level == "error")
        if n:
            err.print(f"{n} problem{'s' if n != 1 else ''} found; nothing was written.",
                      style="bold red", markup=False)
        sys.exit(exc.exit_code)
    except KeyboardInterrupt:
        err.print("Interrupted; nothing was written.", markup=False)
        sys.exit(130)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="lineage-atlas", prog_name="atlas")
def main() -> None:
    """Turn a phylogenetic study of artefacts into a linked, offline static website."""


@main.command()
@click.argument("directory", type=click.Path(file_okay=False, path_type=Path))
def new(directory: Path) -> None:
    """Create a small starter atlas source in DIRECTORY (invented example data)."""
    from .starter import write_starter

    _run(lambda: write_starter(directory))
    err.print(f"Created a starter atlas in {directory}. Next: atlas build {directory}",
              markup=False)


@main.command()
@click.argument("directory", default=".", type=click.Path(file_okay=False, path_type=Path))
@click.option("--profile", default="public", show_default=True, help="Build profile to check.")
def check(directory: Path, profile: str) -> None:
    """Validate an atlas source and list every problem."""
    from .build import load

    def run():
        with _progress() as step:
            atlas = load(directory, profile, step)
        from .site.languages import untranslated_report

        warnings = [*atlas.warnings, *untranslated_report(atlas)]  # what shows untranslated
        _print_problems(warnings)
        visible = len(atlas.visible_objects())
        err.print(f"OK: {len(atlas.objects)} objects ({visible} published by profile "
                  f"{profile!r}), {len(atlas.characters)} characters, {len(atlas.places)} places, "
                  f"{len(atlas.sample.trees)} trees used; {len(warnings)} warnings.",
                  markup=False)

    _run(run)


@main.command()
@click.argument("directory", default=".", type=click.Path(file_okay=False, path_type=Path))
@click.option("--out", "out", default="build", show_default=True,
              type=click.Path(path_type=Path), help="Output folder (replaced on success).")
@click.option("--profile", default="public", show_default=True,
              help="Build profile from atlas.toml: which access levels to publish.")
@click.option("--links", type=click.Choice(["error", "warn"]), default="error",
              show_default=True, help="Broken internal links fail the build, or only warn.")
@click.option("--quiet", "-q", is_flag=True, help="Print only problems.")
@click.option("--jobs", "-j", default=1, show_default=True, type=click.IntRange(1, 64),
              help="Processes for the analysis over the sample and for rendering (the output "
              "is the same for any number).")
@click.option("--no-cache", is_flag=True,
              help="Neither read nor write the build cache (.atlas-cache/ in the source).")
def build(directory: Path, out: Path, profile: str, links: str, quiet: bool, jobs: int,
          no_cache: bool) -> None:
    """Build the static site from an atlas source."""
    from .build import build as run_build

    def run():
        with _progress(quiet) as step:
            report = run_build(directory, out, profile, links=links, step=step, jobs=jobs,
                               use_cache=not no_cache)
        _print_problems(report.warnings)
        if not quiet:
            err.print("Largest pages: " + ", ".join(
                f"{path} ({size / 1000:.1f} KB)" for path, size in report.largest),
                markup=False)
            err.print(f"Built {report.pages} pages ({report.files} files) into {report.out}. "
                      f"Open {report.out / 'index.html'}", markup=False)

    _run(run)


@main.command()
@click.argument("directory", default=".", type=click.Path(file_okay=False, path_type=Path))
@click.option("--format", "fmt", type=click.Choice(["table", "json"]), default="table",
              show_default=True)
@click.option("--profile", default="public", show_default=True)
def stats(directory: Path, fmt: str, profile: str) -> None:
    """Print the numbers a manuscript needs: trees, clades, parsimony, model, nodes."""
    from .analysis.results import analyse
    from .build import load
    from .stats import stats_table, study_stats

    def run():
        with _progress(quiet=fmt == "json") as step:
            atlas = load(directory, profile, step)
            step("Analysing")
            numbers = study_stats(atlas, analyse(atlas))
        if fmt == "json":
            click.echo(json.dumps(numbers, indent=2, sort_keys=True, ensure_ascii=False))
        else:
            width = max(len(k) for k, _ in stats_table(numbers))
            for key, value in stats_table(numbers):
                click.echo(f"{key:<{width}}  {value}")

    _run(run)


@main.command()
@click.argument("directory", default=".", type=click.Path(file_okay=False, path_type=Path))
@click.option("--out", "out", default="figures", show_default=True,
              type=click.Path(file_okay=False, path_type=Path), help="Folder for the figures.")
@click.option("--character", "characters", multiple=True, metavar="ID",
              help="Also draw this character's states on the tree (repeatable).")
@click.option("--profile", default="public", show_default=True,
              help="Build profile from atlas.toml: which access levels to show.")
def figures(directory: Path, out: Path, characters: tuple[str, ...], profile: str) -> None:
    """Write print-ready SVG figures of the lineage tree (PNG too when cairosvg is installed)."""
    from .figures import write_figures

    def run():
        with _progress() as step:
            paths = write_figures(directory, out, list(characters), profile, say=step)
        for path in paths:
            click.echo(str(path))

    _run(run)


@main.command()
@click.argument("directory", default=".", type=click.Path(file_okay=False, path_type=Path))
@click.option("--out", "out", default="build", show_default=True, type=click.Path(path_type=Path))
@click.option("--profile", default="public", show_default=True)
@click.option("--port", default=8000, show_default=True, type=click.IntRange(0, 65535))
@click.option("--once", is_flag=True, hidden=True, help="Build, serve one poll cycle, stop.")
@click.option("--jobs", "-j", default=1, show_default=True, type=click.IntRange(1, 64),
              help="Processes for the analysis and rendering.")
@click.option("--no-cache", is_flag=True, help="Neither read nor write the build cache.")
def preview(directory: Path, out: Path, profile: str, port: int, once: bool, jobs: int,
            no_cache: bool) -> None:
    """Build, serve the site on 127.0.0.1 and rebuild when a source file changes."""
    from .preview import serve

    _run(lambda: serve(directory, out, profile, port, once=once, say=lambda m: err.print(
        m, markup=False), jobs=jobs, use_cache=not no_cache))


if __name__ == "__main__":  # pragma: no cover
    main(prog_name=os.path.basename(sys.argv[0]) or "atlas")

