"""Tests for atlas.analysis.consensus against DendroPy on the published Semitic sample, and
against invented cases small enough to count by hand."""

from __future__ import annotations

import hashlib
import math
from pathlib import Path

import dendropy
import numpy as np
import pytest
from dendropy.utility import constants

import atlas.analysis.consensus as consensus_module
from atlas.analysis.consensus import (
    clade_frequencies,
    clade_support,
    majority_rule,
    mcc_tree,
    node_ids,
    reroot,
)
from atlas.analysis.tree import clade_masks, clade_words
from atlas.errors import AtlasError
from atlas.sources.trees import (
    TreeSample,
    mask_labels,
    parse_newick,
    read_tree_file,
    write_newick,
)

POSTERIOR = Path("/work/shared/realdata/semitic-kitchen2009/posterior.trees")


def clade_lengths(tree) -> dict[frozenset[str], float]:
    """Internal-node clades (label sets) -> length of the branch above."""
    return {
        mask_labels(m, tree.taxa): float(tree.length[v])
        for v, m in enumerate(clade_masks(tree))
        if tree.tip[v] < 0
    }


def dendropy_clades(tree) -> dict[frozenset[str], float]:
    return {
        frozenset(leaf.taxon.label for leaf in node.leaf_iter()): node.edge.length
        for node in tree.internal_nodes()
    }


def sample_of(*newicks: str) -> TreeSample:
    trees = [parse_newick(s) for s in newicks]
    taxa = trees[0].taxa
    trees = [parse_newick(s, taxa=taxa) for s in newicks]
    return TreeSample("invented", taxa, trees, len(trees), 0, 1)


@pytest.fixture(scope="module")
def posterior():
    ours = read_tree_file(POSTERIOR, burnin=0.1)
    # DendroPy's tree_offset is a count of trees skipped: the same floor(1000 * 0.1) = 100
    theirs = dendropy.TreeList.get(
        path=str(POSTERIOR), schema="nexus", tree_offset=ours.burnin, preserve_underscores=True
    )
    assert len(theirs) == len(ours.trees) == 900
    return ours, theirs


def test_majority_rule_equals_dendropy(posterior):
    ours, theirs = posterior
    # DendroPy's min_freq=0.5 keeps clades with freq >= 0.5; ours keeps freq > min_freq, so a
    # threshold just below one half asks for the same set.
    summary = majority_rule(ours, min_freq=0.5 - 1e-9)
    reference = theirs.consensus(min_freq=0.5, set_edge_lengths="mean-length")
    expected = dendropy_clades(reference)
    got = clade_lengths(summary.tree)
    assert got.keys() == expected.keys()
    for clade, length in got.items():
        if clade != frozenset(ours.taxa):  # DendroPy leaves the root's edge without a length
            assert length == pytest.approx(expected[clade], rel=1e-9)  # DendroPy mean-length
    support = {
        frozenset(leaf.taxon.label for leaf in node.leaf_iter()): node.support
        for node in reference.internal_nodes()
    }
    for v, m in enumerate(clade_masks(summary.tree)):
        if summary.tree.tip[v] < 0:
            clade = mask_labels(m, ours.taxa)
            assert summary.support[v] == pytest.approx(support[clade], abs=1e-12)
            assert summary.count[v] == round(support[clade] * 900)
    assert np.isnan(summary.support[summary.tree.tip >= 0]).all()
    assert summary.support[-1] == 1.0 and summary.n_trees == 900
    assert summary.method == "majority"


def test_strict_majority_default(posterior):
    ours, theirs = posterior
    # DendroPy's default constant GREATER_THAN_HALF rounds to 0.5 as a float, so it too keeps
    # clades at exactly one half; a threshold a hair above 0.5 asks DendroPy for a strict one.
    assert constants.GREATER_THAN_HALF == 0.5
    reference = dendropy_clades(theirs.consensus(min_freq=0.5 + 1e-9))
    strict = clade_lengths(majority_rule(ours).tree)
    assert strict.keys() == reference.keys()
    loose = clade_lengths(majority_rule(ours, min_freq=0.5 - 1e-9).tree)
    assert len(loose) == len(strict) + 1  # this sample has one clade in exactly 450 of 900


def test_mcc_equals_dendropy(posterior):
    ours, theirs = posterior
    summary = mcc_tree(ours)
    reference = theirs.maximum_product_of_split_support_tree()  # DendroPy's MCC tree
    assert clade_lengths(summary.tree).keys() == dendropy_clades(reference).keys()
    assert summary.method == "mcc" and summary.n_trees == 900
    # the score DendroPy reports is the sum of log clade frequencies of that tree
    score = sum(math.log(s) for s, t in zip(summary.support, summary.tree.tip) if t < 0)
    assert score == pytest.approx(reference.log_product_of_split_support, rel=1e-9)


