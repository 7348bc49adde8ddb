"""The link stage: cross-reference every source and apply the build profile.

Checks tips against matrix rows, notes, places and characters; every problem goes into one
collector and the stage stops once, listing all of them with ``file:line`` and "did you mean"
hints. Things a curator may legitimately leave out (a tip with no matrix row, an object with
no note or no place) are warnings, and the object still gets its page.

The profile's access rules are applied here, so nothing it may not publish travels further:
a withheld object keeps its place in the analysis arrays but loses its title, note, images and
place; restricted images, places, clade notes and pages are dropped; generalised places have
their coordinates moved to the centre of a coarse grid cell before any later stage sees them.
"""

from __future__ import annotations

import math
import re
from dataclasses import replace
from typing import Any

import numpy as np

from .config import ACCESS_LEVELS, Profile
from .errors import AtlasError, Problems, did_you_mean
from .model import ArtObject, Atlas, Character, CladeNote, Evidence, Image, Page
from .sources.gazetteer import Place
from .sources.load import Sources
from .sources.notes import Note

MAX_STATES = 32  # state sets are uint32 bitmasks
GRID_DEGREES = 1.0  # generalised places are shown at the centre of a cell this size
WITHHELD_TITLE = "Withheld"
WITHHELD_PLACE = "\0withheld"  # marks a recorded place the profile may not show


def slug(text: str) -> str:
    """A file-name-safe form of an id, for URLs (``Ogaden Arabic`` -> ``Ogaden-Arabic``).

    >>> slug("it's a/b")
    'it-s-a-b'
    """
    out = re.sub(r"[^A-Za-z0-9._-]+", "-", text).strip("-.")
    return out or "item"


def generalise(value: float, grid: float = GRID_DEGREES) -> float:
    """The centre of the grid cell holding ``value``: exact find-spots never leave the link stage.

    >>> generalise(-31.2345), generalise(12.0)
    (-31.5, 12.5)
    """
    return (math.floor(value / grid) + 0.5) * grid


def link(sources: Sources, profile: Profile, problems: Problems | None = None) -> Atlas:
    """Cross-reference the sources into an :class:`Atlas`, or raise one AtlasError."""
    problems = problems if problems is not None else Problems()
    config = sources.config
    toml = "atlas.toml"
    sample = sources.sample
    if sample is None or sources.matrix is None:
        problems.raise_if_any()
        raise AtlasError(problems.items or "the trees or the matrix could not be read")
    taxa = sample.taxa
    taxon_index = {t: i for i, t in enumerate(taxa)}
    if config.sources["names"] == "loose":
        sources = _match_loosely(sources, taxa, problems)

    for name in config.analysis["outgroup"]:
        if name not in taxon_index:
            problems.error(toml, None, f"[analysis] outgroup {name!r} is not a tip of the trees",
                           did_you_mean(name, taxa))
    if sources.summary is not None and set(sources.summary.taxa) != set(taxa):
        extra = sorted(set(sources.summary.taxa) ^ set(taxa))
        problems.error(config.sources["summary"], None,
                       f"the summary tree and the sample have different tips: {', '.join(extra)}")

    characters, masks, n_states, ordered, continuous, cells = _characters(
        sources, taxa, problems)
    places = _places(sources, profile, problems)
    all_place_ids = {p.id for p in sources.places}
    objects = _objects(sources, profile, taxa, places, all_place_ids, problems)
    column_ids = {c.id for c in characters}
    clade_notes = _clade_notes(sources, profile, taxa, problems)
    pages = _pages(sources, profile, problems)

    clade_names = {c.name for c in clade_notes} | {n.stem for n in sources.clades}
    contacts = []
    for c in sources.contacts:
        ok = True
        for end in (c.source, c.target):
            if end not in taxon_index and end not in clade_names:
                problems.error(c.file, c.line, f"{end!r} is neither an object nor a clade note",
                               did_you_mean(end, [*taxa, *clade_names]))
                ok = False
        for ch in c.characters:
            if ch not in column_ids:
                problems.error(c.file, c.line, f"unknown character {ch!r}",
                               did_you_mean(ch, column_ids))
                ok = False
        withheld = any(objects[e].withheld for e in (c.source, c.target) if e in objects)
        if ok and not withheld:
            contacts.append(c)
    by_id = {c.id: c for c in characters}
    for r in sources.rules:
        for ch, state in [r.when, *r.needs.items(), *r.forbids.items()]:
            if ch not in by_id:
                problems.error(r.file, r.line, f"rule names unknown character {ch!r}",
                               did_you_mean(ch, by_id))
            elif by_id[ch].kind == "discrete" and state not in by_id[ch].symbols:
                problems.error(r.file, r.line, f"rule names state {state!r} of {ch!r}, which "
                               f"has states {', '.join(by_id[ch].symbols)}")

    problems.raise_if_any()
    return Atlas(
        config=config, profile=profile, sample=sample, summary_input=sources.summary,
        objects=objects, characters=characters, masks=masks, n_states=n_states, ordered=ordered,
        continuous=continuous, cells=cells, places=places, clade_notes=clade_notes,
        pages=pages, contacts=tuple(contacts), rules=tuple(sources.rules),
        media=dict(sources.media), basemap=sources.basemap, warnings=tuple(problems.warnings),
        withheld_text=withheld_text(sources, profile, objects, places),
        evidence=_evidence(sources, objects, column_ids),
    )


