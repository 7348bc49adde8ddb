"""The analyse stage: every number the site shows, computed once from the linked atlas.

``analyse`` chooses the summary tree (given in the sources, or the majority-rule consensus or
MCC tree of the sample, rooted by the outgroup), measures clade support over the sample,
runs parsimony on the summary tree, fits the likelihood model on it and reconstructs
ancestral states, averaging each clade's probabilities over the sample trees that contain it.
It reads no files and writes none; its result is plain arrays indexed by summary-tree node.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..cache import Cache, analysis_key
from ..model import Atlas
from ..parallel import Background
from .changes import Changes, expected_changes
from .consensus import Summary, clade_support, majority_rule, mcc_tree, node_ids, reroot
from .diagnostics import Diagnostics, diagnose, diagnose_tree
from .likelihood import MkFit, ancestral_states, fit_mk, reconstruct_over_sample
from .parsimony import Indices, Parsimony, fitch, indices, unambiguous_changes
from .tree import Tree, clade_masks


@dataclass(frozen=True)
class Results:
    summary: Summary
    ids: list[str]  # stable id of every summary-tree node (a tip's id is its label)
    members: list[tuple[str, ...]]  # sorted tip labels below every node
    parsimony: Parsimony
    indices: Indices  # CI, RI, RC per character and for the whole matrix
    unambiguous: list[list[tuple[int, int, int]]]  # per node: (char, from, to) on its stem
    fit: MkFit | None  # None when no discrete character varies
    probs: np.ndarray  # (n_nodes, n_discrete, max_k): marginal state probabilities
    prob_trees: np.ndarray  # per node: how many sample trees the probabilities average over
    changes: Changes | None  # expected changes on the branch above each node
    continuous: tuple[np.ndarray, np.ndarray, np.ndarray] | None  # estimate, low, high
    diagnostics: Diagnostics

    @property
    def tree(self) -> Tree:
        return self.summary.tree

    def node_index(self) -> dict[str, int]:
        return {nid: v for v, nid in enumerate(self.ids)}


def summary_tree(atlas: Atlas) -> Summary:
    """The tree every page is drawn on, with its clade support from the sample."""
    analysis = atlas.config.analysis
    outgroup = analysis["outgroup"]
    sample = atlas.sample
    if atlas.summary_input is not None:
        tree = atlas.summary_input.trees[0]
        if tree.taxa != sample.taxa:  # same labels, possibly another order: rebuild on ours
            from ..sources.trees import parse_newick, write_newick

            tree = parse_newick(write_newick(tree), taxa=sample.taxa)
        if outgroup:
            tree = reroot(tree, outgroup)
        support, count = clade_support(sample, tree, outgroup=outgroup)
        return Summary(tree, support, count, len(sample.trees), "given")
    if analysis["summary"] == "mcc":
        return mcc_tree(sample, outgroup=outgroup)
    return majority_rule(sample, outgroup=outgroup)


def analyse(atlas: Atlas, jobs: int = 1, cache: Cache | None = None) -> Results:
    """Summary tree, support, parsimony, likelihood reconstruction and expected changes.

    ``jobs`` processes share the reconstruction over the sample trees (the result is the same
    for any number). With a ``cache``, results computed before from the same inputs
    (:func:`atlas.cache.analysis_key`) are read from it instead.
    """
    cache = cache or Cache()
    key = analysis_key(atlas) if cache.enabled else ""
    cached = cache.get("analysis", key) if cache.enabled else None
    if isinstance(cached, Results):
        return cached
    results = _analyse(atlas, jobs)
    cache.put("analysis", key, results)
    return results


def _analyse(atlas: Atlas, jobs: int) -> Results:
    analysis = atlas.config.analysis
    summary = summary_tree(atlas)
    tree = summary.tree
    ids = node_ids(tree)
    masks_by_node = clade_masks(tree)
    taxa = tree.taxa
    members = [tuple(taxa[i] for i in range(len(taxa)) if m >> i & 1) for m in masks_by_node]

    n_chars = atlas.masks.shape[1]
    parsimony = fitch(tree, atlas.masks, atlas.n_states, atlas.ordered)
    stats = indices(tree, atlas.masks, atlas.n_states, atlas.ordered)
    certain = unambiguous_changes(tree, parsimony)
    max_k = int(atlas.n_states.max()) if n_chars else 2
    probs = np.zeros((tree.n_nodes, n_chars, max_k))
    prob_trees = np.zeros(tree.n_nodes, dtype=np.int64)
    fit = changes = early = None
    if n_chars and _any_variable(atlas):
        fit = fit_mk(tree, atlas.masks, atlas.n_states, model=analysis["model"],
                     rates=analysis["rates"])
        probs = ancestral_states(tree, atlas.masks, atlas.n_states, fit)
        changes = expected_changes(tree, atlas.masks, atlas.n_states, fit)
        internal = [v for v in range(tree.n_nodes) if tree.tip[v] < 0]
        if len(atlas.sample.trees) > 1 and internal:
            # the diagnostics need no averaged states: another process computes them meanwhile
            early = Background(_diagnose_tree, (atlas, tree, changes, masks_by_node),
                               enabled=jobs > 1)
            # Each clade's probabilities are averaged over the sample trees that contain it
            # (evenly thinned to at most `ancestral_trees`: the passes over every tree dominate
            # the analysis, 27 of 29 s CPU on the 1,000-tree Semitic example).
            averaged, counts = reconstruct_over_sample(
                thinned(atlas.sample.trees, analysis["ancestral_trees"]),
                [masks_by_node[v] for v in internal], atlas.masks, atlas.n_states, fit,
                jobs=jobs)
            for row, v in enumerate(internal):
                if counts[row] > 0:
                    probs[v] = averaged[row]
                prob_trees[v] = counts[row]
        else:
            prob_trees[internal] = 1
    continuous = None
    if atlas.continuous.shape[1]:
        from .continuous import brownian_ancestors

        continuous = brownian_ancestors(tree, atlas.continuous)
    diagnostics = diagnose(atlas, tree, changes, probs, masks_by_node, fit is not None,
                           early.result() if early is not None else None)
    return Results(summary, ids, members, parsimony, stats, certain, fit, probs, prob_trees,
                   changes, continuous,
                   diagnostics)


def _diagnose_tree(shared: tuple) -> Diagnostics:
    return diagnose_tree(*shared)


def thinned(trees: list, limit: int) -> list:
    """At most ``limit`` trees, evenly spaced through the sample (all of them when 0).

    >>> thinned(list(range(10)), 4)
    [0, 2, 5, 7]
    """
    if not limit or len(trees) <= limit:
        return list(trees)
    step = len(trees) / limit
    return [trees[int(k * step)] for k in range(limit)]


def _any_variable(atlas: Atlas) -> bool:
    """Does any discrete character show two states among the tips that are coded?"""
    m = atlas.masks
    full = (np.uint32(1) << atlas.n_states.astype(np.uint32)) - np.uint32(1)
    coded = m != full[None, :]
    single = coded & ((m & (m - np.uint32(1))) == 0)
    for j in range(m.shape[1]):
        if len(set(m[single[:, j], j].tolist())) > 1:
            return True
    return False
