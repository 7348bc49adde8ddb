"""One site in several interface languages: the plan and render stages run once per language.

The analysis runs once. For each language of ``atlas.toml`` (``languages = ["en", "fr"]``, the
first the default) the atlas is *localised* (:func:`localise`: translated object notes, clade
notes, free pages, character labels, state descriptions and notes, and place names replace the
default text where they exist, and the language's interface catalogue rides along as
``atlas.i18n``, which also writes the numbers), then planned and rendered as usual. The
default language is written at the site root; every other language under ``<lang>/`` with the
same page paths (``fr/objects/lamp-03.html``).

Files are shared where they can be: the theme's ``assets/``, plotly.js, images and every data
script or download that comes out byte for byte the same in a language as in the default one
are written once, at the root, and a translated page's links to them are rewritten to point
there (:func:`relocate`). What carries translated text (the search index, the tree layout with
translated labels, the static figures) is written per language. Every page carries a language
switch to the same page in each other language (:func:`language_links`).
"""

from __future__ import annotations

import posixpath
import re
from collections.abc import Callable
from dataclasses import replace
from typing import TYPE_CHECKING

from ..errors import Problem
from ..i18n import (
    catalogue_path,
    language_name,
    locale_dir,
    msgids,
    read_catalogue,
    translator,
    untranslated,
)
from ..model import Atlas
from .views import moved, root_of

if TYPE_CHECKING:
    from ..analysis.results import Results
    from ..i18n import Translator
    from .plan import SitePlan
    from .render import SiteInfo

_EXTERNAL = re.compile(r"^([a-z][a-z0-9+.-]*:|//|#)", re.I)
_URL_ATTR = re.compile(r"""(\s(?:href|src|xlink:href)\s*=\s*")([^"]*)(")""")
_SRCSET_ATTR = re.compile(r"""(\ssrcset\s*=\s*")([^"]*)(")""")


def prefix_of(atlas: Atlas, lang: str) -> str:
    """The output folder of a language: ``""`` for the default, else ``"<lang>/"``."""
    return "" if lang == atlas.config.languages[0] else f"{lang}/"


def localise(atlas: Atlas, lang: str, tr: Translator) -> Atlas:
    """The atlas as a reader of ``lang`` sees it: content translations where there are any.

    An object note, clade note or free page without a translation keeps its default-language
    text and is marked with ``fallback_lang`` (the page gives its container a ``lang``
    attribute); a place without a ``name@<lang>`` keeps its name. A character takes its
    translated label, state descriptions and body where its translation gives them, and each
    part it lacks keeps the default text, marked (``fallback_lang`` for the label,
    ``body_lang``, ``state_langs``). Withheld objects have no translations (the link stage
    kept none), so nothing withheld comes back here.
    """
    default = atlas.config.languages[0]
    if lang == default:
        return replace(atlas, i18n=tr)

    def version(item):
        t = item.translations.get(lang)
        if t:
            return replace(item, title=t["title"], body=t["body"])
        return replace(item, fallback_lang=default)

    def character(c):
        t = c.translations.get(lang, {})
        given = t.get("descriptions", ()) or ("",) * len(c.descriptions)
        return replace(
            c, label=t.get("label") or c.label, body=t.get("body") or c.body,
            descriptions=tuple(d or base for d, base in zip(given, c.descriptions)),
            fallback_lang="" if t.get("label") else default,
            body_lang="" if t.get("body") or not c.body.strip() else default,
            state_langs=tuple("" if d else default for d in given))

    objects = {oid: version(o) if o.has_note and not o.withheld else o
               for oid, o in atlas.objects.items()}
    places = {pid: replace(p, name=p.names[lang]) if p.names.get(lang) else p
              for pid, p in atlas.places.items()}
    return replace(atlas, objects=objects, places=places, i18n=tr,
                   characters=tuple(character(c) for c in atlas.characters),
                   clade_notes=tuple(version(n) for n in atlas.clade_notes),
                   pages=tuple(version(p) for p in atlas.pages))


def language_links(site: SiteInfo, path: str) -> list[dict]:
    """The language switch of the page at ``path`` (its path inside its language's folder):
    one entry per language, its name in itself, a link to the same page, the current one
    marked."""
    up = root_of(site.prefix + path)
    return [{"lang": code, "name": name, "href": up + prefix + path,
             "current": code == site.language}
            for code, name, prefix in site.languages]


