"""Contrast and colour-vision checks for the default theme's colour scheme.

The light and dark custom properties are read from ``themes/default/assets/atlas.css`` (the
``:root`` rule at top level, and the ``:root`` rule inside ``@media (prefers-color-scheme:
dark)``, which overrides the light one) and checked against WCAG 2.2:

* relative luminance (WCAG 2.2, "Definitions: relative luminance"):
  ``L = 0.2126 R + 0.7152 G + 0.0722 B`` with each sRGB channel ``c`` (0..1) linearised as
  ``c / 12.92`` when ``c <= 0.04045``, else ``((c + 0.055) / 1.055) ** 2.4``;
* contrast ratio (WCAG 2.2, "Definitions: contrast ratio"): ``(L1 + 0.05) / (L2 + 0.05)`` with
  ``L1`` the lighter of the two;
* text needs 4.5:1 (SC 1.4.3, level AA); focus indicators and graphical objects such as the
  clade markers need 3:1 against adjacent colours (SC 1.4.11, non-text contrast).

The clade palette is also checked for distinguishability under simulated dichromacy, with the
full-severity matrices of Machado, Oliveira & Fernandes (2009), "A physiologically-based model
for simulation of color vision deficiency", IEEE Trans. Visualization and Computer Graphics
15(6):1291-1298, applied in linear RGB, and CIE 1976 L*a*b* distance (CIE 15:2004) between the
simulated colours.
"""

from __future__ import annotations

import itertools
import math
import re
from pathlib import Path

import pytest

CSS_PATH = Path(__file__).resolve().parents[1] / "themes" / "default" / "assets" / "atlas.css"
CLADES = [f"--clade-{i}" for i in range(8)]
TEXT_COLOURS = ["--fg", "--muted", "--link", "--link-visited"]
TEXT_BACKGROUNDS = ["--bg", "--surface"]


# ---- WCAG 2.2 formulas ----------------------------------------------------------------------


def parse_hex(colour: str) -> tuple[int, int, int]:
    """``#rgb`` or ``#rrggbb`` to 8-bit channels."""
    text = colour.strip().lower()
    if not re.fullmatch(r"#(?:[0-9a-f]{3}|[0-9a-f]{6})", text):
        raise ValueError(f"not a #rgb or #rrggbb colour: {colour!r}")
    digits = text[1:]
    if len(digits) == 3:
        digits = "".join(ch * 2 for ch in digits)
    return int(digits[0:2], 16), int(digits[2:4], 16), int(digits[4:6], 16)


def linear_channel(value: int) -> float:
    """sRGB 8-bit channel to linear light (WCAG 2.2 'relative luminance' definition)."""
    c = value / 255
    return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4


def relative_luminance(colour: str) -> float:
    """L = 0.2126 R + 0.7152 G + 0.0722 B over linearised channels (WCAG 2.2)."""
    r, g, b = (linear_channel(v) for v in parse_hex(colour))
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


def contrast_ratio(first: str, second: str) -> float:
    """(L1 + 0.05) / (L2 + 0.05), L1 the lighter (WCAG 2.2 'contrast ratio' definition)."""
    lighter, darker = sorted((relative_luminance(first), relative_luminance(second)), reverse=True)
    return (lighter + 0.05) / (darker + 0.05)


# ---- Colour-vision simulation ----------------------------------------------------------------

# Machado, Oliveira & Fernandes (2009), severity 1.0, rows applied to linear RGB (from memory;
# these are the widely reproduced values of the paper's supplementary table).
DICHROMACY = {
    "protanopia": (
        (0.152286, 1.052583, -0.204868),
        (0.114503, 0.786281, 0.099216),
        (-0.003882, -0.048116, 1.051998),
    ),
    "deuteranopia": (
        (0.367322, 0.860646, -0.227968),
        (0.280085, 0.672501, 0.047413),
        (-0.011820, 0.042940, 0.968881),
    ),
    "tritanopia": (
        (1.255528, -0.076749, -0.178779),
        (-0.078411, 0.930809, 0.147602),
        (0.004733, 0.691367, 0.303900),
    ),
}
IDENTITY = ((1.0, 0.0, 0.0), (0.0, 1.0, 0.0), (0.0, 0.0, 1.0))
# The eight colours of Okabe & Ito (2008), "Color Universal Design" (from memory).
OKABE_ITO = ("#000000", "#e69f00", "#56b4e9", "#009e73", "#f0e442", "#0072b2", "#d55e00", "#cc79a7")


