"""The trait matrix: CSV (``object`` then one column per character) or a NEXUS DATA block.

The reader only splits the file into cells and remembers where each row stands; what a cell
means (a state symbol, a polymorphism, a measurement) is decided in the link stage, where the
characters are known. Cells keep the matrix conventions: ``?`` unknown, ``-`` not applicable,
``0/1`` polymorphic (NEXUS ``(0,1)`` and ``{01}`` are converted to ``0/1``).
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import Problems
from .text import read_text


@dataclass(frozen=True)
class MatrixTable:
    """A matrix as read: character ids in column order, a row of cells per object."""

    file: str
    characters: tuple[str, ...]
    rows: dict[str, tuple[str, ...]]
    row_lines: dict[str, int]
    header_line: int = 1
    labels: dict[str, str] = field(default_factory=dict)  # NEXUS CHARSTATELABELS names
    state_labels: dict[str, tuple[str, ...]] = field(default_factory=dict)


def read_matrix(path: Path, shown: str, problems: Problems,
                columns: dict[str, str] | None = None) -> MatrixTable | None:
    text = read_text(path, problems, shown)
    if text is None:
        return None
    if text.lstrip().upper().startswith("#NEXUS"):
        return _read_nexus(text, shown, problems)
    return _read_csv(text, shown, problems, (columns or {}).get("object", "object"))


def _read_csv(text: str, shown: str, problems: Problems, object_column: str) -> MatrixTable | None:
    reader = csv.reader(io.StringIO(text))
    try:
        header = next(reader)
    except StopIteration:
        problems.error(shown, None, "is empty: a matrix needs a header row and one row per object")
        return None
    except csv.Error as exc:
        problems.error(shown, 1, f"is not readable CSV: {exc}")
        return None
    header = [h.strip() for h in header]
    if not header or header[0] != object_column:
        problems.error(shown, 1, f"the first column must be {object_column!r}, "
                       f"not {header[0] if header else ''!r}")
        return None
    characters = header[1:]
    seen: dict[str, int] = {}
    for i, c in enumerate(characters, start=2):
        if not c:
            problems.error(shown, 1, f"column {i} has no character id")
        elif c in seen:
            problems.error(shown, 1, f"character {c!r} is named twice (columns {seen[c]} and {i})")
        else:
            seen[c] = i
    rows: dict[str, tuple[str, ...]] = {}
    lines: dict[str, int] = {}
    start = 1
    try:
        for record in reader:
            line = start + 1
            start = reader.line_num
            if not any(cell.strip() for cell in record):
                continue
            name = record[0].strip()
            cells = tuple(c.strip() for c in record[1:])
            if len(cells) != len(characters):
                problems.error(shown, line, f"row {name!r} has {len(cells)} cells; the header "
                               f"names {len(characters)} characters")
                continue
            if not name:
                problems.error(shown, line, "a row has no object id")
                continue
            if name in rows:
                problems.error(shown, line, f"object {name!r} has two rows "
                               f"(first at line {lines[name]})")
                continue
            rows[name] = cells
            lines[name] = line
    except csv.Error as exc:
        problems.error(shown, reader.line_num, f"is not readable CSV: {exc}")
        return None
    if not rows and not problems.errors:
        problems.error(shown, None, "has no rows: the matrix needs one row per object")
    return MatrixTable(shown, tuple(characters), rows, lines)


# --- NEXUS ---------------------------------------------------------------------------------

_TOKEN = re.compile(r"""\s*(?:(\[[^\]]*\])|('(?:[^']|'')*')|([(){};=,])|([^\s(){};=,\[']+))""")


def _tokens(text: str):
    """(token, line) pairs of a NEXUS text; comments are dropped, quoted words unquoted."""
    pos = 0
    line = 1
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if not m or m.end() == pos:
            if text[pos:].strip() == "":
                return
            yield text[pos], line
            pos += 1
            continue
        start = m.start() + len(m.group(0)) - len(m.group(0).lstrip())
        line += text.count("\n", pos, start)
        pos = m.end()
        comment, quoted, punct, word = m.groups()
        here = line
        line += text.count("\n", start, pos)
        if comment is not None:
            continue
        if quoted is not None:
            yield ("'", quoted[1:-1].replace("''", "'")), here
        else:
            yield (punct or word), here


def _read_nexus(text: str, shown: str, problems: Problems) -> MatrixTable | None:
    toks = list(_tokens(text))
    i = 0
    n = len(toks)

    def word(k):
        t = toks[k][0]
        return t[1] if isinstance(t, tuple) else t

    # Find BEGIN DATA; or BEGIN CHARACTERS;
    while i < n - 1:
        if str(word(i)).upper() == "BEGIN" and str(word(i + 1)).upper() in ("DATA", "CHARACTERS"):
            break
        i += 1
    else:
        problems.error(shown, None, "has no DATA or CHARACTERS block")
        return None
    i += 2
    if i < n and toks[i][0] == ";":
        i += 1
    nchar = ntax = None
    missing, gap = "?", "-"
    labels: dict[str, str] = {}
    state_labels: dict[str, tuple[str, ...]] = {}
    ids: list[str] = []
    rows: dict[str, list[str]] = {}
    lines: dict[str, int] = {}
    while i < n:
        cmd = str(word(i)).upper()
        j = i + 1
        while j < n and toks[j][0] != ";":
            j += 1
        body = toks[i + 1 : j]
        if cmd == "END" or cmd == "ENDBLOCK":
            break
        if cmd == "DIMENSIONS":
            for k in range(len(body) - 2):
                key = str(_w(body[k])).upper()
                if body[k + 1][0] == "=" and key in ("NCHAR", "NTAX"):
                    try:
                        value = int(_w(body[k + 2]))
                    except ValueError:
                        problems.error(shown, body[k][1], f"{key} must be a whole number")
                        continue
                    if key == "NCHAR":
                        nchar = value
                    else:
                        ntax = value
        elif cmd == "FORMAT":
            for k in range(len(body) - 2):
                key = str(_w(body[k])).upper()
                if body[k + 1][0] == "=":
                    if key == "MISSING":
                        missing = str(_w(body[k + 2]))
                    elif key == "GAP":
                        gap = str(_w(body[k + 2]))
                    elif key == "INTERLEAVE":
                        pass
        elif cmd == "CHARSTATELABELS":
            _charstatelabels(body, labels, state_labels)
        elif cmd == "MATRIX":
            _matrix_rows(body, shown, problems, rows, lines, missing, gap)
        i = j + 1
    if nchar is None:
        problems.error(shown, None, "DIMENSIONS gives no NCHAR")
        return None
    if labels:
        ids = [labels.get(str(k), str(k)) for k in range(1, nchar + 1)]
        if len(set(ids)) != len(ids):
            ids = [str(k) for k in range(1, nchar + 1)]
    else:
        ids = [str(k) for k in range(1, nchar + 1)]
    out: dict[str, tuple[str, ...]] = {}
    for name, cells in rows.items():
        if len(cells) != nchar:
            problems.error(shown, lines[name], f"row {name!r} has {len(cells)} cells; NCHAR is "
                           f"{nchar}")
            continue
        out[name] = tuple(cells)
    if ntax is not None and len(rows) != ntax:
        problems.error(shown, None, f"NTAX is {ntax} but the matrix has {len(rows)} rows")
    by_id = {labels.get(str(k), str(k)): v for k, v in state_labels.items()}
    return MatrixTable(
        shown, tuple(ids), out, lines,
        labels={i: i for i in ids if not i.isdigit()},
        state_labels={k: v for k, v in by_id.items() if k in ids},
    )


def _w(tok):
    t = tok[0]
    return t[1] if isinstance(t, tuple) else t


def _charstatelabels(body, labels, state_labels) -> None:
    """``1 name / state0 state1, 2 name, …`` into labels and state labels by number."""
    entries: list[list] = [[]]
    for tok in body:
        if tok[0] == ",":
            entries.append([])
        else:
            entries[-1].append(_w(tok))
    for entry in entries:
        if not entry:
            continue
        number, rest = str(entry[0]), entry[1:]
        if rest and rest[0] != "/":
            labels[number] = str(rest[0])
            rest = rest[1:]
        if rest and rest[0] == "/":
            state_labels[number] = tuple(str(s) for s in rest[1:])


def _matrix_rows(body, shown, problems, rows, lines, missing, gap) -> None:
    """Rows are a taxon name then its cells; interleaved blocks append to the same row."""
    k = 0
    while k < len(body):
        name = str(_w(body[k]))
        line = body[k][1]
        k += 1
        cells = rows.setdefault(name, [])
        lines.setdefault(name, line)
        while k < len(body) and body[k][1] == line:
            tok = body[k][0]
            if tok in ("(", "{"):
                close = ")" if tok == "(" else "}"
                group: list[str] = []
                k += 1
                while k < len(body) and body[k][0] != close:
                    if body[k][0] != ",":
                        group.extend(str(_w(body[k])))
                    k += 1
                k += 1
                cells.append("/".join(group))
                continue
            for ch in str(_w(body[k])):
                cells.append("?" if ch == missing else "-" if ch == gap else ch)
            k += 1
