"""Markdown from notes to safe HTML: render, resolve atlas links, then sanitise with nh3.

Notes may link to other parts of the atlas without knowing where a page will stand, with
``[text](object:lamp-03)``, ``character:``, ``place:``, ``page:`` and ``node:`` targets, and show
an image from the media folder with ``![alt](media:file.svg)``. These become relative URLs for
the page being rendered. Sanitising comes last, so nothing a note says can add a script, a
style, an event handler or a request to another site: images may only come from the site.
"""

from __future__ import annotations

import functools
import re
from contextlib import contextmanager
from dataclasses import dataclass, field
from html import unescape

import markdown
import nh3

from ..cache import Cache, Hasher

SCHEMES = {"object": "objects", "character": "characters", "place": "places", "page": "pages",
           "node": "nodes"}
_TAGS = set(nh3.ALLOWED_TAGS) - {"img"} | {"img", "figure", "figcaption"}
_ATTRIBUTES = {
    "a": {"href", "title"},
    "img": {"src", "alt", "title", "width", "height"},
    "abbr": {"title"},
    "td": {"colspan", "rowspan"},
    "th": {"colspan", "rowspan", "scope"},
    "ol": {"start"},
}
_LINK = re.compile(r'(href|src)="([a-z]+):([^"#]*)(#[^"]*)?"')


@dataclass(frozen=True)
class Targets:
    """What atlas links may point at: id -> file name stem, by scheme."""

    known: dict[str, dict[str, str]]
    media: frozenset[str]


def _resolve(html: str, root: str, targets: Targets) -> str:
    def swap(m: re.Match) -> str:
        attr, scheme, ident, anchor = m.group(1), m.group(2), m.group(3), m.group(4) or ""
        if scheme == "media":
            if ident in targets.media:
                return f'{attr}="{root}media/{ident}"'
            return f'{attr}="#missing-media"'
        if scheme in SCHEMES:
            stem = targets.known.get(scheme, {}).get(ident)
            # An unknown id is kept as a broken relative link, so the audit stage reports it.
            return f'{attr}="{root}{SCHEMES[scheme]}/{stem or ident}.html{anchor}"'
        return m.group(0)

    return _LINK.sub(swap, html)


def _keep_attribute(tag: str, attr: str, value: str) -> str | None:
    """Drop image sources that do not point inside the site."""
    if tag == "img" and attr == "src":
        if re.match(r"^([a-z][a-z0-9+.-]*:|//)", value, re.I):
            return None
    return value


_CONVERTER: list[markdown.Markdown] = []

@dataclass
class _Kept:
    """The conversions of an open :func:`kept_conversions` block: (kind, note text) -> result."""

    stored: dict  # read from the cache
    new: dict = field(default_factory=dict)  # made in this block
    used: set = field(default_factory=set)  # every key asked for in this block


_KEEPING: list[_Kept] = []  # the open block, if any


def _kept(kind: str, text: str, convert):
    if not _KEEPING:
        return convert(text)
    kept, key = _KEEPING[0], (kind, text)
    kept.used.add(key)
    if key in kept.stored:
        return kept.stored[key]
    if key not in kept.new:
        kept.new[key] = convert(text)
    return kept.new[key]


@contextmanager
def kept_conversions(cache: Cache | None):
    """Within this block, Markdown conversions (note text to HTML, and to plain words) are read
    from and added to the on-disk ``cache``, keyed by the note's exact text, this package's
    code and the Markdown library's version, so a one-note rebuild converts one note: on the
    400-object synthetic atlas, the object notes' 0.25 s -> 0.03 s (profiled). Sanitising and
    link resolution still run on every build. Only what this build used is kept."""
    if cache is None or not cache.enabled:
        yield
        return
    key = Hasher("markdown conversions", markdown.__version__).hexdigest()
    table, added = cache.get_table("markdown", key)
    kept = _Kept(table)
    _KEEPING[:] = [kept]
    try:
        yield
        if kept.new:
            fresh = {k: kept.new[k] if k in kept.new else kept.stored[k] for k in kept.used}
            added = {k: v for k, v in {**added, **kept.new}.items() if k in fresh}
            cache.put_table("markdown", key, fresh, added, keep=1)
    finally:
        _KEEPING.clear()


@functools.lru_cache(maxsize=4096)
def _convert(text: str) -> str:
    """Markdown to (unsanitised) HTML with one converter, reset between notes: building a
    converter for each note took half of the 1.6 s a rebuild of the 400-object synthetic
    atlas spent on its notes (profiled); a note shown on several pages is converted once."""
    if not _CONVERTER:
        _CONVERTER.append(markdown.Markdown(extensions=["tables", "sane_lists", "smarty"],
                                            output_format="html"))
    return _CONVERTER[0].reset().convert(text)


def _converted(text: str) -> str:
    return _kept("html", text, _convert)


def render_markdown(text: str, root: str, targets: Targets) -> str:
    """Markdown to sanitised HTML for a page whose path to the site root is ``root``."""
    if not text.strip():
        return ""
    html = _resolve(_converted(text), root, targets)
    html = nh3.clean(
        html,
        tags=_TAGS,
        attributes=_ATTRIBUTES,
        url_schemes={"http", "https", "mailto"},
        link_rel="noopener noreferrer",
        attribute_filter=_keep_attribute,
        strip_comments=True,
    )
    # An image whose source was dropped is removed; one without alt text gets an empty one.
    html = re.sub(r"<img(?![^>]*\bsrc=)[^>]*>", "", html)
    return re.sub(r"<img(?![^>]*\balt=)", '<img alt=""', html)


_PLAIN: list[markdown.Markdown] = []


def _plain_words(text: str) -> tuple[str, ...]:
    return _kept("words", text, _words)


@functools.lru_cache(maxsize=4096)
def _words(text: str) -> tuple[str, ...]:
    """The words of a note without markup (one plain converter, reset between notes)."""
    if not _PLAIN:
        _PLAIN.append(markdown.Markdown())
    html = _PLAIN[0].reset().convert(text)
    return tuple(unescape(nh3.clean(html, tags=set())).split())


def plain_text(text: str, limit: int = 200) -> str:
    """The first words of a note as plain text, for summaries and descriptions."""
    words = _plain_words(text)
    out = " ".join(words)
    if len(out) > limit:
        out = out[:limit].rsplit(" ", 1)[0] + "…"
    return out  # plain text: the template escapes it
