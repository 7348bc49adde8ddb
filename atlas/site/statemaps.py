"""Maps of where each character state was recorded, and the layered static maps they share.

A character page gets a "Distribution map" of its states: the interactive map (drawn by
``assets/map.js`` from ``data/places.js`` and ``data/matrix.js``), a static map per state for
print and for readers without JavaScript, and a table of the same numbers. A trait sheet
(node page) gets a static map of its clade's places with the range outline.

Static maps are layered to stay small at scale: one basemap of the study area,
``figures/study-area.svg`` (land and regional outlines, drawn once; ``study-area-wide.svg``
at twice the width for the clade maps, which fill the column), under a points-only
overlay per state (``figures/characters/<slug>-<state>.svg``) or per clade
(``figures/nodes/<id>.svg``), each on exactly the same window, stacked with CSS
(``.map-layers``). An overlay holds only circles and counts, so it costs about 40 bytes per
place it shows. Their titles are in the language being rendered (``atlas.i18n``), so a language
whose titles differ gets its own copies under ``<lang>/figures/``.

``data/matrix.js`` assigns ``window.AtlasData.matrix``, the coded states written once for the
whole site::

    {"objects": [published object ids, sorted],
     "codes": {character id: one letter per object: "0"-"9", "a"-"z" the state's index,
               "?" unknown, "-" not applicable, "*" polymorphic},
     "polymorphic": {character id: {object index: [state indices]}}}

so a character page carries only its character id. Withheld objects are not in it.
"""

from __future__ import annotations

import json
from collections import Counter
from dataclasses import replace
from importlib import resources

from ..analysis.results import Results
from ..model import Atlas, Character
from .mapsvg import _View, basemap_svg, land_paths, map_window, overlay_svg
from .views import Links, PagePlan, fmt, root_of

# Okabe & Ito (2008, "Color Universal Design (CUD)"): the order the lineage tree uses for
# states (assets/tree.js), so a state has one colour on the whole character page. Every point
# also has a dark edge, which carries the 3:1 contrast against the map (WCAG 2.2, 1.4.11).
STATE_COLOURS = ("#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7",
                 "#999999")
UNKNOWN_COLOUR = "#5f5f5f"  # "?": a dark grey, apart from every state colour
INAPPLICABLE_COLOUR = "#c8c8c8"  # "-": a light grey, drawn with a cross on the interactive map
CODE_LETTERS = "0123456789abcdefghijklmnopqrstuvwxyz"
BASEMAP = "figures/study-area.svg"  # under the per-state panels, drawn LAYER_WIDTH px wide
WIDE_BASEMAP = "figures/study-area-wide.svg"  # under the clade maps, WIDE_LAYER_WIDTH px
MATRIX_SCRIPT = "data/matrix.js"
STATE_MAP_SCRIPTS = ("assets/plotly.min.js", "data/world.js", "data/basemap.js",
                     "data/places.js", MATRIX_SCRIPT, "assets/map.js")
# px of the static layers; CSS scales them to the panel (about 20 rem) or to the column, and
# the points and counts keep a legible size at either
LAYER_WIDTH = 320
# places named per state in the table, most objects first; the rest are counted ("and 12 more
# places, 30 objects"), which keeps a character page's section under ~6 KB at any size (the
# synthetic benchmark's 240 places listed in full took up to 22 KB)
PLACES_LISTED = 30
WIDE_LAYER_WIDTH = 640


def cell_categories(c: Character, cell: str) -> list[str]:
    """The map categories of one matrix cell: state indices as strings, ``"?"`` (unknown or
    no row) or ``"-"`` (not applicable). A polymorphic cell ``0/1`` belongs to each of its
    states.

    >>> c = Character("c", "C", "", ("0", "1"), ("absent", "present"), False, "discrete")
    >>> cell_categories(c, "1"), cell_categories(c, "0/1"), cell_categories(c, "")
    (['1'], ['0', '1'], ['?'])
    """
    if cell in ("", "?"):
        return ["?"]
    if cell == "-":
        return ["-"]
    keys = [str(c.symbols.index(p)) for p in cell.split("/") if p in c.symbols]
    return keys or ["?"]


def _cell(atlas: Atlas, taxon: int, column: int) -> str:
    row = atlas.cells[taxon]
    return row[column] if row else ""