def _evidence(sources: Sources, objects: dict[str, ArtObject],
              column_ids: set[str]) -> dict[tuple[str, str], tuple[Evidence, ...]]:
    """The ledger's rows for the objects the profile shows (a withheld object shows none)."""
    table = sources.evidence
    if table is None:
        return {}
    out: dict[tuple[str, str], tuple[Evidence, ...]] = {}
    for (oid, cid), rows in sorted(table.by_cell().items()):
        obj = objects.get(oid)
        if obj is None or obj.withheld or cid not in column_ids:
            continue
        out[oid, cid] = tuple(Evidence(r.state, r.source, r.note, table.file, r.line)
                              for r in rows)
    return out


def _passages(text: str, minimum: int = 24) -> list[str]:
    """Distinctive stretches of a note: lines of Markdown long enough not to occur by chance."""
    out = []
    for line in text.splitlines():
        line = re.sub(r"[*_`#>\[\]()!]", " ", line)
        line = " ".join(line.split())
        if len(line) >= minimum:
            out.append(line[:80])
    return out


def withheld_text(sources: Sources, profile: Profile, objects: dict[str, ArtObject],
                  places: dict[str, Place]) -> tuple[str, ...]:
    """Text of everything the profile withholds, for the audit to look for in every output.

    Ids are matched as whole words by the audit; titles, place names and passages of notes as
    they stand. Text that also belongs to something published (a title shared with a public
    object, say) is left out, since it may rightly appear.
    """
    canaries: set[str] = set()
    notes = {str(n.meta.get("id", n.stem)): n for n in sources.objects}
    for oid, obj in objects.items():
        if not obj.withheld:
            continue
        canaries.add(oid)
        note = notes.get(oid)
        if note is not None:
            if note.meta.get("title"):
                canaries.add(str(note.meta["title"]))
            canaries.update(_passages(note.body))
            for t in note.translations.values():  # its translations are withheld too
                if t.meta.get("title"):
                    canaries.add(str(t.meta["title"]))
                canaries.update(_passages(t.body))
            for image in note.meta.get("images") or []:
                if isinstance(image, dict) and image.get("file"):
                    canaries.add(str(image["file"]).rsplit("/", 1)[-1])
    for p in sources.places:
        if p.id not in places:
            canaries.update({p.id, p.name, *p.names.values()})
    for n in sources.clades:
        if str(n.meta.get("access", "public")) not in profile.access:
            for version in (n, *n.translations.values()):
                canaries.update(_passages(version.body))
                if version.meta.get("title"):
                    canaries.add(str(version.meta["title"]))
    for n in sources.pages:
        if str(n.meta.get("access", "public")) not in profile.access:
            for version in (n, *n.translations.values()):
                canaries.update(_passages(version.body))
    if sources.evidence is not None:  # what a withheld object's coding was read from
        said = {(r.source, r.note) for r in sources.evidence.rows
                if r.object in objects and not objects[r.object].withheld}
        shared = {t for pair in said for t in pair}
        for r in sources.evidence.rows:
            if r.object in objects and objects[r.object].withheld:
                canaries.update(t for t in (*_passages(r.note), *_passages(r.source))
                                if t not in shared)
    published = {o.title for o in objects.values() if not o.withheld}
    published |= {o.id for o in objects.values() if not o.withheld}
    published |= {p.name for p in places.values()} | {p.id for p in places.values()}
    # Text that a published note also says is not a leak when it appears.
    shown = "\n".join(o.body for o in objects.values() if not o.withheld)
    return tuple(sorted(c for c in canaries if c and len(c) >= 3 and c not in published
                        and c not in shown))


