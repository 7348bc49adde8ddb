"""Tests of the discrete-character likelihood models, ancestral states and expected changes.

Every expected value comes from outside the module: SciPy's matrix exponential and numerical
integration, closed forms of the two-state chain, brute-force enumeration of every assignment of
states to the nodes of small invented trees, Fitch parsimony, and data simulated on known trees.
"""

from __future__ import annotations

import itertools
from pathlib import Path

import dendropy
import numpy as np
import pytest
from scipy import integrate, linalg, stats

from atlas.analysis import likelihood as lk
from atlas.analysis.changes import expected_changes, labelled_integral
from atlas.analysis.tree import Tree, clade_masks
from atlas.errors import AtlasError

# ---------------------------------------------------------------------------------------------
# Helpers: trees, reference matrices, brute force


def from_newick(text: str) -> Tree:
    """Our postorder arrays from a Newick string, parsed by DendroPy (the reference reader)."""
    return from_dendropy(dendropy.Tree.get(data=text, schema="newick", preserve_underscores=True))


def from_dendropy(dt: dendropy.Tree) -> Tree:
    nodes = list(dt.postorder_node_iter())
    ids = {id(nd): i for i, nd in enumerate(nodes)}
    taxa = tuple(sorted(nd.taxon.label for nd in nodes if nd.is_leaf()))
    parent = [ids[id(nd.parent_node)] if nd.parent_node is not None else -1 for nd in nodes]
    length = [np.nan if nd.edge_length is None else nd.edge_length for nd in nodes]
    tip = [taxa.index(nd.taxon.label) if nd.is_leaf() else -1 for nd in nodes]
    return Tree(parent, length, tip, taxa)


def random_tree(n_tips: int, rng: np.random.Generator) -> Tree:
    """A random rooted binary tree: join two random lineages at a time (invented case)."""
    parent = np.full(2 * n_tips - 1, -1)
    active = list(range(n_tips))
    for new in range(n_tips, 2 * n_tips - 1):
        a, b = rng.choice(len(active), size=2, replace=False)
        parent[[active[a], active[b]]] = new
        active = [x for i, x in enumerate(active) if i not in (a, b)] + [new]
    length = rng.exponential(1.0, size=2 * n_tips - 1)
    tip = np.where(np.arange(2 * n_tips - 1) < n_tips, np.arange(2 * n_tips - 1), -1)
    return Tree(parent, length, tip, tuple(f"t{i:04d}" for i in range(n_tips)))


def q_mk(rate: float, k: int) -> np.ndarray:
    """Mk rate matrix written out from Lewis (2001): off-diagonal ``rate``."""
    return rate * (np.ones((k, k)) - k * np.eye(k))


def q_gain_loss(gain: float, loss: float) -> np.ndarray:
    return np.array([[-gain, gain], [loss, -loss]])


def gamma_categories_by_quadrature(alpha: float) -> np.ndarray:
    """Yang (1994) category means by integrating x f(x) between scipy.stats.gamma quantiles."""
    dist = stats.gamma(a=alpha, scale=1.0 / alpha)
    bounds = dist.ppf(np.linspace(0, 1, 5))
    return np.array(
        [
            4 * integrate.quad(lambda x: x * dist.pdf(x), lo, hi)[0]
            for lo, hi in itertools.pairwise(bounds)
        ]
    )


def model_q(model: str, rates: dict, k: int) -> tuple[np.ndarray, np.ndarray]:
    if model == "mk-gain-loss" and k == 2:
        g, ls = rates["gain"], rates["loss"]
        return q_gain_loss(g, ls), np.array([ls, g]) / (g + ls)
    return q_mk(rates["rate"], k), np.full(k, 1.0 / k)


def edge_matrices(tree: Tree, q: np.ndarray, cats: np.ndarray) -> np.ndarray:
    """``expm(Q c t_v)`` for every category ``c`` and branch ``v`` (SciPy), ``(G, n, k, k)``."""
    times = cats[:, None, None, None] * np.nan_to_num(tree.length)[None, :, None, None]
    return linalg.expm(q * times)  # one stacked call


