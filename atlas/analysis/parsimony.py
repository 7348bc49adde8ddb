"""Parsimony on a fixed tree: tree length, steps per character, most parsimonious states.

Input convention, shared with the trait matrix reader:

- ``masks``: ``uint32`` array ``(n_taxa, n_chars)``, rows in ``tree.taxa`` order; bit ``k``
  set means state ``k`` is possible for that object. A polymorphic or uncertain cell has several
  bits; unknown (``?``) has all ``n_states[j]`` bits. Inapplicable (``-``) is treated as
  missing, i.e. all bits, so gaps add no steps (the usual "gap = missing" reading; inapplicable
  coding schemes are not modelled). A cell with no bit set is read as missing too.
- ``n_states``: int per character (states ``0 .. n_states[j] - 1``; at most 32).
- ``ordered``: bool per character; ordered characters cost ``|i - j|`` steps for a change from
  ``i`` to ``j`` (Wagner parsimony), unordered ones cost 1 for any change (Fitch parsimony).

Kernels work on whole columns of characters at once with numpy, one node at a time in postorder
(and in preorder for the second pass).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np

from atlas.analysis.tree import Tree

_BIG = np.int64(1) << 32  # the cost of an impossible state: larger than any tree length


@dataclass(frozen=True)
class Parsimony:
    """Steps per character, their total, and the MPR state set (bit mask) of every node."""

    steps: np.ndarray  # int64, (n_chars,)
    length: int
    states: np.ndarray  # uint32, (n_nodes, n_chars)


def _prepare(
    tree: Tree, masks: np.ndarray, n_states: np.ndarray, ordered: np.ndarray | None
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    masks = np.asarray(masks)
    n_states = np.asarray(n_states, dtype=np.int64)
    if masks.ndim != 2 or masks.shape[0] != len(tree.taxa):
        raise ValueError(f"masks must be (n_taxa={len(tree.taxa)}, n_chars), not {masks.shape}")
    n_chars = masks.shape[1]
    if n_states.shape != (n_chars,) or np.any(n_states < 1) or np.any(n_states > 32):
        raise ValueError("n_states must give 1..32 states for every character")
    if ordered is None:
        ordered = np.zeros(n_chars, dtype=bool)
    ordered = np.asarray(ordered, dtype=bool)
    if ordered.shape != (n_chars,):
        raise ValueError("ordered must give one flag per character")
    allowed = ((np.uint64(1) << n_states.astype(np.uint64)) - np.uint64(1)).astype(np.uint32)
    cells = masks.astype(np.uint32) & allowed
    cells = np.where(cells == 0, allowed, cells)  # no possible state: read as missing
    return cells, n_states, ordered, allowed


def _tip_cells(tree: Tree, cells: np.ndarray) -> np.ndarray:
    """``(n_nodes, n_chars)`` with the tips' cells filled in (zero at internal nodes)."""
    out = np.zeros((tree.n_nodes, cells.shape[1]), dtype=np.uint32)
    tips = tree.tip_ids()
    out[tips] = cells[tree.tip[tips]]
    return out


