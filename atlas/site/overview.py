"""Page contexts for the site-wide pages: home, lineage tree, map, places, methods, credits,
free pages. Like :mod:`atlas.site.views`, plain functions returning plain data.
"""

from __future__ import annotations

from collections import defaultdict, deque
from collections.abc import Callable

import numpy as np

from ..analysis.results import Results
from ..i18n import N_
from ..model import Atlas
from .figures import LayoutNode
from .markdown import plain_text, render_markdown
from .views import (
    REFERENCES,
    Links,
    PagePlan,
    borrowing_rows,
    fmt,
    node_title,
    root_of,
    violation_text,
)

PLOT_SCRIPTS = ("assets/plotly.min.js",)
TREE_SCRIPTS = (*PLOT_SCRIPTS, "data/tree.js", "assets/tree.js")
MAP_SCRIPTS = (*PLOT_SCRIPTS, "data/world.js", "data/basemap.js", "data/places.js",
               "assets/map.js")


def home_page(atlas: Atlas, results: Results, links: Links, notes_by_node) -> PagePlan:
    config = atlas.config
    ngettext = atlas.i18n.ngettext
    visible = atlas.visible_objects()
    lineages = []
    for v, notes in sorted(notes_by_node.items()):
        for note in notes:
            lineages.append({"title": note.title, "href": links.nodes.get(results.ids[v], ""),
                             "summary": plain_text(note.body, 160),
                             "support": fmt(results.summary.support[v]),
                             "count": len(results.members[v]), "lang": note.fallback_lang})
    counts = [
        (str(len(atlas.objects)), ngettext("object", "objects", len(atlas.objects))),
        (str(len(atlas.characters)), ngettext("character", "characters", len(atlas.characters))),
        (str(len(atlas.places)), ngettext("place", "places", len(atlas.places))),
        (str(results.summary.n_trees),
         ngettext("sampled tree", "sampled trees", results.summary.n_trees)),
    ]
    return PagePlan("index.html", "index.html", {
        "kind": "home", "title": config.title, "subtitle": config.subtitle, "counts": counts,
        "lineages": lineages,
        "pages": [{"title": p.title, "href": links.pages[p.name],
                   "summary": plain_text(p.body, 160), "lang": p.fallback_lang}
                  for p in atlas.pages],
        "recent": [{"title": o.title, "href": links.objects[o.id]}
                   for o in sorted(visible, key=lambda o: o.title)[:12]],
    })


OUTLINE_ENTRIES = 250  # at most this many entries in the tree as a list (about 28 KB)


def _unfolded(tree, limit: int = OUTLINE_ENTRIES) -> set[int]:
    """The clades whose members the outline lists: breadth first from the root, while the list
    stays within ``limit`` entries (the root is always open). A clade left folded is one entry
    linking to its own page, which lists its members and draws its part of the tree."""
    unfolded = {tree.root}
    count = 1 + len(tree.children(tree.root))
    queue = deque(c for c in tree.children(tree.root).tolist() if tree.tip[c] < 0)
    while queue:
        v = queue.popleft()
        kids = tree.children(v).tolist()
        if count + len(kids) > limit:
            continue
        unfolded.add(v)
        count += len(kids)
        queue.extend(c for c in kids if tree.tip[c] < 0)
    return unfolded


def _outline(atlas: Atlas, results: Results, links: Links, notes_by_node) -> list[dict]:
    """The tree as open/item/close events: a nested list the template writes without recursion.

    Large trees are shown down to the depth that :func:`_unfolded` allows; a folded clade is a
    ``fold`` event (title, link, support, number of objects)."""
    tree = results.tree
    unfolded = _unfolded(tree)
    events: list[dict] = []
    stack: list[tuple[int, bool]] = [(tree.root, False)]
    while stack:
        v, closing = stack.pop()
        if closing:
            events.append({"event": "close"})
            continue
        nid = results.ids[v]
        if tree.tip[v] >= 0:
            obj = atlas.objects[nid]
            events.append({"event": "tip", "title": obj.title if not obj.withheld else
                           atlas.i18n.gettext("Withheld object"), "href": links.objects[nid]})
            continue
        if v not in unfolded:
            events.append({"event": "fold", "title": node_title(atlas, results, v, notes_by_node),
                           "href": links.nodes[nid], "support": fmt(results.summary.support[v]),
                           "count": len(results.members[v])})
            continue
        events.append({"event": "open", "title": node_title(atlas, results, v, notes_by_node),
                       "href": links.nodes[nid], "support": fmt(results.summary.support[v])})
        stack.append((v, True))
        for c in reversed(tree.children(v).tolist()):
            stack.append((c, False))
    return events


