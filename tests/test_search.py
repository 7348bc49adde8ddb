"""The search index, the search page and the search script.

The atlas is the starter atlas of ``atlas new`` (invented carved spoons), changed so that the
profile has something to keep out: one restricted object with a telltale title and note, and a
community-only place; plus accented place names and a title that tries to close a script.
Everything here is invented.
"""

from __future__ import annotations

import json
import re
import threading
import unicodedata
from html.parser import HTMLParser
from pathlib import Path

import pytest

from atlas.analysis.results import analyse
from atlas.build import load
from atlas.site import search
from atlas.site.plan import plan_site
from atlas.site.render import SiteInfo, environment, find_theme, render_page
from atlas.starter import FILES as STARTER

from .conftest import REPO, write_atlas

SECRET = "Wrenmark"  # a word only the restricted object's title and note hold (invented)
HIDDEN_PLACE = "Sundered Cove"  # a community-only place (invented)
HOSTILE = "Spoon </script><script>alert(1)</script>"


def publishing_files() -> dict[str, str | bytes]:
    """The starter atlas with restricted material, accents, authors and a base URL."""
    files: dict[str, str | bytes] = dict(STARTER)
    files["atlas.toml"] = files["atlas.toml"].replace(
        'licence = "CC-BY-4.0"\n',
        'licence = "CC-BY-4.0"\nauthors = ["Quill, Mara", "Brinmoor Carvers Circle (invented)"]\n'
        'base_url = "https://atlas.example.org/spoons"\n')
    files["objects/spoon-c.md"] = (
        f"---\nid: spoon-c\ntitle: The {SECRET} spoon\nplace: brinmoor\naccess: restricted\n---\n"
        f"Kept back at the carvers' request: the {SECRET} mark is theirs alone (invented).\n"
    )
    files["objects/spoon-b.md"] = files["objects/spoon-b.md"].replace(
        "title: Spoon with hooked handle and plain rim", f"title: {json.dumps(HOSTILE)}")
    files["objects/spoon-e.md"] = files["objects/spoon-e.md"].replace(
        "place: calder-end", "place: sundered-cove")
    files["places.csv"] = (files["places.csv"]
                           .replace("Calder End (invented)", "Cälder Énd (invented)")
                           + f"sundered-cove,{HIDDEN_PLACE} (invented),-31.9,-15.2,exact,"
                             "community\n")
    return files


def make_atlas(folder: Path, profile: str = "public", extra: dict | None = None):
    root = write_atlas(folder, {**publishing_files(), **(extra or {})})
    atlas = load(root, profile)
    return atlas, analyse(atlas)


@pytest.fixture(scope="module")
def published(tmp_path_factory):
    atlas, results = make_atlas(tmp_path_factory.mktemp("search") / "atlas")
    plan = plan_site(atlas, results)
    page, data = search.search_plan(atlas, results, plan.links)
    return atlas, results, plan, page, data


def index_of(data: dict[str, str]) -> list[dict]:
    text = data["data/search.js"]
    prefix = "window.AtlasData = window.AtlasData || {};\nwindow.AtlasData.search = "
    assert text.startswith(prefix) and text.endswith(";\n")
    return json.loads(text[len(prefix):-2])["entries"]


def test_normalise_drops_accents_and_case():
    # NFD of ë is e + U+0308 and of å is a + U+030A (Unicode canonical decomposition)
    assert unicodedata.normalize("NFD", "ë") == "e\u0308"
    assert search.normalise("Ossëm HÅVEN") == "ossem haven"
    assert search.words("Cälder Énd: lamp-03, lamp_03") == ["calder", "end", "lamp", "03"]


