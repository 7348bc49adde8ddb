"""Benchmark: whole builds of synthetic atlases, and a rebuild after editing one object note.

For each size (objects x characters x trees) it writes an invented atlas with
``make_synthetic.py``, builds it in a subprocess with an empty cache (full build time and peak
memory of that process, from ``resource.getrusage(RUSAGE_CHILDREN)``), edits one object note,
builds again with the cache (rebuild time), and prints the ratio rebuild / full. Targets on a
2-core machine: 400 x 300 x 500 in at most 45 s; 1,000 x 500 x 2,000 in at most 3 minutes and
under 4 GB; a one-note rebuild at most 15% of a full build.

Run: ``.venv/bin/python benchmarks/bench_scale.py [--size 400x300x500] [--jobs 2] [--keep DIR]``
(``--size`` may be given several times; the default is both sizes above).
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from make_synthetic import make_synthetic  # noqa: E402

ATLAS = [sys.executable, "-m", "atlas"]
SIZES = ("400x300x500", "1000x500x2000")


def _build(source: Path, out: Path, jobs: int) -> tuple[float, float]:
    """Seconds and peak resident memory (MB) of one ``atlas build`` in a fresh process.

    Each build runs in its own short-lived parent (``python -c``) so that ``RUSAGE_CHILDREN``
    reports that build alone: the peak of its largest process (the main process or a pool
    worker; forked workers share most of their pages with it).
    """
    probe = (
        "import resource, subprocess, sys, time\n"
        "t = time.perf_counter()\n"
        "r = subprocess.run(sys.argv[1:]).returncode\n"
        "dt = time.perf_counter() - t\n"
        "peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024\n"
        "print(f'{dt} {peak} {r}')\n"
    )
    cmd = [sys.executable, "-c", probe, *ATLAS, "build", str(source), "--out", str(out), "-q",
           "--jobs", str(jobs)]
    result = subprocess.run(cmd, capture_output=True, text=True, check=False)
    seconds, peak, code = result.stdout.split()[-3:]
    if code != "0":
        sys.exit(f"build failed:\n{result.stderr[-3000:]}")
    return float(seconds), float(peak)


def run(size: str, jobs: int, keep: Path | None) -> None:
    n_obj, n_chars, n_trees = (int(x) for x in size.split("x"))
    work = Path(tempfile.mkdtemp(prefix="atlas-scale-")) if keep is None else keep / size
    if work.exists() and keep is not None:
        shutil.rmtree(work)
    try:
        source = work / "src"
        t = time.perf_counter()
        make_synthetic(source, n_obj, n_chars, n_trees, page_budget=100_000)
        gen = time.perf_counter() - t
        full, peak = _build(source, work / "site", jobs)
        note = source / "objects" / "vessel-0002.md"
        note.write_text(note.read_text("utf-8") + "\nOne more sentence, added for the "
                        "rebuild benchmark.\n", encoding="utf-8")
        again, peak2 = _build(source, work / "site", jobs)
        sizes = sorted(((p.stat().st_size, p.relative_to(work / "site").as_posix())
                        for p in (work / "site").rglob("*.html")), reverse=True)
        over = [path for size, path in sizes if size > 60_000]
        print(f"{size:>14}  jobs {jobs}  generate {gen:6.1f} s  full build {full:6.1f} s  "
              f"peak {max(peak, peak2):6.0f} MB  one-note rebuild {again:6.1f} s  "
              f"rebuild/full {again / full:5.1%}", flush=True)
        kinds = sorted({path.split("/")[0] if "/" in path else path for path in over})
        print(f"{'':>14}  pages {len(sizes)}, largest {sizes[0][1]} {sizes[0][0] / 1000:.1f} KB; "
              f"{len(over)} over 60 KB ({', '.join(kinds) or 'none'})", flush=True)
    finally:
        if keep is None:
            shutil.rmtree(work, ignore_errors=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--size", action="append", help="OBJECTSxCHARACTERSxTREES")
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--keep", type=Path, help="keep the atlases and sites in this folder")
    args = parser.parse_args()
    for size in args.size or SIZES:
        run(size, args.jobs, args.keep)


if __name__ == "__main__":
    main()
