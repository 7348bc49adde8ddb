"""The interactive lineage tree in headless Chromium: clicks, shading, search, collapse, layout.

The site is the starter atlas (invented carved spoons) with a contacts table added, built with
the tree data hooked into the plan the way ``atlas/site/plan.py`` does it (applied again here,
harmlessly, if the plan already does). What the reader sees is read from plotly's own figure
(``gd.data``: one trace per colour class, each tagged with ``meta``) and from the page's
``aria-live`` region.
"""

from __future__ import annotations

import os
import random
import re
import shutil
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pytest

from atlas.build import build as build_site
from atlas.site.figures import tree_layout
from atlas.site.overview import layout_data
from atlas.site.plan import js_global, plotly_js
from atlas.sources.trees import parse_newick
from atlas.starter import FILES as STARTER

from ..conftest import write_atlas

pytestmark = pytest.mark.browser

CONTACTS = "from,to,characters,note\nspoon-c,hooked,hook,Copied the hook (invented).\n"
# Okabe & Ito (2008) orange and sky blue, the first two state colours (from memory).
STATE_RGB = {"rgba(230,159,0,", "rgba(86,180,233,"}


@pytest.fixture(scope="module")
def tree_site(tmp_path_factory):
    files = dict(STARTER)
    files["contacts.csv"] = CONTACTS
    files["atlas.toml"] = files["atlas.toml"].replace(
        'gazetteer = "places.csv"', 'gazetteer = "places.csv"\ncontacts = "contacts.csv"')
    folder = tmp_path_factory.mktemp("tree-site")
    source = write_atlas(folder / "src", files)
    out = folder / "site"
    build_site(source, out)  # plan_site adds the tree controls and data files
    return out


CHROMIUM = Path("/usr/bin/chromium")


@pytest.fixture(scope="module")
def browser():
    """Headless Debian Chromium (never a downloaded one); skip with the reason without it."""
    reason = ""
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        reason = "Playwright for Python is not installed"
    if not reason and not CHROMIUM.is_file():
        reason = f"no Chromium at {CHROMIUM}"
    if reason:
        if os.environ.get("CI") == "true":
            pytest.fail(f"CI=true but the browser tests cannot run: {reason}")
        pytest.skip(reason)
    with sync_playwright() as driver:
        b = driver.chromium.launch(executable_path=str(CHROMIUM), headless=True,
                                   args=["--no-sandbox", "--disable-gpu"])
        yield b
        b.close()


@dataclass
class Tab:
    """One page; records script errors and any request that leaves the built site."""

    page: object
    site: Path
    errors: list[str] = field(default_factory=list)

    def open(self, url: str) -> None:
        self.page.goto(url, wait_until="load")
        self.page.wait_for_function(
            "() => { const d = document.getElementById('lineage-tree'); return d && "
            "(d.classList.contains('plot-unavailable') || d.closest('figure.has-plot')); }",
            timeout=15_000)
        assert self.page.evaluate(
            "() => !document.getElementById('lineage-tree').classList"
            ".contains('plot-unavailable')")

    def tree_page(self) -> None:
        """The tree page in its first state: loaded once, then put back with the reset button
        (each load parses plotly again, which is slow on a busy machine)."""
        url = (self.site / "tree.html").as_uri()
        if self.page.url != url:
            self.open(url)
            return
        self.page.click("#tree-controls button[type=reset]")
        self.page.wait_for_timeout(100)
        self.page.evaluate("() => new Promise(r => requestAnimationFrame(() => r()))")


@pytest.fixture(scope="module")
def tab(browser, tree_site):
    context = browser.new_context(viewport={"width": 1200, "height": 900})
    page = context.new_page()
    t = Tab(page, tree_site)
    inside = tree_site.as_uri() + "/"
    page.on("console", lambda m: m.type == "error" and t.errors.append(m.text))
    page.on("pageerror", lambda exc: t.errors.append(str(exc)))
    page.on("request", lambda r: r.url.startswith((inside, "data:", "blob:", "about:"))
            or t.errors.append(f"request outside the site: {r.url}"))
    yield t
    context.close()
    assert t.errors == []


