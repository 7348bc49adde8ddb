"""Tests for atlas.site.mapsvg: the Equal Earth projection against pyproj and its own
equal-area property, TopoJSON decoding of the bundled outlines and of an invented topology,
and the static SVG map. Every place here is invented."""

from __future__ import annotations

import doctest
import itertools
import json
import math
import re
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from pyproj import Proj

from atlas.errors import AtlasError
from atlas.site.mapsvg import (
    WORLD,
    basemap_svg,
    equal_earth,
    land_paths,
    map_svg,
    map_window,
    overlay_svg,
)

BASEMAP = Path(__file__).resolve().parent.parent / "atlas" / "basemaps" / "world_110m.json"
SVG = "{http://www.w3.org/2000/svg}"


@pytest.fixture(scope="module")
def world() -> dict:
    return json.loads(BASEMAP.read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def land(world) -> list[np.ndarray]:
    return land_paths(world)


# --- Equal Earth ------------------------------------------------------------------------------

def test_equal_earth_against_pyproj():
    lat, lon = np.meshgrid(np.linspace(-90, 90, 37), np.linspace(-180, 180, 49))
    x, y = equal_earth(lat, lon)
    ex, ey = Proj(proj="eqearth", R=1)(lon, lat)  # pyproj (PROJ's eqearth) on a unit sphere
    assert np.allclose(x, ex, rtol=0, atol=1e-9)
    assert np.allclose(y, ey, rtol=0, atol=1e-9)


def test_equal_earth_known_values_and_symmetry():
    x, y = equal_earth(0, 0)
    assert float(x) == 0.0 and float(y) == 0.0  # the origin (closed form)
    # the equator's end: x = pi / (M A1) with M = sqrt(3) / 2, A1 = 1.340264 (closed form)
    assert float(equal_earth(0, 180)[0]) == pytest.approx(math.pi / (math.sqrt(3) / 2 * 1.340264))
    # the pole: theta = asin(M) = pi / 3 and y = P(pi / 3) (closed form), x = 0 on the pole line
    t = math.pi / 3
    pole = 1.340264 * t - 0.081106 * t**3 + 0.000893 * t**7 + 0.003796 * t**9
    assert float(equal_earth(90, 0)[1]) == pytest.approx(pole, rel=1e-12)
    # the map is about 2.05 times as wide as high (from memory, the paper's stated ratio)
    assert float(equal_earth(0, 180)[0] / equal_earth(90, 0)[1]) == pytest.approx(2.05, abs=0.01)
    lat, lon = np.array([12.0, 47.5, 80.0]), np.array([33.0, -120.0, 179.0])
    x, y = equal_earth(lat, lon)
    xm, ym = equal_earth(-lat, -lon)
    assert np.allclose(xm, -x, atol=1e-15) and np.allclose(ym, -y, atol=1e-15)  # odd in both
    xs, ys = equal_earth(-lat, lon)
    assert np.allclose(xs, x, atol=1e-15) and np.allclose(ys, -y, atol=1e-15)


def test_equal_earth_is_equal_area():
    # The area of a small cell dlambda x dphi is |det J| dlambda dphi on the map and
    # cos(phi) dlambda dphi on the unit sphere; their ratio must be the same everywhere
    # (and 1: Equal Earth keeps the sphere's area). J by central finite differences.
    h = 1e-5  # degrees
    lat, lon = np.meshgrid(np.linspace(-85, 85, 18), np.linspace(-170, 170, 9))
    xe, ye = equal_earth(lat, lon + h)
    xw, yw = equal_earth(lat, lon - h)
    xn, yn = equal_earth(lat + h, lon)
    xs, ys = equal_earth(lat - h, lon)
    step = 2 * math.radians(h)
    det = ((xe - xw) * (yn - ys) - (xn - xs) * (ye - yw)) / step**2
    ratio = det / np.cos(np.radians(lat))
    assert np.ptp(ratio) / ratio.mean() < 1e-6
    assert ratio.mean() == pytest.approx(1.0, rel=1e-6)


# --- TopoJSON ---------------------------------------------------------------------------------

def test_land_paths_decodes_the_bundled_world(land):
    assert len(land) > 100
    points = np.concatenate(land)
    assert points[:, 0].min() >= -180 and points[:, 0].max() <= 180
    assert points[:, 1].min() >= -90 and points[:, 1].max() <= 90
    # a continent's worth of spread: the outlines reach both hemispheres and both sides
    assert points[:, 0].min() < -170 and points[:, 0].max() > 170
    assert points[:, 1].min() < -80 and points[:, 1].max() > 80
    # arcs joined in the right order and direction close every ring on itself
    assert all(np.array_equal(ring[0], ring[-1]) for ring in land)


def test_land_paths_of_countries_reads_multipolygons(world):
    rings = land_paths(world, layer="countries")
    kinds = {g["type"] for g in world["objects"]["countries"]["geometries"]}
    assert "MultiPolygon" in kinds
    assert len(rings) > len(world["objects"]["countries"]["geometries"])


def test_land_paths_of_an_invented_topology():
    # invented case, worked by hand: scale 0.5 and translate (10, 20); arc 0 deltas
    # (0,0) (4,0) (0,4) -> positions (0,0) (4,0) (4,4) -> degrees (10,20) (12,20) (12,22);
    # arc 1 deltas (4,4) (-4,0) (0,-4) -> (4,4) (0,4) (0,0) -> (12,22) (10,22) (10,20)
    topo = {
        "type": "Topology",
        "transform": {"scale": [0.5, 0.5], "translate": [10, 20]},
        "arcs": [[[0, 0], [4, 0], [0, 4]], [[4, 4], [-4, 0], [0, -4]]],
        "objects": {"plots": {"type": "GeometryCollection", "geometries": [
            {"type": "Polygon", "arcs": [[0, 1]]},
            {"type": "MultiPolygon", "arcs": [[[~1, ~0]]]},
            {"type": "LineString", "arcs": [0]},
        ]}},
    }
    forward, backward = land_paths(topo, layer="plots")
    square = [[10, 20], [12, 20], [12, 22], [10, 22], [10, 20]]
    assert forward.tolist() == square
    assert backward.tolist() == square[::-1]  # ~i walks arc i backwards


def test_land_paths_bad_input(world):
    with pytest.raises(AtlasError, match="did you mean land"):
        land_paths(world, layer="lands")
    with pytest.raises(AtlasError, match="not a readable TopoJSON"):
        land_paths({"objects": {"land": {"type": "Polygon", "arcs": [[7]]}}, "arcs": []})
    with pytest.raises(AtlasError, match="not a readable TopoJSON"):
        land_paths({"type": "Topology"})


# --- the SVG map ------------------------------------------------------------------------------

PLACES = [  # invented places of an invented survey
    {"lat": 44.2, "lon": 12.1, "label": "Harbour of Vell", "href": "places/vell.html",
     "count": 3, "precision": "exact"},
    {"lat": 43.1, "lon": 15.4, "label": "Isle of Orro", "href": "places/orro.html",
     "count": 1, "precision": "generalised"},
    {"lat": 46.0, "lon": 9.3, "label": "Upper Tessaly <b>&", "href": "places/tessaly.html",
     "count": 12, "precision": "exact"},
]


def parse(svg: str) -> ET.Element:
    return ET.fromstring(svg)  # raises on anything that is not well-formed XML


def path_points(d: str) -> list[list[tuple[float, float]]]:
    rings = []
    for body in re.findall(r"M([^MZ]*)Z", d):
        rings.append([tuple(map(float, pair.split(","))) for pair in body.split()])
    return rings


def test_map_svg_is_valid_and_self_contained(land):
    svg = map_svg(PLACES, rings=land, title="Distribution map: invented survey")
    root = parse(svg)
    assert root.tag == SVG + "svg" and root.get("role") == "img"
    assert root.get("class") == "map-svg"
    assert root.find(SVG + "title").text == "Distribution map: invented survey"
    assert root.get("aria-labelledby") == root.find(SVG + "title").get("id")
    links = root.findall(f".//{SVG}a")
    assert len(links) == len(PLACES)
    assert sorted(a.get("href") for a in links) == sorted(p["href"] for p in PLACES)
    assert svg.count("http") == 1 and 'xmlns="http://www.w3.org/2000/svg"' in svg
    assert "<script" not in svg and "url(" not in svg and "xlink" not in svg
    assert root.findall(f".//{SVG}path[@class='land']")


def test_map_svg_points(land):
    root = parse(map_svg(PLACES, rings=land))
    width, height = int(root.get("width")), int(root.get("height"))
    by_title = {a.find(SVG + "title").text: a for a in root.findall(f".//{SVG}a")}
    assert set(by_title) == {p["label"] for p in PLACES}  # labels escaped and read back intact
    for place in PLACES:
        circle = by_title[place["label"]].find(SVG + "circle")
        assert 0 < float(circle.get("cx")) < width and 0 < float(circle.get("cy")) < height
        text = by_title[place["label"]].find(SVG + "text")
        assert (text is None) == (place["count"] == 1)
        if text is not None:
            assert text.text == str(place["count"])
    assert by_title["Isle of Orro"].find(SVG + "circle").get("class") == "point generalised"
    assert by_title["Isle of Orro"].find(SVG + "circle").get("fill") == "none"
    assert by_title["Harbour of Vell"].find(SVG + "circle").get("class") == "point"
    # area grows with the count: radius 4.5 sqrt(count) (the module's documented scale)
    r3 = float(by_title["Harbour of Vell"].find(SVG + "circle").get("r"))
    r12 = float(by_title["Upper Tessaly <b>&"].find(SVG + "circle").get("r"))
    assert r12 / r3 == pytest.approx(2.0, abs=0.02)
    # west is left and north is up
    vell = float(by_title["Harbour of Vell"].find(SVG + "circle").get("cx"))
    orro = by_title["Isle of Orro"].find(SVG + "circle")
    assert float(orro.get("cx")) > vell
    assert float(orro.get("cy")) > float(by_title["Harbour of Vell"].find(SVG + "circle")
                                         .get("cy"))


def test_map_svg_drops_unsafe_links_withheld_and_unplaced_points(land):
    places = [
        {"lat": 10.0, "lon": 10.0, "label": "a", "href": "http://example.org/", "count": 1},
        {"lat": 11.0, "lon": 11.0, "label": "b", "href": "javascript:alert(1)", "count": 1},
        {"lat": 12.0, "lon": 12.0, "label": "c", "href": "places/c.html", "count": 1,
         "precision": "withheld"},
        {"lat": None, "lon": None, "label": "d", "href": "places/d.html", "count": 1},
        {"lat": 12.5, "lon": 11.5, "label": "e\x01", "href": "places/e.html", "count": 2},
    ]
    svg = map_svg(places, rings=land)
    root = parse(svg)
    assert [a.get("href") for a in root.findall(f".//{SVG}a")] == ["places/e.html"]
    titles = sorted(t.text for t in root.iter(SVG + "title"))
    assert titles == ["Distribution map", "a", "b", "e"]  # c withheld, d has no place
    assert svg.count("http") == 1 and "javascript" not in svg


def test_map_svg_numbers_are_rounded_and_outlines_thinned(land):
    svg = map_svg(PLACES, rings=land)
    drawn = re.findall(r' (?:d|cx|cy|r|x|y)="([^"]*)"', svg)
    assert drawn and not any(re.search(r"\d\.\d\d", v) for v in drawn)  # one decimal
    assert all(re.search(r"\.\d\b", v) for v in drawn)  # fixed: always one decimal
    svg = map_svg([], rings=land)
    d = parse(svg).find(f"{SVG}path[@class='land']").get("d")
    for ring in path_points(d):
        pts = np.array(ring)
        steps = np.hypot(*np.diff(pts, axis=0).T)
        # 0.5 px apart before rounding each coordinate to 0.1 px (moves a point <= 0.071)
        assert steps.min() >= 0.5 - 0.15
    assert len(svg) < 100_000  # the world at 720 px: compact enough to inline in a page


def test_map_svg_world_has_no_seam_across_the_map(land):
    # Outlines that cross the 180th meridian (in the bundled data: Fiji, Chukotka, Antarctica)
    # must be cut at the map's edge, not joined by a line across the whole map.
    root = parse(map_svg([], rings=land, bounds=WORLD))
    width, height = int(root.get("width")), int(root.get("height"))
    assert root.find(f"{SVG}path[@class='sphere']") is not None
    for ring in path_points(root.find(f"{SVG}path[@class='land']").get("d")):
        pts = np.array(ring + ring[:1])
        for (x0, y0), (x1, y1) in itertools.pairwise(pts):
            if math.hypot(x1 - x0, y1 - y0) > width / 3:
                assert min(y0, y1) > height - 2  # only the south pole line is that long


def test_map_svg_centres_places_across_the_180th_meridian(land):
    places = [{"lat": -17.5, "lon": 178.5, "label": "west", "href": "w.html", "count": 1},
              {"lat": -14.0, "lon": -171.5, "label": "east", "href": "e.html", "count": 1}]
    root = parse(map_svg(places, rings=land))
    width = int(root.get("width"))
    xs = {a.find(SVG + "title").text: float(a.find(SVG + "circle").get("cx"))
          for a in root.findall(f".//{SVG}a")}
    assert xs["west"] < xs["east"]  # 178.5 E lies west of 171.5 W across the meridian
    assert abs((xs["west"] + xs["east"]) / 2 - width / 2) < width / 20  # centred between them
    assert root.find(f"{SVG}rect[@class='frame']") is not None  # a regional map, not the world


def test_map_svg_world_without_points_and_explicit_bounds(land):
    root = parse(map_svg([], rings=land))
    assert root.find(f"{SVG}path[@class='sphere']") is not None
    # the world is about 2.05 times as wide as high (from memory, Equal Earth's ratio)
    assert int(root.get("width")) / int(root.get("height")) == pytest.approx(2.05, abs=0.02)
    boxed = parse(map_svg(PLACES, rings=land, bounds=(0, 35, 25, 50), width=500))
    assert boxed.get("width") == "500" and boxed.find(f"{SVG}rect[@class='frame']") is not None
    with pytest.raises(AtlasError, match="not a box"):
        map_svg(PLACES, rings=land, bounds=(0, 50, 25, 35))
    with pytest.raises(AtlasError, match="not four numbers"):
        map_svg(PLACES, rings=land, bounds=(0, 50))


def test_map_svg_extra_polygons_and_determinism(land):
    region = [[(11.0, 43.0), (14.0, 43.0), (14.0, 45.5), (11.0, 45.5), (11.0, 43.0)]]
    first = map_svg(PLACES, rings=land, extra_polygons=region)
    assert first == map_svg(list(reversed(PLACES)), rings=land, extra_polygons=region)
    path = parse(first).find(f"{SVG}path[@class='region']")
    assert path is not None and len(path_points(path.get("d"))[0]) >= 4


def test_layers_share_one_window_and_overlays_hold_only_points(land):
    view = map_window(PLACES, width=480)
    base = parse(basemap_svg(view, rings=land, title="Study area (invented)"))
    top = overlay_svg(view, PLACES[:2], title="State 1 (invented)", fill="#009E73")
    over = parse(top)
    # the same size and viewBox, so one image stacks exactly on the other
    for attr in ("viewBox", "width", "height"):
        assert base.get(attr) == over.get(attr)
    assert base.findall(f".//{SVG}path[@class='land']") and not base.findall(f".//{SVG}circle")
    assert not over.findall(f".//{SVG}path[@class='land']")
    assert not over.findall(f".//{SVG}a") and "<title>" not in top.split("</title>", 1)[1]
    circles = over.findall(f".//{SVG}circle")
    assert len(circles) == 2
    # the points sit where map_svg puts them on the same window (the same projection)
    full = parse(map_svg(PLACES, rings=land, width=480))
    centres = {(c.get("cx"), c.get("cy")) for c in full.findall(f".//{SVG}circle")}
    assert {(c.get("cx"), c.get("cy")) for c in circles} <= centres
    # the state's colour on the groups: filled points, and the generalised place as a ring
    solid = over.find(f"{SVG}g[@class='points']")
    ring = over.find(f"{SVG}g[@class='points generalised']")
    assert solid.get("fill") == "#009E73" and ring.get("stroke") == "#009E73"
    assert len(solid) == 1 and len(ring) == 1  # Vell exact, Orro generalised (PLACES)
    counts = [t.text for t in over.findall(f".//{SVG}text")]
    assert counts == ["3"]  # only the place with more than one object shows its count


def test_range_outline_polygon_line_and_nothing(land):
    # the invented places' own coordinates as outline vertices: the outline passes through
    # the circles' centres (same projection, same rounding)
    hull = [(p["lat"], p["lon"]) for p in PLACES]
    root = parse(map_svg(PLACES, rings=land, outline=hull))
    path = root.find(f".//{SVG}path[@class='range-outline']")
    assert path is not None and path.get("d").endswith("Z")
    vertices = {tuple(v.split(",")) for v in path.get("d")[1:-1].split()}
    centres = {(c.get("cx"), c.get("cy")) for c in root.findall(f".//{SVG}circle")}
    assert vertices == centres
    line = parse(map_svg(PLACES, rings=land, outline=hull[:2]))
    d = line.find(f".//{SVG}path[@class='range-outline']").get("d")
    assert not d.endswith("Z") and len(d[1:].split()) == 2
    assert line.find(f".//{SVG}path[@class='range-outline']").get("fill") == "none"
    single = parse(map_svg(PLACES, rings=land, outline=hull[:1]))
    assert single.find(f".//{SVG}path[@class='range-outline']") is None


def test_docstring_examples():
    # the hand-checkable examples in the module's docstrings (worked by hand there)
    import atlas.site.mapsvg as module

    result = doctest.testmod(module)
    assert result.attempted > 0 and result.failed == 0
