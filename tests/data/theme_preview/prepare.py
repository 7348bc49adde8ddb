"""Put the theme's assets, plotly.js and the world outlines beside the preview pages.

Run ``.venv/bin/python tests/data/theme_preview/prepare.py`` from the repository root, then
open ``tests/data/theme_preview/index.html`` in a browser (file:// works). The copied files are
listed in this folder's .gitignore.
"""

from __future__ import annotations

import hashlib
import json
import random
import shutil
from pathlib import Path

import plotly

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[2]


def prepare() -> None:
    assets = HERE / "assets"
    assets.mkdir(exist_ok=True)
    for source in sorted((REPO / "themes" / "default" / "assets").iterdir()):
        if source.is_file():
            shutil.copyfile(source, assets / source.name)
    plotly_js = Path(plotly.__file__).parent / "package_data" / "plotly.min.js"
    shutil.copyfile(plotly_js, assets / "plotly.min.js")
    world = json.loads((REPO / "atlas" / "basemaps" / "world_110m.json").read_text("utf-8"))
    (HERE / "data" / "world.js").write_text(
        "window.PlotlyGeoAssets = window.PlotlyGeoAssets || {topojson: {}};\n"
        'window.PlotlyGeoAssets.topojson["world_110m"] = '
        + json.dumps(world, separators=(",", ":"))
        + ";\n",
        encoding="utf-8",
    )
    (HERE / "data" / "tree-large.js").write_text(
        "window.AtlasData = window.AtlasData || {};\nwindow.AtlasData.tree = "
        + json.dumps(large_tree(300), separators=(",", ":"))
        + ";\n",
        encoding="utf-8",
    )


def large_tree(tips: int, seed: int = 1) -> dict:
    """An invented random tree of ``tips`` objects in the data/tree.js layout, for trying the
    script on a big study: tips joined at random (seeded), ages in years, dated tips."""
    rng = random.Random(seed)
    nodes: list[dict] = []
    members: list[list[str]] = []
    pool = []
    for i in range(tips):
        ident = f"lamp-{i + 1:03d}"
        nodes.append(
            {
                "id": ident,
                "kind": "tip",
                "parent": -1,
                "label": f"Invented lamp {i + 1}",
                "href": f"objects/{ident}.html",
                "support": None,
                "withheld": False,
            }
        )
        members.append([ident])
        pool.append(i)
    while len(pool) > 1:
        a, b = rng.sample(pool, 2)
        pool.remove(a)
        pool.remove(b)
        ids = sorted(members[a] + members[b])
        node_id = "n-" + hashlib.sha1(" ".join(ids).encode()).hexdigest()[:10]
        nodes.append(
            {
                "id": node_id,
                "kind": "node",
                "parent": -1,
                "label": f"Clade of {len(ids)}",
                "href": f"nodes/{node_id}.html",
                "support": round(rng.uniform(0.3, 1), 2),
                "withheld": False,
            }
        )
        members.append(ids)
        nodes[a]["parent"] = nodes[b]["parent"] = len(nodes) - 1
        pool.append(len(nodes) - 1)
    # depth from the root (root last: parents come after children), then tip slots in order
    depth = [0.0] * len(nodes)
    for i in range(len(nodes) - 2, -1, -1):
        depth[i] = depth[nodes[i]["parent"]] + rng.uniform(5, 60)
    children: dict[int, list[int]] = {}
    for i, n in enumerate(nodes):
        children.setdefault(n["parent"], []).append(i)
    order: list[int] = []
    stack = [len(nodes) - 1]
    while stack:
        i = stack.pop()
        order.append(i)
        stack.extend(reversed(children.get(i, [])))
    slot = 0
    for i in order:
        if nodes[i]["kind"] == "tip":
            nodes[i]["y"] = slot
            slot += 1
    for i, n in enumerate(nodes):
        n["x"] = round(depth[i], 3)
        if n["kind"] == "node":
            n["y"] = sum(nodes[c]["y"] for c in children[i]) / len(children[i])
    return {
        "nodes": nodes,
        "x_title": "Years before the youngest object",
        "x_axis": "age",
        "outgroup": [],
    }


if __name__ == "__main__":
    prepare()
