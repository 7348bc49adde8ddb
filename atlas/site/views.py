"""Page contexts: one plain function per page type, computing everything its template shows.

Templates only format. Each ``*_page`` function takes the linked atlas, the analysis results
and the site's shared :class:`Links`, and returns a :class:`PagePlan` whose ``context`` is
plain data (strings, numbers, lists, dicts), so tests can call it and inspect what a page will
say without rendering anything.
"""

from __future__ import annotations

import math
import pickle
from collections import Counter, defaultdict
from dataclasses import dataclass, field, replace

import numpy as np
from markupsafe import Markup, escape

from ..analysis.results import Results
from ..link import slug
from ..model import ArtObject, Atlas, Character
from . import ledger
from .figures import LayoutNode, neighbourhood, tree_svg
from .markdown import Targets, render_markdown

UNCERTAIN = 0.7  # a reconstruction whose most probable state has less than this is "uncertain"
REFERENCES = {
    "fitch": "Fitch, W. M. (1971). Toward defining the course of evolution: minimum change for a "
             "specific tree topology. Systematic Zoology 20: 406-416.",
    "farris": "Farris, J. S. (1989). The retention index and the rescaled consistency index. "
              "Cladistics 5: 417-419.",
    "kluge": "Kluge, A. G. & Farris, J. S. (1969). Quantitative phyletics and the evolution of "
             "anurans. Systematic Zoology 18: 1-32.",
    "lewis": "Lewis, P. O. (2001). A likelihood approach to estimating phylogeny from discrete "
             "morphological character data. Systematic Biology 50: 913-925.",
    "yang": "Yang, Z. (1994). Maximum likelihood phylogenetic estimation from DNA sequences with "
            "variable rates over sites: approximate methods. Journal of Molecular Evolution 39: "
            "306-314.",
    "minin": "Minin, V. N. & Suchard, M. A. (2008). Counting labeled transitions in "
             "continuous-time Markov models of evolution. Journal of Mathematical Biology 56: "
             "391-412.",
    "collard": "Collard, M., Shennan, S. J. & Tehrani, J. J. (2006). Branching, blending, and the "
               "evolution of cultural similarities and differences among human populations. "
               "Evolution and Human Behavior 27: 169-184.",
    "holland": "Holland, B. R., Huber, K. T., Dress, A. & Moulton, V. (2002). Delta plots: a tool "
               "for analyzing phylogenetic distance data. Molecular Biology and Evolution 19: "
               "2051-2059.",
    "gray": "Gray, R. D., Bryant, D. & Greenhill, S. J. (2010). On the shape and fabric of human "
            "history. Philosophical Transactions of the Royal Society B 365: 3923-3933.",
    "mantel": "Mantel, N. (1967). The detection of disease clustering and a generalized "
              "regression approach. Cancer Research 27: 209-220.",
    "margush": "Margush, T. & McMorris, F. R. (1981). Consensus n-trees. Bulletin of "
               "Mathematical Biology 43: 239-244.",
}


@dataclass(frozen=True)
class PagePlan:
    path: str  # output path, e.g. "objects/lamp-03.html"
    template: str
    context: dict
    scripts: tuple[str, ...] = ()  # site-root-relative script paths, in load order


class FrozenPage:
    """A planned page kept as the pickle of ``(path, template, scripts, context)``.

    The note-free plan (``plan._note_free_plan``) stores its pages so: a rebuild reads them
    as bytes, keys them by those bytes (``renderpool.page_key``) and unpickles a context only
    for a page it must render again. Unpickling every clade and character context took most
    of the planning of a one-note rebuild (the 1,000-object synthetic atlas's plan entry holds
    some 200,000 rows). ``context`` thaws on first use; otherwise it reads as a
    :class:`PagePlan`.
    """

    __slots__ = ("path", "template", "scripts", "blob", "_context")

    def __init__(self, path: str, template: str, scripts: tuple[str, ...], blob: bytes):
        self.path, self.template, self.scripts, self.blob = path, template, scripts, blob
        self._context = None

    @classmethod
    def of(cls, page: PagePlan) -> FrozenPage | PagePlan:
        """``page`` frozen, or as it is when its context cannot be pickled."""
        try:
            blob = pickle.dumps((page.path, page.template, page.scripts, page.context),
                                protocol=pickle.HIGHEST_PROTOCOL)
        except (pickle.PicklingError, TypeError, AttributeError):
            return page
        return cls(page.path, page.template, page.scripts, blob)

    @property
    def context(self) -> dict:
        if self._context is None:
            self._context = pickle.loads(self.blob)[3]
        return self._context

    def moved(self, path: str) -> FrozenPage:
        """The same page listed under another path (the context keeps its own)."""
        return FrozenPage(path, self.template, self.scripts, self.blob)

    def __getstate__(self):
        return (self.path, self.template, self.scripts, self.blob)

    def __setstate__(self, state) -> None:
        self.path, self.template, self.scripts, self.blob = state
        self._context = None