def loose_key(name: str) -> str:
    """A name with case, spaces, dots, hyphens and underscores ignored.

    >>> loose_key("Moroccan.Arabic") == loose_key("moroccan_arabic") == loose_key("MoroccanArabic")
    True
    """
    return re.sub(r"[\s._-]+", "", name).casefold()


def _match_loosely(sources: Sources, taxa: tuple[str, ...], problems: Problems) -> Sources:
    """Rename matrix rows and gazetteer ids that match a tip loosely to the tip's own label."""
    canon: dict[str, str] = {}
    for t in taxa:
        key = loose_key(t)
        if key in canon:
            problems.error(sources.config.sources["trees"], None, f"tips {canon[key]!r} and "
                           f"{t!r} look the same when names are matched loosely",
                           'use names = "exact" in [sources]')
        canon[key] = t

    def rename(name: str) -> str:
        return name if name in taxa else canon.get(loose_key(name), name)

    matrix = sources.matrix
    if matrix is not None:
        renamed = {rename(n): row for n, row in matrix.rows.items()}
        if len(renamed) == len(matrix.rows):
            matrix = replace(matrix, rows=renamed, row_lines={rename(n): line for n, line in
                                                              matrix.row_lines.items()})
    places = [replace(p, id=rename(p.id)) for p in sources.places]
    if len({p.id for p in places}) != len(places):
        places = sources.places
    evidence = sources.evidence
    if evidence is not None:
        evidence = replace(evidence, rows=tuple(replace(r, object=rename(r.object))
                                                for r in evidence.rows))
    return replace(sources, matrix=matrix, places=places, evidence=evidence)


# --- characters and the matrix ------------------------------------------------------------

