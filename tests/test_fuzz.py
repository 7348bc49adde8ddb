"""Fuzzing the readers: random and mutated text never crashes them.

Valid samples (invented) are mutated: characters deleted, inserted, duplicated, numbers made
huge or odd, random unicode spliced in; pure random text and bytes are tried too. The tree
reader may only raise :class:`atlas.errors.AtlasError`; the readers that take a ``Problems``
collector must not raise at all (they record problems and return). Hypothesis is
derandomised, so every run tries the same examples.
"""

from __future__ import annotations

import json

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from atlas.errors import AtlasError, Problems
from atlas.sources.gazetteer import read_gazetteer
from atlas.sources.matrix import read_matrix
from atlas.sources.notes import parse_note
from atlas.sources.trees import parse_newick, read_tree_file

from .conftest import STARTER

FUZZ = settings(max_examples=200, deadline=None, derandomize=True,
                suppress_health_check=[HealthCheck.too_slow])

NEWICK = ["((a:1,b:2)0.9:1,(c:1,d:1):0.5,e);", "(a,(b,(c,d)));", "('x y':1e-3,[&c]b,c);",
          "((A,B)'n 1':2,(C,D)[&prob=0.5]:3,E:0);"]
TREES = [STARTER["trees.nex"], "(a:1,(b:1,c:1):1);\n(a:1,(c:1,b:1):1);\n",
         ("#NEXUS\nBEGIN TAXA;\n DIMENSIONS NTAX=3;\n TAXLABELS a b c;\nEND;\n"
         "BEGIN TREES;\n TREE one = [&U] (a,(b,c));\n TREE two = (b,(a,c));\nEND;\n")]
MATRICES = [STARTER["matrix.csv"], "object,x,y\nlamp-1,0,1\nlamp-2,0/1,?\nlamp-3,-,1\n",
            ("#NEXUS\nBEGIN DATA;\n DIMENSIONS NTAX=3 NCHAR=3;\n FORMAT SYMBOLS=\"012\" "
            "MISSING=? GAP=-;\n MATRIX\n a 01(01)\n b 1?-\n c {12}10\n ;\nEND;\n")]
PLACES_CSV = [STARTER["places.csv"], ('id,name,lat,lon,name@fr\np-1,"A, b",1.5,-2.25,Ah\n'
              "p-2,B,,,\n")]
PLACES_GEOJSON = [json.dumps({"type": "FeatureCollection", "features": [
    {"type": "Feature", "properties": {"id": "p-1", "name": "One", "name@fr": "Un"},
     "geometry": {"type": "Point", "coordinates": [-15.5, -31.25]}},
    {"type": "Feature", "properties": {"id": "p-2", "name": "Two", "precision": "generalised"},
     "geometry": {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 0]]]}}]},
    indent=1)]
NOTES = [STARTER["objects/spoon-a.md"], STARTER["characters/bowl.md"],
         STARTER["clades/hooked.md"], "---\n---\nbody\n", "no front matter at all\n"]

SYNTAX = "(),:;[]{}'\"=&#/\\-?_.+eE0123456789 \n\r\t\x00\x85\u2028\ufeff---"
HUGE = ["1e309", "-1e309", "9" * 400, "nan", "inf", "-0", "1e-400", "0x1F", "١٢", "1_000"]


@st.composite
def mutated(draw, samples: list[str]) -> str:
    """A sample with a few random edits."""
    text = draw(st.sampled_from(samples))
    for _ in range(draw(st.integers(1, 6))):
        i = draw(st.integers(0, len(text)))
        kind = draw(st.sampled_from(["delete", "insert", "duplicate", "number", "unicode",
                                     "cut"]))
        if kind == "delete":
            j = draw(st.integers(i, min(len(text), i + 8)))
            text = text[:i] + text[j:]
        elif kind == "insert":
            text = text[:i] + draw(st.text(st.sampled_from(SYNTAX), min_size=1, max_size=6)) \
                + text[i:]
        elif kind == "duplicate":
            j = draw(st.integers(i, min(len(text), i + 40)))
            text = text[:j] + text[i:j] * draw(st.integers(1, 50)) + text[j:]
        elif kind == "number":
            text = text[:i] + draw(st.sampled_from(HUGE)) + text[i:]
        elif kind == "unicode":
            text = text[:i] + draw(st.text(max_size=4)) + text[i:]
        else:
            text = text[:i]
    return text


def texts(samples: list[str]):
    return st.one_of(mutated(samples), st.text(max_size=200))


def contents(samples: list[str]):
    """File contents: mutated or random text in UTF-8, or Latin-1, or random bytes."""
    return st.one_of(texts(samples).map(lambda t: t.encode("utf-8")),
                     mutated(samples).map(lambda t: t.encode("latin-1", "replace")),
                     st.binary(max_size=200))


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    return tmp_path_factory.mktemp("fuzz")


@FUZZ
@given(text=texts(NEWICK))
def test_parse_newick_raises_only_atlas_errors(text):
    try:
        tree = parse_newick(text)
    except AtlasError as exc:
        assert exc.problems and all(p.file == "<newick>" for p in exc.problems)
    else:
        assert tree is not None


@FUZZ
@given(data=contents(TREES))
def test_read_tree_file_raises_only_atlas_errors(folder, data):
    path = folder / "trees.nex"
    path.write_bytes(data)
    try:
        sample = read_tree_file(path)
    except AtlasError as exc:
        assert exc.problems and all(p.message for p in exc.problems)
    else:
        assert len(sample.trees) >= 1


@FUZZ
@given(data=contents(MATRICES))
def test_read_matrix_never_raises(folder, data):
    path = folder / "matrix.csv"
    path.write_bytes(data)
    problems = Problems()
    table = read_matrix(path, "matrix.csv", problems)
    assert table is not None or problems.errors  # nothing read means a problem was said


@FUZZ
@given(data=contents(PLACES_CSV))
def test_read_gazetteer_csv_never_raises(folder, data):
    path = folder / "places.csv"
    path.write_bytes(data)
    problems = Problems()
    for place in read_gazetteer(path, "places.csv", problems):
        assert place.lat is None or -90 <= place.lat <= 90
        assert place.lon is None or -180 <= place.lon <= 180


@FUZZ
@given(data=contents(PLACES_GEOJSON))
def test_read_gazetteer_geojson_never_raises(folder, data):
    path = folder / "places.geojson"
    path.write_bytes(data)
    problems = Problems()
    for place in read_gazetteer(path, "places.geojson", problems):
        assert place.lat is None or -90 <= place.lat <= 90
        assert place.lon is None or -180 <= place.lon <= 180


@FUZZ
@given(text=texts(NOTES))
def test_parse_note_never_raises(text):
    problems = Problems()
    note = parse_note(text, "objects/x.md", "x", problems)
    assert note is not None or problems.errors
    if note is not None:
        assert isinstance(note.meta, dict) and all(isinstance(k, str) for k in note.meta)
