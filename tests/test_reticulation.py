"""Tests of the lineage diagnostics: distances, delta scores, parallel gains, rules.

Expected values come from outside the module: SciPy's Hamming distance, DendroPy's patristic
distances, the four-point condition (Buneman 1971; Holland et al. 2002), brute-force
enumeration of quartets written as plain loops here, SciPy matrix exponentials and numerical
integration, and hand counts on invented cases. Every object, lineage and rule is invented.
"""

from __future__ import annotations

import itertools

import dendropy
import numpy as np
import pytest
from scipy import integrate, linalg
from scipy.spatial.distance import pdist, squareform

from atlas.analysis import likelihood as lk
from atlas.analysis.changes import Changes, expected_changes
from atlas.analysis.reticulation import (
    Candidate,
    borrowing_candidates,
    changes_from_root,
    check_rules,
    delta_scores,
    expected_changes_into,
    matrix_distances,
)
from atlas.analysis.tree import Tree
from atlas.errors import AtlasError
from atlas.sources.tables import Rule

# ---------------------------------------------------------------------------------------------
# Helpers


def from_newick(text: str) -> Tree:
    """Our postorder arrays from a Newick string, parsed by DendroPy (the reference reader)."""
    dt = dendropy.Tree.get(data=text, schema="newick", preserve_underscores=True)
    nodes = list(dt.postorder_node_iter())
    ids = {id(nd): i for i, nd in enumerate(nodes)}
    taxa = tuple(sorted(nd.taxon.label for nd in nodes if nd.is_leaf()))
    parent = [ids[id(nd.parent_node)] if nd.parent_node is not None else -1 for nd in nodes]
    length = [np.nan if nd.edge_length is None else nd.edge_length for nd in nodes]
    tip = [taxa.index(nd.taxon.label) if nd.is_leaf() else -1 for nd in nodes]
    return Tree(parent, length, tip, taxa)


def random_newick(n_tips: int, rng: np.random.Generator, unit: bool = False) -> str:
    """A random binary tree, joining two random lineages at a time (invented case)."""
    parts = [f"t{i:02d}" for i in range(n_tips)]
    while len(parts) > 1:
        a, b = sorted(rng.choice(len(parts), size=2, replace=False))
        la, lb = (1.0, 1.0) if unit else rng.uniform(0.1, 2.0, size=2)
        joined = f"({parts[a]}:{la:.6f},{parts[b]}:{lb:.6f})"
        parts = [p for i, p in enumerate(parts) if i not in (a, b)] + [joined]
    return parts[0] + ";"


def patristic(newick: str) -> tuple[list[str], np.ndarray]:
    """Path-length distances between tips computed by DendroPy (reference library)."""
    dt = dendropy.Tree.get(data=newick, schema="newick")
    pdm = dt.phylogenetic_distance_matrix()
    taxa = sorted(dt.taxon_namespace, key=lambda t: t.label)
    d = np.array([[pdm.distance(a, b) if a is not b else 0.0 for b in taxa] for a in taxa])
    return [t.label for t in taxa], d


def quartet_values(d: np.ndarray, q: tuple[int, int, int, int], scale: float):
    """One quartet's delta and residual, written straight from Holland et al. (2002) and Gray,
    Bryant & Greenhill (2010): sort the three pair sums, take the gaps."""
    i, j, k, m = q
    m1, m2, m3 = sorted([d[i, j] + d[k, m], d[i, k] + d[j, m], d[i, m] + d[j, k]], reverse=True)
    delta = 0.0 if m1 == m3 else (m1 - m2) / (m1 - m3)
    return delta, ((m1 - m2) / scale) ** 2


def brute_force_by_taxon(d: np.ndarray):
    """Per taxon, a separate loop over every triple of the other taxa (brute force)."""
    n = d.shape[0]
    scale = d[np.triu_indices(n, 1)].mean()
    delta, resid = np.zeros(n), np.zeros(n)
    for x in range(n):
        others = [y for y in range(n) if y != x]
        values = [quartet_values(d, (x, *t), scale) for t in itertools.combinations(others, 3)]
        delta[x] = np.mean([v[0] for v in values])
        resid[x] = np.mean([v[1] for v in values])
    every = [quartet_values(d, q, scale) for q in itertools.combinations(range(n), 4)]
    return delta, resid, np.mean([v[0] for v in every]), np.mean([v[1] for v in every])