def brute_force(
    tree: Tree,
    column: np.ndarray,
    k: int,
    q: np.ndarray,
    pi: np.ndarray,
    cats: np.ndarray,
    ps: np.ndarray | None = None,
):
    """Enumerate every state of every node (tips limited to their state sets).

    Returns the state assignments ``(N, n_nodes)`` and their joint probabilities ``(G, N)``.
    """
    if ps is None:
        ps = edge_matrices(tree, q, cats)
    choices = []
    for v in range(tree.n_nodes):
        if tree.tip[v] >= 0:
            choices.append([s for s in range(k) if int(column[tree.tip[v]]) >> s & 1])
        else:
            choices.append(list(range(k)))
    states = np.array(list(itertools.product(*choices)))
    joint = np.empty((cats.size, states.shape[0]))
    for g in range(cats.size):
        prob = pi[states[:, -1]].copy()
        for v in range(tree.n_nodes - 1):
            prob *= ps[g, v][states[:, tree.parent[v]], states[:, v]]
        joint[g] = prob
    return states, joint


def simulate(
    tree: Tree, q: np.ndarray, pi: np.ndarray, n_chars: int, rng: np.random.Generator
) -> tuple[np.ndarray, np.ndarray]:
    """States at every node, from the root down (invented, seeded); tips as masks."""
    k = pi.size
    states = np.zeros((tree.n_nodes, n_chars), dtype=np.int64)
    states[-1] = rng.choice(k, size=n_chars, p=pi)
    for v in range(tree.n_nodes - 2, -1, -1):
        p = linalg.expm(q * tree.length[v])[states[tree.parent[v]]]
        u = rng.random(n_chars)[:, None]
        states[v] = np.minimum((u > np.cumsum(p, axis=1)).sum(axis=1), k - 1)
    masks = np.zeros((len(tree.taxa), n_chars), dtype=np.uint32)
    tips = tree.tip_ids()
    masks[tree.tip[tips]] = (1 << states[tips]).astype(np.uint32)
    return states, masks


def fitch_length(tree: Tree, masks: np.ndarray) -> int:
    """Fitch (1971, Syst. Zool.) parsimony length of unordered characters, summed."""
    sets = np.zeros((tree.n_nodes, masks.shape[1]), dtype=np.uint32)
    tips = tree.tip_ids()
    sets[tips] = masks[tree.tip[tips]]
    length = 0
    for v in range(tree.n_nodes):
        ch = tree.children(v)
        if ch.size == 0:
            continue
        inter = np.bitwise_and.reduce(sets[ch], axis=0)
        union = np.bitwise_or.reduce(sets[ch], axis=0)
        length += int(np.sum(inter == 0))
        sets[v] = np.where(inter != 0, inter, union)
    return length


SEVEN = "(((A:0.2,B:0.5):0.3,(C:0.4,D:0.1):0.6):0.2,((E:0.3,F:0.7):0.1,G:0.9):0.4);"  # invented


# ---------------------------------------------------------------------------------------------
# Transition probabilities and rate categories


@pytest.mark.parametrize(
    "chain,q",
    [
        (lk.mk_chain(0.7, 3), q_mk(0.7, 3)),
        (lk.mk_chain(0.2, 5), q_mk(0.2, 5)),
        (lk.gain_loss_chain(0.3, 1.1), q_gain_loss(0.3, 1.1)),
    ],
)
def test_transition_matrices_equal_scipy_expm(chain, q):
    times = np.array([0.0, 0.05, 1.3, 7.0])
    got = lk.transition_matrices(chain, times)
    for t, p in zip(times, got):
        np.testing.assert_allclose(p, linalg.expm(q * t), atol=1e-12)  # SciPy reference