def moved(page: PagePlan | FrozenPage, path: str) -> PagePlan | FrozenPage:
    """``page`` under another output path (a language's prefix added)."""
    return page.moved(path) if isinstance(page, FrozenPage) else replace(page, path=path)


def root_of(path: str) -> str:
    """The relative prefix from a page to the site root: ``""`` or ``"../"``."""
    return "../" * path.count("/")


def fmt(value: float | None, digits: int = 2) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "–"
    return f"{value:.{digits}f}"


@dataclass(frozen=True)
class Links:
    """Where everything lives in the site, computed once."""

    objects: dict[str, str]  # object id -> "objects/<slug>.html" ("" when withheld)
    characters: dict[str, str]
    places: dict[str, str]
    nodes: dict[str, str]  # node id -> "nodes/<id>.html"
    pages: dict[str, str]
    targets: Targets = field(default=Targets({}, frozenset()))


def _unique_slugs(ids) -> dict[str, str]:
    out: dict[str, str] = {}
    used: set[str] = set()
    for i in ids:
        base = slug(i)
        s, n = base, 2
        while s.lower() in used:
            s, n = f"{base}-{n}", n + 1
        used.add(s.lower())
        out[i] = s
    return out


def make_links(atlas: Atlas, results: Results) -> Links:
    objects = {oid: (f"objects/{s}.html" if not atlas.objects[oid].withheld else "")
               for oid, s in _unique_slugs(sorted(atlas.objects)).items()}
    characters = {cid: f"characters/{s}.html"
                  for cid, s in _unique_slugs([c.id for c in atlas.characters]).items()}
    places = {pid: f"places/{s}.html" for pid, s in _unique_slugs(sorted(atlas.places)).items()}
    nodes = {nid: f"nodes/{nid}.html" for v, nid in enumerate(results.ids)
             if results.tree.tip[v] < 0}
    pages = {p.name: f"pages/{p.name}.html" for p in atlas.pages}
    stem = lambda m: {k: v.rsplit("/", 1)[1][:-5] for k, v in m.items() if v}  # noqa: E731
    targets = Targets(
        {"object": stem(objects), "character": stem(characters), "place": stem(places),
         "node": stem(nodes), "page": stem(pages)},
        frozenset(atlas.media),
    )
    return Links(objects, characters, places, nodes, pages, targets)


# --- shared pieces ------------------------------------------------------------------------

def node_title(atlas: Atlas, results: Results, v: int, notes_by_node: dict[int, list]) -> str:
    tree = results.tree
    if tree.tip[v] >= 0:
        return atlas.objects[results.ids[v]].title
    if notes_by_node.get(v):
        return notes_by_node[v][0].title
    n = len(results.members[v])
    if v == tree.root:
        return atlas.i18n.gettext("Root of the tree")
    return atlas.i18n.ngettext("Clade of {n} object", "Clade of {n} objects", n).format(
        n=atlas.i18n.number(n))


def fallback_lang(atlas: Atlas, item) -> str:
    """The ``lang`` a page gives a note (or a character's label) shown untranslated (``""``
    when it is translated or the page is in the note's language); for an item that carries
    no ``fallback_lang``, the default language on every other language's pages."""
    lang = getattr(item, "fallback_lang", None)
    if lang is None:
        default = atlas.config.languages[0]
        return default if atlas.i18n.lang != default else ""
    return lang


def clade_notes_by_node(atlas: Atlas, results: Results) -> dict[int, list]:
    """Each clade note at the most recent common ancestor of its members in the summary tree."""
    tree = results.tree
    index = {t: i for i, t in enumerate(tree.taxa)}
    masks = [sum(1 << index[m] for m in mem) for mem in results.members]
    out: dict[int, list] = defaultdict(list)
    for note in atlas.clade_notes:
        want = sum(1 << index[m] for m in note.members)
        # The smallest clade containing every member: postorder finds it first.
        for v in range(tree.n_nodes):
            if masks[v] & want == want:
                out[v].append(note)
                break
    return dict(out)


FIGURE_TIPS = 24  # larger neighbourhoods are not drawn inline (about 10 KB of SVG at 24)


MEMBER_CHIPS = 100  # a clade page lists at most this many objects (its sub-clades list all)
# Lists that grow with the size of the study are cut, largest first, so that no page outgrows
# the page-weight budget; the page says how many more there are, and the downloads (stats.json,
# matrix.csv) hold every row. On the 400-object synthetic atlas these lists made 62 character
# pages and 10 clade pages weigh 60-97 KB.
STATE_CHIPS = 40  # objects named per state on a character page
CHANGE_ROWS = 30  # branches (character page) or characters (clade page) with the most change
BORROWED_CHARACTERS = 8  # characters named per row of a borrowing table
DEFINING_ROWS = 20  # defining traits named on a clade page (the strongest)
PLACE_CHIPS = 60  # places named on a clade page (those with most of its objects); the map has all


