"""The build cache is never stale, survives corruption, and --jobs never changes the output.

The reference every cached build is compared with is a clean build of the same source with
the cache switched off (``use_cache=False`` neither reads nor writes it). The atlas is the
starter of ``atlas new`` (invented carved spoons) with an invented rules file, contacts file
and image added, so every kind of input can be changed.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from atlas.build import build
from atlas.cache import FOLDER

from .conftest import write_atlas

SVG = ('<svg xmlns="http://www.w3.org/2000/svg" width="40" height="20" viewBox="0 0 40 20">'
       '<rect width="40" height="20" fill="#{}"/></svg>\n')
EXTRA = {
    "rules.toml": '[[rule]]\nwhen = { character = "hook", state = "1" }\n'
                  'needs = { character = "handle", state = "1" }\n',
    "contacts.csv": "from,to,characters,note\nspoon-a,spoon-d,notch,Invented exchange.\n",
    "media/spoon-a.svg": SVG.format("336699"),
    "media/spoon-b.png": b"",  # written by the fixture (an invented raster, see _png)
}


def _png(colour: tuple[int, int, int]) -> bytes:
    """An invented 400 x 200 photograph stand-in: wide enough for resized copies."""
    import io

    from PIL import Image

    out = io.BytesIO()
    Image.new("RGB", (400, 200), colour).save(out, "PNG")
    return out.getvalue()


def _files(out: Path) -> dict[str, bytes]:
    return {p.relative_to(out).as_posix(): p.read_bytes() for p in sorted(out.rglob("*"))
            if p.is_file()}


def _edit(root: Path, name: str, old: str, new: str) -> None:
    path = root / name
    text = path.read_text("utf-8")
    assert old in text, (name, old)
    path.write_text(text.replace(old, new, 1), encoding="utf-8")


@pytest.fixture
def source(starter: Path) -> Path:
    write_atlas(starter, EXTRA)
    _edit(starter, "atlas.toml", 'gazetteer = "places.csv"\n',
          'gazetteer = "places.csv"\nrules = "rules.toml"\ncontacts = "contacts.csv"\n')
    _edit(starter, "objects/spoon-a.md", "sources:\n",
          'images:\n  - file: "media/spoon-a.svg"\n    alt: "A blue rectangle standing in '
          'for a photograph (invented)"\n    credit: "Invented"\n    licence: "CC-BY-4.0"\n'
          '  - file: "media/spoon-b.png"\n    alt: "A green rectangle standing in for a '
          'photograph (invented)"\n    credit: "Invented"\n'
          "sources:\n")
    (starter / "media" / "spoon-b.png").write_bytes(_png((40, 120, 60)))
    return starter


def _same_as_clean(root: Path, tmp: Path, tag: str) -> None:
    cached = build(root, tmp / f"cached-{tag}", use_cache=True)
    clean = build(root, tmp / f"clean-{tag}", use_cache=False)
    assert cached.pages == clean.pages
    a, b = _files(tmp / f"cached-{tag}"), _files(tmp / f"clean-{tag}")
    assert a.keys() == b.keys(), tag
    different = [p for p in a if a[p] != b[p]]
    assert not different, (tag, different[:5])


CHANGES = [  # (what, file, old text, new text); applied one after the other
    ("trees", "trees.nex", "(5:1,6:1):1);", "(5:3,6:1):1);"),
    ("matrix", "matrix.csv", "spoon-c,0,1,0,0", "spoon-c,0,1,1,0"),
    ("gazetteer", "places.csv", "-31.80,-15.05", "-31.95,-15.25"),
    ("object note", "objects/spoon-b.md", "so it is coded unknown", "so it is coded as unknown"),
    # the title shows on tree, clade and place pages, which the plan cache keeps across edits
    # of note text only: a new title must reach them
    ("object title", "objects/spoon-b.md", "title: Spoon with hooked handle and plain rim",
     "title: Spoon with a hooked handle"),
    ("object place", "objects/spoon-b.md", "place: brinmoor\naccess: public\n---\nA second",
     "place: calder-end\naccess: public\n---\nA second"),
    ("character note", "characters/hook.md", "label: Hooked handle end", "label: Hook at the end"),
    ("clade note", "clades/hooked.md", "title:", "title: Renamed"),
    ("free page", "pages/about.md", "invented", "made up"),
    ("rules", "rules.toml", 'state = "1" }\nneeds', 'state = "0" }\nneeds'),
    ("contacts", "contacts.csv", "Invented exchange.", "An invented exchange of notches."),
    ("analysis settings", "atlas.toml", 'rates = "equal"', 'rates = "gamma4"'),
    ("profile settings", "atlas.toml", '[profiles.public]\naccess = ["public"]',
     '[profiles.public]\naccess = ["public", "community"]'),
]


def test_cached_rebuilds_match_a_clean_build_after_every_kind_of_change(source, tmp_path):
    build(source, tmp_path / "first", use_cache=True)
    assert (source / FOLDER / ".gitignore").is_file()
    for what, name, old, new in CHANGES:
        _edit(source, name, old, new)
        _same_as_clean(source, tmp_path, what.replace(" ", "-"))
    (source / "media" / "spoon-a.svg").write_text(SVG.format("993366"), encoding="utf-8")
    _same_as_clean(source, tmp_path, "image")
    (source / "media" / "spoon-b.png").write_bytes(_png((120, 40, 60)))  # resized copies too
    _same_as_clean(source, tmp_path, "raster-image")
    assert (tmp_path / "cached-raster-image" / "media" / "spoon-b-320w.png").is_file()
    # the reference itself moved: the last cached build shows the last edits
    page = (tmp_path / "cached-image" / "pages" / "about.html").read_text("utf-8")
    assert "made up" in page
    # a second language, then an edited translation of a character (invented French)
    _edit(source, "atlas.toml", 'languages = ["en"]', 'languages = ["en", "fr"]')
    write_atlas(source, {"characters/hook.fr.md": '---\nlabel: Manche à crochet\n---\n'})
    _same_as_clean(source, tmp_path, "language")
    _edit(source, "characters/hook.fr.md", "Manche à crochet", "Manche crochu")
    _same_as_clean(source, tmp_path, "translation")
    page = (tmp_path / "cached-translation" / "fr" / "characters" / "hook.html").read_text("utf-8")
    assert "<h1>Manche crochu</h1>" in page


def test_a_corrupt_or_deleted_cache_is_rebuilt(source, tmp_path):
    build(source, tmp_path / "warm", use_cache=True)
    entries = [p for p in (source / FOLDER).rglob("*.pickle")]
    assert {p.parent.name for p in entries} >= {"trees", "analysis", "audit", "markdown"}
    for k, path in enumerate(entries):  # truncated, garbage, empty
        path.write_bytes([b"", b"not a pickle", path.read_bytes()[:20]][k % 3])
    # compiled templates: garbage, and cut short one byte past Jinja's header, where Jinja's
    # own reader would raise
    from jinja2.bccache import bc_magic

    compiled = [p for p in (source / FOLDER).glob("templates-*/*") if p.is_file()]
    assert compiled
    for k, path in enumerate(compiled):
        path.write_bytes([b"garbage", path.read_bytes()[:len(bc_magic) + 1]][k % 2])
    from atlas.site import render

    render._ENVIRONMENTS.clear()  # as in a new process: templates are read from the folder
    _same_as_clean(source, tmp_path, "corrupt")
    for path in (source / FOLDER).rglob("*"):
        if path.is_file():
            path.unlink()
    _same_as_clean(source, tmp_path, "deleted")


def test_the_cache_is_not_written_when_switched_off(source, tmp_path):
    build(source, tmp_path / "off", use_cache=False)
    assert not (source / FOLDER).exists()
    _edit(source, "atlas.toml", 'licence = "CC-BY-4.0"\n', 'licence = "CC-BY-4.0"\ncache = false\n')
    build(source, tmp_path / "off-config")
    assert not (source / FOLDER).exists()


def test_output_is_identical_for_any_number_of_jobs(source, tmp_path, monkeypatch):
    monkeypatch.setattr("atlas.analysis.sampling.CHUNK", 1)  # so the 3 trees make 3 tasks
    monkeypatch.setattr("atlas.parallel.MIN_ITEMS", 0)  # every forked path, even for 20 pages
    outputs = []
    for jobs in (1, 2, 3):
        build(source, tmp_path / f"jobs-{jobs}", jobs=jobs, use_cache=False)
        outputs.append(_files(tmp_path / f"jobs-{jobs}"))
    assert outputs[0] == outputs[1] == outputs[2]


def test_an_edit_of_note_text_reuses_the_plan_of_tree_clade_and_character_pages(
        source, tmp_path, monkeypatch):
    from atlas.site import plan

    calls = []
    real = plan._note_free_plan
    monkeypatch.setattr(plan, "_note_free_plan", lambda *a: calls.append(1) or real(*a))
    build(source, tmp_path / "a", use_cache=True)
    assert len(calls) == 1
    _edit(source, "objects/spoon-b.md", "so it is coded unknown", "so it is coded as unknown")
    build(source, tmp_path / "b", use_cache=True)
    assert len(calls) == 1  # note text only: taken from the cache
    assert "coded as unknown" in (tmp_path / "b" / "objects" / "spoon-b.html").read_text("utf-8")
    _edit(source, "objects/spoon-b.md", "title: Spoon with hooked handle and plain rim",
          "title: Spoon with a hooked handle")
    build(source, tmp_path / "c", use_cache=True)
    assert len(calls) == 2  # a title shows on clade pages: planned again


def test_a_table_grows_by_small_additions_and_is_rewritten_whole_past_its_share(tmp_path):
    from atlas.cache import Cache

    cache = Cache(tmp_path / "cache")
    table = {f"k{i}": i for i in range(100)}
    cache.put_table("t", "key", table, {})
    assert cache.get_table("t", "key") == (table, {})
    grown = {**table, "new": -1}
    cache.put_table("t", "key", grown, {"new": -1})  # 1 of 101: only the addition is written
    assert (tmp_path / "cache" / "t-added" / "key.pickle").is_file()
    assert cache.get("t", "key") == table
    assert cache.get_table("t", "key") == (grown, {"new": -1})
    many = {**grown, **{f"m{i}": i for i in range(20)}}
    added = {k: v for k, v in many.items() if k not in table}
    cache.put_table("t", "key", many, added)  # 21 of 121, past 10%: written whole
    assert cache.get("t", "key") == many
    assert not (tmp_path / "cache" / "t-added" / "key.pickle").exists()
    assert cache.get_table("t", "key") == (many, {})


def test_a_note_edit_converts_that_note_alone_and_matches_a_clean_build(
        source, tmp_path, monkeypatch):
    from atlas.site import markdown

    converted = []

    def counting(real):
        return lambda text: converted.append(text) or real(text)

    monkeypatch.setattr(markdown, "_convert", counting(markdown._convert.__wrapped__))
    monkeypatch.setattr(markdown, "_words", counting(markdown._words.__wrapped__))
    build(source, tmp_path / "a", use_cache=True)
    assert len(converted) > 10  # every note, page and summary of the starter
    converted.clear()
    _edit(source, "objects/spoon-b.md", "so it is coded unknown", "so it is coded as unknown")
    _same_as_clean(source, tmp_path, "note")  # the clean build converts everything again
    edited = [t for t in converted if "coded as unknown" in t]
    assert edited and len(converted) > len(edited)
    converted.clear()
    _edit(source, "objects/spoon-b.md", "coded as unknown", "coded, so, as unknown")
    build(source, tmp_path / "b", use_cache=True)
    assert converted and all("coded, so, as unknown" in t for t in converted)
