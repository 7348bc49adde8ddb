"""Interface languages: gettext catalogues read with Babel, and the translator a build uses.

Interface strings are marked in templates with ``{{ _("...") }}`` / ``{% trans %}`` and in
Python with ``_ = atlas.i18n.gettext`` then ``_("...")`` (or ``ngettext`` for counts). The
catalogues live in the package: ``atlas/locale/atlas.pot`` (every marked string, made by
``scripts/update_catalogues.py``) and ``atlas/locale/<lang>/LC_MESSAGES/atlas.po`` per
language. A ``.po`` file is read at run time with Babel and compiled in memory, so there is
no compile step and no ``.mo`` file in the repository. Fuzzy entries are never used.

The default language of the catalogues' msgids is English; a language without a catalogue
shows the English strings (``atlas check`` says so).
"""

from __future__ import annotations

import datetime as dt
import gettext
import io
from collections.abc import Iterable
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path

DOMAIN = "atlas"
SOURCE_LANGUAGE = "en"  # the language the msgids are written in


def locale_dir() -> Path:
    """The package's ``locale`` folder (``atlas/locale``)."""
    return Path(str(resources.files("atlas") / "locale"))


def catalogue_path(lang: str, base: Path | None = None) -> Path:
    return (base or locale_dir()) / lang / "LC_MESSAGES" / f"{DOMAIN}.po"


def read_catalogue(path: Path):
    """A Babel ``Catalog`` read from a ``.po`` or ``.pot`` file."""
    from babel.messages.pofile import read_po

    with open(path, "rb") as handle:
        return read_po(handle, domain=DOMAIN)


def load_translations(lang: str, base: Path | None = None) -> gettext.NullTranslations:
    """The compiled translations of ``lang`` (null ones for English or without a catalogue).

    The ``.po`` file is compiled into a ``.mo`` image in memory (``write_mo`` leaves out fuzzy
    entries) and opened as :class:`babel.support.Translations`.
    """
    path = catalogue_path(lang, base)
    if lang == SOURCE_LANGUAGE or not path.is_file():
        return gettext.NullTranslations()
    from babel.messages.mofile import write_mo
    from babel.support import Translations

    buffer = io.BytesIO()
    write_mo(buffer, read_catalogue(path), use_fuzzy=False)
    buffer.seek(0)
    return Translations(buffer, domain=DOMAIN)


@dataclass(frozen=True)
class Translator:
    """The interface language of one rendering of the site, and its catalogue."""

    lang: str = SOURCE_LANGUAGE
    catalogue: gettext.NullTranslations = field(default_factory=gettext.NullTranslations,
                                                compare=False, repr=False)

    def gettext(self, message: str) -> str:
        return self.catalogue.gettext(message)

    def ngettext(self, singular: str, plural: str, n: int) -> str:
        return self.catalogue.ngettext(singular, plural, n)


def translator(lang: str, base: Path | None = None) -> Translator:
    return Translator(lang, load_translations(lang, base))


def language_name(lang: str) -> str:
    """The language's name in itself, capitalised, for the language switch.

    >>> language_name("fr"), language_name("en")
    ('Français', 'English')
    """
    from babel import Locale, UnknownLocaleError

    try:
        name = Locale.parse(lang.replace("-", "_")).get_display_name(lang.replace("-", "_"))
    except (ValueError, UnknownLocaleError):
        name = None
    return (name[:1].upper() + name[1:]) if name else lang


# --- extraction (scripts/update_catalogues.py and the catalogue test) -----------------------

PYTHON_KEYWORDS = {"_": None, "gettext": None, "ngettext": (1, 2), "N_": None}
JINJA_OPTIONS = {"extensions": "jinja2.ext.i18n", "trimmed": "true", "newstyle_gettext": "true",
                 "trim_blocks": "true", "lstrip_blocks": "true", "silent": "false"}
# A fixed creation date keeps the template file stable between runs of the script.
CREATED = dt.datetime(2026, 1, 1, tzinfo=dt.UTC)


def source_files(package: Path, themes: Path) -> list[tuple[str, Path, str]]:
    """(shown path, file, method) of every file whose marked strings belong in the catalogue."""
    files = [(f"atlas/{p.relative_to(package).as_posix()}", p, "python")
             for p in sorted(package.rglob("*.py")) if "__pycache__" not in p.parts]
    files += [(f"themes/{p.relative_to(themes).as_posix()}", p, "jinja")
              for p in sorted(themes.glob("*/templates/*.html"))]
    return files


def extract_catalogue(package: Path | None = None, themes: Path | None = None):
    """Every marked string of the package's Python and the themes' templates, as a Catalog."""
    from babel.messages.catalog import Catalog
    from babel.messages.extract import extract
    from jinja2.ext import babel_extract

    package = package or Path(__file__).resolve().parent
    themes = themes or Path(str(resources.files("atlas.themes")))
    catalog = Catalog(project="lineage-atlas", domain=DOMAIN, creation_date=CREATED,
                      charset="utf-8", fuzzy=False)
    for shown, path, method in source_files(package, themes):
        with open(path, "rb") as handle:
            if method == "python":
                found = extract("python", handle, keywords=PYTHON_KEYWORDS)
            else:
                found = extract(babel_extract, handle, keywords=PYTHON_KEYWORDS,
                                options=JINJA_OPTIONS)
            for lineno, message, comments, context in found:
                catalog.add(message, None, [(shown, lineno)], auto_comments=comments,
                            context=context)
    return catalog


def msgids(catalog) -> set[str]:
    """The msgids of a catalogue (a plural entry by its singular)."""
    return {m.id if isinstance(m.id, str) else m.id[0] for m in catalog if m.id}


def untranslated(catalog, wanted: Iterable[str]) -> list[str]:
    """The ``wanted`` msgids that ``catalog`` lacks, leaves empty, or marks fuzzy."""
    out = []
    for mid in sorted(wanted):
        message = catalog.get(mid)
        if message is None:
            message = next((m for m in catalog if not isinstance(m.id, str) and m.id[0] == mid),
                           None)
        strings = [] if message is None else (
            [message.string] if isinstance(message.string, str) else list(message.string))
        if message is None or message.fuzzy or not all(strings):
            out.append(mid)
    return out


def N_(message: str) -> str:
    """Mark a string for the catalogue where it is defined; it is translated where it is used
    (``_(TABLE[key])``)."""
    return message
