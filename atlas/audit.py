"""The audit stage: checks on a finished build, before it replaces the old one.

- Every internal link and anchor resolves: ``href`` and ``src`` that point inside the site
  name a file of the build, and ``#fragment`` names an ``id`` on the target page.
- Nothing withheld leaks: no output file (pages, data scripts, figures, downloads, images)
  contains the id, title, place or note text of anything the build profile withholds.
- Nothing is loaded from outside the site: ``src`` attributes and stylesheet links are local
  (plain ``<a href>`` links to other sites are allowed; they load nothing until followed).
"""

from __future__ import annotations

import posixpath
import re
from html.parser import HTMLParser
from urllib.parse import unquote, urlsplit

from .errors import Problem

_EXTERNAL = re.compile(r"^([a-z][a-z0-9+.-]*:|//)", re.I)


class _Collect(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.ids: set[str] = set()
        self.refs: list[tuple[str, str, str, int]] = []  # (tag, attribute, value, line)

    def handle_starttag(self, tag, attrs):
        line = self.getpos()[0]
        for name, value in attrs:
            if value is None:
                continue
            if name == "id":
                self.ids.add(value)
            elif name in ("href", "src") or (name == "xlink:href"):
                self.refs.append((tag, name, value, line))
            elif name == "srcset":
                for part in value.split(","):
                    if part.strip():
                        self.refs.append((tag, "srcset", part.split()[0], line))

    handle_startendtag = handle_starttag


def _parse(html: str) -> _Collect:
    c = _Collect()
    c.feed(html)
    c.close()
    return c


def audit_links(files: dict[str, bytes]) -> list[Problem]:
    """Every problem with links in a built site (paths are relative to the site root)."""
    pages = {p: _parse(b.decode("utf-8")) for p, b in files.items()
             if p.endswith((".html", ".svg"))}
    problems: list[Problem] = []
    for path, parsed in sorted(pages.items()):
        for tag, attr, value, line in parsed.refs:
            if _EXTERNAL.match(value):
                scheme = value.split(":", 1)[0].lower() if ":" in value else ""
                if not (tag == "a" and attr == "href"):
                    problems.append(Problem(path, line, f"<{tag} {attr}> loads {value!r} from "
                                            "outside the site"))
                elif scheme not in ("http", "https", "mailto"):
                    problems.append(Problem(path, line, f"link to {value!r} uses scheme "
                                            f"{scheme or 'of the page'!r}"))
                continue
            parts = urlsplit(value)
            target = path
            if parts.path:
                target = posixpath.normpath(posixpath.join(posixpath.dirname(path),
                                                           unquote(parts.path)))
                if target.startswith("../") or target not in files:
                    problems.append(Problem(path, line, f"broken link: {value!r} "
                                            f"(no file {target})"))
                    continue
            if parts.fragment:
                ids = pages[target].ids if target in pages else set()
                if unquote(parts.fragment) not in ids:
                    problems.append(Problem(path, line, f"broken anchor: {value!r} "
                                            f"(no id {parts.fragment!r} in {target})"))
    return problems


def audit_leaks(files: dict[str, bytes], canaries: tuple[str, ...]) -> list[Problem]:
    """Every output file that contains text of a withheld item (ids as whole words)."""
    if not canaries:
        return []
    words = [c for c in canaries if re.fullmatch(r"[\w.-]+", c)]
    phrases = [c for c in canaries if c not in words]
    pattern = re.compile(
        "|".join([r"(?<![\w-])" + re.escape(w) + r"(?![\w-])" for w in words]
                 + [re.escape(p) for p in phrases]))
    problems = []
    for path in sorted(files):
        data = files[path]
        text = data.decode("utf-8", "replace")
        found = pattern.search(text)
        if found:
            line = text.count("\n", 0, found.start()) + 1
            problems.append(Problem(path, line, "contains text the build profile withholds "
                                    f"({found.group(0)[:40]!r}); nothing was written"))
    return problems
