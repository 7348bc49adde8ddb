"""The gallery kiosk theme: no way out of the site, large touch targets, a quiet return to the
start page after a pause (checked in headless Chromium with a 2-second pause).

The atlas is the invented starter atlas (see ``test_search``), built with its ``kiosk``
profile; one note links to an invented outside site and an address.
"""

from __future__ import annotations

import re
import time
from html.parser import HTMLParser

import pytest

from atlas.site.downloads import unlink_external
from atlas.site.plan import plan_site
from atlas.site.render import SiteInfo, environment, find_theme, render_page

from .conftest import REPO
from .test_search import make_atlas, with_browser, write_site

KIOSK = REPO / "themes" / "kiosk"
OUTSIDE = "https://museum.example.org/spoons"  # invented
NOTE = ("---\nid: spoon-d\ntitle: Deep spoon with notched rim\nplace: calder-end\n"
        f"access: public\n---\nSee [the museum page]({OUTSIDE}) or "
        "[write to the carvers](mailto:carvers@example.org); the spoon is also on "
        "[the lineage tree](object:spoon-a) (invented).\n")


def kiosk_atlas(folder):
    toml = {"atlas.toml": None}
    from .test_search import publishing_files

    text = str(publishing_files()["atlas.toml"])
    toml["atlas.toml"] = text.replace("[profiles.kiosk]\naccess = [\"public\"]\nkiosk = true\n",
                                      "[profiles.kiosk]\naccess = [\"public\"]\nkiosk = true\n"
                                      "idle_seconds = 2\n")
    assert "idle_seconds = 2" in toml["atlas.toml"]
    return make_atlas(folder, "kiosk", {**toml, "objects/spoon-d.md": NOTE})


@pytest.fixture(scope="module")
def kiosk(tmp_path_factory):
    atlas, results = kiosk_atlas(tmp_path_factory.mktemp("kiosk") / "atlas")
    return atlas, results, plan_site(atlas, results)


class _Links(HTMLParser):
    def __init__(self):
        super().__init__()
        self.hrefs: list[str] = []
        self.body: dict = {}
        self.scripts: list[str] = []
        self.styles: list[str] = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "a" and "href" in a:
            self.hrefs.append(a["href"])
        if tag == "body":
            self.body = a
        if tag == "script":
            self.scripts.append(a.get("src", ""))
        if tag == "link" and a.get("rel") == "stylesheet":
            self.styles.append(a["href"])


def render_kiosk(atlas, page, nav) -> str:
    site = SiteInfo(title=atlas.config.title, licence=atlas.config.licence, nav=nav, kiosk=True,
                    idle_seconds=atlas.profile.idle_seconds, language="en", generator="test")
    return unlink_external(render_page(environment(find_theme("kiosk")), page, site))


def test_kiosk_theme_extends_the_default():
    theme = find_theme("kiosk")
    assert [f.name for f in theme.folders] == ["kiosk", "default"]
    # the kiosk overrides only what it changes: its own templates are few
    assert sorted(p.name for p in (KIOSK / "templates").iterdir()) == ["base.html"]


def test_kiosk_page_keeps_the_reader_inside(kiosk):
    atlas, _, plan = kiosk
    assert atlas.profile.kiosk and atlas.profile.idle_seconds == 2  # from atlas.toml
    page = next(p for p in plan.pages if p.path == "objects/spoon-d.html")
    nav = [*plan.nav, ("Downloads", "downloads/index.html")]
    html = render_kiosk(atlas, page, nav)
    parsed = _Links()
    parsed.feed(html)
    assert parsed.body["data-idle-seconds"] == "2"
    assert "kiosk" in parsed.body["class"].split()
    assert parsed.scripts[-1] == "../assets/kiosk.js"
    assert "../assets/kiosk.css" in parsed.styles
    assert not [h for h in parsed.hrefs if re.match(r"^[a-z][a-z0-9+.-]*:|^//", h)]
    assert not [h for h in parsed.hrefs if "downloads/" in h]
    assert "the museum page" in html and "write to the carvers" in html  # kept as text
    assert "../objects/spoon-a.html" in parsed.hrefs  # links inside the site stay
    assert 'id="kiosk-restart"' in html and ">Start again<" in html
    default = render_page(environment(find_theme("default")), page, SiteInfo(
        title="t", licence="l", nav=nav, kiosk=False, idle_seconds=2, language="en",
        generator="g"))
    assert OUTSIDE in default  # the check can fail: the default theme keeps the link


