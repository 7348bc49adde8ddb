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


def _write(target: Path, data: bytes) -> None:
    fd = os.open(target, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o666)
    try:
        view = memoryview(data)
        while view:
            view = view[os.write(fd, view):]
    finally:
        os.close(fd)


def _link_same(old: Path, data: bytes, target: Path) -> bool:
    """Hard-link ``target`` to the earlier build's ``old`` when that holds exactly ``data``.

    Neither file is ever written to afterwards (each build makes new files), so sharing one
    is safe, and linking is far cheaper than writing: a one-note rebuild of the 400-object
    synthetic atlas spent 2.3 s creating its 5,193 files, 0.13 s linking them (measured on the
    development machine). False (write it instead) when the file differs or is missing, or
    the file system cannot link."""
    try:
        if old.is_symlink() or old.stat().st_size != len(data) or old.read_bytes() != data:
            return False
        os.link(old, target)
    except OSError:
        return False
    return True


def write_site(files: dict[str, bytes], copies: dict[str, Path], out: Path, source: Path) -> None:
    """Write ``files`` (path -> bytes) and ``copies`` (path -> source file) as the new ``out``.

    Files the earlier build in ``out`` already holds byte for byte are hard-linked from it
    instead of written (:func:`_link_same`)."""
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
        made = {tmp}  # folders made so far: one mkdir per folder, not per file
        previous = out if (out / MARKER).is_file() else None
        for name in sorted(files):
            target = tmp / _safe_relative(name)
            if target.parent not in made:
                target.parent.mkdir(parents=True, exist_ok=True)
                made.add(target.parent)
            if previous is None or not _link_same(previous / name, files[name], target):
                _write(target, files[name])
        for name in sorted(copies):
            target = tmp / _safe_relative(name)
            if target.parent not in made:
                target.parent.mkdir(parents=True, exist_ok=True)
                made.add(target.parent)
            if previous is None or not _link_same(previous / name, copies[name].read_bytes(),
                                                  target):
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
