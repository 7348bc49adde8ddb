"""Readers: matrix, gazetteer, notes and small tables keep file and line for every problem."""

from __future__ import annotations

import json
from pathlib import Path

from atlas.errors import Problems
from atlas.sources.gazetteer import read_gazetteer
from atlas.sources.matrix import read_matrix
from atlas.sources.notes import parse_note, read_notes
from atlas.sources.tables import parse_states, read_character_table, read_contacts, read_rules
from atlas.sources.text import read_text

from .conftest import REALDATA


def _write(tmp_path: Path, name: str, text: str | bytes) -> Path:
    path = tmp_path / name
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    return path


# --- matrix ------------------------------------------------------------------------------

def test_matrix_csv_rows_and_lines(tmp_path):
    path = _write(tmp_path, "m.csv", "object,a,b\nx,0,1\n\ny,0/1,?\n")
    problems = Problems()
    m = read_matrix(path, "m.csv", problems)
    assert not problems.items
    assert m.characters == ("a", "b")
    assert m.rows == {"x": ("0", "1"), "y": ("0/1", "?")}
    assert m.row_lines == {"x": 2, "y": 4}  # the blank line 3 is skipped (invented case)


def test_matrix_csv_ragged_duplicated_and_headless(tmp_path):
    path = _write(tmp_path, "m.csv", "object,a,b,a\nx,0,1,0\nx,1,1,1\ny,0\n")
    problems = Problems()
    read_matrix(path, "m.csv", problems)
    text = [p.format() for p in problems.errors]
    assert "m.csv:1: character 'a' is named twice (columns 2 and 4)" in text
    assert "m.csv:3: object 'x' has two rows (first at line 2)" in text
    assert any(t.startswith("m.csv:4: row 'y' has 1 cells") for t in text)
    problems = Problems()
    read_matrix(_write(tmp_path, "n.csv", "taxon,a\nx,0\n"), "n.csv", problems)
    assert problems.errors[0].format() == "n.csv:1: the first column must be 'object', not 'taxon'"


def test_matrix_nexus_binary_from_the_published_dataset():
    # Kitchen et al. 2009 via Phlorest: 25 taxa x 673 binary characters (SOURCE.md)
    problems = Problems()
    m = read_matrix(REALDATA / "data.nex", "data.nex", problems)
    assert not problems.items
    assert len(m.rows) == 25 and len(m.characters) == 673
    assert set("".join("".join(r) for r in m.rows.values())) <= set("01?-")


def test_matrix_nexus_multistate_with_polymorphisms():
    # SOURCE.md: 25 x 95, states A-Z, "-" gaps, 4 polymorphisms like (C,J), CHARSTATELABELS
    problems = Problems()
    m = read_matrix(REALDATA / "raw_Kitchen-Semitic-Multistate.nex", "multi.nex", problems)
    assert not problems.items
    assert len(m.rows) == 25 and len(m.characters) == 95
    assert m.characters[:3] == ("ALL", "ASHES", "BARKTREE")
    polymorphic = sorted((name, cell) for name, row in m.rows.items()
                         for cell in row if "/" in cell)
    assert len(polymorphic) == 4
    assert ("Hebrew", "C/J") in polymorphic


def test_nexus_matrix_truncated(tmp_path):
    text = "#NEXUS\nBEGIN DATA;\nDIMENSIONS NTAX=2 NCHAR=3;\nMATRIX\na 010\nb 01\n;\nEND;\n"
    problems = Problems()
    read_matrix(_write(tmp_path, "t.nex", text), "t.nex", problems)
    assert [p.format() for p in problems.errors] == ["t.nex:6: row 'b' has 2 cells; NCHAR is 3"]


# --- gazetteer ---------------------------------------------------------------------------

def test_gazetteer_csv_with_mapped_columns_and_bad_values(tmp_path):
    text = ("ID,Name,Latitude,Longitude,precision,name@fr\n"
            "p1,One,10.5,-20.25,exact,Un\n"
            "p2,Two,,,exact,\n"
            "p3,Three,95,0,exact,\n"
            "p4,Four,north,0,nearby,\n")
    problems = Problems()
    places = read_gazetteer(_write(tmp_path, "g.csv", text), "g.csv", problems,
                            {"id": "ID", "name": "Name", "lat": "Latitude", "lon": "Longitude"})
    by_id = {p.id: p for p in places}
    assert by_id["p1"].lat == 10.5 and by_id["p1"].lon == -20.25
    assert by_id["p1"].names == {"fr": "Un"}
    assert not by_id["p2"].has_coordinates
    text = [p.format() for p in problems.errors]
    assert "g.csv:4: latitude 95 is outside -90..90" in text
    assert "g.csv:5: latitude 'north' is not a number" in text
    assert any(t.startswith("g.csv:5: precision 'nearby'") for t in text)


