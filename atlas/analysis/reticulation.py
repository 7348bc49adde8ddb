"""Lineage diagnostics: where the tree story fails.

A tree says that objects inherit their traits from one line of ancestors. Cultural traits are
also copied sideways, between neighbours and trading partners, and the data then fit a tree
less well. This module measures how far, and points at where:

- :func:`matrix_distances`: the proportion of differing characters between two objects;
- :func:`delta_scores`: delta scores and Q-residuals from those distances, per object and
  overall, which grow as the quartets of objects stop looking like little trees;
- :func:`borrowing_candidates`: pairs of distant lineages that gained the same traits
  independently on the summary tree (with :func:`expected_changes_into`, changes into each
  state of characters with more than two states);
- :func:`changes_from_root`: the expected changes accumulated from the root to each node;
- :func:`check_rules`: reconstructed ancestors that break the atlas's coherence rules.

Pure functions over arrays; nothing here reads or writes files, and nothing here knows about
places (a caller that has distances between places passes them in).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from atlas.analysis.changes import Changes, labelled_integral
from atlas.analysis.likelihood import MkFit, conditional_passes
from atlas.analysis.tree import Tree, subtree_starts
from atlas.errors import AtlasError, Problem, Problems
from atlas.sources.tables import Rule

# Above this many quartets, delta_scores samples quartets instead of enumerating them all:
# 200 objects have 64.7 million quartets and are enumerated (2.4 s in
# benchmarks/bench_reticulation.py); 300 have 330 million.
EXACT_QUARTETS = 70_000_000
SAMPLED_QUARTETS = 4_000_000
# Quartets per array in the exact enumeration: 1 MB blocks. On 200 objects, timed side by side
# on the shared 2-core machine (best of four): 7.0 s, against 9.0 s with one block per j.
_BLOCK = 131_072
_TIE = 1e-12  # quartet sums that agree to 12 significant digits are read as equal

# ---------------------------------------------------------------------------------------------
# Distances between objects


def matrix_distances(masks: np.ndarray, n_states: np.ndarray) -> np.ndarray:
    """The mean character difference between every two objects, ``(n_taxa, n_taxa)``.

    ``d_ij = (number of characters coded in both i and j whose state sets do not intersect)
    / (number of characters coded in both)``: the uncorrected p-distance with pairwise
    deletion of unknown cells, common practice for morphological and cultural data (the
    p-distance and pairwise deletion as in Nei & Kumar 2000, Molecular Evolution and
    Phylogenetics, Oxford University Press).

    A cell is *coded* when its state set is not every state of the character (``?`` and ``-``
    set all bits; a cell with no bit set counts as unknown too). A polymorphic cell (``0/1``)
    is coded, and differs from another cell only when the two share no state: the object could
    have carried the other's state, so no difference is counted (the minimum-difference
    reading). A pair with no character coded in both gets ``nan``; the diagonal is 0.

    Hand example: rows ``0 1 ?`` and ``1 1 0`` share two coded characters and differ in one, so
    ``d = 1/2``.

    >>> masks = np.array([[1, 2, 3], [2, 2, 1]], dtype=np.uint32)
    >>> float(matrix_distances(masks, np.array([2, 2, 2]))[0, 1])
    0.5
    """
    masks = np.asarray(masks)
    n_states = np.asarray(n_states)
    problems = Problems()
    if masks.ndim != 2 or not np.issubdtype(masks.dtype, np.integer):
        problems.error("matrix", None, f"state sets must be a 2-D integer array, not {masks.shape}")
    elif n_states.shape != (masks.shape[1],) or not np.issubdtype(n_states.dtype, np.integer):
        problems.error("matrix", None, f"need one state count per character ({masks.shape[1]})")
    elif np.any(n_states < 1) or np.any(n_states > 32):
        problems.error("matrix", None, "state counts must be between 1 and 32")
    problems.raise_if_any()
    n = masks.shape[0]
    allowed = ((np.uint64(1) << n_states.astype(np.uint64)) - np.uint64(1)).astype(np.uint32)
    cells = masks.astype(np.uint32) & allowed
    coded = (cells != allowed) & (cells != 0)
    dist = np.zeros((n, n))
    for i in range(n - 1):
        both = coded[i] & coded[i + 1 :]
        apart = both & ((cells[i] & cells[i + 1 :]) == 0)
        shared = both.sum(axis=1)
        row = np.full(shared.shape, np.nan)
        np.divide(apart.sum(axis=1), shared, out=row, where=shared > 0)
        dist[i, i + 1 :] = row
        dist[i + 1 :, i] = row
    return dist


# ---------------------------------------------------------------------------------------------
# Delta scores and Q-residuals


@dataclass(frozen=True)
class DeltaScores:
    """Per-object and overall delta scores and Q-residuals (see :func:`delta_scores`).

    ``n_quartets`` is how many quartets the means are taken over: all of them when
    ``sampled`` is false, else a uniform random sample drawn with ``seed``.
    """

    delta: np.ndarray  # float, (n_taxa,)
    q_residual: np.ndarray  # float, (n_taxa,)
    mean_delta: float
    mean_q_residual: float
    n_quartets: int
    sampled: bool
    seed: int | None
    scale: float  # the mean distance the Q-residuals were scaled by


def _check_distances(dist: np.ndarray, labels: Sequence[str] | None) -> np.ndarray:
    where = "distance matrix"
    try:
        d = np.asarray(dist, dtype=np.float64)
    except (TypeError, ValueError):
        raise AtlasError(Problem(where, None, "must be a square array of numbers")) from None
    if d.ndim != 2 or d.shape[0] != d.shape[1]:
        raise AtlasError(Problem(where, None, f"must be a square array of numbers, not {d.shape}"))
    n = d.shape[0]
    names = list(labels) if labels is not None else [str(i) for i in range(n)]
    problems = Problems()
    if len(names) != n:
        problems.error(where, None, f"has {n} rows but {len(names)} labels were given")
        names = [str(i) for i in range(n)]
    if n < 4:
        problems.error(where, None, f"needs at least 4 objects for quartets, has {n}")
    bad = ~np.isfinite(d)
    for i, j in zip(*np.nonzero(np.triu(bad | bad.T, 1))):
        problems.error(
            where,
            None,
            f"no distance between {names[i]} and {names[j]}",
            "they share no coded character; drop one of them or code more cells",
        )
    ok = np.where(bad, 0.0, d)
    for i, j in zip(*np.nonzero(np.triu(ok < 0, 0))):
        problems.error(where, None, f"negative distance between {names[i]} and {names[j]}")
    asym = np.abs(ok - ok.T) > 1e-9 * max(1.0, float(np.abs(ok).max(initial=0.0)))
    for i, j in zip(*np.nonzero(np.triu(asym, 1))):
        problems.error(where, None, f"distance {names[i]}-{names[j]} differs from the reverse")
    problems.raise_if_any()
    d = 0.5 * (d + d.T)
    np.fill_diagonal(d, 0.0)
    return d


def _quartet_terms(s1: np.ndarray, s2: np.ndarray, s3: np.ndarray, scale: float):
    """Quartet delta and residual from the three pair sums (element-wise, any shape).

    Works in place in the three arrays it is given (their contents are lost), which took a
    block of 580,000 quartets from 26 to 21 ms (best of three, timed side by side).
    """
    hi = np.maximum(s1, s2)
    np.minimum(s1, s2, out=s1)  # s1: the smaller of the first two
    mid = np.minimum(hi, s3)
    np.maximum(hi, s3, out=hi)  # hi: the largest of the three
    np.maximum(s1, mid, out=mid)  # mid: the median
    np.minimum(s1, s3, out=s1)  # s1: the smallest
    gap = np.subtract(hi, mid, out=mid)
    span = np.subtract(hi, s1, out=s1)
    tol = np.multiply(hi, _TIE, out=hi)
    gap *= gap > tol  # a tie up to rounding is a tie
    delta = s2
    delta.fill(0.0)
    np.divide(gap, span, out=delta, where=span > tol)
    residual = np.multiply(gap, gap, out=s3)
    residual *= 1.0 / (scale * scale) if scale > 0 else 0.0
    return delta, residual


def _all_quartets(d: np.ndarray, scale: float) -> tuple[np.ndarray, np.ndarray, float, float]:
    """Sums of quartet delta and residual per taxon, and in total, over every quartet.

    Quartets ``i < j < k < l`` are taken one ``j`` at a time: every pair ``j < k < l`` at once,
    against a block of rows ``i < j`` of at most ``_BLOCK`` quartets, so the Python loop runs
    about ``n + C(n, 4) / _BLOCK`` times and the arrays stay small (see _BLOCK).
    """
    n = d.shape[0]
    rows, cols = np.triu_indices(n, k=1)  # pairs (k, l), k ascending
    first = np.searchsorted(rows, np.arange(n + 1))  # pairs with k >= j start at first[j]
    sum_delta = np.zeros(n)
    sum_q = np.zeros(n)
    for j in range(1, n - 2):
        kk = rows[first[j + 1] :]
        ll = cols[first[j + 1] :]
        d_kl, d_jl, d_jk = d[kk, ll], d[j, ll], d[j, kk]
        by_pair_delta = np.zeros(kk.size)
        by_pair_q = np.zeros(kk.size)
        step = max(1, _BLOCK // kk.size)
        for a in range(0, j, step):
            left = d[a : min(j, a + step)]  # rows i
            delta, residual = _quartet_terms(
                left[:, j, None] + d_kl, left[:, kk] + d_jl, left[:, ll] + d_jk, scale
            )
            sum_delta[a : a + left.shape[0]] += delta.sum(axis=1)
            sum_q[a : a + left.shape[0]] += residual.sum(axis=1)
            by_pair_delta += delta.sum(axis=0)
            by_pair_q += residual.sum(axis=0)
        for out, by_pair in ((sum_delta, by_pair_delta), (sum_q, by_pair_q)):
            out[j] += by_pair.sum()
            out += np.bincount(kk, by_pair, minlength=n) + np.bincount(ll, by_pair, minlength=n)
    # each quartet adds its value to four taxa
    return sum_delta, sum_q, float(sum_delta.sum()) / 4, float(sum_q.sum()) / 4


def _sampled_quartets(
    d: np.ndarray, scale: float, n_samples: int, rng: np.random.Generator
) -> tuple[np.ndarray, np.ndarray, np.ndarray, float, float]:
    """Like :func:`_all_quartets` over ``n_samples`` quartets drawn uniformly, with counts."""
    n = d.shape[0]
    sum_delta = np.zeros(n)
    sum_q = np.zeros(n)
    count = np.zeros(n)
    total_delta = total_q = 0.0
    left = n_samples
    flat = d.ravel()
    while left > 0:
        draw = rng.integers(0, n, size=(4, min(left, 500_000) + 64))  # one row per corner
        i, j, k, m = draw
        distinct = (i != j) & (i != k) & (i != m) & (j != k) & (j != m) & (k != m)
        draw = draw[:, distinct][:, :left]  # four distinct taxa, any order: the sums do not care
        i, j, k, m = draw
        delta, residual = _quartet_terms(
            flat[i * n + j] + flat[k * n + m],
            flat[i * n + k] + flat[j * n + m],
            flat[i * n + m] + flat[j * n + k],
            scale,
        )
        members = draw.ravel()  # the four corners of every quartet, row after row
        sum_delta += np.bincount(members, np.tile(delta, 4), minlength=n)
        sum_q += np.bincount(members, np.tile(residual, 4), minlength=n)
        count += np.bincount(members, minlength=n)
        total_delta += float(delta.sum())
        total_q += float(residual.sum())
        left -= draw.shape[1]
    return sum_delta, sum_q, count, total_delta, total_q


def delta_scores(
    dist: np.ndarray,
    *,
    labels: Sequence[str] | None = None,
    exact_limit: int = EXACT_QUARTETS,
    samples: int = SAMPLED_QUARTETS,
    seed: int = 1,
) -> DeltaScores:
    """Delta scores (Holland, Huber, Dress & Moulton 2002, Mol. Biol. Evol. 19: 2051-2059) and
    Q-residuals (Gray, Bryant & Greenhill 2010, Phil. Trans. R. Soc. B 365: 3923-3933).

    For a quartet ``{i, j, k, l}`` take the three sums ``d_ij + d_kl``, ``d_ik + d_jl`` and
    ``d_il + d_jk`` sorted ``m1 >= m2 >= m3``. On a tree (distances additive, the four-point
    condition, Buneman 1971) the two largest are equal. The quartet's delta is
    ``(m1 - m2) / (m1 - m3)`` (0 when ``m1 == m3``) and its residual ``(m1 - m2)^2``, computed
    on distances divided by their mean over all pairs: delta does not depend on the unit of
    the distances, and this scaling makes the residual independent of it too (the same numbers
    whether distances count characters or proportions of them), so atlases can be compared.
    An object's score is the mean over the quartets that contain it; the overall scores are
    the means over all quartets. 0 is perfectly tree-like; an object whose traits come from two
    lineages scores high. Sums that agree to 12 significant digits are read as equal, so that
    rounding in the distances cannot turn a tie into a spurious delta.

    Every one of the ``C(n, 4)`` quartets is enumerated up to ``exact_limit`` quartets (time
    grows as ``n^4 / 24``: 2.4 s for 200 objects in benchmarks/bench_reticulation.py). Beyond
    it ``samples`` quartets are drawn uniformly at random with ``seed`` (4 million: under a
    second) and the result says so (``sampled``).

    Hand example: ``d = 1`` between every two of four objects gives three equal sums, so
    delta = 0; distances 2 for the pairs ``{0, 1}`` and ``{2, 3}`` and 1 otherwise give sums
    ``4, 2, 2``: delta = ``(4 - 2) / (4 - 2) = 1``.
    """
    d = _check_distances(dist, labels)
    n = d.shape[0]
    upper = d[np.triu_indices(n, k=1)]
    scale = float(upper.mean())
    n_all = math.comb(n, 4)
    if n_all <= exact_limit:
        sum_delta, sum_q, total_delta, total_q = _all_quartets(d, scale)
        per_taxon = math.comb(n - 1, 3)
        return DeltaScores(
            sum_delta / per_taxon,
            sum_q / per_taxon,
            total_delta / n_all,
            total_q / n_all,
            n_all,
            False,
            None,
            scale,
        )
    if samples < 1:
        raise AtlasError(
            Problem(
                "distance matrix",
                None,
                f"{n_all} quartets are too many to enumerate and no sample size was given",
                "pass samples >= 1",
            )
        )
    rng = np.random.default_rng(seed)
    sum_delta, sum_q, count, total_delta, total_q = _sampled_quartets(d, scale, samples, rng)
    seen = np.where(count > 0, count, 1.0)
    delta = np.where(count > 0, sum_delta / seen, np.nan)
    q = np.where(count > 0, sum_q / seen, np.nan)
    return DeltaScores(
        delta, q, total_delta / samples, total_q / samples, samples, True, seed, scale
    )


# ---------------------------------------------------------------------------------------------
# Parallel gains on the summary tree


@dataclass(frozen=True)
class Candidate:
    """Two lineages (branches, named by the node below them) that gained the same states."""

    a: int
    b: int  # a < b
    characters: tuple[int, ...]  # matrix columns, ascending
    states: tuple[int, ...]  # the state gained in each of ``characters``
    score: float  # sum over the shared gains of min(gain on a, gain on b)
    distance: float | None = None  # from ``pair_distance``, when given


def expected_changes_into(
    tree: Tree, masks: np.ndarray, n_states: np.ndarray, fit: MkFit
) -> np.ndarray:
    """Expected changes *into* each state on the branch above every node,
    ``(n_nodes, n_chars, max_k)`` (zero at the root and for states a character lacks).

    The labelled-change expectation of Minin & Suchard (2008, J. Math. Biol. 56: 391-412), as in
    :mod:`atlas.analysis.changes`, with the labelled transitions ``Q_L`` being those that end
    in state ``s``: ``Q_L[a, b] = Q[a, b]`` when ``b = s`` and ``a != s``, else 0. Summed over
    ``s`` this is ``Changes.total``; for a binary character, state 1 gives ``Changes.gains``
    and state 0 ``Changes.losses``.
    """
    n_states = np.asarray(n_states)
    max_k = int(n_states.max()) if n_states.size else 1
    out = np.zeros((tree.n_nodes, n_states.size, max_k))
    for gp in conditional_passes(tree, masks, n_states, fit):
        den = (gp.beside * (gp.p @ gp.down)).sum(axis=2)  # (n, G, C)
        weight = np.nan_to_num(gp.cat_post)
        for s in range(gp.k):
            labels = np.zeros((gp.k, gp.k))
            labels[:, s] = 1.0
            integral = labelled_integral(gp.chain, labels, gp.times)  # (n, G, k, k)
            num = (gp.beside * (integral @ gp.down)).sum(axis=2)
            per_cat = num / np.where(den > 0, den, 1.0)
            out[:, gp.cols, s] = np.einsum("gc,ngc->nc", weight, per_cat)
    out[-1] = 0.0  # the root has no branch above it
    return out


def _gain_table(changes: Changes, into: np.ndarray | None, n_nodes: int) -> np.ndarray:
    """Expected gains ``(n_nodes, n_chars, n_kinds)`` with ``nan`` where not defined: binary
    characters gain state 1 (``Changes.gains``); others gain each state from ``into``."""
    gains = np.asarray(changes.gains, dtype=np.float64)
    problems = Problems()
    if gains.ndim != 2 or gains.shape[0] != n_nodes:
        problems.error(
            "changes", None, f"gains must be (n_nodes={n_nodes}, n_chars), not {gains.shape}"
        )
        problems.raise_if_any()
    n_chars = gains.shape[1]
    binary = ~np.all(np.isnan(gains), axis=0)
    if into is None:
        table = np.full((n_nodes, n_chars, 2), np.nan)
        table[:, binary, 1] = gains[:, binary]
        return table
    into = np.asarray(into, dtype=np.float64)
    if into.ndim != 3 or into.shape[:2] != (n_nodes, n_chars):
        problems.error(
            "changes",
            None,
            "changes into states must be (n_nodes, n_chars, "
            f"max_k) = ({n_nodes}, {n_chars}, ...), not {into.shape}",
        )
        problems.raise_if_any()
    table = np.array(into)
    table[:, binary, :] = np.nan
    if table.shape[2] < 2:
        table = np.concatenate([table, np.full((n_nodes, n_chars, 2 - table.shape[2]), np.nan)], 2)
    table[:, binary, 1] = gains[:, binary]
    return table


def borrowing_candidates(
    tree: Tree,
    changes: Changes,
    *,
    gain_threshold: float = 0.5,
    min_shared: int = 1,
    into: np.ndarray | None = None,
    pair_distance: np.ndarray | Callable[[int, int], float] | None = None,
) -> list[Candidate]:
    """Pairs of separate lineages that gained the same character states independently.

    A heuristic, not a test. Homoplasy, a state arising more often than the tree requires, is
    read in cultural phylogenetics as a sign of borrowing between lineages (Collard, Shennan &
    Tehrani 2006, Evol. Hum. Behav. 27: 169-184); here it is localised on the summary tree.
    A branch *gains* a state when its expected number of changes into that state (conditional on
    the data, Minin & Suchard 2008) is at least ``gain_threshold``. Two branches ``a`` and ``b``
    form a candidate when they gain the same state of at least ``min_shared`` characters,
    neither lies below the other, and they are not sisters (the same gain on two sister
    branches is more simply one gain on their parent's branch, split between them by the
    reconstruction). Its score is ``sum over shared (character, state) of min(gain_a, gain_b)``;
    candidates are ranked by score, highest first, then by ``(a, b)``.

    Binary characters gain state 1 (``changes.gains``). Characters of more than two states are
    used only when ``into`` is given: the expected changes into each state from
    :func:`expected_changes_into`; every state counts as a gain then. ``pair_distance``, an
    ``(n_nodes, n_nodes)`` array or a function of two arrays of node ids returning an array,
    is attached to each candidate as ``distance`` (e.g. between the places of the two
    lineages; the caller computes it).

    Hand example: branches 0 and 5 both gain state 1 of characters 2 and 7 with expected
    gains ``0.9, 0.8`` and ``0.6, 1.0``: score ``min(0.9, 0.6) + min(0.8, 1.0) = 1.4``.
    """
    n = tree.n_nodes
    table = _gain_table(changes, into, n)
    if pair_distance is not None and not callable(pair_distance):
        shape = np.shape(pair_distance)
        if shape != (n, n):
            raise AtlasError(
                Problem(
                    "pair distances", None, f"must be (n_nodes, n_nodes) = ({n}, {n}), not {shape}"
                )
            )
        pair_distance = np.asarray(pair_distance, dtype=np.float64)
    start = subtree_starts(tree)
    parent = tree.parent
    with np.errstate(invalid="ignore"):
        flagged = np.nan_to_num(table, nan=-1.0) >= gain_threshold
    flagged[tree.root] = False
    # Every pair of flagged branches per (character, state), as arrays: one pass over the
    # pairs in Python took 39 s of the 1,000 x 500 x 2,000 synthetic atlas's analysis.
    found = []
    for c, s in zip(*np.nonzero(flagged.any(axis=0))):
        nodes = np.flatnonzero(flagged[:, c, s])
        if nodes.size < 2:
            continue
        gain = table[nodes, c, s]
        x, y = np.triu_indices(nodes.size, 1)
        a, b = nodes[x], nodes[y]  # a < b: b is never below a in postorder
        keep = (start[b] > a) & (parent[a] != parent[b])  # a below b, or sisters
        found.append((a[keep], b[keep], np.full(int(keep.sum()), c), np.full(int(keep.sum()), s),
                      np.minimum(gain[x], gain[y])[keep]))
    a, b, c, s, g = (np.concatenate(col) for col in zip(*found)) if found else ([],) * 5
    if not len(a):
        return []
    order = np.lexsort((s, c, b, a))
    a, b, c, s, g = a[order], b[order], c[order], s[order], g[order]
    first = np.flatnonzero(np.r_[True, (a[1:] != a[:-1]) | (b[1:] != b[:-1])])
    size = np.diff(np.r_[first, a.size])
    score = np.add.reduceat(g, first)
    kept = np.flatnonzero(size >= min_shared)
    kept = kept[np.lexsort((b[first[kept]], a[first[kept]], -score[kept]))]
    pa, pb = a[first[kept]], b[first[kept]]
    if pair_distance is None:
        distance = [None] * kept.size
    elif callable(pair_distance):
        distance = np.asarray(pair_distance(pa, pb), dtype=np.float64).tolist()
    else:
        distance = pair_distance[pa, pb].tolist()
    c_list, s_list = c.tolist(), s.tolist()
    return [
        Candidate(int(x), int(y), tuple(c_list[f:f + n]), tuple(s_list[f:f + n]), float(sc), d)
        for x, y, f, n, sc, d in zip(pa.tolist(), pb.tolist(), first[kept].tolist(),
                                     size[kept].tolist(), score[kept].tolist(), distance)
    ]


# ---------------------------------------------------------------------------------------------
# Change along the tree


def changes_from_root(tree: Tree, changes: Changes) -> np.ndarray:
    """Expected changes over all characters along the path from the root to each node.

    ``C(root) = 0`` and ``C(v) = C(parent(v)) + sum_j total[v, j]``, where ``total[v, j]`` is
    the expected number of changes of character ``j`` on the branch above ``v`` (conditional on
    the data, Minin & Suchard 2008, J. Math. Biol. 56: 391-412). Lineages with low values kept
    their ancestors' traits (stasis); high values mark rapid change.

    Hand example: on ``((A,B),C)`` with 0.5 changes above ``(A,B)`` and 1.0 above ``A``,
    ``C(A) = 1.5``, ``C(B) = 0.5`` plus the changes above ``B``.
    """
    total = np.asarray(changes.total, dtype=np.float64)
    if total.ndim != 2 or total.shape[0] != tree.n_nodes:
        raise AtlasError(
            Problem(
                "changes",
                None,
                f"total must be (n_nodes={tree.n_nodes}, n_chars), not {total.shape}",
            )
        )
    per_branch = total.sum(axis=1)
    per_branch[tree.root] = 0.0
    out = np.zeros(tree.n_nodes)
    parent = tree.parent.tolist()
    for v in range(tree.n_nodes - 2, -1, -1):  # preorder: parents before children
        out[v] = out[parent[v]] + per_branch[v]
    return out


# ---------------------------------------------------------------------------------------------
# Coherence rules


@dataclass(frozen=True)
class Violation:
    """A node whose reconstructed states break a rule."""

    node: int
    rule: Rule
    kind: str  # "needs" or "forbids"
    character: str
    state: str  # the state the rule needs or forbids
    found: str  # the node's most probable state of ``character``


def check_rules(
    rules: Sequence[Rule], states_by_node: Mapping[int, Mapping[str, str]]
) -> list[Violation]:
    """Every node whose most probable states break a coherence rule.

    A rule ``when = (c, s)`` applies at a node whose state of ``c`` is ``s``; it is broken when
    a character ``n`` it *needs* in state ``t`` is in another state there, or a character it
    *forbids* in state ``t`` is in ``t``. A character with no state at the node (not
    reconstructed there) neither triggers nor breaks a rule. Violations come by node, then in
    the order of the rules, needs before forbids, then by character.

    Hand example: the rule "a lid needs a rim" (``when = (lid, 1)``, ``needs = {rim: 1}``) is
    broken at a node with ``lid = 1, rim = 0`` and holds at one with ``lid = 0, rim = 0``.
    """
    out = []
    for node in sorted(states_by_node):
        states = states_by_node[node]
        for rule in rules:
            char, state = rule.when
            if states.get(char) != state:
                continue
            for want_char in sorted(rule.needs):
                found = states.get(want_char)
                if found is not None and found != rule.needs[want_char]:
                    out.append(
                        Violation(node, rule, "needs", want_char, rule.needs[want_char], found)
                    )
            for bad_char in sorted(rule.forbids):
                found = states.get(bad_char)
                if found is not None and found == rule.forbids[bad_char]:
                    out.append(Violation(node, rule, "forbids", bad_char, found, found))
    return out