def matrix_data(atlas: Atlas) -> dict:
    """The coded states of every published object and discrete character (see the module's
    docstring for the format)."""
    objects = sorted(atlas.visible_objects(), key=lambda o: o.id)
    codes: dict[str, str] = {}
    poly: dict[str, dict[str, list[int]]] = {}
    column = {c.id: j for j, c in enumerate(atlas.characters)}
    for c in atlas.discrete:
        j = column[c.id]
        letters = []
        seen: dict[str, list[str]] = {}  # cell text -> categories: cells repeat a lot
        for i, obj in enumerate(objects):
            cell = _cell(atlas, obj.taxon, j)
            keys = seen.get(cell)
            if keys is None:
                keys = seen[cell] = cell_categories(c, cell)
            if keys[0] in ("?", "-"):
                letters.append(keys[0])
            elif len(keys) == 1 and int(keys[0]) < len(CODE_LETTERS):
                letters.append(CODE_LETTERS[int(keys[0])])
            else:
                letters.append("*")
                poly.setdefault(c.id, {})[str(i)] = [int(k) for k in keys]
        codes[c.id] = "".join(letters)
    return {"objects": [o.id for o in objects], "codes": codes, "polymorphic": poly}


def category_colour(key: str) -> str:
    if key == "?":
        return UNKNOWN_COLOUR
    if key == "-":
        return INAPPLICABLE_COLOUR
    return STATE_COLOURS[min(int(key), len(STATE_COLOURS) - 1)]


def _mapped(atlas: Atlas, obj) -> str | None:
    """The id of the place an object is drawn at, or None."""
    place = atlas.places.get(obj.place) if obj.place else None
    if place is None or not place.has_coordinates or place.precision == "withheld":
        return None
    return place.id


def state_rows(atlas: Atlas, c: Character) -> list[dict]:
    """Per state (then unknown and not applicable, when any object has them): the published
    objects coded so, how many of them are polymorphic, and the places they were recorded at
    with the number at each (most first). ``places`` maps place id to count. The words for
    unknown and not applicable are in the language of ``atlas.i18n``."""
    j = atlas.characters.index(c)
    keys = [str(k) for k in range(len(c.symbols))] + ["?", "-"]
    seen: dict[str, list[str]] = {}  # cell text -> categories
    rows = {k: {"key": k, "count": 0, "polymorphic": 0, "places": Counter(), "unmapped": 0}
            for k in keys}
    for obj in sorted(atlas.visible_objects(), key=lambda o: o.id):
        cell = _cell(atlas, obj.taxon, j)
        cats = seen.get(cell)
        if cats is None:
            cats = seen[cell] = cell_categories(c, cell)
        pid = _mapped(atlas, obj)
        for k in cats:
            row = rows[k]
            row["count"] += 1
            row["polymorphic"] += len(cats) > 1
            if pid is None:
                row["unmapped"] += 1
            else:
                row["places"][pid] += 1
    out = []
    for k in keys:
        row = rows[k]
        if k in ("?", "-") and not row["count"]:
            continue
        lang = ""  # of an untranslated description, for its lang attribute
        if k == "?":
            symbol, description = "?", atlas.i18n.gettext("unknown")
        elif k == "-":
            symbol, description = "-", atlas.i18n.gettext("not applicable")
        else:
            symbol, description = c.symbols[int(k)], c.descriptions[int(k)]
            lang = c.state_lang(int(k))
        swatch = "state-swatch-" + (_file_key(k) if k in ("?", "-")
                                    else str(min(int(k), len(STATE_COLOURS) - 1)))
        out.append({**row, "symbol": symbol, "description": description, "lang": lang,
                    "colour": category_colour(k), "swatch": swatch,
                    "places": dict(sorted(row["places"].items(), key=lambda kv: (-kv[1], kv[0])))})
    return out


def study_view(atlas: Atlas, width: int = LAYER_WIDTH) -> _View | None:
    """The window shared by every layered map: all mapped places, or None without any."""
    points = [{"lat": p.lat, "lon": p.lon, "precision": p.precision}
              for p in atlas.places.values() if p.has_coordinates and p.precision != "withheld"]
    return map_window(points, width=width) if points else None


def _points(atlas: Atlas, counts: dict[str, int]) -> list[dict]:
    return [{"lat": atlas.places[pid].lat, "lon": atlas.places[pid].lon, "count": n,
             "precision": atlas.places[pid].precision, "label": "", "href": ""}
            for pid, n in counts.items()]


def _file_key(key: str) -> str:
    return {"?": "unknown", "-": "inapplicable"}.get(key, key)


def character_overlay_path(links: Links, c: Character, key: str) -> str:
    name = links.characters[c.id].rsplit("/", 1)[1][:-5]
    return f"figures/characters/{name}-{_file_key(key)}.svg"