def _drawable(local: list[LayoutNode]) -> bool:
    """Small enough to draw on the page? A clade of hundreds of tips would weigh more than the
    page budget; the page links to the lineage tree instead."""
    return sum(1 for n in local if n.kind == "tip") <= FIGURE_TIPS


def _member_chips(atlas: Atlas, links: Links, root: str, members) -> list[dict]:
    chips = []
    for m in members:
        obj = atlas.objects[m]
        chips.append({"label": obj.title if not obj.withheld
                      else atlas.i18n.gettext("Withheld object"),
                      "href": root + links.objects[m] if links.objects[m] else "",
                      "id": "" if obj.withheld else m})
    return chips


def _state_text(atlas: Atlas, c: Character, cell: str) -> tuple[str, str]:
    """(symbol, description) of a matrix cell as a reader should see it."""
    _ = atlas.i18n.gettext
    if cell in ("", "?"):
        return "?", _("unknown")
    if cell == "-":
        return "-", _("not applicable")
    parts = cell.split("/")
    return cell, _(" or ").join(c.describe(p) for p in parts)


def _symbols_of(c: Character, mask: int) -> str:
    return "/".join(s for k, s in enumerate(c.symbols) if mask >> k & 1) or "?"


def _layout_highlight(layout: list[LayoutNode], v: int) -> set[int]:
    path = set()
    while v >= 0:
        path.add(v)
        v = layout[v].parent
    return path


# --- page builders ------------------------------------------------------------------------

def object_page(atlas: Atlas, results: Results, links: Links, layout: list[LayoutNode],
                obj: ArtObject, notes_by_node) -> PagePlan:
    path = links.objects[obj.id]
    root = root_of(path)
    v = results.ids.index(obj.id)
    tree = results.tree
    place = atlas.places.get(obj.place) if obj.place else None
    _ = atlas.i18n.gettext
    facts = [(_("Object id"), obj.id)]
    if obj.community:
        facts.append((_("Community"), obj.community))
    if obj.period:
        facts.append((_("Period"), obj.period))
    location = {"kind": "none", "text": _("No place recorded"), "href": ""}
    if place is not None:
        if place.precision == "withheld" or not place.has_coordinates:
            text = (_("{place}: location withheld") if place.precision == "withheld"
                    else _("{place}: no coordinates")).format(place=place.name)
            location = {"kind": "withheld", "text": text,
                        "href": root + links.places[place.id]}
        else:
            where = f"{place.name} ({fmt(place.lat, 4)}, {fmt(place.lon, 4)})"
            if place.precision == "generalised":
                where = _("{place} (shown on a 1° grid to protect the find-spot)").format(
                    place=place.name)
            location = {"kind": place.precision, "text": where,
                        "href": root + links.places[place.id]}
    elif obj.place_withheld:
        location = {"kind": "withheld", "text": _("Location withheld"), "href": ""}
    # Traits as coded, by group.
    cells = atlas.cells[obj.taxon]
    groups: dict[str, list[dict]] = defaultdict(list)
    for j, c in enumerate(atlas.characters):
        cell = cells[j] if cells else ""
        symbol, description = (cell or "?", _("unknown")) if c.kind == "continuous" and cell in (
            "", "?", "-") else ((cell, cell) if c.kind == "continuous"
                                else _state_text(atlas, c, cell))
        evidence = ledger.cell_evidence(atlas, obj, c, root)
        groups[c.group].append({"label": c.label, "href": root + links.characters[c.id],
                                "lang": c.fallback_lang, "symbol": symbol,
                                "description": description, "description_lang":
                                c.state_lang(c.symbols.index(cell)) if cell in c.symbols
                                else "",
                                "unknown": symbol in ("?", "-"), "evidence": evidence,
                                "ledger": root + links.characters[c.id] + "#"
                                + ledger.anchor(links, obj.id) if evidence else ""})
    # The lineage: every ancestor from the root down.
    ancestors = []
    p = int(tree.parent[v])
    while p >= 0:
        ancestors.append({"title": node_title(atlas, results, p, notes_by_node),
                          "href": root + links.nodes[results.ids[p]],
                          "support": fmt(results.summary.support[p])})
        p = int(tree.parent[p])
    ancestors.reverse()
    parent = int(tree.parent[v])
    local = neighbourhood(layout, parent if parent >= 0 else v)
    focus = next(n.index for n in local if n.id == obj.id)
    svg = tree_svg(local, root, highlight=_layout_highlight(local, focus), width=560,
                   title=_("Where {title} stands among its closest relatives").format(
                       title=obj.title), tr=atlas.i18n) if _drawable(local) else ""
    images = [{"src": root + "media/" + im.file, "alt": im.alt, "credit": im.credit,
               "licence": im.licence, "caption": im.caption} for im in obj.images]
    diagnostics = _object_diagnostics(atlas, results, links, obj, v, root, notes_by_node)
    static_map = ""
    if place is not None and place.has_coordinates and place.precision != "withheld":
        static_map = root + "figures/places/" + links.places[place.id].rsplit("/", 1)[1][:-5] \
            + ".svg"
    return PagePlan(path, "object.html", {
        "kind": "object", "title": obj.title, "object": {"id": obj.id, "title": obj.title},
        "facts": facts, "location": location, "images": images,
        "body": render_markdown(obj.body, root, links.targets),
        "has_note": obj.has_note, "has_row": obj.has_row, "has_evidence": bool(atlas.evidence),
        "groups": [{"name": g, "rows": rows} for g, rows in groups.items()],
        "ancestors": ancestors, "svg": svg,
        "sources": list(obj.sources), "diagnostics": diagnostics, "static_map": static_map,
        "contacts": _contacts_of(atlas, links, root, {obj.id}),
        "breadcrumbs": [(_("Lineage tree"), root + "tree.html")],
        "lang": fallback_lang(atlas, obj),
    })


