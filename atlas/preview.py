"""``atlas preview``: build, serve the output on 127.0.0.1, rebuild when a source changes.

The server binds to the loopback address only, so a preview of unpublished or restricted
material is never offered to the network. A failed rebuild keeps the last good site and
prints the problems.
"""

from __future__ import annotations

import functools
import threading
import time
from collections.abc import Callable
from http.server import SimpleHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path

from .errors import AtlasError


def source_state(root: Path, out: Path) -> tuple:
    """(path, size, mtime) of every file in the atlas source (the output folder excluded)."""
    out = out.resolve()
    state = []
    for path in sorted(root.resolve().rglob("*")):
        if path.is_file() and not path.is_relative_to(out) and ".atlas-" not in str(path):
            stat = path.stat()
            state.append((str(path), stat.st_size, stat.st_mtime_ns))
    return tuple(state)


class _Quiet(SimpleHTTPRequestHandler):
    def log_message(self, format, *args):  # noqa: A002 - the base class's name
        pass


def serve(root: Path, out: Path, profile: str, port: int, *, once: bool = False,
          say: Callable[[str], None] = print, poll: float = 1.0, jobs: int = 1,
          use_cache: bool = True) -> None:
    from .build import build

    def rebuild() -> None:
        try:
            report = build(root, out, profile, jobs=jobs, use_cache=use_cache)
            say(f"Built {report.pages} pages.")
        except AtlasError as exc:
            for p in exc.problems:
                say(p.format())
            say("Rebuild failed; still serving the last good build.")

    rebuild()
    out.mkdir(parents=True, exist_ok=True)
    handler = functools.partial(_Quiet, directory=str(out.resolve()))
    server = ThreadingHTTPServer(("127.0.0.1", port), handler)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    say(f"Serving http://127.0.0.1:{server.server_address[1]}/ (Ctrl+C to stop)")
    state = source_state(root, out)
    try:
        while True:
            time.sleep(poll)
            now = source_state(root, out)
            if now != state:
                say("Source changed; rebuilding.")
                rebuild()
                state = source_state(root, out)
            if once:
                break
    finally:
        server.shutdown()
        server.server_close()