def fitch_steps(tree: Tree, cells: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The first (postorder) pass of Fitch (1971, Syst. Zool. 20:406) for unordered characters.

    At a node with two children whose sets are ``a`` and ``b``: ``a & b`` if not empty, else
    ``a | b`` and one step. A node with ``k > 2`` children takes the states found in the most
    children (say ``m`` of them) and costs ``k - m`` steps (Hartigan 1973, Biometrics 29:53).
    ``cells`` are the tip masks in ``tree.taxa`` order. Returns ``(steps, preliminary sets)``.

    Example (invented case): tips A=0, B=1, C=1 on ``((A,B),C)``: the node (A,B) gets {0,1} with
    one step, the root {0,1} & {1} = {1}, so 1 step.

    >>> from atlas.sources.trees import parse_newick
    >>> steps, sets = fitch_steps(parse_newick("((A,B),C);"), np.array([[1], [2], [2]]))
    >>> steps.tolist(), sets[:, 0].tolist()
    ([1], [1, 2, 3, 2, 2])
    """
    pre = _tip_cells(tree, np.asarray(cells, dtype=np.uint32))
    steps = np.zeros(pre.shape[1], dtype=np.int64)
    if _is_binary(tree):  # all nodes of one height at once (see _heights)
        left, right = _two_children(tree)
        for nodes in _heights(tree):
            a, b = pre[left[nodes]], pre[right[nodes]]
            both = a & b
            empty = both == 0
            pre[nodes] = np.where(empty, a | b, both)
            steps += empty.sum(axis=0)
        return steps, pre
    ptr = tree.child_ptr.tolist()
    kids = tree.child_idx.tolist()
    n_bits = int(np.max(pre).item()).bit_length() if pre.size else 0
    for v in range(tree.n_nodes):
        k = ptr[v + 1] - ptr[v]
        if k == 0:
            continue
        ch = kids[ptr[v] : ptr[v + 1]]
        if k == 1:
            pre[v] = pre[ch[0]]
        elif k == 2:
            a, b = pre[ch[0]], pre[ch[1]]
            both = a & b
            empty = both == 0
            pre[v] = np.where(empty, a | b, both)
            steps += empty
        else:
            counts = np.stack(
                [
                    sum(((pre[c] >> np.uint32(s)) & np.uint32(1)).astype(np.int64) for c in ch)
                    for s in range(n_bits)
                ]
            )
            best = counts.max(axis=0)
            bits = (counts == best) & (best > 0)
            pre[v] = (bits.astype(np.uint32) << np.arange(n_bits, dtype=np.uint32)[:, None]).sum(
                axis=0, dtype=np.uint32
            )
            steps += k - best
    return steps, pre


def _is_binary(tree: Tree) -> bool:
    return bool(np.all(np.diff(tree.child_ptr)[tree.tip < 0] == 2))


def _two_children(tree: Tree) -> tuple[np.ndarray, np.ndarray]:
    """First and second child of every node of a binary tree (0 at tips, unused)."""
    left = np.zeros(tree.n_nodes, dtype=np.int64)
    right = np.zeros(tree.n_nodes, dtype=np.int64)
    internal = np.flatnonzero(tree.tip < 0)
    left[internal] = tree.child_idx[tree.child_ptr[internal]]
    right[internal] = tree.child_idx[tree.child_ptr[internal] + 1]
    return left, right


def _heights(tree: Tree) -> list[np.ndarray]:
    """Internal nodes grouped by height (the most branches down to a tip), lowest first:
    the nodes of one group do not depend on each other in a postorder pass, so each group is
    one array step (measured 6 times fewer numpy calls on benchmarks/bench_fitch.py)."""
    height = [0] * tree.n_nodes
    parent = tree.parent.tolist()
    for v in range(tree.n_nodes - 1):
        p = parent[v]
        height[p] = max(height[p], height[v] + 1)
    h = np.array(height)
    internal = np.flatnonzero(tree.tip < 0)
    return [internal[h[internal] == k] for k in range(1, int(h.max(initial=0)) + 1)]


def _depths(tree: Tree) -> list[np.ndarray]:
    """Non-root nodes grouped by depth (branches from the root), shallowest first."""
    depth = [0] * tree.n_nodes
    parent = tree.parent.tolist()
    for v in range(tree.n_nodes - 2, -1, -1):
        depth[v] = depth[parent[v]] + 1
    d = np.array(depth)
    order = np.argsort(d[:-1], kind="stable")
    cuts = np.flatnonzero(np.diff(d[:-1][order])) + 1
    return [g for g in np.split(order, cuts) if g.size]


def _move(cost: np.ndarray, ordered: np.ndarray) -> np.ndarray:
    """``out[:, t] = min_s cost[:, s] + d(s, t)``: d = 1 for unordered, ``|s - t|`` for ordered."""
    unordered = np.minimum(cost, cost.min(axis=1, keepdims=True) + 1)
    if not ordered.any():
        return unordered
    line = cost.copy()
    for s in range(1, cost.shape[1]):
        np.minimum(line[:, s], line[:, s - 1] + 1, out=line[:, s])
    for s in range(cost.shape[1] - 2, -1, -1):
        np.minimum(line[:, s], line[:, s + 1] + 1, out=line[:, s])
    return np.where(ordered[:, None], line, unordered)


def state_costs(
    tree: Tree, cells: np.ndarray, n_states: np.ndarray, ordered: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Sankoff's (1975, SIAM J. Appl. Math. 28:35) down and up costs for every node and state.

    ``down[v, j, s]``: the fewest steps of character ``j`` in the subtree of ``v`` when ``v`` has
    state ``s``; ``down[v, :, s] = sum_c min_t (down[c, :, t] + d(s, t))`` over the children
    ``c``. ``up[v, j, s]``: the fewest steps in the rest of the tree; at the root 0, and for a
    child ``c`` of ``v``: ``up[c, :, t] = min_s (up[v, :, s] + down[v, :, s] - m_c[s] + d(s, t))``
    with ``m_c`` the child's term in ``down[v]``. A state is in the most parsimonious
    reconstruction (MPR) set of ``v`` iff ``down + up`` equals the character's steps (Swofford
    & Maddison 1987, Math. Biosci. 87:199, for the MPR sets). Impossible states cost 2**32.
    """
    n_nodes, n_chars = tree.n_nodes, cells.shape[1]
    width = int(n_states.max()) if n_chars else 1
    bits = np.arange(width, dtype=np.uint32)
    forbid = np.where(bits[None, :] < n_states[:, None], 0, _BIG)
    down = np.empty((n_nodes, n_chars, width), dtype=np.int64)
    message = np.empty_like(down)  # message[c]: the child's term in its parent's down cost
    ptr = tree.child_ptr.tolist()
    kids = tree.child_idx.tolist()
    tip = tree.tip.tolist()
    for v in range(n_nodes):
        if tip[v] >= 0:
            have = (cells[tip[v]][:, None] >> bits[None, :]) & np.uint32(1)
            down[v] = np.where(have == 1, 0, _BIG) + forbid
        else:
            down[v] = forbid
            for c in kids[ptr[v] : ptr[v + 1]]:
                down[v] += message[c]
        if v < n_nodes - 1:
            message[v] = _move(down[v], ordered)
    up = np.zeros_like(down)
    for v in range(n_nodes - 1, -1, -1):
        for c in kids[ptr[v] : ptr[v + 1]]:
            up[c] = _move(up[v] + down[v] - message[c], ordered)
    return down, up


def fitch(
    tree: Tree,
    masks: np.ndarray,
    n_states: np.ndarray,
    ordered: np.ndarray | None = None,
) -> Parsimony:
    """Parsimony steps of every character on ``tree`` and the MPR state set of every node.

    Unordered characters: Fitch (1971, Syst. Zool. 20:406), with Hartigan's (1973,
    Biometrics 29:53) rule at polytomies; ordered characters: Wagner parsimony, the change
    from ``i`` to ``j`` costing ``|i - j|`` (Farris 1970, Syst. Zool. 19:83). The length is the
    sum of the steps, ``L = sum_j s_j``. The final sets are the states that some most
    parsimonious reconstruction gives the node (the MPR sets of Swofford & Maddison 1987,
    Math. Biosci. 87:199): on a binary tree, unordered characters get them from Fitch's second
    pass (:func:`fitch_final`); ordered characters, and every character on a tree with
    polytomies, from Sankoff's down and up costs (:func:`state_costs`), which also give the
    steps of ordered characters.

    Example (invented case): ``((A,B),(C,D))`` with A=0, B=0, C=1, D=1 needs 1 step; every
    internal node can only be 0 on the (A,B) side and 1 on the (C,D) side, the root either.

    >>> from atlas.sources.trees import parse_newick
    >>> t = parse_newick("((A,B),(C,D));")
    >>> p = fitch(t, np.array([[1], [1], [2], [2]], dtype=np.uint32), np.array([2]))
    >>> p.length, p.states[:, 0].tolist()
    (1, [1, 1, 1, 2, 2, 2, 3])
    """
    cells, n_states, ordered, _ = _prepare(tree, masks, n_states, ordered)
    steps, pre = fitch_steps(tree, cells)
    binary = _is_binary(tree)
    # binary trees, unordered characters: Fitch's own second pass in bit operations (measured
    # 6 times faster than the cost arrays on benchmarks/bench_fitch.py); the rest: Sankoff.
    slow = ordered if binary else np.ones_like(ordered)
    states = fitch_final(tree, pre) if binary else np.zeros_like(pre)
    if slow.any():
        cols = np.flatnonzero(slow)
        down, up = state_costs(tree, cells[:, cols], n_states[cols], ordered[cols])
        best = down[-1].min(axis=1)
        steps[cols] = best
        on = down + up == best[None, :, None]
        weights = np.uint32(1) << np.arange(on.shape[2], dtype=np.uint32)
        states[:, cols] = (on * weights).sum(axis=2, dtype=np.uint64).astype(np.uint32)
    return Parsimony(steps.astype(np.int64), int(steps.sum()), states)


def fitch_final(tree: Tree, pre: np.ndarray) -> np.ndarray:
    """Fitch's (1971, Syst. Zool. 20:406) second pass on a binary tree: the final sets.

    With ``F_p`` the parent's final set and ``S`` the node's preliminary set from the first
    pass (children's sets ``S_a``, ``S_b``): ``F = F_p`` if ``F_p`` is inside ``S``; else
    ``F = S | F_p`` if ``S`` was a union (``S_a & S_b`` empty); else
    ``F = S | (F_p & (S_a | S_b))``. A tip keeps ``F_p`` if inside its cell, else its cell.
    The root keeps ``S``. These are the MPR sets of unordered characters (checked against
    exhaustive enumeration in tests/test_parsimony.py).
    """
    final = pre.copy()
    left, right = _two_children(tree)
    parent = tree.parent
    for nodes in _depths(tree):
        up = final[parent[nodes]]
        s = pre[nodes]
        inside = (up & s) == up
        tips = tree.tip[nodes] >= 0
        widened = s.copy()
        inner = ~tips
        if inner.any():
            a, b = pre[left[nodes[inner]]], pre[right[nodes[inner]]]
            si, ui = s[inner], up[inner]
            widened[inner] = np.where((a & b) == 0, si | ui, si | (ui & (a | b)))
        final[nodes] = np.where(inside, up, widened)
    return final


# ---------------------------------------------------------------------------------------------
# Consistency and retention indices


@dataclass(frozen=True)
class Indices:
    """Per character ``min_steps`` (m), ``max_steps`` (g), ``steps`` (s), ``ci``, ``ri``,
    ``rc``; and the ensemble ``CI``, ``RI``, ``RC`` over all characters."""

    steps: np.ndarray
    min_steps: np.ndarray
    max_steps: np.ndarray
    ci: np.ndarray
    ri: np.ndarray
    rc: np.ndarray
    ensemble_ci: float
    ensemble_ri: float
    ensemble_rc: float


def _min_steps(cells: np.ndarray, n_states: np.ndarray, ordered: np.ndarray) -> np.ndarray:
    """The fewest steps of each character on any tree.

    Unordered: one less than the fewest states that meet every cell (every taxon can then
    take one of them and the tree group taxa by state); with single-state cells this is the
    number of states seen minus 1. Ordered: the narrowest range ``hi - lo`` of states that
    meets every cell. Cells holding every state (missing) meet anything.
    """
    n_chars = cells.shape[1]
    out = np.zeros(n_chars, dtype=np.int64)
    allowed = ((np.uint64(1) << n_states.astype(np.uint64)) - np.uint64(1)).astype(np.uint32)
    for j in range(n_chars):
        col = cells[:, j]
        col = np.unique(col[col != allowed[j]])
        if col.size == 0:
            continue
        k = int(n_states[j])
        if ordered[j]:
            out[j] = min(
                hi - lo
                for lo in range(k)
                for hi in range(lo, k)
                if np.all(col & np.uint32(((1 << (hi + 1)) - 1) ^ ((1 << lo) - 1)))
            )
        elif np.all(col & (col - np.uint32(1)) == 0):
            out[j] = int(np.bitwise_or.reduce(col)).bit_count() - 1
        else:
            out[j] = next(
                size - 1
                for size in range(1, k + 1)
                for chosen in itertools.combinations(range(k), size)
                if np.all(col & np.uint32(sum(1 << s for s in chosen)))
            )
    return out


def _bush_steps(cells: np.ndarray, n_states: np.ndarray, ordered: np.ndarray) -> np.ndarray:
    """Steps on the bush (star tree): ``g = min_c sum_i d(c, cell_i)``, with ``d`` the distance
    from state ``c`` to the nearest state of the cell (0 when the cell holds ``c``)."""
    width = int(n_states.max()) if n_states.size else 1
    best = np.full(cells.shape[1], np.iinfo(np.int64).max, dtype=np.int64)
    bits = [((cells >> np.uint32(s)) & np.uint32(1)).astype(bool) for s in range(width)]
    for c in range(width):
        unordered = (~bits[c]).sum(axis=0)
        if ordered.any():
            near = np.full(cells.shape, width, dtype=np.int64)
            for s in range(width):
                near = np.where(bits[s], np.minimum(near, abs(c - s)), near)
            cost = np.where(ordered, near.sum(axis=0), unordered)
        else:
            cost = unordered
        cost = np.where(c < n_states, cost, best)
        best = np.minimum(best, cost)
    return best


def indices(
    tree: Tree,
    masks: np.ndarray,
    n_states: np.ndarray,
    ordered: np.ndarray | None = None,
) -> Indices:
    """Consistency, retention and rescaled consistency indices of every character and of the
    whole matrix on ``tree``.

    With ``s`` the steps on the tree, ``m`` the fewest on any tree and ``g`` the most (the
    steps on a bush, Farris 1989): ``ci = m / s`` (Kluge & Farris 1969, Syst. Zool. 18:1),
    ``ri = (g - s) / (g - m)`` and ``rc = ci * ri`` (Farris 1989, Cladistics 5:417). The
    ensemble indices use sums over all characters: ``CI = sum m / sum s``,
    ``RI = (sum g - sum s) / (sum g - sum m)``, ``RC = CI * RI``. A character with ``s = 0``
    has ``ci = nan``; one with ``g = m`` (parsimony-uninformative) has ``ri = nan``; both still
    count in the ensemble sums. Missing cells (and gaps, read as missing) add no steps on any
    tree nor on the bush, so they are as good as absent.

    Example (invented case), ``((A,B),(C,D))``: character 0011 has s = 1, m = 1, g = 2
    (bush centred on 0: C and D change), so ci = 1, ri = 1; character 0101 has s = 2, m = 1,
    g = 2, so ci = 0.5, ri = 0. Ensemble CI = 2 / 3, RI = (4 - 3) / (4 - 2) = 0.5.

    >>> from atlas.sources.trees import parse_newick
    >>> t = parse_newick("((A,B),(C,D));")
    >>> x = indices(t, np.array([[1, 1], [1, 2], [2, 1], [2, 2]]), np.array([2, 2]))
    >>> x.ci.tolist(), x.ri.tolist(), round(x.ensemble_ci, 4), x.ensemble_ri
    ([1.0, 0.5], [1.0, 0.0], 0.6667, 0.5)
    """
    cells, n_states, ordered, _ = _prepare(tree, masks, n_states, ordered)
    result = fitch(tree, cells, n_states, ordered)
    present = tree.tip[tree.tip >= 0]
    cells = cells[np.sort(present)]
    s = result.steps
    m = _min_steps(cells, n_states, ordered)
    g = _bush_steps(cells, n_states, ordered)
    with np.errstate(divide="ignore", invalid="ignore"):
        ci = np.where(s > 0, m / np.maximum(s, 1), np.nan)
        ri = np.where(g > m, (g - s) / np.where(g > m, g - m, 1), np.nan)
    total_s, total_m, total_g = int(s.sum()), int(m.sum()), int(g.sum())
    ensemble_ci = total_m / total_s if total_s else math.nan
    ensemble_ri = (total_g - total_s) / (total_g - total_m) if total_g > total_m else math.nan
    return Indices(s, m, g, ci, ri, ci * ri, ensemble_ci, ensemble_ri, ensemble_ci * ensemble_ri)


# ---------------------------------------------------------------------------------------------
# Changes on branches


def assign_states(
    tree: Tree,
    masks: np.ndarray,
    n_states: np.ndarray,
    ordered: np.ndarray | None = None,
    *,
    method: str = "acctran",
) -> np.ndarray:
    """One most parsimonious state per node and character, ``(n_nodes, n_chars)`` ints.

    From the root down (Swofford & Maddison 1987, Math. Biosci. 87:199): the root takes the
    lowest state of its MPR set; a child of a node in state ``x`` may take any state ``t`` that
    minimises ``d(x, t) + down[t]`` (Sankoff's down cost, :func:`state_costs`), so the whole
    assignment is most parsimonious. ``"acctran"`` takes a change as soon as one is allowed
    (changes go toward the root; on ordered characters the largest allowed change), and
    ``"deltran"`` keeps ``x`` whenever allowed (changes go toward the tips; else the nearest
    allowed state). Remaining ties go to the lowest state.

    Example (invented case): on ``((((A,B),C),D),E)`` with A, B, D = 1 and C, E = 0 both
    reconstructions take 2 steps; ACCTRAN gains 1 below the root of (A,B,C,D) and loses it on
    C, DELTRAN gains it twice, on (A,B) and on D.
    """
    if method not in ("acctran", "deltran"):
        raise ValueError(f"method must be 'acctran' or 'deltran', not {method!r}")
    cells, n_states, ordered, _ = _prepare(tree, masks, n_states, ordered)
    down, _ = state_costs(tree, cells, n_states, ordered)
    n_chars, width = down.shape[1], down.shape[2]
    states = np.zeros((tree.n_nodes, n_chars), dtype=np.int64)
    root = tree.root
    states[root] = np.argmin(down[root], axis=1)
    t = np.arange(width)[None, :]
    parent = tree.parent.tolist()
    for v in range(tree.n_nodes - 2, -1, -1):
        x = states[parent[v]][:, None]
        gap = np.abs(t - x)
        move = np.where(ordered[:, None], gap, (gap > 0).astype(np.int64))
        total = down[v] + move
        allowed = total == total.min(axis=1, keepdims=True)
        if method == "acctran":
            rank = -gap * width + t  # the largest change first, then the lowest state
        else:
            rank = gap * width + t  # no change first, then the nearest, then the lowest
        rank = np.where(allowed, rank, np.iinfo(np.int64).max)
        states[v] = np.argmin(rank, axis=1)
    return states


def branch_changes(tree: Tree, states: np.ndarray) -> list[list[tuple[int, int, int]]]:
    """Per node, the changes on the branch above it: ``(character, from_state, to_state)``
    where its state differs from its parent's (empty at the root).

    >>> from atlas.sources.trees import parse_newick
    >>> t = parse_newick("((A,B),C);")
    >>> branch_changes(t, np.array([[0, 1], [1, 1], [0, 1], [0, 0], [0, 0]]))
    [[], [(0, 0, 1)], [(1, 0, 1)], [], []]
    """
    out: list[list[tuple[int, int, int]]] = [[] for _ in range(tree.n_nodes)]
    parent = tree.parent
    for v in range(tree.n_nodes - 1):
        above = states[parent[v]]
        for j in np.flatnonzero(states[v] != above).tolist():
            out[v].append((j, int(above[j]), int(states[v, j])))
    return out


def unambiguous_changes(tree: Tree, result: Parsimony) -> list[list[tuple[int, int, int]]]:
    """Per node, the changes on the branch above it that every most parsimonious
    reconstruction shares: the node and its parent each have a single MPR state, and they
    differ. Branches whose ends have several MPR states list no change here even when some
    change is certain; ACCTRAN and DELTRAN (:func:`assign_states`) show where it may go.
    """
    sets = result.states
    single = (sets != 0) & ((sets & (sets - np.uint32(1))) == 0)
    state = np.where(single, np.log2(np.maximum(sets, 1)).astype(np.int64), -1)
    out: list[list[tuple[int, int, int]]] = [[] for _ in range(tree.n_nodes)]
    parent = tree.parent
    for v in range(tree.n_nodes - 1):
        p = parent[v]
        hit = single[v] & single[p] & (state[v] != state[p])
        for j in np.flatnonzero(hit).tolist():
            out[v].append((j, int(state[p, j]), int(state[v, j])))
    return out
