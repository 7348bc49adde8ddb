"""Valid HTML: the Nu HTML Checker (npm package vnu-jar) finds no error on any page of a build.

The demo atlas is built when it exists (otherwise the starter), and every HTML page goes to one
``java -jar vnu.jar --errors-only --format json`` call (the checker is slow to start).
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
from pathlib import Path
from urllib.parse import unquote, urlsplit

import pytest

from .browser.conftest import built_site
from .conftest import REPO

VNU = REPO / "node_modules" / "vnu-jar" / "build" / "dist" / "vnu.jar"


def _checker_missing() -> str:
    if shutil.which("java") is None:
        return "java is not installed (apt-get install default-jre-headless)"
    if not VNU.is_file():
        return f"{VNU} is missing: run `npm ci` in the repository"
    return ""


PLANTED = ('<!doctype html><html lang="en"><head><meta charset="utf-8"><title>x</title></head>'
           '<body><p id="a">x</p><p id="a">y</div></body></html>')  # duplicate id, stray </div>


@pytest.fixture(scope="module")
def checked(request, tmp_path_factory):
    """The checker's messages by file: every page of a build, and one planted bad page."""
    reason = _checker_missing()
    if reason:
        if os.environ.get("CI") == "true":
            pytest.fail(f"CI=true but the HTML checker cannot run: {reason}")
        pytest.skip(reason)
    folder = tmp_path_factory.mktemp("vnu")
    out = built_site(request.config, tmp_path_factory)
    pages = sorted(out.rglob("*.html"))
    planted = folder / "planted.html"
    planted.write_text(PLANTED, encoding="utf-8")
    result = subprocess.run(
        ["java", "-jar", str(VNU), "--errors-only", "--format", "json",
         *map(str, pages), str(planted)],
        capture_output=True, text=True, timeout=300, check=False)
    # the checker writes its JSON report to stderr and exits 1 when it found errors
    messages = json.loads(result.stderr or result.stdout)["messages"]
    by_file: dict[str, list[dict]] = {}
    for m in messages:
        path = Path(unquote(urlsplit(m.get("url", "")).path))  # vnu writes file:/abs/path
        name = path.relative_to(out).as_posix() if path.is_relative_to(out) else str(path)
        by_file.setdefault(name, []).append(m)
    return [p.relative_to(out).as_posix() for p in pages], str(planted), by_file


def test_every_page_is_valid_html(checked):
    pages, planted, by_file = checked
    assert len(pages) > 10
    site_errors = {name: ms for name, ms in by_file.items() if name != planted}
    lines = [f"{name}:{m.get('lastLine', '?')}: {m.get('type')}: {m.get('message')} "
             f"[{m.get('extract', '')!r}]" for name, ms in site_errors.items() for m in ms]
    assert not site_errors, f"{len(lines)} HTML errors:\n" + "\n".join(lines)


def test_the_checker_reports_a_planted_error(checked):
    """The check above can fail: the planted page's duplicate id and stray end tag are caught."""
    _, planted, by_file = checked
    messages = [m["message"] for m in by_file.get(planted, [])]
    assert any("Duplicate ID" in m for m in messages), by_file
    assert any("Stray end tag" in m for m in messages), messages
