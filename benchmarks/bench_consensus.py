"""Time reading a posterior sample and its majority-rule consensus: ours against DendroPy.

The sample is invented: 200 objects and 1,000 trees, each tree the average-linkage clustering
of the same seeded random points plus fresh noise, so the trees share most clades but not all
(like an MCMC sample). It is written as a NEXUS file with a TRANSLATE block, as BEAST writes.

    .venv/bin/python benchmarks/bench_consensus.py [--taxa 200] [--trees 1000] [--seed 1]
        [--repeat 1]

Prints both timings and the ratio (target: ours at least 25 times faster), after checking that
both give the same clade frequencies and the same consensus clades. With ``--repeat n`` both
are timed n times, alternately, each time on a fresh read of the file, and the range of the
ratios is printed too (the machine may be shared).
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import dendropy
import numpy as np
from scipy.cluster.hierarchy import linkage

from atlas.analysis.consensus import clade_frequencies, majority_rule
from atlas.analysis.tree import clade_masks
from atlas.sources.trees import mask_labels, read_tree_file


def newick_from_linkage(z: np.ndarray, n: int) -> str:
    """A Newick string (tips numbered 1..n) from a scipy linkage matrix."""
    height = np.concatenate([np.zeros(n), z[:, 2]])
    text: dict[int, str] = {}
    for i, (a, b, h, _) in enumerate(z):
        parts = []
        for c in (int(a), int(b)):
            body = text.pop(c) if c >= n else str(c + 1)
            parts.append(f"{body}:{h - height[c]:.6g}")
        text[n + i] = "(" + ",".join(parts) + ")"
    return text[2 * n - 2] + ";"


def write_sample(path: Path, n_taxa: int, n_trees: int, seed: int) -> None:
    rng = np.random.default_rng(seed)
    base = rng.normal(size=(n_taxa, 6))
    lines = ["#NEXUS", "[Invented sample: 200 invented objects, for timing only.]", "BEGIN TREES;"]
    lines.append("  TRANSLATE")
    lines.append(",\n".join(f"    {i + 1} obj_{i + 1:03d}" for i in range(n_taxa)) + ";")
    for k in range(n_trees):
        points = base + rng.normal(scale=0.2, size=base.shape)
        newick = newick_from_linkage(linkage(points, "average"), n_taxa)
        lines.append(f"tree STATE_{k * 1000} [&lnP=-{1000 + rng.random():.4f}] = [&R] {newick}")
    lines.append("END;")
    path.write_text("\n".join(lines) + "\n")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--taxa", type=int, default=200)
    parser.add_argument("--trees", type=int, default=1000)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--repeat", type=int, default=1)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "sample.trees"
        write_sample(path, args.taxa, args.trees, args.seed)
        size = path.stat().st_size / 1e6
        print(f"sample: {args.taxa} taxa x {args.trees} trees, {size:.1f} MB")

        runs = []
        for _ in range(max(1, args.repeat)):
            # CPU time of this process (time.process_time) as well as wall time: the machine
            # may be shared, and CPU time is what the two programs themselves spend
            wall, cpu = time.perf_counter(), time.process_time()
            sample = read_tree_file(path)
            summary = majority_rule(sample)
            ours = time.perf_counter() - wall, time.process_time() - cpu

            wall, cpu = time.perf_counter(), time.process_time()
            trees = dendropy.TreeList.get(path=str(path), schema="nexus", preserve_underscores=True)
            # strict majority (DendroPy's min_freq keeps freq >= min_freq)
            reference = trees.consensus(min_freq=0.5 + 1e-9)
            theirs = time.perf_counter() - wall, time.process_time() - cpu
            runs.append((ours, theirs))
            if args.repeat > 1:
                print(
                    f"  run {len(runs)}: ours {ours[1]:.2f} s CPU, DendroPy {theirs[1]:.2f} s CPU,"
                    f" {theirs[1] / ours[1]:.1f}x"
                )

    # the same clade frequencies (rooted, non-trivial) and the same consensus clades
    namespace = trees.taxon_namespace
    expected = {}
    for bitmask, freq in trees.split_distribution().split_frequencies.items():
        labels = frozenset(t.label for t in namespace.bitmask_taxa_list(bitmask))
        if 2 <= len(labels) < args.taxa:
            expected[labels] = freq
    got = clade_frequencies(sample)
    assert got.keys() == expected.keys(), "clade sets differ"
    worst = max(abs(got[k] - expected[k]) for k in got)
    assert worst < 1e-12, worst
    ours_clades = {
        mask_labels(m, sample.taxa)
        for v, m in enumerate(clade_masks(summary.tree))
        if summary.tree.tip[v] < 0
    }
    their_clades = {
        frozenset(leaf.taxon.label for leaf in node.leaf_iter())
        for node in reference.internal_nodes()
    }
    assert ours_clades == their_clades, "consensus trees differ"
    print(f"clades: {len(got)} distinct, {len(ours_clades) - 1} in the consensus; identical")
    print(f"ours     (read + majority_rule): {ours[1]:7.2f} s CPU {ours[0]:7.2f} s wall")
    print(f"DendroPy (read + consensus):     {theirs[1]:7.2f} s CPU {theirs[0]:7.2f} s wall")
    print(
        f"ratio: {theirs[1] / ours[1]:.1f}x faster in CPU time, {theirs[0] / ours[0]:.1f}x in"
        " wall time (target >= 25x)"
    )
    if len(runs) > 1:
        ratios = [t[1] / o[1] for o, t in runs]
        print(f"ratio over {len(runs)} runs (CPU time): {min(ratios):.1f}x to {max(ratios):.1f}x")


if __name__ == "__main__":
    main()
