"""Numbers in the reader's language: atlas.i18n's formatting and the templates' filters against
Babel's own ``format_decimal`` and ``format_percent`` (CLDR data) for French and English, then
a built site in both languages: page text localised, data files and downloads left alone.

The values are invented; every expected string is what Babel itself writes for the same value
and pattern.
"""

from __future__ import annotations

import json
import re
import xml.etree.ElementTree as ET
from decimal import Decimal
from pathlib import Path

import numpy as np
import pytest
from babel.numbers import format_decimal, format_percent

from atlas.build import build
from atlas.i18n import format_number, number_filters, translator
from atlas.i18n import format_percent as our_percent
from atlas.site.render import environment, find_theme
from atlas.site.statfigures import histogram_svg

from .test_languages import two_language_atlas

NNBSP = "\u202f"  # CLDR's French thousands separator (narrow no-break space)
SVG = "{http://www.w3.org/2000/svg}"


@pytest.mark.parametrize("lang", ["fr", "en"])
@pytest.mark.parametrize("value,digits,pattern", [
    (12345.678, 2, "#,##0.00"), (0.5, 2, "#,##0.00"), (-366.16095, 2, "#,##0.00"),
    (1234567, None, "#,##0"), (0.0402, 4, "#,##0.0000"), (58905, 0, "#,##0"),
    (np.float64(0.87654), 3, "#,##0.000"), (np.int64(2048), None, "#,##0"),
])
def test_numbers_are_written_as_babel_writes_them(lang, value, digits, pattern):
    # Babel, the reference, with the same number of decimals (values with no tie to round).
    assert format_number(value, lang, digits) == format_decimal(value, pattern, locale=lang)


def test_french_and_english_marks():
    # The CLDR conventions the issue names: a decimal comma and a narrow no-break space in
    # French, a point and a comma in English.
    assert format_number(12345.5, "fr", 1) == f"12{NNBSP}345,5"
    assert format_number(12345.5, "en", 1) == "12,345.5"
    assert format_percent(0.25, locale="fr") == "25\u00a0%"  # Babel's French percent


@pytest.mark.parametrize("lang", ["fr", "en"])
def test_percentages_follow_babel(lang):
    # Babel's default percent pattern has no decimals; with one, the locale's own pattern
    # gains ".0" (French "#,##0 %" -> "#,##0.0 %"), so compare with that pattern spelt out.
    assert our_percent(0.25, lang) == format_percent(0.25, locale=lang)
    spelt = {"fr": "#,##0.0\u00a0%", "en": "#,##0.0%"}[lang]
    assert our_percent(0.0303, lang, 1) == format_percent(Decimal("0.0303"), spelt, locale=lang)


def test_a_numeric_string_keeps_its_decimals_and_text_passes_through():
    assert format_number("0.50", "fr") == "0,50"  # as the plan stage's fmt() wrote it
    assert format_number("1234", "fr") == f"1{NNBSP}234"
    for text in ("–", "", "ordered states", "1e-05", "lamp-03"):
        assert format_number(text, "fr") == text
    assert format_number(None, "fr") == "" and format_number(float("nan"), "fr") == "–"
    assert format_number(True, "fr") == "True"  # not counted as a number


def test_rounding_matches_python_in_every_language():
    # f"{x:.2f}" is what the English pages showed before numbers were localised; the digits
    # must not change with the language (0.675 is 0.67499999... as a binary float).
    for x in (0.675, 0.125, 2.5, 1 / 3):
        assert format_number(x, "en", 2) == f"{x:.2f}"
        assert format_number(x, "fr", 2) == f"{x:.2f}".replace(".", ",")


def test_template_filters_write_the_page_language():
    env = environment(find_theme("default"), "fr")
    text = env.from_string("{{ a | number(2) }}|{{ b | number }}|{{ c | percent(1) }}|"
                           "{{ d | number }}").render(a=12345.678, b=1200, c=0.256, d="–")
    assert text == "|".join([format_decimal(12345.678, "#,##0.00", locale="fr"),
                             format_decimal(1200, locale="fr"),
                             format_percent(0.256, "#,##0.0\u00a0%", locale="fr"), "–"])
    assert set(number_filters("en")) == {"number", "percent"}
    english = environment(find_theme("default"), "en")
    assert english.from_string("{{ 1200 | number }}").render() == "1,200"


def test_figure_numbers_follow_the_language():
    svg = histogram_svg([3, 1200], [0, 0.5, 1], title="T", x_label="X", y_label="Y",
                        svg_id="h", tr=translator("fr"))
    root = ET.fromstring(svg)
    bars = root.findall(f".//{SVG}rect[@class='bar']")
    assert [b.get("data-count") for b in bars] == ["3", "1200"]  # read by tests and tools
    assert bars[1].find(f"{SVG}title").text == f"0,5 à 1\u00a0: 1{NNBSP}200"
    ticks = [t.text for t in root.iter(f"{SVG}text")]
    assert "0,5" in ticks and "0.5" not in ticks


# --- a built site in English and French (the invented starter spoons) -------------------------

@pytest.fixture(scope="module")
def site(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("numbers")
    out = folder / "site"
    build(two_language_atlas(folder), out)
    return out


def _facts(page: str) -> dict[str, str]:
    return dict(re.findall(r"<dt>(.*?)</dt><dd>(.*?)</dd>", page))


def test_methods_page_numbers_are_localised(site):
    stats = json.loads((site / "downloads" / "stats.json").read_text(encoding="utf-8"))
    loglik, ci = stats["model"]["loglik"], stats["parsimony"]["ci"]
    french = _facts((site / "fr" / "methods.html").read_text(encoding="utf-8"))
    english = _facts((site / "methods.html").read_text(encoding="utf-8"))
    assert french["Log-vraisemblance"] == format_decimal(loglik, "#,##0.00", locale="fr")
    assert english["Log-likelihood"] == format_decimal(loglik, "#,##0.00", locale="en")
    assert "," in french["Log-vraisemblance"] and "," not in english["Log-likelihood"]
    key = "Indice de cohérence d’ensemble (IC)"
    assert french[key] == format_decimal(ci, "#,##0.000", locale="fr")
    assert french["Période de chauffe (burn-in)"].endswith(
        "(" + format_percent(0.25, locale="fr") + ")")


def test_data_files_and_downloads_keep_the_machine_form(site):
    # Only page text is localised: the downloads are the same bytes in both languages (so the
    # French pages share the root's), and the data scripts keep JSON numbers.
    for name in ("stats.json", "matrix.csv", "trees.nex"):
        assert not (site / "fr" / "downloads" / name).exists()
    tree = (site / "fr" / "data" / "tree.js").read_text(encoding="utf-8")
    data = json.loads(tree.split("window.AtlasData.tree = ", 1)[1].rstrip().rstrip(";"))
    assert all(isinstance(n["x"], (int, float)) for n in data["nodes"])
    page = (site / "fr" / "objects" / "spoon-a.html").read_text(encoding="utf-8")
    ld = re.search(r'<script type="application/ld\+json">(.*?)</script>', page, re.S)
    assert ld is None or json.loads(ld.group(1))  # still valid JSON
    svg = (site / "fr" / "figures" / "support.svg").read_text(encoding="utf-8")
    assert all(c.isdigit() for c in re.findall(r'data-count="([^"]*)"', svg))
