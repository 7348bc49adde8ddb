"""The second interface language in a browser: French pages of the demo, and the language
switch used by keyboard alone.

The demo atlas ships English at the site root and French under ``fr/`` (invented content; a few
notes translated by hand, the others shown in English and marked ``lang="en"``).
"""

from __future__ import annotations

import os

import pytest

from .conftest import Tab, site_pages
from .test_axe import AXE, format_violations

pytestmark = pytest.mark.browser

FRENCH = ["fr/index.html", "fr/objects/lamp-03.html", "fr/objects/lamp-04.html",
          "fr/search.html", "fr/tree.html"]


def needs_french(site) -> None:
    if "fr/index.html" not in site_pages(site):
        pytest.skip("the built site has no French pages (the demo atlas is not there)")


@pytest.mark.parametrize("mode", ["file", "http"])
def test_french_pages_load_cleanly_and_say_french(tab, site, server, mode):
    needs_french(site)
    for page in FRENCH:
        url = (site / page).as_uri() if mode == "file" else server + page
        visit = tab.open(url)
        assert visit.problems() == [], (page, visit.problems())
        assert tab.page.evaluate("document.documentElement.lang") == "fr", page
        nav = tab.page.locator("nav.site-nav").first.inner_text()
        assert "Arbre des lignées" in nav and "Glossaire" in nav, page
    tab.open(server + "fr/objects/lamp-03.html")
    note = tab.page.locator(".note-body").first
    assert note.get_attribute("lang") is None and "Lampe piriforme" in note.inner_text()
    tab.open(server + "fr/objects/lamp-04.html")  # no French note: English, marked as such
    assert tab.page.locator(".note-body").first.get_attribute("lang") == "en"


def test_french_search_finds_a_french_title(tab, site, server):
    needs_french(site)
    tab.open(server + "fr/search.html")
    tab.page.fill("#search-q", "piriforme rayons")
    tab.page.wait_for_function(
        "() => document.querySelectorAll('#search-results li').length > 0", timeout=5000)
    assert "résultat" in tab.page.locator("#search-status").inner_text()  # said in French
    first = tab.page.locator("#search-results li a").first
    assert "Lampe 3" in first.inner_text()
    first.click()
    tab.page.wait_for_url("**/fr/objects/lamp-03.html")
    assert tab.page.evaluate("document.documentElement.lang") == "fr"


def _tab_to(page, selector: str, limit: int = 60) -> None:
    """Press Tab until the element matching ``selector`` has the focus."""
    for _ in range(limit):
        page.keyboard.press("Tab")
        if page.evaluate(f"() => document.activeElement.matches({selector!r})"):
            return
    raise AssertionError(f"Tab never reached {selector}")


def test_language_switch_by_keyboard(tab, site, server):
    needs_french(site)
    page = tab.page
    tab.open(server + "objects/lamp-03.html")
    _tab_to(page, ".language-switch a[hreflang='fr']")
    assert page.evaluate("document.activeElement.getAttribute('lang')") == "fr"
    page.keyboard.press("Enter")
    page.wait_for_url("**/fr/objects/lamp-03.html")
    assert page.evaluate("document.documentElement.lang") == "fr"
    current = page.locator(".language-switch a[aria-current='true']")
    assert current.inner_text() == "Français"
    _tab_to(page, ".language-switch a[hreflang='en']")
    page.keyboard.press("Enter")
    page.wait_for_url(lambda url: url.endswith("/objects/lamp-03.html") and "/fr/" not in url)
    assert page.evaluate("document.documentElement.lang") == "en"


@pytest.mark.parametrize("page", ["fr/index.html", "fr/objects/lamp-03.html",
                                  "fr/objects/lamp-04.html"])
def test_french_pages_pass_axe(chromium, site, server, page):
    needs_french(site)
    if not AXE.is_file():
        reason = f"{AXE} is missing: run `npm ci` in the repository"
        if os.environ.get("CI") == "true":
            pytest.fail(reason)
        pytest.skip(reason)
    axe_tab = Tab(chromium, [site.as_uri() + "/", server], bypass_csp=True)
    try:
        visit = axe_tab.open(server + page)
        axe_tab.page.add_script_tag(path=str(AXE))
        result = axe_tab.page.evaluate("() => axe.run(document, {resultTypes: ['violations']})")
        bad = [v for v in result["violations"] if v["impact"] in ("serious", "critical")]
        assert not bad, f"{page}:\n{format_violations(bad)}"
        assert visit.problems() == []
    finally:
        axe_tab.close()