def _characters(sources: Sources, taxa: tuple[str, ...], problems: Problems):
    matrix = sources.matrix
    notes = {str(n.meta.get("id", n.stem)): n for n in sources.characters}
    rows = {r.id: r for r in sources.character_rows}
    columns = matrix.characters
    for cid, note in notes.items():
        if cid not in columns:
            problems.error(note.file, note.line("id"), f"character {cid!r} is not a column of "
                           f"the matrix", did_you_mean(cid, columns))
    for cid, row in rows.items():
        if cid not in columns:
            problems.error(row.file, row.line, f"character {cid!r} is not a column of the matrix",
                           did_you_mean(cid, columns))
    for name in matrix.rows:
        if name not in taxa:
            problems.error(matrix.file, matrix.row_lines[name],
                           f"object {name!r} has a row in the matrix but is not a tip of the trees",
                           did_you_mean(name, taxa))
    characters: list[Character] = []
    n_disc = n_cont = 0
    every_row = list(zip(*matrix.rows.values()))  # column by column, every row of the matrix
    for j, cid in enumerate(columns):
        note, row = notes.get(cid), rows.get(cid)
        meta = note.meta if note else {}
        kind = str(meta.get("kind", row.kind if row else "discrete"))
        if kind not in ("discrete", "continuous"):
            problems.error(note.file, note.line("kind"), f"kind {kind!r} is not 'discrete' or "
                           "'continuous'")
            kind = "discrete"
        label = str(meta.get("label") or (row.label if row else "") or
                    matrix.labels.get(cid, cid))
        group = str(meta.get("group") or (row.group if row else "") or "Characters")
        declared = _declared_states(note, row, problems)
        distinct = set(every_row[j]) if every_row else set()  # few per column: read each once
        observed = sorted({s for cell in distinct for s in _symbols(cell)})
        if kind == "continuous":
            symbols: tuple[str, ...] = ()
            descriptions: tuple[str, ...] = ()
        elif declared:
            symbols = tuple(declared)
            descriptions = tuple(declared.values())
            wrong = {cell for cell in distinct if any(s not in declared for s in _symbols(cell))}
            for name, r in matrix.rows.items() if wrong else ():
                bad = [s for s in _symbols(r[j]) if s not in declared]
                if bad:
                    problems.error(matrix.file, matrix.row_lines[name],
                                   f"object {name!r}: state {bad[0]!r} of character {cid!r} is not "
                                   f"one of its states ({', '.join(symbols)})")
        else:
            symbols = tuple(observed) if set(observed) - {"0", "1"} else ("0", "1")
            labels = matrix.state_labels.get(cid, ())
            if symbols == ("0", "1") and not labels:
                descriptions = ("absent", "present")
            else:
                descriptions = tuple(labels[k] if k < len(labels) else s
                                     for k, s in enumerate(symbols))
        if len(symbols) > MAX_STATES:
            problems.error(matrix.file, matrix.header_line,
                           f"character {cid!r} has {len(symbols)} states; at most {MAX_STATES}")
            symbols, descriptions = symbols[:MAX_STATES], descriptions[:MAX_STATES]
        image = _image(meta.get("image"), note, "image", sources, problems) if note else None
        column = n_cont if kind == "continuous" else n_disc
        if kind == "continuous":
            n_cont += 1
        else:
            n_disc += 1
        characters.append(Character(
            id=cid, label=label, group=group, symbols=symbols, descriptions=descriptions,
            ordered=bool(meta.get("ordered", row.ordered if row else False)), kind=kind,
            body=note.body if note else "", image=image, column=column,
            source=f"{note.file}" if note else (f"{row.file}:{row.line}" if row else ""),
            translations=_character_translations(cid, note, row, symbols, problems),
            file=note.file if note else (row.file if row else ""),
        ))

    masks = np.zeros((len(taxa), n_disc), dtype=np.uint32)
    continuous = np.full((len(taxa), n_cont), np.nan)
    disc = [c for c in characters if c.kind == "discrete"]
    n_states = np.array([max(len(c.symbols), 2) for c in disc], dtype=np.int64)
    full = np.array([(1 << int(k)) - 1 for k in n_states], dtype=np.uint32)
    masks[:] = full
    cells: list[tuple[str, ...]] = [()] * len(taxa)
    present = [(i, name) for i, name in enumerate(taxa) if name in matrix.rows]
    for i, name in present:
        cells[i] = matrix.rows[name]
    # Column by column, each distinct cell read once (a column holds a few distinct cells):
    # 400 objects x 300 characters, under a profiler, 0.32 s cell by cell -> 0.03 s.
    index = np.array([i for i, _ in present], dtype=np.int64)
    by_column = list(zip(*(cells[i] for i in index))) if present else []
    not_numbers: list[tuple[int, int]] = []
    for j, (c, column) in enumerate(zip(characters, by_column)):
        if c.kind == "continuous":
            values = {cell: _number(cell) for cell in set(column)}
            continuous[index, c.column] = [np.nan if values[x] is None else values[x]
                                           for x in column]
            not_numbers += [(k, j) for k, x in enumerate(column) if values[x] is None]
        else:
            bits = {cell: _bits(cell, c.symbols) for cell in set(column)}
            whole = int(full[c.column])
            masks[index, c.column] = [bits[x] or whole for x in column]
    for k, j in sorted(not_numbers):
        i, name = present[k]
        problems.error(matrix.file, matrix.row_lines[name],
                       f"object {name!r}: {cells[i][j]!r} in continuous character "
                       f"{characters[j].id!r} is not a number")
    _check_symbols(matrix, characters, every_row, problems)
    ordered = np.array([c.ordered for c in disc], dtype=bool)
    return tuple(characters), masks, n_states, ordered, continuous, tuple(cells)


def _number(cell: str) -> float | None:
    """A continuous cell's value: NaN when unknown or not applicable, None when not a number."""
    if cell in ("?", "-", ""):
        return np.nan
    try:
        return float(cell)
    except ValueError:
        return None


def _bits(cell: str, symbols: tuple[str, ...]) -> int:
    """A discrete cell as a bit mask over ``symbols`` (0: unknown, or no symbol it knows)."""
    bits = 0
    for s in _symbols(cell):
        if s in symbols:
            bits |= 1 << symbols.index(s)
    return bits


def _symbols(cell: str) -> list[str]:
    if cell in ("?", "-", ""):
        return []
    return [s.strip() for s in cell.split("/") if s.strip()]


_STATE_CELL = re.compile(r"[0-9A-Za-z](/[0-9A-Za-z])*")