def simulate(colour: str, matrix: tuple[tuple[float, ...], ...]) -> tuple[float, float, float]:
    """Linear RGB of ``colour`` as seen under ``matrix``, clipped to the display gamut."""
    rgb = [linear_channel(v) for v in parse_hex(colour)]
    out = [sum(row[j] * rgb[j] for j in range(3)) for row in matrix]
    r, g, b = (min(1.0, max(0.0, v)) for v in out)
    return r, g, b


def cie_lab(linear_rgb: tuple[float, float, float]) -> tuple[float, float, float]:
    """Linear sRGB to CIE 1976 L*a*b* under D65 (IEC 61966-2-1 matrix; CIE 15:2004)."""
    r, g, b = linear_rgb
    x = (0.4124 * r + 0.3576 * g + 0.1805 * b) / 0.95047
    y = 0.2126 * r + 0.7152 * g + 0.0722 * b
    z = (0.0193 * r + 0.1192 * g + 0.9505 * b) / 1.08883

    def f(t: float) -> float:
        return t ** (1 / 3) if t > 216 / 24389 else (24389 / 27 * t + 16) / 116

    fx, fy, fz = f(x), f(y), f(z)
    return 116 * fy - 16, 500 * (fx - fy), 200 * (fy - fz)


def closest_pair(
    colours: list[str], matrix: tuple[tuple[float, ...], ...]
) -> tuple[float, str, str]:
    """Smallest CIE76 distance between any two colours after simulation, and that pair."""
    labs = {c: cie_lab(simulate(c, matrix)) for c in colours}
    return min((math.dist(labs[a], labs[b]), a, b) for a, b in itertools.combinations(colours, 2))


# ---- Reading the stylesheet ---------------------------------------------------------------


def css_blocks(css: str) -> list[tuple[tuple[str, ...], str]]:
    """Every rule body with the chain of selectors / at-rules that encloses it."""
    text = re.sub(r"/\*.*?\*/", "", css, flags=re.DOTALL)
    blocks: list[tuple[tuple[str, ...], str]] = []
    stack: list[tuple[str, int]] = []
    start = 0
    for pos, ch in enumerate(text):
        if ch == "{":
            prelude = text[start:pos].split(";")[-1].split("}")[-1].strip()
            stack.append((" ".join(prelude.split()), pos + 1))
            start = pos + 1
        elif ch == "}":
            prelude, body_start = stack.pop()
            path = tuple(p for p, _ in stack) + (prelude,)
            blocks.append((path, text[body_start:pos]))
            start = pos + 1
    assert not stack, "unbalanced braces in atlas.css"
    return blocks


def custom_properties(body: str) -> dict[str, str]:
    """The ``--name: value`` declarations directly inside one rule body."""
    flat = re.sub(r"\{[^{}]*\}", "", body)
    return {m[0]: m[1].strip() for m in re.findall(r"(--[\w-]+)\s*:\s*([^;]+);", flat)}


def resolve(props: dict[str, str], name: str, seen: tuple[str, ...] = ()) -> str:
    """Follow ``var(--x)`` references down to a literal colour."""
    value = props[name]
    ref = re.fullmatch(r"var\(\s*(--[\w-]+)\s*\)", value)
    if ref:
        assert ref[1] not in seen, f"cycle through {ref[1]}"
        return resolve(props, ref[1], seen + (name,))
    return value


