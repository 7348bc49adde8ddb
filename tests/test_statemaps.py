"""Tests for atlas.site.statemaps: the state codes of data/matrix.js and the per-state counts
read back against the matrix and gazetteer files parsed here with the csv module, the layered
static maps, and the clade outline against SciPy's convex hull. The atlas is the invented
starter (carved spoons), with one object made community-only so the public build withholds it.
"""

from __future__ import annotations

import csv
import json
import re
import xml.etree.ElementTree as ET
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
from pyproj import Proj
from scipy.spatial import ConvexHull

from atlas.analysis.geography import EARTH_RADIUS_KM
from atlas.build import build

from .conftest import write_atlas

SVG = "{http://www.w3.org/2000/svg}"


@pytest.fixture(scope="module")
def site(tmp_path_factory, ) -> tuple[Path, Path]:
    from atlas.starter import FILES

    files = dict(FILES)
    # spoon-c becomes community-only: the public build must not show it anywhere
    files["objects/spoon-c.md"] = files["objects/spoon-c.md"].replace("access: public",
                                                                      "access: community")
    assert "access: community" in files["objects/spoon-c.md"]
    src = write_atlas(tmp_path_factory.mktemp("statemaps") / "src", files)
    out = src.parent / "out"
    build(src, out)
    return src, out


def read_csv(path: Path) -> list[dict]:
    with path.open(encoding="utf-8", newline="") as f:
        return list(csv.DictReader(f))


def matrix_js(out: Path) -> dict:
    text = (out / "data" / "matrix.js").read_text(encoding="utf-8")
    return json.loads(text.split("window.AtlasData.matrix = ", 1)[1].rstrip().rstrip(";"))


def test_matrix_js_codes_follow_the_matrix_file(site):
    src, out = site
    data = matrix_js(out)
    rows = {r["object"]: r for r in read_csv(src / "matrix.csv")}
    assert data["objects"] == sorted(set(rows) - {"spoon-c"})  # the withheld object is left out
    symbols = {"bowl": "012", "handle": "01", "hook": "01", "notch": "01"}  # characters.csv
    for cid, codes in data["codes"].items():
        assert len(codes) == len(data["objects"])
        for i, oid in enumerate(data["objects"]):
            cell = rows[oid][cid]
            if cell in ("?", "-"):
                assert codes[i] == cell
            elif "/" in cell:
                assert codes[i] == "*"
                assert data["polymorphic"][cid][str(i)] == [symbols[cid].index(s)
                                                            for s in cell.split("/")]
            else:
                assert codes[i] == str(symbols[cid].index(cell))
    assert "spoon-c" not in (out / "data" / "matrix.js").read_text(encoding="utf-8")


def expected_counts(src: Path, cid: str) -> dict[str, Counter]:
    """Per category, objects per place, brute force from the source files."""
    places = {r["id"]: r for r in read_csv(src / "places.csv")}
    place_of = {}
    for note in (src / "objects").glob("*.md"):
        text = note.read_text(encoding="utf-8")
        if "access: community" in text:
            continue
        oid = re.search(r"^id: (\S+)", text, re.M).group(1)
        m = re.search(r"^place: (\S+)", text, re.M)
        place_of[oid] = m.group(1) if m else None
    out: dict[str, Counter] = {}
    for row in read_csv(src / "matrix.csv"):
        if row["object"] not in place_of:
            continue
        pid = place_of[row["object"]]
        mapped = pid in places and places[pid]["precision"] != "withheld"
        for part in row[cid].split("/"):
            out.setdefault(part, Counter())[places[pid]["name"] if mapped else None] += 1
    return out


@pytest.mark.parametrize("cid", ["bowl", "hook", "notch"])
def test_state_table_counts_objects_and_places(site, cid):
    src, out = site
    html = (out / "characters" / f"{cid}.html").read_text(encoding="utf-8")
    section = html.split('id="distribution"', 1)[1].split("</section>", 1)[0]
    table = section.split("<tbody>", 1)[1].split("</tbody>", 1)[0]
    rows = re.findall(r'<th scope="row">(.*?): .*?</th><td>(\d+).*?</td><td>(.*?)</td>', table)
    expected = expected_counts(src, cid)
    assert {sym for sym, _, _ in rows} >= {k for k in expected if k not in ("?", "-")}
    for sym, count, places in rows:
        want = expected.get(sym, Counter())
        assert int(count) == sum(want.values())
        listed = dict(re.findall(r"([^,;<>]+?) \((\d+)\)", places))
        assert {k.strip(): int(v) for k, v in listed.items()} == {
            k: v for k, v in want.items() if k is not None}


