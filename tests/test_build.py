"""End to end: a source folder in, a complete, linked, offline, deterministic site out."""

from __future__ import annotations

import hashlib
import os
import re
from pathlib import Path

import pytest

from atlas.audit import audit_links
from atlas.build import build
from atlas.errors import AtlasError

from .conftest import write_atlas


def tree_digest(folder: Path) -> dict[str, str]:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def test_starter_builds_every_page_type(starter, tmp_path):
    out = tmp_path / "site"
    report = build(starter, out)
    pages = sorted(p.relative_to(out).as_posix() for p in out.rglob("*.html"))
    for top in ("index.html", "tree.html", "map.html", "glossary.html", "methods.html",
                "credits.html", "pages/about.html"):
        assert top in pages
    # one page per tip, per character, per place and per internal node of the summary tree
    assert len([p for p in pages if p.startswith("objects/")]) == 6
    assert len([p for p in pages if p.startswith("characters/")]) == 4
    assert len([p for p in pages if p.startswith("places/")]) == 3
    nodes = [p for p in pages if p.startswith("nodes/")]
    assert all(re.fullmatch(r"nodes/n-[0-9a-f]{10}\.html", p) for p in nodes)
    assert len(nodes) == 5  # 6 tips, root + 4 clades in the consensus (see test_link)
    assert report.pages == len(pages)
    for name in ("data/tree.js", "data/places.js", "data/world.js", "assets/plotly.min.js"):
        assert (out / name).is_file()


def test_every_internal_link_resolves_and_nothing_loads_from_outside(starter, tmp_path):
    out = tmp_path / "site"
    build(starter, out)
    files = {p.relative_to(out).as_posix(): p.read_bytes() for p in out.rglob("*") if p.is_file()}
    assert audit_links(files) == []
    for name, data in files.items():
        if name.endswith(".html"):
            text = data.decode()
            assert not re.search(r"""(src|href)=["'](https?:)?//""", text), name
            assert "<script>" not in text and " on" + "click=" not in text
            assert "Content-Security-Policy" in text


def test_audit_catches_a_planted_broken_link_and_anchor():
    page = b'<a href="objects/missing.html">x</a><a href="#nowhere">y</a><img src="//evil/x.png">'
    problems = audit_links({"index.html": page})
    messages = [p.message for p in problems]
    assert any("broken link" in m for m in messages)
    assert any("broken anchor" in m for m in messages)
    assert any("from outside the site" in m for m in messages)


def test_a_note_with_a_broken_atlas_link_fails_the_build(starter_files, tmp_path):
    files = dict(starter_files)
    files["pages/about.md"] += "\nSee [a spoon that is not there](object:spoon-zz).\n"
    root = write_atlas(tmp_path / "a", files)
    with pytest.raises(AtlasError) as info:
        build(root, tmp_path / "out")
    assert info.value.problems[0].file == "pages/about.html"
    assert "spoon-zz" in info.value.problems[0].message
    report = build(root, tmp_path / "out", links="warn")
    assert any("spoon-zz" in w.message for w in report.warnings)


def test_two_builds_are_byte_identical(starter, tmp_path):
    build(starter, tmp_path / "one")
    build(starter, tmp_path / "two")
    assert tree_digest(tmp_path / "one") == tree_digest(tmp_path / "two")


def test_a_failed_build_leaves_the_earlier_build_untouched(starter, tmp_path):
    out = tmp_path / "site"
    build(starter, out)
    before = tree_digest(out)
    (starter / "matrix.csv").write_text("object,bowl\nspoon-a,0\nspoon-a,1\n", encoding="utf-8")
    with pytest.raises(AtlasError):
        build(starter, out)
    assert tree_digest(out) == before
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".site.atlas")]


