"""Ancestral values of continuous characters under Brownian motion.

Under Brownian motion a character changes along a branch of length ``t`` by a normal step of
variance ``sigma^2 t``, independently on every branch. Given the tip values, the joint
log-likelihood of the values ``x`` at all nodes is::

    log L = sum over branches (p -> c) of
            -(x_c - x_p)^2 / (2 sigma^2 t_c) - log(2 pi sigma^2 t_c) / 2

The maximum-likelihood ancestral values (Schluter, Price, Mooers & Ludwig 1997, Evolution
51:1699-1711) maximise it over the internal values; their standard errors come from its
curvature, ``var = sigma^2 diag(H^-1)`` with ``H`` the (sigma^2 = 1) precision matrix of the
unknown values, and the 95% interval is ``estimate +- 1.96 sqrt(var)``. Since the density is
Gaussian, the maximiser is the conditional mean of each node given the tips (with the root free),
and both come from two passes over the tree instead of a matrix inverse:

- up: each node's data below give it a normal "message" with mean ``m_v`` and precision ``w_v``;
  a child ``c`` passes up precision ``w_c / (1 + w_c t_c)`` (an observed tip: ``1 / t_c``), and a
  parent's mean is the precision-weighted mean of its children's (Felsenstein 1985, Am. Nat.
  125:1-15, independent contrasts);
- down: the same for the data outside each subtree; a node's estimate combines both.

The rate is the maximum-likelihood estimate from the tips, ``sigma^2 = Q / n`` with
``Q = (x - mu 1)^T C^-1 (x - mu 1)`` at the GLS root value ``mu`` (O'Meara, Ane, Sanderson &
Wainwright 2006, Evolution 60:922-933), which equals the sum over nodes of the weighted squared
deviations of the children's means: the squared standardised contrasts.

Missing tip values (``nan``) get a prediction with its interval, like internal nodes.
Zero-length branches get a millionth of the mean positive length.

Hand example, ``((A:1,B:1):1,C:2)`` with values 1, 3, 8: the root estimate is the GLS mean
``(2/3 * 2 + 1/2 * 8) / (2/3 + 1/2) = 32/7``; ``sigma^2 = (2 + 72/7) / 3 = 86/21``.
"""

from __future__ import annotations

import numpy as np

from atlas.analysis.tree import Tree
from atlas.errors import Problems

_ZERO_LENGTH = 1e-6


