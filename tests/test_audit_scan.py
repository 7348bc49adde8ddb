"""The link audit's fast scan against the standard library's HTML parser.

The audit reads every page and figure of a build for ``id``, ``href``, ``src``, ``srcset`` and
``xlink:href``. It uses a single regular-expression pass (:func:`atlas.audit._parse`); the
reference is :class:`html.parser.HTMLParser` (:func:`atlas.audit._parse_reference`), which the
audit used before. Both must give the same ids and the same references, line for line.
"""

from __future__ import annotations

import pytest

from atlas import audit
from atlas.build import build

# Invented snippets, each a case where a naive scan would go wrong.
CASES = {
    "plain": '<a href="a.html">x</a><img src="i.png" alt="">',
    "ids": '<section id="one"><h2 id="two">t</h2></section><p data-id="not-an-id">',
    "quoted >": '<a title="1 > 0" href="b.html">x</a><a title=\'<&>\' href=\'c.html\'>',
    "entities": '<a href="p.html?a=1&amp;b=2#x&#45;y">x</a>',
    "upper case": '<A HREF="d.html">x</A><IMG SRC="e.png">',
    "unquoted": '<a href=f.html class=x>y</a>',
    "no value": '<input disabled id="q"><details open>',
    "self closing": '<img src="g.png"/><use xlink:href="#h"/>',
    "srcset": '<img src="s.png" srcset="s-320.png 320w, s-640.png 640w">',
    "comment": '<!-- <a href="hidden.html"> --><a href="shown.html">',
    "script": '<script src="j.js"></script><script>var s = "<a href=\'no.html\'>";</script>',
    "style": '<style>a[href="x"] { color: red }</style><link rel="stylesheet" href="s.css">',
    "declaration": '<!DOCTYPE html><?xml version="1.0"?><a href="k.html">',
    "cdata": '<svg><![CDATA[ <a href="in.html"> ]]><a xlink:href="out.html"/></svg>',
    "multi line": '<p>\n<a\n  href="l.html"\n>x</a>\n\n<img\nsrc="m.png">',
    "repeated": '<a href="n.html" href="o.html" id="p" id="q">',
    "spaces": '<a href = "r.html" id= "s" >',
    "tag with dash": '<my-widget src="w.js"></my-widget>',
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_scan_equals_the_html_parser_on_tricky_markup(name):
    html = CASES[name]
    assert audit._parse(html) == audit._parse_reference(html)


def test_scan_equals_the_html_parser_on_every_file_of_the_demo_build(demo_copy, tmp_path):
    out = tmp_path / "site"
    build(demo_copy, out, use_cache=False)
    files = [p for p in out.rglob("*") if p.suffix in (".html", ".svg")]
    assert len(files) > 50
    refs = 0
    for path in files:
        text = path.read_text(encoding="utf-8")
        ids, found = audit._parse(text)
        assert (ids, found) == audit._parse_reference(text), path.relative_to(out)
        refs += len(found)
    assert refs > 1000  # the comparison covered real links, not empty pages


def test_audit_still_finds_a_broken_link_and_anchor():
    files = {"a.html": b'<a href="b.html#nowhere">x</a>\n<img src="gone.png">',
             "b.html": b'<p id="here">'}
    messages = [(p.file, p.line, p.message.split(":")[0]) for p in audit.audit_links(files)]
    assert messages == [("a.html", 1, "broken anchor"), ("a.html", 2, "broken link")]


def _problem_by_urlsplit(path, value, files, pages):
    # The rule read straight off the standard library, as the audit applied it before its fast
    # path: urlsplit, unquote the path and the fragment, then look the file and the id up.
    import posixpath
    from urllib.parse import unquote, urlsplit

    parts = urlsplit(value)
    target = path
    if parts.path:
        target = posixpath.normpath(posixpath.join(posixpath.dirname(path),
                                                   unquote(parts.path)))
        if target.startswith("../") or target not in files:
            return f"broken link: {value!r} (no file {target})"
    if parts.fragment:
        ids = pages[target].ids if target in pages else frozenset()
        if unquote(parts.fragment) not in ids:
            return f"broken anchor: {value!r} (no id {parts.fragment!r} in {target})"
    return None


@pytest.mark.parametrize("value", [
    "b.html", "b.html#here", "b.html#gone", "../b.html", "./b.html#here", "c.html", "b.html#",
    "sub/../b.html#here", "b%2Ehtml#here", "b.html#h%65re", "b.html?x=1#here", "b.html#a:b",
    "sub/d.html", "sub//d.html", "#here", "b.html#here#again", " b.html",
])
def test_fast_reference_reading_equals_urlsplit(value):
    # Invented pages; every value either takes the fast path or the urlsplit one.
    files = {"a.html": b"", "b.html": b'<p id="here"><p id="a:b">', "sub/d.html": b""}
    pages = {p: audit._links(b.decode()) for p, b in files.items()}
    assert audit._local_problem("a.html", value, files, pages) == \
        _problem_by_urlsplit("a.html", value, files, pages)
