"""Tests for atlas.analysis.parsimony: DendroPy's Fitch score on the published Semitic matrix,
brute-force enumeration of every state assignment on small invented trees, and hand cases."""

from __future__ import annotations

import itertools
import re
from pathlib import Path

import dendropy
import numpy as np
import pytest
from dendropy.calculate import treescore

from atlas.analysis.parsimony import (
    assign_states,
    branch_changes,
    fitch,
    indices,
    unambiguous_changes,
)
from atlas.analysis.tree import clade_masks
from atlas.sources.trees import mask_labels, parse_newick, read_tree_file

REAL = Path("/work/shared/realdata/semitic-kitchen2009")


def read_binary_matrix(path: Path) -> dict[str, str]:
    """The rows of the MATRIX command of a NEXUS file of 0/1 cells (a test helper)."""
    text = path.read_text()
    body = re.search(r"MATRIX\s*(.*?);", text, re.DOTALL | re.IGNORECASE).group(1)
    rows = {}
    for line in body.strip().splitlines():
        name, cells = line.split()
        rows[name] = cells
    return rows


def masks_for(tree, rows: dict[str, str]) -> np.ndarray:
    table = {"0": 1, "1": 2, "?": 3, "-": 3}
    return np.array([[table[c] for c in rows[t]] for t in tree.taxa], dtype=np.uint32)


def test_length_equals_dendropy_on_published_matrix():
    rows = read_binary_matrix(REAL / "data.nex")
    tree = read_tree_file(REAL / "summary.trees").trees[0]
    masks = masks_for(tree, rows)
    assert masks.shape == (25, 673)  # SOURCE.md: 25 taxa x 673 binary characters
    ours = fitch(tree, masks, np.full(673, 2))
    namespace = dendropy.TaxonNamespace()
    chars = dendropy.StandardCharacterMatrix.get(
        path=str(REAL / "data.nex"),
        schema="nexus",
        taxon_namespace=namespace,
        preserve_underscores=True,
    )
    reference = dendropy.Tree.get(
        path=str(REAL / "summary.trees"),
        schema="nexus",
        taxon_namespace=namespace,
        preserve_underscores=True,
    )
    per_char: list[int] = []
    score = treescore.parsimony_score(reference, chars, score_by_character_list=per_char)
    assert ours.length == score  # DendroPy's Fitch score on the same tree and matrix
    assert ours.steps.tolist() == per_char


def test_hand_case():
    # (invented case) ((A,B),(C,D)) with A=0, B=1, C=1, D=2, unordered: Fitch gives
    # {0,1} (1 step), {1,2} (1 step), root {1}: 2 steps; ordered it is the same 2 (0-1, 1-2).
    tree = parse_newick("((A,B),(C,D));")
    masks = np.array([[1], [2], [2], [4]], dtype=np.uint32)
    p = fitch(tree, masks, np.array([3]))
    assert p.length == 2 and p.steps.tolist() == [2]
    # MPR sets: nodes A B (A,B) C D (C,D) root; root can only be 1, then (A,B)=1, (C,D)=1
    assert p.states[:, 0].tolist() == [1, 2, 2, 2, 4, 2, 2]
    ordered = fitch(tree, masks, np.array([3]), np.array([True]))
    assert ordered.length == 2
    # (invented case) A=0, D=2 only: ordered 0->2 costs 2, unordered 1
    two = np.array([[1], [3], [3], [4]], dtype=np.uint32)  # B, C unknown among {0, 1}
    assert fitch(tree, two, np.array([3])).length == 1
    assert fitch(tree, two, np.array([3]), np.array([True])).length == 2


def test_missing_and_inapplicable_cost_nothing():
    tree = parse_newick("((A,B),(C,D));")
    # (invented case) '?' and '-' are all bits of the character: no step needed
    masks = np.array([[1], [3], [3], [1]], dtype=np.uint32)
    assert fitch(tree, masks, np.array([2])).length == 0
    # a cell with no bits is read as missing too, and bits beyond n_states are ignored
    masks = np.array([[1], [0], [1 | 8], [1]], dtype=np.uint32)
    assert fitch(tree, masks, np.array([2])).length == 0


# --- brute force --------------------------------------------------------------------------


def random_tree(rng: np.random.Generator, n: int, polytomy: bool) -> str:
    nodes = [f"t{i}" for i in range(n)]
    while len(nodes) > 1:
        k = 3 if polytomy and len(nodes) >= 3 and rng.random() < 0.3 else 2
        picks = sorted(rng.choice(len(nodes), k, replace=False).tolist(), reverse=True)
        group = [nodes.pop(i) for i in picks]
        nodes.append("(" + ",".join(group) + ")")
    return nodes[0] + ";"