SUMMARY_METHODS = {"majority": N_("majority-rule consensus"),
                   "mcc": N_("maximum clade credibility tree"),
                   "given": N_("summary tree given with the study")}


def tree_page(atlas: Atlas, results: Results, links: Links, notes_by_node,
              use_lengths: bool) -> PagePlan:
    summary = results.summary
    _ = atlas.i18n.gettext
    method = _(SUMMARY_METHODS[summary.method])
    internal = [v for v in range(results.tree.n_nodes) if results.tree.tip[v] < 0
                and v != results.tree.root]
    supports = summary.support[internal] if internal else np.array([])
    outline = _outline(atlas, results, links, notes_by_node)
    return PagePlan("tree.html", "tree.html", {
        "kind": "tree", "title": _("Lineage tree"),
        "method": method, "n_trees": summary.n_trees,
        "axis": _("branch lengths as given in the trees") if use_lengths else _("equal steps"),
        "outgroup": [atlas.objects[o].title for o in atlas.config.analysis["outgroup"]],
        "n_clades": len(internal),
        "well_supported": int(np.sum(supports >= 0.95)) if len(supports) else 0,
        "outline": outline, "outline_folded": any(e["event"] == "fold" for e in outline),
    }, scripts=TREE_SCRIPTS)


def _place_rows(atlas: Atlas, links: Links) -> tuple[list[dict], list[dict]]:
    by_place: dict[str, list] = defaultdict(list)
    unplaced = []
    _ = atlas.i18n.gettext
    for obj in atlas.visible_objects():
        place = atlas.places.get(obj.place) if obj.place else None
        if place is None or not place.has_coordinates:
            unplaced.append({"title": obj.title, "href": links.objects[obj.id],
                             "why": _("location withheld") if obj.place_withheld or (
                                 place is not None and place.precision == "withheld")
                             else _("no coordinates") if place is not None
                             else _("no place recorded")})
        by_place[obj.place or ""].append(obj)
    rows = []
    for pid, place in sorted(atlas.places.items(), key=lambda kv: kv[1].name):
        rows.append({"name": place.name, "href": links.places[pid],
                     "count": len(by_place.get(pid, [])),
                     "where": _where(atlas, place)})
    unplaced.sort(key=lambda r: r["title"])
    return rows, unplaced


def _where(atlas: Atlas, place) -> str:
    _ = atlas.i18n.gettext
    if place.precision == "withheld":
        return _("withheld")
    if not place.has_coordinates:
        return _("no coordinates")
    if place.precision == "generalised":
        return _("about {lat}, {lon} (generalised)").format(lat=fmt(place.lat, 1),
                                                            lon=fmt(place.lon, 1))
    return f"{fmt(place.lat, 4)}, {fmt(place.lon, 4)}"


def map_page(atlas: Atlas, results: Results, links: Links,
             legend: list[tuple[int, str]] = ()) -> PagePlan:
    rows, unplaced = _place_rows(atlas, links)
    return PagePlan("map.html", "map.html", {
        "kind": "map", "title": atlas.i18n.gettext("Distribution map"), "places": rows,
        "unplaced": unplaced,
        "legend": [{"index": k, "title": t} for k, t in legend],
        "has_generalised": any(p.precision == "generalised" for p in atlas.places.values()),
    }, scripts=MAP_SCRIPTS)


