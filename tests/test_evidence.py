"""The evidence ledger: the matrix derived from a long table, and every cell linked to its evidence.

Every case is invented: the starter atlas (carved spoons) with its matrix rewritten as a ledger.
The reference for the derived matrix is the starter's own matrix file, read by the matrix reader.
"""

from __future__ import annotations

import csv
import io
import re
import subprocess
import sys
from pathlib import Path

import numpy as np

import atlas
from atlas.errors import AtlasError

SOURCES = {"bowl": "Photograph P-{n} (invented)", "handle": "Field drawing D-{n} (invented)",
           "hook": "https://example.org/spoons/{obj}", "notch": ""}


def ledger_from_matrix(matrix_csv: str, columns=("object", "character", "state", "source",
                                                  "note")) -> str:
    """The starter's matrix as a ledger: one row per cell that is not ``?``."""
    rows = list(csv.reader(io.StringIO(matrix_csv)))
    header, body = rows[0], rows[1:]
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(columns)
    for n, row in enumerate(body, start=1):
        for ch, cell in zip(header[1:], row[1:]):
            if cell == "?":
                continue
            source = SOURCES[ch].format(n=n, obj=row[0])
            writer.writerow([row[0], ch, cell, source, f"read by the second coder, {row[0]}/{ch}"])
    return out.getvalue()


def with_ledger(folder: Path, *, keep_matrix: bool = False, config_extra: str = "") -> Path:
    matrix = (folder / "matrix.csv").read_text()
    (folder / "evidence.csv").write_text(ledger_from_matrix(matrix))
    if not keep_matrix:
        (folder / "matrix.csv").unlink()
    toml = (folder / "atlas.toml").read_text()
    toml = toml.replace('gazetteer = "places.csv"',
                        'gazetteer = "places.csv"\nevidence = "evidence.csv"')
    (folder / "atlas.toml").write_text(toml + config_extra)
    return folder


def test_matrix_derived_from_the_ledger_equals_the_matrix_file(starter, tmp_path):
    reference = atlas.load(starter)  # the starter's matrix.csv, read by the matrix reader
    derived = atlas.load(with_ledger(starter))
    assert [c.id for c in derived.characters] == [c.id for c in reference.characters]
    np.testing.assert_array_equal(derived.masks, reference.masks)
    # Each coded cell carries its evidence; a "?" cell has none.
    ev = derived.evidence["spoon-a", "bowl"]
    assert [e.source for e in ev] == ["Photograph P-1 (invented)"]
    assert ev[0].file == "evidence.csv" and ev[0].line == 2
    assert ("spoon-b", "notch") not in derived.evidence


def test_ledger_beside_a_matrix_file_must_agree(starter):
    folder = with_ledger(starter, keep_matrix=True)
    assert atlas.load(folder).evidence  # agreeing: fine
    text = (folder / "evidence.csv").read_text().replace("spoon-c,hook,0,", "spoon-c,hook,1,")
    (folder / "evidence.csv").write_text(text)
    try:
        atlas.load(folder)
    except AtlasError as exc:
        messages = [p.format() for p in exc.problems]
    else:
        raise AssertionError("a disagreeing ledger was accepted")
    assert any(m.startswith("matrix.csv:4:") and "'spoon-c' is coded '0' for 'hook'" in m
               and "evidence.csv line" in m for m in messages), messages


def test_conflicting_rows_for_one_cell_name_both_lines(starter):
    folder = with_ledger(starter)
    with (folder / "evidence.csv").open("a") as f:
        f.write("spoon-a,bowl,1,Photograph P-99 (invented),a second look\n")
        f.write("spoon-a,,1,,\n")
    result = subprocess.run([sys.executable, "-m", "atlas", "check", str(folder)],
                            capture_output=True, text=True)
    assert result.returncode == 1
    assert "Traceback" not in result.stderr + result.stdout
    out = result.stdout + result.stderr
    n = len((folder / "evidence.csv").read_text().splitlines())
    assert re.search(rf"evidence.csv:{n - 1}: 'spoon-a' is coded for 'bowl' with different "
                     rf"states \(line 2: '0', line {n - 1}: '1'\)", out), out
    assert f"evidence.csv:{n}: has no 'character'" in out  # both problems in one run