def brute_force(tree, cells: np.ndarray, n_states: int, ordered: bool):
    """Every assignment of states to every node (tips within their cells): the fewest steps
    and, per node, the states used by some assignment reaching it."""
    options = []
    for v in range(tree.n_nodes):
        if tree.tip[v] >= 0:
            c = int(cells[tree.tip[v]])
            options.append([s for s in range(n_states) if c >> s & 1])
        else:
            options.append(list(range(n_states)))
    edges = [(v, int(tree.parent[v])) for v in range(tree.n_nodes - 1)]
    best, used = None, None
    for states in itertools.product(*options):
        cost = sum(
            abs(states[a] - states[b]) if ordered else int(states[a] != states[b]) for a, b in edges
        )
        if best is None or cost < best:
            best, used = cost, [1 << s for s in states]
        elif cost == best:
            used = [u | (1 << s) for u, s in zip(used, states)]
    return best, used


@pytest.mark.parametrize("seed", range(12))
def test_matches_brute_force(seed):
    rng = np.random.default_rng(seed)  # seeded (invented random cases)
    n_tips = 5 if seed % 2 else 6
    tree = parse_newick(random_tree(rng, n_tips, polytomy=seed % 3 == 0))
    n_chars = 8
    n_states = np.array([2, 2, 3, 3, 4, 3, 4, 2])
    ordered = np.array([False, True, False, True, True, False, True, False])
    cells = np.zeros((n_tips, n_chars), dtype=np.uint32)
    for j in range(n_chars):
        for i in range(n_tips):
            r = rng.random()
            if r < 0.15:  # missing
                cells[i, j] = (1 << n_states[j]) - 1
            elif r < 0.3:  # polymorphic pair
                a, b = rng.choice(n_states[j], 2, replace=False)
                cells[i, j] = (1 << a) | (1 << b)
            else:
                cells[i, j] = 1 << rng.integers(n_states[j])
    p = fitch(tree, cells, n_states, ordered)
    for j in range(n_chars):
        best, used = brute_force(tree, cells[:, j], int(n_states[j]), bool(ordered[j]))
        assert p.steps[j] == best  # exhaustive enumeration
        assert p.states[:, j].tolist() == used
    assert p.length == p.steps.sum()


# --- consistency and retention indices -------------------------------------------------------


def all_rooted_binary_trees(labels: list[str]) -> list[str]:
    """Every rooted binary tree on the labels, by adding each label on every branch (and above
    the root) of every tree of the labels before it: (2n - 3)!! trees."""
    trees: list = [labels[0]]
    for label in labels[1:]:
        grown = []
        for tree in trees:
            grown.extend(_insert(tree, label))
        trees = grown
    return [_newick(t) + ";" for t in trees]


def _insert(tree, label):
    yield (tree, label)
    if isinstance(tree, tuple):
        left, right = tree
        for sub in _insert(left, label):
            yield (sub, right)
        for sub in _insert(right, label):
            yield (left, sub)


def _newick(tree) -> str:
    return tree if isinstance(tree, str) else "(" + _newick(tree[0]) + "," + _newick(tree[1]) + ")"


def test_indices_hand_case():
    # (invented case) ((A,B),(C,D)); character 1 = 0011, character 2 = 0101, both unordered.
    # 0011: s = 1, m = 1 (two states), g = 2 (bush centred on 0: C and D change) -> ci 1, ri 1
    # 0101: s = 2, m = 1, g = 2 -> ci = 1/2, ri = (2 - 2) / (2 - 1) = 0, rc = 0
    # ensemble (Farris 1989): CI = (1 + 1) / (1 + 2) = 2/3, RI = (4 - 3) / (4 - 2) = 1/2
    tree = parse_newick("((A,B),(C,D));")
    x = indices(tree, np.array([[1, 1], [1, 2], [2, 1], [2, 2]]), np.array([2, 2]))
    assert x.steps.tolist() == [1, 2]
    assert x.min_steps.tolist() == [1, 1] and x.max_steps.tolist() == [2, 2]
    assert x.ci.tolist() == [1.0, 0.5] and x.ri.tolist() == [1.0, 0.0] and x.rc.tolist() == [1, 0]
    assert x.ensemble_ci == pytest.approx(2 / 3) and x.ensemble_ri == 0.5
    assert x.ensemble_rc == pytest.approx(1 / 3)


def test_indices_undefined_cases():
    # (invented case) a constant character (s = 0) and an autapomorphy (g = m = 1)
    tree = parse_newick("((A,B),(C,D));")
    x = indices(tree, np.array([[1, 1], [1, 1], [1, 1], [1, 2]]), np.array([2, 2]))
    assert np.isnan(x.ci[0]) and np.isnan(x.ri[0]) and x.ci[1] == 1.0 and np.isnan(x.ri[1])
    assert x.ensemble_ci == 1.0 and np.isnan(x.ensemble_ri)


