"""Click-through in the built site: tree tips and nodes open their pages, the map draws land.

Points are found in plotly's own drawing: every marker is an SVG ``path.point`` whose bound datum
carries its index ``i`` into the trace, and the trace's ``customdata`` holds the link the
theme's click handler follows. The test moves the mouse onto the marker and clicks it, as a
reader would.
"""

from __future__ import annotations

import re

import pytest
from playwright.sync_api import TimeoutError as PlaywrightTimeout

from .conftest import url_for

pytestmark = pytest.mark.browser

# Every marker of a plot with a link: its trace, its index, its link and its centre on screen
# (after scrolling it into view).
_POINTS = """(id) => {
  const gd = document.getElementById(id);
  const out = [];
  gd.querySelectorAll('.trace').forEach((trace, t) => {
    trace.querySelectorAll('path.point').forEach((el) => {
      const d = el.__data__;
      const full = d && trace.__data__ && trace.__data__[0] && trace.__data__[0].trace;
      const href = full && full.customdata ? full.customdata[d.i] : null;
      if (href) out.push({trace: t, i: d.i, href: href});
    });
  });
  return out;
}"""

_CENTRE = """([id, t, i]) => {
  const trace = document.getElementById(id).querySelectorAll('.trace')[t];
  const el = [...trace.querySelectorAll('path.point')].find((p) => p.__data__.i === i);
  el.scrollIntoView({block: 'center', inline: 'center', behavior: 'instant'});
  const r = el.getBoundingClientRect();
  return [r.left + r.width / 2, r.top + r.height / 2];
}"""


def click_point(tab, plot_id: str, pattern: str) -> str:
    """Click the first marker whose link matches ``pattern``; return the link it should open."""
    points = tab.page.evaluate(_POINTS, plot_id)
    chosen = [p for p in points if re.fullmatch(pattern, p["href"])]
    assert chosen, f"no marker in #{plot_id} links to {pattern}: {points}"
    point = chosen[len(chosen) // 2]
    # plotly picks the hovered point before the click; on a loaded machine that can take a
    # while, so the hover and click are tried again (a real failure fails all three times).
    # The marker is found afresh each time, in case a late resize has moved the drawing.
    for attempt in range(3):
        x, y = tab.page.evaluate(_CENTRE, [plot_id, point["trace"], point["i"]])
        tab.page.mouse.move(x - 1, y)
        tab.page.mouse.move(x, y)
        tab.page.wait_for_timeout(150 * (attempt + 1))
        try:
            with tab.page.expect_navigation(timeout=8_000):
                tab.page.mouse.click(x, y)
            return point["href"]
        except PlaywrightTimeout:
            if attempt == 2:
                raise
    return point["href"]


@pytest.mark.parametrize("mode", ["file", "http"])
@pytest.mark.parametrize("kind, pattern, heading", [
    ("tip", r"(\.\./)?objects/[^/]+\.html", "page-object"),
    ("node", r"(\.\./)?nodes/n-[0-9a-f]{10}\.html", "page-node"),
])
def test_clicking_the_lineage_tree_opens_the_page(tab, site, server, mode, kind, pattern,
                                                  heading):
    visit = tab.open(url_for(site, server, mode, "tree.html"))
    href = click_point(tab, "lineage-tree", pattern)
    assert tab.page.url == url_for(site, server, mode, href)
    assert heading in (tab.page.get_attribute("body", "class") or "")
    assert visit.problems() == []


def test_clicking_a_place_on_the_map_opens_its_page(tab, site, server):
    visit = tab.open(url_for(site, server, "http", "map.html"))
    href = click_point(tab, "atlas-map", r"places/[^/]+\.html")
    assert tab.page.url == server + href
    assert visit.problems() == []


_LAND = """() => [...document.querySelectorAll('#atlas-map .layer.land path')]
    .map((p) => (p.getAttribute('d') || '').length)"""

_OUTLINES = """() => [...document.querySelectorAll('#atlas-map .trace.scattergeo path.js-line')]
    .map((p) => (p.getAttribute('d') || '').length)"""


def test_the_map_draws_land_outlines(tab, site, server):
    visit = tab.open(url_for(site, server, "file", "map.html"))
    page = tab.page
    basemap = page.evaluate("() => window.AtlasData.basemap")
    if basemap and basemap.get("features"):
        # the atlas's own outlines (an invented coast, say) are drawn as filled lines
        outlines = page.evaluate(_OUTLINES)
        assert outlines and all(n > 10 for n in outlines), outlines
    assert page.evaluate(_LAND), "the map has no land layer"
    # The bundled world outlines draw wherever land is in view: widen the view to the globe.
    page.evaluate("() => Plotly.relayout('atlas-map', {'geo.lataxis.range': [-90, 90], "
                  "'geo.lonaxis.range': [-180, 180]})")
    land = page.evaluate(_LAND)
    assert land and max(land) > 1000, f"land outlines not drawn: path lengths {land}"
    assert visit.problems() == []
