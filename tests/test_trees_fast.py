"""Tests for the batch tree parser (atlas.sources.trees_fast) and the batch tree builder.

The reference is our own token-by-token parser (atlas.sources.tree_tokens), which the batch
parser must equal tree for tree and problem for problem; the token parser itself is checked
against DendroPy in tests/test_trees_reader.py. Every tree below is an invented case.
"""

from __future__ import annotations

import numpy as np
import pytest

import atlas.sources.trees as trees_module
from atlas.analysis.tree import Tree, trees_from_arrays
from atlas.errors import AtlasError
from atlas.sources.trees import read_tree_file

from .test_trees_reader import same_trees


def read_both(path, monkeypatch):
    """The file read as usual and read with every tree token by token."""
    fast = read_tree_file(path)
    with monkeypatch.context() as m:
        m.setattr(trees_module, "plain_body", lambda text, start: None)
        slow = read_tree_file(path)
    return fast, slow


def problems_both(path, monkeypatch):
    out = []
    for batch in (True, False):
        with monkeypatch.context() as m:
            if not batch:
                m.setattr(trees_module, "plain_body", lambda text, start: None)
            with pytest.raises(AtlasError) as info:
                read_tree_file(path)
        out.append([(p.line, p.message, p.hint) for p in info.value.problems])
    return out


# (invented) trees the batch parser takes, each in a form it must get right
PLAIN = [
    "((A:1,B:2):3,(C:4,D:5):6,E:7);",
    "((A),B,(C,D),E);",  # a one-child node above a tip
    "(((A,B)),C,D,E);",  # a one-child node above a clade
    "(A,(B,(C,(D,E)x:1)y:2)z:3)root:0.5;",  # internal and root labels, a root length
    "(E,D,C,B,A);",
    "((A:1e-3,B:+2.5E+2):.5,(C:5.,D:-0.0)0.95:0,E:12345678901234567890);",
    "((A:1.5e-0005,B:0000.1)1:9007199254740993,(C,D)2:1e23,E:1e-400);",
    "((A,B)[&rate=1.5e-3]:1,(C[&x],D):2,E[&y={1,2}]);",  # comments where samplers put them
    " ( ( A , B ) : 1 , ( C , D ) , E ) ;",  # spaces between tokens
    "((A,B),(C,D),E)\n;",
]


def test_batch_equals_token_parser_on_plain_trees(tmp_path, monkeypatch):
    path = tmp_path / "plain.nwk"
    path.write_text("\n".join(PLAIN) + "\n")
    taken = []
    batch = trees_module.parse_batch

    def counted(bodies, names, codes):
        trees, ok = batch(bodies, names, codes)
        taken.extend(ok.tolist())
        return trees, ok

    with monkeypatch.context() as m:
        m.setattr(trees_module, "parse_batch", counted)
        read_tree_file(path)
    assert taken == [True] * len(PLAIN)  # every one of them went through the batch parser
    fast, slow = read_both(path, monkeypatch)
    assert same_trees(fast, slow) and len(fast.trees) == len(PLAIN)
    # read by eye from the first tree: ((A:1,B:2):3,(C:4,D:5):6,E:7)
    first = fast.trees[0]
    assert first.parent.tolist() == [2, 2, 7, 5, 5, 7, 7, -1]
    assert first.length.tolist()[:7] == [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0]
    assert fast.trees[3].label[-1] == "root" and fast.trees[3].length[-1] == 0.5


def test_batch_and_token_trees_keep_file_order(tmp_path, monkeypatch):
    # (invented) quoted labels and nested comments go token by token, between batch trees
    text = (
        "#NEXUS\nBEGIN TREES;\n TRANSLATE 1 lamp_a, 2 'lamp b', 3 lamp_c, 4 lamp_d;\n"
        " TREE one = [&R] ((1:1,2:2):1,(3:1,4:1):1);\n"
        " TREE two = ((1,'lamp b'),(3,4));\n"
        " TREE three [&lnP=-5] = [&R] ((1,3):1,(2,4):2);\n"
        " TREE four = ((1[a[b]c],2),(3,4));\n"
        " TREE * five = [&U] [more] ((1,4),(2,3));\n"
        "END;\n"
    )
    path = tmp_path / "mixed.nex"
    path.write_text(text)
    fast, slow = read_both(path, monkeypatch)
    assert same_trees(fast, slow)
    assert fast.taxa == ("lamp b", "lamp_a", "lamp_c", "lamp_d")
    # the clade of the first child of the root, by eye: one {a, b}, three {a, c}, five {a, d}
    firsts = [sorted(fast.taxa[i] for i in t.tip[:3] if i >= 0) for t in fast.trees]
    assert firsts[0] == ["lamp b", "lamp_a"] and firsts[2] == ["lamp_a", "lamp_c"]
    assert firsts[4] == ["lamp_a", "lamp_d"]


