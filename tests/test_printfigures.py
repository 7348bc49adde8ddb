"""Print figures (``atlas figures``): SVG that parses, is sized for a page and says what it shows.

Built from the starter atlas (invented carved spoons). Expected values come from outside the
code under test: the pie geometry from the closed form (slice k spans 2 pi p_k), the state
colours from the published Okabe & Ito (2008) palette, the branch states from numpy's argmax
of the reconstruction, and rendering from headless Chromium.
"""

from __future__ import annotations

import importlib.util
import math
import os
import re
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

from atlas.analysis.results import analyse
from atlas.build import load
from atlas.errors import AtlasError
from atlas.figures import _inside, figure_layout, write_figures
from atlas.site.printfigures import STATE_COLOURS, pie_slices

from .conftest import write_atlas

SVG = "{http://www.w3.org/2000/svg}"
# Okabe & Ito (2008), the seven colours of their palette (from memory of the published hex
# values: orange, sky blue, bluish green, yellow, blue, vermillion, reddish purple).
OKABE_ITO = {"#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7"}
CHROMIUM = Path("/usr/bin/chromium")


@pytest.fixture(scope="module")
def figures(tmp_path_factory):
    from atlas.starter import FILES

    files = dict(FILES)
    files["objects/spoon-b.md"] = files["objects/spoon-b.md"].replace("access: public",
                                                                      "access: restricted")
    root = tmp_path_factory.mktemp("figs")
    source = write_atlas(root / "src", files)
    out = root / "out"
    paths = write_figures(source, out, ["bowl", "hook"], "public")
    a = load(source)
    return source, out, paths, a, analyse(a)


def _slice_ends(d: str) -> tuple[float, ...]:
    """Centre, start and end of a slice path ``M cx,cy L x0,y0 A r,r 0 large,1 x1,y1 Z``."""
    n = [float(x) for x in re.findall(r"-?\d+(?:\.\d+)?", d)]
    return n[0], n[1], n[2], n[3], n[-2], n[-1]


def test_pie_slices_quarter_turn():
    # (invented case) probabilities 0.25 and 0.75 at the origin, radius 1: the first slice is
    # a quarter turn clockwise from twelve o'clock, (0, -1) to (1, 0) (closed form)
    (k0, d0), (k1, d1) = pie_slices(0, 0, 1, np.array([0.25, 0.75]))
    assert (k0, k1) == (0, 1)
    assert d0 == "M0.00,0.00L0.00,-1.00A1.00,1.00 0 0,1 1.00,0.00Z"
    assert d1 == "M0.00,0.00L1.00,0.00A1.00,1.00 0 1,1 0.00,-1.00Z"


def test_pie_slices_full_and_empty_shares():
    # (invented case) one state certain: one full circle, the empty shares left out
    slices = pie_slices(5, 5, 2, np.array([0.0, 1.0, 0.0]))
    assert [k for k, _ in slices] == [1]
    assert slices[0][1].startswith("M3.00,5.00a2.00,2.00")


def test_files_and_page_geometry(figures):
    _, out, paths, _, _ = figures
    names = [p.name for p in paths if p.suffix == ".svg"]
    assert names == ["tree.svg", "tree-bowl-pies.svg", "tree-bowl-states.svg",
                     "tree-hook-pies.svg", "tree-hook-states.svg"]
    assert sorted(p.name for p in out.iterdir()) == sorted(p.name for p in paths)
    for path in paths:
        if path.suffix != ".svg":
            continue
        root = ET.parse(path).getroot()  # parses as XML
        assert root.tag == f"{SVG}svg"
        title = root.find(f"{SVG}title")
        assert title is not None and title.text
        assert root.get("width") == "17.00cm"
        _, _, vw, _ = (float(x) for x in root.get("viewBox").split())
        assert vw / 17.0 == pytest.approx(96 / 2.54, rel=1e-3)  # 96 px per inch, 2.54 cm
        # text of 9.5 pt is 9.5 * 96 / 72 px (CSS units: 72 pt and 96 px per inch)
        assert float(root.get("font-size")) == pytest.approx(9.5 * 96 / 72, abs=0.01)