def character_page_map(page: PagePlan, atlas: Atlas, links: Links, c: Character,
                       view: _View | None, rows: list[dict] | None = None) -> PagePlan:
    """A discrete character's page with its "Distribution map" (context key ``state_map``)
    and the map's scripts added after the page's own. ``rows``: its :func:`state_rows`, when
    the caller has them already."""
    if c.kind != "discrete":
        return page
    root = root_of(page.path)
    rows = [dict(r) for r in (rows if rows is not None else state_rows(atlas, c))]
    for row in rows:
        listed = list(row["places"].items())
        row["static"] = (root + character_overlay_path(links, c, row["key"])
                         if view is not None and listed else "")
        row["places"] = [{"name": atlas.places[pid].name, "count": n}
                         for pid, n in listed[:PLACES_LISTED]]
        rest = listed[PLACES_LISTED:]
        row["more"] = {"places": len(rest), "objects": sum(n for _, n in rest)}
    context = {**page.context, "state_map": {
        "character": c.id, "label": c.label, "rows": rows,
        "basemap": root + BASEMAP if view is not None else "",
        "generalised": any(p.precision == "generalised" for p in atlas.places.values()),
    }}
    scripts = tuple(dict.fromkeys((*page.scripts, *STATE_MAP_SCRIPTS)))
    return replace(page, context=context, scripts=scripts)


def node_page_map(page: PagePlan, atlas: Atlas, results: Results, v: int,
                  view: _View | None) -> PagePlan:
    """A trait sheet with its clade's range outline (``range_map``): the hull's vertices for
    the interactive map (``data-outline``), its area, and the static layers."""
    rng = results.diagnostics.ranges.get(v)
    if rng is None or not page.context.get("place_ids"):
        return page
    root = root_of(page.path)
    outline = " ".join(f"{lat:.4f},{lon:.4f}" for lat, lon in rng.hull)
    context = {**page.context, "range_map": {
        "outline": outline, "vertices": len(rng.hull),
        "area": atlas.i18n.number(rng.area_km2, 0),
        "spread": atlas.i18n.number(rng.spread_km, 0),
        "static": root + f"figures/nodes/{results.ids[v]}.svg" if view is not None else "",
        "basemap": root + WIDE_BASEMAP if view is not None else "",
        "centre": f"{fmt(rng.centroid_lat, 1)}, {fmt(rng.centroid_lon, 1)}",
    }}
    return replace(page, context=context)


def layered_files(atlas: Atlas, results: Results, links: Links, view: _View | None,
                  rows: dict[str, list[dict]] | None = None) -> dict[str, str]:
    """The shared basemap and every overlay: one per state with mapped objects of each
    discrete character, one per clade with mapped objects (its points and range outline).
    ``rows``: :func:`state_rows` per character id, when the caller has them already."""
    if view is None:
        return {}
    from .plan import basemap_rings  # plan imports this module; import at call time

    world = json.loads(resources.files("atlas.basemaps").joinpath("world_110m.json")
                       .read_text("utf-8"))
    land, region = land_paths(world), basemap_rings(atlas.basemap)
    wide = study_view(atlas, WIDE_LAYER_WIDTH) or view
    _ = atlas.i18n.gettext
    files = {path: basemap_svg(v, rings=land, extra_polygons=region,
                               title=_("The study area of {title}").format(
                                   title=atlas.config.title))
             for path, v in ((BASEMAP, view), (WIDE_BASEMAP, wide))}
    for c in atlas.discrete:
        for row in rows[c.id] if rows is not None else state_rows(atlas, c):
            if row["places"]:
                files[character_overlay_path(links, c, row["key"])] = overlay_svg(
                    view, _points(atlas, row["places"]), fill=row["colour"],
                    title=_("{character}: {symbol} ({description})").format(
                        character=c.label, symbol=row["symbol"],
                        description=row["description"]),
                    svg_id="state-map")
    tree = results.tree
    for v, nid in enumerate(results.ids):
        rng = results.diagnostics.ranges.get(v)
        if tree.tip[v] >= 0 or rng is None:
            continue
        counts: Counter = Counter()
        for m in results.members[v]:
            obj = atlas.objects[m]
            pid = None if obj.withheld else _mapped(atlas, obj)
            if pid is not None:
                counts[pid] += 1
        if counts:
            files[f"figures/nodes/{nid}.svg"] = overlay_svg(
                wide, _points(atlas, dict(sorted(counts.items()))), outline=rng.hull,
                title=_("Places of this clade and its range outline"), svg_id="clade-map")
    return files