def _check_symbols(matrix, characters, by_column: list[tuple[str, ...]],
                   problems: Problems) -> None:
    """Cells must be one symbol, ``?``, ``-`` or ``a/b``; say which ones are not.
    ``by_column``: the matrix's cells column by column."""
    discrete = [j for j, c in enumerate(characters) if c.kind != "continuous"]
    distinct = set().union(*(by_column[j] for j in discrete)) if by_column else set()
    if all(cell in ("?", "-") or _STATE_CELL.fullmatch(cell) for cell in distinct):
        return  # the usual case, decided on the distinct cells alone
    for name, row in matrix.rows.items():
        for j, c in enumerate(characters):
            if c.kind == "continuous":
                continue
            cell = row[j]
            if cell in ("?", "-") or _STATE_CELL.fullmatch(cell):
                continue
            problems.error(matrix.file, matrix.row_lines[name],
                           f"object {name!r}: cell {cell!r} of character {c.id!r} is not a state "
                           "symbol (use 0-9 or letters, ? unknown, - not applicable, 0/1 "
                           "polymorphic)")


def _character_translations(cid: str, note: Note | None, row, symbols: tuple[str, ...],
                            problems: Problems) -> dict[str, dict]:
    """Per language: the translated label, one description per state symbol (``""`` where
    the translation gives none) and Markdown body (``""`` when it has none), from
    ``characters/<id>.<lang>.md`` (front matter ``label`` and ``states``, then the body) and
    the table's ``label@<lang>`` and ``states@<lang>`` columns; a note's translation wins
    over the table's. A translated state the character does not have is an error."""
    notes = note.translations if note is not None else {}
    rows = row.translations if row is not None else {}
    out: dict[str, dict] = {}
    for lang in sorted(set(notes) | set(rows)):
        t, r = notes.get(lang), rows.get(lang, {})
        meta = t.meta if t is not None else {}
        states = {str(k): str(v) for k, v in r.get("states", {}).items()}
        where = (row.file, row.line) if row is not None else ("", None)
        if t is not None and "states" in meta:
            if isinstance(meta["states"], dict):
                states.update({str(k): str(v) for k, v in meta["states"].items()})
                where = (t.file, t.line("states"))
            else:
                problems.error(t.file, t.line("states"),
                               "states must map each state symbol to its description")
        for symbol in states:
            if symbol not in symbols:
                problems.error(*where, f"the {lang} translation of character {cid!r} describes "
                               f"state {symbol!r}, which it does not have",
                               "its states: " + (", ".join(symbols) or "none (continuous)"))
        body = t.body if t is not None and t.body.strip() else ""
        out[lang] = {"label": str(meta.get("label") or r.get("label") or ""),
                     "descriptions": tuple(states.get(s, "") for s in symbols), "body": body}
    return out


def _declared_states(note: Note | None, row, problems: Problems) -> dict[str, str]:
    if note is not None and "states" in note.meta:
        states = note.meta["states"]
        if not isinstance(states, dict) or not states:
            problems.error(note.file, note.line("states"),
                           "states must map each state symbol to its description")
            return {}
        out = {}
        for k, v in states.items():
            symbol = str(k)
            if not re.fullmatch(r"[0-9A-Za-z]", symbol):
                problems.error(note.file, note.line("states"),
                               f"state symbol {symbol!r} must be one digit or letter")
                continue
            out[symbol] = str(v)
        return dict(sorted(out.items()))
    if row is not None and row.states:
        return dict(sorted(row.states.items()))
    return {}


# --- places, objects, notes ---------------------------------------------------------------

def _places(sources: Sources, profile: Profile, problems: Problems) -> dict[str, Place]:
    out: dict[str, Place] = {}
    for p in sources.places:
        if p.access not in profile.access:
            continue
        if p.precision == "withheld":
            p = replace(p, lat=None, lon=None, polygon=())
        elif p.precision == "generalised" and p.has_coordinates:
            p = replace(p, lat=generalise(p.lat), lon=generalise(p.lon), polygon=())
        out[p.id] = p
    return out


