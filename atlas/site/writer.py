"""The write stage: the whole site into a temporary folder, then swapped in.

A failed build never leaves a half-written site: the new site is written beside the output
folder under a hidden name, and only when it is complete does it replace the old one (the old
one is renamed aside first, and put back if the swap fails). The writer refuses an output
folder that holds the atlas source, or a non-empty folder that is not an earlier build (it
carries a marker file), so a mistyped ``--out`` cannot delete a curator's work.
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path

from ..errors import AtlasError, Problem

MARKER = ".atlas-build"
MARKER_TEXT = "This folder was written by the lineage atlas builder and is replaced on rebuild.\n"


def check_output(out: Path, source: Path) -> None:
    """Raise when writing to ``out`` could harm the source or someone's files."""
    out = out.resolve()
    source = source.resolve()
    if out == source or source.is_relative_to(out):
        raise AtlasError(Problem(str(out), None, "the output folder contains the atlas source; "
                                 "choose another --out"))
    if Path.cwd().resolve().is_relative_to(out):
        raise AtlasError(Problem(str(out), None, "the output folder contains the current folder; "
                                 "choose another --out"))
    if out.exists():
        if not out.is_dir():
            raise AtlasError(Problem(str(out), None, "the output path is a file, not a folder"))
        if any(out.iterdir()) and not (out / MARKER).is_file():
            raise AtlasError(Problem(str(out), None, "the output folder is not empty and is not "
                                     "an earlier atlas build; refusing to replace it",
                                     "choose an empty or new folder"))


def _safe_relative(name: str) -> Path:
    path = Path(name)
    if path.is_absolute() or ".." in path.parts or not path.parts:
        raise ValueError(f"refusing to write outside the output folder: {name!r}")
    return path


def write_site(files: dict[str, bytes], copies: dict[str, Path], out: Path, source: Path) -> None:
    """Write ``files`` (path -> bytes) and ``copies`` (path -> source file) as the new ``out``."""
    check_output(out, source)
    out = out.resolve()
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = out.parent / f".{out.name}.atlas-new-{os.getpid()}"
    old = out.parent / f".{out.name}.atlas-old-{os.getpid()}"
    for stale in (tmp, old):
        if stale.exists():
            shutil.rmtree(stale)
    try:
        tmp.mkdir()
        (tmp / MARKER).write_text(MARKER_TEXT, encoding="utf-8")
        for name in sorted(files):
            target = tmp / _safe_relative(name)
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(files[name])
        for name in sorted(copies):
            target = tmp / _safe_relative(name)
            target.parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(copies[name], target)
        if out.exists():
            os.rename(out, old)
        try:
            os.rename(tmp, out)
        except OSError:
            if old.exists():
                os.rename(old, out)
            raise
        if old.exists():
            shutil.rmtree(old)
    finally:
        if tmp.exists():
            shutil.rmtree(tmp)