def test_a_rebuild_links_unchanged_files_and_never_writes_into_old_ones(starter, tmp_path):
    """Files the earlier build holds byte for byte are hard-linked into the new one; a file
    edited by hand in the output is written afresh; and a copy of the earlier build made with
    hard links (as backup tools do) keeps its bytes, because no build writes into an existing
    file."""
    out = tmp_path / "site"
    build(starter, out)
    page = out / "index.html"
    backup = tmp_path / "backup-index.html"
    os.link(page, backup)
    original = page.read_bytes()
    tampered = out / "tree.html"
    tampered.write_bytes(b"edited by hand")
    before = page.stat().st_ino
    build(starter, out)
    assert page.stat().st_ino == before  # unchanged: linked, not written again
    assert tampered.read_bytes() != b"edited by hand"  # rebuilt from the plan
    clean = tmp_path / "clean"
    build(starter, clean)
    assert tree_digest(out) == tree_digest(clean)
    assert 'title = "' in (starter / "atlas.toml").read_text("utf-8")
    (starter / "atlas.toml").write_text((starter / "atlas.toml").read_text("utf-8").replace(
        'title = "', 'title = "Renamed: '), encoding="utf-8")
    build(starter, out)
    assert page.read_bytes() != original
    assert backup.read_bytes() == original  # the hard-linked copy was not written into


def test_output_folder_safety(starter, tmp_path):
    with pytest.raises(AtlasError, match="contains the atlas source"):
        build(starter, starter.parent)
    precious = tmp_path / "precious"
    precious.mkdir()
    (precious / "thesis.docx").write_text("years of work")
    with pytest.raises(AtlasError, match="not an earlier atlas build"):
        build(starter, precious)
    assert (precious / "thesis.docx").read_text() == "years of work"


def test_markdown_is_sanitised_and_fields_are_escaped(starter_files, tmp_path):
    files = dict(starter_files)
    files["objects/spoon-d.md"] = (
        '---\nid: spoon-d\ntitle: "<script>window.pwned=1</script>Spoon"\nplace: calder-end\n'
        '---\n<img src=x onerror="window.pwned=1"> <a href="javascript:alert(1)">j</a>\n'
        '<iframe src="https://example.org"></iframe>\n')
    out = tmp_path / "site"
    build(write_atlas(tmp_path / "a", files), out, links="warn")
    html = (out / "objects/spoon-d.html").read_text()
    assert "<script>window.pwned" not in html
    assert "&lt;script&gt;window.pwned=1&lt;/script&gt;Spoon" in html
    assert "onerror" not in html and "javascript:" not in html and "<iframe" not in html


def test_withheld_material_appears_in_no_output_file(starter_files, tmp_path):
    # Canary strings (invented) in every field of a restricted object, a restricted place and a
    # community-only clade note; the public build must carry none of them anywhere.
    files = dict(starter_files)
    files["objects/spoon-a.md"] = (
        "---\nid: spoon-a\ntitle: Canary title qx7\nplace: secret-cave\naccess: restricted\n"
        "period: canary period qx7\ncommunity: Canary community qx7\n"
        "images:\n  - {file: canary-qx7.png, alt: canary alt qx7, credit: canary credit qx7}\n"
        "---\nThe canary body text qx7 says where the spoon was hidden.\n")
    files["media/canary-qx7.png"] = b"\x89PNG\r\n\x1a\n"
    files["places.csv"] += "secret-cave,Canary cave qx7,-31.123,-15.456,exact,restricted\n"
    files["clades/hooked.md"] = ("---\ntitle: Canary clade qx7\nmembers: [spoon-a, spoon-b]\n"
                                 "access: community\n---\nCanary clade note body qx7 is long.\n")
    root = write_atlas(tmp_path / "a", files)
    out = tmp_path / "site"
    build(root, out)
    for path in out.rglob("*"):
        if path.is_file():
            data = path.read_bytes()
            assert b"qx7" not in data, path
            assert b"-31.123" not in data and b"-15.456" not in data, path
    assert not (out / "objects" / "spoon-a.html").exists()
    community = tmp_path / "community"
    build(root, community, profile="community")
    assert b"Canary clade qx7" in (community / "index.html").read_bytes()


