"""Tests of Brownian-motion ancestral values against hand computation, GLS and the joint
likelihood's curvature, all computed here with numpy on invented trees."""

from __future__ import annotations

import numpy as np
import pytest

from atlas.analysis.continuous import brownian_ancestors, brownian_rate
from atlas.analysis.tree import Tree
from atlas.errors import AtlasError

Z = 1.959963984540054  # standard normal 0.975 quantile (from memory)


def three_tips() -> Tree:
    """((A:1,B:1):1,C:2) (invented case)."""
    return Tree([2, 2, 4, 4, -1], [1.0, 1.0, 1.0, 2.0, 0.0], [0, 1, -1, 2, -1], ("A", "B", "C"))


def random_tree(n_tips: int, rng: np.random.Generator) -> Tree:
    """Join two random lineages at a time, with a polytomy at the root (invented case)."""
    parent = np.full(2 * n_tips - 2, -1)
    active = list(range(n_tips))
    new = n_tips
    while len(active) > 3:
        a, b = sorted(rng.choice(len(active), size=2, replace=False).tolist())
        parent[[active[a], active[b]]] = new
        del active[b], active[a]
        active.append(new)
        new += 1
    parent[active] = new  # three children at the root
    length = rng.exponential(1.0, size=new + 1)
    tip = np.where(np.arange(new + 1) < n_tips, np.arange(new + 1), -1)
    return Tree(parent[: new + 1], length, tip, tuple(f"t{i:02d}" for i in range(n_tips)))


def test_three_tips_by_hand():
    est, lo, hi = brownian_ancestors(three_tips(), np.array([1.0, 3.0, 8.0]))
    sigma2 = 86 / 21  # hand: contrasts (1-3)^2/2 + (2-8)^2/3.5 = 2 + 72/7, over n = 3
    assert brownian_rate(three_tips(), np.array([1.0, 3.0, 8.0]))[0] == pytest.approx(sigma2)
    assert est[4] == pytest.approx(32 / 7)  # hand: GLS root (2/3*2 + 1/2*8) / (7/6)
    assert est[2] == pytest.approx(20 / 7)  # hand: (2*2 + 1/3*8) / (7/3)
    assert hi[4] - est[4] == pytest.approx(Z * np.sqrt(sigma2 * 6 / 7))  # hand: var = s2/(7/6)
    assert est[2] - lo[2] == pytest.approx(Z * np.sqrt(sigma2 * 3 / 7))  # hand: var = s2/(7/3)
    np.testing.assert_allclose([est[0], lo[0], hi[0]], [1.0, 1.0, 1.0])  # observed tip


def _shared_lengths(tree: Tree) -> np.ndarray:
    """Path length shared from the root by every pair of nodes (the BM covariance, sigma2 = 1)."""
    n = tree.n_nodes
    depth = np.zeros(n)
    ancestors = [set() for _ in range(n)]
    for v in range(n - 2, -1, -1):
        p = tree.parent[v]
        depth[v] = depth[p] + tree.length[v]
        ancestors[v] = ancestors[p] | {p}
    cov = np.empty((n, n))
    for a in range(n):
        for b in range(n):
            common = (ancestors[a] | {a}) & (ancestors[b] | {b})
            cov[a, b] = max(depth[c] for c in common)
    return cov


def test_against_generalised_least_squares_and_joint_curvature():
    rng = np.random.default_rng(4)
    tree = random_tree(14, rng)
    values = rng.normal(size=(14, 3)) * [1.0, 5.0, 0.2]  # invented values
    values[3, 0] = values[7, 1] = values[8, 1] = np.nan  # missing cells
    est, lo, hi = brownian_ancestors(tree, values)
    rate = brownian_rate(tree, values)
    cov = _shared_lengths(tree)
    tips = tree.tip_ids()
    for j in range(3):
        x_tip = np.full(tree.n_nodes, np.nan)
        x_tip[tips] = values[tree.tip[tips], j]
        obs = np.flatnonzero(np.isfinite(x_tip))
        unknown = np.flatnonzero(~np.isfinite(x_tip))
        # generalised least squares with numpy: mu = 1'C^-1 x / 1'C^-1 1
        c_inv = np.linalg.inv(cov[np.ix_(obs, obs)])
        one = np.ones(obs.size)
        mu = one @ c_inv @ x_tip[obs] / (one @ c_inv @ one)
        resid = x_tip[obs] - mu
        sigma2 = resid @ c_inv @ resid / obs.size  # ML rate (O'Meara et al. 2006)
        assert rate[j] == pytest.approx(sigma2)
        assert est[-1, j] == pytest.approx(mu)  # GLS root value
        # conditional mean and variance of every unknown node (universal kriging with numpy)
        for v in unknown:
            c = cov[v, obs]
            mean = mu + c @ c_inv @ resid
            var = cov[v, v] - c @ c_inv @ c + (1 - one @ c_inv @ c) ** 2 / (one @ c_inv @ one)
            assert est[v, j] == pytest.approx(mean)
            assert hi[v, j] - est[v, j] == pytest.approx(Z * np.sqrt(sigma2 * var))
        # Schluter et al. 1997: maximise the joint likelihood over the unknown values; the
        # (sigma2 = 1) Hessian is the branch-weighted graph Laplacian restricted to them
        n = tree.n_nodes
        lap = np.zeros((n, n))
        for v in range(n - 1):
            p, w = tree.parent[v], 1 / tree.length[v]
            lap[v, v] += w
            lap[p, p] += w
            lap[v, p] -= w
            lap[p, v] -= w
        h = lap[np.ix_(unknown, unknown)]
        joint = np.linalg.solve(h, -lap[np.ix_(unknown, obs)] @ x_tip[obs])
        np.testing.assert_allclose(est[unknown, j], joint)
        np.testing.assert_allclose(
            (hi - lo)[unknown, j] / 2, Z * np.sqrt(sigma2 * np.diag(np.linalg.inv(h)))
        )
        np.testing.assert_allclose(est[obs, j], x_tip[obs])


def test_characters_are_independent():
    rng = np.random.default_rng(9)
    tree = random_tree(9, rng)
    values = rng.normal(size=(9, 2))  # invented values
    values[2, 1] = np.nan
    together = brownian_ancestors(tree, values)
    for j in range(2):
        alone = brownian_ancestors(tree, values[:, j])
        for a, b in zip(together, alone):
            np.testing.assert_allclose(a[:, j], b)


def test_bad_input_lists_every_problem():
    tree = three_tips()
    with pytest.raises(AtlasError) as err:
        brownian_ancestors(tree, np.array([[1.0, np.nan], [np.inf, np.nan], [2.0, 1.0]]))
    assert "infinite" in str(err.value) and "character 1 has 1 observed" in str(err.value)
    with pytest.raises(AtlasError, match="shape"):
        brownian_ancestors(tree, np.ones((2, 1)))
    no_length = Tree(
        [2, 2, 4, 4, -1], [1.0, np.nan, 1.0, -2.0, 0.0], [0, 1, -1, 2, -1], ("A", "B", "C")
    )
    with pytest.raises(AtlasError) as err:
        brownian_ancestors(no_length, np.ones(3))
    assert "tip 'B'" in str(err.value) and "tip 'C'" in str(err.value)