def split_matrix(tree: Tree) -> np.ndarray:
    """One binary character per split of ``tree``, each split once: 1 below the branch, 0
    elsewhere (the root's second child repeats the first's split and is left out)."""
    below = np.zeros((tree.n_nodes, len(tree.taxa)), dtype=bool)
    for v in range(tree.n_nodes):
        if tree.tip[v] >= 0:
            below[v, tree.tip[v]] = True
        if tree.parent[v] >= 0:
            below[tree.parent[v]] |= below[v]
    root_children = tree.children(tree.root)
    keep = [v for v in range(tree.n_nodes - 1) if v != root_children[-1]]
    return np.where(below[keep].T, 2, 1).astype(np.uint32)  # bit 1 = state 1, bit 0 = state 0


# ---------------------------------------------------------------------------------------------
# matrix_distances


def test_matrix_distances_equal_scipy_hamming_on_complete_data():
    rng = np.random.default_rng(3)
    codes = rng.integers(0, 3, size=(12, 40))  # invented complete matrix, three states
    masks = (1 << codes).astype(np.uint32)
    got = matrix_distances(masks, np.full(40, 3))
    expected = squareform(pdist(codes, metric="hamming"))  # SciPy: proportion of differences
    np.testing.assert_allclose(got, expected, atol=1e-15)


def test_matrix_distances_pairwise_deletion_and_polymorphism_by_hand():
    # (invented case) four characters, two states; 3 = both bits = unknown, here also "0/1"
    # for the three-state last character ("0/1" = 3 is coded there, 7 = unknown)
    masks = np.array(
        [
            [1, 2, 3, 1],  # 0 1 ? 0
            [2, 2, 1, 3],  # 1 1 0 0/1
            [2, 3, 2, 7],  # 1 ? 1 ?
        ],
        dtype=np.uint32,
    )
    got = matrix_distances(masks, np.array([2, 2, 2, 3]))
    # hand counts: rows 0,1 share chars 0,1,3; differ at 0 only (0/1 meets 0): 1/3
    # rows 0,2 share char 0 only and differ there: 1; rows 1,2 share 0,2; differ at 2: 1/2
    expected = np.array([[0, 1 / 3, 1], [1 / 3, 0, 1 / 2], [1, 1 / 2, 0]])
    np.testing.assert_allclose(got, expected)


def test_matrix_distances_nan_without_shared_characters_and_bad_input():
    masks = np.array([[1, 3], [3, 2], [2, 2]], dtype=np.uint32)  # invented case
    got = matrix_distances(masks, np.array([2, 2]))
    assert np.isnan(got[0, 1]) and got[0, 2] == 1.0 and got[1, 2] == 0.0  # hand counts
    with pytest.raises(AtlasError, match="state count per character"):
        matrix_distances(masks, np.array([2]))
    with pytest.raises(AtlasError, match="2-D integer"):
        matrix_distances(np.zeros(3), np.array([2, 2, 2]))


# ---------------------------------------------------------------------------------------------
# delta_scores


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_delta_zero_on_additive_tree_distances(seed):
    # four-point condition: patristic distances (DendroPy) on a tree have m1 == m2 in every
    # quartet (Buneman 1971; Holland et al. 2002), so every delta and residual is 0
    _, d = patristic(random_newick(11, np.random.default_rng(seed)))
    scores = delta_scores(d)
    assert np.all(np.abs(scores.delta) < 1e-12)
    assert np.all(np.abs(scores.q_residual) < 1e-12)
    assert abs(scores.mean_delta) < 1e-12 and not scores.sampled
    assert scores.n_quartets == 330  # C(11, 4), closed form