def read_schemes(css: str) -> dict[str, dict[str, str]]:
    """The light scheme (top-level :root) and the dark scheme (light overridden by the dark
    media query's :root), as custom property maps."""
    light: dict[str, str] = {}
    dark_overrides: dict[str, str] = {}
    for path, body in css_blocks(css):
        if path == (":root",):
            light.update(custom_properties(body))
        elif path[-1] == ":root" and any("prefers-color-scheme: dark" in p for p in path[:-1]):
            dark_overrides.update(custom_properties(body))
    return {"light": light, "dark": {**light, **dark_overrides}}


@pytest.fixture(scope="module")
def schemes() -> dict[str, dict[str, str]]:
    return read_schemes(CSS_PATH.read_text(encoding="utf-8"))


def colour_of(scheme: dict[str, str], name: str) -> str:
    assert name in scheme, f"{name} is not defined"
    return resolve(scheme, name)


# ---- The formulas themselves --------------------------------------------------------------


def test_black_on_white_is_21_to_1() -> None:
    # 21:1 is the maximum stated in the WCAG 2.2 contrast-ratio definition (1.05 / 0.05).
    assert contrast_ratio("#000000", "#ffffff") == pytest.approx(21.0)
    assert contrast_ratio("#fff", "#000") == pytest.approx(21.0)


def test_same_colour_is_1_to_1() -> None:
    # Closed form: (L + 0.05) / (L + 0.05) = 1 for any colour.
    assert contrast_ratio("#3a7bd5", "#3a7bd5") == pytest.approx(1.0)


def test_grey_777_on_white_just_misses_aa() -> None:
    # Computed by hand from the WCAG formula: 0x77 = 119 -> c = 0.46667,
    # ((0.46667 + 0.055) / 1.055) ** 2.4 = 0.18447 = L; (1.05) / (0.18447 + 0.05) = 4.478.
    assert contrast_ratio("#777777", "#ffffff") == pytest.approx(4.478, abs=0.002)
    assert contrast_ratio("#777777", "#ffffff") < 4.5


def test_linearisation_knee() -> None:
    # WCAG 2.2 relative-luminance definition: 10/255 = 0.0392 <= 0.04045 takes the linear
    # branch, so L(#0a0a0a) = 0.0392 / 12.92 = 0.003035 (hand computation).
    assert relative_luminance("#0a0a0a") == pytest.approx(10 / 255 / 12.92)
    # Pure primaries give the coefficients themselves (closed form).
    assert relative_luminance("#ff0000") == pytest.approx(0.2126)
    assert relative_luminance("#00ff00") == pytest.approx(0.7152)
    assert relative_luminance("#0000ff") == pytest.approx(0.0722)


def test_lab_of_white_and_black() -> None:
    # CIE 15:2004: the reference white is L* = 100, a* = b* = 0; black is L* = 0.
    white = cie_lab((1.0, 1.0, 1.0))
    assert white == pytest.approx((100.0, 0.0, 0.0), abs=0.05)
    assert cie_lab((0.0, 0.0, 0.0)) == pytest.approx((0.0, 0.0, 0.0), abs=1e-9)


def test_dichromacy_matrices_keep_greys_grey() -> None:
    # Machado et al. (2009) normalise each matrix so that white maps to white: every row sums
    # to 1, so a neutral grey is unchanged (property of the published matrices).
    for name, matrix in DICHROMACY.items():
        for row in matrix:
            assert sum(row) == pytest.approx(1.0, abs=1e-5), name
        assert simulate("#808080", matrix) == pytest.approx(simulate("#808080", IDENTITY))


def test_dichromacy_merges_red_and_green() -> None:
    # Known behaviour of dichromacy (invented colour pair): a red and a green far apart in
    # normal vision come much closer for protanopes and deuteranopes, but not for tritanopes,
    # whose confusion lines run between blue and yellow.
    red, green = "#d62728", "#5f8f00"
    normal = closest_pair([red, green], IDENTITY)[0]
    assert closest_pair([red, green], DICHROMACY["deuteranopia"])[0] < normal / 10
    assert closest_pair([red, green], DICHROMACY["protanopia"])[0] < normal / 2
    assert closest_pair([red, green], DICHROMACY["tritanopia"])[0] > normal * 0.8