def test_one_overlay_per_mapped_state_on_the_shared_basemap(site):
    src, out = site
    base = ET.parse(out / "figures" / "study-area.svg").getroot()
    expected = expected_counts(src, "hook")
    names = {r["name"]: r for r in read_csv(src / "places.csv")}
    for key, filename in (("0", "hook-0.svg"), ("1", "hook-1.svg"), ("-", "hook-inapplicable.svg")):
        svg = ET.parse(out / "figures" / "characters" / filename).getroot()
        assert svg.get("viewBox") == base.get("viewBox")
        circles = svg.findall(f".//{SVG}circle")
        mapped = {k: v for k, v in expected[key].items() if k is not None}
        assert len(circles) == len(mapped)
        counts = sorted(int(t.text) for t in svg.iter(f"{SVG}text"))
        assert counts == sorted(v for v in mapped.values() if v > 1)
        generalised = [k for k in mapped if names[k]["precision"] == "generalised"]
        rings = svg.find(f"{SVG}g[@class='points generalised']")
        assert (0 if rings is None else len(rings)) == len(generalised)
    html = (out / "characters" / "hook.html").read_text(encoding="utf-8")
    assert 'data-character="hook"' in html and "../figures/study-area.svg" in html
    assert "../data/matrix.js" in html and "../assets/map.js" in html
    glossary = (out / "glossary.html").read_text(encoding="utf-8")
    assert 'href="characters/hook.html#distribution"' in glossary


def test_clade_outline_is_the_convex_hull_of_its_places(site):
    src, out = site
    outlines = []
    for page in (out / "nodes").glob("*.html"):
        m = re.search(r'data-outline="([^"]*)"', page.read_text(encoding="utf-8"))
        if m and m.group(1):
            outlines.append([tuple(map(float, v.split(","))) for v in m.group(1).split()])
    assert outlines
    # the root's clade holds every mapped place; the generalised one at its grid-cell centre
    places = read_csv(src / "places.csv")
    pts = []
    for r in places:
        lat, lon = float(r["lat"]), float(r["lon"])
        if r["precision"] == "generalised":  # the 1-degree cell's centre (link stage rule)
            lat, lon = np.floor(lat) + 0.5, np.floor(lon) + 0.5
        pts.append((lat, lon))
    biggest = max(outlines, key=len)
    lat0, lon0 = np.mean([p[0] for p in pts]), np.mean([p[1] for p in pts])
    laea = Proj(proj="laea", lat_0=lat0, lon_0=lon0, R=EARTH_RADIUS_KM * 1000)
    x, y = laea([p[1] for p in pts], [p[0] for p in pts])
    hull = ConvexHull(np.column_stack([x, y]))  # SciPy's Qhull, the reference
    assert sorted(biggest) == sorted(pts[i] for i in hull.vertices)
    # the static layer draws the same outline
    svgs = [ET.parse(f).getroot() for f in (out / "figures" / "nodes").glob("*.svg")]
    wide = ET.parse(out / "figures" / "study-area-wide.svg").getroot()
    assert all(s.get("viewBox") == wide.get("viewBox") for s in svgs)  # one window for all
    drawn = [s.find(f".//{SVG}path[@class='range-outline']") for s in svgs]
    assert any(d is not None and d.get("d").endswith("Z") for d in drawn)


def test_no_exact_find_spot_or_withheld_object_in_the_new_outputs(site):
    src, out = site
    generalised = [r for r in read_csv(src / "places.csv") if r["precision"] == "generalised"]
    files = [out / "data" / "matrix.js", *(out / "figures").rglob("*.svg"),
             *(out / "nodes").glob("*.html"), *(out / "characters").glob("*.html")]
    withheld_title = re.search(r"^title: (.+)$", (src / "objects" / "spoon-c.md")
                               .read_text(encoding="utf-8"), re.M).group(1)
    for f in files:
        text = f.read_text(encoding="utf-8")
        for r in generalised:
            assert f'{r["lat"]},{r["lon"]}' not in text and r["lat"] not in text, f
        assert withheld_title not in text, f


def test_docstring_examples():
    import doctest

    import atlas.site.statemaps as module

    result = doctest.testmod(module)  # the hand-checkable example of cell_categories
    assert result.attempted > 0 and result.failed == 0


def test_long_place_lists_are_cut_and_counted(site, monkeypatch):
    # invented case: with one place named per state, the rest are counted, and the named and
    # counted objects together are every mapped object of the state (the brute-force counts)
    from atlas.analysis.results import analyse
    from atlas.build import load
    from atlas.site import statemaps, views

    src, _ = site
    atlas = load(src)
    links = views.make_links(atlas, analyse(atlas))
    monkeypatch.setattr(statemaps, "PLACES_LISTED", 1)
    hook = next(c for c in atlas.discrete if c.id == "hook")
    page = views.PagePlan("characters/hook.html", "character.html", {})
    rows = statemaps.character_page_map(page, atlas, links, hook, None).context["state_map"]
    expected = expected_counts(src, "hook")
    for row in rows["rows"]:
        mapped = {k: v for k, v in expected[row["symbol"]].items() if k is not None}
        assert len(row["places"]) == min(1, len(mapped))
        assert row["more"]["places"] == max(len(mapped) - 1, 0)
        assert sum(p["count"] for p in row["places"]) + row["more"]["objects"] == sum(
            mapped.values())
        if row["places"]:  # the place with the most objects is named
            assert row["places"][0]["count"] == max(mapped.values())
