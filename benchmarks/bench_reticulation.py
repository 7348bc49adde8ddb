"""Time the lineage diagnostics against plain references measured in the same run.

Invented data: seeded random points in six dimensions stand for objects; their Euclidean
distances (which are far from tree-like) feed the delta scores, and a random matrix of
three-state characters feeds the distances.

    .venv/bin/python benchmarks/bench_reticulation.py [--taxa 200] [--ref-taxa 100] [--seed 1]

Prints, each with its ratio:
- delta scores on ``--ref-taxa`` objects: ours against a plain vectorised reference that
  enumerates every quartet with ``itertools.combinations`` in chunks (same results checked);
- delta scores on ``--taxa`` objects (target: 200 objects, 64.7 million quartets, well under a
  minute), exact and sampled, against the reference's rate extrapolated to that many quartets;
- matrix distances on complete data against SciPy's Hamming ``pdist`` (same results checked;
  ours also handles unknown and polymorphic cells, which SciPy's does not).
"""

from __future__ import annotations

import argparse
import itertools
import math
import time

import numpy as np
from scipy.spatial.distance import pdist, squareform

from atlas.analysis.reticulation import delta_scores, matrix_distances


def reference_delta(d: np.ndarray, chunk: int = 1_000_000) -> np.ndarray:
    """Per-taxon mean delta over every quartet, enumerated in chunks (the plain way)."""
    n = d.shape[0]
    total = np.zeros(n)
    combos = itertools.combinations(range(n), 4)
    while True:
        block = np.fromiter(itertools.islice(combos, chunk), dtype=np.dtype((np.int64, 4)))
        if block.size == 0:
            break
        i, j, k, m = block.T
        sums = np.sort(np.stack([d[i, j] + d[k, m], d[i, k] + d[j, m], d[i, m] + d[j, k]]), 0)
        span = sums[2] - sums[0]
        delta = np.divide(sums[2] - sums[1], span, out=np.zeros_like(span), where=span > 0)
        for col in (i, j, k, m):
            total += np.bincount(col, delta, minlength=n)
    return total / math.comb(n - 1, 3)


def points_distances(n: int, rng: np.random.Generator) -> np.ndarray:
    pts = rng.normal(size=(n, 6))
    return np.sqrt(((pts[:, None] - pts[None]) ** 2).sum(-1))


def timed(f, *args, **kwargs):
    start = time.perf_counter()
    out = f(*args, **kwargs)
    return out, time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--taxa", type=int, default=200)
    parser.add_argument("--ref-taxa", type=int, default=100)
    parser.add_argument("--chars", type=int, default=500)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    rng = np.random.default_rng(args.seed)

    d_ref = points_distances(args.ref_taxa, rng)
    expected, t_ref = timed(reference_delta, d_ref)
    ours, t_ours = timed(delta_scores, d_ref)
    np.testing.assert_allclose(ours.delta, expected, rtol=1e-9, atol=1e-12)
    q_ref = math.comb(args.ref_taxa, 4)
    print(
        f"delta, {args.ref_taxa} objects ({q_ref:,} quartets): reference {t_ref:.2f} s, "
        f"ours {t_ours:.2f} s, ratio {t_ref / t_ours:.1f}x"
    )

    d = points_distances(args.taxa, rng)
    exact, t_exact = timed(delta_scores, d)
    sampled, t_sampled = timed(delta_scores, d, exact_limit=0)
    t_ref_big = t_ref / q_ref * exact.n_quartets
    print(
        f"delta, {args.taxa} objects ({exact.n_quartets:,} quartets): ours exact "
        f"{t_exact:.2f} s ({exact.n_quartets / t_exact / 1e6:.1f} M quartets/s), "
        f"reference extrapolated {t_ref_big:.1f} s, ratio {t_ref_big / t_exact:.1f}x"
    )
    gap = float(np.abs(sampled.delta - exact.delta).max())
    print(
        f"delta, {args.taxa} objects, {sampled.n_quartets:,} sampled quartets: "
        f"{t_sampled:.2f} s, ratio to exact {t_exact / t_sampled:.1f}x, "
        f"largest per-object difference {gap:.4f}"
    )

    codes = rng.integers(0, 3, size=(args.taxa, args.chars))
    masks = (1 << codes).astype(np.uint32)
    want, t_scipy = timed(lambda: squareform(pdist(codes, metric="hamming")))
    got, t_mine = timed(matrix_distances, masks, np.full(args.chars, 3))
    np.testing.assert_allclose(got, want, atol=1e-15)
    print(
        f"distances, {args.taxa} x {args.chars}: SciPy Hamming {t_scipy:.3f} s, "
        f"ours {t_mine:.3f} s, ratio {t_scipy / t_mine:.2f}x"
    )


if __name__ == "__main__":
    main()