def test_clade_support_counts_by_hand():
    sample = sample_of("((A,B),(C,D));", "((A,B),C,D);", "((A,C),(B,D));", "(((A,B),C),D);")
    tree = parse_newick("(((A,B),C),D);", taxa=sample.taxa)
    support, count = clade_support(sample, tree)
    # (invented case) nodes A B (A,B) C (A,B,C) D root: (A,B) in 3 of 4, (A,B,C) in 1 of 4
    assert count.tolist() == [4, 4, 3, 4, 1, 4, 4]
    assert support[2] == 0.75 and support[4] == 0.25 and support[6] == 1.0
    # a tree read with its own taxa order gives the same numbers
    other = parse_newick("(D,(C,(B,A)));")
    assert sorted(clade_support(sample, other)[1].tolist()) == sorted(count.tolist())
    with pytest.raises(AtlasError, match="missing D; extra E"):
        clade_support(sample, parse_newick("(((A,B),C),E);"))


def test_majority_rule_by_hand_with_lengths():
    sample = sample_of(
        "((A:1,B:1):2,(C:1,D:1):1);", "((A:1,B:1):4,(C:1,D:1):1);", "((A:1,C:1):1,(B:1,D:1):1);"
    )
    summary = majority_rule(sample)
    # (invented case) (A,B) and (C,D) in 2 of 3 trees; mean length of (A,B): (2 + 4) / 2
    lengths = clade_lengths(summary.tree)
    assert lengths[frozenset("AB")] == 3.0 and lengths[frozenset("CD")] == 1.0
    assert summary.count[summary.tree.tip < 0].tolist() == [2, 2, 3]


def test_greedy_below_half():
    sample = sample_of(
        "(((A,B),C),D);", "(((A,B),C),D);", "(((A,C),B),D);", "(((A,C),B),D);", "(((B,C),A),D);"
    )
    # (invented case) (A,B) 2/5, (A,C) 2/5, (A,B,C) 5/5: at 0.3 the first of the tied pair by
    # bitset order wins, (A,B) = 0b011 before (A,C) = 0b101; (A,C) conflicts and is skipped
    got = set(clade_lengths(majority_rule(sample, min_freq=0.3).tree))
    assert got == {frozenset("AB"), frozenset("ABC"), frozenset("ABCD")}
    assert set(clade_lengths(majority_rule(sample).tree)) == {frozenset("ABC"), frozenset("ABCD")}


def test_reroot_by_hand():
    tree = parse_newick("((A:1,B:1):1,(C:1,D:3):1);")
    out = reroot(tree, ["D"])
    # (invented case) the root (1 + 1) is joined, D's branch (3) is split in half
    lengths = clade_lengths(out)
    assert set(lengths) == {frozenset("ABCD"), frozenset("ABC"), frozenset("AB")}
    assert lengths[frozenset("ABC")] == 1.5 and lengths[frozenset("AB")] == 2.0
    assert math.isnan(lengths[frozenset("ABCD")])
    assert out.length[out.node_of_taxon()[3]] == 1.5
    assert np.nansum(out.length) == np.nansum(tree.length)  # total length is kept (closed form)
    assert reroot(tree, ["A", "B"]) is tree  # already rooted on that branch
    # (invented case) an outgroup deeper in the tree: the root moves to the branch above (A,B)
    flipped = reroot(parse_newick("(((A,B),C),D);"), ["A", "B"])
    assert set(clade_lengths(flipped)) == {frozenset("ABCD"), frozenset("AB"), frozenset("CD")}
    first = flipped.children(flipped.root)[0]  # the outgroup side comes first
    assert mask_labels(clade_masks(flipped)[first], flipped.taxa) == {"A", "B"}


def test_reroot_keeps_unrooted_splits():
    sample = read_tree_file(POSTERIOR, burnin=0.99)  # 10 trees of the published sample
    for tree in sample.trees:
        rerooted = (
            reroot(tree, ["Aramaic", "Hebrew"])
            if _is_clade(tree, {"Aramaic", "Hebrew"})
            else reroot(tree, ["Mehri"])
        )
        assert _splits(rerooted) == _splits(tree)  # rerooting never changes the unrooted tree


def _is_clade(tree, labels):
    return any(mask_labels(m, tree.taxa) == labels for m in clade_masks(tree))