def _lineage_link(atlas: Atlas, results: Results, links: Links, v: int, root: str,
                  notes_by_node) -> dict:
    nid = results.ids[v]
    if results.tree.tip[v] >= 0:
        obj = atlas.objects[nid]
        href = links.objects[nid]
        return {"title": obj.title if not obj.withheld
                else atlas.i18n.gettext("Withheld object"),
                "href": root + href if href else ""}
    return {"title": node_title(atlas, results, v, notes_by_node),
            "href": root + links.nodes[nid]}


def borrowing_rows(atlas: Atlas, results: Results, links: Links, root: str, notes_by_node,
                   involving: int | None = None, limit: int = 10) -> list[dict]:
    """Candidate borrowing between lineages, ranked, as table rows (withheld tips left out)."""
    rows = []
    discrete = atlas.discrete
    diag = results.diagnostics
    for c in diag.borrowing if involving is None else diag.borrowing_by_node.get(involving, ()):
        ends = [_lineage_link(atlas, results, links, x, root, notes_by_node) for x in (c.a, c.b)]
        if any(e["title"] == atlas.i18n.gettext("Withheld object") for e in ends):
            continue
        rows.append({"a": ends[0], "b": ends[1], "score": fmt(c.score),
                     "characters": [{"label": discrete[j].label,
                                     "href": root + links.characters[discrete[j].id]}
                                    for j in c.characters[:BORROWED_CHARACTERS]],
                     "characters_more": max(0, len(c.characters) - BORROWED_CHARACTERS),
                     "distance": "–" if c.distance is None or not math.isfinite(c.distance)
                     else atlas.i18n.gettext("{distance} km").format(
                         distance=atlas.i18n.number(c.distance, 0))})
        if len(rows) >= limit:
            break
    return rows


def _contacts_of(atlas: Atlas, links: Links, root: str, names: set[str]) -> list[dict]:
    """Declared contacts with either end among ``names`` (object ids or clade-note names)."""
    out = []
    by_id = {c.id: c for c in atlas.characters}
    for c in atlas.contacts:
        if c.source not in names and c.target not in names:
            continue
        other = c.target if c.source in names else c.source
        if other in atlas.objects:
            href = links.objects[other]
            label = atlas.objects[other].title
        else:
            href, label = "", next((n.title for n in atlas.clade_notes if n.name == other), other)
        out.append({"direction": "from" if c.target in names else "to", "other": label,
                    "href": root + href if href else "", "note": c.note,
                    "characters": [{"label": by_id[ch].label,
                                    "href": root + links.characters[ch]}
                                   for ch in c.characters if ch in by_id]})
    return out


def _object_diagnostics(atlas: Atlas, results: Results, links: Links, obj: ArtObject, v: int,
                        root: str, notes_by_node) -> dict:
    diag = results.diagnostics
    delta = diag.delta_of(obj.taxon)
    rank = None
    if delta is not None:
        order = np.argsort(-diag.delta.delta, kind="stable").tolist()
        rank = order.index(diag.delta_taxa.index(obj.taxon)) + 1
    from_root = diag.from_root
    return {
        "delta": fmt(delta[0], 3) if delta else "",
        "q_residual": fmt(delta[1], 4) if delta else "",
        "rank": atlas.i18n.gettext("{rank} of {n}").format(
            rank=atlas.i18n.number(rank), n=atlas.i18n.number(len(diag.delta_taxa)))
        if rank else "",
        "mean_delta": fmt(diag.delta.mean_delta, 3) if diag.delta is not None else "",
        "from_root": fmt(float(from_root[v])) if from_root is not None else "",
        "median_from_root": fmt(float(np.median(from_root[results.tree.tip >= 0])))
        if from_root is not None else "",
        "borrowing": borrowing_rows(atlas, results, links, root, notes_by_node, involving=v),
    }