def place_page(atlas: Atlas, results: Results, links: Links, pid: str) -> PagePlan:
    place = atlas.places[pid]
    path = links.places[pid]
    root = root_of(path)
    objects = [o for o in atlas.visible_objects() if o.place == pid]
    _ = atlas.i18n.gettext
    facts = [(_("Place id"), pid), (_("Coordinates"), _where(atlas, place))]
    for lang, name in sorted(place.names.items()):
        facts.append((_("Name ({lang})").format(lang=lang), name))
    return PagePlan(path, "place.html", {
        "kind": "place", "title": place.name, "facts": facts, "place_id": pid,
        "static_map": f"figures/places/{path.rsplit('/', 1)[1][:-5]}.svg"
        if place.has_coordinates and place.precision != "withheld" else "",
        "precision": place.precision, "mapped": place.has_coordinates,
        "objects": [{"title": o.title, "href": root + links.objects[o.id],
                     "period": o.period, "community": o.community}
                    for o in sorted(objects, key=lambda o: o.title)],
        "breadcrumbs": [(_("Distribution map"), root + "map.html")],
    }, scripts=MAP_SCRIPTS if place.has_coordinates else ())


def _diagnostics(atlas: Atlas, results: Results, links: Links, notes_by_node) -> dict:
    diag = results.diagnostics
    by_taxon = {o.taxon: o for o in atlas.objects.values()}
    top = []
    if diag.delta is not None:
        for k in np.argsort(-diag.delta.delta, kind="stable").tolist():
            obj = by_taxon[diag.delta_taxa[k]]
            if obj.withheld:
                continue
            top.append({"title": obj.title, "href": links.objects[obj.id],
                        "delta": fmt(float(diag.delta.delta[k]), 3),
                        "q": fmt(float(diag.delta.q_residual[k]), 4)})
            if len(top) == 8:
                break
    facts = []
    _, number = atlas.i18n.gettext, atlas.i18n.number
    if diag.delta is not None:
        quartets = number(diag.delta.n_quartets)
        facts += [(_("Mean delta score"), number(diag.delta.mean_delta, 3)),
                  (_("Mean Q-residual"), number(diag.delta.mean_q_residual, 4)),
                  (_("Quartets"), (_("{n} (a seeded sample)") if diag.delta.sampled
                                   else _("{n} (all)")).format(n=quartets))]
    if diag.mantel is not None:
        facts += [(_("Mantel r, geographic against patristic distance"),
                   number(diag.mantel.r, 3)),
                  (_("Mantel p"), _("{p} ({permutations} permutations, {n} objects with "
                                    "coordinates)").format(
                                        p=number(diag.mantel.p, 3),
                                        permutations=number(diag.mantel.permutations),
                                        n=number(diag.mantel.n)))]
    tips = results.tree.tip >= 0
    if diag.from_root is not None:
        values = diag.from_root[tips]
        facts += [(_("Expected changes from the root to an object"),
                   _("median {median}, range {low} to {high}").format(
                       median=number(float(np.median(values)), 2),
                       low=number(float(values.min()), 2), high=number(float(values.max()), 2)))]
    violations = []
    for x in diag.violations:
        violations.append({"title": node_title(atlas, results, x.node, notes_by_node),
                           "href": links.nodes[results.ids[x.node]],
                           "text": violation_text(atlas, x)})
    return {"facts": facts, "top": top, "violations": violations,
            "borrowing": borrowing_rows(atlas, results, links, "", notes_by_node)}