def test_stylesheet_parser_reads_both_schemes() -> None:
    # Invented stylesheet: the dark block overrides one property and inherits the other.
    css = """
    /* comment { with braces } */
    :root { --bg: #fff; --fg: var(--ink); --ink: #111; }
    @media (prefers-color-scheme: dark) { :root { --bg: #000; } }
    .x { --bg: #f00; }
    """
    got = read_schemes(css)
    assert got["light"]["--bg"] == "#fff"
    assert resolve(got["light"], "--fg") == "#111"
    assert got["dark"]["--bg"] == "#000"
    assert got["dark"]["--ink"] == "#111"


# ---- The theme ---------------------------------------------------------------------------


@pytest.mark.parametrize("scheme_name", ["light", "dark"])
def test_dark_scheme_is_really_different(schemes, scheme_name: str) -> None:
    bg = relative_luminance(colour_of(schemes[scheme_name], "--bg"))
    if scheme_name == "light":
        assert bg > 0.8
    else:
        assert bg < 0.05


@pytest.mark.parametrize("scheme_name", ["light", "dark"])
@pytest.mark.parametrize("text", TEXT_COLOURS)
@pytest.mark.parametrize("background", TEXT_BACKGROUNDS)
def test_text_contrast_aa(schemes, scheme_name: str, text: str, background: str) -> None:
    scheme = schemes[scheme_name]
    ratio = contrast_ratio(colour_of(scheme, text), colour_of(scheme, background))
    assert ratio >= 4.5, f"{scheme_name}: {text} on {background} is {ratio:.2f}:1"


@pytest.mark.parametrize("scheme_name", ["light", "dark"])
@pytest.mark.parametrize("background", ["--badge-uncertain-bg", "--badge-withheld-bg", "--track"])
@pytest.mark.parametrize("text", ["--fg", "--muted"])
def test_badge_text_contrast_aa(schemes, scheme_name: str, background: str, text: str) -> None:
    # Badges, notices and withheld chips put body or muted text on these tints.
    scheme = schemes[scheme_name]
    ratio = contrast_ratio(colour_of(scheme, text), colour_of(scheme, background))
    assert ratio >= 4.5, f"{scheme_name}: {text} on {background} is {ratio:.2f}:1"


@pytest.mark.parametrize("scheme_name", ["light", "dark"])
@pytest.mark.parametrize(
    "graphic, background",
    [
        ("--focus", "--bg"),
        ("--focus", "--surface"),
        ("--accent", "--bg"),
        ("--accent", "--track"),
        ("--border-strong", "--bg"),
        # map markers are outlined in --marker-line, which must stand out from the land
        ("--marker-line", "--land"),
        ("--marker-line", "--region"),
        ("--badge-uncertain-line", "--badge-uncertain-bg"),
        ("--badge-withheld-line", "--badge-withheld-bg"),
    ],
)
def test_non_text_contrast(schemes, scheme_name: str, graphic: str, background: str) -> None:
    scheme = schemes[scheme_name]
    ratio = contrast_ratio(colour_of(scheme, graphic), colour_of(scheme, background))
    assert ratio >= 3.0, f"{scheme_name}: {graphic} on {background} is {ratio:.2f}:1"


@pytest.mark.parametrize("scheme_name", ["light", "dark"])
@pytest.mark.parametrize("clade", CLADES)
def test_clade_colours_against_background(schemes, scheme_name: str, clade: str) -> None:
    scheme = schemes[scheme_name]
    ratio = contrast_ratio(colour_of(scheme, clade), colour_of(scheme, "--bg"))
    assert ratio >= 3.0, f"{scheme_name}: {clade} on --bg is {ratio:.2f}:1"


@pytest.mark.parametrize("scheme_name", ["light", "dark"])
def test_clade_colours_are_distinct(schemes, scheme_name: str) -> None:
    colours = [colour_of(schemes[scheme_name], c).lower() for c in CLADES]
    assert len(set(colours)) == 8, colours