def test_delta_zero_on_split_compatible_matrix():
    newick = random_newick(10, np.random.default_rng(7), unit=True)
    tree = from_newick(newick)
    masks = split_matrix(tree)
    d = matrix_distances(masks, np.full(masks.shape[1], 2))
    # the number of splits between two tips is their path length on the unit-length tree
    # (DendroPy patristic distances), the root's two branches counted as one split
    labels, path = patristic(newick)
    assert labels == list(tree.taxa)
    root_kids = tree.children(tree.root)
    tips_of_last = {
        tree.taxa[tree.tip[v]]
        for v in range(tree.n_nodes)
        if tree.tip[v] >= 0 and _below(tree, v, int(root_kids[-1]))
    }
    across = np.array(
        [[(a in tips_of_last) != (b in tips_of_last) for b in labels] for a in labels]
    )
    np.testing.assert_allclose(d * masks.shape[1], path - across, atol=1e-9)
    scores = delta_scores(d)
    assert np.all(np.abs(scores.delta) < 1e-12)  # four-point condition, as above
    assert np.all(np.abs(scores.q_residual) < 1e-12)


def _below(tree: Tree, v: int, u: int) -> bool:
    while v >= 0:
        if v == u:
            return True
        v = int(tree.parent[v])
    return False


def test_object_mixing_two_lineages_has_the_highest_delta():
    # (invented case) two lineages of four objects each, ((a1,a2),(a3,a4)) and
    # ((b1,b2),(b3,b4)), one binary character per split, each repeated four times; the object
    # "mix" copies the first half of the characters from a1 and the second half from b1
    tree = from_newick("(((a1,a2),(a3,a4)),((b1,b2),(b3,b4)));")
    masks = np.repeat(split_matrix(tree), 4, axis=1)
    half = masks.shape[1] // 2
    mix = np.concatenate([masks[0, :half], masks[4, half:]])
    d = matrix_distances(np.vstack([masks, mix]), np.full(masks.shape[1], 2))
    scores = delta_scores(d)
    assert int(np.argmax(scores.delta)) == 8
    assert int(np.argmax(scores.q_residual)) == 8
    assert scores.delta[8] > 2 * np.sort(scores.delta)[-2]


def test_five_taxa_equal_hand_enumeration():
    # (invented case) integer distances between five objects
    d = np.array(
        [
            [0, 3, 5, 6, 7],
            [3, 0, 4, 7, 6],
            [5, 4, 0, 5, 4],
            [6, 7, 5, 0, 2],
            [7, 6, 4, 2, 0],
        ],
        dtype=float,
    )
    scores = delta_scores(d)
    delta, resid, mean_delta, mean_resid = brute_force_by_taxon(d)  # brute force
    np.testing.assert_allclose(scores.delta, delta, rtol=1e-12)
    np.testing.assert_allclose(scores.q_residual, resid, rtol=1e-12)
    assert scores.mean_delta == pytest.approx(mean_delta, rel=1e-12)
    assert scores.mean_q_residual == pytest.approx(mean_resid, rel=1e-12)
    assert scores.scale == pytest.approx(49 / 10)  # mean of the ten distances, by hand


def test_hand_example_of_the_docstring():
    # (invented case) sums 4, 2, 2: delta = (4 - 2) / (4 - 2) = 1 by hand; all equal: 0
    d = np.ones((4, 4)) - np.eye(4)
    assert delta_scores(d).delta.tolist() == [0.0] * 4
    d[0, 1] = d[1, 0] = d[2, 3] = d[3, 2] = 2.0
    scores = delta_scores(d)
    assert scores.delta.tolist() == [1.0] * 4
    # mean distance 8 / 6, so the scaled gap is 2 / (4 / 3) = 1.5 and its square 2.25
    assert scores.q_residual == pytest.approx([2.25] * 4)