def test_two_state_closed_forms():
    r, t = 0.4, 1.7
    p = lk.transition_matrices(lk.mk_chain(r, 2), np.array(t))
    assert p[0, 0] == pytest.approx(0.5 + 0.5 * np.exp(-2 * r * t))  # Lewis 2001, k = 2
    g, loss = 0.3, 0.9
    p = lk.transition_matrices(lk.gain_loss_chain(g, loss), np.array(t))
    # two-state chain: P01 = g/(g+l) (1 - exp(-(g+l) t)) (from memory)
    assert p[0, 1] == pytest.approx(g / (g + loss) * (1 - np.exp(-(g + loss) * t)))
    assert p[1, 0] == pytest.approx(loss / (g + loss) * (1 - np.exp(-(g + loss) * t)))
    # multistate Mk: P_other = 1/k - 1/k exp(-k r t) (Lewis 2001)
    p = lk.transition_matrices(lk.mk_chain(r, 4), np.array(t))
    assert p[1, 3] == pytest.approx(0.25 - 0.25 * np.exp(-4 * r * t))


@pytest.mark.parametrize("alpha", [0.1, 0.5, 1.0, 4.0, 50.0])
def test_gamma_rates_against_quantile_integration(alpha):
    rates = lk.gamma_rates(alpha)
    np.testing.assert_allclose(rates, gamma_categories_by_quadrature(alpha), rtol=1e-6, atol=1e-9)
    assert rates.mean() == pytest.approx(1.0)  # Yang 1994: categories average to 1


def test_gamma_rates_published_values():
    # alpha = 0.5, mean rates (Yang 1994, J. Mol. Evol., from memory)
    np.testing.assert_allclose(lk.gamma_rates(0.5), [0.0334, 0.2519, 0.8203, 2.8944], atol=1e-4)


# ---------------------------------------------------------------------------------------------
# Likelihood and marginal states against brute force


CASES = [
    # (newick, state counts, masks rows in sorted taxon order, model, rates, alpha)  invented
    (
        SEVEN,
        [2, 2, 2],
        [[1, 3, 1], [1, 2, 2], [2, 2, 3], [2, 1, 1], [1, 1, 2], [3, 2, 2], [2, 1, 1]],
        "mk",
        {"rate": 0.8},
        None,
    ),
    (
        SEVEN,
        [2, 2],
        [[1, 3], [1, 2], [2, 2], [2, 1], [1, 1], [2, 2], [2, 1]],
        "mk-gain-loss",
        {"gain": 0.4, "loss": 1.3},
        0.7,
    ),
    (
        "((A:0.5,B:0.2):0.4,C:0.8,(D:0.3,E:1.0):0.2);",
        [3, 2, 4],
        [[1, 1, 8], [2, 1, 15], [4, 2, 2], [3, 2, 1], [7, 3, 4]],
        "mk-gain-loss",
        {"gain": 0.6, "loss": 0.2, "rate": 0.5},
        1.9,
    ),
    (
        "((A:0.5,B:0.2,C:0.6):0.4,(D:0.3,(E:1.0,F:0.1):0.3,G:0.2):0.7,H:1.1);",
        [2, 2],
        [[1, 2], [1, 2], [2, 2], [2, 1], [1, 1], [2, 3], [2, 1], [1, 2]],
        "mk",
        {"rate": 0.5},
        0.4,
    ),
]


def _brute_case(case):
    newick, ns, rows, model, rates, alpha = case
    tree = from_newick(newick)
    masks = np.array(rows, dtype=np.uint32)
    cats = np.ones(1) if alpha is None else gamma_categories_by_quadrature(alpha)
    return tree, masks, np.array(ns), model, rates, alpha, cats


@pytest.mark.parametrize("case", CASES)
def test_logliks_equal_brute_force_enumeration(case):
    tree, masks, ns, model, rates, alpha, cats = _brute_case(case)
    got = lk.character_logliks(
        tree, masks, ns, model=model, rates=rates, alpha=alpha, variable_only=False
    )
    got_v = lk.character_logliks(tree, masks, ns, model=model, rates=rates, alpha=alpha)
    for j, k in enumerate(ns):
        q, pi = model_q(model, rates, k)
        _, joint = brute_force(tree, masks[:, j], k, q, pi, cats)
        like = joint.sum(axis=1).mean()  # brute force over all internal states
        assert got[j] == pytest.approx(np.log(like), abs=1e-9)
        constant = sum(
            brute_force(tree, np.full(masks.shape[0], 1 << s), k, q, pi, cats)[1].sum(1).mean()
            for s in range(k)
        )
        assert got_v[j] == pytest.approx(np.log(like / (1 - constant)), abs=1e-9)  # Lewis 2001


