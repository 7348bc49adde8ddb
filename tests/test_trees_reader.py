"""Tests for atlas.sources.trees: the tree reader, its errors, and Newick writing.

Reference values come from DendroPy reading the same files (an independent NEXUS/Newick parser)
or from the invented fixtures in tests/data/trees/, whose trees are small enough to read by eye.
"""

from __future__ import annotations

import math
from pathlib import Path

import dendropy
import numpy as np
import pytest

import atlas.sources.tree_tokens as tree_tokens
import atlas.sources.trees as trees_module
import atlas.sources.trees_fast as trees_fast
from atlas.analysis.tree import clade_masks
from atlas.errors import AtlasError
from atlas.sources.trees import (
    mask_labels,
    parse_newick,
    quote_label,
    read_tree_file,
    write_newick,
)

DATA = Path(__file__).parent / "data" / "trees"
REAL = Path("/work/shared/realdata/semitic-kitchen2009")


def clades(tree) -> set[frozenset[str]]:
    """The rooted clades of the internal nodes, as label sets (child order ignored)."""
    return {mask_labels(m, tree.taxa) for v, m in enumerate(clade_masks(tree)) if tree.tip[v] < 0}


def dendropy_split_frequencies(path: Path, schema: str, offset: int) -> dict:
    """DendroPy's unrooted split frequencies, keyed as ours: labels on the side without the
    alphabetically first label, non-trivial splits only. ``tree_offset`` is DendroPy's burn-in:
    a number of trees skipped from the start, not a fraction."""
    trees = dendropy.TreeList.get(
        path=str(path),
        schema=schema,
        tree_offset=offset,
        rooting="force-unrooted",
        preserve_underscores=True,
    )
    namespace = trees.taxon_namespace
    everyone = frozenset(t.label for t in namespace)
    first = min(everyone)
    out = {}
    for bitmask, freq in trees.split_distribution().split_frequencies.items():
        side = frozenset(t.label for t in namespace.bitmask_taxa_list(bitmask))
        if first in side:
            side = everyone - side
        if len(side) >= 2 and len(everyone - side) >= 2:
            out[side] = freq
    return out


# --- the torture files ----------------------------------------------------------------------


def test_torture_nexus_reads_every_quirk():
    raw = (DATA / "torture.nex").read_bytes()
    assert b"\r\n" in raw and not raw.endswith(b"\n")  # CRLF and no final newline survive
    sample = read_tree_file(DATA / "torture.nex")
    # (invented case) the labels as written: quotes removed, '' -> ', underscores kept
    assert sample.taxa == ("Orvane lamp", "Tessik-3", "it's lamp", "kiln_07", "spout")
    assert (sample.read, sample.burnin, sample.thin, len(sample.trees)) == (3, 0, 1, 3)
    first, second, third = sample.trees
    # (invented case) TRANSLATE from 0; comments before '=', on nodes, after ':'
    assert clades(first) == {
        frozenset({"kiln_07", "Orvane lamp"}),
        frozenset({"it's lamp", "Tessik-3"}),
        frozenset(sample.taxa),
    }
    lengths = {sample.taxa[t]: x for t, x in zip(first.tip, first.length) if t >= 0}
    # (invented case) scientific notation as written in the file
    assert lengths == {
        "kiln_07": 1.5e-05,
        "Orvane lamp": 2000.0,
        "it's lamp": 3.0,
        "Tessik-3": 4.0,
        "spout": 5.0,
    }
    assert "0.75" in first.label  # an internal label kept as read
    # (invented case) a tree spread over four lines, [&U]
    assert clades(second) == {
        frozenset({"kiln_07", "it's lamp"}),
        frozenset({"Orvane lamp", "Tessik-3"}),
        frozenset(sample.taxa),
    }
    # (invented case) quoted name and translate key mixed, comment after the root, '.5' length
    assert clades(third) == {
        frozenset({"spout", "kiln_07"}),
        frozenset({"Orvane lamp", "it's lamp"}),
        frozenset({"spout", "kiln_07", "Orvane lamp", "it's lamp"}),
        frozenset(sample.taxa),
    }
    assert third.length[third.node_of_taxon()[sample.taxa.index("spout")]] == 0.5


@pytest.mark.parametrize(
    ("name", "schema"),
    [
        ("torture.nex", "nexus"),
        ("torture.nwk", "newick"),
        ("translate1.nex", "nexus"),
        ("translate_names.nex", "nexus"),
        ("taxlabels.nex", "nexus"),
    ],
)
def test_fixtures_match_dendropy_splits(name, schema):
    ours = read_tree_file(DATA / name).split_frequencies()
    theirs = dendropy_split_frequencies(DATA / name, schema, 0)  # DendroPy on the same file
    assert ours.keys() == theirs.keys()
    for key in ours:
        assert ours[key] == pytest.approx(theirs[key], abs=1e-12)