def test_leak_audit_catches_planted_text():
    from atlas.audit import audit_leaks

    files = {"index.html": b"<p>lamp-21 and lamp-2</p>", "data/tree.js": b"x = 'Secret title';"}
    problems = audit_leaks(files, ("lamp-2", "Secret title"))
    # "lamp-2" is found as a whole word, not inside "lamp-21" (invented case)
    assert [(p.file, p.line) for p in problems] == [("data/tree.js", 1), ("index.html", 1)]
    assert audit_leaks({"index.html": b"<p>lamp-21</p>"}, ("lamp-2",)) == []
    # a withheld title is not found inside a longer published one, but is found beside
    # punctuation or markup (invented titles)
    title = ("Vessel 50",)
    assert audit_leaks({"a.html": b"<li>Vessel 500</li> <li>Vessel 50a</li>"},
                       title) == []
    found = audit_leaks({"a.html": b"<li>Vessel 500</li>\n<li>Vessel 50</li>",
                         "b.html": b"(Vessel 50, withheld)"}, title)
    assert [(p.file, p.line) for p in found] == [("a.html", 2), ("b.html", 1)]



def test_leak_audit_remembers_only_files_that_passed(tmp_path):
    # Invented files and canaries. The cache spares a file whose bytes passed against the same
    # canaries; it must never spare a file that leaked, nor a file checked against other ones.
    from atlas.audit import audit_leaks
    from atlas.cache import Cache, Hasher

    cache = Cache(tmp_path / "cache")
    clean = {"a.html": b"<p>lamp-1</p>", "b.html": b"<p>cup-3</p>"}
    assert audit_leaks(clean, ("lamp-2",), cache) == []
    remembered = cache.get("leaks", Hasher("leak audit", ["lamp-2"]).hexdigest())
    assert remembered == {hashlib.sha256(b).hexdigest() for b in clean.values()}
    leaking = {**clean, "c.html": b"<p>lamp-2</p>"}
    for _ in range(2):  # the leak is found again: it was not remembered
        assert [p.file for p in audit_leaks(leaking, ("lamp-2",), cache)] == ["c.html"]
    # a file that passed against "lamp-2" is read again against new canaries
    assert [p.file for p in audit_leaks(clean, ("cup-3",), cache)] == ["b.html"]
    # and the same answer as with no cache at all, both times
    assert audit_leaks(leaking, ("lamp-2",)) == audit_leaks(leaking, ("lamp-2",), cache)

def test_trait_sheet_defining_traits_and_brief(starter):
    # Invented starter data: spoon-a and spoon-b alone have hooked handles (hook = 1), spoon-c
    # and spoon-d have none (0) and the rest cannot have one (-), so on the consensus tree the
    # clade {spoon-a, spoon-b} gains the hook on its stem in every most parsimonious
    # reconstruction (worked by hand).
    from atlas.analysis.results import analyse
    from atlas.build import load
    from atlas.site.plan import plan_site

    atlas = load(starter)
    results = analyse(atlas)
    plan = plan_site(atlas, results)
    v = results.members.index(("spoon-a", "spoon-b"))
    page = next(p for p in plan.pages if p.path == f"nodes/{results.ids[v]}.html")
    defining = {d["label"]: d for d in page.context["defining"]}
    assert "Hooked handle end" in defining
    assert defining["Hooked handle end"]["change"] == "absent → present"
    assert "parsimony: unambiguous" in defining["Hooked handle end"]["evidence"]
    brief = next(p for p in plan.pages if p.path == f"briefs/{results.ids[v]}.html")
    listed = [r["label"] for g in brief.context["groups"] for key in ("had", "lacked", "unsure")
              for r in g[key]]
    assert sorted(listed) == sorted(c.label for c in atlas.discrete)  # every character once
