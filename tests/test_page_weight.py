"""Page weight: the budget audit, plotly.js only where a figure is drawn, long tables in parts.

Planted pages are invented; the builds use the starter of ``atlas new`` (invented spoons).
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from atlas.audit import audit_budget, audit_plotly, page_weights
from atlas.build import build
from atlas.cli import main
from atlas.errors import AtlasError
from atlas.site.paging import split_groups


def _page(n_bytes: int) -> bytes:
    head = b"<!doctype html><p>"
    return head + b"x" * (n_bytes - len(head))


def test_budget_fails_past_the_limit_and_passes_under_it():
    files = {"a.html": _page(61_000), "b.html": _page(59_000), "data/x.js": b"y" * 900_000}
    assert [p.file for p in audit_budget(files, 60)] == ["a.html"]  # the script is not counted
    assert audit_budget(files, 61) == []  # 61,000 bytes is exactly 61 KB: allowed
    assert page_weights(files, top=2) == [("a.html", 61_000), ("b.html", 59_000)]


def test_plotly_only_on_pages_that_draw_with_it():
    drawer = b"Plotly.newPlot(el, data);"
    files = {
        "assets/plotly.min.js": b"/* plotly */",
        "assets/map.js": drawer,
        "assets/search.js": b"search();",
        "map.html": b'<script src="assets/plotly.min.js"></script><script src="assets/map.js">',
        "objects/a.html": b'<script src="../assets/plotly.min.js"></script>'
                          b'<script src="../assets/search.js"></script>',
        "fr/map.html": b'<script src="../assets/plotly.min.js"></script>'
                       b'<script src="../assets/map.js"></script>',
    }
    assert [p.file for p in audit_plotly(files)] == ["objects/a.html"]


def test_a_build_fails_past_its_budget_and_reports_its_largest_pages(starter):
    report = build(starter, starter.parent / "ok", use_cache=False)
    sizes = [size for _, size in report.largest]
    assert len(sizes) == 5 and sizes == sorted(sizes, reverse=True)
    biggest = report.largest[0]
    assert (starter.parent / "ok" / biggest[0]).stat().st_size == biggest[1]
    toml = starter / "atlas.toml"
    toml.write_text(toml.read_text("utf-8").replace(
        'licence = "CC-BY-4.0"\n', 'licence = "CC-BY-4.0"\npage_budget = 1\n'), "utf-8")
    with pytest.raises(AtlasError) as caught:
        build(starter, starter.parent / "too-small", use_cache=False)
    assert any("over the budget of 1 KB" in p.message for p in caught.value.problems)
    assert not (starter.parent / "too-small").exists()  # nothing written


def test_the_command_line_prints_the_largest_pages_unless_quiet(starter, tmp_path):
    runner = CliRunner()
    loud = runner.invoke(main, ["build", str(starter), "--out", str(tmp_path / "a"),
                                "--no-cache"])
    assert loud.exit_code == 0, loud.output
    assert "Largest pages:" in loud.output
    quiet = runner.invoke(main, ["build", str(starter), "--out", str(tmp_path / "b"), "-q",
                                 "--no-cache", "--jobs", "2"])
    assert quiet.exit_code == 0 and "Largest pages" not in quiet.output


@pytest.mark.parametrize("per_part", [1, 2, 3, 7])
def test_split_groups_keeps_every_row_once_in_order(per_part):
    groups = [{"name": f"g{k}", "rows": list(range(10 * k, 10 * k + n))}
              for k, n in enumerate([0, 5, 1, 8])]  # an empty group too (invented)
    parts = split_groups(groups, per_part)
    flat = [r for part in parts for g in part for r in g["rows"]]
    assert flat == [r for g in groups for r in g["rows"]]  # brute force: the plain listing
    assert all(sum(len(g["rows"]) for g in part) <= per_part for part in parts)
    starts = [g["name"] for part in parts for g in part if not g["continued"]]
    assert starts == [g["name"] for g in groups]  # each group starts exactly once


def test_long_tables_are_split_into_linked_parts(starter, tmp_path, monkeypatch):
    monkeypatch.setattr("atlas.site.paging.PER_PART", 2)
    build(starter, tmp_path / "site", use_cache=False)  # the link audit checks every part link
    site = tmp_path / "site"
    node = next(p for p in sorted((site / "nodes").glob("n-*.html")) if ".traits-" not in p.name)
    parts = [node] + sorted(site.glob(f"nodes/{node.stem}.traits-*.html"))
    assert len(parts) == 2  # the starter has 4 characters (atlas/starter.py)
    rows = []
    for part in parts:
        html = part.read_text("utf-8")
        section = html[html.index('aria-labelledby="states"'):]
        rows += re.findall(r'<th scope="row"><a href="../characters/([^"]+)\.html"', section)
    assert sorted(rows) == ["bowl", "handle", "hook", "notch"]
    glossary = (site / "glossary.html").read_text("utf-8")
    assert 'href="glossary.traits-2.html"' in glossary
    assert Path(site / "glossary.traits-2.html").is_file()


def test_long_briefs_are_split_into_parts_of_whole_groups(starter, tmp_path, monkeypatch):
    # The starter's 4 characters fall into groups (atlas/starter.py); with one character per
    # part every group is a part of its own, and together the parts name each character once.
    monkeypatch.setattr("atlas.site.paging.BRIEF_ROWS", 1)
    build(starter, tmp_path / "site", use_cache=False)  # the link audit checks the part links
    site = tmp_path / "site"
    brief = sorted(p for p in (site / "briefs").glob("n-*.html") if ".part-" not in p.name)[0]
    parts = [brief] + sorted(site.glob(f"briefs/{brief.stem}.part-*.html"))
    assert len(parts) > 1
    named = []
    for part in parts:
        html = part.read_text("utf-8")
        assert 'class="toc parts"' in html  # every part lists every part
        named += re.findall(r'<li><a href="../characters/([^"]+)\.html"', html)
    assert sorted(named) == ["bowl", "handle", "hook", "notch"]




def test_defining_traits_keep_the_strongest_and_count_the_rest(demo_copy, monkeypatch):
    """With room for fewer defining traits than a clade has, the page keeps those unambiguous
    under parsimony first, then the largest expected gains, in label order, and counts the
    rest (the demo atlas, invented)."""
    from atlas.analysis.results import analyse
    from atlas.build import load
    from atlas.site import views

    atlas = load(demo_copy)
    results = analyse(atlas)
    links = views.make_links(atlas, results)
    full = {}
    for v in range(results.tree.n_nodes):
        if results.tree.tip[v] < 0:
            rows, more = views.defining_traits(atlas, results, links, v, "../")
            assert more == 0  # the demo's clades have fewer than DEFINING_ROWS
            full[v] = rows
    v, rows = max(full.items(), key=lambda kv: len(kv[1]))
    assert len(rows) >= 3
    monkeypatch.setattr(views, "DEFINING_ROWS", 2)
    kept, more = views.defining_traits(atlas, results, links, v, "../")
    assert len(kept) == 2 and more == len(rows) - 2
    assert [r["label"] for r in kept] == sorted(r["label"] for r in kept)
    unambiguous = [r for r in rows if "parsimony: unambiguous" in r["evidence"]]
    gains = sorted((r for r in rows if r not in unambiguous), key=lambda r: -float(
        re.search(r"likelihood: ([\d.]+)", r["evidence"]).group(1)))
    expected = (unambiguous + gains)[:2]  # by the rule stated on the page, read from the text
    assert len(unambiguous) <= 2 or {r["label"] for r in kept} <= {r["label"] for r in unambiguous}
    if len(unambiguous) < 2:
        assert {r["label"] for r in kept} == {r["label"] for r in expected}