def test_torture_newick():
    sample = read_tree_file(DATA / "torture.nwk")
    # (invented case) underscores kept, doubled quote undone
    assert sample.taxa == ("Pell's spoon", "spoon b", "spoon_a", "spoon_c")
    assert sample.read == 3
    assert clades(sample.trees[1]) == {
        frozenset({"spoon_a", "spoon_c"}),
        frozenset({"spoon b", "Pell's spoon"}),
        frozenset(sample.taxa),
    }
    t = sample.trees[0]
    assert t.length[t.node_of_taxon()[sample.taxa.index("spoon_c")]] == 1e-2  # '1E-2'
    assert np.isnan(sample.trees[1].length).all()  # no lengths given


def test_translate_from_one_and_by_name_and_taxlabel_numbers():
    expected = {frozenset({"bell_north", "bell_south"}), frozenset({"bell east", "bell_west"})}
    for name in ("translate1.nex", "translate_names.nex", "taxlabels.nex"):
        tree = read_tree_file(DATA / name).trees[0]
        assert clades(tree) - {frozenset(tree.taxa)} == expected  # (invented case)


def test_burnin_and_thin():
    # (invented case) 4 trees: floor(4 * 0.25) = 1 dropped, then every 2nd: trees 2 and 4
    sample = read_tree_file(DATA / "translate1.nex", burnin=0.25, thin=2)
    assert (sample.read, sample.burnin, sample.thin, len(sample.trees)) == (4, 1, 2, 2)
    assert clades(sample.trees[0]) == clades(read_tree_file(DATA / "translate1.nex").trees[1])
    assert len(sample.trees[1].parent) == 7 and clades(sample.trees[1]) == clades(
        read_tree_file(DATA / "translate1.nex").trees[3]
    )
    with pytest.raises(AtlasError):
        read_tree_file(DATA / "translate1.nex", burnin=1.0)
    with pytest.raises(AtlasError):
        read_tree_file(DATA / "translate1.nex", thin=0)


def test_split_frequencies_by_hand():
    # (invented case) 4 trees over 4 taxa: {bell_south, bell_west} side (without 'bell east')
    freq = read_tree_file(DATA / "translate1.nex").split_frequencies()
    assert freq == {
        frozenset({"bell_north", "bell_south"}): 3 / 4,  # trees 1, 3, 4 (unrooted reading)
        frozenset({"bell_south", "bell_west"}): 1 / 4,  # tree 2
    }


# --- the published data set, against DendroPy --------------------------------------------


@pytest.fixture(scope="module")
def greenhill():
    path = REAL / "raw_beast_Semitic.Greenhill.trees"
    ours = read_tree_file(path, burnin=0.1)
    # DendroPy's tree_offset counts trees: the same floor(2001 * 0.1) = 200 trees dropped
    theirs = dendropy_split_frequencies(path, "nexus", ours.burnin)
    return ours, theirs


def test_greenhill_translate_file_matches_dendropy(greenhill):
    ours, theirs = greenhill
    assert (ours.read, ours.burnin, len(ours.trees)) == (2001, 200, 1801)  # SOURCE.md: 2001 trees
    assert len(ours.taxa) == 25  # SOURCE.md: 25 taxa
    freq = ours.split_frequencies()
    assert freq.keys() == theirs.keys()
    assert max(abs(freq[k] - theirs[k]) for k in freq) < 1e-9


def test_posterior_file_matches_dendropy():
    path = REAL / "posterior.trees"
    ours = read_tree_file(path, burnin=0.1)
    theirs = dendropy_split_frequencies(path, "nexus", ours.burnin)
    assert (ours.read, ours.burnin) == (1000, 100)  # SOURCE.md: 1000 trees
    freq = ours.split_frequencies()
    assert freq.keys() == theirs.keys()
    assert max(abs(freq[k] - theirs[k]) for k in freq) < 1e-9


# --- bad input -------------------------------------------------------------------------------


def problems_of(tmp_path: Path, text: str, name: str = "bad.nex"):
    path = tmp_path / name
    path.write_text(text)
    with pytest.raises(AtlasError) as info:
        read_tree_file(path)
    for p in info.value.problems:
        assert p.file == str(path)
    return [(p.line, p.message) for p in info.value.problems]


