"""The on-disk build cache: results keyed by a hash of exactly the inputs they depend on.

The cache lives in a hidden folder ``.atlas-cache/`` inside the atlas source folder (with a
``.gitignore`` that ignores it whole). It holds pickles only, each named by the SHA-256 of its
inputs and the package version, so an entry can never be stale: change an input and the key
changes. It is safe to delete at any time; an entry that cannot be read (truncated, corrupt,
written by another Python) is ignored and rebuilt. It is never needed: ``atlas build
--no-cache`` and ``cache = false`` in atlas.toml switch it off, and a source folder that cannot
be written to simply gets no cache. Input files are never written.

Kinds of entry (``kind`` below): ``trees`` (a tree file as read, keyed by its bytes and the
reader's options), ``analysis`` (the whole analyse stage, keyed by :func:`analysis_key`) and
``pages-<profile>`` (rendered HTML by page key, see ``atlas.site.render``).
"""

from __future__ import annotations

import functools
import hashlib
import os
import pickle
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from . import __version__

FOLDER = ".atlas-cache"
FORMAT = 1  # bump when the layout of what is pickled changes


@dataclass(frozen=True)
class Cache:
    """Where cache entries go, or nowhere (``folder=None``)."""

    folder: Path | None = None

    @staticmethod
    def for_source(root: Path, enabled: bool = True) -> Cache:
        return Cache(Path(root) / FOLDER if enabled else None)

    @property
    def enabled(self) -> bool:
        return self.folder is not None

    def _file(self, kind: str, key: str) -> Path | None:
        return self.folder / kind / f"{key}.pickle" if self.folder is not None else None

    def get(self, kind: str, key: str) -> Any | None:
        """The value stored under ``kind``/``key``, or None (missing, corrupt, no cache)."""
        path = self._file(kind, key)
        if path is None or not path.is_file():
            return None
        try:
            with open(path, "rb") as fh:
                stored_key, value = pickle.load(fh)
        except Exception:  # noqa: BLE001 - any unreadable entry is simply rebuilt
            return None
        return value if stored_key == key else None

    def put(self, kind: str, key: str, value: Any, keep: int | None = 4) -> None:
        """Store ``value``, keeping only the ``keep`` most recently written entries of ``kind``
        (so the cache does not grow with every edit of a source; ``None``: keep them all, for
        kinds of many entries that :meth:`prune` trims instead).

        Written to a temporary name and renamed, so a reader never sees half an entry.
        Failing to write (read-only folder, full disk, an unpicklable value) only means no
        cache.
        """
        path = self._file(kind, key)
        if path is None:
            return
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            ignore = self.folder / ".gitignore"
            if not ignore.exists():
                ignore.write_text("# written by the atlas builder; safe to delete\n*\n",
                                  encoding="utf-8")
            tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
            with open(tmp, "wb") as fh:
                pickle.dump((key, value), fh, protocol=pickle.HIGHEST_PROTOCOL)
            os.replace(tmp, path)
            if keep is None:
                return
            entries = sorted(path.parent.glob("*.pickle"), key=lambda f: -f.stat().st_mtime_ns)
            for old in entries[keep:]:
                if old != path:
                    old.unlink(missing_ok=True)
        except (OSError, pickle.PicklingError, TypeError, AttributeError):
            # no cache for this entry (read-only folder, full disk, a value pickle refuses)
            if path.parent.is_dir():
                for tmp in path.parent.glob(f".{path.name}.*.tmp"):
                    tmp.unlink(missing_ok=True)
            return

    def prune(self, kind: str, keys: set[str]) -> None:
        """Remove every entry of ``kind`` whose key is not in ``keys``."""
        folder = self.folder / kind if self.folder is not None else None
        if folder is None or not folder.is_dir():
            return
        for path in folder.glob("*.pickle"):
            if path.stem not in keys:
                path.unlink(missing_ok=True)

    # --- tables: big content-addressed dicts (page key -> HTML), updated a little per edit ---

    def get_table(self, kind: str, key: str) -> tuple[dict, dict]:
        """A table stored by :meth:`put_table`, and the part of it added since it was last
        written whole. Its entries are content-addressed (a key names one value for ever), so
        the base and the additions never disagree."""
        base = self.get(kind, key)
        added = self.get(kind + "-added", key)
        base = base if isinstance(base, dict) else {}
        added = added if isinstance(added, dict) and base else {}
        return {**base, **added}, added

    def put_table(self, kind: str, key: str, table: dict, added: dict, *, share: float = 0.1,
                  keep: int = 2) -> None:
        """Store ``table``. While ``added`` (its entries made since the table was last written
        whole, earlier additions included) stays within ``share`` of it, only ``added`` is
        written: an edit of one note rewrites one page's worth, not 90 MB of pages."""
        if not self.enabled:
            return
        base_file = self._file(kind, key)
        if added and base_file is not None and base_file.is_file() \
                and len(added) <= share * len(table):
            self.put(kind + "-added", key, added, keep=keep)
            return
        self.put(kind, key, table, keep=keep)
        gone = self._file(kind + "-added", key)
        if gone is not None:
            gone.unlink(missing_ok=True)


