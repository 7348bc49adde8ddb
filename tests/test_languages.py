"""Interface languages: the gettext catalogues, the per-language site and ``atlas check``.

The catalogues are checked against a fresh extraction with Babel's own extractors (Python and
Jinja's ``babel_extract``), so a string marked in a template or module but missing from a
shipped catalogue fails here. The sites are small invented atlases (the starter's carved
spoons), given a second language in the test.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from click.testing import CliRunner

from atlas.audit import audit_links
from atlas.build import build
from atlas.cli import main
from atlas.i18n import (
    catalogue_path,
    extract_catalogue,
    language_name,
    locale_dir,
    msgids,
    read_catalogue,
    translator,
    untranslated,
)
from atlas.site.languages import relocate
from atlas.starter import FILES as STARTER

from .conftest import write_atlas

SHIPPED = sorted(p.parent.parent.name for p in locale_dir().glob("*/LC_MESSAGES/atlas.po"))
_PLACEHOLDER = re.compile(r"%\([a-z_]+\)[sd]|\{[a-z_]+\}")


@pytest.fixture(scope="module")
def extracted():
    return extract_catalogue()


def test_a_second_language_ships():
    assert "fr" in SHIPPED


def test_template_holds_every_marked_string(extracted):
    template = read_catalogue(locale_dir() / "atlas.pot")
    assert msgids(extracted) == msgids(template), (
        "atlas/locale/atlas.pot is out of date: run scripts/update_catalogues.py")


@pytest.mark.parametrize("lang", SHIPPED)
def test_shipped_catalogue_translates_every_marked_string(extracted, lang):
    catalog = read_catalogue(catalogue_path(lang))
    missing = untranslated(catalog, msgids(extracted))
    assert not missing, f"{len(missing)} msgids untranslated in {lang}: {missing[:10]}"
    assert not [m.id for m in catalog if m.id and m.fuzzy], "fuzzy entries are never used"


@pytest.mark.parametrize("lang", SHIPPED)
def test_translations_keep_their_placeholders(lang):
    # A msgstr must name the same {fields} and %(fields)s as its msgid, or formatting fails
    # (or silently drops a number) on the translated pages.
    for m in read_catalogue(catalogue_path(lang)):
        if not m.id:
            continue
        ids = [m.id] if isinstance(m.id, str) else list(m.id)
        strings = [m.string] if isinstance(m.string, str) else list(m.string)
        want = set(_PLACEHOLDER.findall(ids[-1])) - {"%(num)d"}
        for s in filter(None, strings):  # empty ones fail the test above
            assert set(_PLACEHOLDER.findall(s)) - {"%(num)d"} == want, (m.id, s)


def test_untranslated_finds_empty_fuzzy_and_missing_entries(tmp_path):
    # Invented catalogue: one entry translated, one empty, one fuzzy, one absent.
    po = tmp_path / "xx" / "LC_MESSAGES" / "atlas.po"
    po.parent.mkdir(parents=True)
    po.write_text('msgid ""\nmsgstr ""\n"Content-Type: text/plain; charset=utf-8\\n"\n\n'
                  'msgid "Glossary"\nmsgstr "Glossar"\n\nmsgid "Methods"\nmsgstr ""\n\n'
                  '#, fuzzy\nmsgid "Search"\nmsgstr "Suche"\n', encoding="utf-8")
    catalog = read_catalogue(po)
    assert untranslated(catalog, {"Glossary", "Methods", "Search", "Home"}) == [
        "Home", "Methods", "Search"]
    t = translator("xx", tmp_path)
    assert t.gettext("Glossary") == "Glossar"
    assert t.gettext("Search") == "Search"  # fuzzy entries are left out when compiling


def test_language_names_are_written_in_themselves():
    # CLDR (through Babel) names each language in itself.
    assert language_name("fr") == "Français"
    assert language_name("en") == "English"
    assert language_name("es") == "Español"


def test_relocate_points_shared_files_at_the_root():
    html = ('<link href="../assets/a.css"><img src="../media/x.svg" '
            'srcset="../media/x-480.webp 480w, ../media/x.svg 800w"><a href="../index.html">'
            '<a href="#main"><a href="https://example.org/">')
    shared = {"assets/a.css", "media/x.svg", "media/x-480.webp"}
    out = relocate(html, "objects/a.html", "fr/", shared)
    assert 'href="../../assets/a.css"' in out and 'src="../../media/x.svg"' in out
    assert 'srcset="../../media/x-480.webp 480w, ../../media/x.svg 800w"' in out
    assert 'href="../index.html"' in out  # a page of the language stays in it
    assert 'href="#main"' in out and 'href="https://example.org/"' in out


# --- a site in two languages (invented) -----------------------------------------------------

def two_language_atlas(folder: Path, second: str = "fr", restricted: bool = False) -> Path:
    files = dict(STARTER)
    files["atlas.toml"] = files["atlas.toml"].replace(
        'languages = ["en"]', f'languages = ["en", "{second}"]\nbase_url = "https://example.org/a/"')
    files["places.csv"] = files["places.csv"].replace(
        "id,name,lat,lon,precision,access", f"id,name,lat,lon,precision,access,name@{second}"
    ).replace("exact,public\n", "exact,public,\n", 1).replace(
        "Calder End (invented),-31.80,-15.05,exact,public",
        "Calder End (invented),-31.80,-15.05,exact,public,Bout-de-Calder (inventé)")
    files[f"objects/spoon-a.{second}.md"] = (
        "---\ntitle: Cuillère à manche crochu\n---\nUne cuillère à long manche terminé par un "
        "crochet pour la suspendre. **Tout, dans cet objet, est inventé.**\n")
    # A character translated in full, one in part (label and one state, no note), the other
    # two not at all (invented French, as the spoons are invented).
    files[f"characters/hook.{second}.md"] = (
        '---\nlabel: Manche à crochet\nstates:\n  "0": absent\n  "1": présent\n---\n'
        "Codé « - » (sans objet) quand la cuillère n’a pas de long manche.\n")
    files[f"characters/bowl.{second}.md"] = (
        '---\nlabel: Profondeur du cuilleron\nstates:\n  "0": peu profond\n---\n')
    if restricted:  # a restricted object whose translation must stay out as well
        files["objects/spoon-e.md"] = files["objects/spoon-e.md"].replace(
            "access: public", "access: restricted")
        files[f"objects/spoon-e.{second}.md"] = (
            "---\ntitle: Cuillère gardée sous clef\n---\nUne note réservée aux gardiens de "
            "la cuillère.\n")
    return write_atlas(folder / "atlas", files)


@pytest.fixture(scope="module")
def two_languages(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("languages")
    out = folder / "site"
    build(two_language_atlas(folder, restricted=True), out)
    return out


def read(site: Path, page: str) -> str:
    return (site / page).read_text(encoding="utf-8")


def test_each_language_has_the_same_pages(two_languages):
    site = two_languages
    english = sorted(p.relative_to(site).as_posix() for p in site.rglob("*.html")
                     if not p.relative_to(site).as_posix().startswith("fr/"))
    french = sorted(p.relative_to(site / "fr").as_posix() for p in (site / "fr").rglob("*.html"))
    assert english == french and "objects/spoon-a.html" in french


def test_french_page_is_french(two_languages):
    page = read(two_languages, "fr/objects/spoon-a.html")
    assert '<html lang="fr">' in page
    assert ">Arbre des lignées</a>" in page and ">Glossaire</a>" in page  # the navigation
    assert "Cuillère à manche crochu" in page and "Une cuillère à long manche" in page
    assert "A long-handled spoon" not in page
    english = read(two_languages, "objects/spoon-a.html")
    assert '<html lang="en">' in english and ">Lineage tree</a>" in english
    assert "A long-handled spoon" in english


def test_untranslated_note_carries_its_language(two_languages):
    page = read(two_languages, "fr/objects/spoon-b.html")
    body = re.search(r'<div class="note-body"([^>]*)>', page)
    assert body and 'lang="en"' in body.group(1)
    # A translated note on the same kind of page carries none: it is in the page's language.
    translated = re.search(r'<div class="note-body"([^>]*)>',
                           read(two_languages, "fr/objects/spoon-a.html"))
    assert translated and "lang=" not in translated.group(1)


def test_language_switch_links_resolve(two_languages):
    site = two_languages
    page = read(site, "fr/objects/spoon-a.html")
    switch = re.search(r'<nav class="site-nav language-switch"[^>]*>(.*?)</nav>', page, re.S)
    assert switch, "no language switch"
    links = re.findall(r'<a href="([^"]+)" lang="([^"]+)" hreflang="([^"]+)"([^>]*)>([^<]+)</a>',
                       switch.group(1))
    assert [(lang, name) for _, lang, _, _, name in links] == [("en", "English"),
                                                                ("fr", "Français")]
    assert all(lang == href_lang for _, lang, href_lang, _, _ in links)
    assert 'aria-current="true"' in links[1][3] and "aria-current" not in links[0][3]
    target = (site / "fr" / "objects" / links[0][0]).resolve()
    assert target == (site / "objects" / "spoon-a.html").resolve()
    english = read(site, "objects/spoon-a.html")
    assert 'href="../fr/objects/spoon-a.html" lang="fr" hreflang="fr"' in english
    files = {p.relative_to(site).as_posix(): p.read_bytes() for p in site.rglob("*")
             if p.is_file()}
    assert audit_links(files) == []  # every link of both languages, the switch included


def test_shared_files_are_written_once(two_languages):
    site = two_languages
    assert not (site / "fr" / "assets").exists()
    assert not (site / "fr" / "data" / "world.js").exists()
    assert (site / "fr" / "data" / "search.js").is_file()  # translated titles: per language
    assert "Cuillère à manche crochu" in read(site, "fr/data/search.js")
    assert "Cuillère" not in read(site, "data/search.js")
    page = read(site, "fr/tree.html")
    assert 'href="../assets/atlas.css"' in page and 'src="../assets/plotly.min.js"' in page


def test_place_names_and_search_texts_are_translated(two_languages):
    place = read(two_languages, "fr/places/calder-end.html")
    assert "<h1>Bout-de-Calder (inventé)</h1>" in place
    search = read(two_languages, "fr/search.html")
    assert 'data-text-none="Aucun résultat pour' in search


def test_one_sitemap_lists_every_language(two_languages):
    sitemap = read(two_languages, "sitemap.xml")
    assert "<loc>https://example.org/a/objects/spoon-a.html</loc>" in sitemap
    assert "<loc>https://example.org/a/fr/objects/spoon-a.html</loc>" in sitemap
    assert not (two_languages / "fr" / "sitemap.xml").exists()


def test_a_restricted_objects_translation_leaks_nowhere(two_languages):
    # The leak audit looks for the translation's title too; here nothing carries it at all.
    for path in two_languages.rglob("*"):
        if path.is_file():
            data = path.read_bytes()
            assert "gardée sous clef".encode() not in data, path
            assert b"spoon-e" not in data, path


# --- atlas check -----------------------------------------------------------------------------

def test_check_lists_what_is_not_translated(tmp_path):
    # Invented case: German has no catalogue, one place has no name@de, one note a translation.
    folder = two_language_atlas(tmp_path, "de")
    result = CliRunner().invoke(main, ["check", str(folder)], catch_exceptions=False)
    assert result.exit_code == 0  # warnings, not errors
    out = result.output
    assert "no interface catalogue for 'de'" in out
    assert ("objects: warning: 5 object notes without a de translation (<name>.de.md), shown in "
            "en: spoon-b.md, spoon-c.md, spoon-d.md, spoon-e.md, spoon-f.md") in out
    assert "spoon-a.md" not in out.split("object notes without")[1].split("\n")[0]
    assert "places without a name@de column value" in out and "brinmoor, old-fold" in out
    assert "1 free page without a de translation" in out and "about.md" in out
    assert ("characters: warning: 2 characters without a de translation (<id>.de.md, or "
            "label@de and states@de columns), shown in en: handle, notch") in out
    assert ("1 character with an incomplete de translation (the rest shows in en): bowl "
            "(state 1, state 2, note)") in out


def test_check_is_quiet_about_a_complete_language(tmp_path):
    folder = two_language_atlas(tmp_path, "fr")
    result = CliRunner().invoke(main, ["check", str(folder)], catch_exceptions=False)
    assert result.exit_code == 0
    assert "interface strings have no fr translation" not in result.output
    assert "no interface catalogue" not in result.output


# --- characters in another language ----------------------------------------------------------

def test_translated_character_replaces_label_states_and_note(two_languages):
    page = read(two_languages, "fr/characters/hook.html")
    assert "<h1>Manche à crochet</h1>" in page  # in the page's language: no lang attribute
    assert "<h3>1: présent " in page
    assert re.search(r'<div class="note-body"><p>Codé « - » \(sans objet\)', page)
    # nothing of the character itself is marked as English (above the distribution map)
    assert 'lang="en"' not in page.split("<main")[1].split('id="distribution"')[0]
    english = read(two_languages, "characters/hook.html")
    assert "<h1>Hooked handle end</h1>" in english and "Manche" not in english


def test_untranslated_parts_of_a_character_are_marked_english(two_languages):
    page = read(two_languages, "fr/characters/bowl.html")
    assert "<h1>Profondeur du cuilleron</h1>" in page  # translated label
    assert "<h3>0: peu profond " in page  # translated state
    assert '<h3>1: <span lang="en">deep</span> ' in page  # the others stay English, marked
    assert '<div class="note-body" lang="en"><p>Depth of the bowl' in page
    notch = read(two_languages, "fr/characters/notch.html")
    assert '<h1 lang="en">Notched rim</h1>' in notch
    glossary = read(two_languages, "fr/glossary.html")
    assert re.search(r'<a href="characters/notch\.html" lang="en">Notched rim</a>', glossary)
    assert '<td lang="en">0 = absent; 1 = present</td>' in glossary  # every state English
    assert '0 = peu profond; 1 = <span lang="en">deep</span>' in glossary  # some of them
    # the trait tables of objects and clades and the briefs mark them the same way
    spoon = read(two_languages, "fr/objects/spoon-a.html")
    assert re.search(r'<a href="../characters/notch\.html" lang="en">Notched rim</a>', spoon)
    assert re.search(r'<a href="../characters/bowl\.html">Profondeur du cuilleron</a>', spoon)
    nodes = [read(two_languages, f"fr/nodes/{p.name}") for p in
             sorted((two_languages / "fr" / "nodes").glob("n-*.html"))]
    assert any('<span lang="en">deep</span>' in n for n in nodes)
    assert all('lang="en">Notched rim</a>' in n for n in nodes if "characters/notch.html" in n)
    briefs = [read(two_languages, f"fr/briefs/{p.name}") for p in
              sorted((two_languages / "fr" / "briefs").glob("n-*.html"))]
    assert all('lang="en">Notched rim</a>' in b for b in briefs)


def test_translated_characters_reach_the_tree_data_and_the_search(two_languages):
    site = two_languages
    assert "Manche à crochet" in read(site, "fr/data/states.js")  # the tree's hover and key
    assert "Manche à crochet" in read(site, "fr/data/search.js")
    for path in ("data/states.js", "data/search.js"):
        assert "Manche" not in read(site, path)


def test_character_table_columns_translate_labels_and_states(tmp_path):
    # Invented: the characters given as a CSV table with label@fr and states@fr columns (the
    # gazetteer's name@fr pattern); one row leaves them empty, one fills only the label.
    from atlas.build import load
    from atlas.site.languages import localise

    files = {k: v for k, v in STARTER.items() if not k.startswith("characters/")}
    files["atlas.toml"] = files["atlas.toml"].replace(
        'languages = ["en"]', 'languages = ["en", "fr"]').replace(
        'gazetteer = "places.csv"', 'gazetteer = "places.csv"\ncharacters = "characters.csv"')
    files["characters.csv"] = (
        "id,label,group,states,label@fr,states@fr\n"
        "bowl,Bowl depth,Bowl,0=shallow;1=deep;2=very deep,Profondeur du cuilleron,"
        "0=peu profond;1=profond;2=très profond\n"
        "handle,Long handle,Handle,0=absent;1=present,,\n"
        "hook,Hooked handle end,Handle,0=absent;1=present,Manche à crochet,\n"
        "notch,Notched rim,Bowl,0=absent;1=present,,\n")
    atlas = load(write_atlas(tmp_path / "atlas", files))
    french = {c.id: c for c in localise(atlas, "fr", translator("fr")).characters}
    assert (french["bowl"].label, french["bowl"].descriptions) == (
        "Profondeur du cuilleron", ("peu profond", "profond", "très profond"))
    assert french["bowl"].fallback_lang == "" and french["bowl"].state_langs == ("", "", "")
    assert french["hook"].label == "Manche à crochet" and french["hook"].fallback_lang == ""
    assert french["hook"].descriptions == ("absent", "present")
    assert french["hook"].state_langs == ("en", "en")
    assert french["handle"].label == "Long handle" and french["handle"].fallback_lang == "en"
    english = {c.id: c for c in localise(atlas, "en", translator("en")).characters}
    assert english["bowl"].label == "Bowl depth" and english["bowl"].fallback_lang == ""


def test_a_translated_state_the_character_lacks_is_an_error(tmp_path):
    files = dict(STARTER)
    files["atlas.toml"] = files["atlas.toml"].replace('languages = ["en"]',
                                                      'languages = ["en", "fr"]')
    files["characters/hook.fr.md"] = ('---\nlabel: Manche à crochet\nstates:\n  "0": absent\n'
                                      '  "7": en trop\n---\n')
    result = CliRunner().invoke(main, ["check", str(write_atlas(tmp_path / "atlas", files))],
                                catch_exceptions=False)
    assert result.exit_code == 1
    assert ("characters/hook.fr.md:3: the fr translation of character 'hook' describes state "
            "'7', which it does not have") in result.output
    assert "Traceback" not in result.output


def test_figures_are_written_in_each_language(two_languages):
    # The methods page's figures and the map layers carry words (title, description, axes,
    # bar titles): each language has its own copy, and the pages link to their own.
    site = two_languages
    svg = "{http://www.w3.org/2000/svg}"
    french = ET.fromstring(read(site, "fr/figures/support.svg"))
    english = ET.fromstring(read(site, "figures/support.svg"))
    assert french.find(f"{svg}title").text == "Soutien des clades de l’arbre de synthèse"
    assert english.find(f"{svg}title").text == "Clade support in the summary tree"
    assert "0 à 0,1\u00a0: " in french.find(f"{svg}desc").text
    labels = [t.text for t in french.iter(f"{svg}text")]
    assert "Clades" in labels and "0,5" in labels and "0.5" not in labels
    strip = ET.fromstring(read(site, "fr/figures/retention.svg"))
    assert "caractère" in strip.find(f"{svg}desc").text
    layer = ET.fromstring(read(site, "fr/figures/characters/hook-1.svg"))
    assert layer.find(f"{svg}title").text == "Manche à crochet\u00a0: 1 (présent)"
    assert "La zone d’étude de" in read(site, "fr/figures/study-area.svg")
    assert 'src="figures/support.svg"' in read(site, "fr/methods.html")  # fr/figures/
    assert "(fiche des traits)" in read(site, "fr/nodes/" + re.search(
        r'href="\.\./nodes/(n-[0-9a-f]+\.html)"', read(site, "fr/objects/spoon-a.html")).group(1))
