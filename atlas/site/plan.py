"""The plan stage: every page context, data script and copied file of the site, before any
rendering. ``plan_site`` gathers all data first; the render and write stages only turn this
plan into bytes and files.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field, replace
from importlib import resources
from pathlib import Path

from .. import parallel
from ..analysis.results import Results
from ..cache import Cache, Hasher, analysis_key
from ..i18n import catalogue_path
from ..model import Atlas
from ..parallel import Background, map_forked
from ..stats import study_stats
from . import (
    downloads,
    images,
    overview,
    paging,
    search,
    statemaps,
    statfigures,
    treedata,
    views,
)
from .figures import tree_layout, tree_svg
from .mapsvg import land_paths, map_svg
from .views import FrozenPage, Links, PagePlan, root_of


@dataclass(frozen=True)
class SitePlan:
    pages: list[PagePlan]
    data: dict[str, str]  # "data/tree.js" -> script text
    copies: dict[str, Path]  # output path -> source file (media, vendored assets)
    files: dict[str, str]  # other generated files (static figures)
    links: Links
    nav: list[tuple[str, str]]  # (label, site-root-relative href)
    media: dict[str, bytes] = field(default_factory=dict)  # published images, metadata stripped


def js_global(name: str, value) -> str:
    """A classic script assigning data into ``window.AtlasData`` (JSON cannot load under file://).

    ``</`` is escaped so no value can close a script element.
    """
    text = json.dumps(value, ensure_ascii=False, sort_keys=True, separators=(",", ":"))
    text = text.replace("</", "<\\/").replace("\u2028", "\\u2028").replace("\u2029", "\\u2029")
    return ("window.AtlasData = window.AtlasData || {};\n"
            f"window.AtlasData.{name} = {text};\n")


def plotly_js() -> Path:
    """plotly.js as shipped inside the installed plotly package (no download, ever)."""
    return Path(str(resources.files("plotly") / "package_data" / "plotly.min.js"))


def world_js() -> str:
    outlines = resources.files("atlas.basemaps").joinpath("world_110m.json").read_text("utf-8")
    return ("window.PlotlyGeoAssets = window.PlotlyGeoAssets || {topojson: {}};\n"
            f"window.PlotlyGeoAssets.topojson[\"world_110m\"] = {outlines.strip()};\n")


def lineage_colours(atlas: Atlas, results: Results, notes_by_node) -> tuple[dict[str, int], list]:
    """A colour index (0-7) per object: its lineage, taken from the clade notes (the smallest
    noted clade holding it), or else from the clades just below the root. Returns the index per
    object id and the legend as (index, title) pairs."""
    tree = results.tree
    if notes_by_node:
        groups = [(v, notes[0].title) for v, notes in sorted(notes_by_node.items())
                  if v != tree.root]
    else:
        groups = [(int(c), views.node_title(atlas, results, int(c), notes_by_node))
                  for c in tree.children(tree.root) if tree.tip[int(c)] < 0]
    groups = groups[:8]
    colour: dict[str, int] = {}
    # Larger clades first, so a smaller clade inside one takes its members over.
    for k, (v, _) in sorted(enumerate(groups), key=lambda kv: -len(results.members[kv[1][0]])):
        for m in results.members[v]:
            colour[m] = k
    legend = [(k, title) for k, (_, title) in enumerate(groups)]
    return colour, legend


def places_data(atlas: Atlas, links: Links, results: Results,
                colours: dict[str, int] | None = None) -> list[dict]:
    by_place: dict[str, list] = {}
    for obj in atlas.visible_objects():
        if obj.place:
            by_place.setdefault(obj.place, []).append(obj)
    out = []
    for pid, place in sorted(atlas.places.items()):
        if not place.has_coordinates or place.precision == "withheld":
            continue
        objs = sorted(by_place.get(pid, []), key=lambda o: o.id)
        out.append({
            "id": pid, "name": place.name, "lat": place.lat, "lon": place.lon,
            "href": links.places[pid], "precision": place.precision,
            "objects": [{"id": o.id, "title": o.title, "href": links.objects[o.id],
                         "clade_colour": (colours or {}).get(o.id)} for o in objs],
        })
    return out


def basemap_rings(basemap: dict | None) -> list:
    """Exterior rings (lon, lat) of a regional basemap's polygons, for the static maps."""
    rings = []
    for feature in (basemap or {}).get("features", []):
        geometry = (feature or {}).get("geometry") or {}
        polygons = {"Polygon": [geometry.get("coordinates")],
                    "MultiPolygon": geometry.get("coordinates")}.get(geometry.get("type"), [])
        for polygon in polygons or []:
            if polygon and polygon[0]:
                rings.append([(float(x), float(y)) for x, y, *_ in polygon[0]])
    return rings


def static_maps(atlas: Atlas, links: Links, places: list[dict]) -> dict[str, str]:
    """SVG maps for print and for readers without JavaScript: all places, and each place."""
    world = json.loads(resources.files("atlas.basemaps").joinpath("world_110m.json")
                       .read_text("utf-8"))
    land = land_paths(world)
    region = basemap_rings(atlas.basemap)
    points = [{"lat": p["lat"], "lon": p["lon"], "label": f"{p['name']} ({len(p['objects'])})",
               "href": "../" + p["href"], "count": max(len(p["objects"]), 1),
               "precision": p["precision"]} for p in places]
    files = {"figures/map.svg": map_svg(points, rings=land, extra_polygons=region,
                                        title=atlas.i18n.gettext("Distribution map of {title}")
                                        .format(title=atlas.config.title))}
    if points:
        lats = [p["lat"] for p in points]
        lons = [p["lon"] for p in points]
        pad = 1.5
        bounds = (min(lons) - pad, min(lats) - pad, max(lons) + pad, max(lats) + pad)
        for point, place in zip(points, places):
            name = links.places[place["id"]].rsplit("/", 1)[1][:-5]
            files[f"figures/places/{name}.svg"] = map_svg(
                [{**point, "href": "../../" + place["href"]}], rings=land,
                extra_polygons=region, bounds=bounds, width=480,
                title=atlas.i18n.gettext("Where {place} lies in the study area").format(
                    place=place["name"]), svg_id="place-map")
    return files


@dataclass(frozen=True)
class NoteFree:
    """The part of a plan that no object note's text can change (see :func:`note_free_key`)."""

    layout: object  # the tree layout
    pages: dict[str, list[PagePlan]]  # "tree", "map", "objects", "nodes", "characters", "places"
    method_figures: object
    data: dict[str, str]
    files: dict[str, str]


def note_free_key(atlas: Atlas) -> str:
    """The key of :func:`_note_free_plan`: the atlas as linked, in its language, with the text
    of every object note (body and translated bodies) left out, and the analysis key (which
    stands for the results). Titles, places, access and images of objects stay in: the tree,
    clade, character and place pages show them.
    """
    objects = {oid: replace(o, body="", translations={
        lang: {k: ("" if k == "body" else v) for k, v in t.items()}
        for lang, t in o.translations.items()}) for oid, o in atlas.objects.items()}
    catalogue = catalogue_path(atlas.i18n.lang)
    h = Hasher(analysis_key(atlas), atlas.i18n.lang,
               catalogue.read_bytes() if catalogue.is_file() else b"")
    h.add(repr((atlas.config, atlas.profile, objects, atlas.characters, atlas.cells,
                atlas.places, atlas.clade_notes, atlas.pages, atlas.contacts, atlas.rules,
                atlas.withheld_text, atlas.evidence)))
    h.add(sorted((name, path.stat().st_size, path.stat().st_mtime_ns) if path.is_file()
                 else (name, -1, -1) for name, path in atlas.media.items()))
    h.add(json.dumps(atlas.basemap, sort_keys=True))
    return h.hexdigest()


def _plan_part(shared: tuple, task: tuple[str, list[int]]) -> list[list[PagePlan]]:
    """The pages of some clades (node indices) or characters (indices in the atlas)."""
    atlas, results, links, layout, notes_by_node, study_view, state_rows = shared
    kind, indices = task
    out = []
    for i in indices:
        if kind == "nodes":
            node = views.node_page(atlas, results, links, layout, i, notes_by_node)
            if node.context["place_ids"]:  # a map of the clade's places
                node = PagePlan(node.path, node.template, node.context, overview.MAP_SCRIPTS)
                node = statemaps.node_page_map(node, atlas, results, i, study_view)
            out.append(paging.paged(node, "node", atlas.i18n.gettext("Reconstructed traits"))
                       + paging.paged_brief(views.brief_page(atlas, results, links, i,
                                                             notes_by_node)))
        else:
            c = atlas.characters[i]
            out.append([statemaps.character_page_map(treedata.character_page_plot(
                views.character_page(atlas, results, links, c, notes_by_node), c),
                atlas, links, c, study_view, state_rows.get(c.id))])
    return out


def _note_free_plan(atlas: Atlas, results: Results, links: Links, notes_by_node: dict,
                    jobs: int = 1) -> NoteFree:
    tree = results.tree
    labels, hrefs = [], []
    withheld = set()
    for v, nid in enumerate(results.ids):
        if tree.tip[v] >= 0:
            obj = atlas.objects[nid]
            labels.append(obj.title if not obj.withheld else atlas.i18n.gettext("Withheld"))
            hrefs.append(links.objects[nid])
            if obj.withheld:
                withheld.add(v)
        else:
            labels.append(views.node_title(atlas, results, v, notes_by_node))
            hrefs.append(links.nodes[nid])
    layout, use_lengths = tree_layout(tree, results.ids, labels, hrefs, results.summary.support,
                                      withheld)
    colours, legend = lineage_colours(atlas, results, notes_by_node)
    study_view = statemaps.study_view(atlas)  # the window of the layered static maps
    state_rows = {c.id: statemaps.state_rows(atlas, c) for c in atlas.discrete}  # used twice
    method_figures, method_files = statfigures.methods_figures(atlas, results)
    pages: dict[str, list[PagePlan]] = {
        "tree": [treedata.tree_page_plot(
            overview.tree_page(atlas, results, links, notes_by_node, use_lengths), atlas)],
        "map": [overview.map_page(atlas, results, links, legend)],
        "objects": [], "nodes": [], "characters": [], "places": []}
    # object pages without their notes (filled in by plan_site: see _with_notes)
    for obj in sorted(atlas.visible_objects(), key=lambda o: o.id):
        pages["objects"] += paging.paged(views.object_page(
            atlas, results, links, layout, replace(obj, body=""), notes_by_node), "object",
            atlas.i18n.gettext("Traits as coded"))
    # clade and character pages, the bulk of the planning, in forked workers (atlas.parallel)
    internal = [v for v in range(tree.n_nodes) if tree.tip[v] < 0]
    n = jobs * 4 if jobs > 1 and len(internal) + len(atlas.characters) >= parallel.MIN_ITEMS \
        else 1
    tasks = [("nodes", internal[k::n]) for k in range(n)]
    tasks += [("characters", list(range(k, len(atlas.characters), n))) for k in range(n)]
    shared = (atlas, results, links, layout, notes_by_node, study_view, state_rows)
    done = map_forked(_plan_part, shared, tasks, jobs)
    for kind in ("nodes", "characters"):  # back in the order of nodes and of characters
        by_index = {i: part for (k, idx), parts in zip(tasks, done) if k == kind
                    for i, part in zip(idx, parts)}
        for i in sorted(by_index):
            pages[kind] += by_index[i]
    for pid in sorted(atlas.places):
        pages["places"].append(overview.place_page(atlas, results, links, pid))

    mapped = places_data(atlas, links, results, colours)
    data = {
        "data/tree.js": js_global("tree", overview.layout_data(
            layout, use_lengths, atlas.config.analysis["outgroup"], atlas.i18n.gettext)),
        "data/places.js": js_global("places", mapped),
        "data/world.js": world_js(),
        "data/basemap.js": js_global("basemap", atlas.basemap),
        statemaps.MATRIX_SCRIPT: js_global("matrix", statemaps.matrix_data(atlas)),
    }
    data.update(treedata.data_files(atlas, results))  # data/states.js, data/contacts.js
    _ = atlas.i18n.gettext
    files = {"figures/tree.svg": tree_svg(layout, "../", title=_("Lineage tree of {title}")
                                          .format(title=atlas.config.title), standalone=True,
                                          tr=atlas.i18n)}
    files.update(static_maps(atlas, links, mapped))
    files.update(statemaps.layered_files(atlas, results, links, study_view, state_rows))
    files.update(method_files)
    return NoteFree(layout, pages, method_figures, data, files)


def _frozen(part: NoteFree, variants: dict) -> NoteFree:
    """The note-free plan with its images' ``srcset`` added and every page frozen
    (:class:`views.FrozenPage`) but the first page of each object, which gets its note."""
    pages = {kind: [p if p.template == "object.html"
                    else FrozenPage.of(images.with_srcset(p, variants)) for p in plans]
             for kind, plans in part.pages.items()}
    return replace(part, pages=pages)


def _with_notes(atlas: Atlas, links: Links, pages: list[PagePlan]) -> list[PagePlan]:
    """The object pages of the note-free plan with each object's note put in.

    A one-note rebuild so plans no object page again (3 of its 17 s on the 400-object
    synthetic atlas); only the notes are turned into HTML."""
    first = {path: oid for oid, path in links.objects.items() if path}
    out = []
    for page in pages:
        oid = first.get(page.path)
        if oid is not None and page.template == "object.html":
            obj = atlas.objects[oid]
            page = replace(page, context={**page.context, "body": views.render_markdown(
                obj.body, root_of(page.path), links.targets)})
        out.append(page)
    return out


def _download_files(shared: tuple) -> dict[str, str]:
    atlas, results, released = shared
    return downloads.download_texts(atlas, results, study_stats(atlas, results),
                                    released=released)


def plan_site(atlas: Atlas, results: Results, jobs: int = 1, cache: Cache | None = None
              ) -> SitePlan:
    """Every page, data script and file of the site in one language.

    With ``jobs > 1`` the downloadable files (a third of the planning time of a large atlas:
    the stats, every sampled tree relabelled and written) are made in a forked process while
    this one plans the pages (:class:`atlas.parallel.Background`). With a ``cache``, the part
    of the plan that object notes cannot change (:func:`_note_free_plan`) is stored under
    :func:`note_free_key` and taken from there when only notes were edited.
    """
    released = downloads.release_date(os.environ)
    cache = cache or Cache()
    key = note_free_key(atlas) if cache.enabled else ""
    offline = None
    # the downloads show no note text either: kept under the same key and the release date
    texts_key = Hasher(key, repr(released)).hexdigest() if cache.enabled else ""
    texts = cache.get("downloads", texts_key) if cache.enabled else None
    if not atlas.profile.kiosk and not isinstance(texts, dict):  # the kiosk has no downloads
        offline = Background(_download_files, (atlas, results, released), enabled=jobs > 1)
    links = views.make_links(atlas, results)
    notes_by_node = views.clade_notes_by_node(atlas, results)
    # Only images that a published page shows are published: restricted ones never leave.
    media, variants = images.publish_images(atlas, cache, jobs)
    part = cache.get("plan", key) if cache.enabled else None
    if not isinstance(part, NoteFree):
        part = _frozen(_note_free_plan(atlas, results, links, notes_by_node, jobs), variants)
        if cache.enabled:
            cache.put("plan", key, part, keep=2)
    pages: list[PagePlan] = [
        overview.home_page(atlas, results, links, notes_by_node),
        part.pages["tree"][0],
        part.pages["map"][0],
        *paging.paged_glossary(views.glossary_page(atlas, results, links),
                               atlas.i18n.gettext("Glossary")),
        statfigures.methods_page_figures(
            overview.methods_page(atlas, results, links, notes_by_node), part.method_figures),
        overview.credits_page(atlas, links),
        overview.data_page(atlas, links),
    ]
    pages += _with_notes(atlas, links, part.pages["objects"])
    pages += part.pages["nodes"] + part.pages["characters"] + part.pages["places"]
    for page in atlas.pages:
        pages.append(overview.free_page(atlas, links, page))

    search_page, search_data = search.search_plan(atlas, results, links)
    pages.append(search_page)
    download_files: dict[str, str] = {}
    if not atlas.profile.kiosk:
        if offline is not None:
            texts = offline.result()
            if cache.enabled:
                cache.put("downloads", texts_key, texts, keep=2)
        downloads_page, download_files = downloads.downloads_plan(
            atlas, results, links, released=released, texts=texts)
        pages.append(downloads_page)
    pages = [p if isinstance(p, FrozenPage) else images.with_srcset(p, variants) for p in pages]

    data = dict(part.data)
    data.update(search_data)
    copies = {"assets/plotly.min.js": plotly_js()}
    _ = atlas.i18n.gettext
    files = dict(part.files)
    files.update(download_files)
    if not atlas.profile.kiosk:
        files.update(downloads.sitemap(atlas.config.base_url, pages))
    nav = [(_("Lineage tree"), "tree.html"), (_("Distribution map"), "map.html"),
           (_("Glossary"), "glossary.html"), (_("Methods"), "methods.html")]
    nav += [(p.title, links.pages[p.name]) for p in atlas.pages]
    nav.append((_("Search"), "search.html"))
    if not atlas.profile.kiosk:
        nav.append((_("Downloads"), "downloads/index.html"))
    return SitePlan(pages, data, copies, files, links, nav, media)