def test_mapped_columns(starter):
    matrix = (starter / "matrix.csv").read_text()
    (starter / "matrix.csv").unlink()
    (starter / "coding.csv").write_text(
        ledger_from_matrix(matrix, ("Item", "Trait", "Code", "Seen in", "Remark")))
    toml = (starter / "atlas.toml").read_text().replace(
        'gazetteer = "places.csv"', 'gazetteer = "places.csv"\nevidence = "coding.csv"')
    toml += ('\n[columns]\nevidence = {object = "Item", character = "Trait", state = "Code", '
             'source = "Seen in", note = "Remark"}\n')
    (starter / "atlas.toml").write_text(toml)
    loaded = atlas.load(starter)
    assert loaded.evidence["spoon-d", "notch"][0].note == "read by the second coder, spoon-d/notch"


def test_pages_link_every_coded_cell_to_its_evidence(starter, tmp_path):
    out = tmp_path / "site"
    atlas.build(with_ledger(starter), out=out)
    page = (out / "objects" / "spoon-a.html").read_text()
    assert "Photograph P-1 (invented)" in page
    assert "read by the second coder, spoon-a/bowl" in page
    assert 'href="../characters/bowl.html#ev-spoon-a"' in page
    assert 'href="https://example.org/spoons/spoon-a"' in page  # a web source is a link
    sheet = (out / "characters" / "bowl.html").read_text()
    assert 'id="ev-spoon-a"' in sheet and "Evidence ledger" in sheet
    # One ledger row per object coded for the character (6 objects, none "?" for bowl).
    assert len(re.findall(r'<tr id="ev-', sheet)) == 6
    notch = (out / "characters" / "notch.html").read_text()
    assert 'id="ev-spoon-b"' not in notch  # spoon-b's notch is "?": no evidence row


def test_withheld_objects_evidence_never_leaks(starter, tmp_path):
    folder = with_ledger(starter)
    note = folder / "objects" / "spoon-c.md"
    note.write_text(note.read_text().replace("access: public", "access: restricted"))
    with (folder / "evidence.csv").open() as f:
        text = f.read()
    text = text.replace("read by the second coder, spoon-c/handle",
                        "seen only in the keeper's private drawer, never to be shown")
    (folder / "evidence.csv").write_text(text)
    out = tmp_path / "site"
    atlas.build(folder, out=out)
    for path in out.rglob("*"):
        if path.is_file():
            data = path.read_bytes()
            assert b"keeper's private drawer" not in data, path
            assert b"keeper&#39;s private drawer" not in data, path
    assert "never to be shown" in " ".join(atlas.load(folder).withheld_text)
    # The ledger download holds the published objects' rows only (spoon-c is restricted).
    rows = list(csv.DictReader(io.StringIO((out / "downloads" / "evidence.csv").read_text())))
    objects = {r["object"] for r in rows}
    assert "spoon-c" not in objects and {"spoon-a", "spoon-f"} <= objects
    assert len(rows) == sum(1 for line in text.splitlines()[1:] if not line.startswith("spoon-c"))


def test_missing_ledger_file_is_an_input_error(starter):
    toml = (starter / "atlas.toml").read_text().replace(
        'gazetteer = "places.csv"', 'gazetteer = "places.csv"\nevidence = "nowhere.csv"')
    (starter / "atlas.toml").write_text(toml)
    result = subprocess.run([sys.executable, "-m", "atlas", "check", str(starter)],
                            capture_output=True, text=True)
    assert result.returncode == 1 and "nowhere.csv: missing: no such file" in (
        result.stdout + result.stderr)