def node_page(atlas: Atlas, results: Results, links: Links, layout: list[LayoutNode], v: int,
              notes_by_node) -> PagePlan:
    tree = results.tree
    nid = results.ids[v]
    path = links.nodes[nid]
    root = root_of(path)
    support = results.summary.support[v]
    count = int(results.summary.count[v])
    n_trees = results.summary.n_trees
    title = node_title(atlas, results, v, notes_by_node)
    _, ngettext, number = atlas.i18n.gettext, atlas.i18n.ngettext, atlas.i18n.number
    facts = [
        (_("Node id"), nid),
        (_("Posterior probability (clade support)"), number(support, 2)),
        (_("Sampled trees with this clade"), _("{rank} of {n}").format(rank=number(count),
                                                                      n=number(n_trees))),
        (_("Objects in the clade"), number(len(results.members[v]))),
    ]
    if results.fit is not None:
        n = int(results.prob_trees[v])
        facts.append((_("Reconstruction averaged over"),
                      ngettext("{n} sampled tree", "{n} sampled trees", n).format(n=number(n))))
    parent = int(tree.parent[v])
    up = None
    if parent >= 0:
        up = {"title": node_title(atlas, results, parent, notes_by_node),
              "href": root + links.nodes[results.ids[parent]]}
    children = []
    for c in tree.children(v).tolist():
        cid = results.ids[c]
        if tree.tip[c] >= 0:
            obj = atlas.objects[cid]
            href = links.objects[cid]
            children.append({"title": obj.title if not obj.withheld
                             else _("Withheld object"),
                             "href": root + href if href else "", "kind": "object",
                             "support": ""})
        else:
            children.append({"title": node_title(atlas, results, c, notes_by_node),
                             "href": root + links.nodes[cid], "kind": "clade",
                             "support": fmt(results.summary.support[c])})
    groups = _reconstruction(atlas, results, links, v, root)
    stem = _stem_changes(atlas, results, links, v, root)
    defining, defining_more = defining_traits(atlas, results, links, v, root)
    notes = [{"title": n.title, "body": render_markdown(n.body, root, links.targets),
              "lang": fallback_lang(atlas, n)} for n in notes_by_node.get(v, [])]
    local = neighbourhood(layout, v)
    focus = next(n.index for n in local if n.id == nid)
    svg = tree_svg(local, root, highlight=_layout_highlight(local, focus), width=560,
                   title=_("The clade below {title}").format(title=title), tr=atlas.i18n) \
        if _drawable(local) else ""
    per_place = Counter(atlas.objects[m].place for m in results.members[v]
                        if atlas.objects[m].place and atlas.objects[m].place in atlas.places)
    places = sorted(per_place)
    rng = results.diagnostics.ranges.get(v)
    if rng is not None:
        facts.append((_("Range of its places"), _(
            "{n} places, about {spread} km from their centre, hull {area} km²").format(
                n=number(rng.n), spread=number(rng.spread_km, 0),
                area=number(rng.area_km2, 0))))
    violations = [{"text": violation_text(atlas, x), "note": x.rule.note}
                  for x in results.diagnostics.violations if x.node == v]
    names = {n.name for n in notes_by_node.get(v, [])}
    return PagePlan(path, "node.html", {
        "kind": "node", "title": title, "node_id": nid, "facts": facts, "up": up,
        "violations": violations,
        "borrowing": borrowing_rows(atlas, results, links, root, notes_by_node, involving=v),
        "contacts": _contacts_of(atlas, links, root, names),
        "children": children,
        "members": _member_chips(atlas, links, root, results.members[v][:MEMBER_CHIPS]),
        "members_more": max(0, len(results.members[v]) - MEMBER_CHIPS),
        "groups": groups, "stem": stem[:CHANGE_ROWS],
        "stem_more": max(0, len(stem) - CHANGE_ROWS),
        "notes": notes, "svg": svg, "defining": defining, "defining_more": defining_more,
        "brief": root + brief_path(nid),
        "places": [{"name": atlas.places[p].name, "href": root + links.places[p]}
                   for p in sorted(sorted(places, key=lambda p: -per_place[p])[:PLACE_CHIPS])],
        "places_more": max(0, len(places) - PLACE_CHIPS),
        "place_ids": " ".join(p for p in places if atlas.places[p].has_coordinates
                              and atlas.places[p].precision != "withheld"),
        "breadcrumbs": [(_("Lineage tree"), root + "tree.html")],
        "uncertain_threshold": fmt(UNCERTAIN),
    })


