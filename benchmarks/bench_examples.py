"""Build time of the published Semitic example (25 x 673, 1,000 trees) against its target.

Target: the whole build in under 60 s on 2 cores. Prints wall and CPU time of each stage and,
as a ratio, the build's CPU time against a bare read of the same tree file measured in the
same run (the reference: the least any build must do).

    .venv/bin/python benchmarks/bench_examples.py [examples/semitic-kitchen2009]
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

from atlas.analysis.results import analyse
from atlas.build import load, render
from atlas.sources.trees import read_tree_file

ROOT = Path(__file__).resolve().parent.parent


def timed(label: str, fn):
    wall, cpu = time.perf_counter(), time.process_time()
    value = fn()
    wall, cpu = time.perf_counter() - wall, time.process_time() - cpu
    print(f"{label:<28} {wall:7.2f} s wall  {cpu:7.2f} s CPU")
    return value, wall, cpu


def main() -> None:
    folder = Path(sys.argv[1]) if len(sys.argv) > 1 else ROOT / "examples" / "semitic-kitchen2009"
    _, _, ref_cpu = timed("reference: read the trees", lambda: read_tree_file(
        folder / "data" / "posterior.trees"))
    atlas, w1, c1 = timed("load and link", lambda: load(folder))
    results, w2, c2 = timed("analyse", lambda: analyse(atlas))
    (_, files), w3, c3 = timed("plan and render", lambda: render(atlas, results))
    from atlas.build import build

    with tempfile.TemporaryDirectory() as tmp:
        _, total, total_cpu = timed("whole build (atlas build)", lambda: build(
            folder, Path(tmp) / "out"))
    print(f"pages and files: {len(files)}")
    print(f"whole build: {total:.1f} s wall (target under 60 s): "
          f"{'met' if total < 60 else 'MISSED'}")
    print(f"ratio of build CPU to reading the trees: {total_cpu / ref_cpu:.1f}x")


if __name__ == "__main__":
    main()
