"""Every page of the built site, opened from disk and over http, loads cleanly and stays local.

For each page: no console error, no uncaught exception, no failed load (network failure or HTTP
status >= 400), and no request to anything outside the site (such requests are aborted and
recorded). Every figure box is drawn by its script, not left as unavailable.
"""

from __future__ import annotations

import pytest

from .conftest import site_pages, url_for

pytestmark = pytest.mark.browser


@pytest.mark.parametrize("mode", ["file", "http"])
def test_every_page_loads_cleanly(tab, site, server, mode):
    pages = site_pages(site)
    assert "index.html" in pages and len(pages) > 10
    problems: dict[str, list[str]] = {}
    undrawn: list[str] = []
    visits = tab.open_all([url_for(site, server, mode, page) for page in pages])
    for page, visit in zip(pages, visits.values()):
        if visit.problems():
            problems[page] = visit.problems()
        if visit.undrawn:
            undrawn.append(page)
    report = "\n".join(f"{page}:\n  " + "\n  ".join(lines) for page, lines in problems.items())
    assert not problems, f"{len(problems)} of {len(pages)} pages ({mode}) had problems:\n{report}"
    assert not undrawn, f"figures left undrawn ({mode}): {undrawn}"


def test_the_recorder_sees_an_outside_request(tab, site, server):
    """The checks above can fail: a page that asks for an outside file is caught."""
    visit = tab.open(server + "index.html")
    assert visit.problems() == []
    tab.page.evaluate("() => { const i = new Image(); i.src = 'https://example.invalid/x.png'; "
                      "document.body.append(i); }")
    tab.page.wait_for_timeout(300)
    assert any("example.invalid" in u for u in visit.outside)
