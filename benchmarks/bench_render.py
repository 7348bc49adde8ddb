"""Benchmark: our render of every page context against a bare Jinja render of the same.

Plans an atlas (default: a synthetic one of 200 objects x 150 characters x 100 trees written by
``make_synthetic.py``; or ``--atlas DIR``), then times, in one run and one process:

- ours: ``atlas.site.render.render_all`` over every page context (the environment with its
  translations, ``render_page``'s extra values: JSON-LD, navigation, language switch);
- bare: a plain ``jinja2.Environment`` over the same template folders, with autoescape and
  the i18n extension (null translations), rendering each template with the same context and
  the values the templates need, computed once beforehand.

and prints the ratio ours / bare. Target: at most 3x.

Run: ``.venv/bin/python benchmarks/bench_render.py [--atlas DIR] [--repeat 3]``
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import jinja2

sys.path.insert(0, str(Path(__file__).resolve().parent))
from make_synthetic import make_synthetic  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--atlas", type=Path)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()

    from atlas import __version__
    from atlas.analysis.results import analyse
    from atlas.build import load
    from atlas.i18n import number_filters, translator
    from atlas.site import downloads
    from atlas.site.languages import language_links, localise
    from atlas.site.plan import plan_site
    from atlas.site.render import SiteInfo, find_theme, render_all
    from atlas.site.views import root_of

    with tempfile.TemporaryDirectory() as tmp:
        source = args.atlas or make_synthetic(Path(tmp) / "src", 200, 150, 100)
        atlas = load(source)
        lang = atlas.config.languages[0]
        atlas = localise(atlas, lang, translator(lang))
        plan = plan_site(atlas, analyse(atlas, jobs=2))
    theme = find_theme(atlas.config.theme)
    site = SiteInfo(title=atlas.config.title, licence=atlas.config.licence, nav=plan.nav,
                    kiosk=False, idle_seconds=120, language=lang,
                    generator=f"lineage atlas builder {__version__}")

    bare = jinja2.Environment(
        loader=jinja2.FileSystemLoader([str(f / "templates") for f in theme.folders]),
        autoescape=True, undefined=jinja2.StrictUndefined, trim_blocks=True,
        lstrip_blocks=True, keep_trailing_newline=True, extensions=["jinja2.ext.i18n"])
    bare.install_null_translations(newstyle=True)
    bare.filters.update(number_filters(lang))  # the templates' number filters
    contexts = []
    for page in plan.pages:
        root = root_of(page.path)
        contexts.append((page.template, {
            "page": page.context, "root": root, "site": site, "path": page.path,
            "jsonld": downloads.jsonld(page, site), "scripts": [root + s for s in page.scripts],
            "nav": [{"label": label, "href": root + href, "current": href == page.path}
                    for label, href in site.nav],
            "languages": language_links(site, page.path) if len(site.languages) > 1 else [],
        }))

    ours_best = bare_best = float("inf")
    for _ in range(args.repeat):
        t = time.perf_counter()
        render_all(theme, site, plan.pages)
        ours_best = min(ours_best, time.perf_counter() - t)
        t = time.perf_counter()
        for template, context in contexts:
            bare.get_template(template).render(**context)
        bare_best = min(bare_best, time.perf_counter() - t)
    n = len(plan.pages)
    print(f"{n} pages: ours {ours_best:.2f} s ({1000 * ours_best / n:.1f} ms a page), bare Jinja "
          f"{bare_best:.2f} s; ratio {ours_best / bare_best:.2f}x (target at most 3x)")


if __name__ == "__main__":
    main()