def _checked(tree: Tree, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Validated branch lengths and tip values per node ``(n_nodes, n_chars)`` (nan = none)."""
    problems = Problems()
    values = np.asarray(values, dtype=np.float64)
    if values.ndim != 2 or values.shape[0] != len(tree.taxa):
        problems.error(
            "matrix",
            None,
            f"values have shape {values.shape}, expected ({len(tree.taxa)}, n_chars)",
            "one row per taxon of the tree, in the tree's taxon order",
        )
        problems.raise_if_any()
    length = tree.length.astype(np.float64).copy()
    length[tree.root] = 0.0
    for v in np.flatnonzero(~np.isfinite(length) | (length < 0)):
        name = f"tip {tree.taxa[tree.tip[v]]!r}" if tree.tip[v] >= 0 else f"node {v}"
        problems.error(
            "trees",
            None,
            f"branch above {name} has length {tree.length[v]}",
            "Brownian motion needs non-negative branch lengths on every branch",
        )
    for i, j in zip(*np.nonzero(np.isinf(values))):
        problems.error("matrix", None, f"{tree.taxa[i]!r}, character {j}: infinite value")
    at_node = np.full((tree.n_nodes, values.shape[1]), np.nan)
    tips = tree.tip_ids()
    at_node[tips] = values[tree.tip[tips]]
    observed = np.sum(np.isfinite(at_node), axis=0)
    for j in np.flatnonzero(observed < 2):
        problems.error(
            "matrix",
            None,
            f"character {j} has {observed[j]} observed values on the tree",
            "an ancestral value needs at least two observed tips",
        )
    problems.raise_if_any()
    positive = length[length > 0]
    if positive.size:
        length[:-1] = np.maximum(length[:-1], _ZERO_LENGTH * positive.mean())
    return length, at_node


def _up(tree: Tree, length: np.ndarray, x: np.ndarray):
    """Means and precisions of the data below each node, messages to parents, and ``Q``."""
    observed = np.isfinite(x)
    mean = np.where(observed, x, 0.0)
    prec = np.where(observed, np.inf, 0.0)
    msg = np.zeros_like(mean)
    quad = np.zeros(x.shape[1])
    for v in range(tree.n_nodes):
        ch = tree.children(v)
        if ch.size:
            w = msg[ch]
            total = w.sum(axis=0)
            safe = np.where(total > 0, total, 1.0)
            mean[v] = (w * mean[ch]).sum(axis=0) / safe
            prec[v] = total
            quad += (w * (mean[ch] - mean[v]) ** 2).sum(axis=0)
        if v != tree.root:
            t = length[v]
            with np.errstate(invalid="ignore"):
                msg[v] = np.where(np.isinf(prec[v]), 1.0 / t, prec[v] / (1.0 + prec[v] * t))
    return mean, prec, msg, quad


def brownian_rate(tree: Tree, values: np.ndarray) -> np.ndarray:
    """Maximum-likelihood Brownian rate ``sigma^2`` of each character, ``(n_chars,)``.

    ``sigma^2 = (x - mu 1)^T C^-1 (x - mu 1) / n`` over the ``n`` observed tips, with ``C`` the
    shared path lengths and ``mu`` the GLS root value (O'Meara et al. 2006, Evolution), computed as
    the sum of squared standardised contrasts (Felsenstein 1985, Am. Nat.) divided by ``n``.

    >>> from atlas.analysis.tree import Tree
    >>> t = Tree([2, 2, 4, 4, -1], [1.0, 1.0, 1.0, 2.0, 0.0], [0, 1, -1, 2, -1], ("A", "B", "C"))
    >>> round(float(brownian_rate(t, np.array([[1.0], [3.0], [8.0]]))[0]) * 21, 9)  # 86/21
    86.0
    """
    values = np.asarray(values, dtype=np.float64)
    length, x = _checked(tree, values[:, None] if values.ndim == 1 else values)
    _, _, _, quad = _up(tree, length, x)
    return quad / np.sum(np.isfinite(x), axis=0)


def brownian_ancestors(tree: Tree, values: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Maximum-likelihood ancestral values under Brownian motion, with 95% intervals.

    ``values``: ``(n_taxa, n_chars)`` in ``tree.taxa`` order (or ``(n_taxa,)`` for one
    character), ``nan`` where missing. Returns ``(estimate, lower95, upper95)``, each
    ``(n_nodes, n_chars)`` (or ``(n_nodes,)``). Estimates maximise the joint likelihood over the
    unknown node values (Schluter, Price, Mooers & Ludwig 1997, Evolution), intervals are
    ``estimate +- 1.96 * sqrt(sigma^2 / w)`` where ``w`` is the total precision at the node
    (from below and above, see the module docstring) and ``sigma^2`` is :func:`brownian_rate`.
    Observed tips keep their value, with an interval of zero width.
    """
    values = np.asarray(values, dtype=np.float64)
    single = values.ndim == 1
    length, x = _checked(tree, values[:, None] if single else values)
    mean, prec, msg, quad = _up(tree, length, x)
    sigma2 = quad / np.sum(np.isfinite(x), axis=0)

    # down pass: precision and mean of the data outside each subtree, at the node itself
    above_prec = np.zeros_like(mean)
    above_mean = np.zeros_like(mean)
    for v in range(tree.n_nodes - 2, -1, -1):
        p = tree.parent[v]
        w = above_prec[p] + prec[p] - msg[v]
        with np.errstate(invalid="ignore", divide="ignore"):
            m = (above_prec[p] * above_mean[p] + prec[p] * mean[p] - msg[v] * mean[v]) / w
        ok = w > 1e-300
        above_mean[v] = np.where(ok, m, 0.0)
        above_prec[v] = np.where(ok, w / (1.0 + w * length[v]), 0.0)

    observed = np.isfinite(x)
    total = np.where(observed, 1.0, prec + above_prec)
    estimate = np.where(observed, np.nan_to_num(x), (prec * mean + above_prec * above_mean) / total)
    from scipy import stats

    half = stats.norm.ppf(0.975) * np.sqrt(np.where(observed, 0.0, sigma2 / total))
    out = (estimate, estimate - half, estimate + half)
    return tuple(a[:, 0] for a in out) if single else out  # type: ignore[return-value]