def relocate(html: str, path: str, prefix: str, shared: set[str]) -> str:
    """A page of the language folder ``prefix`` with links to shared files pointed at the root.

    ``path`` is the page's path inside its language folder; a relative URL that resolves
    there to a file in ``shared`` (site-root paths) is rewritten relative to the page's real
    place, ``prefix + path``.

    >>> relocate('<img src="../media/a.svg"> <a href="b.html">', "objects/x.html", "fr/",
    ...          {"media/a.svg"})
    '<img src="../../media/a.svg"> <a href="b.html">'
    """
    here = posixpath.dirname(path)
    real = posixpath.dirname(prefix + path) or "."

    def fix(url: str) -> str:
        if not url or _EXTERNAL.match(url):
            return url
        cut = min((i for i in (url.find("#"), url.find("?")) if i >= 0), default=len(url))
        target = posixpath.normpath(posixpath.join(here, url[:cut]))
        if target not in shared:
            return url
        return posixpath.relpath(target, real) + url[cut:]

    def attr(m: re.Match) -> str:
        return m.group(1) + fix(m.group(2)) + m.group(3)

    def srcset(m: re.Match) -> str:
        parts = []
        for part in m.group(2).split(","):
            words = part.strip().split(" ", 1)
            parts.append(" ".join([fix(words[0]), *words[1:]]) if words[0] else part)
        return m.group(1) + ", ".join(parts) + m.group(3)

    return _SRCSET_ATTR.sub(srcset, _URL_ATTR.sub(attr, html))


def render_languages(atlas: Atlas, results: Results, step: Callable[[str], None],
                     make_site: Callable[..., SiteInfo], **render_options
                     ) -> tuple[SitePlan, dict[str, bytes]]:
    """Plan and render the site once per language; return the combined plan and every file.

    ``make_site(plan, lang, languages, prefix)`` gives the render stage's site information for
    one language; ``render_options`` go to :func:`atlas.site.render.render_site` unchanged.
    The returned plan is the default language's with every language's pages (their paths
    prefixed) and one sitemap for all of them.
    """
    from . import downloads
    from .plan import plan_site
    from .render import find_theme, render_site

    languages = atlas.config.languages
    switch = tuple((code, language_name(code), prefix_of(atlas, code)) for code in languages)
    theme = find_theme("kiosk" if atlas.profile.kiosk else atlas.config.theme)
    files: dict[str, bytes] = {}
    pages = []
    first: SitePlan | None = None
    for lang in languages:
        prefix = prefix_of(atlas, lang)
        step(f"Planning pages ({lang})" if len(languages) > 1 else "Planning pages")
        plan = plan_site(localise(atlas, lang, translator(lang)), results,
                         jobs=render_options.get("jobs", 1), cache=render_options.get("cache"))
        site = make_site(plan, lang, switch, prefix)
        step(f"Rendering {len(plan.pages)} pages" + (f" ({lang})" if len(languages) > 1 else ""))
        html = render_site(plan, theme, site, **render_options)
        made: dict[str, bytes] = {path: text.encode("utf-8") for path, text in plan.data.items()}
        made.update({path: text.encode("utf-8") for path, text in plan.files.items()})
        made.update(plan.media)
        if first is None:
            first = plan
        else:  # what is the same as in the default language is shared, at the root
            shared = {p for p, data in made.items() if files.get(p) == data}
            shared |= set(first.copies) | set(first.media)
            shared |= {p for p in files if p.startswith("assets/")}
            made = {p: data for p, data in made.items() if p not in shared}
            made.pop("sitemap.xml", None)  # one sitemap, at the root, for every language
            html = {p: relocate(text, p, prefix, shared) for p, text in html.items()}
        files.update({prefix + p: data for p, data in made.items()})
        files.update({prefix + p: text.encode("utf-8") for p, text in html.items()})
        pages += [moved(p, prefix + p.path) for p in plan.pages]
        if first is plan:  # the theme's assets, once, at the root; a child theme's win
            for folder in reversed(theme.asset_folders):
                for asset in sorted(folder.rglob("*")):
                    if asset.is_file():
                        files[f"assets/{asset.relative_to(folder).as_posix()}"] = \
                            asset.read_bytes()
    assert first is not None
    if "sitemap.xml" in files:
        files.update({k: v.encode("utf-8") for k, v in
                      downloads.sitemap(atlas.config.base_url, pages).items()})
    return replace(first, pages=pages), files


# --- atlas check: what is not translated ---------------------------------------------------

