"""The render loop: pages rendered in parallel and taken from the page cache when unchanged.

A page's key is the SHA-256 of everything its HTML depends on: the builder's own code
(:func:`atlas.cache.code_fingerprint`), every template file of the theme and the themes it
extends, the interface catalogue of the language, the site information (title, navigation,
languages, kiosk settings) and the page itself (path, template, scripts and its whole context,
pickled). Unchanged pages are taken from ``.atlas-cache/pages-<label>-<lang>/``; the others are
rendered, in forked processes when ``jobs > 1`` (each builds its Jinja environment once).
Rendering is a pure function of those inputs, so the output is the same for any ``jobs`` and
with or without the cache.
"""

from __future__ import annotations

import hashlib
import pickle
import re
from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING

from .. import parallel
from ..cache import Cache, Hasher
from ..i18n import catalogue_path
from ..parallel import map_forked
from .views import FrozenPage

if TYPE_CHECKING:
    from .render import SiteInfo, Theme
    from .views import PagePlan


def site_key(theme: Theme, site: SiteInfo) -> str:
    """The part of every page key that all pages of one rendering share."""
    h = Hasher(theme.name, repr(site))
    for folder in theme.folders:
        for path in sorted((folder / "templates").rglob("*")):
            if path.is_file():
                h.add(path.relative_to(folder).as_posix()).add(path.read_bytes())
    catalogue = catalogue_path(site.language)
    h.add(catalogue.read_bytes() if catalogue.is_file() else b"no catalogue")
    return h.hexdigest()


def page_key(base: str, page: PagePlan) -> str:
    """The key of one page: ``base`` (from :func:`site_key`) and the page's own inputs.

    Equal pickles mean equal contexts, so a key never names two different pages; two equal
    contexts pickled differently only cost a render. A context that cannot be pickled gets no
    key (``""``): the page is always rendered.
    """
    h = hashlib.sha256(base.encode())
    if isinstance(page, FrozenPage):  # the same pickle, made when it was planned
        h.update(page.blob)
        return h.hexdigest()
    try:
        h.update(pickle.dumps((page.path, page.template, page.scripts, page.context),
                              protocol=pickle.HIGHEST_PROTOCOL))
    except (pickle.PicklingError, TypeError, AttributeError):
        return ""
    return h.hexdigest()


def _keys(shared: tuple, span: range) -> list[str]:
    base, pages = shared
    return [page_key(base, pages[i]) for i in span]


def _render_chunk(shared: tuple, chunk: Sequence[int]) -> list[str]:
    render_all, theme, site, pages = shared
    return render_all(theme, site, [pages[i] for i in chunk])


def render_pages(pages: Sequence[PagePlan], theme: Theme, site: SiteInfo,
                 render_all: Callable[[Theme, SiteInfo, Sequence[PagePlan]], list[str]], *,
                 jobs: int = 1, cache: Cache | None = None, label: str = "") -> list[str]:
    """The HTML of ``pages`` in order; ``render_all(theme, site, pages)`` renders a list of
    pages in one process (a module-level function, so worker processes can run it)."""
    cache = cache or Cache()
    kind = "pages-" + re.sub(r"[^A-Za-z0-9_.-]", "_", f"{label}-{site.language}")
    base = site_key(theme, site) if cache.enabled else ""
    keys: list[str] = []
    if cache.enabled:  # pickling every context to hash it is a third of a rebuild: share it
        n = jobs * 4 if jobs > 1 and len(pages) >= parallel.MIN_ITEMS else 1
        spans = [range(c * len(pages) // n, (c + 1) * len(pages) // n) for c in range(n)]
        for part in map_forked(_keys, (base, pages), spans, jobs):
            keys += part
    stored, added = cache.get_table(kind, base) if cache.enabled else ({}, {})
    html: list[str | None] = [stored.get(k) if k else None for k in keys] if keys \
        else [None] * len(pages)
    todo = [i for i, h in enumerate(html) if h is None]
    if todo:
        if jobs > 1 and len(todo) > 1:
            # the pages are inherited by forked workers (see atlas.parallel), not pickled
            n = min(len(todo), jobs * 4)
            chunks = [todo[c::n] for c in range(n)]
            parts = map_forked(_render_chunk, (render_all, theme, site, pages), chunks, jobs)
            for chunk, part in zip(chunks, parts):
                for i, text in zip(chunk, part):
                    html[i] = text
        else:
            for i, text in zip(todo, render_all(theme, site, [pages[i] for i in todo])):
                html[i] = text
    if cache.enabled and todo:
        table = {k: h for k, h in zip(keys, html) if k}
        added.update({keys[i]: html[i] for i in todo if keys[i]})
        cache.put_table(kind, base, table, {k: h for k, h in added.items() if k in table})
    return [h for h in html if h is not None]
