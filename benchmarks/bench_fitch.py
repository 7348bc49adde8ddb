"""Time the Fitch tree length of many characters on one tree: ours against DendroPy.

Invented data: a seeded random 200-tip binary tree and 1,000 random characters with 2 to 4
states (10% of cells unknown), unordered.

    .venv/bin/python benchmarks/bench_fitch.py [--tips 200] [--chars 1000] [--seed 1]

Prints both timings and the ratio (target: ours at least 50 times faster), after checking
that both give the same length and the same steps per character.
"""

from __future__ import annotations

import argparse
import time

import dendropy
import numpy as np
from dendropy.calculate import treescore

from atlas.analysis.parsimony import fitch
from atlas.sources.trees import parse_newick

SYMBOLS = "0123"


def random_newick(rng: np.random.Generator, n: int) -> str:
    nodes = [f"obj_{i:03d}" for i in range(n)]
    while len(nodes) > 1:
        i, j = sorted(rng.choice(len(nodes), 2, replace=False).tolist(), reverse=True)
        a, b = nodes.pop(i), nodes.pop(j)
        nodes.append(f"({a}:{rng.random():.4f},{b}:{rng.random():.4f})")
    return nodes[0] + ";"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--tips", type=int, default=200)
    parser.add_argument("--chars", type=int, default=1000)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    rng = np.random.default_rng(args.seed)
    newick = random_newick(rng, args.tips)
    n_states = rng.integers(2, 5, size=args.chars)
    codes = np.array([rng.integers(0, k, size=args.tips) for k in n_states]).T
    unknown = rng.random(codes.shape) < 0.1

    tree = parse_newick(newick)
    order = {name: i for i, name in enumerate(tree.taxa)}
    names = [f"obj_{i:03d}" for i in range(args.tips)]
    masks = np.zeros((args.tips, args.chars), dtype=np.uint32)
    for i, name in enumerate(names):
        row = np.where(unknown[i], (1 << n_states) - 1, 1 << codes[i])
        masks[order[name]] = row

    # DendroPy: the same tree and matrix ('?' for unknown), in one taxon namespace
    namespace = dendropy.TaxonNamespace()
    rows = {
        name: "".join("?" if unknown[i, j] else SYMBOLS[codes[i, j]] for j in range(args.chars))
        for i, name in enumerate(names)
    }
    chars = dendropy.StandardCharacterMatrix.from_dict(
        rows,
        taxon_namespace=namespace,
        default_state_alphabet=dendropy.new_standard_state_alphabet(SYMBOLS),
    )
    reference = dendropy.Tree.get(
        data=newick, schema="newick", taxon_namespace=namespace, preserve_underscores=True
    )

    # best of 5 runs each (CPU time of this process: the machine may be shared)
    ours_time = theirs_time = float("inf")
    for _ in range(5):
        start = time.process_time()
        ours = fitch(tree, masks, n_states)
        ours_time = min(ours_time, time.process_time() - start)
        start = time.process_time()
        per_char: list[int] = []
        theirs = treescore.parsimony_score(reference, chars, score_by_character_list=per_char)
        theirs_time = min(theirs_time, time.process_time() - start)

    assert ours.length == theirs, (ours.length, theirs)
    assert ours.steps.tolist() == per_char
    print(f"{args.tips} tips x {args.chars} characters: length {ours.length} (both)")
    print(f"ours     (fitch, with MPR sets): {ours_time:8.3f} s CPU, best of 5")
    print(f"DendroPy (parsimony_score):      {theirs_time:8.3f} s CPU, best of 5")
    print(f"ratio: {theirs_time / ours_time:.1f}x faster (target >= 50x)")


if __name__ == "__main__":
    main()
