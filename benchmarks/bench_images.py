"""Benchmark: publishing photographs, with and without the image cache.

An invented atlas (``make_synthetic.py``: 60 objects x 40 characters x 100 trees, 40 of the
objects with a 2400 x 1600 photograph) is built in a subprocess with an empty cache, then
rebuilt after one note is edited; in this process, the same run times ``publish_images`` on
the atlas with no cache (the reference: every photograph decoded, turned upright, resized to
four widths and encoded), the same in ``--jobs`` forked processes, and with the warm cache.
Target: a one-note rebuild of a photo-heavy atlas at most 15% of its full build, as for any
atlas.

Run: ``.venv/bin/python benchmarks/bench_images.py [--photos 40] [--jobs 2]``
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_scale import _build  # noqa: E402
from make_synthetic import make_synthetic  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--photos", type=int, default=40)
    parser.add_argument("--jobs", type=int, default=2)
    args = parser.parse_args()
    from atlas.build import load
    from atlas.cache import Cache
    from atlas.site.images import publish_images

    work = Path(tempfile.mkdtemp(prefix="atlas-images-"))
    try:
        source = make_synthetic(work / "src", 60, 40, 100, photos=args.photos)
        full, _ = _build(source, work / "site", args.jobs)
        note = source / "objects" / "vessel-0002.md"
        note.write_text(note.read_text("utf-8") + "\nOne more sentence.\n", encoding="utf-8")
        again, _ = _build(source, work / "site", args.jobs)
        atlas = load(source)
        t = time.perf_counter()
        plain = publish_images(atlas)
        cold = time.perf_counter() - t
        t = time.perf_counter()
        forked = publish_images(atlas, jobs=args.jobs)
        parallel = time.perf_counter() - t
        t = time.perf_counter()
        warm_result = publish_images(atlas, Cache.for_source(source))
        warm = time.perf_counter() - t
        assert warm_result == plain == forked, "the cache or the jobs changed what is published"
        files = len(plain[0])
        print(f"{args.photos} photographs ({files} image files): publishing without the cache "
              f"{cold:.2f} s in one process, {parallel:.2f} s in {args.jobs} "
              f"({cold / parallel:.1f}x); from the cache {warm:.3f} s ({cold / warm:.0f}x)")
        print(f"full build {full:.1f} s, one-note rebuild {again:.2f} s, "
              f"rebuild/full {again / full:.1%} (target at most 15%)")
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