def methods_page(atlas: Atlas, results: Results, links: Links, notes_by_node) -> PagePlan:
    sample = atlas.sample
    analysis = atlas.config.analysis
    n_taxa = len(atlas.taxa)
    cells = atlas.cells
    coded = [row for row in cells if row]
    total_cells = sum(len(r) for r in coded)
    missing = sum(1 for r in coded for c in r if c in ("?", ""))
    gaps = sum(1 for r in coded for c in r if c == "-")
    poly = sum(1 for r in coded for c in r if "/" in c)
    par = results.parsimony
    summary = results.summary
    internal = [v for v in range(results.tree.n_nodes)
                if results.tree.tip[v] < 0 and v != results.tree.root]
    supports = summary.support[internal] if internal else np.array([])
    _, number, percent = atlas.i18n.gettext, atlas.i18n.number, atlas.i18n.percent
    data = [
        (_("Objects (tips of the trees)"), number(n_taxa)),
        (_("Objects without a matrix row"), number(n_taxa - len(coded))),
        (_("Discrete characters"), number(len(atlas.discrete))),
        (_("Continuous characters"), number(len(atlas.continuous_characters))),
        (_("Unknown cells (?)"),
         _("{n} of {total} ({percent})").format(
             n=number(missing), total=number(total_cells),
             percent=percent(missing / max(total_cells, 1), 1))),
        (_("Not applicable cells (-)"), number(gaps)),
        (_("Polymorphic cells"), number(poly)),
    ]
    trees = [
        (_("Tree file"), sample.file),
        (_("Trees read"), number(sample.read)),
        (_("Burn-in"), _("{n} trees ({percent})").format(
            n=number(sample.burnin), percent=percent(analysis["burnin"]))),
        (_("Trees used"), number(len(sample.trees))),
        (_("Trees averaged for ancestral states"),
         number(min(len(sample.trees), analysis["ancestral_trees"] or len(sample.trees)))),
        (_("Summary tree"), _(SUMMARY_METHODS[summary.method])),
        (_("Outgroup"), ", ".join(analysis["outgroup"]) or _("none: trees are rooted as written")),
        (_("Clades in the summary tree"), number(len(internal))),
        (_("Clades with support of 0.95 or more"), number(int(np.sum(supports >= 0.95)))),
    ]
    parsimony = [(_("Tree length (steps)"), number(int(par.length)))]
    for label, attr in ((_("Ensemble consistency index (CI)"), "ensemble_ci"),
                        (_("Ensemble retention index (RI)"), "ensemble_ri"),
                        (_("Rescaled consistency index (RC)"), "ensemble_rc")):
        parsimony.append((label, number(float(getattr(results.indices, attr)), 3)))
    model = []
    fit = results.fit
    if fit is not None:
        model = [(_("Model"), {"mk": _("Mk (equal rates)"),
                               "mk-gain-loss": _("Mk with separate gain and loss rates")}[
                                   fit.model]
                  + (_(", Mkv correction for variable characters") if fit.variable_only else "")),
                 (_("Rate variation"), _("four discrete gamma categories")
                  if fit.alpha is not None else _("equal rates")),
                 *[(_("Rate ({name})").format(name=k), number(f"{v:.4g}"))
                   for k, v in sorted(fit.rates.items())],
                 *([(_("Gamma shape (alpha)"), number(f"{fit.alpha:.3g}"))]
                   if fit.alpha is not None else []),
                 (_("Log-likelihood"), number(fit.loglik, 2))]
    numbers = {"n": number(len(sample.trees)), "burnin": number(sample.burnin),
               "read": number(sample.read)}
    first = (_("The atlas summarises {n} trees sampled after discarding the first {burnin} of "
               "{read} as burn-in, as a majority-rule consensus tree with clade support given as "
               "the fraction of sampled trees that contain each clade.")
             if summary.method == "majority" else
             _("The atlas summarises {n} trees sampled after discarding the first {burnin} of "
               "{read} as burn-in, as a summary tree with clade support given as the fraction "
               "of sampled trees that contain each clade.")).format(**numbers)
    second = (_("Ancestral states were reconstructed by parsimony (Fitch 1971) and by maximum "
                "likelihood under the Mk model (Lewis 2001) with gamma-distributed rates across "
                "characters (Yang 1994); state probabilities at each clade are averaged over the "
                "sampled trees that contain it, and expected numbers of changes per branch "
                "follow Minin & Suchard (2008).")
              if fit is not None and fit.alpha is not None else
              _("Ancestral states were reconstructed by parsimony (Fitch 1971) and by maximum "
                "likelihood under the Mk model (Lewis 2001); state probabilities at each clade "
                "are averaged over the sampled trees that contain it, and expected numbers of "
                "changes per branch follow Minin & Suchard (2008)."))
    paragraph = first + " " + second
    return PagePlan("methods.html", "methods.html", {
        "kind": "methods", "title": _("Methods"), "paragraph": paragraph, "data": data,
        "trees": trees, "parsimony": parsimony, "model": model,
        "references": [REFERENCES[k] for k in ("margush", "fitch", "kluge", "farris", "lewis",
                                               "collard", "yang", "minin", "holland", "gray",
                                               "mantel")],
        "gaps": _gaps(atlas, links),
        "diagnostics": _diagnostics(atlas, results, links, notes_by_node),
    })