def test_index_holds_every_published_thing(published):
    atlas, _, plan, _, data = published
    entries = index_of(data)
    by_kind: dict[str, set[str]] = {}
    for e in entries:
        by_kind.setdefault(e["k"], set()).add(e["h"])
    # one entry per published object, character, place (invented case: counts from the atlas)
    assert by_kind["object"] == {plan.links.objects[o.id] for o in atlas.visible_objects()}
    assert by_kind["character"] == set(plan.links.characters.values())
    assert by_kind["place"] == {plan.links.places[p] for p in atlas.places}
    pages = {p.path for p in plan.pages}
    assert all(e["h"] in pages for e in entries), "every result links to a page of the site"
    spoon_a = next(e for e in entries if e["h"] == plan.links.objects["spoon-a"])
    assert spoon_a["tw"] == "spoon with hooked handle"
    # the id, the community, the place name and the note's words are searchable
    for word in ("spoon", "a", "brinmoor", "carvers", "hanging"):
        assert word in spoon_a["w"].split() + spoon_a["tw"].split()
    calder = next(e for e in entries if e["k"] == "place" and "calder" in e["tw"])
    assert calder["t"] == "Cälder Énd (invented)" and calder["tw"] == "calder end invented"
    bowl = next(e for e in entries if e["k"] == "character" and e["tw"] == "bowl depth")
    assert {"shallow", "deep", "very", "bowl"} <= set(bowl["w"].split() + bowl["tw"].split())
    assert bowl["c"] == "Bowl"  # the group, shown beside the result


def test_nothing_withheld_enters_the_index(published):
    atlas, _, _, _, data = published
    assert atlas.objects["spoon-c"].withheld  # the restricted object (invented case)
    text = data["data/search.js"]
    for secret in ("spoon-c", SECRET, SECRET.lower(), HIDDEN_PLACE, "sundered"):
        assert secret not in text


def test_the_index_cannot_close_its_script(published):
    _, _, _, _, data = published
    text = data["data/search.js"]
    assert "</script" not in text.lower()
    assert any(e["t"] == HOSTILE for e in index_of(data))  # the title is kept, escaped


class _Tags(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags: list[tuple[str, dict]] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))


def render(page, kiosk: bool = False) -> str:
    theme = find_theme("kiosk" if kiosk else "default")
    site = SiteInfo(title="Spoons (invented)", licence="CC-BY-4.0", nav=[], kiosk=kiosk,
                    idle_seconds=37, language="en", generator="lineage atlas builder test")
    return render_page(environment(theme), page, site)


def test_search_page_is_labelled_and_says_what_to_do_without_javascript(published):
    _, _, _, page, _ = published
    html = render(page)
    parser = _Tags()
    parser.feed(html)
    inputs = [a for t, a in parser.tags if t == "input" and a.get("type") == "search"]
    labels = [a for t, a in parser.tags if t == "label"]
    assert len(inputs) == 1 and any(lab.get("for") == inputs[0]["id"] for lab in labels)
    live = [a for t, a in parser.tags if a.get("aria-live") == "polite"]
    assert live, "the number of results is announced"
    noscript = re.search(r"<noscript>(.*?)</noscript>", html, re.DOTALL).group(1)
    assert 'href="glossary.html"' in noscript and 'href="tree.html#outline"' in noscript
    scripts = [a.get("src") for t, a in parser.tags
               if t == "script" and a.get("type") != "application/ld+json"]  # JSON-LD is data
    assert scripts[-2:] == ["data/search.js", "assets/search.js"]
    assert all(scripts), "no inline script"
    assert not re.search(r"\son[a-z]+\s*=", html), "no inline event handler"
    tree = (REPO / "themes" / "default" / "templates" / "tree.html").read_text("utf-8")
    assert 'id="outline"' in tree  # the anchor the page points to exists


def test_search_script_uses_no_eval_and_no_markup_strings():
    script = (REPO / "themes" / "default" / "assets" / "search.js").read_text("utf-8")
    for banned in ("eval(", "new Function", "innerHTML", "outerHTML", "document.write",
                   "fetch(", "XMLHttpRequest"):
        assert banned not in script


# --- in the browser ----------------------------------------------------------------------------

CHROMIUM = Path("/usr/bin/chromium")


def require_browser() -> None:
    import os

    reason = ""
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        reason = "Playwright for Python is not installed"
    if not reason and not CHROMIUM.is_file():
        reason = f"no Chromium at {CHROMIUM}"
    if reason:
        if os.environ.get("CI") == "true":
            pytest.fail(f"CI=true but the browser tests cannot run: {reason}")
        pytest.skip(reason)