@pytest.mark.parametrize("scheme_name", ["light", "dark"])
@pytest.mark.parametrize("vision", ["normal", *DICHROMACY])
def test_clade_colours_stay_apart_under_dichromacy(schemes, scheme_name: str, vision: str) -> None:
    # Threshold 12 CIE76 units (invented criterion: well above the ~2.3 units of a just
    # noticeable difference, Sharma 2003, Digital Color Imaging Handbook (from memory)).
    # Sanity reference computed in this file, not hard-coded: the published Okabe & Ito set
    # must pass the same threshold, or the threshold itself is unreasonable.
    colours = [colour_of(schemes[scheme_name], c) for c in CLADES]
    matrix = IDENTITY if vision == "normal" else DICHROMACY[vision]
    assert closest_pair(list(OKABE_ITO), matrix)[0] >= 12
    distance, a, b = closest_pair(colours, matrix)
    assert distance >= 12, f"{scheme_name}, {vision}: {a} and {b} are only {distance:.1f} apart"


def test_every_colour_property_is_a_plain_colour(schemes) -> None:
    # The checks above only mean something if every colour is parseable: no rgb(), hsl() or
    # named colours slip past them.
    others = "--focus --accent --border --border-strong --track --land --land-line --region"
    others += " --marker-line --badge-uncertain-bg --badge-withheld-bg"
    colour_names = TEXT_COLOURS + TEXT_BACKGROUNDS + CLADES + others.split()
    for scheme in schemes.values():
        for name in colour_names:
            parse_hex(colour_of(scheme, name))


def test_focus_outline_uses_the_focus_colour() -> None:
    css = re.sub(r"/\*.*?\*/", "", CSS_PATH.read_text(encoding="utf-8"), flags=re.DOTALL)
    rule = re.search(r"(?m)^:focus-visible\s*\{([^}]*)\}", css)
    assert rule, "no :focus-visible rule"
    width = re.search(r"outline:\s*(\d+)px\s+solid\s+var\(--focus\)", rule[1])
    assert width and int(width[1]) >= 2


# ---- The theme's scripts keep every request on the site ------------------------------------

ASSETS = CSS_PATH.parent
SCRIPTS = [ASSETS / "tree.js", ASSETS / "map.js"]


@pytest.mark.parametrize("name", ["atlas.css", "print.css", "tree.js", "map.js"])
def test_assets_contain_no_outside_address(name: str) -> None:
    # The site must work offline and under file://: no absolute or protocol-relative URL
    # may appear in the theme's own stylesheets and scripts (the print rule that shows
    # external links matches on the text "http", which is not a URL).
    text = (ASSETS / name).read_text(encoding="utf-8")
    assert not re.search(r"(?:https?:)?//[a-z0-9-]+\.[a-z]", text, flags=re.IGNORECASE)
    assert "@import" not in text and "url(" not in text


@pytest.mark.parametrize("script", SCRIPTS, ids=lambda p: p.name)
def test_scripts_turn_off_chart_sharing(script: Path) -> None:
    # plotly.js 4 shows a button that uploads the chart to a remote server unless the config
    # says otherwise (its config default showSendToCloud is true, read from the bundled
    # plotly.min.js): both scripts must switch it off and drop the button.
    text = script.read_text(encoding="utf-8")
    assert re.search(r"showSendToCloud:\s*false", text)
    assert re.search(r'plotlyServerURL:\s*""', text)
    assert '"sendChartToCloud"' in text
    assert re.search(r"displaylogo:\s*false", text)
    assert re.search(r"responsive:\s*true", text)


@pytest.mark.parametrize("script", SCRIPTS, ids=lambda p: p.name)
def test_scripts_define_no_globals(script: Path) -> None:
    # Classic scripts share one global scope: everything lives inside one IIFE in strict mode.
    text = re.sub(r"/\*.*?\*/", "", script.read_text(encoding="utf-8"), flags=re.DOTALL).strip()
    assert text.startswith("(function () {") and text.endswith("})();")
    assert '"use strict";' in text
    assert not re.search(r"window\.[A-Za-z_$][\w$]*\s*=(?!=)", text)
