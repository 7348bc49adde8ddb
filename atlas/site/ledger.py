"""The evidence ledger on pages: where each coded cell was read from.

An object page shows, beside each coded trait, the sources and notes of its evidence and links
to the character's ledger; a character page lists the ledger for every object it is coded for
(``#ev-<object id>`` anchors). A source is linked when it is a web address (the kiosk strips
such links later) or one of the object's own published images; otherwise it is shown as text.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from ..model import ArtObject, Atlas, Character

if TYPE_CHECKING:
    from .views import Links


def _source(atlas: Atlas, obj: ArtObject, source: str, root: str) -> dict:
    href = ""
    if source.startswith(("https://", "http://")):
        href = source
    else:
        for image in obj.images:
            if source in (image.file, image.file.rsplit("/", 1)[-1]):
                href = root + "media/" + image.file
    return {"text": source, "href": href}


def cell_evidence(atlas: Atlas, obj: ArtObject, c: Character, root: str) -> list[dict]:
    """The ledger rows behind one cell: ``source`` (text, href) and ``note``."""
    return [{"source": _source(atlas, obj, e.source, root), "note": e.note}
            for e in atlas.evidence.get((obj.id, c.id), ())]


def anchor(links: Links, object_id: str) -> str:
    """The ledger row's id on a character page: ``ev-`` and the object page's file name."""
    return "ev-" + links.objects[object_id].rsplit("/", 1)[-1][:-5]


def character_ledger(atlas: Atlas, links: Links, c: Character, root: str) -> list[dict]:
    """One row per object with evidence for ``c``: the object, its state and the evidence."""
    rows = []
    for obj in sorted(atlas.visible_objects(), key=lambda o: o.id):
        entries = cell_evidence(atlas, obj, c, root)
        if not entries:
            continue
        state = atlas.evidence[obj.id, c.id][0].state
        rows.append({"anchor": anchor(links, obj.id), "title": obj.title,
                     "href": root + links.objects[obj.id], "state": state,
                     "description": c.describe(state) if c.kind == "discrete" else state,
                     "evidence": entries})
    return rows
