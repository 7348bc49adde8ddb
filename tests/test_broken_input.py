"""Broken input through the command line: exit 1, the file and line named, no traceback.

Each case starts from the starter atlas (invented) and breaks one thing. ``atlas build`` runs as
a separate process (``python -m atlas build``) into an output folder that already holds a good
build; that build must come out byte for byte unchanged. Two cases are awkward but readable
(Latin-1 text, CRLF line endings) and must build. The cases run four at a time: each process
spends most of its few seconds importing the numeric libraries.
"""

from __future__ import annotations

import hashlib
import shutil
import subprocess
import sys
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path

import pytest

from atlas.build import build
from atlas.errors import AtlasError

from .conftest import STARTER, write_atlas

Files = dict[str, str | bytes]


def _replace(name: str, old: str, new: str) -> Callable[[Files], None]:
    def change(files: Files) -> None:
        text = files[name]
        assert isinstance(text, str) and old in text, (name, old)
        files[name] = text.replace(old, new, 1)
    return change


def _set(name: str, value: str | bytes | None) -> Callable[[Files], None]:
    def change(files: Files) -> None:
        if value is None:
            del files[name]
        else:
            files[name] = value
    return change


def _cut(text: str | bytes, end: str) -> str:
    """The text up to and including the last occurrence of ``end``: a file cut short."""
    assert isinstance(text, str) and end in text
    return text[: text.rindex(end) + len(end)]


def _latin1(files: Files) -> None:
    text = files["objects/spoon-a.md"]
    assert isinstance(text, str)
    files["objects/spoon-a.md"] = text.replace("for hanging", "for hanging (façade, été)"
                                               ).encode("latin-1")


def _crlf(files: Files) -> None:
    for name, text in files.items():
        if isinstance(text, str):
            files[name] = text.replace("\n", "\r\n")


@dataclass(frozen=True)
class Case:
    name: str
    change: Callable[[Files], None]
    expect: str  # the start of the first message about it: "file:line:" or "file:"
    exit_code: int = 1
    also: str = ""  # more text the message must hold
    no_line: bool = False  # the message names the file only: "file: ..."


# Lines in the starter files (atlas/starter.py): trees.nex has its trees on lines 11-14; the
# matrix header is line 1 and spoon-a..f are lines 2-7; places.csv has brinmoor on line 2,
# calder-end 3, old-fold 4; clades/hooked.md has members on line 3; objects/spoon-a.md has
# title on line 3; atlas.toml has burnin on 12, model on 15, seed on 17. atlas.toml is named by
# its path as given on the command line. (invented case)
CASES = [
    Case("unbalanced-tree", _replace("trees.nex", "TREE t2 = [&R] ((((1:1,2:1):1",
                                     "TREE t2 = [&R] ((((1:1,2:1:1"), "trees.nex:12:"),
    Case("truncated-tree", lambda f: f.update({"trees.nex": _cut(f["trees.nex"], "(3:1,4:1")}),
         "trees.nex:14:", also="truncated"),
    # cut inside the last TREE command: no tree is lost mid-way, but the block never ends
    Case("truncated-trees-block", lambda f: f.update({"trees.nex": _cut(f["trees.nex"],
                                                                        "  TRE")}),
         "trees.nex:"),
    Case("empty-tree-file", _set("trees.nex", ""), "trees.nex:", no_line=True),
    Case("missing-tree-file", _set("trees.nex", None), "trees.nex:", also="missing",
         no_line=True),
    Case("unknown-tip-in-clade-note", _replace("clades/hooked.md", "[spoon-a, spoon-b]",
                                               "[spoon-a, spoon-bb]"),
         "clades/hooked.md:3:", also="spoon-bb"),
    Case("ragged-matrix-row", _replace("matrix.csv", "spoon-c,0,1,0,0", "spoon-c,0,1,0"),
         "matrix.csv:4:"),
    Case("duplicated-matrix-row", _replace("matrix.csv", "spoon-c,0,1,0,0",
                                           "spoon-c,0,1,0,0\nspoon-c,0,1,0,0"),
         "matrix.csv:5:", also="first at line 4"),
    Case("unknown-state-symbol", _replace("matrix.csv", "spoon-c,0,1,0,0", "spoon-c,7,1,0,0"),
         "matrix.csv:4:", also="7"),
    Case("binary-junk-in-matrix", _set("matrix.csv", b"object,bowl\nspoon-a,\x00\x01\x02\xff\n"),
         "matrix.csv:2:"),
    Case("latitude-out-of-range", _replace("places.csv", "-31.80,-15.05", "95.5,-15.05"),
         "places.csv:3:", also="latitude"),
    Case("longitude-not-a-number", _replace("places.csv", "-32.10,-14.70", "-32.10,east"),
         "places.csv:4:", also="longitude"),
    Case("broken-yaml-front-matter", _replace("objects/spoon-a.md", "title: Spoon with hooked "
                                              "handle", "title: [Spoon with hooked handle"),
         "objects/spoon-a.md:4:", also="not valid YAML"),  # where YAML meets the ":"
    Case("unclosed-front-matter", _set("objects/spoon-c.md", "---\nid: spoon-c\ntitle: x\n"),
         "objects/spoon-c.md:1:"),
    Case("unknown-place-in-note", _replace("objects/spoon-d.md", "place: calder-end",
                                           "place: calder-edn"),
         "objects/spoon-d.md:4:", also="calder-end"),
    Case("toml-wrong-type", _replace("atlas.toml", "burnin = 0.25", 'burnin = "a quarter"'),
         "atlas.toml:12:", also="burnin"),
    Case("toml-wrong-value", _replace("atlas.toml", 'model = "mk"', 'model = "mkk"'),
         "atlas.toml:15:", also="model"),
    Case("toml-bad-syntax", _replace("atlas.toml", "seed = 1", "seed = = 1"), "atlas.toml:17:"),
    Case("toml-title-not-text", _replace("atlas.toml", 'title = "Starter atlas: carved spoons '
                                         '(invented example)"', "title = 12"),
         "atlas.toml:2:", also="title"),
    Case("geojson-not-json", lambda f: f.update({"places.geojson": '{"type": "FeatureCol',
                                                 "atlas.toml": str(f["atlas.toml"]).replace(
                                                     'gazetteer = "places.csv"',
                                                     'gazetteer = "places.geojson"')}),
         "places.geojson:1:"),
    Case("latin-1-note", _latin1, "objects/spoon-a.md:", exit_code=0, also="Latin-1"),
    Case("crlf-everywhere", _crlf, "", exit_code=0),
    Case("unchanged", lambda f: None, "", exit_code=0),  # the control for crlf-everywhere
]