def violation_text(atlas: Atlas, x) -> str:
    by_id = {c.id: c for c in atlas.characters}
    when_c, when_s = x.rule.when
    w = by_id[when_c]
    c = by_id[x.character]
    _ = atlas.i18n.gettext
    text = (_("When {when} is {when_state}, the rule needs {character}: {state}; the most "
              "probable reconstruction here is {found}.") if x.kind == "needs" else
            _("When {when} is {when_state}, the rule rules out {character}: {state}; the most "
              "probable reconstruction here is {found}."))
    return text.format(when=w.label, when_state=w.describe(when_s), character=c.label,
                       state=c.describe(x.state), found=c.describe(x.found))


def _reconstruction(atlas: Atlas, results: Results, links: Links, v: int, root: str) -> list:
    """The trait sheet of node ``v``: per group, each character's states by probability
    (most certain characters first), with the parsimony state set beside them.

    Each row's cell of state probabilities comes as ready markup (``cell``: the states in
    order of probability, those at 0.00 left out but the first): the per-character parts are
    escaped once per atlas (:func:`_sheet_parts`) and a node's numbers formatted in one pass.
    Planning the 399 trait sheets of the 400-object synthetic atlas went from 7.5 to 2.9 s and
    rendering them from 19.5 to 4 s (profiled, one process)."""
    parts = _sheet_parts(atlas, links, root)
    pars = results.parsimony.states[v].tolist()
    number = _written_probability(atlas)
    groups: dict[str, list[dict]] = defaultdict(list)
    if results.fit is not None:
        probs = results.probs[v]
        order = np.argsort(-probs, axis=1, kind="stable").tolist()
        values = probs.tolist()
    for c, (base, states) in zip(atlas.discrete, parts):
        j = c.column
        k = len(c.symbols)
        cell = Markup("")
        if results.fit is not None:
            row = values[j]
            shown = []
            for i in order[j]:
                if i >= k:
                    continue
                text = f"{row[i]:.2f}" if math.isfinite(row[i]) else "–"
                if shown and text == "0.00":
                    continue
                shown.append(f"{states[i]} <b>{number(text)}</b>")
            cell = Markup("; ".join(shown))  # every part escaped already
            best = max(row[:k])
            if any(x != x for x in row[:k]):
                best = math.nan  # as numpy's max
        else:
            best = 1.0
        groups[c.group].append({
            **base, "cell": cell, "parsimony": _symbols_of(c, int(pars[j])),
            "certainty": best, "uncertain": best < UNCERTAIN,
        })
    for rows in groups.values():
        rows.sort(key=lambda r: -r["certainty"])
    return [{"name": g, "rows": rows} for g, rows in groups.items()]


def _written_probability(atlas: Atlas):
    """``text -> text in the page language`` for probabilities written ``"0.53"`` (memoised
    per language: a trait sheet writes hundreds of them). The result has no markup to
    escape: digits, a decimal sign, and ``"–"`` for none."""
    cache: dict[str, str] = _PROBABILITY_TEXT.setdefault(atlas.i18n.lang, {})

    def number(text: str) -> str:
        out = cache.get(text)
        if out is None:
            out = cache[text] = str(escape(atlas.i18n.number(text)))
        return out

    return number


_PROBABILITY_TEXT: dict[str, dict[str, str]] = {}
_SHEETS: dict[tuple[int, int, str], tuple] = {}  # (id(atlas), id(links), root) -> parts


def _sheet_parts(atlas: Atlas, links: Links, root: str) -> list[tuple[dict, list[str]]]:
    """Per discrete character, what its row on every trait sheet shares: label, language and
    link, and the markup of each state (symbol, then description, in a ``lang`` span when
    untranslated)."""
    key = (id(atlas), id(links), root)
    cached = _SHEETS.get(key)
    if cached is not None and cached[0] is atlas and cached[1] is links:
        return cached[2]
    parts = []
    for c in atlas.discrete:
        states = []
        for k, symbol in enumerate(c.symbols):
            lang = c.state_lang(k)
            words = (Markup('<span lang="%s">%s</span>') % (lang, c.descriptions[k]) if lang
                     else escape(c.descriptions[k]))
            states.append(str(escape(symbol) + Markup(" ") + words))  # escaped markup
        parts.append(({"label": c.label, "lang": c.fallback_lang,
                       "href": root + links.characters[c.id]}, states))
    _SHEETS.clear()  # one atlas and language at a time
    _SHEETS[key] = (atlas, links, parts)
    return parts


DEFINING_GAIN = 0.8  # expected gains on the stem at least this count as defining


