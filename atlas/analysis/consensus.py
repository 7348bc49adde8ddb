"""Summaries of a posterior sample of trees: clade support, majority-rule consensus, MCC tree.

Clades are Python-int bitsets over the sample's ``taxa`` (bit ``i`` = taxon ``i``), so any
number of taxa works. The *support* of a clade is the fraction of the kept sample trees that
contain it, i.e. its posterior probability estimated from the sample. Without an outgroup the
trees are read as rooted in the file; with one, every tree is first rerooted on it
(:func:`reroot`), so support counts the clades of the rerooted trees.
"""

from __future__ import annotations

import hashlib
import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from atlas.analysis.tree import Tree, clade_masks, clade_words
from atlas.errors import AtlasError, Problem, did_you_mean
from atlas.sources.trees import TreeSample, mask_labels


@dataclass(frozen=True)
class Summary:
    """A summary tree with the support of each node's clade in the sample.

    ``support[v]``: fraction of the ``n_trees`` kept sample trees containing the clade of ``v``
    (``nan`` at tips, 1.0 at the root); ``count[v]``: how many of them contain it (``n_trees``
    at tips and root); ``method``: ``"majority"`` or ``"mcc"``.
    """

    tree: Tree
    support: np.ndarray
    count: np.ndarray
    n_trees: int
    method: str


# ---------------------------------------------------------------------------------------------
# Rooting


def _outgroup_mask(tree: Tree, outgroup: Sequence[str], file: str = "outgroup") -> int:
    index = {t: i for i, t in enumerate(tree.taxa)}
    present = {tree.taxa[i] for i in tree.tip[tree.tip >= 0].tolist()}
    problems = []
    mask = 0
    for name in outgroup:
        if name not in present:
            hint = did_you_mean(name, present)
            problems.append(
                Problem(file, None, f"outgroup {name!r} is not a tip of the tree", hint)
            )
        else:
            mask |= 1 << index[name]
    if problems:
        raise AtlasError(problems)
    return mask


def reroot(tree: Tree, outgroup: Sequence[str]) -> Tree:
    """Root ``tree`` on the branch leading to its outgroup.

    The tree is read as unrooted (a bifurcating root is removed and its two branches joined,
    lengths added). The new root goes in the middle of the branch that separates the outgroup
    from the other tips (each side gets half its length), and the outgroup side is its first
    child. A tree already rooted that way is returned unchanged. If no branch separates them,
    the outgroup cannot be made monophyletic by any rooting and :class:`AtlasError` names it.
    Internal labels stay with their nodes; the label of a removed root is dropped.

    >>> from atlas.sources.trees import parse_newick, write_newick
    >>> write_newick(reroot(parse_newick("((A:1,B:1):1,(C:1,D:3):1);"), ["D"]))
    '(D:1.5,(C:1.0,(A:1.0,B:1.0):2.0):1.5);'
    """
    if not outgroup:
        return tree
    out = _outgroup_mask(tree, outgroup)
    masks = clade_masks(tree)
    root = tree.root
    every = masks[root]
    if out == every:
        raise AtlasError(Problem("outgroup", None, "the outgroup holds every tip of the tree"))
    kids = tree.children(root).tolist()
    if len(kids) == 2 and out in (masks[kids[0]], masks[kids[1]]):
        return tree
    parent = tree.parent.tolist()
    length = tree.length.tolist()
    # the branch: a non-root node whose clade is the outgroup or the rest
    target = -1
    for v in range(tree.n_nodes - 1):
        if masks[v] == out or masks[v] == every ^ out:
            target = v
            break
    if target < 0:
        names = ", ".join(sorted(outgroup))
        raise AtlasError(
            Problem(
                "outgroup",
                None,
                f"outgroup {names} is not monophyletic on this tree under any rooting",
                "choose an outgroup whose members form one clade",
            )
        )
    # undirected neighbours: (node, branch length), children in order then the parent
    adj: list[list[tuple[int, float]]] = [[] for _ in range(tree.n_nodes + 1)]
    for v in range(tree.n_nodes - 1):
        adj[parent[v]].append((v, length[v]))
    for v in range(tree.n_nodes - 1):
        adj[v].append((parent[v], length[v]))
    if len(kids) == 2:  # remove a bifurcating root: join its two branches
        a, b = kids
        la, lb = length[a], length[b]
        joined = math.nan if math.isnan(la) and math.isnan(lb) else np.nansum([la, lb]).item()
        adj[a] = [(b, joined) if n == root else (n, x) for n, x in adj[a]]
        adj[b] = [(a, joined) if n == root else (n, x) for n, x in adj[b]]
        adj[root] = []
    other = parent[target]
    half = next(x for n, x in adj[target] if n == other) / 2
    new_root = tree.n_nodes
    first, second = (target, other) if masks[target] == out else (other, target)
    adj[new_root] = [(first, half), (second, half)]
    adj[target] = [(new_root, half) if n == other else (n, x) for n, x in adj[target]]
    adj[other] = [(new_root, half) if n == target else (n, x) for n, x in adj[other]]
    return _from_adjacency(tree, adj, new_root)