def test_png_only_with_a_converter(figures):
    _, _, paths, _, _ = figures
    pngs = [p for p in paths if p.suffix == ".png"]
    if importlib.util.find_spec("cairosvg") is None:
        assert pngs == []
    else:
        assert len(pngs) == 5 and all(p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" for p in pngs)


def test_pies_follow_the_reconstruction(figures):
    _, out, _, a, r = figures
    c = next(c for c in a.discrete if c.id == "bowl")
    root = ET.parse(out / "tree-bowl-pies.svg").getroot()
    pies = root.findall(f".//{SVG}g[@class='pie']")
    internal = [v for v in range(r.tree.n_nodes) if r.tree.tip[v] < 0]
    assert len(pies) == len(internal)
    for g in pies:
        v = int(g.get("data-node"))
        probs = r.probs[v, c.column, :len(c.symbols)]
        probs = probs / probs.sum()
        drawn = {}
        for path in g.findall(f"{SVG}path"):
            assert path.get("fill") in OKABE_ITO
            d = path.get("d")
            s = int(path.get("data-state"))
            assert path.get("fill") == STATE_COLOURS[s]
            if "a" in d:  # a full circle
                drawn[s] = 1.0
                continue
            cx, cy, x0, y0, x1, y1 = _slice_ends(d)
            a0 = math.atan2(x0 - cx, cy - y0)  # clockwise from twelve o'clock
            a1 = math.atan2(x1 - cx, cy - y1)
            share = ((a1 - a0) % (2 * math.pi)) / (2 * math.pi)
            drawn[s] = share if share > 1e-9 else 1.0
        for s, p in enumerate(probs):
            # closed form: slice s spans 2 pi p_s (coordinates are rounded to 0.01 px)
            assert drawn.get(s, 0.0) == pytest.approx(p, abs=0.01)


def test_state_map_colours_branches_by_the_most_probable_state(figures):
    _, out, _, a, r = figures
    c = next(c for c in a.discrete if c.id == "hook")
    k = len(c.symbols)
    best = np.argmax(r.probs[:, c.column, :k], axis=1)  # numpy as the reference
    text = (out / "tree-hook-states.svg").read_text()
    root = ET.fromstring(text)
    counts = {}
    for path in root.iter(f"{SVG}path"):
        if path.get("stroke-width") == "3":
            counts[path.get("stroke")] = path.get("d").count("M")
    expected = {}
    for v in range(r.tree.n_nodes):
        if r.tree.parent[v] >= 0:
            colour = STATE_COLOURS[int(best[v])]
            expected[colour] = expected.get(colour, 0) + 1
    assert counts == expected
    assert set(counts) <= OKABE_ITO


def test_withheld_object_is_not_named(figures):
    _, out, paths, _, _ = figures
    for path in paths:
        if path.suffix == ".svg":
            text = path.read_text()
            assert "spoon-b" not in text and "plain rim" not in text
    assert "Withheld" in (out / "tree.svg").read_text()


def test_support_values_are_printed(figures):
    _, out, _, a, r = figures
    layout, _ = figure_layout(a, r)
    text = (out / "tree.svg").read_text()
    for node in layout:
        if node.kind == "node" and node.support is not None and node.parent >= 0:
            assert f">{node.support:.2f}</text>" in text


def test_bad_character_ids_are_all_reported_and_nothing_written(figures, tmp_path):
    source = figures[0]
    out = tmp_path / "never"
    with pytest.raises(AtlasError) as info:
        write_figures(source, out, ["bowel", "hock", "length-mm"])
    assert len(info.value.problems) == 3
    assert not out.exists()


def test_refuses_to_write_outside_the_folder(tmp_path):
    with pytest.raises(AtlasError):
        _inside(tmp_path.resolve(), "../escape.svg")
    with pytest.raises(AtlasError):
        _inside(tmp_path.resolve(), "/etc/escape.svg")
    assert _inside(tmp_path.resolve(), "tree.svg") == tmp_path.resolve() / "tree.svg"


def test_output_that_is_a_file_is_refused(figures, tmp_path):
    target = tmp_path / "a-file"
    target.write_text("keep me")
    with pytest.raises(AtlasError):
        write_figures(figures[0], target, [])
    assert target.read_text() == "keep me"


def test_output_is_deterministic(figures, tmp_path):
    source, out, _, _, _ = figures
    again = write_figures(source, tmp_path / "again", ["bowl", "hook"])
    for path in again:
        assert path.read_bytes() == (out / path.name).read_bytes()


def test_every_svg_renders_in_chromium(figures):
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        sync_playwright = None
    if sync_playwright is None or not CHROMIUM.is_file():
        if os.environ.get("CI") == "true":
            pytest.fail("CI=true but Playwright or /usr/bin/chromium is missing")
        pytest.skip("needs Playwright for Python and /usr/bin/chromium")
    _, _, paths, _, _ = figures
    with sync_playwright() as driver:
        browser = driver.chromium.launch(executable_path=str(CHROMIUM), headless=True,
                                         args=["--no-sandbox", "--disable-gpu"])
        try:
            page = browser.new_page()
            for path in paths:
                if path.suffix != ".svg":
                    continue
                page.goto(path.as_uri())
                box = page.evaluate("() => { const r = document.documentElement"
                                    ".getBoundingClientRect(); return [r.width, r.height]; }")
                assert box[0] > 0 and box[1] > 0, path.name
                drawn = page.evaluate("() => document.documentElement.getBBox().width")
                assert drawn > 0, path.name
        finally:
            browser.close()
