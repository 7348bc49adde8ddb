"""Cost of the state maps, clade outlines and methods figures on a synthetic atlas.

EVERYTHING IT BUILDS IS INVENTED (benchmarks/make_synthetic.py). Prints, for the atlas given
(default: 1,000 objects x 500 characters x 100 trees, generated into a temporary folder):

- time of each new piece of the plan stage (the layered static maps, data/matrix.js, the
  character pages' map context, the clade outlines, the methods figures) as a ratio of two
  references measured in the same run: building the character pages' existing contexts, and
  the existing static maps (``plan.static_maps``);
- bytes: the shared basemap, the overlays (total, largest, per character), data/matrix.js;
- the largest rendered character, node and methods pages, and what the distribution map
  section adds to a character page and the outline to a node page (the same page rendered
  with and without it).

The analysis is cached on disk (``atlas.cache``) in the source folder, so a second run starts
at the plan. Usage: ``.venv/bin/python benchmarks/bench_statemaps.py [SOURCE] [--objects N
--characters N --trees N]``.
"""

from __future__ import annotations

import argparse
import tempfile
import time
from dataclasses import replace
from pathlib import Path

from make_synthetic import make_synthetic

from atlas.analysis.results import analyse
from atlas.build import load
from atlas.cache import Cache
from atlas.site import overview, paging, plan, statemaps, statfigures, treedata, views
from atlas.site.figures import tree_layout
from atlas.site.render import SiteInfo, environment, find_theme, render_page


def timed(fn, *args):
    start = time.perf_counter()
    value = fn(*args)
    return value, time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("source", nargs="?", type=Path)
    parser.add_argument("--objects", type=int, default=1000)
    parser.add_argument("--characters", type=int, default=500)
    parser.add_argument("--trees", type=int, default=100)
    args = parser.parse_args()
    source = args.source
    if source is None:
        source = Path(tempfile.mkdtemp(prefix="bench-statemaps-")) / "src"
        make_synthetic(source, args.objects, args.characters, args.trees)
    atlas = load(source)
    results, t_analyse = timed(analyse, atlas, 1, Cache.for_source(source))
    print(f"atlas: {len(atlas.objects)} objects, {len(atlas.discrete)} discrete characters; "
          f"analysis {t_analyse:.1f} s (cached after the first run)")

    # References of the same kind, measured in this run: the character pages' existing
    # contexts (states, changes, ledger) and the existing static maps (map.svg, one per place).
    links = views.make_links(atlas, results)
    notes = views.clade_notes_by_node(atlas, results)
    bare, t_ref_pages = timed(lambda: [treedata.character_page_plot(
        views.character_page(atlas, results, links, c, notes), c) for c in atlas.discrete])
    _, t_ref_maps = timed(plan.static_maps, atlas, links, plan.places_data(atlas, links, results))
    view, t_view = timed(statemaps.study_view, atlas)
    rows, t_rows = timed(lambda: {c.id: statemaps.state_rows(atlas, c) for c in atlas.discrete})
    layers, t_layers = timed(statemaps.layered_files, atlas, results, links, view, rows)
    matrix, t_matrix = timed(lambda: plan.js_global("matrix", statemaps.matrix_data(atlas)))
    mapped, t_pages = timed(lambda: [statemaps.character_page_map(p, atlas, links, c, view,
                                                                  rows[c.id])
                                     for p, c in zip(bare, atlas.discrete)])
    tree = results.tree
    layout, _ = tree_layout(tree, results.ids, list(results.ids),
                            [links.nodes.get(i, "") for i in results.ids],
                            results.summary.support, set())
    internal = [v for v in range(tree.n_nodes) if tree.tip[v] < 0]
    nodes = []
    for v in internal:
        page = views.node_page(atlas, results, links, layout, v, notes)
        page = paging.paged(page, "node", "Reconstructed traits")[0]  # as plan_site does
        nodes.append((v, replace(page, scripts=overview.MAP_SCRIPTS)
                      if page.context["place_ids"] else page))
    nodes_mapped, t_nodes = timed(lambda: [statemaps.node_page_map(p, atlas, results, v, view)
                                           for v, p in nodes])
    (figures, _), t_figures = timed(statfigures.methods_figures, atlas, results)
    methods = statfigures.methods_page_figures(
        overview.methods_page(atlas, results, links, notes), figures)
    print(f"references: character page contexts {t_ref_pages:.2f} s, "
          f"existing static maps {t_ref_maps:.2f} s")
    for name, t in (("objects per state", t_rows), ("layered static maps", t_view + t_layers),
                    ("data/matrix.js", t_matrix),
                    ("character map contexts", t_pages), ("clade outlines", t_nodes),
                    ("methods figures", t_figures)):
        print(f"  {name:24s} {t:7.2f} s = {t / t_ref_pages:5.2f} x character page contexts, "
              f"{t / t_ref_maps:5.2f} x existing static maps")

    bases = (statemaps.BASEMAP, statemaps.WIDE_BASEMAP)
    overlays = {k: len(v.encode()) for k, v in layers.items() if k not in bases}
    chars = {k: v for k, v in overlays.items() if k.startswith("figures/characters/")}
    per_char = sum(chars.values()) / max(len(atlas.discrete), 1)
    print(f"basemaps {sum(len(layers.get(b, '').encode()) for b in bases) / 1024:.1f} KB; "
          f"{len(chars)} state overlays, {sum(chars.values()) / 1e6:.2f} MB in all, "
          f"largest {max(chars.values(), default=0) / 1024:.1f} KB, "
          f"{per_char / 1024:.1f} KB per character; "
          f"{len(overlays) - len(chars)} clade overlays, "
          f"{(sum(overlays.values()) - sum(chars.values())) / 1e6:.2f} MB; "
          f"data/matrix.js {len(matrix.encode()) / 1024:.0f} KB")

    env = environment(find_theme(atlas.config.theme))
    nav = [("Lineage tree", "tree.html"), ("Distribution map", "map.html")]
    site = SiteInfo(title=atlas.config.title, licence=atlas.config.licence, nav=nav,
                    kiosk=False, idle_seconds=0, language="en", generator="bench")

    def size(page) -> int:
        return len(render_page(env, page, site).encode())

    for name, pages in (("character", mapped), ("node", nodes_mapped),
                        ("methods", [methods])):
        biggest = max((size(p), p.path) for p in pages)
        print(f"largest {name} page: {biggest[0] / 1024:.1f} KB ({biggest[1]})")
    added = [size(full) - size(without) for full, without in zip(mapped, bare)]
    print(f"the distribution map section adds {min(added) / 1024:.1f} to "
          f"{max(added) / 1024:.1f} KB to a character page "
          f"(mean {sum(added) / len(added) / 1024:.1f} KB)")
    added = [size(full) - size(without) for full, (_, without) in zip(nodes_mapped, nodes)
             if "range_map" in full.context]
    print(f"the range outline adds at most {max(added) / 1024:.1f} KB to a node page")


if __name__ == "__main__":
    main()
