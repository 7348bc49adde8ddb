"""Downloads and citations: every file read back by an outside reader (PyYAML, DendroPy, the
csv and json modules, ElementTree), withheld objects relabelled, output deterministic.

The atlas is the invented starter atlas with restricted material (see ``test_search``).
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import json
import re
import xml.etree.ElementTree as ET

import dendropy
import pytest
import yaml

from atlas.errors import AtlasError
from atlas.site import downloads
from atlas.site.plan import plan_site
from atlas.site.render import SiteInfo
from atlas.stats import study_stats

from .test_search import HIDDEN_PLACE, HOSTILE, SECRET, make_atlas, publishing_files

RELEASED = dt.date(2023, 11, 14)  # SOURCE_DATE_EPOCH=1700000000 is 2023-11-14T22:13:20Z


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    atlas, results = make_atlas(tmp_path_factory.mktemp("downloads") / "atlas")
    plan = plan_site(atlas, results)
    page, files = downloads.downloads_plan(atlas, results, plan.links,
                                           study_stats(atlas, results), released=RELEASED)
    return atlas, results, plan, page, files


def test_release_date_only_from_source_date_epoch():
    assert downloads.release_date({"SOURCE_DATE_EPOCH": "1700000000"}) == RELEASED
    assert downloads.release_date({}) is None
    with pytest.raises(AtlasError) as caught:
        downloads.release_date({"SOURCE_DATE_EPOCH": "yesterday"})
    assert caught.value.problems[0].file == "SOURCE_DATE_EPOCH"


def test_citation_cff_reads_back_as_cff_1_2_0(made):
    atlas, _, _, _, files = made
    cff = yaml.safe_load(files["downloads/CITATION.cff"])
    # required keys of CFF 1.2.0: cff-version, message, title, authors (from memory)
    assert cff["cff-version"] == "1.2.0" and cff["message"]
    assert cff["title"] == atlas.config.title and cff["type"] == "dataset"
    assert cff["authors"] == [{"family-names": "Quill", "given-names": "Mara"},
                              {"name": "Brinmoor Carvers Circle (invented)"}]
    assert cff["license"] == "CC-BY-4.0"
    assert cff["date-released"] == "2023-11-14"
    assert cff["url"] == "https://atlas.example.org/spoons/"


def test_no_date_and_no_url_unless_given():
    text = downloads.citation_cff("Spoons: a test (invented)", [], "CC0-1.0")
    cff = yaml.safe_load(text)
    assert "date-released" not in cff and "url" not in cff and "version" not in cff
    assert cff["authors"] == [{"name": "Authors of Spoons: a test (invented)"}]
    assert cff["title"] == "Spoons: a test (invented)"  # the colon survives YAML quoting


def test_bibtex_entry_is_balanced_and_escaped():
    text = downloads.citation_bibtex("Spoons & ladles: 100% carved_{x} (invented)",
                                     ["Quill, Mara", "Brinmoor Carvers"], "CC-BY-4.0",
                                     released=RELEASED, url="https://atlas.example.org/s/")
    assert text.startswith("@misc{quill2023-spoons,\n")
    depth = 0
    for i, c in enumerate(text):
        if c in "{}" and text[i - 1] != "\\":
            depth += 1 if c == "{" else -1
            assert depth >= 0
    assert depth == 0
    assert r"Spoons \& ladles: 100\% carved\_\{x\} (invented)" in text
    assert "author = {Quill, Mara and {Brinmoor Carvers}}" in text
    assert "year = {2023}" in text and "url = {https://atlas.example.org/s/}" in text


def test_matrix_csv_relabels_the_withheld_object(made, tmp_path):
    _atlas, _, _, _, files = made
    rows = list(csv.reader(io.StringIO(files["downloads/matrix.csv"])))
    source = list(csv.reader(io.StringIO(str(publishing_files()["matrix.csv"]))))
    assert rows[0] == source[0]
    by_id = {r[0]: r[1:] for r in rows[1:]}
    expected = {r[0] if r[0] != "spoon-c" else "withheld-1": r[1:] for r in source[1:]}
    assert by_id == expected  # the cells as coded in the source (invented case)
    assert [r[0] for r in rows[1:]][-1] == "withheld-1"  # not where spoon-c would sort


def _clades(tree: dendropy.Tree) -> set[frozenset[str]]:
    return {frozenset(leaf.taxon.label for leaf in node.leaf_iter())
            for node in tree.postorder_node_iter() if not node.is_leaf()}


def test_sampled_trees_read_back_with_dendropy(made):
    atlas, _, _, _, files = made
    original = dendropy.TreeList.get(data=str(publishing_files()["trees.nex"]), schema="nexus",
                                     preserve_underscores=True)
    kept = list(original)[atlas.sample.burnin:]
    rename = {"spoon-c": "withheld-1"}
    expected = [{frozenset(rename.get(t, t) for t in c) for c in _clades(t)} for t in kept]
    for name, schema in (("trees.nwk", "newick"), ("trees.nex", "nexus")):
        ours = dendropy.TreeList.get(data=files[f"downloads/{name}"], schema=schema,
                                     preserve_underscores=True, rooting="force-rooted")
        assert [_clades(t) for t in ours] == expected, name
        lengths = sorted(round(e.length, 9) for t in ours for e in t.postorder_edge_iter()
                         if e.length is not None)
        assert lengths == sorted(round(e.length, 9) for t in kept
                                 for e in t.postorder_edge_iter() if e.length is not None)
    nexus = files["downloads/trees.nex"]
    assert re.search(r"TAXLABELS [^;]*withheld-1;", nexus)


def test_summary_tree_carries_clade_support(made):
    _atlas, results, _, _, files = made
    tree = dendropy.Tree.get(data=files["downloads/summary.nwk"], schema="newick",
                             preserve_underscores=True, rooting="force-rooted")
    members = {tuple(sorted("withheld-1" if m == "spoon-c" else m for m in mem)): v
               for v, mem in enumerate(results.members)}
    for node in tree.postorder_node_iter():
        if node.is_leaf() or node.parent_node is None:
            continue
        v = members[tuple(sorted(leaf.taxon.label for leaf in node.leaf_iter()))]
        assert float(node.label) == pytest.approx(results.summary.support[v], abs=5e-4)


def test_places_geojson_follows_rfc_7946(made):
    _atlas, _, _, _, files = made
    data = json.loads(files["downloads/places.geojson"])
    assert data["type"] == "FeatureCollection"
    features = {f["id"]: f for f in data["features"]}
    for f in features.values():
        lon, lat = f["geometry"]["coordinates"]  # RFC 7946 3.1.1: longitude first
        assert f["type"] == "Feature" and -180 <= lon <= 180 and -90 <= lat <= 90
    assert features["brinmoor"]["geometry"]["coordinates"] == [-15.41, -31.52]  # places.csv
    # generalised to the centre of its 1-degree cell: floor(-14.70) + 0.5, floor(-32.10) + 0.5
    assert features["old-fold"]["geometry"]["coordinates"] == [-14.5, -32.5]
    assert features["old-fold"]["properties"]["precision"] == "generalised"
    assert "sundered-cove" not in features  # community only: not in the public profile
    assert "spoon-c" not in json.dumps(data)


def test_stats_json_relabels_every_mention(made):
    atlas, results, _, _, files = made
    text = files["downloads/stats.json"]
    assert "spoon-c" not in text and "withheld-1" in text
    assert json.loads(text) == downloads.relabel(study_stats(atlas, results),
                                                 {"spoon-c": "withheld-1"})


def test_no_download_names_what_is_withheld(made):
    _, _, _, page, files = made
    for name, text in files.items():
        for secret in ("spoon-c", SECRET, HIDDEN_PLACE):
            assert secret not in text, (name, secret)
    listed = {f["href"] for f in page.context["files"]}
    assert {f"downloads/{h}" for h in listed} == set(files)


def test_sitemap_only_with_a_base_url(made):
    _, _, plan, _, _ = made
    assert downloads.sitemap("", plan.pages) == {}
    text = downloads.sitemap("https://atlas.example.org/spoons", plan.pages)["sitemap.xml"]
    ns = {"s": "http://www.sitemaps.org/schemas/sitemap/0.9"}
    locs = [e.text for e in ET.fromstring(text).findall("s:url/s:loc", ns)]
    assert locs == sorted(f"https://atlas.example.org/spoons/{p.path}" for p in plan.pages)


def test_jsonld_is_data_that_cannot_close_its_script(made):
    atlas, _, plan, _, _ = made
    site = SiteInfo(title=atlas.config.title, licence="CC-BY-4.0", nav=[], kiosk=False,
                    idle_seconds=120, language="en", generator="test")
    hostile = next(p for p in plan.pages if p.context.get("title") == HOSTILE)
    body = downloads.jsonld(hostile, site)
    assert "<" not in body and ">" not in body  # all written as JSON unicode escapes
    data = json.loads(body)
    assert data["@context"] == "https://schema.org" and data["@type"] == "WebPage"
    assert data["name"] == HOSTILE and data["about"]["identifier"] == "spoon-b"
    assert data["url"] == "../objects/spoon-b.html"  # relative without a base URL
    home = json.loads(downloads.jsonld(plan.pages[0], site))
    assert home["@type"] == "Dataset" and home["license"].endswith("/CC-BY-4.0.html")


def test_every_file_is_deterministic(made, tmp_path):
    _atlas, _results, _plan, page, files = made
    again_atlas, again_results = make_atlas(tmp_path / "again")
    again_plan = plan_site(again_atlas, again_results)
    page2, files2 = downloads.downloads_plan(again_atlas, again_results, again_plan.links,
                                             study_stats(again_atlas, again_results),
                                             released=RELEASED)
    assert files2 == files and page2 == page
