"""The pipeline, top to bottom: ``write(render(plan(analyse(link(load(config))))))``, then audit.

Each stage takes the previous stage's value and returns its own; only :func:`write_site`
touches the disk, and it does so last, after the audit has passed, so a failing build leaves
the previous site exactly as it was.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

from . import __version__
from .audit import audit_leaks, audit_links
from .config import Config, load_config
from .errors import AtlasError, Problem, Problems
from .link import link
from .model import Atlas
from .site.writer import check_output, write_site
from .sources.load import load_sources

if TYPE_CHECKING:
    from .analysis.results import Results
    from .site.plan import SitePlan

Step = Callable[[str], None]


def _quiet(_: str) -> None:
    pass


@dataclass(frozen=True)
class BuildReport:
    out: Path
    pages: int
    files: int
    warnings: list[Problem] = field(default_factory=list)


def load(root: Path | str, profile: str = "public", step: Step = _quiet) -> Atlas:
    """Read and link an atlas source folder (the first two stages)."""
    step("Reading atlas.toml")
    config = load_config(root)
    return load_config_atlas(config, profile, step)


def load_config_atlas(config: Config, profile: str = "public", step: Step = _quiet) -> Atlas:
    problems = Problems()
    chosen = config.profile(profile)
    step("Reading sources")
    sources = load_sources(config, problems)
    step("Linking objects, characters, places and notes")
    return link(sources, chosen, problems)


def render(atlas: Atlas, results: Results,
           step: Step = _quiet) -> tuple[SitePlan, dict[str, bytes]]:
    """Plan and render every page; return the plan and all generated files as bytes."""
    from .site.plan import plan_site
    from .site.render import SiteInfo, find_theme, render_site

    step("Planning pages")
    plan = plan_site(atlas, results)
    theme = find_theme("kiosk" if atlas.profile.kiosk else atlas.config.theme)
    site = SiteInfo(
        title=atlas.config.title, licence=atlas.config.licence, nav=plan.nav,
        kiosk=atlas.profile.kiosk, idle_seconds=atlas.profile.idle_seconds,
        language=atlas.config.languages[0], generator=f"lineage atlas builder {__version__}",
    )
    step(f"Rendering {len(plan.pages)} pages")
    html = render_site(plan, theme, site)
    files: dict[str, bytes] = {path: text.encode("utf-8") for path, text in html.items()}
    files.update({path: text.encode("utf-8") for path, text in plan.data.items()})
    files.update({path: text.encode("utf-8") for path, text in plan.files.items()})
    files.update(plan.media)
    for folder in reversed(theme.asset_folders):  # a child theme's assets win
        for asset in sorted(folder.rglob("*")):
            if asset.is_file():
                files[f"assets/{asset.relative_to(folder).as_posix()}"] = asset.read_bytes()
    return plan, files


def build(root: Path | str, out: Path | str | None = None, profile: str = "public", *,
          links: str = "error", step: Step = _quiet) -> BuildReport:
    """Build the site for ``profile`` into ``out`` (default: ``build`` in the current folder).

    ``links="warn"`` reports broken internal links as warnings instead of failing the build.
    """
    root = Path(root)
    out = Path(out) if out is not None else Path("build")
    step("Reading atlas.toml")
    config = load_config(root)
    check_output(out, config.root)  # refuse a dangerous --out before any work
    atlas = load_config_atlas(config, profile, step)
    # Imported here: SciPy and the site modules load in seconds, and bad input should be
    # reported before paying for them.
    from .analysis.results import analyse

    step("Analysing: summary tree, support, parsimony, likelihood")
    results = analyse(atlas)
    plan, files = render(atlas, results, step)
    step("Auditing links and withheld material")
    all_files = dict(files)
    all_files.update({p: b"" for p in plan.copies})
    leaks = audit_leaks({**files, **{p: src.read_bytes() for p, src in plan.copies.items()
                                     if not p.startswith("assets/")}}, atlas.withheld_text)
    if leaks:
        raise AtlasError(leaks)
    link_problems = audit_links(all_files)
    warnings = list(atlas.warnings)
    if link_problems:
        if links == "error":
            raise AtlasError(link_problems)
        warnings += [Problem(p.file, p.line, p.message, p.hint, "warning") for p in link_problems]
    step(f"Writing {len(files) + len(plan.copies)} files to {out}")
    write_site(files, plan.copies, out, config.root)
    return BuildReport(out, len(plan.pages), len(files) + len(plan.copies), warnings)
