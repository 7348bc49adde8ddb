"""Ancestral states averaged over a posterior sample of trees, in parallel when asked.

For clade ``i`` (a bitset over the shared ``taxa``),
``probs[i] = mean over trees T that contain it of P_T(state at the clade's node | data)``, with
the same fitted parameters in every tree (Pagel, Meade & Barker 2004, Syst. Biol. 53:673-684:
average reconstructions over a posterior sample at the clades it shares). ``P_T`` is the
marginal posterior of Yang, Kumar & Nei (1995, Genetics 141:1641-1650) from one up pass
(Felsenstein 1981, J. Mol. Evol. 17:368-376) and one down pass per tree.

Fast paths, each measured on the synthetic 400 objects x 300 characters x 500 trees atlas
(``benchmarks/make_synthetic.py``):

- one compiled call per tree and group of characters (:func:`atlas.analysis.kernels.sample_tree`:
  up pass, down pass to the internal nodes only, no branch messages kept beyond one block of
  characters, posteriors added straight into the sums): 158 ms -> 39 ms a tree, same run, same
  results to 3e-14;
- the sums are kept per state-count group and scattered once at the end;
- trees are cut into fixed chunks of :data:`CHUNK` in sample order, summed chunk by chunk and
  the chunk sums added in order, so the result is the same bit for bit for any ``jobs``; with
  ``jobs > 1`` the chunks run in a process pool.
"""

from __future__ import annotations

from collections.abc import Sequence
from concurrent.futures import ProcessPoolExecutor

import numpy as np

from ..errors import Problems
from .kernels import BLOCK, padded, sample_tree
from .likelihood import (
    MkFit,
    _categories,
    _check_params,
    _prepare,
    _schedule,
    _transitions,
    chain_for,
)
from .tree import Tree, clade_masks

CHUNK = 8  # trees per task; fixed, so the order of additions never depends on ``jobs``


def _add_tree(tree: Tree, groups, chains, cat: np.ndarray, nodes: np.ndarray, rows: np.ndarray,
              sums: list[np.ndarray]) -> None:
    """Add each group's marginal posteriors at ``nodes`` of ``tree`` to ``sums[group][rows]``
    (compiled: :func:`atlas.analysis.kernels.sample_tree`)."""
    problems = Problems()
    sched = _schedule(tree, problems)
    problems.raise_if_any()
    need = tree.tip < 0  # every ancestor of a clade's node is internal
    need[nodes] = True  # a clade of one tip sits on a tip
    for (tip_part, chain), total in zip(zip(groups, chains), sums):
        _, p = _transitions(sched, chain, cat)
        sample_tree(sched.internal, sched.child_ptr, sched.child_idx, np.ascontiguousarray(p),
                    sched.tips, sched.tip_taxon, tip_part, sched.root, chain.pi, need, nodes,
                    rows, total, BLOCK)


def _chunk_sums(trees: Sequence[Tree], index: dict[int, int], masks: np.ndarray,
                n_states: np.ndarray, fit: MkFit) -> tuple[list[np.ndarray], np.ndarray]:
    """Sums of the posteriors per group over ``trees``, and the count per clade."""
    n_clades = len(index)
    counts = np.zeros(n_clades, dtype=np.int64)
    if not trees:
        return [], counts
    _, groups = _prepare(trees[0], masks, n_states)  # checks the data once
    chains = [chain_for(fit.model, fit.rates, group.k) for group in groups]
    cat = _categories(fit.alpha)
    parts = [padded(group.tip_part, BLOCK) for group in groups]
    sums = [np.zeros((n_clades, part.shape[2], group.k)) for part, group in zip(parts, groups)]
    for tree in trees:
        hits = [(index[c], v) for v, c in enumerate(clade_masks(tree)) if c in index]
        if not hits:
            continue
        rows = np.array([h[0] for h in hits], dtype=np.int64)
        nodes = np.array([h[1] for h in hits], dtype=np.int64)
        _add_tree(tree, parts, chains, cat, nodes, rows, sums)  # a clade is once in a tree
        counts[rows] += 1
    return [total[:, : group.cols.size] for total, group in zip(sums, groups)], counts


def sample_states(trees: Sequence[Tree], summary_clades: Sequence[int], masks: np.ndarray,
                  n_states: np.ndarray, fit: MkFit, jobs: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """Marginal states at each summary clade averaged over ``trees`` (see the module docstring).

    Returns ``probs`` ``(n_clades, n_chars, max_k)`` (``nan`` where no tree has the clade) and
    ``counts`` ``(n_clades,)``, the number of trees averaged at each clade.
    """
    _check_params(fit.model, fit.rates, fit.alpha)
    n_states = np.asarray(n_states)
    index = {int(c): i for i, c in enumerate(summary_clades)}
    chunks = [list(trees[i:i + CHUNK]) for i in range(0, len(trees), CHUNK)]
    if jobs > 1 and len(chunks) > 1:
        with ProcessPoolExecutor(max_workers=jobs) as pool:
            parts = list(pool.map(_chunk_sums, chunks, *[[x] * len(chunks) for x in
                                                         (index, masks, n_states, fit)]))
    else:
        parts = [_chunk_sums(chunk, index, masks, n_states, fit) for chunk in chunks]
    _, groups = _prepare(trees[0], masks, n_states) if trees else (None, [])
    sums = np.zeros((len(summary_clades), n_states.size, int(n_states.max()) if n_states.size
                     else 2))
    counts = np.zeros(len(summary_clades), dtype=np.int64)
    group_sums = None
    for part_sums, part_counts in parts:
        counts += part_counts
        if not part_sums:
            continue
        if group_sums is None:
            group_sums = [s.copy() for s in part_sums]
        else:
            for total, s in zip(group_sums, part_sums):
                total += s
    for group, total in zip(groups, group_sums or []):
        sums[:, group.cols, : group.k] = total
    with np.errstate(invalid="ignore", divide="ignore"):
        probs = sums / counts[:, None, None]
    probs[counts == 0] = np.nan
    return probs, counts
