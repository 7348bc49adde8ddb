"""What a second interface language costs: plan + render of a synthetic atlas in one language
and in two, against the analysis of the same atlas, measured in the same run.

The atlas is invented (``benchmarks/make_synthetic.py``: 1,000 synthetic objects by default).
The analysis runs once; only the plan and render stages run per language, so two languages
should cost about twice the one-language rendering and nothing more.

Usage: ``.venv/bin/python benchmarks/bench_languages.py [--objects 1000] [--characters 60]
[--trees 100]``
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from make_synthetic import make_synthetic  # noqa: E402

from atlas.analysis.results import analyse  # noqa: E402
from atlas.build import load, render  # noqa: E402


def timed(fn):
    started = time.perf_counter()
    value = fn()
    return value, time.perf_counter() - started


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--objects", type=int, default=1000)
    parser.add_argument("--characters", type=int, default=60)
    parser.add_argument("--trees", type=int, default=100)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        source = Path(tmp) / "synthetic"
        make_synthetic(source, args.objects, args.characters, args.trees)
        atlas = load(source)
        results, t_analyse = timed(lambda: analyse(atlas))
        one = replace(atlas, config=replace(atlas.config, languages=("en",)))
        two = replace(atlas, config=replace(atlas.config, languages=("en", "fr")))
        (_, files_one), t_one = timed(lambda: render(one, results))
        (plan_two, files_two), t_two = timed(lambda: render(two, results))
    size = lambda files: sum(len(b) for b in files.values()) / 1e6  # noqa: E731
    fr = {p: b for p, b in files_two.items() if p.startswith("fr/")}
    print(f"{args.objects} objects, {args.characters} characters, {args.trees} trees")
    print(f"analyse (once):            {t_analyse:7.1f} s")
    print(f"plan + render, en:         {t_one:7.1f} s  {len(files_one):6d} files "
          f"{size(files_one):7.1f} MB")
    print(f"plan + render, en and fr:  {t_two:7.1f} s  {len(files_two):6d} files "
          f"{size(files_two):7.1f} MB ({len(fr)} files, {size(fr):.1f} MB under fr/)")
    print(f"two languages / one:       {t_two / t_one:7.2f}x  (about 2x expected; the analysis "
          f"is not repeated: {t_analyse / t_one:.2f}x one rendering)")


if __name__ == "__main__":
    main()