@pytest.mark.parametrize("case", CASES)
def test_marginal_states_equal_brute_force_enumeration(case):
    tree, masks, ns, model, rates, alpha, cats = _brute_case(case)
    fit = lk.MkFit(model, rates, alpha, np.nan, len(ns))
    got = lk.ancestral_states(tree, masks, ns, fit)
    assert got.shape == (tree.n_nodes, len(ns), ns.max())
    for j, k in enumerate(ns):
        q, pi = model_q(model, rates, k)
        states, joint = brute_force(tree, masks[:, j], k, q, pi, cats)
        weight = joint.mean(axis=0) / joint.mean(axis=0).sum()
        for v in range(tree.n_nodes):
            expected = np.bincount(states[:, v], weights=weight, minlength=k)  # brute force
            np.testing.assert_allclose(got[v, j, :k], expected, atol=1e-10)
        assert np.all(got[:, j, k:] == 0)


@pytest.mark.parametrize(
    "model,rates,alpha,k",
    [
        ("mk", {"rate": 0.9}, None, 2),
        ("mk", {"rate": 0.4}, 0.6, 3),
        ("mk-gain-loss", {"gain": 0.3, "loss": 1.2}, 2.0, 2),
    ],
)
def test_mkv_probabilities_of_variable_patterns_sum_to_one(model, rates, alpha, k):
    tree = from_newick("((A:0.3,B:0.9):0.2,(C:0.5,D:0.4):0.6);")  # invented
    patterns = [p for p in itertools.product(range(k), repeat=4) if len(set(p)) > 1]
    masks = (1 << np.array(patterns).T).astype(np.uint32)
    ll = lk.character_logliks(
        tree, masks, np.full(len(patterns), k), model=model, rates=rates, alpha=alpha
    )
    assert np.exp(ll).sum() == pytest.approx(1.0, abs=1e-12)  # Mkv: sums to 1 by construction


@pytest.mark.parametrize(
    "model,rates",
    [
        ("mk", {"rate": 0.7}),
        ("mk-gain-loss", {"gain": 0.2, "loss": 0.9}),
    ],
)
def test_likelihood_does_not_depend_on_the_root_position(model, rates):
    # Felsenstein 1981 (pulley principle): a reversible chain started from its stationary
    # distribution gives the same likelihood wherever the root sits on the unrooted tree
    one = from_newick("((A:1,B:2):1.2,(C:1,(D:0.5,E:1):0.3):0.8);")  # invented case
    two = from_newick("((A:1,B:2):0.1,(C:1,(D:0.5,E:1):0.3):1.9);")
    three = from_newick("(A:1,B:2,(C:1,(D:0.5,E:1):0.3):2.0);")
    masks = np.array([[1, 2, 3], [2, 2, 1], [1, 1, 2], [2, 3, 2], [3, 1, 1]], dtype=np.uint32)
    ns = np.full(3, 2)
    got = [
        lk.character_logliks(t, masks, ns, model=model, rates=rates, alpha=0.5)
        for t in (one, two, three)
    ]
    np.testing.assert_allclose(got[0], got[1], rtol=1e-12)
    np.testing.assert_allclose(got[0], got[2], rtol=1e-12)


# ---------------------------------------------------------------------------------------------
# Fitting


