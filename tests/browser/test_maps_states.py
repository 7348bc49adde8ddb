"""The distribution map of a character's states and the range outline of a clade, in Chromium.

The numbers the map draws are read from plotly's own figure (``gd.data``) and checked against
the page's text equivalent (the table of objects and places per state), which the builder wrote
from the matrix; the outline against the page's ``data-outline`` vertices. The state switch is
driven from the keyboard, as a reader without a mouse would, and axe-core checks the section
after a state is chosen. Without JavaScript the static per-state maps show instead.
"""

from __future__ import annotations

import re

import pytest

from .conftest import Tab, site_pages
from .test_axe import AXE, format_violations

pytestmark = pytest.mark.browser

_STATE_TRACES = """() => document.getElementById('atlas-map').data
  .filter((t) => t.mode === 'markers+text')
  .map((t) => ({name: t.name, total: t.text.reduce((s, x) => s + (x ? Number(x) : 1), 0),
                n: t.lat.length}))"""

# Objects per state on the map, from the table: the count less those not on the map.
_TABLE = """() => [...document.querySelectorAll('#distribution ~ .table-wrap tbody tr')]
  .map((tr) => {
    const head = tr.querySelector('th').textContent.trim();
    const count = Number(tr.querySelector('td').textContent.trim().split(/\\s/)[0]);
    const off = tr.querySelectorAll('td')[1].textContent.match(/(\\d+) not on the map/);
    return {name: head, mapped: count - (off ? Number(off[1]) : 0)};
  })"""


def character_pages(site) -> list[str]:
    return [p for p in site_pages(site) if re.fullmatch(r"characters/[^/]+\.html", p)
            and 'data-character="' in (site / p).read_text(encoding="utf-8")]


def test_state_map_counts_match_the_table_and_the_switch_works_by_keyboard(tab, site, server):
    pages = character_pages(site)
    assert pages, "no character page has a distribution map"
    visit = tab.open(server + pages[0])
    page = tab.page
    switch = page.locator("fieldset.state-switch")
    assert switch.is_visible()
    table = {r["name"]: r["mapped"] for r in page.evaluate(_TABLE)}
    traces = page.evaluate(_STATE_TRACES)
    assert traces and {t["name"] for t in traces} <= set(table)
    for t in traces:  # every state drawn with as many objects as the table gives it
        assert t["total"] == table[t["name"]], t
    assert {n for n, m in table.items() if m > 0} == {t["name"] for t in traces}
    # keyboard: focus "All states", arrow to the next radio, which shows that state alone
    radios = page.locator('fieldset.state-switch input[type="radio"]')
    radios.first.focus()
    page.keyboard.press("ArrowRight")
    chosen = radios.nth(1)
    assert chosen.is_checked()
    symbol = chosen.get_attribute("data-symbol")
    page.wait_for_function("(n) => document.getElementById('atlas-map').data.filter("
                           "(t) => t.mode === 'markers+text').length === n", arg=1 if any(
                               t["name"].startswith(symbol + ":") for t in traces) else 0)
    alone = page.evaluate(_STATE_TRACES)
    assert all(t["name"].startswith(symbol + ":") for t in alone)
    page.keyboard.press("ArrowLeft")  # back to every state
    page.wait_for_function("(n) => document.getElementById('atlas-map').data.filter("
                           "(t) => t.mode === 'markers+text').length === n", arg=len(traces))
    assert visit.problems() == []


def test_state_map_section_passes_axe_after_choosing_a_state(chromium, site, server):
    if not AXE.is_file():
        pytest.skip(f"{AXE} is missing: run `npm ci` in the repository")
    pages = character_pages(site)
    assert pages
    axe_tab = Tab(chromium, [site.as_uri() + "/", server], bypass_csp=True)
    try:
        visit = axe_tab.open(server + pages[-1])
        page = axe_tab.page
        page.locator('fieldset.state-switch input[type="radio"]').nth(1).check()
        page.wait_for_timeout(300)
        page.add_script_tag(path=str(AXE))
        result = page.evaluate("async () => await axe.run(document.querySelector("
                               "'[aria-labelledby=distribution]'))")
        serious = [v for v in result["violations"] if v["impact"] in ("serious", "critical")]
        assert not serious, format_violations(serious)
        assert visit.problems() == []
    finally:
        axe_tab.close()


def test_clade_map_draws_its_range_outline(tab, site, server):
    nodes = []
    for p in site_pages(site):
        if re.fullmatch(r"nodes/n-[0-9a-f]{10}\.html", p):
            m = re.search(r'data-outline="([^"]+)"', (site / p).read_text(encoding="utf-8"))
            if m:
                nodes.append((p, [tuple(map(float, v.split(","))) for v in m.group(1).split()]))
    if not nodes:
        pytest.skip("no clade of this atlas has places far enough apart for an outline")
    path, vertices = max(nodes, key=lambda n: len(n[1]))
    visit = tab.open(server + path)
    lines = tab.page.evaluate("() => document.getElementById('atlas-map').data"
                              ".filter((t) => t.mode === 'lines' && t.line.dash === 'dash')"
                              ".map((t) => t.lat.map((lat, i) => [lat, t.lon[i]]))")
    assert len(lines) == 1
    drawn = [tuple(v) for v in lines[0]]
    closed = vertices + vertices[:1] if len(vertices) >= 3 else vertices
    assert drawn == closed
    assert tab.page.locator(".range-legend").is_visible()
    assert visit.problems() == []


def test_without_javascript_the_static_state_maps_show(chromium, site):
    pages = character_pages(site)
    context = chromium.new_context(java_script_enabled=False)
    try:
        page = context.new_page()
        page.goto((site / pages[0]).as_uri())
        assert not page.locator("fieldset.state-switch").is_visible()
        images = page.locator(".state-panels img")
        assert images.count() >= 2
        for i in range(images.count()):
            assert images.nth(i).evaluate("(img) => img.complete && img.naturalWidth > 0")
        # the overlay lies exactly on the basemap
        boxes = page.evaluate("() => [...document.querySelectorAll('.state-panel')].map((f) => "
                              "[...f.querySelectorAll('img')].map((i) => { const r = "
                              "i.getBoundingClientRect(); "
                              "return [r.x, r.y, r.width, r.height]; }))")
        for base, top in boxes:
            assert base == pytest.approx(top, abs=1)
    finally:
        context.close()
