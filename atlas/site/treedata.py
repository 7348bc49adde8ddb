"""Data for the interactive lineage tree, written once and shared by every page that draws it.

``data/tree.js`` (the layout) is written by the plan; this module adds two more scripts:

- ``data/states.js`` assigns ``window.AtlasData.states``::

      {"n_nodes": N, "decimals": 3,
       "total_changes": [per node: expected changes of all discrete characters on the branch
                         above it],
       "characters": [{"id", "label", "group", "symbols": [...], "descriptions": [...],
                       "k": number of states,
                       "p": flat list, node-major: p[v * k + s] = P(state s at node v),
                       "changes": [per node: expected changes of this character]}]}

  Nodes are in the layout's (the results') node order, so index ``v`` in these arrays is
  node ``v`` of ``data/tree.js``. Flat arrays of rounded numbers keep the file small: a tree of
  1,000 tips and 40 binary characters is about 0.9 MB.
- ``data/contacts.js`` assigns ``window.AtlasData.contacts``: one entry per declared contact
  between lineages, ``{"source": node index, "target": node index, "characters": [labels],
  "note": text}``; a clade note's node is the most recent common ancestor of its members.

Neither file carries an object id or title: the tree layout already names the published
objects, and a withheld object is named nowhere (its node is only a position in the arrays).

The page helpers (:func:`tree_page_plot`, :func:`character_page_plot`) add the context keys and
scripts a page needs to draw the tree, so hooking this module into the plan is one call each.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..analysis.results import Results
from ..errors import AtlasError, Problems, did_you_mean
from ..model import Atlas, Character
from .views import PagePlan

DECIMALS = 3
TREE_SCRIPTS = ("assets/plotly.min.js", "data/tree.js", "data/states.js", "data/contacts.js",
                "assets/tree.js")


def _rounded(values: np.ndarray) -> list[float]:
    """Rounded to :data:`DECIMALS`, with ``-0.0`` and non-finite values written as 0."""
    out = np.round(np.nan_to_num(np.asarray(values, dtype=float), nan=0.0, posinf=0.0,
                                 neginf=0.0), DECIMALS)
    out[out == 0] = 0.0
    return [float(x) if x % 1 else int(x) for x in out.tolist()]


def states_data(atlas: Atlas, results: Results) -> dict:
    """Reconstructed state probabilities and expected changes per node, for ``data/states.js``.

    ``p[v * k + s]`` is the marginal posterior probability of state ``s`` at node ``v``
    (Yang, Kumar & Nei 1995, Genetics 141: 1641-1650; computed in
    :mod:`atlas.analysis.likelihood`), rounded to three decimals; at a tip it is the observed
    state set made into probabilities. ``changes[v]`` is the expected number of changes of the
    character on the branch above ``v`` (Minin & Suchard 2008, J. Math. Biol. 56: 391-412),
    zero at the root. Nothing here is recomputed; the arrays of ``results`` are only rounded.

    Tiny example: a binary character with probabilities (0.1234, 0.8766) at node 0 and
    (1, 0) at node 1 is written ``"k": 2, "p": [0.123, 0.877, 1, 0]``.
    """
    n_nodes = results.tree.n_nodes
    characters = []
    changes = results.changes
    for c in atlas.discrete:
        k = len(c.symbols)
        probs = results.probs[:, c.column, :k]
        per_char = changes.total[:, c.column] if changes is not None else np.zeros(n_nodes)
        characters.append({
            "id": c.id, "label": c.label, "group": c.group,
            "symbols": list(c.symbols), "descriptions": list(c.descriptions), "k": k,
            "p": _rounded(probs.reshape(-1)),
            "changes": _rounded(per_char),
        })
    if changes is not None and changes.total.shape[1]:
        total = np.nansum(changes.total, axis=1)
    else:
        total = np.zeros(n_nodes)
    return {"n_nodes": n_nodes, "decimals": DECIMALS, "characters": characters,
            "total_changes": _rounded(total)}


def contact_nodes(atlas: Atlas, results: Results) -> list[tuple[int, int]]:
    """The (source, target) node indices of each declared contact, in ``atlas.contacts`` order.

    An object id is its tip; a clade note's name is the most recent common ancestor of its
    members (the smallest clade that holds them all: the first such node in postorder).
    A name that is neither raises :class:`AtlasError` listing every such contact at once.

    Tiny example (invented case): in ((a,b)n1,c)n2 a note with members a and b sits at n1,
    one with members a and c at n2.
    """
    tree = results.tree
    index = {nid: v for v, nid in enumerate(results.ids) if tree.tip[v] >= 0}
    taxa = {t: i for i, t in enumerate(tree.taxa)}
    node_masks = [sum(1 << taxa[m] for m in members) for members in results.members]
    notes = {note.name: note for note in atlas.clade_notes}
    problems = Problems()

    def node_of(name: str, contact) -> int:
        if name in index:
            return index[name]
        note = notes.get(name)
        if note is None or any(m not in taxa for m in note.members):
            problems.error(contact.file, contact.line,
                           f"{name!r} is neither an object nor a published clade note",
                           did_you_mean(name, [*index, *notes]))
            return -1
        want = sum(1 << taxa[m] for m in note.members)
        return next(v for v, mask in enumerate(node_masks) if mask & want == want)

    pairs = [(node_of(c.source, c), node_of(c.target, c)) for c in atlas.contacts]
    problems.raise_if_any()
    return pairs


def contacts_data(atlas: Atlas, results: Results) -> list[dict]:
    """Declared contacts as node-index pairs with their characters' labels and note.

    A contact touching a withheld object is left out (the link stage already drops those; this
    is a second guard, since a contact's note could name the object).
    """
    withheld = {o.id for o in atlas.objects.values() if o.withheld}
    labels = {c.id: c.label for c in atlas.characters}
    out = []
    for contact, (a, b) in zip(atlas.contacts, contact_nodes(atlas, results)):
        if contact.source in withheld or contact.target in withheld:
            continue
        out.append({"source": a, "target": b, "note": contact.note,
                    "characters": [labels.get(ch, ch) for ch in contact.characters]})
    return out


def data_files(atlas: Atlas, results: Results) -> dict[str, str]:
    """``data/states.js`` and ``data/contacts.js``, as script text, for ``SitePlan.data``."""
    from .plan import js_global  # plan imports this module; import at call time

    return {"data/states.js": js_global("states", states_data(atlas, results)),
            "data/contacts.js": js_global("contacts", contacts_data(atlas, results))}


def shade_choices(atlas: Atlas) -> list[dict]:
    """The discrete characters for the "Shade by trait" control, grouped, in matrix order."""
    groups: dict[str, list[dict]] = {}
    for c in atlas.discrete:
        group = c.group or atlas.i18n.gettext("Other traits")
        groups.setdefault(group, []).append({"id": c.id, "label": c.label})
    return [{"group": g, "characters": chars} for g, chars in groups.items()]


def tree_page_plot(page: PagePlan, atlas: Atlas) -> PagePlan:
    """The tree page with its controls' context (``tree_controls``) and the shared scripts."""
    context = {**page.context, "tree_controls": {
        "characters": shade_choices(atlas), "contacts": len(atlas.contacts),
    }}
    return replace(page, context=context, scripts=TREE_SCRIPTS)


def character_page_plot(page: PagePlan, c: Character) -> PagePlan:
    """A discrete character's page with the lineage tree shaded by it (``tree_plot``)."""
    if c.kind != "discrete":
        return page
    context = {**page.context, "tree_plot": {"character": c.id, "label": c.label}}
    return replace(page, context=context, scripts=TREE_SCRIPTS)


def check_character_ids(atlas: Atlas, ids: list[str], file: str = "--character") -> None:
    """Every id names a discrete character; else one :class:`AtlasError` listing them all."""
    known = [c.id for c in atlas.discrete]
    problems = Problems()
    for cid in ids:
        if cid not in known:
            problems.error(file, None, f"unknown discrete character {cid!r}",
                           did_you_mean(cid, known))
    if problems.errors:
        raise AtlasError(problems.errors)
