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
from .audit import audit_budget, audit_leaks, audit_links, audit_plotly, digest_files, page_weights
from .cache import Cache
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
    largest: list[tuple[str, int]] = field(default_factory=list)  # (page, bytes), largest first


def load(root: Path | str, profile: str = "public", step: Step = _quiet) -> Atlas:
    """Read and link an atlas source folder (the first two stages)."""
    step("Reading atlas.toml")
    config = load_config(root)
    return load_config_atlas(config, profile, step)


def load_config_atlas(config: Config, profile: str = "public", step: Step = _quiet,
                      cache: Cache | None = None) -> Atlas:
    problems = Problems()
    chosen = config.profile(profile)
    step("Reading sources")
    sources = load_sources(config, problems, cache)
    step("Linking objects, characters, places and notes")
    return link(sources, chosen, problems)


def render(atlas: Atlas, results: Results, step: Step = _quiet, *, jobs: int = 1,
           cache: Cache | None = None) -> tuple[SitePlan, dict[str, bytes]]:
    """Plan and render every page in every language (the default at the root, the others
    under ``<lang>/``); return the plan and all generated files as bytes.

    Pages render in ``jobs`` processes; unchanged pages come from ``cache`` (the output is
    byte for byte the same either way)."""
    from .site.languages import render_languages
    from .site.render import SiteInfo

    def make_site(plan: SitePlan, lang: str, languages, prefix: str) -> SiteInfo:
        return SiteInfo(
            title=atlas.config.title, licence=atlas.config.licence, nav=plan.nav,
            kiosk=atlas.profile.kiosk, idle_seconds=atlas.profile.idle_seconds,
            language=lang, generator=f"lineage atlas builder {__version__}",
            languages=languages, prefix=prefix,
        )

    return render_languages(atlas, results, step, make_site, jobs=jobs, cache=cache,
                            cache_label=atlas.profile.name)


def build(root: Path | str, out: Path | str | None = None, profile: str = "public", *,
          links: str = "error", step: Step = _quiet, jobs: int = 1,
          use_cache: bool = True) -> BuildReport:
    """Build the site for ``profile`` into ``out`` (default: ``build`` in the current folder).

    ``links="warn"`` reports broken internal links as warnings instead of failing the build.
    ``jobs`` processes share the analysis over the sample and the rendering; the output is the
    same for any number. ``use_cache=False`` (or ``cache = false`` in atlas.toml) neither reads
    nor writes the on-disk cache (:mod:`atlas.cache`).
    """
    root = Path(root)
    out = Path(out) if out is not None else Path("build")
    step("Reading atlas.toml")
    config = load_config(root)
    check_output(out, config.root)  # refuse a dangerous --out before any work
    cache = Cache.for_source(config.root, use_cache and config.cache)
    atlas = load_config_atlas(config, profile, step, cache)
    # Imported here: SciPy and the site modules load in seconds, and bad input should be
    # reported before paying for them.
    from .analysis.results import analyse

    step("Analysing: summary tree, support, parsimony, likelihood")
    results = analyse(atlas, jobs=jobs, cache=cache)
    from .site.markdown import kept_conversions

    with kept_conversions(cache):
        plan, files = render(atlas, results, step, jobs=jobs, cache=cache)
    step("Auditing links, withheld material and page weight")
    all_files = dict(files)
    all_files.update({p: b"" for p in plan.copies})
    digests = digest_files(files) if cache.enabled else {}  # shared by the audits below
    leaks = audit_leaks({**files, **{p: src.read_bytes() for p, src in plan.copies.items()
                                     if not p.startswith("assets/")}}, atlas.withheld_text,
                        cache, digests)
    if leaks:
        raise AtlasError(leaks)
    link_problems = audit_links(all_files, cache, jobs, digests)
    weight = audit_budget(files, config.page_budget) + audit_plotly(files)
    if weight:
        raise AtlasError(weight)
    warnings = list(atlas.warnings)
    if link_problems:
        if links == "error":
            raise AtlasError(link_problems)
        warnings += [Problem(p.file, p.line, p.message, p.hint, "warning") for p in link_problems]
    step(f"Writing {len(files) + len(plan.copies)} files to {out}")
    write_site(files, plan.copies, out, config.root)
    return BuildReport(out, len(plan.pages), len(files) + len(plan.copies), warnings,
                       page_weights(files))
