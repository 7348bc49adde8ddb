"""Expected numbers of changes per branch, conditional on the data.

For a branch of length ``t`` from a parent in state ``a`` to a child in state ``b``, the expected
number of changes of a chosen kind (the "labelled" transitions, with rates ``Q_L``: the
off-diagonal entries of ``Q`` for the kinds counted, zero elsewhere) is (Minin & Suchard 2008,
J. Math. Biol. 56:391-412)::

    E[N_L | a, b, t] = I_L(t)[a, b] / P(t)[a, b],   I_L(t) = int_0^t exp(Q u) Q_L exp(Q (t - u)) du

and with ``Q = U diag(lam) U^-1``::

    I_L(t) = U (U^-1 Q_L U  o  J(t)) U^-1,
    J(t)[i, j] = (exp(lam_i t) - exp(lam_j t)) / (lam_i - lam_j)   (t exp(lam_i t) if lam_i = lam_j)

where ``o`` is the element-wise product. Averaging over the end states with their joint posterior
probability (from the two passes of pruning, see :mod:`atlas.analysis.likelihood`)::

    E[N_L on branch v | data] = sum_ab B_v(a) I_L[a, b] D_v(b) / sum_ab B_v(a) P[a, b] D_v(b)

with ``B_v`` the probability of the data outside the subtree of ``v`` jointly with the parent's
state and ``D_v`` the likelihood of the data below ``v``; rate categories are weighted by their
posterior probability for the character.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from atlas.analysis.likelihood import Chain, GroupPasses, MkFit, conditional_passes
from atlas.analysis.tree import Tree


@dataclass(frozen=True)
class Changes:
    """Expected changes on the branch above each node (``(n_nodes, n_chars)``, zero at the root).

    ``gains`` counts 0->1 and ``losses`` 1->0 for binary characters; for characters of more than
    two states they are ``nan`` (not defined). ``total`` counts changes of any kind for every
    character.
    """

    gains: np.ndarray
    losses: np.ndarray
    total: np.ndarray


def labelled_integral(chain: Chain, labels: np.ndarray, t: np.ndarray) -> np.ndarray:
    """``I_L(t) = int_0^t exp(Qu) Q_L exp(Q(t-u)) du`` for every time in ``t`` (Minin & Suchard
    2008, J. Math. Biol.), shape ``t.shape + (k, k)``; ``labels`` is the 0/1 matrix of the
    transitions counted, so ``Q_L = Q * labels``.

    Hand example: for Mk with ``k = 2`` and rate ``r``, all changes counted,
    ``I(t)[0, 1] = r t exp(-r t) cosh(r t)`` (one or more changes, integrated over their time).
    """
    t = np.asarray(t, dtype=np.float64)
    lam = chain.lam
    q_l = chain.q * labels
    np.fill_diagonal(q_l, 0.0)
    inner = chain.u_inv @ q_l @ chain.u
    diff = lam[:, None] - lam[None, :]
    same = np.abs(diff) <= 1e-10 * max(1.0, float(np.abs(lam).max()))
    e = np.exp(t[..., None] * lam)  # (..., k)
    e_i = e[..., :, None]
    e_j = e[..., None, :]
    j = np.where(same, t[..., None, None] * e_i, (e_i - e_j) / np.where(same, 1.0, diff))
    return chain.u @ (inner * j) @ chain.u_inv


def _expected(gp: GroupPasses, labels: np.ndarray) -> np.ndarray:
    integral = labelled_integral(gp.chain, labels, gp.times)  # (n, G, k, k)
    num = (gp.beside * (integral @ gp.down)).sum(axis=2)  # (n, G, C)
    den = (gp.beside * (gp.p @ gp.down)).sum(axis=2)
    per_cat = num / np.where(den > 0, den, 1.0)
    out = np.einsum("gc,ngc->nc", np.nan_to_num(gp.cat_post), per_cat)
    out[-1] = 0.0  # the root (last in postorder) has no branch above it
    return out


def expected_changes(tree: Tree, masks: np.ndarray, n_states: np.ndarray, fit: MkFit) -> Changes:
    """Expected gains, losses and changes of any kind on every branch, given the data and
    ``fit`` (formula in the module docstring; Minin & Suchard 2008, J. Math. Biol.).

    Data conventions as for :func:`atlas.analysis.likelihood.ancestral_states`. Summed over the
    branches, the total approaches the parsimony length when changes are rare.

    Hand example: two tips in different states: the expected changes over both branches are
    at least 1 and tend to exactly 1 as the rate falls.
    """
    n_states = np.asarray(n_states)
    shape = (tree.n_nodes, n_states.size)
    gains = np.full(shape, np.nan)
    losses = np.full(shape, np.nan)
    total = np.zeros(shape)
    for gp in conditional_passes(tree, masks, n_states, fit):
        k = gp.k
        total[:, gp.cols] = _expected(gp, np.ones((k, k)))
        if k == 2:
            gains[:, gp.cols] = _expected(gp, np.array([[0.0, 1.0], [0.0, 0.0]]))
            losses[:, gp.cols] = _expected(gp, np.array([[0.0, 0.0], [1.0, 0.0]]))
    return Changes(gains, losses, total)