def test_gazetteer_geojson_points_and_polygons(tmp_path):
    data = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "geometry": {"type": "Point", "coordinates": [-15.0, -31.5]},
         "properties": {"id": "a", "name": "A"}},
        {"type": "Feature", "geometry": {"type": "Polygon", "coordinates": [
            [[0, 0], [2, 0], [2, 2], [0, 2], [0, 0]]]}, "properties": {"id": "b"}},
        {"type": "Feature", "geometry": {"type": "Point", "coordinates": [200, 0]},
         "properties": {"id": "c"}},
    ]}
    problems = Problems()
    places = read_gazetteer(_write(tmp_path, "g.geojson", json.dumps(data)), "g.geojson",
                            problems)
    by_id = {p.id: p for p in places}
    assert (by_id["a"].lat, by_id["a"].lon) == (-31.5, -15.0)
    # centroid of the unit-2 square is (1, 1): closed form
    assert (by_id["b"].lon, by_id["b"].lat) == (1.0, 1.0)
    assert "outside the globe" in problems.errors[0].message
    assert problems.errors[0].line == 1  # json.dumps writes one line: the feature's line


def test_geojson_problems_name_the_line_of_their_feature(tmp_path):
    text = ('{"type": "FeatureCollection", "features": [\n'
            ' {"type": "Feature", "geometry": {"type": "Point", "coordinates": [1, 2]},\n'
            '  "properties": {"id": "a"}},\n'
            ' {"type": "Feature", "geometry": {"type": "Point", "coordinates": [1, 95]},\n'
            '  "properties": {"id": "b", "precision": "nearby"}}\n]}\n')
    problems = Problems()
    read_gazetteer(_write(tmp_path, "g.geojson", text), "g.geojson", problems)
    # invented case: feature 2 starts on line 4
    assert sorted(p.line for p in problems.errors) == [4, 4]


# --- notes -------------------------------------------------------------------------------

def test_note_front_matter_and_key_lines():
    text = "---\nid: lamp-01\ntitle: A lamp\nperiod: 1840-1870\n---\nBody *text*.\n"
    note = parse_note(text, "objects/lamp-01.md", "lamp-01", Problems())
    assert note.meta == {"id": "lamp-01", "title": "A lamp", "period": "1840-1870"}
    assert note.line("title") == 3 and note.body_line == 6
    assert note.body.strip() == "Body *text*."


def test_dates_stay_text():
    note = parse_note("---\ndate: 2019-05-01\n---\n", "n.md", "n", Problems())
    assert note.meta["date"] == "2019-05-01"


def test_broken_yaml_names_the_file_line():
    problems = Problems()
    parse_note("---\nid: x\ntitle: [unclosed\nplace: y\n---\n", "objects/x.md", "x", problems)
    (p,) = problems.errors
    assert p.file == "objects/x.md" and p.line in (3, 4, 5)
    problems = Problems()
    parse_note("---\nid: x\n", "objects/x.md", "x", problems)
    assert "never closed" in problems.errors[0].message


def test_translations_attach_to_their_note(tmp_path):
    folder = tmp_path / "objects"
    folder.mkdir()
    _write(folder, "a.md", "---\ntitle: A\n---\nEnglish.\n")
    _write(folder, "a.fr.md", "---\ntitle: Un\n---\nFrançais.\n")
    _write(folder, "b.c.md", "---\ntitle: dotted id\n---\n")
    notes = read_notes(folder, "objects", Problems(), ("en", "fr"))
    assert [n.stem for n in notes] == ["a", "b.c"]
    assert notes[0].translations["fr"].meta["title"] == "Un"


# --- text --------------------------------------------------------------------------------

def test_latin1_is_read_with_a_warning_and_binary_is_refused(tmp_path):
    problems = Problems()
    text = read_text(_write(tmp_path, "l.csv", "object,a\ncaf\xe9,0\r\n".encode("latin-1")),
                     problems, "l.csv")
    assert text == "object,a\ncafé,0\n"
    assert problems.warnings[0].line == 2 and not problems.errors
    problems = Problems()
    assert read_text(_write(tmp_path, "b.csv", b"object\n\x00\x01\x02"), problems, "b.csv") is None
    assert problems.errors[0].format() == "b.csv:2: is not a text file (it holds binary data)"


# --- tables ------------------------------------------------------------------------------

def test_parse_states_defaults_to_binary():
    assert parse_states("") == {"0": "absent", "1": "present"}
    assert parse_states("A=flat|B=round") == {"A": "flat", "B": "round"}


def test_character_table_contacts_and_rules(tmp_path):
    problems = Problems()
    rows = read_character_table(_write(tmp_path, "c.csv", "ID,Label\n1,ALL_A\n2,ALL_B\n1,again\n"),
                                "c.csv", problems, {"id": "ID", "label": "Label"})
    assert [r.id for r in rows] == ["1", "2"] and rows[0].states == {"0": "absent",
                                                                     "1": "present"}
    assert problems.errors[0].format() == "c.csv:4: character '1' is listed twice (first at line 2)"
    contacts = read_contacts(_write(tmp_path, "k.csv", "from,to,characters,note\na,b,c1 c2,x\n"),
                             "k.csv", Problems())
    assert contacts[0].characters == ("c1", "c2") and contacts[0].line == 2
    problems = Problems()
    rules = read_rules(_write(tmp_path, "r.toml", '[[rule]]\nwhen = {character = "a", state = "1"}'
                              '\nneeds = {b = "1"}\n\n[[rule]]\nwhen = {character = "a"}\n'),
                       "r.toml", problems)
    assert len(rules) == 1 and rules[0].needs == {"b": "1"}
    assert problems.errors[0].line == 5
