"""The evidence ledger: one row per coded cell, ``object,character,state,source,note``.

A study that keeps its coding as a long table (which photograph, drawing or field note each
cell was read from) names it in ``[sources] evidence``. The matrix is then derived from it: the
state of a cell is the state its rows give, a cell with no row is unknown (``?``). Several rows
for one cell are several pieces of evidence and must agree; a cell coded with two different
states is an error naming both lines, since only the author can decide it (a genuinely
polymorphic cell is written as one state ``0/1``). When a matrix file exists as well, every cell
it codes must agree with the ledger, so the two cannot drift apart unnoticed.

Columns of other people's tables are mapped with ``[columns] evidence = {object = "Item", ...}``.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from pathlib import Path

from ..errors import Problems
from .matrix import MatrixTable
from .tables import _rows
from .text import read_text

KEYS = ("object", "character", "state", "source", "note")
REQUIRED = ("object", "character", "state")


@dataclass(frozen=True)
class EvidenceRow:
    object: str
    character: str
    state: str
    source: str
    note: str
    line: int


@dataclass(frozen=True)
class EvidenceTable:
    file: str
    rows: tuple[EvidenceRow, ...]

    def by_cell(self) -> dict[tuple[str, str], list[EvidenceRow]]:
        """Rows grouped by ``(object, character)``, in file order."""
        out: dict[tuple[str, str], list[EvidenceRow]] = {}
        for r in self.rows:
            out.setdefault((r.object, r.character), []).append(r)
        return out


def read_evidence(path: Path, shown: str, problems: Problems,
                  columns: dict[str, str] | None = None) -> EvidenceTable | None:
    """Read the ledger; rows with a missing object, character or state are reported."""
    text = read_text(path, problems, shown)
    if text is None:
        return None
    ours = {key: (columns or {}).get(key, key) for key in KEYS}
    try:
        header = [h.strip() for h in next(csv.reader(io.StringIO(text)), [])]
    except csv.Error:
        header = []
    optional = tuple(k for k in ("source", "note") if ours[k] not in header)
    rows = []
    before = len(problems.errors)
    for line, record in _rows(text, shown, problems, {k: v for k, v in ours.items()
                                                      if k not in optional}, REQUIRED):
        empty = [ours[k] for k in REQUIRED if not record[k]]
        if empty:
            problems.error(shown, line, "has no " + " and no ".join(repr(e) for e in empty))
            continue
        rows.append(EvidenceRow(record["object"], record["character"], record["state"],
                                record.get("source", ""), record.get("note", ""), line))
    if not rows and len(problems.errors) == before:
        problems.error(shown, None, "has no rows: the ledger needs one row per coded cell")
    return EvidenceTable(shown, tuple(rows))


def matrix_from_evidence(table: EvidenceTable, problems: Problems,
                         order: tuple[str, ...] = ()) -> MatrixTable:
    """The matrix the ledger codes: characters in ``order`` then by first use; ``?`` if uncoded.

    Conflicting rows for one cell are reported (both lines) and the cell is left unknown.
    """
    characters = list(dict.fromkeys([c for c in order if any(r.character == c
                                                             for r in table.rows)]))
    characters += [c for c in dict.fromkeys(r.character for r in table.rows)
                   if c not in characters]
    column = {c: j for j, c in enumerate(characters)}
    cells: dict[str, list[str]] = {}
    lines: dict[str, int] = {}
    for (obj, ch), rows in table.by_cell().items():
        row = cells.setdefault(obj, ["?"] * len(characters))
        lines.setdefault(obj, rows[0].line)
        states = dict.fromkeys(r.state for r in rows)
        if len(states) > 1:
            where = ", ".join(f"line {r.line}: {r.state!r}" for r in rows)
            problems.error(table.file, rows[-1].line,
                           f"{obj!r} is coded for {ch!r} with different states ({where})",
                           "code the cell once, or as one polymorphic state such as 0/1")
            continue
        row[column[ch]] = rows[0].state
    return MatrixTable(file=table.file, characters=tuple(characters),
                       rows={o: tuple(r) for o, r in cells.items()}, row_lines=lines)


def check_against_matrix(table: EvidenceTable, matrix: MatrixTable, problems: Problems) -> None:
    """Every cell the matrix file codes must agree with the ledger (``?`` matches no evidence)."""
    column = {c: j for j, c in enumerate(matrix.characters)}
    coded = table.by_cell()
    for (obj, ch), rows in coded.items():
        if obj not in matrix.rows:
            problems.error(table.file, rows[0].line,
                           f"object {obj!r} has evidence but no row in {matrix.file}")
            continue
        if ch not in column:
            problems.error(table.file, rows[0].line,
                           f"character {ch!r} has evidence but is not a column of {matrix.file}")
            continue
        cell = matrix.rows[obj][column[ch]]
        if all(r.state != cell for r in rows):
            problems.error(matrix.file, matrix.row_lines[obj],
                           f"{obj!r} is coded {cell!r} for {ch!r}, but {table.file} line "
                           f"{rows[0].line} gives {rows[0].state!r}")
    bare = sum(1 for obj, cells in matrix.rows.items()
               for ch, cell in zip(matrix.characters, cells)
               if cell not in ("", "?") and (obj, ch) not in coded)
    if bare:
        problems.warn(matrix.file, None, f"{bare} coded cell{'s' if bare > 1 else ''} "
                      f"{'have' if bare > 1 else 'has'} no row in {table.file} (no evidence "
                      f"to show for {'them' if bare > 1 else 'it'})")
