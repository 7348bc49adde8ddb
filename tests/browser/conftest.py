"""Headless Chromium over a built site: the browser, a local web server, and per-page checks.

The browser is Debian's ``/usr/bin/chromium`` driven by Playwright for Python; Playwright's own
browser downloads are never used. Without Chromium (or Playwright) the browser tests skip,
except under ``CI=true``, where a missing browser fails them.

Every request a page makes is recorded. Requests inside the site (``file://`` under the build,
or ``http://127.0.0.1:<port>/`` of the fixture's server) go through; anything else is aborted
and reported, since the site must never load anything from outside.
"""

from __future__ import annotations

import functools
import http.server
import os
import shutil
import threading
from dataclasses import dataclass, field
from pathlib import Path

import pytest

from atlas.build import build
from atlas.starter import FILES as STARTER

from ..conftest import CONTENT, write_atlas

CHROMIUM = Path("/usr/bin/chromium")
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync", "--no-first-run"]


def browser_missing() -> str:
    """Why the browser tests cannot run here, or an empty string."""
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        return "Playwright for Python is not installed (pip install -e '.[test]')"
    if not CHROMIUM.is_file():
        return f"no Chromium at {CHROMIUM} (apt-get install chromium)"
    return ""


def require_browser() -> None:
    """Skip with the reason, or fail under CI=true, when the browser is not there."""
    reason = browser_missing()
    if reason:
        if os.environ.get("CI") == "true":
            pytest.fail(f"CI=true but the browser tests cannot run: {reason}")
        pytest.skip(reason)


@pytest.fixture(scope="module")
def chromium():
    """One headless Chromium per test module.

    Not per session: Playwright's sync API allows one driver at a time in a thread, and other
    test modules start their own.
    """
    require_browser()
    from playwright.sync_api import sync_playwright

    with sync_playwright() as driver:
        browser = driver.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS,
                                         headless=True)
        yield browser
        browser.close()


def site_source(folder: Path) -> Path:
    """The demo atlas copied into ``folder`` when it exists, else the starter atlas."""
    if (CONTENT / "atlas.toml").is_file():
        target = folder / "content"
        shutil.copytree(CONTENT, target)
        return target
    return write_atlas(folder / "starter", dict(STARTER))


_BUILT = pytest.StashKey[Path]()