def _gaps(atlas: Atlas, links: Links) -> list[dict]:
    """Published objects with missing data, by kind (withheld objects are not named)."""
    visible = sorted(atlas.visible_objects(), key=lambda o: o.title)
    ngettext = atlas.i18n.ngettext
    kinds = [
        ("without a row in the trait matrix (their traits are unknown)",
         [o for o in visible if not o.has_row],
         lambda n: ngettext("{n} object without a row in the trait matrix (its traits are "
                            "unknown)", "{n} objects without a row in the trait matrix (their "
                            "traits are unknown)", n)),
        ("without a note", [o for o in visible if not o.has_note],
         lambda n: ngettext("{n} object without a note", "{n} objects without a note", n)),
        ("without a place on the map", [
            o for o in visible if not (o.place and atlas.places[o.place].has_coordinates
                                       and atlas.places[o.place].precision != "withheld")],
         lambda n: ngettext("{n} object without a place on the map",
                            "{n} objects without a place on the map", n)),
    ]
    return [{"what": what, "heading": heading(len(objs)).format(n=atlas.i18n.number(len(objs))),
             "objects": [{"title": o.title, "href": links.objects[o.id]} for o in objs]}
            for what, objs, heading in kinds if objs]


def credits_page(atlas: Atlas, links: Links) -> PagePlan:
    images = []
    for obj in atlas.visible_objects():
        for im in obj.images:
            images.append({"file": im.file, "credit": im.credit, "licence": im.licence,
                           "of": obj.title, "href": links.objects[obj.id]})
    for c in atlas.characters:
        if c.image is not None:
            images.append({"file": c.image.file, "credit": c.image.credit,
                           "licence": c.image.licence, "of": c.label,
                           "href": links.characters[c.id]})
    images.sort(key=lambda r: (r["file"], r["of"]))
    return PagePlan("credits.html", "credits.html", {
        "kind": "credits", "title": atlas.i18n.gettext("Credits"),
        "licence": atlas.config.licence,
        "credits": list(atlas.config.credits),
        "images": images,
    })


def data_page(atlas: Atlas, links: Links) -> PagePlan:
    """"About this data": what the published atlas leaves out, and the cautions that go with
    publishing find-spots and community material."""
    objects = atlas.objects.values()
    generalised = sorted(p.name for p in atlas.places.values() if p.precision == "generalised")
    withheld_places = sum(1 for p in atlas.places.values() if p.precision == "withheld")
    return PagePlan("about-data.html", "about-data.html", {
        "kind": "about-data", "title": atlas.i18n.gettext("About this data"),
        "profile": atlas.profile.name, "levels": list(atlas.profile.access),
        "withheld": sum(1 for o in objects if o.withheld),
        "generalised": generalised, "withheld_places": withheld_places,
        "licence": atlas.config.licence,
    })


def free_page(atlas: Atlas, links: Links, page) -> PagePlan:
    path = links.pages[page.name]
    return PagePlan(path, "page.html", {
        "kind": "page", "title": page.title, "lang": page.fallback_lang,
        "body": render_markdown(page.body, root_of(path), links.targets),
    })


def layout_data(layout: list[LayoutNode], use_lengths: bool, outgroup,
                gettext: Callable[[str], str] = str) -> dict:
    _ = gettext
    return {
        "nodes": [{"id": n.id if not n.withheld else "", "kind": n.kind, "x": n.x, "y": n.y,
                   "parent": n.parent, "label": n.label, "href": n.href,
                   "support": n.support, "withheld": n.withheld} for n in layout],
        "x_title": _("Branch length") if use_lengths else _("Steps from the root"),
        "x_axis": "depth",
        "outgroup": list(outgroup),
    }