def _from_adjacency(tree: Tree, adj: list[list[tuple[int, float]]], root: int) -> Tree:
    """Renumber in postorder from ``root``; nodes keep their tips and labels."""
    order: list[int] = []
    up: dict[int, tuple[int, float]] = {root: (-1, math.nan)}
    stack = [(root, False)]
    while stack:
        v, done = stack.pop()
        if done:
            order.append(v)
            continue
        stack.append((v, True))
        came = up[v][0]
        for n, x in reversed(adj[v]):
            if n != came:
                up[n] = (v, x)
                stack.append((n, False))
    new_id = {v: i for i, v in enumerate(order)}
    old_tip = tree.tip.tolist()
    parent = [new_id[up[v][0]] if up[v][0] >= 0 else -1 for v in order]
    length = [up[v][1] for v in order]
    tip = [old_tip[v] if v < tree.n_nodes else -1 for v in order]
    label = tuple(tree.label[v] if v < tree.n_nodes else None for v in order)
    return Tree(parent, length, tip, tree.taxa, label)


# ---------------------------------------------------------------------------------------------
# Counting clades


@dataclass(frozen=True)
class _Clades:
    """Every clade of the counted trees (rows of bitset words, sorted by hash), how many trees
    hold it, and the sum and number of its known branch lengths."""

    unique: np.ndarray  # (n_clades, words) uint64
    hashes: np.ndarray | None  # sorted, one per clade; None if two clades share a hash
    row: np.ndarray  # the clade row of every node of every counted tree, trees end to end
    offsets: np.ndarray  # tree k's nodes are row[offsets[k]:offsets[k + 1]]
    count: np.ndarray
    length_sum: np.ndarray
    length_n: np.ndarray
    trees: list[Tree]  # the sample trees as counted (rerooted when an outgroup is given)
    n: int

    def rows_of(self, masks: Sequence[int]) -> np.ndarray:
        """The row of each clade (a Python-int bitset), -1 for a clade in no counted tree."""
        if not len(masks):
            return np.zeros(0, dtype=np.int64)
        if self.hashes is None:
            rows = {self.mask(r): r for r in range(self.unique.shape[0])}
            return np.array([rows.get(m, -1) for m in masks], dtype=np.int64)
        words = self.unique.shape[1]
        data = b"".join(m.to_bytes(words * 8, "little") for m in masks)
        query = np.frombuffer(data, dtype=np.uint64).reshape(len(masks), words)
        at = np.minimum(np.searchsorted(self.hashes, _hash_rows(query)), len(self.hashes) - 1)
        found = np.all(self.unique[at] == query, axis=1)
        return np.where(found, at, -1)

    def counts_of(self, masks: Sequence[int]) -> np.ndarray:
        rows = self.rows_of(masks)
        return np.where(rows >= 0, self.count[np.maximum(rows, 0)], 0)

    def mean_lengths(self, masks: Sequence[int]) -> list[float]:
        rows = self.rows_of(masks)
        safe = np.maximum(rows, 0)
        n = np.where(rows >= 0, self.length_n[safe], 0)
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = np.where(n > 0, self.length_sum[safe] / np.maximum(n, 1), np.nan)
        return mean.tolist()

    def mask(self, row: int) -> int:
        return int.from_bytes(self.unique[row].tobytes(), "little")