def test_long_names_and_taxlabels(tmp_path, monkeypatch):
    # (invented) names longer than 7 bytes, and TAXLABELS numbers from 1
    names = ["bowl_with_handle", "bowl_plain", "jar_tall_narrow", "jar_squat", "cup"]
    text = (
        "#NEXUS\nBEGIN TAXA;\n DIMENSIONS NTAX=5;\n TAXLABELS " + " ".join(names) + ";\nEND;\n"
        "BEGIN TREES;\n TREE a = ((1,2),(3,4),5);\n"
        " TREE b = ((bowl_with_handle,jar_squat),(bowl_plain,jar_tall_narrow),cup);\nEND;\n"
    )
    path = tmp_path / "long.nex"
    path.write_text(text)
    fast, slow = read_both(path, monkeypatch)
    assert same_trees(fast, slow) and fast.taxa == tuple(sorted(names))


BROKEN = [
    "((A,B),(C,D),E);",
    "((A,B),(C,D)E;",  # unbalanced
    "((A,B)),(C,D),E);",  # closes below zero
    "((A,B),(C,D)),E;",  # a second node at the top
    "((A,,B),(C,D),E);",  # an empty tip
    "((A,B)(C,D),E);",  # a missing comma
    "((A,B),(C:x,D),E);",  # a length that is not a number
    "((A,B),(C:1:2,D),E);",  # two lengths
    "((A,B),(C,A),E);",  # a tip twice
    "((A,B),(C,D),F);",  # other tips than the first tree
    "((A,B),(C[c]D),E);",  # two labels with a comment between
    "((A=B,C),(D,E));",  # an '=' inside a tree
    "((A,B):١٢,(C,D),E);",  # a length in other digits: the token parser's number syntax
    "((A\x1cB,C),(D,E));",  # an ASCII separator that the token parser's \s matches
    "((A,B),(C,D),E);",
]


def test_batch_problems_equal_token_parser_problems(tmp_path, monkeypatch):
    path = tmp_path / "broken.nwk"
    path.write_text("\n".join(BROKEN) + "\n")
    with_batch, token_only = problems_both(path, monkeypatch)
    assert with_batch == token_only
    assert [line for line, _, _ in with_batch][:3] == [2, 3, 4]


def test_unknown_translate_key_goes_to_the_token_parser(tmp_path, monkeypatch):
    text = (
        "#NEXUS\nBEGIN TREES;\n TRANSLATE 0 lamp_a, 1 lamp_b, 2 lamp_c;\n"
        " TREE one = ((0,1),2);\n TREE two = ((0,3),2);\n TREE three = ((0,1),1);\nEND;\n"
    )
    path = tmp_path / "keys.nex"
    path.write_text(text)
    with_batch, token_only = problems_both(path, monkeypatch)
    assert with_batch == token_only
    assert [m for _, m, _ in with_batch] == [
        "unknown translate key '3' in tree",
        "tip label 'lamp_b' appears twice in this tree",
    ]


def test_deep_caterpillar(tmp_path, monkeypatch):
    # (invented) 33,000 tips in a ladder: depths past 2**15, trees past the 16-bit radix sort
    n = 33_000
    text = "(" * (n - 1) + "t0," + ",".join(f"t{i}:1)" for i in range(1, n)) + ";\n"
    path = tmp_path / "deep.nwk"
    path.write_text(text * 2)
    fast, slow = read_both(path, monkeypatch)
    assert same_trees(fast, slow)
    tree = fast.trees[0]
    assert tree.n_nodes == 2 * n - 1 and tree.children(tree.root).size == 2


def test_trees_from_arrays_equal_tree_one_by_one(tmp_path):
    path = tmp_path / "plain.nwk"
    path.write_text("\n".join(PLAIN) + "\n")
    sample = read_tree_file(path)
    for t in sample.trees:
        ref = Tree(t.parent.copy(), t.length.copy(), t.tip.copy(), t.taxa, t.label)
        assert np.array_equal(t.child_ptr, ref.child_ptr)
        assert np.array_equal(t.child_idx, ref.child_idx)
        assert t.child_ptr.dtype == ref.child_ptr.dtype and t.child_idx.dtype == np.int32
    with pytest.raises(ValueError, match="postorder"):  # a parent before its child
        trees_from_arrays(
            np.array([-1, 0]), np.ones(2), np.array([-1, 0]), np.array([0, 2]), ("A",), [()]
        )