def defining_traits(atlas: Atlas, results: Results, links: Links, v: int, root: str) -> list:
    """The traits that define a clade: changes on its stem that every most parsimonious
    reconstruction shares (Fitch 1971), and gains of at least ``DEFINING_GAIN`` expected
    changes under the likelihood model (Minin & Suchard 2008); at most :data:`DEFINING_ROWS`
    of them, and how many more there are."""
    if int(results.tree.parent[v]) < 0:
        return [], 0
    discrete = atlas.discrete
    found: dict[int, dict] = {}
    for j, a, b in results.unambiguous[v]:
        c = discrete[j]
        found[j] = {"label": c.label, "href": root + links.characters[c.id],
                    "change": f"{c.describe(c.symbols[a])} → {c.describe(c.symbols[b])}",
                    "evidence": atlas.i18n.gettext("parsimony: unambiguous"), "rank": (0, 0.0)}
    if results.changes is not None:
        for c in discrete:
            gain = float(results.changes.gains[v, c.column])
            if np.isfinite(gain) and gain >= DEFINING_GAIN:
                entry = found.setdefault(c.column, {
                    "label": c.label, "href": root + links.characters[c.id],
                    "change": atlas.i18n.gettext("gained: {state}").format(
                        state=c.describe(c.symbols[1])), "evidence": "", "rank": (1, 0.0)})
                entry["rank"] = (entry["rank"][0], -gain)
                entry["evidence"] = "; ".join(filter(None, [
                    entry["evidence"], atlas.i18n.gettext(
                        "likelihood: {gain} expected gains").format(
                            gain=atlas.i18n.number(gain, 2))]))
    # the strongest DEFINING_ROWS (unambiguous under parsimony first, then by expected gains),
    # in label order; the page says how many more
    kept = sorted(found, key=lambda j: found[j]["rank"])[:DEFINING_ROWS]
    return [found[j] for j in sorted(kept, key=lambda j: discrete[j].label)], \
        len(found) - len(kept)



def brief_path(nid: str) -> str:
    return f"briefs/{nid}.html"


def brief_page(atlas: Atlas, results: Results, links: Links, v: int, notes_by_node) -> PagePlan:
    """A printable one-page view of an ancestor for an illustrator: the traits it most
    probably had and lacked, by group, with the glossary's descriptions and images."""
    nid = results.ids[v]
    path = brief_path(nid)
    root = root_of(path)
    title = node_title(atlas, results, v, notes_by_node)
    groups: dict[str, dict[str, list]] = defaultdict(lambda: {"had": [], "lacked": [],
                                                              "unsure": []})
    for c in atlas.discrete:
        k = len(c.symbols)
        if results.fit is not None:
            probs = results.probs[v, c.column, :k]
            best = int(np.argmax(probs))
            p = float(probs[best])
        else:
            mask = int(results.parsimony.states[v, c.column])
            best, p = (mask.bit_length() - 1, 1.0) if mask and not mask & (mask - 1) else (0, 0.0)
        image = None
        if c.image is not None:
            image = {"src": root + "media/" + c.image.file, "alt": c.image.alt}
        row = {"label": c.label, "lang": c.fallback_lang, "state": c.describe(c.symbols[best]),
               "state_lang": c.state_lang(best), "p": fmt(p),
               "href": root + links.characters[c.id], "image": image}
        if p < UNCERTAIN:
            groups[c.group]["unsure"].append(row)
        elif k == 2 and best == 0 and c.descriptions[0].lower() in ("absent", "no", "none"):
            groups[c.group]["lacked"].append(row)
        else:
            groups[c.group]["had"].append(row)
    return PagePlan(path, "brief.html", {
        "kind": "brief",
        "title": atlas.i18n.gettext("Reconstruction brief: {title}").format(title=title),
        "node": {"title": title, "href": root + links.nodes[nid],
                 "support": fmt(results.summary.support[v]),
                 "members": len(results.members[v])},
        "groups": [{"name": g, **rows} for g, rows in groups.items()],
        "threshold": fmt(UNCERTAIN),
        "breadcrumbs": [(atlas.i18n.gettext("Lineage tree"), root + "tree.html"),
                        (title, root + links.nodes[nid])],
    })


def _stem_changes(atlas: Atlas, results: Results, links: Links, v: int, root: str) -> list:
    """Expected changes on the branch above a node, largest first (at least 0.5 expected)."""
    if results.changes is None or int(results.tree.parent[v]) < 0:
        return []
    out = []
    for c in atlas.discrete:
        j = c.column
        total = float(results.changes.total[v, j])
        if total < 0.5:
            continue
        gain = results.changes.gains[v, j]
        loss = results.changes.losses[v, j]
        out.append({"label": c.label, "href": root + links.characters[c.id],
                    "total": fmt(total), "gain": fmt(float(gain)) if np.isfinite(gain) else "",
                    "loss": fmt(float(loss)) if np.isfinite(loss) else "", "sort": -total})
    out.sort(key=lambda r: (r["sort"], r["label"]))
    return out