def write_site(atlas, results, out: Path, *, kiosk: bool = False) -> Path:
    """The site with the search page added (what the plan stage's hook adds), on disk."""
    from atlas.site.downloads import unlink_external

    plan = plan_site(atlas, results)
    page, data = search.search_plan(atlas, results, plan.links)
    theme = find_theme("kiosk" if kiosk else "default")
    site = SiteInfo(title=atlas.config.title, licence=atlas.config.licence,
                    nav=[*plan.nav, ("Search", "search.html")], kiosk=kiosk,
                    idle_seconds=atlas.profile.idle_seconds, language="en",
                    generator="lineage atlas builder test")
    env = environment(theme)
    files: dict[str, bytes] = {}
    for p in [*plan.pages, page]:
        html = render_page(env, p, site)
        files[p.path] = (unlink_external(html) if kiosk else html).encode("utf-8")
    for path, text in {**plan.data, **data, **plan.files}.items():
        files[path] = text.encode("utf-8")
    for folder in reversed(theme.asset_folders):
        for asset in folder.rglob("*"):
            if asset.is_file():
                files[f"assets/{asset.relative_to(folder).as_posix()}"] = asset.read_bytes()
    for path, source in plan.copies.items():
        files[path] = source.read_bytes()
    for path, data_bytes in files.items():
        target = out / path
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_bytes(data_bytes)
    return out


def with_browser(check) -> None:
    """Run ``check(browser)`` with a Chromium of its own, in a thread of its own.

    Another test module's Playwright session may be running in this thread's event loop (the
    sync API refuses to start inside it), so each check gets a fresh thread and driver.
    """
    require_browser()
    failures: list[BaseException] = []

    def run() -> None:
        from playwright.sync_api import sync_playwright

        try:
            with sync_playwright() as driver:
                chromium = driver.chromium.launch(executable_path=str(CHROMIUM), headless=True,
                                                  args=["--no-sandbox", "--disable-gpu"])
                try:
                    check(chromium)
                finally:
                    chromium.close()
        except BaseException as exc:  # handed to the test's own thread below
            failures.append(exc)

    thread = threading.Thread(target=run)
    thread.start()
    thread.join(timeout=240)
    if thread.is_alive():
        pytest.fail("the browser check did not finish in 240 s")
    if failures:
        raise failures[0]


@pytest.mark.browser
def test_search_in_the_browser_from_disk(published, tmp_path):
    atlas, results, _, _, _ = published
    site = write_site(atlas, results, tmp_path / "site")
    with_browser(lambda browser: _search_checks(browser, site))


def _search_checks(browser, site: Path) -> None:
    page = browser.new_page()
    errors: list[str] = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.on("console", lambda m: m.type == "error" and errors.append(m.text))
    page.on("requestfailed", lambda r: errors.append(f"{r.url}: {r.failure}"))
    page.goto((site / "search.html").as_uri())
    box = page.get_by_role("searchbox", name="Search objects, characters, places and pages")
    box.focus()
    page.keyboard.type("BRINM")  # by keyboard, upper case, a prefix
    status = page.locator("#search-status")
    results_list = page.locator("#search-results li")
    page.wait_for_function("() => /result/.test(document.getElementById('search-status')"
                           ".textContent)")
    items = results_list.all_inner_texts()
    # the place Brinmoor (title match) first, then the objects recorded there (invented case)
    assert items[0].startswith("Brinmoor (invented)") and "Place" in items[0]
    assert any("Object" in i for i in items[1:])
    assert status.inner_text().startswith(f"{len(items)} result")
    # accents: "calder end" finds "Cälder Énd"
    box.fill("calder end")
    page.keyboard.press("Enter")
    page.wait_for_function("() => document.querySelectorAll('#search-results li').length > 0 "
                           "&& /calder end/.test(document.getElementById('search-status')"
                           ".textContent)")
    assert results_list.first.inner_text().startswith("Cälder Énd")
    # the arrow key moves to the first result, Enter follows it
    page.keyboard.press("ArrowDown")
    assert page.evaluate("document.activeElement.textContent") == "Cälder Énd (invented)"
    page.keyboard.press("Enter")
    page.wait_for_url("**/places/calder-end.html")
    # nothing withheld is found, and the query survives in the address
    page.goto((site / "search.html").as_uri() + "?q=" + SECRET.lower())
    page.wait_for_function("() => /No results/.test(document.getElementById('search-status')"
                           ".textContent)")
    assert results_list.count() == 0
    assert not errors, errors
