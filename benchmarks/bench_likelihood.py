"""Benchmark: likelihood reconstruction of 500 binary characters on a random 500-tip tree.

Times fit (Mk, four gamma categories, Mkv) + marginal ancestral states + expected changes on
seeded invented data, against a naive per-character Python pruning loop measured in the same run
on a subset of characters; also times the averaging of reconstructions over a sample of 200
trees of 30 tips and 40 characters. Target: reconstruction under 20 s on 2 cores.

Run: ``.venv/bin/python benchmarks/bench_likelihood.py``
"""

from __future__ import annotations

import time

import numpy as np

from atlas.analysis import likelihood as lk
from atlas.analysis.changes import expected_changes
from atlas.analysis.tree import Tree, clade_masks

N_TIPS = 500
N_CHARS = 500
NAIVE_CHARS = 10


def random_tree(n_tips: int, rng: np.random.Generator) -> Tree:
    """Join two random lineages at a time; exponential branch lengths (invented)."""
    parent = np.full(2 * n_tips - 1, -1)
    active = list(range(n_tips))
    for new in range(n_tips, 2 * n_tips - 1):
        a, b = sorted(rng.choice(len(active), size=2, replace=False).tolist())
        parent[[active[a], active[b]]] = new
        del active[b], active[a]
        active.append(new)
    length = rng.exponential(0.1, size=2 * n_tips - 1)
    tip = np.where(np.arange(2 * n_tips - 1) < n_tips, np.arange(2 * n_tips - 1), -1)
    return Tree(parent, length, tip, tuple(f"t{i:04d}" for i in range(n_tips)))


def simulate_binary(tree: Tree, rate: float, n_chars: int, rng: np.random.Generator) -> np.ndarray:
    """Variable binary characters under Mk with gamma(0.8) rate variation, as tip masks."""
    kept: list[np.ndarray] = []
    while sum(k.shape[1] for k in kept) < n_chars:
        scale = rng.gamma(0.8, 1 / 0.8, size=n_chars)
        states = np.zeros((tree.n_nodes, n_chars), dtype=np.int64)
        states[-1] = rng.integers(0, 2, size=n_chars)
        for v in range(tree.n_nodes - 2, -1, -1):
            p_change = 0.5 - 0.5 * np.exp(-2 * rate * scale * tree.length[v])
            flip = rng.random(n_chars) < p_change
            states[v] = states[tree.parent[v]] ^ flip
        tips = states[tree.tip_ids()][np.argsort(tree.tip[tree.tip_ids()])]
        kept.append(tips[:, tips.min(axis=0) != tips.max(axis=0)])
    return (1 << np.concatenate(kept, axis=1)[:, :n_chars]).astype(np.uint32)


def naive_logliks(tree: Tree, masks: np.ndarray, fit: lk.MkFit) -> np.ndarray:
    """The reference: one character, one rate category, one node at a time (no Mkv)."""
    chain = lk.mk_chain(fit.rates["rate"], 2)
    cats = lk.gamma_rates(fit.alpha)
    out = []
    for j in range(masks.shape[1]):
        like = 0.0
        for c in cats:
            p = lk.transition_matrices(chain, np.nan_to_num(tree.length) * c)
            partial: list[np.ndarray] = [np.zeros(2)] * tree.n_nodes
            log_scale = 0.0
            for v in range(tree.n_nodes):
                if tree.tip[v] >= 0:
                    m = int(masks[tree.tip[v], j])
                    partial[v] = np.array([m & 1, m >> 1 & 1], dtype=float)
                    continue
                x = np.ones(2)
                for ch in tree.children(v):
                    x = x * (p[ch] @ partial[ch])
                s = x.max()
                log_scale += np.log(s)
                partial[v] = x / s
            like += np.exp(np.log(partial[-1] @ chain.pi) + log_scale) / cats.size
        out.append(np.log(like))
    return np.array(out)


def main() -> None:
    rng = np.random.default_rng(2026)
    tree = random_tree(N_TIPS, rng)
    masks = simulate_binary(tree, 1.0, N_CHARS, rng)
    ns = np.full(N_CHARS, 2)

    t0 = time.perf_counter()
    fit = lk.fit_mk(tree, masks, ns, model="mk", rates="gamma4")
    t1 = time.perf_counter()
    states = lk.ancestral_states(tree, masks, ns, fit)
    t2 = time.perf_counter()
    changes = expected_changes(tree, masks, ns, fit)
    t3 = time.perf_counter()
    print(
        f"{N_CHARS} binary characters, {N_TIPS} tips: fit {t1 - t0:.2f} s, "
        f"ancestral states {t2 - t1:.2f} s, expected changes {t3 - t2:.2f} s, "
        f"total {t3 - t0:.2f} s (target < 20 s)"
    )
    print(
        f"  fit: rate {fit.rates['rate']:.4g}, alpha {fit.alpha:.3g}, logL {fit.loglik:.2f}; "
        f"sum of expected changes {changes.total.sum():.0f}; "
        f"states shape {states.shape}"
    )

    # one likelihood evaluation (no Mkv), vectorised against the naive loop
    repeats = 5
    t0 = time.perf_counter()
    for _ in range(repeats):
        fast = lk.character_logliks(
            tree, masks, ns, rates=fit.rates, alpha=fit.alpha, variable_only=False
        )
    fast_per_char = (time.perf_counter() - t0) / repeats / N_CHARS
    t0 = time.perf_counter()
    slow = naive_logliks(tree, masks[:, :NAIVE_CHARS], fit)
    slow_per_char = (time.perf_counter() - t0) / NAIVE_CHARS
    assert np.allclose(slow, fast[:NAIVE_CHARS]), "naive and vectorised likelihoods disagree"
    print(
        f"one evaluation: vectorised {fast_per_char * 1e6:.1f} us/character, naive loop "
        f"{slow_per_char * 1e6:.0f} us/character ({NAIVE_CHARS} characters): "
        f"ratio {slow_per_char / fast_per_char:.0f}x"
    )

    # averaging over a posterior sample: 200 trees x 30 tips x 40 characters
    sample = [random_tree(30, rng) for _ in range(200)]
    masks_s = simulate_binary(sample[0], 1.0, 40, rng)
    ns_s = np.full(40, 2)
    fit_s = lk.fit_mk(sample[0], masks_s, ns_s)
    clades = sorted(set(clade_masks(sample[0])))
    t0 = time.perf_counter()
    probs, counts = lk.reconstruct_over_sample(sample, clades, masks_s, ns_s, fit_s)
    t_sample = time.perf_counter() - t0
    assert not np.isnan(probs[counts > 0]).any()
    print(
        f"reconstruct over 200 trees x 30 tips x 40 characters: {t_sample:.2f} s "
        f"(target well under 10 s); {int((counts > 0).sum())} of {len(clades)} clades seen"
    )


if __name__ == "__main__":
    main()