def test_unbalanced_open_parenthesis(tmp_path):
    found = problems_of(tmp_path, "(A,B);\n((A,B),C;\n", "bad.nwk")
    assert found == [(2, "unbalanced parentheses: 1 '(' not closed")]


def test_unbalanced_close_parenthesis(tmp_path):
    found = problems_of(tmp_path, "\n\n(A,B));\n", "bad.nwk")
    assert found == [(3, "unbalanced ')': no '(' is open")]


def test_truncated_tree(tmp_path):
    text = "#NEXUS\nBEGIN TREES;\nTREE a = ((A,B),C);\nTREE b = ((A,B),\n(C"
    found = problems_of(tmp_path, text)
    assert found == [(4, "truncated tree: 2 '(' not closed at end of file")]


@pytest.mark.parametrize(
    "text",
    ["", "   \n\n", "[only a comment]\n", "#NEXUS\nBEGIN TAXA;\nTAXLABELS A B;\nEND;\n"],
)
def test_no_trees(tmp_path, text):
    found = problems_of(tmp_path, text)
    assert len(found) == 1 and ("empty" in found[0][1] or "no trees" in found[0][1])


def test_unknown_translate_key(tmp_path):
    text = "#NEXUS\nBEGIN TREES;\nTRANSLATE 1 A, 2 B, 3 C;\nTREE t = ((1,2),\n 4);\nEND;\n"
    found = problems_of(tmp_path, text)
    assert found == [(5, "unknown translate key '4' in tree")]


def test_duplicate_tip(tmp_path):
    found = problems_of(tmp_path, "((A,B),C);\n((A,B),\nA);\n", "bad.nwk")
    assert found == [(3, "tip label 'A' appears twice in this tree")]


def test_different_tip_sets_name_the_labels(tmp_path):
    text = "((A,B),(C,D));\n((A,B),(C,E));\n((A,B),C);\n"
    found = problems_of(tmp_path, text, "bad.nwk")
    assert found == [
        (2, "tree 2 has other tips than tree 1 (line 1): missing D; extra E"),
        (3, "tree 3 has other tips than tree 1 (line 1): missing D; extra none"),
    ]


def test_non_numeric_branch_length(tmp_path):
    text = "#NEXUS\nBEGIN TREES;\nTREE t = ((A:1,B:1):1,\n  C:1x5);\nEND;\n"
    found = problems_of(tmp_path, text)
    assert found == [(4, "branch length '1x5' is not a number")]


def test_every_problem_at_once(tmp_path):
    text = "(A:zz,B);\n(A,B);\n((A,B);\n(A,B,A);\n"
    found = problems_of(tmp_path, text, "bad.nwk")
    assert [line for line, _ in found] == [1, 3, 4]


def test_unterminated_quote_and_comment(tmp_path):
    assert problems_of(tmp_path, "(A,'B c);\n", "bad.nwk") == [
        (1, "unterminated quoted label (no closing quote)")
    ]
    assert problems_of(tmp_path, "(A,B);\n[a [nested] comment\n(A,B);", "bad.nwk") == [
        (2, "unterminated comment (no closing ']')")
    ]


def test_missing_file_and_bad_encoding(tmp_path):
    with pytest.raises(AtlasError):
        read_tree_file(tmp_path / "nowhere.nex")
    (tmp_path / "latin1.nwk").write_bytes("(A,B\xe9);".encode("latin-1"))
    with pytest.raises(AtlasError):
        read_tree_file(tmp_path / "latin1.nwk")


# --- single trees and writing -------------------------------------------------------------


def test_parse_newick_postorder_arrays():
    t = parse_newick("((A:1,B:2)x:3,C:4);")
    # (invented case) postorder ids: A=0, B=1, (A,B)=2, C=3, root=4
    assert t.parent.tolist() == [2, 2, 4, 4, -1]
    assert t.tip.tolist() == [0, 1, -1, 2, -1]
    assert t.length.tolist()[:4] == [1.0, 2.0, 3.0, 4.0] and math.isnan(t.length[4])
    assert t.label[2] == "x"
    with pytest.raises(AtlasError):
        parse_newick("((A,B),C);", taxa=("A", "B"))