def character_page(atlas: Atlas, results: Results, links: Links, c: Character,
                   notes_by_node) -> PagePlan:
    path = links.characters[c.id]
    root = root_of(path)
    j = atlas.characters.index(c)
    by_state: dict[str, list] = defaultdict(list)
    for obj in sorted(atlas.objects.values(), key=lambda o: o.id):
        cells = atlas.cells[obj.taxon]
        cell = cells[j] if cells else "?"
        key = cell or "?"
        by_state[key].append(obj)
    states = []
    if c.kind == "discrete":
        for k, s in enumerate(c.symbols):
            members = [o for key, objs in by_state.items() for o in objs
                       if s in key.split("/")]
            states.append({"symbol": s, "description": c.descriptions[k],
                           "lang": c.state_lang(k), "count": len(members),
                           "objects": _member_chips(atlas, links, root,
                                                    [o.id for o in members[:STATE_CHIPS]]),
                           "more": max(0, len(members) - STATE_CHIPS)})
    unknown = by_state.get("?", []) + by_state.get("-", [])
    _ = atlas.i18n.gettext
    facts = [(_("Character id"), c.id), (_("Group"), c.group),
             (_("Kind"), _("measurement (continuous)") if c.kind == "continuous" else
              (_("ordered states") if c.ordered else _("unordered states")))]
    changes = []
    if c.kind == "discrete":
        par = results.parsimony
        number = atlas.i18n.number
        facts.append((_("Steps on the summary tree (parsimony)"),
                      number(int(par.steps[c.column]))))
        for name, attr in ((_("Consistency index (CI)"), "ci"),
                           (_("Retention index (RI)"), "ri")):
            facts.append((name, number(float(getattr(results.indices, attr)[c.column]), 2)))
        if results.changes is not None:
            tree = results.tree
            total = results.changes.total[:, c.column]
            facts.append((_("Expected changes on the summary tree (likelihood)"),
                          number(float(total.sum()), 2)))
            for v in np.argsort(-total, kind="stable").tolist():
                if total[v] < 0.5 or int(tree.parent[v]) < 0:
                    continue
                nid = results.ids[v]
                href = links.nodes.get(nid) or links.objects.get(nid) or ""
                changes.append({"title": node_title(atlas, results, v, notes_by_node),
                                "href": root + href if href else "", "total": fmt(float(total[v])),
                                "gain": fmt(float(results.changes.gains[v, c.column])),
                                "loss": fmt(float(results.changes.losses[v, c.column]))})
    image = None
    if c.image is not None:
        image = {"src": root + "media/" + c.image.file, "alt": c.image.alt,
                 "credit": c.image.credit, "licence": c.image.licence}
    return PagePlan(path, "character.html", {
        "kind": "character", "title": c.label, "facts": facts, "states": states,
        "unknown": _member_chips(atlas, links, root, [o.id for o in unknown[:STATE_CHIPS]]),
        "unknown_count": len(unknown), "unknown_more": max(0, len(unknown) - STATE_CHIPS),
        "body": render_markdown(c.body, root, links.targets), "image": image,
        "changes": changes[:CHANGE_ROWS], "changes_more": max(0, len(changes) - CHANGE_ROWS),
        "binary": len(c.symbols) == 2,
        "ledger": ledger.character_ledger(atlas, links, c, root),
        "breadcrumbs": [(_("Glossary"), root + "glossary.html")],
        "lang": c.body_lang, "title_lang": c.fallback_lang,
    })


def glossary_page(atlas: Atlas, results: Results, links: Links) -> PagePlan:
    groups: dict[str, list[dict]] = defaultdict(list)
    par = results.parsimony
    ci = results.indices.ci
    for c in atlas.characters:
        # untranslated descriptions: one lang for the cell when all are, else one per state
        whole = c.state_lang(0) if c.symbols and len(set(c.state_langs)) == 1 else ""
        row = {"id": c.id, "label": c.label, "href": links.characters[c.id],
               "lang": c.fallback_lang, "states_lang": whole,
               "states": [{"symbol": s, "description": d,
                           "lang": "" if whole else c.state_lang(k)}
                          for k, (s, d) in enumerate(zip(c.symbols, c.descriptions))],
               "steps": "", "ci": ""}
        row["map"] = links.characters[c.id] + "#distribution" if c.kind == "discrete" else ""
        if c.kind == "discrete":
            row["steps"] = str(int(par.steps[c.column]))
            row["ci"] = fmt(float(ci[c.column])) if ci is not None else ""
        groups[c.group].append(row)
    return PagePlan("glossary.html", "glossary.html", {
        "kind": "glossary", "title": atlas.i18n.gettext("Glossary"),
        "groups": [{"name": g, "slug": slug(g).lower(), "rows": rows}
                   for g, rows in groups.items()],
        "n_characters": len(atlas.characters),
    })
