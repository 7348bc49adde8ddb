"""Reading text files safely: encodings, line endings, binary junk.

Every reader goes through :func:`read_text`, so that a file is judged the same way whoever
reads it: UTF-8 (with or without a byte-order mark) is read as it is; text that is not UTF-8
but decodes as Latin-1 without control characters is read with a warning; anything with NUL
bytes or other control characters is refused as binary. Line endings ``\\r\\n`` and ``\\r`` are
normalised to ``\\n``, so line numbers in messages match what an editor shows.
"""

from __future__ import annotations

import re
from pathlib import Path

from ..errors import Problems

_CONTROL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]")


def read_text(path: Path, problems: Problems, shown: str | None = None) -> str | None:
    """The file's text with ``\\n`` line endings, or None (with a problem recorded)."""
    shown = shown or str(path)
    if not path.exists():
        problems.error(shown, None, "missing: no such file")
        return None
    if not path.is_file():
        problems.error(shown, None, "is a folder, not a file")
        return None
    raw = path.read_bytes()
    if b"\x00" in raw:
        line = raw[: raw.index(b"\x00")].count(b"\n") + 1
        problems.error(shown, line, "is not a text file (it holds binary data)")
        return None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        text = raw.decode("latin-1")
        if _CONTROL.search(text.replace("\r", "")) or re.search(r"[\x80-\x9f]", text):
            problems.error(shown, line, "is not UTF-8 text and cannot be read safely")
            return None
        problems.warn(shown, line, "is not UTF-8; read as Latin-1 (save it as UTF-8 to be sure)")
    match = _CONTROL.search(text)
    if match:
        line = text.count("\n", 0, match.start()) + 1
        problems.error(shown, line, "holds control characters: is it a text file?")
        return None
    return text.replace("\r\n", "\n").replace("\r", "\n")
