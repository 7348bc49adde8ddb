"""Accessibility: axe-core run on one page of each type finds nothing serious or critical.

axe-core is the npm package of the same name, installed by ``npm ci`` from the committed
package.json/package-lock.json. It is injected into the page (in a context that lets the test
add a script despite the site's Content-Security-Policy) after the figures are drawn, so the
plotly output is checked along with the templates.
"""

from __future__ import annotations

import os
import re

import pytest

from ..conftest import REPO
from .conftest import Tab, site_pages

pytestmark = pytest.mark.browser

AXE = REPO / "node_modules" / "axe-core" / "axe.min.js"

# Page type -> the first page of that type in the build.
PAGE_TYPES = {
    "home": r"index\.html", "tree": r"tree\.html", "map": r"map\.html",
    "glossary": r"glossary\.html", "methods": r"methods\.html", "credits": r"credits\.html",
    "object": r"objects/[^/]+\.html", "node": r"nodes/n-[0-9a-f]{10}\.html",
    "character": r"characters/[^/]+\.html", "place": r"places/[^/]+\.html",
    "free page": r"pages/[^/]+\.html",
}


@pytest.fixture(scope="module")
def axe_tab(chromium, site, server):
    if not AXE.is_file():
        reason = f"{AXE} is missing: run `npm ci` in the repository"
        if os.environ.get("CI") == "true":
            pytest.fail(reason)
        pytest.skip(reason)
    tab = Tab(chromium, [site.as_uri() + "/", server], bypass_csp=True)
    yield tab
    tab.close()


def format_violations(violations: list[dict]) -> str:
    lines = []
    for v in violations:
        lines.append(f"[{v['impact']}] {v['id']}: {v['help']} ({v['helpUrl']})")
        for node in v["nodes"][:5]:
            lines.append(f"    {' '.join(node['target'])}: {node['failureSummary']!r}"
                         f"\n      {node['html'][:200]}")
    return "\n".join(lines)


@pytest.mark.parametrize("kind", sorted(PAGE_TYPES))
def test_no_serious_accessibility_violation(axe_tab, site, server, kind):
    pages = [p for p in site_pages(site) if re.fullmatch(PAGE_TYPES[kind], p)]
    assert pages, f"the build has no {kind} page"
    visit = axe_tab.open(server + pages[0])
    axe_tab.page.add_script_tag(path=str(AXE))
    result = axe_tab.page.evaluate(
        "() => axe.run(document, {resultTypes: ['violations']})")
    bad = [v for v in result["violations"] if v["impact"] in ("serious", "critical")]
    assert not bad, f"{pages[0]}:\n{format_violations(bad)}"
    assert visit.problems() == []