def test_fit_is_a_maximum_of_the_brute_force_likelihood():
    tree = from_newick(SEVEN)
    _, masks = simulate(tree, q_mk(0.8, 2), np.full(2, 0.5), 40, np.random.default_rng(2))
    masks = masks[:, [len(set(c)) > 1 for c in masks.T]]  # variable characters (invented data)
    ns = np.full(masks.shape[1], 2)
    for model in ("mk", "mk-gain-loss"):
        fit = lk.fit_mk(tree, masks, ns, model=model, rates="gamma4")
        assert fit.model == model and fit.n_chars == masks.shape[1]

        def brute_loglik(rates, alpha, model=model):
            cats = gamma_categories_by_quadrature(alpha)
            q, pi = model_q(model, rates, 2)
            ps = edge_matrices(tree, q, cats)
            const = sum(
                brute_force(tree, np.full(7, 1 << s), 2, q, pi, cats, ps)[1].sum(1).mean()
                for s in range(2)
            )
            like = [brute_force(tree, col, 2, q, pi, cats, ps)[1].sum(1).mean() for col in masks.T]
            return float(np.sum(np.log(np.array(like) / (1 - const))))

        best = brute_loglik(fit.rates, fit.alpha)
        assert fit.loglik == pytest.approx(best, abs=1e-8)  # brute force at the fitted point
        for name in fit.rates:
            for f in (0.9, 1.1):
                moved = dict(fit.rates, **{name: fit.rates[name] * f})
                assert brute_loglik(moved, fit.alpha) < best + 1e-7
        if 0.03 < fit.alpha < 150:
            for f in (0.9, 1.1):
                assert brute_loglik(fit.rates, fit.alpha * f) < best + 1e-7


def test_gain_loss_fit_with_multistate_characters_has_three_rates():
    tree, masks, ns, *_ = _brute_case(CASES[2])  # invented: two 2-state, one 3- and 4-state
    masks = np.concatenate([masks, masks[::-1]], axis=1)
    ns = np.concatenate([ns, ns])
    fit = lk.fit_mk(tree, masks, ns, model="mk-gain-loss", rates="equal")
    assert set(fit.rates) == {"gain", "loss", "rate"} and fit.alpha is None
    again = lk.character_logliks(tree, masks, ns, model=fit.model, rates=fit.rates)
    assert again.sum() == pytest.approx(fit.loglik)  # the same likelihood, recomputed
    assert lk.fit_mk(tree, masks, ns, model="mk-gain-loss", rates="equal") == fit  # deterministic


def test_fit_recovers_simulated_rate_and_ancestral_states():
    rng = np.random.default_rng(7)
    tree = random_tree(40, rng)
    true_rate = 0.15
    states, masks = simulate(tree, q_mk(true_rate, 2), np.full(2, 0.5), 600, rng)
    ns = np.full(600, 2)
    fit = lk.fit_mk(tree, masks, ns, rates="equal", variable_only=False)
    assert fit.rates["rate"] == pytest.approx(true_rate, rel=0.15)  # simulated truth
    probs = lk.ancestral_states(tree, masks, ns, fit)
    internal = tree.tip < 0
    best = probs[internal].argmax(axis=-1)
    assert np.mean(best == states[internal]) > 0.85  # simulated truth at internal nodes
    # calibration: the mean probability given to the true state matches the hit rate
    p_true = np.take_along_axis(probs[internal], states[internal][..., None], -1)[..., 0]
    assert abs(p_true.mean() - np.mean(best == states[internal])) < 0.05


def test_gain_loss_fit_recovers_asymmetric_rates():
    rng = np.random.default_rng(11)
    tree = random_tree(60, rng)
    g, loss = 0.05, 0.25
    _, masks = simulate(tree, q_gain_loss(g, loss), np.array([loss, g]) / (g + loss), 1500, rng)
    ns = np.full(1500, 2)
    fit = lk.fit_mk(tree, masks, ns, model="mk-gain-loss", rates="equal", variable_only=False)
    assert fit.rates["gain"] == pytest.approx(g, rel=0.25)  # simulated truth
    assert fit.rates["loss"] == pytest.approx(loss, rel=0.25)  # simulated truth


def test_large_tree_does_not_underflow():
    rng = np.random.default_rng(3)
    tree = random_tree(1000, rng)
    masks = (1 << rng.integers(0, 3, size=(1000, 5))).astype(np.uint32)  # invented data
    ns = np.full(5, 3)
    ll = lk.character_logliks(tree, masks, ns, rates={"rate": 0.3}, alpha=0.5)
    assert np.all(np.isfinite(ll)) and np.all(ll < -100)  # far below double-precision range
    # the same data twice is twice the log-likelihood of one copy (invented case)
    double = np.concatenate([masks, masks], axis=1)
    ll2 = lk.character_logliks(tree, double, np.full(10, 3), rates={"rate": 0.3}, alpha=0.5)
    np.testing.assert_allclose(ll2, np.concatenate([ll, ll]))
    probs = lk.ancestral_states(tree, masks, ns, lk.MkFit("mk", {"rate": 0.3}, 0.5, 0, 5))
    np.testing.assert_allclose(probs.sum(axis=-1), 1.0)