def _traces(tab) -> list[dict]:
    return tab.page.evaluate("""() => document.getElementById('lineage-tree').data.map(t => ({
        meta: t.meta || '', name: t.name || '', colour: (t.line && t.line.color) || '',
        n: (t.x || []).filter(v => v !== null).length, text: t.text || []}))""")


def _wait_redraw(tab) -> None:
    tab.page.wait_for_timeout(150)  # one animation frame, then plotly's react
    tab.page.evaluate("() => new Promise(r => requestAnimationFrame(() => r()))")


def _click_marker(tab, meta: str, pattern: str) -> str:
    """Move onto the first marker of the trace tagged ``meta`` whose link matches; click it."""
    point = tab.page.evaluate("""([meta, pattern]) => {
      const gd = document.getElementById('lineage-tree');
      const t = gd.data.findIndex(tr => tr.meta === meta);
      const trace = gd.querySelectorAll('.scatterlayer .trace')[t];
      for (const el of trace.querySelectorAll('path.point')) {
        const href = gd.data[t].customdata[el.__data__.i];
        if (href && new RegExp('^' + pattern + '$').test(href)) {
          el.scrollIntoView({block: 'center', behavior: 'instant'});
          const r = el.getBoundingClientRect();
          return {href: href, x: r.left + r.width / 2, y: r.top + r.height / 2};
        }
      }
      return null;
    }""", [meta, pattern])
    assert point, f"no {meta} marker links to {pattern}"
    tab.page.mouse.move(point["x"], point["y"])
    tab.page.wait_for_timeout(100)
    with tab.page.expect_navigation(timeout=10_000):
        tab.page.mouse.click(point["x"], point["y"])
    return point["href"]


def test_shading_by_a_trait_changes_branch_colours(tab, tree_site):
    tab.tree_page()
    assert tab.page.is_visible("#tree-controls")
    before = {t["colour"] for t in _traces(tab) if t["meta"] == "branches"}
    assert len(before) == 1 and not any(c.startswith(tuple(STATE_RGB)) for c in before)
    tab.page.select_option("#tree-shade", "hook")
    _wait_redraw(tab)
    after = {t["colour"] for t in _traces(tab) if t["meta"] == "branches"}
    assert after != before
    assert any(c.startswith(tuple(STATE_RGB)) for c in after)
    legend = tab.page.text_content("#lineage-tree .legend")
    assert "state 0" in legend and "state 1" in legend  # a key for every colour
    # the state select now offers each state and the changes per branch of this trait
    options = tab.page.eval_on_selector_all("#tree-state option", "os => os.map(o => o.value)")
    assert options == ["most", "p0", "p1", "changes"]
    tab.page.select_option("#tree-state", "changes")
    _wait_redraw(tab)
    graded = {t["colour"] for t in _traces(tab) if t["meta"] == "branches"}
    assert graded != after and "changes" in tab.page.text_content("#lineage-tree .legend")


def test_search_highlights_the_path_and_announces_it(tab, tree_site):
    tab.tree_page()
    tab.page.fill("#tree-find", "straight handle")
    tab.page.click("#tree-controls button[type=submit]")
    _wait_redraw(tab)
    status = tab.page.text_content("#tree-find-status")
    assert status.startswith("Found Spoon with straight handle")
    assert tab.page.get_attribute("#tree-find-status", "aria-live") == "polite"
    path = [t for t in _traces(tab) if t["meta"] == "found-path"]
    assert path and path[0]["n"] >= 3  # at least one elbow to the root
    tab.page.fill("#tree-find", "no such spoon")
    tab.page.click("#tree-controls button[type=submit]")
    _wait_redraw(tab)
    assert tab.page.text_content("#tree-find-status").startswith("No object matches")
    assert not [t for t in _traces(tab) if t["meta"] == "found-path"]


def test_collapse_radial_and_contacts(tab, tree_site):
    tab.tree_page()
    assert next(t for t in _traces(tab) if t["meta"] == "contacts")["n"] > 0
    tab.page.fill("#tree-collapse", "1")
    tab.page.dispatch_event("#tree-collapse", "input")
    _wait_redraw(tab)
    traces = _traces(tab)
    labels = [t for t in traces if t["meta"] == "collapsed-labels"]
    assert labels and all(re.fullmatch(r"\d+ objects", x) for x in labels[0]["text"])
    assert tab.page.text_content("#tree-collapse-value") == "1.00"
    tab.page.select_option("#tree-layout", "radial")
    _wait_redraw(tab)
    assert tab.page.evaluate("() => document.getElementById('lineage-tree').dataset.layout") \
        == "radial"
    assert tab.page.evaluate(
        "() => document.getElementById('lineage-tree').layout.xaxis.visible") is False


