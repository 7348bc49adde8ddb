"""The lineage tree's shared data files (data/states.js, data/contacts.js) and page hooks.

The starter atlas (invented carved spoons) is changed on the fly: one object restricted, a
contacts table added. Expected values come from outside the code under test: the matrix CSV
read with the csv module, DendroPy's MRCA on the same summary tree, and the closed form that
marginal probabilities sum to one.
"""

from __future__ import annotations

import csv
import io
import json
import re
from dataclasses import replace

import dendropy
import pytest

from atlas.analysis.results import analyse
from atlas.build import build as build_site
from atlas.build import load
from atlas.errors import AtlasError
from atlas.site import treedata
from atlas.site.plan import plan_site
from atlas.sources.tables import Contact
from atlas.sources.trees import write_newick

from .conftest import write_atlas

CONTACTS = ("from,to,characters,note\n"
            "spoon-c,hooked,hook,A carver copied the hooked handle (invented).\n"
            "spoon-d,spoon-e,bowl notch,Neighbours shared a gouge (invented).\n")


def _files(starter_files: dict[str, str], restricted: str | None = None) -> dict[str, str]:
    files = dict(starter_files)
    files["contacts.csv"] = CONTACTS
    files["atlas.toml"] = files["atlas.toml"].replace(
        'gazetteer = "places.csv"', 'gazetteer = "places.csv"\ncontacts = "contacts.csv"')
    if restricted:
        name = f"objects/{restricted}.md"
        files[name] = files[name].replace("access: public", "access: restricted")
    return files


def data_value(script: str, name: str):
    """The JSON value a data script assigns to ``window.AtlasData.<name>``."""
    match = re.search(rf"window\.AtlasData\.{name} = (.*);\n\Z", script, re.DOTALL)
    assert match, script[:200]
    return json.loads(match.group(1))


@pytest.fixture(scope="module")
def spoons(tmp_path_factory):
    from atlas.starter import FILES

    folder = write_atlas(tmp_path_factory.mktemp("spoons") / "src", _files(dict(FILES)))
    a = load(folder)
    return folder, a, analyse(a)


def test_states_are_node_major_and_match_the_matrix(spoons):
    folder, a, r = spoons
    states = data_value(treedata.data_files(a, r)["data/states.js"], "states")
    assert states["n_nodes"] == r.tree.n_nodes
    # the matrix as written (read here with the csv module, not the atlas reader)
    rows = {row["object"]: row for row in csv.DictReader(io.StringIO(
        (folder / "matrix.csv").read_text()))}
    for ch in states["characters"]:
        k = ch["k"]
        assert len(ch["p"]) == r.tree.n_nodes * k
        assert len(ch["changes"]) == r.tree.n_nodes
        for v in range(r.tree.n_nodes):
            p = ch["p"][v * k:(v + 1) * k]
            # closed form: marginal probabilities sum to one, up to rounding at 3 decimals
            assert abs(sum(p) - 1) <= 0.0005 * k + 1e-9
            if r.tree.tip[v] >= 0:
                cell = rows[r.ids[v]][ch["id"]]
                if cell in ch["symbols"]:  # a single coded state: probability one there
                    assert p[ch["symbols"].index(cell)] == 1
        assert ch["changes"][r.tree.root] == 0  # no branch above the root (by definition)


def test_total_changes_are_the_sum_over_characters(spoons):
    _, a, r = spoons
    states = treedata.states_data(a, r)
    for v in range(r.tree.n_nodes):
        summed = sum(ch["changes"][v] for ch in states["characters"])
        # each term is rounded to 3 decimals: the sum can drift by half a unit per term
        assert abs(states["total_changes"][v] - summed) <= 0.0005 * len(states["characters"])


def test_contact_ends_are_tips_and_dendropy_mrca(spoons):
    _, a, r = spoons
    contacts = treedata.contacts_data(a, r)
    assert len(contacts) == 2
    tree = dendropy.Tree.get(data=write_newick(r.tree, lengths=False), schema="newick",
                             preserve_underscores=True, rooting="force-rooted")
    mrca = tree.mrca(taxon_labels=["spoon-a", "spoon-b"])  # the "hooked" clade note's members
    expected = sorted(leaf.taxon.label for leaf in mrca.leaf_iter())
    first = contacts[0]
    assert r.ids[first["source"]] == "spoon-c"
    assert list(r.members[first["target"]]) == expected
    hook = next(c for c in a.characters if c.id == "hook")
    assert first["characters"] == [hook.label]  # labels, not ids, for the hover box
    second = contacts[1]
    assert (r.ids[second["source"]], r.ids[second["target"]]) == ("spoon-d", "spoon-e")