def test_fast_delta_equals_brute_force_on_random_distances():
    rng = np.random.default_rng(11)
    x = rng.uniform(0.1, 1.0, size=(9, 9))  # invented random distances, n = 9
    d = x + x.T
    np.fill_diagonal(d, 0.0)
    scores = delta_scores(d)
    delta, resid, mean_delta, mean_resid = brute_force_by_taxon(d)  # brute force
    np.testing.assert_allclose(scores.delta, delta, rtol=1e-10)
    np.testing.assert_allclose(scores.q_residual, resid, rtol=1e-10)
    assert scores.mean_delta == pytest.approx(mean_delta, rel=1e-10)
    assert scores.mean_q_residual == pytest.approx(mean_resid, rel=1e-10)
    assert scores.n_quartets == 126  # C(9, 4), closed form


def test_sampled_quartets_approach_the_exact_scores_and_say_so():
    rng = np.random.default_rng(5)
    pts = rng.random((14, 3))
    d = np.sqrt(((pts[:, None] - pts[None]) ** 2).sum(-1))  # invented: points in space
    exact = delta_scores(d)
    one = delta_scores(d, exact_limit=0, samples=300_000, seed=4)
    again = delta_scores(d, exact_limit=0, samples=300_000, seed=4)
    other = delta_scores(d, exact_limit=0, samples=300_000, seed=5)
    assert one.sampled and one.seed == 4 and one.n_quartets == 300_000
    np.testing.assert_array_equal(one.delta, again.delta)  # seeded: deterministic
    assert not np.array_equal(one.delta, other.delta)
    # each taxon sits in ~86,000 sampled quartets: the means agree to a few thousandths
    np.testing.assert_allclose(one.delta, exact.delta, atol=0.01)
    np.testing.assert_allclose(one.q_residual, exact.q_residual, rtol=0.05)
    assert one.mean_delta == pytest.approx(exact.mean_delta, abs=0.005)


def test_delta_scores_bad_input_names_the_objects():
    d = np.ones((5, 5)) - np.eye(5)
    d[1, 3] = d[3, 1] = np.nan
    d[0, 2] = 3.0  # not symmetric
    names = ["jar-1", "jar-2", "jar-3", "jar-4", "jar-5"]  # invented objects
    with pytest.raises(AtlasError) as err:
        delta_scores(d, labels=names)
    text = str(err.value)
    assert "no distance between jar-2 and jar-4" in text
    assert "jar-1-jar-3 differs from the reverse" in text
    with pytest.raises(AtlasError, match="at least 4 objects"):
        delta_scores(np.zeros((3, 3)))
    with pytest.raises(AtlasError, match="square"):
        delta_scores(np.zeros((4, 3)))
    with pytest.raises(AtlasError, match="square array of numbers"):
        delta_scores([["a", "b"], ["c", "d"]])


# ---------------------------------------------------------------------------------------------
# borrowing_candidates

# (invented case) ((((A,B),(C,D)),((E,F),(G,H))),I); node ids by DendroPy's postorder
BORROW_TREE = "((((A,B),(C,D)),((E,F),(G,H))),I);"


def _changes(tree: Tree, gains: dict[tuple[int, int], float], n_chars: int) -> Changes:
    g = np.zeros((tree.n_nodes, n_chars))
    for (v, c), value in gains.items():
        g[v, c] = value
    return Changes(g, np.zeros_like(g), g.copy())


def _node(tree: Tree, *names: str) -> int:
    """The node whose tips are exactly ``names``."""
    want = {tree.taxa.index(x) for x in names}
    for v in range(tree.n_nodes):
        below = {
            int(tree.tip[u]) for u in range(tree.n_nodes) if tree.tip[u] >= 0 and _below(tree, u, v)
        }
        if below == want:
            return v
    raise KeyError(names)