@pytest.mark.parametrize("meta, pattern, body", [
    ("tips", r"objects/[^/]+\.html", "page-object"),
    ("nodes", r"nodes/n-[0-9a-f]{10}\.html", "page-node"),
])
def test_clicking_opens_the_page(tab, tree_site, meta, pattern, body):
    tab.open((tree_site / "tree.html").as_uri())
    href = _click_marker(tab, meta, pattern)
    assert tab.page.url == (tree_site / href).as_uri()
    assert body in tab.page.evaluate("() => document.body.className")


def test_character_page_draws_the_shared_tree_shaded(tab, tree_site):
    tab.open((tree_site / "characters" / "bowl.html").as_uri())
    shade = tab.page.evaluate("() => document.getElementById('lineage-tree').dataset.shade")
    assert shade == "bowl:most"
    colours = {t["colour"] for t in _traces(tab) if t["meta"] == "branches"}
    assert any(c.startswith(tuple(STATE_RGB)) for c in colours)


def test_without_javascript_the_static_figure_and_no_controls(browser, tree_site):
    context = browser.new_context(java_script_enabled=False)
    try:
        page = context.new_page()
        page.goto((tree_site / "tree.html").as_uri())
        assert not page.is_visible("#tree-controls")
        assert page.is_visible(".plot-fallback img")
    finally:
        context.close()


# ---- A large tree: tips and forks drawn without an element per point -------------------------

LARGE_TIPS = 400  # above tree.js's MANY_TIPS (300)
THEME_TREE_JS = Path(__file__).resolve().parents[2] / "themes" / "default" / "assets" / "tree.js"
LARGE_PAGE = """<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>Large tree (invented)</title></head>
<body data-root=""><figure><div id="lineage-tree" style="height:600px"></div></figure>
<script src="plotly.min.js"></script><script src="tree-data.js"></script>
<script src="tree-view.js"></script></body></html>
"""


@pytest.fixture(scope="module")
def large_tree(tmp_path_factory):
    """A page with an invented random tree of 400 tips (random pairs joined, seeded) and
    a stub page behind every link, drawn by the theme's tree.js."""
    rng = random.Random(5)
    parts = [f"t{i:03d}" for i in range(LARGE_TIPS)]
    while len(parts) > 1:
        a = parts.pop(rng.randrange(len(parts)))
        b = parts.pop(rng.randrange(len(parts)))
        parts.append(f"({a}:{rng.random():.3f},{b}:{rng.random():.3f})")
    tree = parse_newick(parts[0] + ";")
    ids = [tree.taxa[tree.tip[v]] if tree.tip[v] >= 0 else f"n-{v:010x}"
           for v in range(tree.n_nodes)]
    hrefs = [f"objects/{i}.html" if i.startswith("t") else f"nodes/{i}.html" for i in ids]
    labels = [f"Invented object {i}" if i.startswith("t") else "Clade" for i in ids]
    support = [float("nan") if i.startswith("t") else 0.9 for i in ids]
    layout, use_lengths = tree_layout(tree, ids, labels, hrefs, np.array(support))
    folder = tmp_path_factory.mktemp("large-tree")
    (folder / "tree-data.js").write_text(js_global("tree", layout_data(layout, use_lengths, [])))
    shutil.copy(plotly_js(), folder / "plotly.min.js")
    shutil.copy(THEME_TREE_JS, folder / "tree-view.js")
    (folder / "tree.html").write_text(LARGE_PAGE)
    for sub in ("objects", "nodes"):
        (folder / sub).mkdir()
    for href in hrefs:
        (folder / href).write_text(f'<!doctype html><title>{href}</title><body class="stub">')
    return folder