def _image(value: Any, note: Note, key: str, sources: Sources, problems: Problems,
           profile: Profile | None = None) -> Image | None:
    if value is None:
        return None
    if not isinstance(value, dict):
        problems.error(note.file, note.line(key), f"{key} must be a mapping with file, alt, "
                       "credit and licence")
        return None
    file = str(value.get("file", "")).strip()
    alt = str(value.get("alt", "")).strip()
    if not file:
        problems.error(note.file, note.line(key), f"an image in {key} has no file")
        return None
    media_prefix = sources.config.sources["media"].rstrip("/") + "/"
    if file not in sources.media and file.startswith(media_prefix):
        file = file[len(media_prefix):]  # written relative to the atlas folder
    if file not in sources.media:
        problems.error(note.file, note.line(key), f"image {file!r} is not in the media folder",
                       did_you_mean(file, sources.media))
        return None
    if not alt:
        problems.error(note.file, note.line(key), f"image {file!r} has no alt text: describe "
                       "what it shows for readers who cannot see it")
    if not str(value.get("credit", "")).strip():
        problems.warn(note.file, note.line(key), f"image {file!r} has no credit")
    access = str(value.get("access", "public"))
    if profile is not None and access not in profile.access:
        return None
    return Image(file, alt, str(value.get("credit", "")), str(value.get("licence", "")),
                 str(value.get("caption", "")))


def _access(note: Note, problems: Problems) -> str:
    access = str(note.meta.get("access", "public"))
    if access not in ACCESS_LEVELS:
        problems.error(note.file, note.line("access"), f"access {access!r} is not one of "
                       + ", ".join(ACCESS_LEVELS), did_you_mean(access, ACCESS_LEVELS))
        return "restricted"
    return access


def _objects(sources: Sources, profile: Profile, taxa: tuple[str, ...], places: dict[str, Place],
             all_place_ids: set[str], problems: Problems) -> dict[str, ArtObject]:
    notes: dict[str, Note] = {}
    for note in sources.objects:
        oid = str(note.meta.get("id", note.stem))
        if oid != note.stem and slug(oid) != note.stem:
            problems.error(note.file, note.line("id"), f"id {oid!r} does not match the file "
                           f"name {note.stem}.md")
        if oid not in taxa:
            problems.error(note.file, note.line("id"), f"object {oid!r} is not a tip of the trees",
                           did_you_mean(oid, taxa))
            continue
        notes[oid] = note
    matrix = sources.matrix
    objects: dict[str, ArtObject] = {}
    gaps: dict[str, list[str]] = {"row": [], "note": [], "place": []}
    for i, oid in enumerate(taxa):
        note = notes.get(oid)
        has_row = oid in matrix.rows
        if not has_row:
            gaps["row"].append(oid)
        if note is None:
            gaps["note"].append(oid)
            place = _place_of(oid, None, places, all_place_ids, problems, sources, gaps)
            objects[oid] = ArtObject(id=oid, title=oid, taxon=i, has_row=has_row,
                                     place=None if place == WITHHELD_PLACE else place,
                                     place_withheld=place == WITHHELD_PLACE)
            continue
        meta = note.meta
        access = _access(note, problems)
        images = []
        raw_images = meta.get("images", []) or []
        if not isinstance(raw_images, list):
            problems.error(note.file, note.line("images"), "images must be a list")
            raw_images = []
        for item in raw_images:
            image = _image(item, note, "images", sources, problems, profile)
            if image is not None:
                images.append(image)
        raw_sources = meta.get("sources", []) or []
        if not isinstance(raw_sources, list):
            raw_sources = [raw_sources]
        place = _place_of(oid, note, places, all_place_ids, problems, sources, gaps)
        withheld = access not in profile.access
        if withheld:
            objects[oid] = ArtObject(id=oid, title=WITHHELD_TITLE, taxon=i, withheld=True,
                                     access=access, has_row=has_row, has_note=False)
            continue
        objects[oid] = ArtObject(
            id=oid, title=str(meta.get("title") or oid), taxon=i,
            place=None if place == WITHHELD_PLACE else place,
            place_withheld=place == WITHHELD_PLACE,
            period=str(meta.get("period", "") or ""),
            community=str(meta.get("community", "") or ""),
            access=access, images=tuple(images),
            sources=tuple(_source_text(s) for s in raw_sources),
            body=note.body, has_note=True, has_row=has_row,
            translations={lang: {"title": str(t.meta.get("title") or meta.get("title") or oid),
                                 "body": t.body} for lang, t in note.translations.items()},
            file=note.file,
        )
    _report_gaps(gaps, places, sources, problems)
    return objects


