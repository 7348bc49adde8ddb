"""The distribution map as a static SVG, for print and for readers without JavaScript.

Three steps, each a plain function: :func:`land_paths` decodes the bundled TopoJSON outlines
into rings of (lon, lat) once per build; :func:`equal_earth` projects; :func:`map_svg` draws
the rings and the places into one self-contained SVG string (no script, no external
reference, fixed decimals, so the same input gives the same bytes).
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Mapping, Sequence
from html import escape

import numpy as np

from atlas.errors import AtlasError, Problem, did_you_mean

WORLD = (-180.0, -90.0, 180.0, 90.0)  # (west, south, east, north), the order of a GeoJSON bbox

# Equal Earth (Savric, Patterson & Jenny 2018): polynomial coefficients and M = sqrt(3) / 2.
A1, A2, A3, A4 = 1.340264, -0.081106, 0.000893, 0.003796
M = math.sqrt(3) / 2

MIN_STEP_PX = 0.5  # outline points closer than this to the last one kept are skipped
POINT_RADIUS_PX = 4.5  # radius of a place with one object; the area grows with the count
MAX_RADIUS_PX = 24.0
_SCHEME = re.compile(r"^\s*([a-zA-Z][a-zA-Z0-9+.-]*:|//)")
_NOT_XML = re.compile("[^\t\n\r\x20-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")


def equal_earth(lat, lon) -> tuple[np.ndarray, np.ndarray]:
    """The Equal Earth projection of degrees onto a unit sphere's map (central meridian 0).

    Savric, Patterson & Jenny 2018, International Journal of Geographical Information Science
    33:454-465. With ``phi, lambda`` in radians, ``M = sqrt(3) / 2`` and
    ``A1 = 1.340264, A2 = -0.081106, A3 = 0.000893, A4 = 0.003796``::

        theta = asin(M sin phi)
        x = lambda cos theta / (M (A1 + 3 A2 theta^2 + 7 A3 theta^6 + 9 A4 theta^8))
        y = A1 theta + A2 theta^3 + A3 theta^7 + A4 theta^9

    ``y`` is a polynomial ``P(theta)`` and ``x`` is ``lambda cos theta / (M P'(theta))``, so the
    Jacobian is ``(cos theta / (M P')) * P' * M cos phi / cos theta = cos phi``: areas on the
    map equal areas on the sphere, whatever the coefficients. The map is about 2.05 times as
    wide as it is high. By hand: the equator's end, ``(0, 180)``, lands at
    ``x = pi / (M A1) = 2.7066``:

    >>> x, y = equal_earth(0, 180)
    >>> round(float(x), 4), float(y)
    (2.7066, 0.0)
    """
    phi = np.radians(np.asarray(lat, dtype=np.float64))
    lam = np.radians(np.asarray(lon, dtype=np.float64))
    theta = np.arcsin(M * np.sin(phi))
    t2 = theta * theta
    t6 = t2 * t2 * t2
    x = lam * np.cos(theta) / (M * (A1 + 3 * A2 * t2 + t6 * (7 * A3 + 9 * A4 * t2)))
    y = theta * (A1 + A2 * t2 + t6 * (A3 + A4 * t2))
    return x, y


def land_paths(topojson: Mapping, layer: str = "land") -> list[np.ndarray]:
    """The polygon rings of one TopoJSON layer, each an ``(k, 2)`` array of (lon, lat).

    TopoJSON (Bostock 2013, the TopoJSON format specification 1.0): polygons share ``arcs``;
    a ring lists arc indices, a negative index ``i`` meaning arc ``~i`` (= ``-i - 1``) walked
    backwards; consecutive arcs share their end point, kept once. A quantised topology stores
    each arc delta-encoded: position ``k`` is the running sum of the first ``k + 1`` pairs,
    mapped to degrees by ``lon = x * scale[0] + translate[0]`` (``lat`` likewise). Polygon and
    MultiPolygon geometries are read, also inside a GeometryCollection; outer rings and holes
    are returned alike (draw them with ``fill-rule="evenodd"``).
    """
    try:
        objects = topojson["objects"]
        if layer not in objects:
            hint = did_you_mean(layer, objects) or "layers: " + ", ".join(sorted(objects))
            raise AtlasError(Problem("basemap", None, f"has no layer {layer!r}", hint))
        arcs = _decode_arcs(topojson["arcs"], topojson.get("transform"))
        rings: list[np.ndarray] = []
        _collect(objects[layer], arcs, rings)
        return rings
    except (KeyError, TypeError, IndexError, ValueError, AttributeError) as exc:
        raise AtlasError(Problem("basemap", None, f"is not a readable TopoJSON topology: "
                                 f"{type(exc).__name__}: {exc}")) from None


def _decode_arcs(raw: Sequence, transform: Mapping | None) -> list[np.ndarray]:
    out = []
    for arc in raw:
        a = np.asarray(arc, dtype=np.float64).reshape(-1, np.shape(arc)[-1])[:, :2]
        if transform:
            a = np.cumsum(a, axis=0) * np.asarray(transform["scale"], dtype=np.float64) \
                + np.asarray(transform["translate"], dtype=np.float64)
        out.append(a)
    return out


def _collect(geometry: Mapping, arcs: list[np.ndarray], rings: list[np.ndarray]) -> None:
    kind = geometry.get("type")
    if kind == "GeometryCollection":
        for g in geometry["geometries"]:
            _collect(g, arcs, rings)
    elif kind == "Polygon":
        rings.extend(_ring(r, arcs) for r in geometry["arcs"])
    elif kind == "MultiPolygon":
        rings.extend(_ring(r, arcs) for polygon in geometry["arcs"] for r in polygon)


def _ring(indices: Sequence[int], arcs: list[np.ndarray]) -> np.ndarray:
    pieces = []
    for n, i in enumerate(indices):
        i = int(i)
        piece = arcs[i] if i >= 0 else arcs[~i][::-1]
        pieces.append(piece if n == 0 else piece[1:])
    return np.concatenate(pieces) if pieces else np.zeros((0, 2))


def _wrap(lon) -> np.ndarray:
    """Longitudes brought into -180 <= lon < 180."""
    return (np.asarray(lon, dtype=np.float64) + 180.0) % 360.0 - 180.0


def _central_meridian(lons: Sequence[float]) -> float:
    """The middle of the shortest arc of longitude that holds every point (so a set of places
    either side of the 180th meridian gets a map centred on it, not split across the world)."""
    s = np.sort(_wrap(lons))
    if s.size == 0:
        return 0.0
    gaps = np.diff(np.concatenate([s, [s[0] + 360.0]]))
    k = int(np.argmax(gaps))  # the widest empty arc runs from s[k] to s[k + 1]
    start = s[(k + 1) % s.size]
    return float(_wrap(start + (360.0 - gaps[k]) / 2))


class _View:
    """The window of the map: Equal Earth centred on ``lon0``, the projected extent
    ``x0..x1, y0..y1`` drawn ``width`` px wide. Longitudes here are relative to ``lon0``."""

    def __init__(self, lon0: float, extent: tuple[float, float, float, float], width: int):
        x0, x1, y0, y1 = extent
        self.key = (float(lon0), *map(float, extent), int(width))
        self.lon0, self.x0, self.y1 = lon0, x0, y1
        self.scale = width / (x1 - x0)
        self.width = width
        self.height = max(1, round((y1 - y0) * self.scale))
        wx0, wx1, wy0, wy1 = _box_extent(-180.0, 180.0, -90.0, 90.0)
        self.world = x1 - x0 >= 0.999 * (wx1 - wx0) and y1 - y0 >= 0.999 * (wy1 - wy0)

    def pixels(self, lat, rel_lon) -> tuple[np.ndarray, np.ndarray]:
        x, y = equal_earth(lat, rel_lon)
        return (x - self.x0) * self.scale, (self.y1 - y) * self.scale


def _bounds_window(bounds: Sequence[float]) -> tuple[float, tuple[float, float, float, float]]:
    """Central meridian and projected extent of a (west, south, east, north) box; ``west >
    east`` is a box across the 180th meridian (RFC 7946, 5.2)."""
    try:
        west, south, east, north = (float(v) for v in bounds)
    except (TypeError, ValueError):
        raise AtlasError(Problem("map", None, f"bounds {bounds!r} are not four numbers",
                                 "give (west, south, east, north) in degrees")) from None
    if not all(math.isfinite(v) for v in (west, south, east, north)) or south >= north \
            or not -90 <= south < north <= 90:
        raise AtlasError(Problem("map", None, f"bounds {tuple(bounds)!r} are not a box on the "
                                 "globe", "give (west, south, east, north) in degrees"))
    span = east - west
    if span <= 0:
        span += 360.0
    span = min(span, 360.0)
    lon0 = float(_wrap(west + span / 2))
    return lon0, _box_extent(-span / 2, span / 2, south, north)


def _box_extent(west: float, east: float, south: float,
                north: float) -> tuple[float, float, float, float]:
    t = np.linspace(0.0, 1.0, 65)
    lat = np.concatenate([south + (north - south) * t, np.full(65, north),
                          north - (north - south) * t, np.full(65, south)])
    lon = np.concatenate([np.full(65, west), west + (east - west) * t,
                          np.full(65, east), east - (east - west) * t])
    x, y = equal_earth(lat, lon)
    return float(x.min()), float(x.max()), float(y.min()), float(y.max())


def _fitted_extent(x: np.ndarray, y: np.ndarray) -> tuple[float, float, float, float]:
    """The points' extent with a 15 % margin each side, at least ~6 degrees across, the height
    between 0.45 and 1.25 times the width, kept within the world's outline."""
    wx0, wx1, wy0, wy1 = _box_extent(-180.0, 180.0, -90.0, 90.0)
    cx, cy = (x.min() + x.max()) / 2, (y.min() + y.max()) / 2
    w = max(float(x.max() - x.min()) * 1.3, 0.14)
    h = max(float(y.max() - y.min()) * 1.3, 0.14)
    w = max(w, h / 1.25)
    h = max(h, 0.45 * w)
    w, h = min(w, wx1 - wx0), min(h, wy1 - wy0)
    x0 = min(max(cx - w / 2, wx0), wx1 - w)
    y0 = min(max(cy - h / 2, wy0), wy1 - h)
    return float(x0), float(x0 + w), float(y0), float(y0 + h)


def _pieces(ring: np.ndarray, lon0: float) -> list[list[tuple[float, float]]]:
    """A (lon, lat) ring in longitudes relative to ``lon0``, cut at the map's edge
    (``lon0 +- 180``) into pieces that each lie within -180..180."""
    lon = np.unwrap(_wrap(ring[:, 0] - lon0), period=360.0)
    lat = ring[:, 1]
    if abs(lon[-1] - lon[0]) > 180:  # the ring goes round a pole: close it along the pole
        pole = 90.0 if lat.mean() > 0 else -90.0
        lon = np.concatenate([lon, [lon[-1], lon[0]]])
        lat = np.concatenate([lat, [pole, pole]])
    low = math.floor((float(lon.min()) + 180.0 + 1e-9) / 360.0)
    high = math.floor((float(lon.max()) + 180.0 - 1e-9) / 360.0)
    pieces = []
    for k in range(low, high + 1):
        points = list(zip((lon - 360.0 * k).tolist(), lat.tolist(), strict=True))
        if low != high:
            points = _densify_edge(_clip(points, (-180.0, -90.0, 180.0, 90.0)))
        if len(points) >= 3:
            pieces.append(points)
    return pieces


def _densify_edge(points: list[tuple[float, float]]) -> list[tuple[float, float]]:
    """Points every degree along a cut at the edge meridian, which is curved on the map."""
    out: list[tuple[float, float]] = []
    for i, (lon, lat) in enumerate(points):
        out.append((lon, lat))
        nlon, nlat = points[(i + 1) % len(points)]
        if abs(lon) == 180.0 and nlon == lon and abs(nlat - lat) > 1.0:
            steps = int(abs(nlat - lat))
            out.extend((lon, lat + (nlat - lat) * j / (steps + 1)) for j in range(1, steps + 1))
    return out


def _num(v: float) -> str:
    text = f"{v:.1f}"
    return "0.0" if text == "-0.0" else text


def _clip(points: list[tuple[float, float]], box: tuple[float, float, float, float]
          ) -> list[tuple[float, float]]:
    """Sutherland & Hodgman 1974 (Communications of the ACM 17:32-42): a polygon clipped to a
    rectangle, one edge at a time."""
    x0, y0, x1, y1 = box
    for axis, bound, inside_is_low in ((0, x0, False), (0, x1, True),
                                       (1, y0, False), (1, y1, True)):
        if not points:
            break
        sign = 1.0 if inside_is_low else -1.0  # inside: sign * (coordinate - bound) <= 0
        out: list[tuple[float, float]] = []
        prev = points[-1]
        prev_in = sign * (prev[axis] - bound) <= 0
        for cur in points:
            cur_in = sign * (cur[axis] - bound) <= 0
            if cur_in != prev_in:
                t = (bound - prev[axis]) / (cur[axis] - prev[axis])
                cut = (prev[0] + t * (cur[0] - prev[0]), prev[1] + t * (cur[1] - prev[1]))
                out.append((bound, cut[1]) if axis == 0 else (cut[0], bound))
            if cur_in:
                out.append(cur)
            prev, prev_in = cur, cur_in
        points = out
    return points


def _ring_path(px: np.ndarray, py: np.ndarray, view: _View) -> str:
    """One ring as ``M x,y x,y ...Z``: culled, clipped to the window, thinned, rounded."""
    pad = 2.0
    box = (-pad, -pad, view.width + pad, view.height + pad)
    finite = np.isfinite(px) & np.isfinite(py)
    px, py = px[finite], py[finite]
    if px.size < 3 or px.max() < box[0] or px.min() > box[2] or py.max() < box[1] \
            or py.min() > box[3]:
        return ""
    points = list(zip(px.tolist(), py.tolist(), strict=True))
    if px.min() < box[0] or px.max() > box[2] or py.min() < box[1] or py.max() > box[3]:
        points = _clip(points, box)
    kept: list[str] = []
    last: tuple[float, float] | None = None
    for x, y in points:
        if last is not None and math.hypot(x - last[0], y - last[1]) < MIN_STEP_PX:
            continue
        pair = f"{_num(x)},{_num(y)}"
        if not kept or pair != kept[-1]:
            kept.append(pair)
            last = (x, y)
    if len(kept) > 1 and kept[-1] == kept[0]:
        kept.pop()
    if len(kept) < 3:
        return ""
    return "M" + " ".join(kept) + "Z"


def _rings_path(rings: Iterable, view: _View) -> str:
    parts = []
    for ring in rings:
        a = np.asarray(ring, dtype=np.float64).reshape(-1, 2)
        if a.shape[0] < 3:
            continue
        for piece in _pieces(a, view.lon0):
            p = np.asarray(piece)
            d = _ring_path(*view.pixels(p[:, 1], p[:, 0]), view)
            if d:
                parts.append(d)
    return "".join(parts)


def _text(value: object) -> str:
    return escape(_NOT_XML.sub("", str(value)), quote=True)


def _place_points(points: Iterable[Mapping]) -> list[dict]:
    """The drawable places: with finite coordinates and not withheld; biggest first."""
    out = []
    for p in points:
        precision = str(p.get("precision") or "exact")
        try:
            lat, lon = float(p["lat"]), float(p["lon"])
            count = int(p.get("count") or 1)
        except (KeyError, TypeError, ValueError):
            continue
        if precision == "withheld" or not (math.isfinite(lat) and math.isfinite(lon)):
            continue
        out.append({"lat": lat, "lon": lon, "label": str(p.get("label") or ""),
                    "href": str(p.get("href") or ""), "count": max(1, count),
                    "generalised": precision == "generalised"})
    out.sort(key=lambda q: (-q["count"], q["lat"], q["lon"], q["label"], q["href"]))
    return out


def map_window(points: Iterable[Mapping] = (), *, bounds: Sequence[float] | None = None,
               width: int = 720) -> _View:
    """The window :func:`map_svg` would draw for these points and bounds (see there), so that
    several layers (a shared basemap, then points) can be drawn on exactly the same one."""
    places = _place_points(points)
    width = max(int(width), 60)
    if bounds is not None:
        lon0, extent = _bounds_window(bounds)
    elif places:
        lon0 = _central_meridian([p["lon"] for p in places])
        x, y = equal_earth([p["lat"] for p in places], _wrap([p["lon"] - lon0 for p in places]))
        extent = _fitted_extent(np.asarray(x), np.asarray(y))
    else:
        lon0, extent = _bounds_window(WORLD)
    return _View(lon0, extent, width)


def _head(view: _View, title: str, svg_id: str) -> list[str]:
    sid = _text(svg_id)
    return [f'<svg xmlns="http://www.w3.org/2000/svg" class="map-svg" '
            f'viewBox="0 0 {view.width} {view.height}" width="{view.width}" '
            f'height="{view.height}" role="img" aria-labelledby="{sid}-title">',
            f'<title id="{sid}-title">{_text(title)}</title>']


_BASES: list[tuple] = []  # the last few (window, rings, polygons, parts) drawn


def _base_parts(view: _View, rings: Iterable, extra_polygons: Iterable) -> list[str]:
    """The sphere's edge (or the window's frame), the land and the regional basemap.

    The last few are remembered (for the very same ``rings`` and ``extra_polygons`` objects):
    every place map of an atlas shares one window, and drawing its land again for each took
    4.7 of the 20 s of planning the 400-object synthetic atlas."""
    for key, r, e, parts in _BASES:
        if key == view.key and r is rings and e is extra_polygons:
            return list(parts)
    parts = _draw_base(view, rings, extra_polygons)
    _BASES.insert(0, (view.key, rings, extra_polygons, tuple(parts)))
    del _BASES[4:]
    return parts


def _draw_base(view: _View, rings: Iterable, extra_polygons: Iterable) -> list[str]:
    parts = []
    outline = 'fill="none" stroke="currentColor" stroke-opacity="0.45" stroke-width="0.8"'
    if view.world:
        lat = np.linspace(-90.0, 90.0, 91)
        edge = _ring_path(*view.pixels(np.concatenate([lat, lat[::-1]]),
                                       np.concatenate([np.full(91, 180.0), np.full(91, -180.0)])),
                          view)
        parts.append(f'<path class="sphere" {outline} d="{edge}"/>')
    else:
        parts.append(f'<rect class="frame" {outline} x="0.5" y="0.5" '
                     f'width="{view.width - 1}" height="{view.height - 1}"/>')
    land = _rings_path(rings, view)
    if land:
        parts.append('<path class="land" fill="currentColor" fill-opacity="0.13" '
                     'fill-rule="evenodd" stroke="currentColor" stroke-opacity="0.4" '
                     f'stroke-width="0.5" stroke-linejoin="round" d="{land}"/>')
    region = _rings_path(extra_polygons, view)
    if region:
        parts.append('<path class="region" fill="currentColor" fill-opacity="0.1" '
                     'fill-rule="evenodd" stroke="currentColor" stroke-opacity="0.7" '
                     f'stroke-width="1" stroke-dasharray="4 2" d="{region}"/>')
    return parts


def _outline_part(view: _View, outline: Sequence[Sequence[float]]) -> str:
    """A range outline: ``(lat, lon)`` vertices, closed when there are 3 or more, a line for
    2, nothing for fewer. Edges are drawn straight on the map."""
    if len(outline) < 2:
        return ""
    lat = np.asarray([float(p[0]) for p in outline])
    lon = _wrap(np.asarray([float(p[1]) for p in outline]) - view.lon0)
    px, py = view.pixels(lat, lon)
    d = "M" + " ".join(f"{_num(x)},{_num(y)}" for x, y in zip(px.tolist(), py.tolist(),
                                                               strict=True))
    closed = len(outline) >= 3
    fill = 'fill="currentColor" fill-opacity="0.06"' if closed else 'fill="none"'
    return (f'<path class="range-outline" {fill} stroke="currentColor" stroke-width="1.5" '
            f'stroke-dasharray="6 3" stroke-linejoin="round" d="{d}{"Z" if closed else ""}"/>')


def _marks(view: _View, places: list[dict]) -> list[tuple[str, str, dict]]:
    """``(circle, count, place)`` per drawable place: a circle whose area grows with the count
    (``currentColor``), the count (a ``<text>``, or ``""`` for one object) to write inside."""
    marks = []
    for p, (at, x, y) in zip(places, _spots(view, places), strict=True):
        if not at:
            continue
        if p["generalised"]:
            circle = (f'<circle class="point generalised" {at} fill="none" '
                      'stroke="currentColor" stroke-width="1.5"/>')
        else:
            circle = (f'<circle class="point" {at} fill="currentColor" fill-opacity="0.35" '
                      'stroke="currentColor" stroke-width="1.5"/>')
        count = ""
        if p["count"] > 1:
            count = f'<text class="count" x="{x}" y="{y}">{p["count"]}</text>'
        marks.append((circle, count, p))
    return marks


def _spots(view: _View, places: list[dict]) -> list[tuple[str, str, str]]:
    """Per place, its circle's ``cx cy r`` attributes and where its count goes (``("", "",
    "")`` when it falls outside the window), projected all at once (one numpy call)."""
    xs, ys = view.pixels(np.asarray([p["lat"] for p in places], dtype=np.float64),
                         _wrap(np.asarray([p["lon"] for p in places], dtype=np.float64)
                               - view.lon0))
    out = []
    for p, px, py in zip(places, np.atleast_1d(xs).tolist(), np.atleast_1d(ys).tolist(),
                         strict=True):
        r = min(POINT_RADIUS_PX * math.sqrt(p["count"]), MAX_RADIUS_PX)
        if px < -r or py < -r or px > view.width + r or py > view.height + r:
            out.append(("", "", ""))
        else:
            out.append((f'cx="{_num(px)}" cy="{_num(py)}" r="{_num(r)}"', _num(px),
                        _num(py + 3.5)))
    return out


def _linked(marks: list[tuple[str, str, dict]]) -> list[str]:
    out = []
    for circle, count, p in marks:
        mark = f'<title>{_text(p["label"])}</title>{circle}{count}'
        href = p["href"]
        if href and not _SCHEME.match(href):
            out.append(f'<a href="{_text(href)}">{mark}</a>')
        else:
            out.append(f"<g>{mark}</g>")
    return out


_TEXT_ATTRS = 'font-family="sans-serif" font-size="10" text-anchor="middle"'


def map_svg(points: Iterable[Mapping], *, rings: Iterable, bounds: Sequence[float] | None = None,
            width: int = 720, title: str = "Distribution map",
            extra_polygons: Iterable = (), svg_id: str = "map-svg",
            outline: Sequence[Sequence[float]] = ()) -> str:
    """A static, self-contained SVG map of places.

    ``points`` are mappings ``{"lat", "lon", "label", "href", "count", "precision"}``: each
    becomes a circle whose area grows with ``count`` (radius ``4.5 sqrt(count)`` px, at most
    24), the count written inside when above 1, wrapped in ``<a href>`` (relative links only:
    a link with a scheme, such as ``http:``, is dropped) with the label as its ``<title>``.
    A ``generalised`` place is a hollow ring; a ``withheld`` place, or one without
    coordinates, is not drawn. ``rings`` are the land outlines from :func:`land_paths`;
    ``extra_polygons`` are further rings of (lon, lat), e.g. a regional basemap from GeoJSON;
    ``outline`` is a range outline as ``(lat, lon)`` vertices (a dashed polygon, or a line for
    two vertices), e.g. ``Range.hull`` from :func:`atlas.analysis.geography.clade_range`.

    The window is ``bounds`` (west, south, east, north) in degrees, ``west > east`` for a box
    across the 180th meridian, or else the points' extent with a 15 % margin (the world when
    no point can be drawn), on the Equal Earth projection (:func:`equal_earth`) centred on the
    window's middle meridian, so places either side of the 180th meridian stay together;
    outlines are cut where they cross the map's edge meridian. Outlines are clipped to the
    window (Sutherland-Hodgman), thinned (a point closer than 0.5 px to the last one kept is
    skipped) and rounded to 0.1 px.
    Colours are ``currentColor`` with opacities, and elements carry classes (``map-svg``,
    ``sphere``/``frame``, ``land``, ``region``, ``range-outline``, ``point``,
    ``point generalised``, ``count``), so a style sheet can theme the map.
    """
    view = map_window(points, bounds=bounds, width=width)
    parts = _head(view, title, svg_id) + _base_parts(view, rings, extra_polygons)
    line = _outline_part(view, outline)
    if line:
        parts.append(line)
    marks = _linked(_marks(view, _place_points(points)))
    if marks:
        parts.append(f'<g class="points" {_TEXT_ATTRS} fill="currentColor">'
                     + "".join(marks) + "</g>")
    parts.append("</svg>")
    return "".join(parts)


def basemap_svg(view: _View, *, rings: Iterable, extra_polygons: Iterable = (),
                title: str = "Basemap", svg_id: str = "basemap") -> str:
    """The bottom layer of a layered map: frame, land and regional basemap of ``view`` (from
    :func:`map_window`), no points. Drawn once and shared by many :func:`overlay_svg` layers,
    which an HTML page stacks over it with CSS, so each overlay stays a few kilobytes."""
    parts = _head(view, title, svg_id) + _base_parts(view, rings, extra_polygons)
    parts.append("</svg>")
    return "".join(parts)


def overlay_svg(view: _View, points: Iterable[Mapping], *, title: str, svg_id: str = "overlay",
                fill: str | None = None, outline: Sequence[Sequence[float]] = ()) -> str:
    """The top layer of a layered map: the points (as in :func:`map_svg`, without links or
    tooltips, which an image cannot use) and an optional range outline on a transparent
    background, on the same ``view`` and size as its :func:`basemap_svg`. ``fill`` gives every
    point one colour (a state's colour), else ``currentColor``; points have a dark edge, and a
    generalised place is a thick ring (group ``points generalised``)."""
    parts = _head(view, title, svg_id)
    line = _outline_part(view, outline)
    if line:
        parts.append(line)
    places = _place_points(points)
    spots = _spots(view, places)
    solid = "".join(f"<circle {at}/>" for p, (at, _, _) in zip(places, spots, strict=True)
                    if at and not p["generalised"])
    rings = "".join(f"<circle {at}/>" for p, (at, _, _) in zip(places, spots, strict=True)
                    if at and p["generalised"])
    counts = "".join(f'<text x="{x}" y="{y}">{p["count"]}</text>'
                     for p, (at, x, y) in zip(places, spots, strict=True)
                     if at and p["count"] > 1)
    colour = fill or "currentColor"
    # Shared attributes on groups keep each point to about 40 bytes: filled circles with a
    # dark edge, generalised places as thick rings, then the counts in black on a white halo,
    # legible on any state colour.
    if solid:
        parts.append(f'<g class="points" fill="{colour}" stroke="#1c1f23" stroke-width="1">'
                     f"{solid}</g>")
    if rings:
        parts.append(f'<g class="points generalised" fill="none" stroke="{colour}" '
                     f'stroke-width="3">{rings}</g>')
    if counts:
        parts.append(f'<g class="counts" {_TEXT_ATTRS} fill="#000000" stroke="#ffffff" '
                     f'stroke-width="2.5" paint-order="stroke">{counts}</g>')
    parts.append("</svg>")
    return "".join(parts)
