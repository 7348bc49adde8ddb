"""The audit stage: checks on a finished build, before it replaces the old one.

- Every internal link and anchor resolves: ``href`` and ``src`` that point inside the site
  name a file of the build, and ``#fragment`` names an ``id`` on the target page.
- Nothing withheld leaks: no output file (pages, data scripts, figures, downloads, images)
  contains the id, title, place or note text of anything the build profile withholds.
- Nothing is loaded from outside the site: ``src`` attributes and stylesheet links are local
  (plain ``<a href>`` links to other sites are allowed; they load nothing until followed).
"""

from __future__ import annotations

import functools
import hashlib
import posixpath
import re
from html import unescape
from html.parser import HTMLParser
from sys import intern
from typing import NamedTuple
from urllib.parse import unquote, urlsplit

import ahocorasick

from . import parallel
from .cache import Cache, Hasher, code_fingerprint
from .errors import Problem
from .parallel import map_forked

_EXTERNAL = re.compile(r"^([a-z][a-z0-9+.-]*:|//)", re.I)


class _Collect(HTMLParser):
    """The reference reader (the standard library's HTML parser): slow, kept for tests."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.ids: set[str] = set()
        self.refs: list[tuple[str, str, str, int]] = []  # (tag, attribute, value, line)

    def handle_starttag(self, tag, attrs):
        line = self.getpos()[0]
        for name, value in attrs:
            _collect(tag, name, value, line, self.ids, self.refs)

    handle_startendtag = handle_starttag


def _collect(tag: str, name: str, value: str | None, line: int, ids: set[str],
             refs: list[tuple[str, str, str, int]]) -> None:
    if value is None:
        return
    if name == "id":
        ids.add(value)
    elif name in ("href", "src", "xlink:href"):
        refs.append((tag, name, value, line))
    elif name == "srcset":
        for part in value.split(","):
            if part.strip():
                refs.append((tag, "srcset", part.split()[0], line))


def _parse_reference(html: str) -> tuple[set[str], list[tuple[str, str, str, int]]]:
    c = _Collect()
    c.feed(html)
    c.close()
    return c.ids, c.refs


# One pass over a page: comments, CDATA, declarations and the raw text of script and style
# elements are matched whole (so nothing inside them counts as a tag); any other start tag
# yields its name and attribute text. Equal to the reference reader on everything the site
# writes (tests/test_audit_scan.py compares them on whole builds); 4,772 pages and figures
# (93 MB) of the 400-object synthetic atlas: reference reader 52 s, this scan 4.6 s, same run.
_ATTRS = r"""((?:[^>"']|"[^"]*"|'[^']*')*)"""
_LAZY = r"""(?:[^>"']|"[^"]*"|'[^']*')*?"""
_SCAN = re.compile(
    r"<!--.*?-->|<!\[CDATA\[.*?\]\]>|<[!?][^>]*>"
    r"|<(script|style)\b" + _ATTRS + r">.*?</\1\s*>"
    r"|<([a-z][^\s/>]*)(?=\s)(" + _LAZY + r"\s(?:id|href|src|srcset|xlink:href)\s*="
    + _ATTRS[1:-1] + r")/?>",
    re.I | re.S)
_ATTR = re.compile(r"""([^\s"'>/=]+)(?:\s*=\s*("[^"]*"|'[^']*'|[^\s>]+))?""")
_WANTED = re.compile(r"\b(?:id|href|src|srcset)\s*=", re.I)


def _parse(html: str) -> tuple[set[str], list[tuple[str, str, str, int]]]:
    """The ``id`` values and the references (tag, attribute, value, line) of one page."""
    ids: set[str] = set()
    refs: list[tuple[str, str, str, int]] = []
    line, last = 1, 0
    for m in _SCAN.finditer(html):
        tag, attrs = (m.group(1), m.group(2)) if m.group(1) else (m.group(3), m.group(4))
        if not attrs or not _WANTED.search(attrs):
            continue
        line += html.count("\n", last, m.start())
        last = m.start()
        tag = intern(tag.lower())  # one object per name: results pickle compactly
        for a in _ATTR.finditer(attrs):
            value = a.group(2)
            if value is not None:
                if value[:1] in "\"'" and len(value) > 1 and value[0] == value[-1]:
                    value = value[1:-1]
                value = unescape(value) if "&" in value else value
            _collect(tag, intern(a.group(1).lower()), value, line, ids, refs)
    return ids, refs


class _Links(NamedTuple):  # a tuple: pickles (to the cache, from workers) 3x faster
    """What the link audit needs of one page, without line numbers (a page with a problem is
    read again for those)."""

    ids: frozenset[str]
    own: frozenset[str]  # fragments of references to the page itself (``#x``), unquoted
    local: frozenset[str]  # references with a path, resolved against the page's folder
    external: tuple[tuple[str, str, str, int], ...]  # (tag, attribute, value, line)


def _links(html: str) -> _Links:
    ids, refs = _parse(html)
    own, local, external = set(), set(), []
    for ref in refs:
        value = ref[2]
        if _EXTERNAL.match(value):
            external.append(ref)
            continue
        parts = urlsplit(value)
        if parts.path:
            local.add(intern(value))  # one object per value: the cache table pickles compactly
        elif parts.fragment:
            own.add(unquote(parts.fragment))
    return _Links(frozenset(ids), frozenset(own), frozenset(local), tuple(external))


def _parse_files(files: dict[str, bytes], names: list[str]) -> list[_Links]:
    return [_links(files[p].decode("utf-8")) for p in names]


def digest_files(files: dict[str, bytes], digests: dict[str, str] | None = None
                 ) -> dict[str, str]:
    """SHA-256 of every file, reusing ``digests`` where given (135 MB of files: about 0.07 s)."""
    digests = digests or {}
    return {p: digests.get(p) or hashlib.sha256(b).hexdigest() for p, b in files.items()}


def _parse_all(files: dict[str, bytes], cache: Cache | None, jobs: int = 1,
               digests: dict[str, str] | None = None) -> dict[str, _Links]:
    """The links of every page and SVG; with a ``cache``, a file parsed before (same bytes) is
    not parsed again: 4,772 pages and figures (93 MB) of the 400-object synthetic atlas, on a
    loaded 2-core machine, 204 s parsed -> 14 s from the cache."""
    names = sorted(p for p in files if p.endswith((".html", ".svg")))
    cache = cache or Cache()
    digests = digest_files({p: files[p] for p in names}, digests) if cache.enabled else {}
    kind_key = hashlib.sha256(code_fingerprint().encode()).hexdigest()
    stored, added = cache.get_table("audit", kind_key) if cache.enabled else ({}, {})
    out, fresh = {}, {}
    todo = [p for p in names if not digests or digests[p] not in stored]
    jobs = jobs if len(todo) >= parallel.MIN_ITEMS else 1  # a few pages: not worth a fork
    chunks = [todo[c::jobs * 4] for c in range(jobs * 4)] if jobs > 1 else [todo]
    for chunk, parsed in zip(chunks, map_forked(_parse_files, files, chunks, jobs)):
        out.update(zip(chunk, parsed))
    for p in names:
        hit = out[p] if p in out else stored[digests[p]]
        out[p] = hit
        if digests:
            fresh[digests[p]] = hit
    if cache.enabled and todo:
        added.update({digests[p]: out[p] for p in todo})
        cache.put_table("audit", kind_key, fresh, {k: v for k, v in added.items() if k in fresh},
                        keep=1)
    return out


def _external_problem(tag: str, attr: str, value: str) -> str | None:
    scheme = value.split(":", 1)[0].lower() if ":" in value else ""
    if not (tag == "a" and attr == "href"):
        return f"<{tag} {attr}> loads {value!r} from outside the site"
    if scheme not in ("http", "https", "mailto"):
        return f"link to {value!r} uses scheme {scheme or 'of the page'!r}"
    return None


# A relative reference with no query, escape or scheme: its path and fragment are plain text.
_PLAIN_REF = re.compile(r"[A-Za-z0-9_./-]*(#[A-Za-z0-9_.:-]*)?")


def _local_problem(path: str, value: str, files: dict[str, bytes],
                   pages: dict[str, _Links]) -> str | None:
    """Why the reference ``value`` on page ``path`` does not resolve, or None."""
    if _PLAIN_REF.fullmatch(value):  # what urlsplit and unquote would give, 2x faster
        file_part, _, fragment = value.partition("#")
        frag_text = fragment
    else:
        parts = urlsplit(value)
        file_part, fragment, frag_text = unquote(parts.path), parts.fragment, \
            unquote(parts.fragment)
    target = path
    if file_part:
        target = posixpath.normpath(posixpath.join(posixpath.dirname(path), file_part))
        if target.startswith("../") or target not in files:
            return f"broken link: {value!r} (no file {target})"
    if fragment:
        ids = pages[target].ids if target in pages else frozenset()
        if frag_text not in ids:
            return f"broken anchor: {value!r} (no id {fragment!r} in {target})"
    return None


def audit_links(files: dict[str, bytes], cache: Cache | None = None, jobs: int = 1,
                digests: dict[str, str] | None = None) -> list[Problem]:
    """Every problem with links in a built site (paths are relative to the site root); pages
    are read in ``jobs`` forked processes (:mod:`atlas.parallel`).

    A reference resolves the same way from every page of one folder, so each distinct
    (folder, reference) is resolved once, and only a page with a problem is read again for its
    line numbers. 400-object synthetic atlas, 655,000 links: one check per link 5.1 s; a
    one-note rebuild's whole link audit, the cached table read included, under a profiler:
    0.43 s checking each link once per folder in a Python loop, 0.18 s resolving the 11,516
    distinct (folder, link) pairs after set unions.
    """
    pages = _parse_all(files, cache, jobs, digests)
    by_folder: dict[str, set[str]] = {}
    for path, parsed in pages.items():
        by_folder.setdefault(posixpath.dirname(path), set()).update(parsed.local)
    broken = {folder: {v for v in values
                       if _local_problem(posixpath.join(folder, "_"), v, files, pages)}
              for folder, values in by_folder.items()}
    problems: list[Problem] = []
    for path, parsed in sorted(pages.items()):
        if not (parsed.own - parsed.ids or parsed.local & broken[posixpath.dirname(path)]
                or any(_external_problem(*ref[:3]) for ref in parsed.external)):
            continue
        for tag, attr, value, line in _parse(files[path].decode("utf-8"))[1]:
            message = (_external_problem(tag, attr, value) if _EXTERNAL.match(value)
                       else _local_problem(path, value, files, pages))
            if message:
                problems.append(Problem(path, line, message))
    return problems


def _word_char(ch: str) -> bool:
    return ch.isalnum() or ch in "_-"  # what ``[\w-]`` matches in a ``str`` regex


def _letter(ch: str) -> bool:
    return ch.isalnum() or ch == "_"  # what ``\w`` matches in a ``str`` regex


def audit_leaks(files: dict[str, bytes], canaries: tuple[str, ...], cache: Cache | None = None,
                digests: dict[str, str] | None = None) -> list[Problem]:
    """Every output file that contains text of a withheld item (ids as whole words).

    All canaries are looked for in one pass per file with an Aho-Corasick automaton
    (pyahocorasick); an id counts only where no letter, digit, ``_`` or ``-`` touches it, so
    ``ob-1`` is not found in ``ob-12``, and a title or passage that begins or ends with a
    letter or digit counts only where it is not part of a longer word there, so the withheld
    title "Vessel 50" is not found in the published "Vessel 500". The line reported is that of
    the first occurrence.
    Measured on the 400-object synthetic atlas (4,793 files, 135 MB, 17 canaries), same
    machine: one regular expression of all canaries 56 s, the automaton 1.3 s.

    With a ``cache``, a file whose bytes passed this audit before, against the same canaries
    and the same code, is not read again (whether a file contains a canary depends on nothing
    else); only files that passed are remembered. One-note rebuild of that atlas (5,193
    files, under a profiler): 0.35 s -> 0.01 s.
    """
    if not canaries:
        return []
    cache = cache or Cache()
    key = Hasher("leak audit", sorted(canaries)).hexdigest() if cache.enabled else ""
    passed = cache.get("leaks", key) if cache.enabled else None
    passed = passed if isinstance(passed, frozenset) else frozenset()
    digests = digest_files(files, digests) if cache.enabled else {}
    todo = [p for p in sorted(files) if not digests or digests[p] not in passed]
    words = {c for c in canaries if re.fullmatch(r"[\w.-]+", c)}
    automaton = ahocorasick.Automaton()
    for c in canaries:
        if c:
            automaton.add_word(c, c)
    if not len(automaton):
        return []
    automaton.make_automaton()
    problems = []
    for path in todo:
        text = files[path].decode("utf-8", "replace")
        first: tuple[int, str] | None = None
        for end, c in automaton.iter(text):
            start = end - len(c) + 1
            if first is not None and start >= first[0]:
                continue
            touches = _word_char if c in words else _letter
            if (start > 0 and touches(c[0]) and touches(text[start - 1])) \
                    or (end + 1 < len(text) and touches(c[-1]) and touches(text[end + 1])):
                continue
            first = (start, c)
        if first is not None:
            line = text.count("\n", 0, first[0]) + 1
            problems.append(Problem(path, line, "contains text the build profile withholds "
                                    f"({first[1][:40]!r}); nothing was written"))
    if cache.enabled and todo:
        leaked = {p.file for p in problems}
        now = frozenset(digests[p] for p in files if p not in leaked)
        if now != passed:
            cache.put("leaks", key, now, keep=2)
    return problems


# --- page weight -----------------------------------------------------------------------------

PLOTLY = "assets/plotly.min.js"
PLOTLY_NAME = PLOTLY.rsplit("/", 1)[1].encode()
_SCRIPT_SRC = re.compile(rb"""<script\b[^>]*\bsrc\s*=\s*"([^"]+)\"""", re.I)


def page_weights(files: dict[str, bytes], top: int = 5) -> list[tuple[str, int]]:
    """The ``top`` largest HTML pages as (path, bytes), largest first (ties by path).

    Only the HTML file counts: stylesheets, scripts, data scripts and images are shared by many
    pages and loaded once, then cached by the browser.
    """
    sizes = sorted(((p, len(b)) for p, b in files.items() if p.endswith(".html")),
                   key=lambda ps: (-ps[1], ps[0]))
    return sizes[:top]


def audit_budget(files: dict[str, bytes], budget_kb: int) -> list[Problem]:
    """Every HTML page larger than ``budget_kb`` kilobytes (1,000 bytes each)."""
    limit = budget_kb * 1000
    return [Problem(p, None, f"page weighs {len(b) / 1000:.1f} KB, over the budget of "
                    f"{budget_kb} KB", "raise page_budget in atlas.toml, or split the content "
                    "(e.g. fewer characters per page)")
            for p, b in sorted(files.items()) if p.endswith(".html") and len(b) > limit]


def _scripts_of(path: str, html: bytes) -> set[str]:
    folder = posixpath.dirname(path)
    return {_script_path(folder, src.decode("utf-8", "replace"))
            for src in _SCRIPT_SRC.findall(html)} - {""}


@functools.lru_cache(maxsize=4096)
def _script_path(folder: str, src: str) -> str:
    """The site path a script's ``src`` names from ``folder`` ("" for one outside the site)."""
    if _EXTERNAL.match(src):
        return ""
    return posixpath.normpath(posixpath.join(folder, unquote(urlsplit(src).path)))


def audit_plotly(files: dict[str, bytes]) -> list[Problem]:
    """Pages that load plotly.js without a script that draws with it (in any language folder).

    The drawing scripts are the site's own ``.js`` files that call ``Plotly.``; a page must load
    one of them to need plotly.js (about 4.6 MB, the heaviest file of the site).
    """
    drawers = {p for p, b in files.items() if p.endswith(".js") and not p.endswith(PLOTLY)
               and b"Plotly." in b}
    problems = []
    # Only a page that names plotly.js can load it; pages are read as bytes, and each script
    # path is resolved once per folder (400-object synthetic atlas, 797 of 3,583 pages name
    # it: 0.085 s -> 0.065 s)
    for path in sorted(p for p, b in files.items() if p.endswith(".html")
                       and PLOTLY_NAME in b):
        scripts = _scripts_of(path, files[path])
        if any(s.endswith(PLOTLY) for s in scripts) and not scripts & drawers:
            problems.append(Problem(path, None, "loads plotly.js but draws no interactive "
                                    "figure"))
    return problems