def test_unlink_external_keeps_internal_links():
    html = ('<a href="https://x.example/">out</a><a class="c" href="../places/a.html">in</a>'
            '<a href="#top">top</a><a href="../downloads/matrix.csv" download>data</a>'
            "<a href='//cdn.example/x'>cdn</a><a href=\"mailto:a@example.org\">mail</a>")
    out = unlink_external(html)
    assert re.findall(r'href="([^"]*)"', out) == ["../places/a.html", "#top"]
    assert [t for t in re.findall(r">([^<]+)<", out)] == ["out", "in", "top", "data", "cdn",
                                                          "mail"]


def test_kiosk_css_sets_touch_targets_and_never_disables_selection():
    css = (KIOSK / "assets" / "kiosk.css").read_text("utf-8")
    assert "min-height: 48px" in css and "min-width: 48px" in css
    assert not re.search(r"user-select\s*:\s*none", css)
    script = (KIOSK / "assets" / "kiosk.js").read_text("utf-8")
    for banned in ("eval(", "new Function", "innerHTML", "selectstart", "contextmenu"):
        assert banned not in script


# --- in the browser ----------------------------------------------------------------------------

@pytest.fixture(scope="module")
def kiosk_site(kiosk, tmp_path_factory):
    atlas, results, _ = kiosk
    return write_site(atlas, results, tmp_path_factory.mktemp("kiosk-site") / "site", kiosk=True)


@pytest.mark.browser
def test_idle_return_to_the_start_page(kiosk_site):
    with_browser(lambda browser: _idle_checks(browser, kiosk_site))


def _idle_checks(browser, kiosk_site) -> None:
    page = browser.new_page(has_touch=True)
    errors: list[str] = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.goto((kiosk_site / "objects" / "spoon-d.html").as_uri())
    overlay = page.locator("#kiosk-idle")
    assert overlay.is_hidden()
    # a touch before the pause ends restarts it: the box is still hidden 1.5 s later
    page.wait_for_timeout(1200)
    page.mouse.move(30, 30)
    page.wait_for_timeout(1500)
    assert overlay.is_hidden() and page.url.endswith("objects/spoon-d.html")
    # then nobody touches anything: "Start again" shows, and the start page follows
    started = time.monotonic()
    overlay.wait_for(state="visible", timeout=5000)
    assert page.locator("#kiosk-restart").inner_text() == "Start again"
    page.wait_for_url("**/index.html", timeout=5000)
    assert 0.5 < time.monotonic() - started < 6  # 2 s pause plus 1 s of grace, measured loosely
    assert not errors, errors


@pytest.mark.browser
def test_touch_targets_and_no_outside_links_in_the_browser(kiosk_site):
    with_browser(lambda browser: _target_checks(browser, kiosk_site))


def _target_checks(browser, kiosk_site) -> None:
    page = browser.new_page(viewport={"width": 1080, "height": 1920})
    page.goto((kiosk_site / "objects" / "spoon-d.html").as_uri())
    small = page.evaluate("""() => [...document.querySelectorAll(
          'main a, nav a, footer a, button, input, summary, .chip')]
        .filter(e => !e.closest('svg') && e.offsetParent !== null)
        .map(e => [e.textContent.trim().slice(0, 30), e.getBoundingClientRect()])
        .filter(([t, r]) => r.width < 48 || r.height < 48)
        .map(([t, r]) => `${t}: ${Math.round(r.width)} x ${Math.round(r.height)}`)""")
    assert not small, small
    outside = page.evaluate("() => [...document.querySelectorAll('a[href]')]"
                            ".filter(a => a.protocol !== 'file:').map(a => a.href)")
    assert not outside
    selection = page.evaluate("() => getComputedStyle(document.querySelector('main p'))"
                              ".userSelect")
    assert selection != "none"