def _listing(ids: list[str], limit: int = 12) -> str:
    shown = ", ".join(ids[:limit])
    return shown + (f" and {len(ids) - limit} more" if len(ids) > limit else "")


def _report_gaps(gaps: dict[str, list[str]], places: dict[str, Place], sources: Sources,
                 problems: Problems) -> None:
    """Each kind of gap in the data once, naming the objects (they still get their pages)."""
    matrix = sources.matrix.file
    objects = sources.config.sources["objects"]
    if gaps["row"]:
        n = len(gaps["row"])
        problems.warn(matrix, None, f"{n} object{'s' if n > 1 else ''} of the trees "
                      f"{'have' if n > 1 else 'has'} no row in the matrix (traits unknown): "
                      + _listing(gaps["row"]))
    if gaps["note"]:
        n = len(gaps["note"])
        problems.warn(objects, None, f"{n} object{'s' if n > 1 else ''} "
                      f"{'have' if n > 1 else 'has'} no note (pages show the data alone): "
                      + _listing(gaps["note"]))
    if gaps["place"]:
        n = len(gaps["place"])
        problems.warn(objects, None, f"{n} object{'s' if n > 1 else ''} "
                      f"{'have' if n > 1 else 'has'} no place (listed under the map): "
                      + _listing(gaps["place"]))
    unmapped = sorted(p.id for p in places.values()
                      if not p.has_coordinates and p.precision != "withheld")
    if unmapped:
        n = len(unmapped)
        problems.warn(sources.config.sources["gazetteer"], None,
                      f"{n} place{'s' if n > 1 else ''} {'have' if n > 1 else 'has'} no "
                      "coordinates (their objects are listed under the map): "
                      + _listing(unmapped))


def _source_text(value: Any) -> str:
    if isinstance(value, dict):
        return "; ".join(f"{k}: {v}" for k, v in value.items())
    return str(value)


def _place_of(oid: str, note: Note | None, places: dict[str, Place], all_place_ids: set[str],
              problems: Problems, sources: Sources, gaps: dict[str, list[str]]) -> str | None:
    value = note.meta.get("place") if note is not None else None
    if value is None:
        if oid in all_place_ids:  # a gazetteer row named after the object itself
            return oid if oid in places else WITHHELD_PLACE
        gaps["place"].append(oid)
        return None
    value = str(value)
    if value not in all_place_ids:
        problems.error(note.file, note.line("place"), f"place {value!r} is not in the gazetteer",
                       did_you_mean(value, all_place_ids))
        return None
    if value not in places:
        return WITHHELD_PLACE  # the profile may not show this place
    return value


def _clade_notes(sources: Sources, profile: Profile, taxa: tuple[str, ...],
                 problems: Problems) -> tuple[CladeNote, ...]:
    out = []
    for note in sources.clades:
        members = note.meta.get("members")
        if not isinstance(members, list) or not members:
            problems.error(note.file, note.line("members"), "a clade note needs members: a list of "
                           "object ids whose most recent common ancestor is the clade")
            continue
        bad = [str(m) for m in members if str(m) not in taxa]
        for m in bad:
            problems.error(note.file, note.line("members"), f"member {m!r} is not a tip of the "
                           "trees", did_you_mean(m, taxa))
        if bad or _access(note, problems) not in profile.access:
            continue
        out.append(CladeNote(note.stem, str(note.meta.get("title") or note.stem),
                             tuple(sorted(str(m) for m in members)), note.body, note.file,
                             translations=_translations(note)))
    return tuple(out)


def _translations(note: Note) -> dict[str, dict]:
    """A note's translations as {lang: {title, body}}; a translation without a title keeps
    the note's."""
    return {lang: {"title": str(t.meta.get("title") or note.meta.get("title") or note.stem),
                   "body": t.body} for lang, t in sorted(note.translations.items())}


def _pages(sources: Sources, profile: Profile, problems: Problems) -> tuple[Page, ...]:
    out = []
    for note in sources.pages:
        if _access(note, problems) not in profile.access:
            continue
        order = note.meta.get("order", 100)
        if not isinstance(order, int) or isinstance(order, bool):
            problems.error(note.file, note.line("order"), "order must be a whole number")
            order = 100
        out.append(Page(slug(note.stem), str(note.meta.get("title") or note.stem.title()),
                        note.body, order, translations=_translations(note), file=note.file))
    return tuple(sorted(out, key=lambda p: (p.order, p.name)))