def built_site(config: pytest.Config, tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The demo (or, until it exists, the starter) built once per test session.

    Kept in the session's stash, so that fixtures in other test folders share the one build.
    """
    if _BUILT not in config.stash:
        folder = tmp_path_factory.mktemp("built-site")
        out = folder / "site"
        build(site_source(folder), out)
        config.stash[_BUILT] = out
    return config.stash[_BUILT]


@pytest.fixture(scope="session")
def site(request, tmp_path_factory) -> Path:
    return built_site(request.config, tmp_path_factory)


class _QuietHandler(http.server.SimpleHTTPRequestHandler):
    def log_message(self, format, *args):
        pass


@pytest.fixture(scope="session")
def server(site):
    """The built site over http on 127.0.0.1 (a free port), as its base URL."""
    handler = functools.partial(_QuietHandler, directory=str(site))
    httpd = http.server.ThreadingHTTPServer(("127.0.0.1", 0), handler)
    thread = threading.Thread(target=httpd.serve_forever, daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{httpd.server_address[1]}/"
    httpd.shutdown()
    httpd.server_close()
    thread.join(timeout=5)


def site_pages(site: Path) -> list[str]:
    return sorted(p.relative_to(site).as_posix() for p in site.rglob("*.html"))


@dataclass
class Visit:
    """Everything that went wrong while one page loaded."""

    url: str
    console_errors: list[str] = field(default_factory=list)
    page_errors: list[str] = field(default_factory=list)
    failed: list[str] = field(default_factory=list)
    outside: list[str] = field(default_factory=list)
    dialogs: list[str] = field(default_factory=list)
    undrawn: list[str] = field(default_factory=list)  # figures whose script gave up

    def problems(self) -> list[str]:
        return ([f"console error: {m}" for m in self.console_errors]
                + [f"uncaught exception: {m}" for m in self.page_errors]
                + [f"failed load: {m}" for m in self.failed]
                + [f"request outside the site: {m}" for m in self.outside]
                + [f"dialog opened: {m}" for m in self.dialogs])


_DRAWN = ("() => [...document.querySelectorAll('.plot')].every(d => "
          "d.classList.contains('plot-unavailable') || "
          "(d.closest('figure') && d.closest('figure').classList.contains('has-plot')))")
# Wait (up to 15 s) until every figure is drawn or given up; say which were given up.
_SETTLE = f"""async () => {{
  const drawn = {_DRAWN};
  for (let waited = 0; !drawn() && waited < 15000; waited += 50) {{
    await new Promise((resolve) => setTimeout(resolve, 50));
  }}
  if (!drawn()) return ['(still drawing after 15 s)'];
  return [...document.querySelectorAll('.plot-unavailable')].map((d) => d.id);
}}"""


class _Watched:
    """One browser page whose events are recorded into the current visit."""

    def __init__(self, context, inside):
        self.page = context.new_page()
        self.visit = Visit("")
        self.inside = inside
        page = self.page
        page.on("console", lambda m: m.type == "error" and self.visit.console_errors.append(
            f"{m.text} ({m.location.get('url', '')})"))
        page.on("pageerror", lambda exc: self.visit.page_errors.append(str(exc)))
        page.on("requestfailed", lambda r: self.visit.failed.append(f"{r.url}: {r.failure}"))
        page.on("response", lambda r: r.status >= 400 and self.visit.failed.append(
            f"{r.url}: HTTP {r.status}"))
        page.on("request", lambda r: self.outside(r.url))
        page.on("dialog", self._dialog)

    def outside(self, url: str) -> None:
        if not self.inside(url) and url not in self.visit.outside:
            self.visit.outside.append(url)

    def _dialog(self, dialog) -> None:
        self.visit.dialogs.append(f"{dialog.type}: {dialog.message}")
        dialog.dismiss()


class Tab:
    """One browser context with a few pages, reused for every visit; each visit records its own.

    ``open`` loads one URL in the first page (``tab.page``); ``open_all`` loads many, several at
    a time, to keep a sweep over every page of a site quick.
    """

    def __init__(self, browser, allowed: list[str], width: int = 4, **options):
        self.allowed = allowed
        self.context = browser.new_context(viewport={"width": 1200, "height": 900},
                                           service_workers="block", reduced_motion="reduce",
                                           **options)
        self.context.route("**/*", self._route)
        self.watched = [_Watched(self.context, self.inside) for _ in range(width)]
        self.page = self.watched[0].page

    def inside(self, url: str) -> bool:
        return any(url.startswith(prefix) for prefix in self.allowed) or url.startswith(
            ("data:", "blob:", "about:"))

    def _route(self, route) -> None:
        if self.inside(route.request.url):
            route.continue_()
            return
        for w in self.watched:
            if route.request.frame.page is w.page:
                w.outside(route.request.url)
        route.abort()

    def open(self, url: str) -> Visit:
        """Load ``url`` and wait until its figures are drawn (or given up); return the record."""
        w = self.watched[0]
        w.visit = Visit(url)
        w.page.goto(url, wait_until="load")
        w.page.wait_for_function(_DRAWN, timeout=15_000)
        return w.visit

    def open_all(self, urls: list[str]) -> dict[str, Visit]:
        """Load every URL (a batch at a time, one per page) and return each one's record."""
        visits: dict[str, Visit] = {}
        for start in range(0, len(urls), len(self.watched)):
            batch = list(zip(self.watched, urls[start:start + len(self.watched)]))
            for w, url in batch:  # start them all: "commit" returns once the page is on its way
                w.visit = visits[url] = Visit(url)
                w.page.goto(url, wait_until="commit", timeout=30_000)
            for w, _ in batch:
                w.page.wait_for_load_state("load", timeout=30_000)
                w.visit.undrawn = w.page.evaluate(_SETTLE)
        return visits

    def close(self) -> None:
        self.context.close()


@pytest.fixture(scope="module")
def tab(chromium, site, server):
    """The one context and page the page checks share (file:// and http both allowed)."""
    t = Tab(chromium, [site.as_uri() + "/", server])
    yield t
    t.close()


def url_for(site: Path, server: str, mode: str, page: str) -> str:
    return (site / page).as_uri() if mode == "file" else server + page