def _listing(names: list[str], limit: int = 10) -> str:
    shown = ", ".join(names[:limit])
    return shown + (f" and {len(names) - limit} more" if len(names) > limit else "")


def _short(text: str, width: int = 40) -> str:
    return repr(text if len(text) <= width else text[: width - 1] + "…")


def _count(n: int, one: str, many: str) -> str:
    return f"{n} {one if n == 1 else many}"


def untranslated_report(atlas: Atlas, base=None) -> list[Problem]:
    """Warnings, for each language but the default, about what a reader would see untranslated:
    interface strings the language's catalogue lacks (or that it has no catalogue), object
    notes, clade notes and free pages without ``<name>.<lang>.md``, characters without a
    translation (``characters/<id>.<lang>.md`` or the table's ``label@<lang>`` and
    ``states@<lang>`` columns) or with one that leaves a part out, places without
    ``name@<lang>``. Each names the files or ids concerned and counts them."""
    config = atlas.config
    out: list[Problem] = []
    template = (base or locale_dir()) / "atlas.pot"
    wanted = msgids(read_catalogue(template)) if template.is_file() else set()
    for lang in config.languages[1:]:
        path = catalogue_path(lang, base)
        shown = f"atlas/locale/{lang}/LC_MESSAGES/atlas.po"
        if not path.is_file():
            out.append(Problem("atlas.toml", None, f"no interface catalogue for {lang!r}: all "
                               f"{len(wanted)} interface strings show in English",
                               f"add {shown} (see DEVELOPERS.md)", "warning"))
        else:
            missing = untranslated(read_catalogue(path), wanted)
            if missing:
                out.append(Problem(shown, None, f"{len(missing)} of {len(wanted)} interface "
                                   f"strings have no {lang} translation (they show in English): "
                                   + _listing([_short(m) for m in missing], 5), "", "warning"))
        kinds = [
            (config.sources["objects"], ("object note", "object notes"),
             [o.file for o in atlas.objects.values() if o.has_note and not o.withheld
              and lang not in o.translations]),
            (config.sources["clades"], ("clade note", "clade notes"),
             [n.file for n in atlas.clade_notes if lang not in n.translations]),
            (config.sources["pages"], ("free page", "free pages"),
             [p.file for p in atlas.pages if lang not in p.translations]),
        ]
        for folder, what, files in kinds:
            if files:
                names = sorted(f.rsplit("/", 1)[-1] for f in files)
                out.append(Problem(folder, None, f"{_count(len(names), *what)} without a "
                                   f"{lang} translation (<name>.{lang}.md), shown in "
                                   f"{config.languages[0]}: " + _listing(names), "",
                                   "warning"))
        out += _untranslated_characters(atlas, lang)
        places = sorted(p.id for p in atlas.places.values() if not p.names.get(lang))
        if places:
            out.append(Problem(config.sources["gazetteer"], None,
                               f"{_count(len(places), 'place', 'places')} without a name@{lang} "
                               "column value (the default name shows): " + _listing(places),
                               "", "warning"))
    return out


def _untranslated_characters(atlas: Atlas, lang: str) -> list[Problem]:
    """Characters a reader of ``lang`` sees in the default language: without any translation,
    or with a translation that lacks the label, a state's description or the body (when the
    character has a note)."""
    folder = atlas.config.sources["characters"]
    default = atlas.config.languages[0]
    missing = [c.id for c in atlas.characters if lang not in c.translations]
    partial = []
    for c in atlas.characters:
        t = c.translations.get(lang)
        if t is None:
            continue
        lacks = ([] if t["label"] else ["label"]) + [
            f"state {s}" for s, d in zip(c.symbols, t["descriptions"]) if not d]
        if c.body.strip() and not t["body"]:
            lacks.append("note")
        if lacks:
            partial.append(f"{c.id} ({', '.join(lacks)})")
    out = []
    if missing:
        out.append(Problem(folder, None, f"{_count(len(missing), 'character', 'characters')} "
                           f"without a {lang} translation (<id>.{lang}.md, or label@{lang} and "
                           f"states@{lang} columns), shown in {default}: " + _listing(missing),
                           "", "warning"))
    if partial:
        out.append(Problem(folder, None, f"{_count(len(partial), 'character', 'characters')} "
                           f"with an incomplete {lang} translation (the rest shows in "
                           f"{default}): " + _listing(partial, 5), "", "warning"))
    return out