def make_case(folder: Path, case: Case) -> Path:
    files: Files = dict(STARTER)
    case.change(files)
    return write_atlas(folder, files)


def digest(folder: Path) -> dict[str, str]:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


@dataclass(frozen=True)
class Outcome:
    code: int
    stderr: str
    before: dict[str, str]
    after: dict[str, str]
    out: Path
    source: Path


@pytest.fixture(scope="module")
def outcomes(tmp_path_factory) -> dict[str, Outcome]:
    """Every case built by the CLI over a copy of one good build (four processes at a time)."""
    folder = tmp_path_factory.mktemp("broken")
    good = folder / "good-site"
    build(write_atlas(folder / "good", dict(STARTER)), good)

    def run(case: Case) -> Outcome:
        source = make_case(folder / case.name, case)
        out = folder / f"{case.name}-site"
        shutil.copytree(good, out)
        before = digest(out)
        result = subprocess.run([sys.executable, "-m", "atlas", "build", str(source), "--out",
                                 str(out), "--quiet"], capture_output=True, text=True,
                                cwd=folder, timeout=180, check=False)
        return Outcome(result.returncode, result.stderr, before, digest(out), out, source)

    with ThreadPoolExecutor(max_workers=4) as pool:
        return dict(zip([c.name for c in CASES], pool.map(run, CASES)))


def test_there_are_enough_cases():
    assert len([c for c in CASES if c.exit_code == 1]) >= 15


@pytest.mark.parametrize("case", [c for c in CASES if c.exit_code == 1], ids=lambda c: c.name)
def test_bad_input_exits_1_names_the_place_and_leaves_the_old_build(outcomes, case):
    outcome = outcomes[case.name]
    assert outcome.code == 1, outcome.stderr
    assert "Traceback" not in outcome.stderr
    lines = outcome.stderr.splitlines()
    named = [line.removeprefix(f"{outcome.source}/") for line in lines]
    named = [line for line in named if line.startswith(case.expect)]
    assert named, f"no line starts with {case.expect!r}:\n{outcome.stderr}"
    if case.no_line:
        assert any(line.startswith(case.expect + " ") for line in named), named
    assert case.also in "\n".join(named), outcome.stderr
    assert outcome.after == outcome.before, "the earlier build was changed"


@pytest.mark.parametrize("case", [c for c in CASES if c.exit_code == 0], ids=lambda c: c.name)
def test_awkward_but_readable_input_builds(outcomes, case):
    outcome = outcomes[case.name]
    assert outcome.code == 0, outcome.stderr
    assert "Traceback" not in outcome.stderr
    if case.expect:
        assert any(line.startswith(case.expect) and case.also in line
                   for line in outcome.stderr.splitlines()), outcome.stderr
    html = (outcome.out / "objects/spoon-a.html").read_text(encoding="utf-8")
    assert "hooked handle" in html
    if case.name == "latin-1-note":
        assert "façade, été" in html  # decoded, not mangled
        assert outcome.after != outcome.before
    if case.name == "crlf-everywhere":
        # line endings change nothing: the site is the LF starter's, byte for byte
        assert outcome.after == outcomes["unchanged"].after


def test_a_broken_anchor_in_a_note_fails_the_build_naming_the_page(tmp_path):
    files: Files = dict(STARTER)
    files["objects/spoon-c.md"] = str(files["objects/spoon-c.md"]) + (
        "\nCompare [the about page](page:about#nowhere).\n")
    with pytest.raises(AtlasError) as info:
        build(write_atlas(tmp_path / "src", files), tmp_path / "out")
    [problem] = info.value.problems
    assert problem.file == "objects/spoon-c.html"
    assert "broken anchor" in problem.message and "nowhere" in problem.message
    assert "pages/about.html" in problem.message
    assert not (tmp_path / "out").exists()
