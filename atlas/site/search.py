"""The search page and its index: built once at build time, searched in the reader's browser.

The index is a list of entries, one per published object, character, place, free page and
clade note, written as ``data/search.js`` (a classic script assigning
``window.AtlasData.search``; JSON cannot be loaded under file://). Each entry carries its kind,
its title as shown, its site-root-relative link, a short line of context, and two strings of
search words: the words of the title (``t``) and the words of everything else (``w``): ids,
groups, state descriptions, place names and the opening words of the note.

Words are normalised here once, the same way ``assets/search.js`` normalises a query: Unicode
canonical decomposition (NFD), combining marks removed, lower case, split on anything that is
not a letter or a digit. So "Ossëm-Haven" is found by "ossem hav".

Nothing the profile does not publish enters the index: withheld objects are skipped (the link
stage has already emptied their text), and the places, clade notes and pages the profile may not
show were dropped by the link stage.
"""

from __future__ import annotations

import re
import unicodedata

from ..analysis.results import Results
from ..model import Atlas
from .markdown import plain_text
from .views import Links, PagePlan, clade_notes_by_node

EXCERPT_CHARS = 400  # the opening of a note kept as search words
CONTEXT_CHARS = 120
SCRIPTS = ("data/search.js", "assets/search.js")
_WORD = re.compile(r"[^\W_]+")


def normalise(text: str) -> str:
    """Lower case without accents: NFD, combining marks dropped.

    >>> normalise("Ossëm Håven")
    'ossem haven'
    """
    if text.isascii():  # nothing to decompose (5,339 texts of a rebuild: 0.11 -> 0.07 s)
        return text.lower()
    decomposed = unicodedata.normalize("NFD", text)
    return "".join(c for c in decomposed if not unicodedata.category(c).startswith("M")).lower()


def words(*texts: str) -> list[str]:
    """The distinct normalised words of ``texts``, in order of first appearance.

    >>> words("Lamp-03: the lamp", "Ossëm")
    ['lamp', '03', 'the', 'ossem']
    """
    out: dict[str, None] = {}
    for text in texts:
        for w in _WORD.findall(normalise(text)):
            out.setdefault(w, None)
    return list(out)


def _entry(kind: str, title: str, href: str, context: str, *others: str) -> dict:
    title_words = words(title)
    seen = set(title_words)
    rest = [w for w in words(*others) if w not in seen]
    return {"k": kind, "t": title, "h": href, "c": context[:CONTEXT_CHARS],
            "tw": " ".join(title_words), "w": " ".join(rest)}


def search_index(atlas: Atlas, results: Results, links: Links) -> list[dict]:
    """Every published thing a reader may look for, sorted by kind and title."""
    entries: list[dict] = []
    for obj in atlas.visible_objects():
        if obj.withheld or not links.objects.get(obj.id):
            continue
        place = atlas.places.get(obj.place) if obj.place and not obj.place_withheld else None
        place_names = [place.name, *place.names.values()] if place is not None else []
        excerpt = plain_text(obj.body, EXCERPT_CHARS) if obj.body else ""
        context = ", ".join(x for x in (obj.community, obj.period,
                                        place.name if place else "") if x)
        entries.append(_entry("object", obj.title, links.objects[obj.id], context, obj.id,
                              obj.community, obj.period, *place_names, excerpt))
    for c in atlas.characters:
        excerpt = plain_text(c.body, EXCERPT_CHARS) if c.body else ""
        entries.append(_entry("character", c.label, links.characters[c.id], c.group, c.id,
                              c.group, *c.descriptions, excerpt))
    for pid, place in atlas.places.items():
        entries.append(_entry("place", place.name, links.places[pid],
                              ", ".join(sorted(place.names.values())), pid,
                              *place.names.values()))
    for page in atlas.pages:
        excerpt = plain_text(page.body, EXCERPT_CHARS)
        entries.append(_entry("page", page.title, links.pages[page.name],
                              plain_text(page.body, CONTEXT_CHARS), page.name, excerpt))
    entries.extend(_clade_entries(atlas, results, links))
    entries.sort(key=lambda e: (e["k"], normalise(e["t"]), e["h"]))
    return entries


def _clade_entries(atlas: Atlas, results: Results, links: Links) -> list[dict]:
    """Clade notes (published ones only), at the node of their members' common ancestor."""
    out = []
    for v, notes in sorted(clade_notes_by_node(atlas, results).items()):
        href = links.nodes.get(results.ids[v], "")
        if not href:
            continue
        for note in notes:
            out.append(_entry("clade", note.title, href, plain_text(note.body, CONTEXT_CHARS),
                              note.name, plain_text(note.body, EXCERPT_CHARS)))
    return out


def search_plan(atlas: Atlas, results: Results, links: Links) -> tuple[PagePlan, dict[str, str]]:
    """The search page (``search.html``) and its data script (``data/search.js``)."""
    from .plan import js_global  # here, not at the top: plan imports this module

    _, ngettext = atlas.i18n.gettext, atlas.i18n.ngettext
    index = search_index(atlas, results, links)
    kinds = sorted({e["k"] for e in index})
    names = {"object": _("Object"), "character": _("Character"), "place": _("Place"),
             "page": _("Page"), "clade": _("Clade")}
    counted = {
        "object": lambda n: ngettext("object", "objects", n),
        "character": lambda n: ngettext("character", "characters", n),
        "place": lambda n: ngettext("place", "places", n),
        "page": lambda n: ngettext("page", "pages", n),
        "clade": lambda n: ngettext("clade", "clades", n),
    }
    rows = []
    for k in kinds:
        n = sum(1 for e in index if e["k"] == k)
        rows.append({"kind": k, "count": n, "name": counted[k](n) if k in counted else k})
    page = PagePlan("search.html", "search.html", {
        "kind": "search", "title": _("Search"), "count": len(index), "kinds": rows,
        "kind_names": names,
    }, scripts=SCRIPTS)
    return page, {"data/search.js": js_global("search", {"entries": index})}