def test_unknown_contact_end_is_reported_with_a_hint(spoons):
    _, a, r = spoons
    bad = (Contact("spoon-x", "hooked", (), "", "contacts.csv", 2),
           Contact("spoon-a", "hookd", (), "", "contacts.csv", 3))
    with pytest.raises(AtlasError) as info:
        treedata.contact_nodes(replace(a, contacts=bad), r)
    problems = info.value.problems
    assert [(p.file, p.line) for p in problems] == [("contacts.csv", 2), ("contacts.csv", 3)]
    assert "did you mean" in problems[1].hint and "hooked" in problems[1].hint


def test_withheld_object_is_in_no_data_file(tmp_path, starter_files):
    folder = write_atlas(tmp_path / "src", _files(starter_files, restricted="spoon-b"))
    a = load(folder)
    r = analyse(a)
    plan = plan_site(a, r)  # with the tree data files hooked in
    title = "Spoon with hooked handle and plain rim"
    assert title in starter_files["objects/spoon-b.md"]  # the title we must not see
    for name in ("data/tree.js", "data/states.js", "data/contacts.js"):
        text = plan.data[name]
        assert "spoon-b" not in text, name
        assert title not in text, name
    # the withheld tip keeps its place in the arrays: the node count still matches the layout
    states = data_value(plan.data["data/states.js"], "states")
    tree = data_value(plan.data["data/tree.js"], "tree")
    assert states["n_nodes"] == len(tree["nodes"])


def test_check_character_ids_lists_every_unknown_id(spoons):
    _, a, _ = spoons
    treedata.check_character_ids(a, ["bowl", "hook"])
    with pytest.raises(AtlasError) as info:
        treedata.check_character_ids(a, ["bowel", "hock", "nothing-like-it"])
    messages = [p.message for p in info.value.problems]
    assert len(messages) == 3
    hints = {p.message: p.hint for p in info.value.problems}
    assert "bowl" in hints["unknown discrete character 'bowel'"]


def test_pages_carry_controls_and_scripts(tmp_path, starter_files):
    folder = write_atlas(tmp_path / "src", _files(starter_files))
    out = tmp_path / "site"
    build_site(folder, out)  # plan_site adds the tree controls and data files
    html = (out / "tree.html").read_text()
    # every form control has a label naming it, in our own words
    for control in re.findall(r'<(?:select|input)[^>]*\bid="([^"]+)"', html):
        assert f'<label for="{control}">' in html, control
    for words in ("Layout", "Branch lengths", "Collapse clades below support", "Shade by trait",
                  "Find an object"):
        assert f">{words}</label>" in html
    assert 'aria-live="polite"' in html
    inline = re.search(r'<script(?![^>]*\b(?:src=|type="application/ld\+json"))', html)
    assert inline is None  # no inline script (JSON-LD is data, not script)
    assert re.search(r"\son[a-z]+=", html) is None  # no inline handler
    scripts = re.findall(r'<script src="([^"]+)"', html)
    assert scripts == ["assets/plotly.min.js", "data/tree.js", "data/states.js",
                       "data/contacts.js", "assets/tree.js"]
    for group in ("Bowl", "Handle"):  # the starter's character groups become optgroups
        assert f'<optgroup label="{group}">' in html
    page = (out / "characters" / "bowl.html").read_text()
    assert 'data-character="bowl"' in page
    assert '<script src="../data/states.js">' in page
    assert "window.AtlasData" not in page  # the tree itself is not copied into the page
    assert (out / "data" / "states.js").is_file() and (out / "data" / "contacts.js").is_file()


def test_data_is_deterministic(spoons):
    _, a, r = spoons
    assert treedata.data_files(a, r) == treedata.data_files(a, analyse(a))


def test_no_mutable_module_state():
    # the module's public names are functions, constants and immutable tuples only
    for name, value in vars(treedata).items():
        if not name.startswith("_") and isinstance(value, (list, dict, set)):
            pytest.fail(f"module-level mutable {name}")