# ---------------------------------------------------------------------------------------------
# Expected changes


def _conditional_changes(
    q: np.ndarray, labels: np.ndarray, t: float, adaptive: bool = False
) -> np.ndarray:
    """E[N_L | a, b] = int_0^t [expm(Qu) Q_L expm(Q(t-u))]_ab du / P_ab(t) (Minin & Suchard 2008)
    by numerical integration of SciPy's expm: adaptive (quad_vec), or 20-point Gauss-Legendre
    (exact to rounding for these smooth sums of exponentials, and much faster).

    ``labels`` is one 0/1 matrix of counted transitions, or a stack of them.
    """
    q_l = q * np.asarray(labels, dtype=float)
    q_l[..., np.arange(q.shape[0]), np.arange(q.shape[0])] = 0

    def integrand(u):
        return linalg.expm(q * u) @ q_l @ linalg.expm(q * (t - u))

    if adaptive:
        integral = integrate.quad_vec(integrand, 0, t, epsabs=1e-13)[0]
    else:
        nodes, weights = np.polynomial.legendre.leggauss(20)
        u = t * (nodes + 1) / 2  # symmetric: t - u[i] = u[-1 - i]
        e = linalg.expm(q * u[:, None, None])  # one stacked call
        terms = e[:, None] @ q_l[None] @ e[::-1, None]  # (nodes, [labels,] k, k)
        integral = np.tensordot(weights, terms, axes=1)[0 if q_l.ndim == 2 else slice(None)]
        integral = integral * t / 2
    return integral / linalg.expm(q * t)


def test_labelled_integral_matches_numerical_integration():
    for chain, q in (
        (lk.mk_chain(0.6, 3), q_mk(0.6, 3)),
        (lk.gain_loss_chain(0.2, 0.9), q_gain_loss(0.2, 0.9)),
    ):
        k = q.shape[0]
        labels = np.zeros((k, k))
        labels[0, 1] = labels[1, 0] = 1
        got = labelled_integral(chain, labels, np.array(1.4)) / lk.transition_matrices(
            chain, np.array(1.4)
        )
        np.testing.assert_allclose(
            got, _conditional_changes(q, labels, 1.4, adaptive=True), rtol=1e-8
        )


def test_two_state_conditional_changes_closed_form():
    # Mk, k = 2: E[N | a != b] = rt coth(rt), E[N | a = b] = rt tanh(rt)
    # (derived by hand from P_same = (1 + exp(-2rt))/2 and the integral above)
    r, t = 0.7, 0.9
    chain = lk.mk_chain(r, 2)
    e = labelled_integral(chain, np.ones((2, 2)), np.array(t)) / lk.transition_matrices(
        chain, np.array(t)
    )
    assert e[0, 1] == pytest.approx(r * t / np.tanh(r * t))
    assert e[1, 1] == pytest.approx(r * t * np.tanh(r * t))


def test_expected_changes_equal_brute_force_enumeration():
    tree = from_newick("((A:0.5,B:0.2):0.4,C:0.8,(D:0.3,E:1.0):0.2);")  # invented
    masks = np.array([[1, 1], [2, 4], [2, 2], [3, 1], [2, 7]], dtype=np.uint32)
    ns = np.array([2, 3])
    rates, alpha = {"gain": 0.6, "loss": 0.3, "rate": 0.5}, 0.8
    fit = lk.MkFit("mk-gain-loss", rates, alpha, np.nan, 2)
    got = expected_changes(tree, masks, ns, fit)
    cats = gamma_categories_by_quadrature(alpha)
    for j, k in enumerate(ns):
        q, pi = model_q("mk-gain-loss", rates, k)
        states, joint = brute_force(tree, masks[:, j], k, q, pi, cats)
        kinds = {"total": np.ones((k, k))}
        if k == 2:
            kinds["gains"] = np.array([[0, 1], [0, 0]])
            kinds["losses"] = np.array([[0, 0], [1, 0]])
        labels = np.array(list(kinds.values()))
        for v in range(tree.n_nodes - 1):
            value = 0.0
            for g, c in enumerate(cats):
                e = _conditional_changes(q * c, labels, tree.length[v])  # (kinds, k, k)
                value = value + (joint[g] * e[:, states[:, tree.parent[v]], states[:, v]]).sum(1)
            value /= joint.sum()  # brute force over states, SciPy integration per branch
            for name, expected in zip(kinds, value):
                assert getattr(got, name)[v, j] == pytest.approx(expected, abs=1e-8)
        for name in kinds:
            assert getattr(got, name)[-1, j] == 0
    assert np.all(np.isnan(got.gains[:, 1])) and np.all(np.isnan(got.losses[:, 1]))
    np.testing.assert_allclose(got.gains[:, 0] + got.losses[:, 0], got.total[:, 0])