def test_two_distant_lineages_with_three_shared_gains_rank_first():
    tree = from_newick(BORROW_TREE)
    a, b, g, c, e = (_node(tree, x) for x in "ABGCE")
    ab, cd = _node(tree, "A", "B"), _node(tree, "C", "D")
    gains = {
        (a, 0): 0.9,
        (g, 0): 0.8,
        (a, 1): 0.7,
        (g, 1): 0.95,
        (a, 2): 1.0,
        (g, 2): 0.6,
        # sisters A and B share four strong gains: more than the pair above, never reported
        (a, 3): 1.0,
        (b, 3): 1.0,
        (a, 4): 1.0,
        (b, 4): 1.0,
        (a, 5): 1.0,
        (b, 5): 1.0,
        (a, 6): 1.0,
        (b, 6): 1.0,
        # sister clades (A,B) and (C,D) also, and a lineage with its own ancestor (A, (A,B))
        (ab, 7): 1.0,
        (cd, 7): 1.0,
        (ab, 8): 0.9,
        # C and E share one weaker gain; C and G share one below the threshold
        (c, 8): 0.6,
        (e, 8): 0.7,
        (c, 9): 0.4,
        (g, 9): 0.9,
    }
    gains[(a, 8)] = 0.9
    found = borrowing_candidates(tree, _changes(tree, gains, 10))
    first = found[0]
    assert {first.a, first.b} == {a, g}
    assert first.characters == (0, 1, 2) and first.states == (1, 1, 1)
    assert first.score == pytest.approx(0.8 + 0.7 + 0.6)  # sum of minima, by hand
    pairs = {(x.a, x.b) for x in found}
    for sisters in [(a, b), (ab, cd)]:
        assert tuple(sorted(sisters)) not in pairs
    assert tuple(sorted((a, ab))) not in pairs  # ancestor and descendant
    assert tuple(sorted((c, g))) not in pairs  # 0.4 is below the threshold
    # hand list of the rest: character 8 is gained on A, (A,B), C and E; (A,B) lies above A,
    # no two of the others are sisters, so A-C, A-E, (A,B)-C, (A,B)-E and C-E remain
    rest = {(x.a, x.b): x.score for x in found[1:]}
    expected = {
        tuple(sorted(p)): s
        for p, s in [((a, c), 0.6), ((a, e), 0.7), ((ab, c), 0.6), ((ab, e), 0.7), ((c, e), 0.6)]
    }
    assert rest.keys() == expected.keys()
    for key, score in expected.items():
        assert rest[key] == pytest.approx(score)
    scores = [x.score for x in found]
    assert scores == sorted(scores, reverse=True)
    ties = [(x.a, x.b) for x in found if x.score == pytest.approx(0.6)]
    assert ties == sorted(ties)  # ties broken by node ids