@functools.cache
def code_fingerprint() -> str:
    """SHA-256 of the package's own Python files, so a changed builder never reads old entries
    (the version number alone would not notice a developer's edit)."""
    h = hashlib.sha256(f"atlas {__version__} cache {FORMAT}".encode())
    package = Path(__file__).resolve().parent
    for path in sorted(package.rglob("*.py")):
        h.update(path.relative_to(package).as_posix().encode() + b"\0" + path.read_bytes())
    return h.hexdigest()


_SCALARS = {str, type(None), int, float, bool}


class Hasher:
    """SHA-256 over a sequence of typed parts (bytes, text, numbers, arrays, nested tuples),
    starting from :func:`code_fingerprint`."""

    def __init__(self, *parts: Any) -> None:
        self._h = hashlib.sha256(code_fingerprint().encode())
        for part in parts:
            self.add(part)

    def add(self, part: Any) -> Hasher:
        h = self._h
        if isinstance(part, bytes):
            h.update(b"b%d:" % len(part))
            h.update(part)
        elif isinstance(part, str):
            data = part.encode("utf-8")
            h.update(b"s%d:" % len(data))
            h.update(data)
        elif hasattr(part, "tobytes") and hasattr(part, "dtype"):  # numpy arrays
            h.update(f"a{part.dtype.str}{part.shape}:".encode())
            h.update(part.tobytes())
        elif isinstance(part, dict):
            h.update(b"d%d:" % len(part))
            for k in sorted(part, key=repr):
                self.add(repr(k)).add(part[k])
        elif isinstance(part, list | tuple):
            if set(map(type, part)) <= _SCALARS:  # e.g. node labels: one repr, not one each
                data = repr(tuple(part)).encode("utf-8")
                h.update(b"t%d:" % len(data))
                h.update(data)
                return self
            h.update(b"l%d:" % len(part))
            for item in part:
                self.add(item)
        else:  # numbers, None, booleans, frozen dataclasses of plain values
            self.add(repr(part))
        return self

    def hexdigest(self) -> str:
        return self._h.hexdigest()


def file_key(path: Path, **options: Any) -> str:
    """The key of a file as read with ``options``: its bytes, not its name or date."""
    return Hasher(path.read_bytes(), options).hexdigest()


def analysis_key(atlas) -> str:
    """The key of the analyse stage: every value of the linked atlas that ``analyse`` reads.

    The sampled and given trees (topology, lengths, labels, taxa), the matrix masks, state
    counts, ordering and continuous values, the characters (ids, symbols, columns), the
    ``[analysis]`` settings, the mapped coordinates per taxon (the profile's withholding and
    generalising already applied), which taxa have a matrix row, and the coherence rules.
    """
    from .analysis.diagnostics import coordinates

    h = Hasher(dict(atlas.config.analysis), atlas.taxa)
    for sample in (atlas.sample, atlas.summary_input):
        if sample is None:
            h.add("no sample")
            continue
        h.add((sample.taxa, sample.read, sample.burnin, sample.thin, len(sample.trees)))
        trees = sample.trees
        if trees:  # every tree's arrays end to end, with the sizes: a few parts, not 2,000
            h.add(np.array([t.n_nodes for t in trees], dtype=np.int64))
            for name in ("parent", "length", "tip"):
                h.add(np.concatenate([np.asarray(getattr(t, name)) for t in trees]))
            h.add([label for t in trees for label in t.label])
    h.add((atlas.masks, atlas.n_states, atlas.ordered, atlas.continuous))
    h.add([(c.id, c.symbols, c.column, c.kind, c.ordered) for c in atlas.characters])
    h.add(coordinates(atlas))
    h.add(sorted((o.taxon, o.has_row, o.withheld) for o in atlas.objects.values()))
    h.add(repr(atlas.rules))
    return h.hexdigest()