def _splits(tree):
    s = TreeSample("x", tree.taxa, [tree], 1, 0, 1)
    return set(s.split_frequencies())


def test_reroot_errors():
    tree = parse_newick("((A,B),(C,D),E);")
    with pytest.raises(AtlasError, match="not monophyletic"):
        reroot(tree, ["A", "C"])
    with pytest.raises(AtlasError) as info:
        reroot(tree, ["Ax", "B"])
    assert "'Ax' is not a tip" in info.value.problems[0].message
    with pytest.raises(AtlasError):
        reroot(tree, ["A", "B", "C", "D", "E"])


def test_majority_with_outgroup():
    # (invented case) the same unrooted tree rooted in three places; rooted on E they agree
    sample = sample_of("(((A,B),C),(D,E));", "((((A,B),C),D),E);", "(((D,E),C),(A,B));")
    summary = majority_rule(sample, outgroup=["E"])
    assert set(clade_lengths(summary.tree)) == {
        frozenset("AB"),
        frozenset("ABC"),
        frozenset("ABCD"),
        frozenset("ABCDE"),
    }
    assert summary.count[summary.tree.tip < 0].tolist() == [3, 3, 3, 3]
    mcc = mcc_tree(sample, outgroup=["E"])
    assert set(clade_lengths(mcc.tree)) == set(clade_lengths(summary.tree))


def test_node_ids():
    tree = parse_newick("(('lamp b',lamp_a),lamp_c);")
    ids = node_ids(tree)
    # closed form: sha1 of the sorted member labels joined by commas
    assert ids[2] == "n-" + hashlib.sha1(b"lamp b,lamp_a").hexdigest()[:10]
    assert ids[-1] == "n-" + hashlib.sha1(b"lamp b,lamp_a,lamp_c").hexdigest()[:10]
    assert [ids[v] for v in tree.tip_ids()] == ["lamp b", "lamp_a", "lamp_c"]
    # the same clade in another tree gets the same id
    other = node_ids(parse_newick("(lamp_c,(lamp_a,'lamp b'));"))
    assert ids[2] in other


# --- the array kernels -----------------------------------------------------------------------


def test_clade_words_equal_clade_masks(posterior):
    ours, _ = posterior
    trees = ours.trees[:50]
    rows, offsets = clade_words(trees, len(ours.taxa))
    for k, tree in enumerate(trees):  # the one-node-at-a-time loop of atlas.analysis.tree
        got = [int.from_bytes(r.tobytes(), "little") for r in rows[offsets[k] : offsets[k + 1]]]
        assert got == clade_masks(tree)
    wide = parse_newick("(" + ",".join(f"t{i:03d}" for i in range(130)) + ");")
    rows, _ = clade_words([wide], 130)  # more than 64 taxa: three words
    assert rows.shape == (131, 3)
    assert int.from_bytes(rows[-1].tobytes(), "little") == (1 << 130) - 1


def test_unique_rows_equal_numpy_and_survive_hash_collisions(monkeypatch):
    rng = np.random.default_rng(3)  # seeded
    rows = rng.integers(0, 4, size=(500, 3)).astype(np.uint64)
    unique, hashes, inverse = consensus_module._unique_rows(rows)
    assert np.array_equal(unique[inverse], rows)
    # numpy's own exact row unique as the reference
    assert len(unique) == len(np.unique(rows, axis=0)) and hashes is not None
    monkeypatch.setattr(consensus_module, "_hash_rows", lambda r: np.zeros(len(r), np.uint64))
    unique, hashes, inverse = consensus_module._unique_rows(rows)  # every hash collides
    assert hashes is None and np.array_equal(unique[inverse], rows)
    sample = sample_of("((A,B),(C,D));", "((A,B),C,D);", "((A,C),(B,D));")
    assert clade_support(sample, sample.trees[0])[1].tolist() == [3, 3, 2, 3, 3, 1, 3]


def test_one_child_chains_count_once_and_add_their_lengths():
    # (invented) a chain of one-child nodes above clade {A, B} in tree 1 and above tip C in
    # tree 2; by hand: {A, B} is in both trees once (frequency 1), its branch is 2 + 3 = 5 in
    # tree 1 and 4 in tree 2 (mean 4.5), and C's branch is 1 and 0.5 + 0.5 (mean 1)
    sample = sample_of("(((A:1,B:1):2):3,C:1);", "((A:1,B:1):4,(C:0.5):0.5);")
    assert clade_frequencies(sample) == {frozenset({"A", "B"}): 1.0}
    assert write_newick(majority_rule(sample).tree) == "((A:1.0,B:1.0):4.5,C:1.0);"