# --- the lineage tree speaks the page's language ----------------------------------------------
# The words are the French catalogue's (atlas/locale/fr); the numbers follow CLDR for French
# (a decimal comma), as the browser's own Intl.NumberFormat("fr") writes them.

_TREE = """() => {
  const gd = document.getElementById('lineage-tree');
  return {legend: (gd.querySelector('.legend') || {}).textContent || '',
          hover: gd.data.filter(t => t.meta === 'nodes').map(t => t.hovertext).flat(),
          text: gd.data.filter(t => t.meta === 'nodes').map(t => t.text || []).flat(),
          names: gd.data.map(t => t.name || ''),
          buttons: [...gd.querySelectorAll('.modebar-btn')].map(b => b.getAttribute('data-title')),
          decimal: new Intl.NumberFormat('fr').format(0.5).charAt(1)};
}"""


def _redrawn(page) -> None:
    page.wait_for_timeout(150)  # the script redraws on the next animation frame
    page.evaluate("() => new Promise(r => requestAnimationFrame(() => r()))")


def test_french_tree_draws_its_words_in_french(tab, site, server):
    needs_french(site)
    page = tab.page
    visit = tab.open(server + "fr/tree.html")
    assert visit.problems() == []
    drawn = page.evaluate(_TREE)
    assert drawn["decimal"] == ","
    assert drawn["legend"].startswith("Légende")  # the key's title (English: "Key")
    assert "Branche" in drawn["names"] and "Objet (ouvre sa page)" in drawn["names"]
    assert all("Soutien" in h and "objets" in h for h in drawn["hover"] if "Racine" not in h)
    assert any("Pas depuis la racine" in h or "Longueur de branche" in h for h in drawn["hover"])
    supports = [t for t in drawn["text"] if t]
    assert supports and all("," in t and "." not in t for t in supports)  # 0,87, not 0.87
    assert "Zoom avant" in drawn["buttons"] and "Zoom in" not in drawn["buttons"]
    # shaded by a trait translated in the demo (characters/b01.fr.md): French key and states
    page.select_option("#tree-shade", "b01")
    _redrawn(page)
    legend = page.evaluate(_TREE)["legend"]
    assert "Contour du corps en plan\u00a0: état le plus probable" in legend
    assert "état 1 (piriforme), probabilité de 0,9 ou plus" in legend
    options = page.eval_on_selector_all("#tree-state option", "os => os.map(o => o.text)")
    assert options[0] == "État le plus probable"
    assert "Probabilité de l’état 2 (naviforme)" in options
    page.fill("#tree-find", "zzz")
    page.click("#tree-controls button[type=submit]")
    _redrawn(page)
    status = page.text_content("#tree-find-status")
    assert status == "Aucun objet ne correspond à «\u00a0zzz\u00a0»."


def test_french_character_page_shades_its_tree_in_french(tab, site, server):
    needs_french(site)
    visit = tab.open(server + "fr/characters/h02.html")
    assert visit.problems() == []
    legend = tab.page.evaluate(_TREE)["legend"]
    assert "Type d’anse\u00a0: état le plus probable (plus pâle\u00a0: moins certain)" in legend
    assert "état 2 (en ruban)" in legend
    english = tab.open(server + "characters/h02.html")  # the English page keeps English
    assert english.problems() == []
    legend = tab.page.evaluate(_TREE)["legend"]
    assert "Handle type: most probable state" in legend and "state 2 (strap)" in legend


def _map_buttons(tab, url: str) -> list[str]:
    visit = tab.open(url)
    assert visit.problems() == []
    tab.page.wait_for_function(
        "() => document.querySelectorAll('#atlas-map .modebar-btn').length > 0", timeout=15000)
    return tab.page.eval_on_selector_all(
        "#atlas-map .modebar-btn", "bs => bs.map(b => b.getAttribute('data-title'))")


def test_french_map_tool_bar_speaks_french(tab, site, server):
    needs_french(site)
    titles = _map_buttons(tab, server + "fr/map.html")
    # the French catalogue's words (atlas/locale/fr), not plotly's English ones
    assert "Zoom avant" in titles and "Réinitialiser" in titles, titles
    assert "Zoom in" not in titles and "Reset" not in titles, titles
    assert "Zoom in" in _map_buttons(tab, server + "map.html")  # English stays plotly's