@pytest.mark.parametrize("seed", range(4))
def test_min_and_max_steps_by_enumeration(seed):
    rng = np.random.default_rng(100 + seed)  # seeded (invented random characters)
    labels = [f"t{i}" for i in range(6)]
    trees = [parse_newick(s, taxa=labels) for s in all_rooted_binary_trees(labels)]
    assert len(trees) == 945  # (2 * 6 - 3)!! rooted binary trees (closed form)
    n_states = np.array([2, 3, 3, 4, 3, 2])
    ordered = np.array([False, False, True, True, False, True])
    cells = np.zeros((6, 6), dtype=np.uint32)
    for j in range(6):
        for i in range(6):
            r = rng.random()
            if r < 0.15:
                cells[i, j] = (1 << n_states[j]) - 1
            elif r < 0.3:
                a, b = rng.choice(n_states[j], 2, replace=False)
                cells[i, j] = (1 << a) | (1 << b)
            else:
                cells[i, j] = 1 << rng.integers(n_states[j])
    steps = np.array([fitch(t, cells, n_states, ordered).steps for t in trees])
    x = indices(trees[0], cells, n_states, ordered)
    assert x.min_steps.tolist() == steps.min(axis=0).tolist()  # fewest over all 945 trees
    star = parse_newick("(" + ",".join(labels) + ");")
    bush = fitch(star, cells, n_states, ordered).steps  # Farris's g: the steps on the bush
    assert x.max_steps.tolist() == bush.tolist()
    assert np.all(steps.max(axis=0) <= bush)  # no resolved tree needs more


# --- ACCTRAN, DELTRAN and unambiguous changes -----------------------------------------------


def test_acctran_deltran_hand_case():
    # (invented case) ((((A,B),C),D),E): A, B, D = 1 and C, E = 0; 2 steps either way
    tree = parse_newick("((((A,B),C),D),E);")
    masks = np.array([[2], [2], [1], [2], [1]], dtype=np.uint32)
    ids = {frozenset(mask_labels(m, tree.taxa)): v for v, m in enumerate(clade_masks(tree))}
    acc = branch_changes(tree, assign_states(tree, masks, np.array([2]), method="acctran"))
    dlt = branch_changes(tree, assign_states(tree, masks, np.array([2]), method="deltran"))
    # ACCTRAN: a gain below (A,B,C,D), a reversal on C (Swofford & Maddison 1987, by hand)
    assert {v: c for v, c in enumerate(acc) if c} == {
        ids[frozenset("ABCD")]: [(0, 0, 1)],
        ids[frozenset("C")]: [(0, 1, 0)],
    }
    # DELTRAN: two parallel gains, on (A,B) and on D
    assert {v: c for v, c in enumerate(dlt) if c} == {
        ids[frozenset("AB")]: [(0, 0, 1)],
        ids[frozenset("D")]: [(0, 0, 1)],
    }
    unambiguous = unambiguous_changes(tree, fitch(tree, masks, np.array([2])))
    assert all(not c for c in unambiguous)  # every branch here has an ambiguous end
    # (invented case) (((A,B),C),(D,E)) with 00011: the root may be 0 or 1, so the one change
    # may sit on either branch below it and no change is unambiguous
    two = parse_newick("(((A,B),C),(D,E));")
    masks = np.array([[1], [1], [1], [2], [2]], dtype=np.uint32)
    u = unambiguous_changes(two, fitch(two, masks, np.array([2])))
    assert sum(len(c) for c in u) == 0
    three = parse_newick("((((A,B),C),(D,E)),F);")
    masks = np.array([[1], [1], [1], [2], [2], [1]], dtype=np.uint32)
    u = unambiguous_changes(three, fitch(three, masks, np.array([2])))
    ids3 = {frozenset(mask_labels(m, three.taxa)): v for v, m in enumerate(clade_masks(three))}
    # (invented case) root, (A..E) and (A,B,C) are all 0, (D,E) is 1: one change, certain
    assert {v: c for v, c in enumerate(u) if c} == {ids3[frozenset("DE")]: [(0, 0, 1)]}


@pytest.mark.parametrize("seed", range(6))
def test_assignments_are_most_parsimonious(seed):
    rng = np.random.default_rng(200 + seed)  # seeded (invented random cases)
    tree = parse_newick(random_tree(rng, 9, polytomy=seed % 2 == 1))
    n_states = np.array([2, 3, 4, 3, 2, 4])
    ordered = np.array([False, False, True, True, False, False])
    cells = np.array(
        [
            [1 << rng.integers(k) if rng.random() > 0.2 else (1 << k) - 1 for k in n_states]
            for _ in range(9)
        ],
        dtype=np.uint32,
    )
    result = fitch(tree, cells, n_states, ordered)
    for method in ("acctran", "deltran"):
        states = assign_states(tree, cells, n_states, ordered, method=method)
        cost = np.zeros(6, dtype=np.int64)
        for v, changes in enumerate(branch_changes(tree, states)):
            for j, a, b in changes:
                cost[j] += abs(a - b) if ordered[j] else 1
        assert cost.tolist() == result.steps.tolist()  # as many steps as the optimum
        inside = (result.states >> states.astype(np.uint32)) & 1
        assert inside.all()  # every node's state is in its MPR set
    for v, changes in enumerate(unambiguous_changes(tree, result)):
        acc = branch_changes(tree, assign_states(tree, cells, n_states, ordered))[v]
        dlt = branch_changes(tree, assign_states(tree, cells, n_states, ordered, method="deltran"))[
            v
        ]
        for change in changes:  # an unambiguous change is in both reconstructions
            assert change in acc and change in dlt