# The pixel position of point i of the trace tagged `meta`, from plotly's axis scales.
_POINT_AT = """([meta, i]) => {
  const gd = document.getElementById('lineage-tree');
  const t = gd.data.find((tr) => tr.meta === meta);
  const full = gd._fullLayout;
  const at = () => {
    const box = gd.getBoundingClientRect();
    return [box.left + full._size.l + full.xaxis.l2p(t.x[i]),
            box.top + full._size.t + full.yaxis.l2p(t.y[i])];
  };
  window.scrollBy({top: at()[1] - window.innerHeight / 2, behavior: 'instant'});
  return {xy: at(), href: t.customdata[i]};
}"""

# The radius in pixels of the first disc of the tips' link-coloured shape (the largest shape
# whose fill is not none), from the first vertex of its path and the tip it surrounds.
_DISC_RADIUS = """() => {
  const gd = document.getElementById('lineage-tree');
  const full = gd._fullLayout;
  const tips = gd.data.find((t) => t.meta === 'tips');
  const discs = gd.layout.shapes.filter((s) => s.fillcolor).sort(
    (a, b) => b.path.length - a.path.length)[0];
  const first = discs.path.split('Z')[0].slice(1).split('L').map((p) => p.split(',').map(Number));
  const cx = first.reduce((s, p) => s + p[0], 0) / first.length;
  const cy = first.reduce((s, p) => s + p[1], 0) / first.length;
  const dx = (first[0][0] - cx) * full.xaxis._m;
  const dy = (first[0][1] - cy) * full.yaxis._m;
  return {r: Math.hypot(dx, dy), discs: discs.path.split('Z').length - 1,
          tips: tips.x.length, modes: gd.data.filter((t) => t.meta === 'tips' ||
          t.meta === 'nodes').map((t) => t.mode),
          points: gd.querySelectorAll('.scatterlayer path.point').length};
}"""


def test_large_tree_draws_tips_as_one_shape_and_still_answers(browser, large_tree):
    context = browser.new_context(viewport={"width": 1200, "height": 900})
    errors: list[str] = []
    try:
        page = context.new_page()
        page.on("pageerror", lambda exc: errors.append(str(exc)))
        page.goto((large_tree / "tree.html").as_uri())
        page.wait_for_selector("figure.has-plot", timeout=30_000)
        info = page.evaluate(_DISC_RADIUS)
        # tips and forks answer hover and clicks without markers; the discs are one shape
        assert info["modes"] == ["none", "none"] and info["tips"] == LARGE_TIPS
        assert info["discs"] == LARGE_TIPS and info["points"] == 0
        # 4.25 px: the radius of a size-7 marker with its 1.5 px outline (tree.js)
        assert abs(info["r"] - 4.25) < 0.5
        point = page.evaluate(_POINT_AT, ["tips", 7])
        page.mouse.move(point["xy"][0] - 30, point["xy"][1] - 30)
        page.mouse.move(*point["xy"])
        page.wait_for_selector("#lineage-tree .hoverlayer .hovertext", timeout=10_000)
        assert "Invented object" in page.text_content("#lineage-tree .hoverlayer")
        page.wait_for_timeout(150)
        with page.expect_navigation(timeout=10_000):
            page.mouse.click(*point["xy"])
        assert page.url == (large_tree / point["href"]).as_uri()
        page.go_back()
        page.wait_for_selector("figure.has-plot", timeout=30_000)
        point = page.evaluate(_POINT_AT, ["nodes", 5])
        page.mouse.move(point["xy"][0] + 20, point["xy"][1])
        page.mouse.move(*point["xy"])
        page.wait_for_timeout(150)
        with page.expect_navigation(timeout=10_000):
            page.mouse.click(*point["xy"])
        assert page.url == (large_tree / point["href"]).as_uri()
        page.go_back()
        page.wait_for_selector("figure.has-plot", timeout=30_000)
        # a zoom redraws the discs at the same size in pixels
        page.evaluate("""async () => { const gd = document.getElementById('lineage-tree');
          const r = gd.layout.xaxis.range; const y = gd.layout.yaxis.range;
          await Plotly.relayout(gd, {'xaxis.range': [r[0], (r[0] + r[1]) / 3],
                                     'yaxis.range': [y[0] / 4, y[1]]}); }""")
        page.wait_for_timeout(500)
        assert abs(page.evaluate(_DISC_RADIUS)["r"] - 4.25) < 0.5
        assert errors == []
    finally:
        context.close()
