"""Extract the interface strings and update the gettext catalogues in atlas/locale/.

    python scripts/update_catalogues.py            # atlas.pot, then every <lang>/.../atlas.po
    python scripts/update_catalogues.py --init es  # also start a catalogue for Spanish

Strings are found with Babel's extractors: the Python extractor over ``atlas/**/*.py``
(``_``, ``gettext``, ``ngettext``, ``N_``) and Jinja's ``babel_extract`` over
``themes/*/templates/*.html``. The template ``atlas/locale/atlas.pot`` is rewritten; each
catalogue keeps its translations, gains the new msgids (empty, to be translated) and loses the
ones no template or module uses any more. No fuzzy matching: a changed string is a new one.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))

from babel.messages.catalog import Catalog  # noqa: E402
from babel.messages.pofile import write_po  # noqa: E402

from atlas.i18n import CREATED, DOMAIN, catalogue_path, extract_catalogue, read_catalogue  # noqa: E402,E501

LOCALE = REPO / "atlas" / "locale"


def write(catalog: Catalog, path: Path) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    with open(path, "wb") as handle:
        write_po(handle, catalog, width=100, ignore_obsolete=True, include_previous=False)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--init", action="append", default=[], metavar="LANG",
                        help="start a catalogue for this language (repeatable)")
    args = parser.parse_args(argv)
    template = extract_catalogue(REPO / "atlas", REPO / "themes")
    write(template, LOCALE / f"{DOMAIN}.pot")
    print(f"{len(template)} msgids -> {LOCALE / f'{DOMAIN}.pot'}")
    languages = sorted({p.parent.parent.name for p in LOCALE.glob(f"*/LC_MESSAGES/{DOMAIN}.po")}
                       | set(args.init))
    for lang in languages:
        path = catalogue_path(lang, LOCALE)
        if path.is_file():
            catalog = read_catalogue(path)
        else:
            catalog = Catalog(locale=lang, domain=DOMAIN, project="lineage-atlas",
                              creation_date=CREATED, fuzzy=False)
        catalog.update(template, no_fuzzy_matching=True, update_creation_date=False)
        catalog.revision_date = CREATED
        write(catalog, path)
        missing = sum(1 for m in catalog if m.id and not all(
            m.string if isinstance(m.string, (list, tuple)) else [m.string]))
        print(f"{lang}: {len(catalog)} msgids, {missing} untranslated -> {path}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