def _hash_rows(rows: np.ndarray) -> np.ndarray:
    """One ``uint64`` per row of words: the splitmix64 finaliser of each word, combined."""
    mixed = np.zeros(rows.shape[0], dtype=np.uint64)
    with np.errstate(over="ignore"):
        for w in range(rows.shape[1]):
            x = rows[:, w] + np.uint64(0x9E3779B97F4A7C15) * np.uint64(w + 1)
            x = (x ^ (x >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
            x = (x ^ (x >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
            x ^= x >> np.uint64(31)
            mixed = (mixed * np.uint64(0x100000001B3)) ^ x
    return mixed


def _unique_rows(rows: np.ndarray) -> tuple[np.ndarray, np.ndarray | None, np.ndarray]:
    """``(unique, hashes, inverse)`` of the rows of a ``uint64`` array: ``rows ==
    unique[inverse]``; ``hashes`` sorted, one per unique row.

    Rows are hashed to one ``uint64`` each and the hashes sorted (sorting whole rows as bytes
    was 5 times slower on benchmarks/bench_consensus.py); rows sharing a hash are then compared
    in full. Should two different clades ever share a hash, the exact sort of whole rows is
    used and ``hashes`` is None.
    """
    hashed = _hash_rows(rows)
    order = np.argsort(hashed)
    ordered = hashed[order]
    new = np.ones(order.size, dtype=bool)
    new[1:] = ordered[1:] != ordered[:-1]
    inverse = np.empty(order.size, dtype=np.int64)
    inverse[order] = np.cumsum(new) - 1
    unique = rows[order[new]]
    if np.array_equal(unique[inverse], rows):
        return unique, ordered[new], inverse
    keys = np.ascontiguousarray(rows).view(np.dtype((np.void, rows.shape[1] * 8))).ravel()
    _, first, inverse = np.unique(keys, return_index=True, return_inverse=True)
    return rows[first], None, inverse.ravel().astype(np.int64)


def _count_clades(sample: TreeSample, outgroup: Sequence[str]) -> _Clades:
    """Count every clade of every tree at once: bitset rows (:func:`clade_words`), then one
    sort of the internal nodes' rows by hash (a tip's clade is its taxon). A tree counts a
    clade once (a chain of one-child nodes has one clade; its branch is the sum of the
    pieces). Measured on benchmarks/bench_consensus.py (1,000 trees of 399 nodes, best of 7
    on a loaded machine): 0.17 s, against 0.20 s sorting every node's row and testing the
    trees one by one for chains."""
    trees = [reroot(t, outgroup) for t in sample.trees] if outgroup else list(sample.trees)
    if trees:
        tip = np.concatenate([t.tip for t in trees])
        length = np.concatenate([t.length for t in trees])
        # children per node; where one tree ends the next one's 0 gives a difference <= 0
        n_children = np.diff(np.concatenate([t.child_ptr for t in trees]))
    else:
        tip, length, n_children = np.zeros(0, dtype=np.int32), np.zeros(0), np.zeros(0)
    inner = tip < 0
    rows, offsets = clade_words(trees, len(sample.taxa), np.flatnonzero(inner))
    inner_unique, _, inner_row = _unique_rows(rows)
    # every clade: the taxa's own (one bit each), then the internal nodes' distinct ones; a
    # second, small unique merges a one-child node's clade with its tip's
    taxa = np.flatnonzero(np.bincount(tip[~inner], minlength=len(sample.taxa)))
    words = rows.shape[1]
    singles = np.zeros((taxa.size, words), dtype=np.uint64)
    singles[np.arange(taxa.size), taxa // 64] = np.uint64(1) << (taxa % 64).astype(np.uint64)
    unique, hashes, merged = _unique_rows(np.concatenate([singles, inner_unique]))
    of_taxon = np.zeros(len(sample.taxa), dtype=np.int64)
    of_taxon[taxa] = merged[: taxa.size]
    row = np.empty(tip.size, dtype=np.int64)
    row[~inner] = of_taxon[tip[~inner]]
    row[inner] = merged[taxa.size :][inner_row]
    node_row = row
    size = unique.shape[0]
    if np.any(n_children == 1):  # a one-child node somewhere
        tree_of = np.repeat(np.arange(len(trees)), np.diff(offsets))
        pair, at = np.unique(tree_of * size + row, return_inverse=True)
        at = at.ravel()
        known = ~np.isnan(length)
        summed = np.bincount(at[known], weights=length[known], minlength=pair.size)
        any_known = np.bincount(at[known], minlength=pair.size) > 0
        row = pair % size
        length = np.where(any_known, summed, np.nan)
    known = ~np.isnan(length)
    count = np.bincount(row, minlength=size)
    length_sum = np.bincount(row[known], weights=length[known], minlength=size)
    length_n = np.bincount(row[known], minlength=size)
    return _Clades(
        unique, hashes, node_row, offsets, count, length_sum, length_n, trees, len(trees)
    )


def _support_arrays(tree: Tree, clades: _Clades, masks: list[int]) -> tuple[np.ndarray, np.ndarray]:
    count = clades.counts_of(masks).astype(np.int64)
    support = count / clades.n
    support[tree.tip >= 0] = np.nan
    count[tree.tip >= 0] = clades.n
    return support, count


def _sample_masks(sample: TreeSample, tree: Tree) -> list[int]:
    """Clades of ``tree`` as bitsets over ``sample.taxa`` (the tree's own taxa may differ)."""
    tips = {tree.taxa[i] for i in tree.tip[tree.tip >= 0].tolist()}
    if tips != set(sample.taxa):
        missing = ", ".join(sorted(set(sample.taxa) - tips)) or "none"
        extra = ", ".join(sorted(tips - set(sample.taxa))) or "none"
        raise AtlasError(
            Problem(
                sample.file,
                None,
                f"the tree's tips differ from the sample's: missing {missing}; extra {extra}",
            )
        )
    if tree.taxa == sample.taxa:
        return clade_masks(tree)
    index = {t: i for i, t in enumerate(sample.taxa)}
    remap = np.array([index.get(t, -1) for t in tree.taxa], dtype=np.int32)
    tip = np.where(tree.tip >= 0, remap[np.maximum(tree.tip, 0)], -1)
    return clade_masks(Tree(tree.parent, tree.length, tip, sample.taxa, tree.label))


def clade_frequencies(
    sample: TreeSample, *, outgroup: Sequence[str] = ()
) -> dict[frozenset[str], float]:
    """Fraction of the sample trees containing each rooted clade of two or more (but not all)
    tips, keyed by its tip labels; with an outgroup, of the trees rerooted on it.

    >>> from atlas.sources.trees import parse_newick
    >>> trees = [parse_newick(s) for s in ["((A,B),C);", "((A,B),C);", "((A,C),B);"]]
    >>> f = clade_frequencies(TreeSample("x", ("A", "B", "C"), trees, 3, 0, 1))
    >>> sorted((sorted(k), round(v, 3)) for k, v in f.items())
    [(['A', 'B'], 0.667), (['A', 'C'], 0.333)]
    """
    clades = _count_clades(sample, outgroup)
    full = (1 << len(sample.taxa)) - 1
    return {
        mask_labels(m, sample.taxa): int(clades.count[row]) / clades.n
        for row, m in ((r, clades.mask(r)) for r in range(clades.unique.shape[0]))
        if m & (m - 1) and m != full
    }


def clade_support(
    sample: TreeSample, tree: Tree, *, outgroup: Sequence[str] = ()
) -> tuple[np.ndarray, np.ndarray]:
    """``(support, count)`` per node of ``tree``: how often its clade occurs in the sample.

    ``support[v] = #{sample trees containing clade(v)} / n_trees`` (``nan`` at tips). With an
    outgroup the sample trees are rerooted on it; ``tree`` itself is used as given, so root it
    the same way (:func:`reroot`) for the numbers to mean clade support.

    >>> from atlas.sources.trees import parse_newick
    >>> trees = [parse_newick(s) for s in ["((A,B),C);", "((A,B),C);", "((A,C),B);"]]
    >>> s = TreeSample("x", ("A", "B", "C"), trees, 3, 0, 1)
    >>> support, count = clade_support(s, trees[2])
    >>> count.tolist(), float(support[2])
    ([3, 3, 1, 3, 3], 0.3333333333333333)
    """
    clades = _count_clades(sample, outgroup)
    return _support_arrays(tree, clades, _sample_masks(sample, tree))


def majority_rule(
    sample: TreeSample, *, outgroup: Sequence[str] = (), min_freq: float = 0.5
) -> Summary:
    """Majority-rule consensus: the clades found in more than ``min_freq`` of the trees.

    With ``min_freq >= 0.5`` the chosen clades are pairwise compatible (two clades each in more
    than half the trees share a tree, so they nest or are disjoint; Margush & McMorris 1981,
    Bull. Math. Biol.). With a lower ``min_freq`` clades are added greedily, most frequent
    first, skipping any that conflicts with one already taken. Each branch gets the mean length
    of its clade over the trees containing it.

    >>> from atlas.sources.trees import parse_newick, write_newick
    >>> trees = [parse_newick(s) for s in ["((A:1,B:1):2,C:1);", "((A:1,B:1):4,C:1);",
    ...                                    "((A:1,C:1):1,B:1);"]]
    >>> s = TreeSample("x", ("A", "B", "C"), trees, 3, 0, 1)
    >>> write_newick(majority_rule(s).tree)
    '((A:1.0,B:1.0):3.0,C:1.0);'
    """
    clades = _count_clades(sample, outgroup)
    n = clades.n
    n_taxa = len(sample.taxa)
    full = (1 << n_taxa) - 1
    frequent = np.flatnonzero(clades.count / n > min_freq).tolist()
    count = {clades.mask(r): int(clades.count[r]) for r in frequent}
    candidates = [m for m in count if m & (m - 1) and m != full]
    candidates.sort(key=lambda m: (-count[m], m.bit_count(), m))
    chosen: list[int] = []
    for m in candidates:
        if all(m & c == 0 or m & c == m or m & c == c for c in chosen):
            chosen.append(m)
    tree = _tree_from_clades(chosen, sample.taxa, clades)
    support, count = _support_arrays(tree, clades, clade_masks(tree))
    return Summary(tree, support, count, n, "majority")


def _tree_from_clades(chosen: list[int], taxa: tuple[str, ...], clades: _Clades) -> Tree:
    """The tree whose clades are ``chosen`` plus the tips and the root, children ordered by
    their lowest taxon index; branch lengths are the clades' mean lengths."""
    full = (1 << len(taxa)) - 1
    inner = sorted(chosen, key=lambda m: (m.bit_count(), m)) + [full]
    nodes = [1 << i for i in range(len(taxa))] + inner[:-1]
    kids: dict[int, list[int]] = {m: [] for m in inner}
    for m in nodes:
        for c in inner:
            if c & m == m and c != m:
                kids[c].append(m)
                break
    order: list[int] = []
    stack = [(full, False)]
    while stack:
        m, done = stack.pop()
        if done or m not in kids:
            order.append(m)
            continue
        stack.append((m, True))
        for c in sorted(kids[m], key=lambda c: -((c & -c).bit_length())):
            stack.append((c, False))
    new_id = {m: i for i, m in enumerate(order)}
    parent = [-1] * len(order)
    for m, children in kids.items():
        for c in children:
            parent[new_id[c]] = new_id[m]
    tip = [(m.bit_length() - 1) if m not in kids else -1 for m in order]
    length = clades.mean_lengths(order)
    return Tree(parent, length, tip, taxa)


def mcc_tree(sample: TreeSample, *, outgroup: Sequence[str] = ()) -> Summary:
    """The maximum clade credibility tree: the sampled tree maximising the product of the
    frequencies of its clades, i.e. ``argmax_t sum_{c in t} log f(c)`` (the first such tree on
    ties; Drummond & Rambaut 2007, BMC Evol. Biol., as the summary of a BEAST run). Its
    branches get the mean length of their clade over the sample trees containing it.

    >>> from atlas.sources.trees import parse_newick
    >>> trees = [parse_newick(s) for s in ["((A,B),(C,D));", "((A,B),C,D);", "((A,C),(B,D));"]]
    >>> s = TreeSample("x", ("A", "B", "C", "D"), trees, 3, 0, 1)
    >>> mcc_tree(s).count.tolist()  # tree 2: log(2/3) beats tree 1: log(2/3) + log(1/3)
    [3, 3, 2, 3, 3, 3]
    """
    clades = _count_clades(sample, outgroup)
    n = clades.n
    # sum of log frequencies over each tree's internal nodes (tips and root add log 1 = 0)
    log_freq = np.log(clades.count / n)
    scores = np.add.reduceat(log_freq[clades.row], clades.offsets[:-1])
    for k, t in enumerate(clades.trees):
        if np.any(np.diff(t.child_ptr) == 1):  # a clade repeated along a one-child chain
            rows = clades.row[clades.offsets[k] : clades.offsets[k + 1]]
            scores[k] = log_freq[np.unique(rows)].sum()
    best = int(np.argmax(scores))  # the first of equal scores
    chosen = clades.trees[best]
    masks = clade_masks(chosen)
    length = clades.mean_lengths(masks)
    tree = Tree(chosen.parent, length, chosen.tip, chosen.taxa, chosen.label)
    support, count = _support_arrays(tree, clades, masks)
    return Summary(tree, support, count, n, "mcc")


def node_ids(tree: Tree) -> list[str]:
    """The stable id of every node: a tip's label; for an internal node ``"n-"`` and the first
    10 hex digits of the SHA-1 of its member labels, sorted and joined by commas.

    >>> from atlas.sources.trees import parse_newick
    >>> node_ids(parse_newick("((A,B),C);"))[2]
    'n-a1f86715f2'
    >>> import hashlib; hashlib.sha1(b"A,B").hexdigest()[:10]
    'a1f86715f2'
    """
    members: list[list[str]] = [[] for _ in range(tree.n_nodes)]
    ids: list[str] = []
    parent = tree.parent.tolist()
    tip = tree.tip.tolist()
    for v in range(tree.n_nodes):
        if tip[v] >= 0:
            members[v].append(tree.taxa[tip[v]])
            ids.append(tree.taxa[tip[v]])
        else:
            text = ",".join(sorted(members[v]))
            ids.append("n-" + hashlib.sha1(text.encode("utf-8")).hexdigest()[:10])
        if parent[v] >= 0:
            members[parent[v]].extend(members[v])
        members[v] = [] if parent[v] >= 0 else members[v]
    return ids
