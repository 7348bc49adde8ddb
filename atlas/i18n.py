"""Interface languages: gettext catalogues read with Babel, and the translator a build uses.

Interface strings are marked in templates with ``{{ _("...") }}`` / ``{% trans %}`` and in
Python with ``_ = atlas.i18n.gettext`` then ``_("...")`` (or ``ngettext`` for counts). The
catalogues live in the package: ``atlas/locale/atlas.pot`` (every marked string, made by
``scripts/update_catalogues.py``) and ``atlas/locale/<lang>/LC_MESSAGES/atlas.po`` per
language. A ``.po`` file is read at run time with Babel and compiled in memory, so there is
no compile step and no ``.mo`` file in the repository. Fuzzy entries are never used.

The default language of the catalogues' msgids is English; a language without a catalogue
shows the English strings (``atlas check`` says so).

Numbers a reader reads are written for the language too, with Babel's CLDR data:
:func:`format_number` and :func:`format_percent` (``Translator.number`` and ``.percent`` in the
plan stage) and the Jinja filters ``number`` and ``percent`` (:func:`number_filters`).
"""

from __future__ import annotations

import datetime as dt
import functools
import gettext
import io
import math
import numbers
import re
from collections.abc import Iterable
from dataclasses import dataclass, field
from decimal import Decimal
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

    def number(self, value, digits: int | None = None) -> str:
        """``value`` written for a reader of this language (see :func:`format_number`)."""
        return format_number(value, self.lang, digits)

    def percent(self, fraction, digits: int = 0) -> str:
        """``fraction`` (0.25) as a percentage in this language (see :func:`format_percent`)."""
        return format_percent(fraction, self.lang, digits)


def translator(lang: str, base: Path | None = None) -> Translator:
    return Translator(lang, load_translations(lang, base))


# --- numbers in the reader's language ------------------------------------------------------
#
# Counts, supports, percentages and areas in page text are written with Babel's CLDR data for
# the page's language: in French 0,87 and 12 345 (a narrow no-break space between thousands),
# in English 0.87 and 12,345. Only what a reader reads is localised: data files, downloads,
# ``data-*`` attributes that scripts read and JSON-LD keep the plain machine form.

_NUMBER = re.compile(r"^[-+]?\d+(?:\.(\d+))?$")


def _locale(lang: str):
    from babel import Locale, UnknownLocaleError

    try:
        return Locale.parse(lang.replace("-", "_"))
    except (ValueError, UnknownLocaleError):
        return Locale.parse(SOURCE_LANGUAGE)


def _with_decimals(pattern: str, digits: int) -> str:
    """A CLDR number pattern with exactly ``digits`` decimals: ``#,##0.###`` -> ``#,##0.00``,
    ``#,##0\u00a0%`` -> ``#,##0.0\u00a0%``."""
    fraction = "." + "0" * digits if digits > 0 else ""
    return re.sub(r"0(?:\.[0#]+)?", "0" + fraction, pattern, count=1)


def _plain(value, digits: int | None) -> tuple[str, int | None] | None:
    """A number as plain decimal text and the decimals to show (``("0.87", 2)``), rounded to
    ``digits`` as Python's ``f"{x:.2f}"`` rounds; None for what is not a finite number
    (text, ``None``, booleans, nan). An int, float, Decimal, numpy number or numeric string
    (``"0.50"``: two decimals unless ``digits`` says otherwise)."""
    if isinstance(value, bool) or value is None:
        return None
    if isinstance(value, numbers.Integral):  # numpy's integers too
        return (str(int(value)), 0) if digits is None else (f"{int(value):.{digits}f}", digits)
    if isinstance(value, (numbers.Real, Decimal)):  # float, numpy's floats, Decimal
        number = value if isinstance(value, Decimal) else float(value)
        if not math.isfinite(number):
            return None
        return (repr(number) if isinstance(number, float) else str(number), None) \
            if digits is None else (f"{number:.{digits}f}", digits)
    if isinstance(value, str):
        match = _NUMBER.match(value.strip())
        if match:
            if digits is None:
                return value.strip(), len(match.group(1) or "")
            return f"{Decimal(value.strip()):.{digits}f}", digits
    return None