def test_expected_changes_close_to_parsimony_at_low_rate():
    rng = np.random.default_rng(5)
    tree = random_tree(50, rng)
    _, masks = simulate(tree, q_mk(0.01, 2), np.full(2, 0.5), 400, rng)
    ns = np.full(400, 2)
    fit = lk.fit_mk(tree, masks, ns, rates="equal", variable_only=False)
    total = expected_changes(tree, masks, ns, fit).total.sum()
    steps = fitch_length(tree, masks)  # Fitch 1971 parsimony length
    assert steps > 50
    assert total == pytest.approx(steps, rel=0.05)


# ---------------------------------------------------------------------------------------------
# The published dataset (Kitchen et al. 2009, Proc. R. Soc. B; see realdata SOURCE.md)

REAL = Path("/work/shared/realdata/semitic-kitchen2009")


def _real_matrix(taxa: tuple[str, ...]) -> np.ndarray:
    text = (REAL / "data.nex").read_text()
    block = text[text.index("MATRIX") + len("MATRIX") : text.index(";", text.index("MATRIX"))]
    rows = dict(line.split() for line in block.strip().splitlines())
    states = np.array([[int(c) for c in rows[name]] for name in taxa])
    return (1 << states).astype(np.uint32)


@pytest.mark.skipif(not REAL.exists(), reason="published dataset not available")
def test_published_dataset_fit_changes_and_sample():
    tree = from_dendropy(
        dendropy.Tree.get(path=REAL / "summary.trees", schema="nexus", preserve_underscores=True)
    )
    masks = _real_matrix(tree.taxa)
    ns = np.full(masks.shape[1], 2)
    assert masks.shape == (25, 673)  # SOURCE.md: 25 taxa x 673 binary characters
    fit = lk.fit_mk(tree, masks, ns, model="mk-gain-loss", rates="gamma4")
    for name in ("gain", "loss"):
        for f in (0.8, 1.25):
            moved = dict(fit.rates, **{name: fit.rates[name] * f})
            ll = lk.character_logliks(
                tree, masks, ns, model=fit.model, rates=moved, alpha=fit.alpha
            )
            assert ll.sum() < fit.loglik  # the fit is a maximum
    changes = expected_changes(tree, masks, ns, fit)
    steps = fitch_length(tree, masks)  # Fitch 1971 on the published matrix and MCC tree
    assert steps <= changes.total.sum() < 2 * steps
    np.testing.assert_allclose(changes.gains + changes.losses, changes.total)
    sample = []
    for dt in dendropy.Tree.yield_from_files(
        [REAL / "posterior.trees"], schema="nexus", preserve_underscores=True
    ):
        sample.append(from_dendropy(dt))  # the first 20 trees of the sample
        if len(sample) == 20:
            break
    clades = clade_masks(tree)
    probs, counts = lk.reconstruct_over_sample(sample, clades, masks, ns, fit)
    assert counts[-1] == 20 and counts.max() == 20  # the root is in every tree
    seen = counts > 0
    np.testing.assert_allclose(probs[seen].sum(axis=-1), 1.0)
    assert np.isnan(probs[~seen]).all()


# ---------------------------------------------------------------------------------------------
# Over a sample of trees