def test_write_newick_round_trip_and_quoting():
    text = "(('it''s here':1.5e-05,b_c:2):0.25,('x y':1,z:1e-10):0.5);"
    tree = parse_newick(text)
    out = write_newick(tree)
    assert "'it''s here'" in out and "'x y'" in out and "b_c" in out
    again = parse_newick(out)
    assert again.taxa == tree.taxa and clades(again) == clades(tree)
    assert np.array_equal(again.length, tree.length, equal_nan=True)
    assert write_newick(tree, lengths=False) == "(('it''s here',b_c),('x y',z));"
    support = np.array([np.nan, np.nan, 0.25, np.nan, np.nan, 1 / 3, 1.0])
    assert write_newick(tree, lengths=False, support=support) == (
        "(('it''s here',b_c)0.25,('x y',z)0.3333)1;"
    )
    assert quote_label("") == "''" and quote_label("a[b]") == "'a[b]'"


# --- the batch parser against the token-by-token parser ------------------------------------


def same_trees(a, b) -> bool:
    return a.taxa == b.taxa and all(
        np.array_equal(x.parent, y.parent)
        and np.array_equal(x.tip, y.tip)
        and np.array_equal(x.length, y.length, equal_nan=True)
        and x.label == y.label
        for x, y in zip(a.trees, b.trees, strict=True)
    )


@pytest.mark.parametrize(
    "path",
    [
        REAL / "posterior.trees",
        REAL / "summary.trees",
        REAL / "raw_kitchen2009.mcct.trees",
        DATA / "torture.nex",
        DATA / "torture.nwk",
        DATA / "translate1.nex",
    ],
)
def test_batch_parser_equals_token_parser(path, monkeypatch):
    fast = read_tree_file(path)
    monkeypatch.setattr(trees_module, "plain_body", lambda text, start: None)
    slow = read_tree_file(path)  # every tree token by token
    assert same_trees(fast, slow)


def test_batch_parser_on_plain_names_and_internal_labels(tmp_path, monkeypatch):
    # (invented case) names, internal labels, every way of writing a number, spaces
    text = (
        "((lamp_a:1,lamp_b:2.5e-1)0.95:.5,(lamp_c:1E2 , lamp_d:+3.)x_y:0,lamp_e:-0.0);\n"
        "((lamp_a:0,lamp_c:7)1:1,(lamp_b,lamp_d)2,lamp_e:12345678901234567890);\n"
    )
    path = tmp_path / "plain.nwk"
    path.write_text(text)
    fast = read_tree_file(path)
    monkeypatch.setattr(trees_module, "plain_body", lambda text, start: None)
    assert same_trees(fast, read_tree_file(path))


def test_numbers_equal_python_float():
    rng = np.random.default_rng(7)  # seeded
    texts = [repr(float(x)) for x in rng.random(3000) * 10.0 ** rng.integers(-30, 30, 3000)]
    texts += [f"{x:.6g}" for x in rng.random(2000) * 10.0 ** rng.integers(-8, 8, 2000)]
    texts += ["1.5e-05", "2E3", ".5", "5.", "+1e-3", "-2.5", "00012", "9.036477332963182E-5"]
    texts += ["1e", "e5", ".", "1.2.3", "+-1", "1-2", "1e+", "", "1e400", "5e-324", "-0.0"]
    texts += ["123456789012345678901234567890", "0.1234567890123456789", "1x5", "1_0"]
    texts += ["9007199254740993", "9007199254740992e22", "1e-22", "1e23", "+.5e+1", "-.0e-0"]
    texts += ["1.5e-0005", "1e22", "0" * 30 + "1", "2.0e", "--1", "1e1e1", "e", "+", "1.5E+308"]
    raw = (",".join(texts) + ",").encode()
    b = np.frombuffer(raw, dtype=np.uint8)
    ends = np.flatnonzero(b == 44)
    starts = np.r_[0, ends[:-1] + 1]
    values, good = trees_fast.parse_numbers(b, starts, ends)
    for text, value, ok in zip(texts, values, good, strict=True):
        # the token path's number pattern decides what is a number; Python's float its value
        assert ok == bool(tree_tokens.NUMBER.match(text)), text
        if ok:
            assert value == float(text) and np.signbit(value) == np.signbit(float(text)), text


def test_block_without_end(tmp_path):
    # (invented case) the file stops inside the TREES block, after a whole tree
    text = "#NEXUS\nBEGIN TREES;\n  TREE a = ((A,B),C);\n  TRE"
    assert problems_of(tmp_path, text) == [(4, "the TREES block begun on line 2 has no END")]
    # a tree cut short is reported as such, without a second message about the block
    text = "#NEXUS\nBEGIN TREES;\n  TREE a = ((A,B),C);\n  TREE b = ((A,"
    assert problems_of(tmp_path, text) == [(4, "truncated tree: 2 '(' not closed at end of file")]