def _not_a_number(value) -> str:
    if value is None:
        return ""
    if isinstance(value, (numbers.Real, Decimal)) and not isinstance(value, bool):
        return "–"  # nan or infinite: the dash the tables write for "none"
    return str(value)


@functools.lru_cache(maxsize=16384)
def _written(text: str, lang: str, places: int | None, percent: bool) -> str:
    """Babel's rendering of the plain decimal ``text`` in ``lang``: ``format_decimal`` (or
    ``format_percent`` of ``text`` hundredths) with the language's CLDR pattern and ``places``
    decimals (``None``: the pattern's own, at most three).

    Memoised: pages repeat the same few hundred values (probabilities to two decimals, small
    counts). Measured with timeit on the development machine: Babel's call takes about 50 µs,
    :func:`format_number` of a value seen before about 3 µs, so a trait sheet of 500
    characters (1,500 numbers) spends about 5 ms on them instead of 75 ms. The result depends
    on the arguments alone.
    """
    from babel.numbers import format_decimal
    from babel.numbers import format_percent as babel_percent

    locale = _locale(lang)
    if percent:
        pattern = _with_decimals(locale.percent_formats[None].pattern, places or 0)
        return babel_percent(Decimal(text) / 100, format=pattern, locale=locale)
    pattern = locale.decimal_formats[None].pattern
    if places is not None:
        pattern = _with_decimals(pattern, places)
    return format_decimal(Decimal(text), format=pattern, locale=locale)


def format_number(value, lang: str, digits: int | None = None) -> str:
    """A number as a reader of ``lang`` writes it: Babel's ``format_decimal`` with the
    language's CLDR decimal pattern, rounded to ``digits`` decimals when given (as Python's
    ``f"{x:.2f}"`` rounds, so every language shows the same digits), otherwise with as many
    as a numeric string carries (``"0.50"`` keeps two) or at most three for a float.
    Anything that is not a number (``"–"``, ``""``, text) comes back as it is, so a template
    can pass any table cell through.

    >>> format_number(12345.678, "fr", 2), format_number("0.50", "en"), format_number("–", "fr")
    ('12\u202f345,68', '0.50', '–')
    """
    if type(value) is str:
        return _number_text(value, lang, digits)
    plain = _plain(value, digits)
    if plain is None:
        return _not_a_number(value)
    return _written(plain[0], lang, plain[1], False)


@functools.lru_cache(maxsize=16384)
def _number_text(value: str, lang: str, digits: int | None) -> str:
    """:func:`format_number` of a string (the tables' cells, ``"0.87"``), memoised: parsing
    the text took most of the 6 s the 400-object synthetic atlas spent on numbers (profiled)."""
    plain = _plain(value, digits)
    if plain is None:
        return _not_a_number(value)
    return _written(plain[0], lang, plain[1], False)


def format_percent(fraction, lang: str, digits: int = 0) -> str:
    """A fraction (``0.256``) as a percentage in ``lang`` with ``digits`` decimals: Babel's
    ``format_percent`` with the language's CLDR percent pattern (``26 %`` in French, with a
    no-break space; ``26%`` in English), the percentage rounded as ``f"{100 * x:.1f}"`` rounds.
    Not a number: returned as it is.

    >>> format_percent(0.256, "fr", 1), format_percent(0.256, "en")
    ('25,6\xa0%', '26%')
    """
    plain = _plain(fraction, None)
    if plain is None:
        return _not_a_number(fraction)
    return _written(f"{Decimal(plain[0]) * 100:.{digits}f}", lang, digits, True)


def number_filters(lang: str) -> dict:
    """The Jinja filters of a rendering in ``lang``: ``{{ n | number }}``,
    ``{{ x | number(2) }}`` and ``{{ f | percent }}`` / ``{{ f | percent(1) }}``."""
    def number(value, digits: int | None = None) -> str:
        return format_number(value, lang, digits)

    def percent(value, digits: int = 0) -> str:
        return format_percent(value, lang, digits)

    return {"number": number, "percent": percent}


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