def test_reconstruct_over_sample_averages_trees_that_contain_the_clade():
    a = from_newick("(((A:1,B:1):1,C:2):1,(D:1,E:2):2);")  # invented sample
    b = from_newick("(((A:1,C:1):1,B:2):1,(D:1,E:2):1);")
    c = from_newick("((A:2,B:1):1,(C:1,(D:1,E:2):1):2);")
    masks = np.array([[1, 1], [1, 2], [2, 4], [2, 2], [3, 4]], dtype=np.uint32)
    ns = np.array([2, 3])
    fit = lk.MkFit("mk", {"rate": 0.4}, 0.9, np.nan, 2)
    ab, de, abc, ac = 0b00011, 0b11000, 0b00111, 0b00101
    absent = 0b01001
    probs, counts = lk.reconstruct_over_sample([a, b, c], [ab, de, abc, ac, absent], masks, ns, fit)
    np.testing.assert_array_equal(counts, [2, 3, 2, 1, 0])
    per_tree = [(t, clade_masks(t), lk.ancestral_states(t, masks, ns, fit)) for t in (a, b, c)]
    for i, clade in enumerate([ab, de, abc, ac]):
        found = [s[m.index(clade)] for _, m, s in per_tree if clade in m]
        np.testing.assert_allclose(probs[i], np.mean(found, axis=0))  # per-tree reconstructions
    assert np.all(np.isnan(probs[4]))


def test_sample_passes_survive_a_wide_polytomy():
    """The compiled down pass multiplies the messages of a node's other children; at a star of
    1,200 long branches (each message about 1/2) their product underflows unless it is
    rescaled on the way. Checked against the NumPy down pass of ``ancestral_states``, which
    rescales every partial product (invented case: random states)."""
    rng = np.random.default_rng(12)
    n_star = 1200
    parts = ",".join(f"s{i:04d}:3" for i in range(n_star))
    tree = from_newick(f"((a:0.5,b:0.5):1,{parts});")
    masks = (1 << rng.integers(0, 2, size=(len(tree.taxa), 6))).astype(np.uint32)
    ns = np.full(6, 2)
    fit = lk.MkFit("mk", {"rate": 0.5}, None, np.nan, 1)
    clades = [m for v, m in enumerate(clade_masks(tree)) if tree.tip[v] < 0]
    probs, counts = lk.reconstruct_over_sample([tree], clades, masks, ns, fit)
    states = lk.ancestral_states(tree, masks, ns, fit)
    internal = [v for v in range(tree.n_nodes) if tree.tip[v] < 0]
    np.testing.assert_array_equal(counts, 1)
    np.testing.assert_allclose(probs, states[internal], atol=1e-12)
    assert np.allclose(probs.sum(axis=2), 1.0)


# ---------------------------------------------------------------------------------------------
# Bad input


def test_bad_input_lists_every_problem():
    tree = from_newick("((A:1,B:1):1,C:2);")
    masks = np.array([[1, 0], [2, 8], [1, 1]], dtype=np.uint32)
    with pytest.raises(AtlasError) as err:
        lk.fit_mk(tree, masks, np.array([2, 3]))
    text = str(err.value)
    assert "'A', character 1" in text and "'B', character 1" in text
    with pytest.raises(AtlasError, match="shape"):
        lk.fit_mk(tree, masks[:2], np.array([2, 3]))
    with pytest.raises(AtlasError, match="did you mean mk-gain-loss"):
        lk.fit_mk(tree, np.ones((3, 2), dtype=np.uint32), np.array([2, 2]), model="mk-gainloss")
    with pytest.raises(AtlasError, match="need rate 'rate'"):
        lk.character_logliks(
            tree,
            np.array([[1], [2], [4]], dtype=np.uint32),
            np.array([3]),
            model="mk-gain-loss",
            rates={"gain": 1.0, "loss": 1.0},
        )
    no_lengths = from_newick("((A,B):1,C:2);")
    with pytest.raises(AtlasError) as err:
        lk.fit_mk(no_lengths, np.ones((3, 2), dtype=np.uint32), np.array([2, 1]))
    assert "tip 'A'" in str(err.value) and "tip 'B'" in str(err.value)
    assert "character 1 has 1 states" in str(err.value)