def test_borrowing_candidates_equal_a_pair_by_pair_enumeration():
    """Against a direct reading of the definition: every pair of branches, checked by walking
    up the parent pointers (invented case: a random 30-tip tree, random gains, multistate
    changes ``into`` for half the characters)."""
    rng = np.random.default_rng(8)
    n_tips, n_chars = 30, 12
    labels = [f"t{i}" for i in range(n_tips)]
    parts = list(labels)
    while len(parts) > 1:
        i, j = sorted(rng.choice(len(parts), 2, replace=False).tolist())
        parts = [p for k, p in enumerate(parts) if k not in (i, j)] + [f"({parts[i]},{parts[j]})"]
    tree = from_newick(parts[0] + ";")
    gains = rng.random((tree.n_nodes, n_chars)) * 1.2
    gains[:, n_chars // 2:] = np.nan  # multistate characters: no gains, changes into states
    changes = Changes(gains, np.zeros_like(gains), gains.copy())
    into = rng.random((tree.n_nodes, n_chars, 3)) * 1.1
    dist = rng.random((tree.n_nodes, tree.n_nodes))
    for threshold, min_shared in ((0.5, 1), (0.7, 2), (0.95, 1)):
        found = borrowing_candidates(tree, changes, gain_threshold=threshold,
                                     min_shared=min_shared, into=into,
                                     pair_distance=lambda x, y: dist[x, y])
        expected = []
        for a, b in itertools.combinations(range(tree.n_nodes - 1), 2):
            if _below(tree, a, b) or _below(tree, b, a) or tree.parent[a] == tree.parent[b]:
                continue
            shared = []
            for c in range(n_chars):
                table = ([(1, gains[:, c])] if c < n_chars // 2
                         else [(s, into[:, c, s]) for s in range(3)])
                shared += [(c, s, min(col[a], col[b])) for s, col in table
                           if col[a] >= threshold and col[b] >= threshold]
            if len(shared) >= min_shared:
                expected.append((a, b, tuple(x[0] for x in shared), tuple(x[1] for x in shared),
                                 sum(x[2] for x in shared)))
        expected.sort(key=lambda e: (-e[4], e[0], e[1]))
        assert len(found) == len(expected) > 0
        for cand, (a, b, chars, states, score) in zip(found, expected):
            assert (cand.a, cand.b, cand.characters, cand.states) == (a, b, chars, states)
            assert cand.score == pytest.approx(score, rel=1e-12)
            assert cand.distance == dist[a, b]


def test_borrowing_options_threshold_min_shared_and_distances():
    tree = from_newick(BORROW_TREE)
    a, g, c, e = (_node(tree, x) for x in "AGCE")
    gains = {(a, 0): 0.9, (g, 0): 0.8, (a, 1): 0.7, (g, 1): 0.95, (c, 2): 0.6, (e, 2): 0.7}
    ch = _changes(tree, gains, 3)
    assert [(x.a, x.b) for x in borrowing_candidates(tree, ch, min_shared=2)] == [
        tuple(sorted((a, g)))
    ]
    assert len(borrowing_candidates(tree, ch, gain_threshold=0.75)) == 1  # only A-G on char 0
    far = np.arange(tree.n_nodes)[:, None] * 100.0 + np.arange(tree.n_nodes)[None, :]
    with_array = borrowing_candidates(tree, ch, pair_distance=far)
    with_call = borrowing_candidates(tree, ch, pair_distance=lambda x, y: far[x, y])
    for x, y in zip(with_array, with_call):
        assert x.distance == y.distance == far[x.a, x.b]  # the caller's number, attached
    assert borrowing_candidates(tree, ch)[0].distance is None
    with pytest.raises(AtlasError, match="n_nodes, n_nodes"):
        borrowing_candidates(tree, ch, pair_distance=np.zeros((3, 3)))
    with pytest.raises(AtlasError, match="gains must be"):
        borrowing_candidates(tree, Changes(np.zeros((3, 3)), np.zeros((3, 3)), np.zeros((3, 3))))


def test_multistate_gains_into_the_same_state():
    tree = from_newick(BORROW_TREE)
    a, g = _node(tree, "A"), _node(tree, "G")
    n = tree.n_nodes
    gains = np.zeros((n, 2))
    gains[:, 1] = np.nan  # character 1 has three states: gains are not defined
    into = np.zeros((n, 2, 3))
    into[a, 1, 2] = 0.9  # (invented case) A and G both change into state 2 of character 1
    into[g, 1, 2] = 0.8
    into[a, 1, 0] = 0.9  # A into state 0, G into state 1: different states, not shared
    into[g, 1, 1] = 0.9
    ch = Changes(gains, gains.copy(), into.sum(axis=2))
    assert borrowing_candidates(tree, ch) == []  # binary only without ``into``
    found = borrowing_candidates(tree, ch, into=into)
    assert found == [Candidate(min(a, g), max(a, g), (1,), (2,), pytest.approx(0.8))]


def _labelled_integrand(q: np.ndarray, labelled: np.ndarray, t: float):
    """``u -> expm(Q u) Q_L expm(Q (t - u))`` for a stack of ``Q_L`` (SciPy's expm)."""
    return lambda u: linalg.expm(q * u) @ labelled @ linalg.expm(q * (t - u))


def test_expected_changes_into_each_state_by_numerical_integration():
    # (invented case) two tips under Mk with three states, equal rates: A in state 0, B in 2
    tree = from_newick("(A:0.3,B:0.7);")
    masks = np.array([[1, 1], [4, 2]], dtype=np.uint32)  # character 1 is binary: 0 and 1
    ns = np.array([3, 2])
    rate = 0.8
    fit = lk.MkFit("mk", {"rate": rate}, None, np.nan, 2)
    got = expected_changes_into(tree, masks, ns, fit)
    q = rate * (np.ones((3, 3)) - 3 * np.eye(3))  # Mk (Lewis 2001): off-diagonal ``rate``
    p = {t: linalg.expm(q * t) for t in (0.3, 0.7)}  # SciPy
    w = p[0.3][:, 0] * p[0.7][:, 2] / 3  # joint of the root state and the data, uniform root
    w /= w.sum()
    tips = {tree.taxa.index("A"): (0.3, 0), tree.taxa.index("B"): (0.7, 2)}
    labelled = np.zeros((3, 3, 3))  # changes into state s: column s of Q, off the diagonal
    for s in range(3):
        labelled[s, :, s] = q[:, s]
        labelled[s, s, s] = 0.0
    for v in range(tree.n_nodes - 1):
        t, end = tips[int(tree.tip[v])]
        inner, _ = integrate.quad_vec(_labelled_integrand(q, labelled, t), 0.0, t, epsrel=1e-10)
        for s in range(3):
            expected = (w * inner[s][:, end] / p[t][:, end]).sum()  # Minin & Suchard (2008)
            assert got[v, 0, s] == pytest.approx(expected, rel=1e-7)
    assert np.all(got[-1] == 0)
    # binary character: into state 1 is a gain, into 0 a loss (expected_changes, itself
    # checked by brute force in test_likelihood.py)
    changes = expected_changes(tree, masks, ns, fit)
    np.testing.assert_allclose(got[:, 1, 1], changes.gains[:, 1], atol=1e-12)
    np.testing.assert_allclose(got[:, 1, 0], changes.losses[:, 1], atol=1e-12)
    np.testing.assert_allclose(got.sum(axis=2), changes.total, atol=1e-12)


# ---------------------------------------------------------------------------------------------
# changes_from_root


def test_changes_from_root_equal_hand_sums():
    # (invented case) ((A,B),C): nodes 0=A 1=B 2=(A,B) 3=C 4=root
    tree = Tree([2, 2, 4, 4, -1], [1.0] * 5, [0, 1, -1, 2, -1], ("A", "B", "C"))
    total = np.array([[1.0, 0.5], [0.25, 0.0], [0.5, 0.25], [2.0, 1.0], [9.0, 9.0]])
    ch = Changes(total, total, total)
    got = changes_from_root(tree, ch)
    # hand sums along each path; the root's row is ignored (no branch above it)
    expected = [0.75 + 1.5, 0.75 + 0.25, 0.75, 3.0, 0.0]
    np.testing.assert_allclose(got, expected)
    with pytest.raises(AtlasError, match="total must be"):
        changes_from_root(tree, Changes(total[:3], total[:3], total[:3]))


# ---------------------------------------------------------------------------------------------
# check_rules


def _rule(when, needs=None, forbids=None, line=1):
    return Rule(when, needs or {}, forbids or {}, "", "rules.toml", line)


def test_check_rules_each_branch():
    # (invented rules) a lid needs a rim in state 1; a spout forbids handle state 2
    lid = _rule(("lid", "1"), needs={"rim": "1"}, line=1)
    spout = _rule(("spout", "1"), forbids={"handle": "2"}, line=5)
    states = {
        0: {"lid": "1", "rim": "1", "spout": "0", "handle": "2"},  # needs held; spout absent
        1: {"lid": "1", "rim": "0", "spout": "1", "handle": "2"},  # needs broken, forbids hit
        2: {"lid": "0", "rim": "0", "spout": "1", "handle": "1"},  # when fails; forbids held
        3: {"lid": "1", "spout": "1"},  # rim and handle not reconstructed: nothing to say
    }
    found = check_rules([lid, spout], states)
    assert [(v.node, v.kind, v.character, v.state, v.found) for v in found] == [
        (1, "needs", "rim", "1", "0"),
        (1, "forbids", "handle", "2", "2"),
    ]  # hand reading of the cases above
    assert found[0].rule is lid and found[1].rule is spout
    assert check_rules([], states) == []
