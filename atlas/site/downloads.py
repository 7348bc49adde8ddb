"""Citations and downloads: the files a reader takes away, and the page that lists them.

Under ``downloads/``:

- ``CITATION.cff`` (Citation File Format 1.2.0) and ``atlas.bib`` (one BibTeX ``@misc`` entry);
- ``matrix.csv``: the trait matrix as coded, one row per object with a row;
- ``trees.nwk`` and ``trees.nex``: the sampled trees kept after burn-in (Newick, one a line;
  NEXUS with a TAXA and a TREES block), and ``summary.nwk``, the summary tree with clade
  support as internal labels;
- ``places.geojson`` (RFC 7946): published places with coordinates; generalised places at
  their generalised coordinates (the link stage moved them), withheld places left out;
- ``stats.json``: :func:`atlas.stats.study_stats`.

Withheld objects. A tree needs all its tips, so a withheld object is kept everywhere under a
neutral label ``withheld-N`` (N counts the withheld objects in the order of their ids): its
tip in the trees, its row in the matrix (the cells are the data the published analysis used)
and every mention in the stats. Its real id appears in no file. Rows and taxon labels are
sorted by the published label, so a ``withheld-N`` row does not stand where its real id would
sort and cannot be guessed from its neighbours.

Nothing here reads the clock or the environment: the release date comes in as an argument
(:func:`release_date` reads ``SOURCE_DATE_EPOCH`` from a mapping it is given), so the same
inputs give the same bytes.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import json
import math
import re
from collections.abc import Mapping, Sequence
from xml.sax.saxutils import escape as xml_escape

import numpy as np

from ..analysis.results import Results
from ..analysis.tree import Tree
from ..errors import AtlasError, Problem
from ..i18n import N_
from ..model import Atlas
from ..sources.trees import quote_label, write_newick
from .search import normalise
from .views import Links, PagePlan, root_of

FOLDER = "downloads"
PAGE = f"{FOLDER}/index.html"
WITHHELD_LABEL = "withheld-{n}"
LICENCE_URL = "https://spdx.org/licenses/{}.html"


# --- ids -----------------------------------------------------------------------------------

def public_labels(atlas: Atlas) -> dict[str, str]:
    """Every object id -> the label the downloads use: itself, or ``withheld-N``.

    N counts the withheld objects in the order of their ids, from 1.
    """
    out: dict[str, str] = {}
    n = 0
    for oid in sorted(atlas.objects):
        if atlas.objects[oid].withheld:
            n += 1
            out[oid] = WITHHELD_LABEL.format(n=n)
        else:
            out[oid] = oid
    return out


_NUMBERS = {int, float}
_INFINITE = (math.inf, -math.inf)


def relabel(value, labels: Mapping[str, str]):
    """``value`` (JSON-like data) with every string equal to a relabelled id replaced.

    Dictionary keys are replaced too, and non-finite floats become ``None`` (JSON has no NaN).

    >>> relabel({"a": ["a", "b", 1.5, float("nan")]}, {"a": "withheld-1"})
    {'withheld-1': ['withheld-1', 'b', 1.5, None]}
    """
    if isinstance(value, str):
        return labels.get(value, value)
    if isinstance(value, dict):
        return {labels.get(k, k) if type(k) is str else relabel(k, labels):
                labels.get(v, v) if type(v) is str else
                (v if v == v and v not in _INFINITE else None) if type(v) in _NUMBERS else
                relabel(v, labels) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        if set(map(type, value)) <= _NUMBERS:  # rows of numbers, most of the stats
            return [None if x != x or x in _INFINITE else x for x in value]
        out = [relabel(v, labels) for v in value]
        if out != list(value) and all(isinstance(v, str) for v in value) \
                and list(value) == sorted(value):
            out.sort(key=_label_order)  # a sorted list of ids stays sorted, so no gap shows
        return out
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


# --- data files ----------------------------------------------------------------------------

def matrix_csv(atlas: Atlas, labels: Mapping[str, str]) -> str:
    """The matrix as coded (``object`` then one column per character), rows by label."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["object", *(c.id for c in atlas.characters)])
    rows = [(labels[t], atlas.cells[i]) for i, t in enumerate(atlas.taxa) if atlas.cells[i]]
    for label, cells in sorted(rows, key=lambda r: _label_order(r[0])):
        writer.writerow([label, *cells])
    return buffer.getvalue()


def _label_order(label: str) -> tuple:
    """Published ids in their sort order, withheld ones last and by number (2 before 10)."""
    m = re.fullmatch(r"withheld-(\d+)", label)
    return (1, int(m.group(1)), "") if m else (0, 0, label)


def _relabelled(tree: Tree, labels: Mapping[str, str]) -> tuple[Tree, np.ndarray]:
    """The tree with its tips relabelled and children in a canonical order, and the new order.

    Children are ordered by the smallest published label below them, so the order in which a
    tree was written (often that of the real ids) cannot hint at a withheld tip's real id.
    """
    taxa = tuple(labels.get(t, t) for t in tree.taxa)
    n = tree.n_nodes
    first: list[tuple] = [()] * n
    for v in range(n):  # postorder: children before parents
        if tree.tip[v] >= 0:
            first[v] = _label_order(taxa[tree.tip[v]])
        else:
            first[v] = min(first[c] for c in tree.children(v).tolist())
    order: list[int] = []  # the new postorder, built from an explicit stack
    stack: list[tuple[int, bool]] = [(tree.root, False)]
    while stack:
        v, done = stack.pop()
        if done or tree.tip[v] >= 0:
            order.append(v)
            continue
        stack.append((v, True))
        kids = sorted(tree.children(v).tolist(), key=lambda c: first[c])
        stack.extend((c, False) for c in reversed(kids))
    new = {v: k for k, v in enumerate(order)}
    parent = np.array([new[int(tree.parent[v])] if tree.parent[v] >= 0 else -1 for v in order])
    return Tree(parent, tree.length[order], tree.tip[order], taxa,
                tuple(tree.label[v] for v in order)), np.array(order)


def trees_newick(atlas: Atlas, labels: Mapping[str, str], newicks: list[str] | None = None
                 ) -> str:
    """The sampled trees after burn-in, one Newick line each (``newicks``: already written)."""
    if newicks is None:
        newicks = [write_newick(_relabelled(t, labels)[0]) for t in atlas.sample.trees]
    return "".join(n + "\n" for n in newicks)


def trees_nexus(atlas: Atlas, labels: Mapping[str, str], newicks: list[str] | None = None
                ) -> str:
    """The sampled trees after burn-in as NEXUS: a TAXA block and a TREES block."""
    if newicks is None:
        newicks = [write_newick(_relabelled(t, labels)[0]) for t in atlas.sample.trees]
    taxa = sorted((labels.get(t, t) for t in atlas.taxa), key=_label_order)
    sample = atlas.sample
    title = re.sub(r"[\[\]]", "", atlas.config.title)
    lines = [
        "#NEXUS",
        (f"[Sampled trees of {title}: {len(sample.trees)} trees kept of {sample.read} read, "
        f"after a burn-in of {sample.burnin} and thinning by {sample.thin}.]"),
        "BEGIN TAXA;",
        f"  DIMENSIONS NTAX={len(taxa)};",
        "  TAXLABELS " + " ".join(quote_label(t) for t in taxa) + ";",
        "END;",
        "BEGIN TREES;",
    ]
    for k, newick in enumerate(newicks, 1):
        lines.append(f"  TREE tree_{k} = [&R] {newick}")
    lines += ["END;", ""]
    return "\n".join(lines)


def summary_newick(atlas: Atlas, results: Results, labels: Mapping[str, str]) -> str:
    """The summary tree, with each clade's posterior probability as its label."""
    tree, order = _relabelled(results.tree, labels)
    support = np.asarray(results.summary.support, dtype=float)[order]
    for v in range(tree.n_nodes):
        if tree.tip[v] >= 0 or v == tree.root:
            support[v] = math.nan
    return write_newick(tree, support=support) + "\n"


def places_geojson(atlas: Atlas, labels: Mapping[str, str]) -> str:
    """Published places with coordinates as an RFC 7946 FeatureCollection (lon, lat order)."""
    by_place: dict[str, list[str]] = {}
    for obj in atlas.visible_objects():
        if obj.place and not obj.place_withheld:
            by_place.setdefault(obj.place, []).append(labels[obj.id])
    features = []
    for pid, place in sorted(atlas.places.items()):
        if place.precision == "withheld" or not place.has_coordinates:
            continue
        if place.polygon:
            rings = [[[float(x), float(y)] for x, y in ring] for ring in place.polygon]
            for ring in rings:
                if ring and ring[0] != ring[-1]:
                    ring.append(list(ring[0]))  # RFC 7946 3.1.6: a ring is closed
            geometry = {"type": "Polygon", "coordinates": rings}
        else:
            geometry = {"type": "Point", "coordinates": [float(place.lon), float(place.lat)]}
        features.append({
            "type": "Feature", "id": pid, "geometry": geometry,
            "properties": {"id": pid, "name": place.name, "precision": place.precision,
                           "names": dict(sorted(place.names.items())),
                           "objects": sorted(by_place.get(pid, []))},
        })
    return _json({"type": "FeatureCollection", "features": features})


def stats_json(stats: dict, labels: Mapping[str, str]) -> str:
    """The study's numbers as JSON, one record per line inside each top-level list.

    Lines keep the file easy to read and to diff, and each record is written by the standard
    library's C encoder (``indent`` would switch to its pure-Python one): on the 400-object
    synthetic atlas (21.7 MB indented), 3.5 s indented, 1.3 s by records, same run.
    """
    if any(k != v for k, v in labels.items()):
        stats = relabel(stats, labels)
    else:  # nothing to rename: only non-finite numbers, which the encoder refuses below
        try:
            return _records(stats)
        except ValueError:
            stats = relabel(stats, labels)
    return _records(stats)


def _records(value: dict) -> str:
    def one(v) -> str:
        return json.dumps(v, ensure_ascii=False, sort_keys=True, allow_nan=False)

    lines = []
    for key in sorted(value):
        v = value[key]
        if isinstance(v, list) and v:
            body = ",\n".join("  " + one(item) for item in v)
            lines.append(f" {one(key)}: [\n{body}\n ]")
        else:
            lines.append(f" {one(key)}: {one(v)}")
    return "{\n" + ",\n".join(lines) + "\n}\n"


def _json(value) -> str:
    return json.dumps(value, ensure_ascii=False, sort_keys=True, indent=1,
                      allow_nan=False) + "\n"


# --- citations -----------------------------------------------------------------------------

def release_date(environ: Mapping[str, str]) -> dt.date | None:
    """The release date from ``SOURCE_DATE_EPOCH`` (seconds since 1970, UTC), or None.

    >>> release_date({"SOURCE_DATE_EPOCH": "86400"})
    datetime.date(1970, 1, 2)
    >>> release_date({}) is None
    True
    """
    value = environ.get("SOURCE_DATE_EPOCH", "").strip()
    if not value:
        return None
    if not re.fullmatch(r"\d{1,12}", value):
        raise AtlasError(Problem("SOURCE_DATE_EPOCH", None, f"{value!r} is not a whole number "
                                 "of seconds since 1970-01-01", "unset it, or use e.g. "
                                 "SOURCE_DATE_EPOCH=$(git log -1 --format=%ct)"))
    return dt.datetime.fromtimestamp(int(value), tz=dt.UTC).date()


def _person(author: str) -> tuple[str, str] | None:
    """``"Family, Given"`` -> (family, given); any other form is kept whole (None)."""
    if author.count(",") == 1:
        family, given = (part.strip() for part in author.split(","))
        if family and given:
            return family, given
    return None


def _yaml(text: str) -> str:
    return json.dumps(text, ensure_ascii=False)  # a JSON string is a YAML double-quoted scalar


def citation_cff(title: str, authors: Sequence[str], licence: str, *, version: str = "",
                 released: dt.date | None = None, url: str = "") -> str:
    """A ``CITATION.cff`` (Citation File Format 1.2.0) for the atlas as a dataset.

    Authors written ``"Family, Given"`` become persons with family and given names; any other
    form (one name, or an organisation) is written as a ``name``. CFF needs at least one author:
    without any, the entry names "Authors of <title>" so the file stays valid.
    """
    lines = ["cff-version: 1.2.0",
             f"message: {_yaml('If you use this atlas, please cite it as below.')}",
             "type: dataset", f"title: {_yaml(title)}", "authors:"]
    for author in authors or [f"Authors of {title}"]:
        person = _person(author)
        if person:
            lines += [f"  - family-names: {_yaml(person[0])}",
                      f"    given-names: {_yaml(person[1])}"]
        else:
            lines.append(f"  - name: {_yaml(author)}")
    if licence:
        lines.append(f"license: {_yaml(licence)}")
    if version:
        lines.append(f"version: {_yaml(version)}")
    if released is not None:
        lines.append(f"date-released: {_yaml(released.isoformat())}")
    if url:
        lines.append(f"url: {_yaml(url)}")
    return "\n".join(lines) + "\n"


_BIBTEX = {"\\": r"\textbackslash{}", "{": r"\{", "}": r"\}", "&": r"\&", "%": r"\%",
           "$": r"\$", "#": r"\#", "_": r"\_", "~": r"\textasciitilde{}",
           "^": r"\textasciicircum{}"}


def bibtex_escape(text: str) -> str:
    r"""Text with BibTeX's special characters escaped.

    >>> bibtex_escape("50% & {more}_x")
    '50\\% \\& \\{more\\}\\_x'
    """
    return "".join(_BIBTEX.get(c, c) for c in text)


def bibtex_key(title: str, authors: Sequence[str], released: dt.date | None) -> str:
    """A citation key: first author's family name, year, first long word of the title.

    >>> bibtex_key("Lamps of the Isles", ["Quill, Mara"], None)
    'quill-lamps'
    """
    first = authors[0] if authors else ""
    person = _person(first)
    family = person[0] if person else (first.split()[-1] if first.split() else "atlas")
    long_words = [w for w in re.findall(r"[a-z0-9]+", normalise(title)) if len(w) > 3]
    parts = [re.sub(r"[^a-z0-9]", "", normalise(family)) or "atlas"]
    if released is not None:
        parts[0] += str(released.year)
    if long_words:
        parts.append(long_words[0])
    return "-".join(parts)


def citation_bibtex(title: str, authors: Sequence[str], licence: str, *, version: str = "",
                    released: dt.date | None = None, url: str = "") -> str:
    """One BibTeX ``@misc`` entry for the atlas (title in double braces keeps its case)."""
    names = " and ".join(
        f"{bibtex_escape(p[0])}, {bibtex_escape(p[1])}" if (p := _person(a)) else
        "{" + bibtex_escape(a) + "}" for a in authors)
    fields = [("title", "{" + bibtex_escape(title) + "}")]
    if names:
        fields.append(("author", names))
    if released is not None:
        fields += [("year", str(released.year)), ("month", str(released.month))]
    if version:
        fields.append(("version", bibtex_escape(version)))
    fields.append(("howpublished", "Static website"))
    if url:
        fields.append(("url", re.sub(r"[{}\\]", "", url)))
    if licence:
        fields.append(("note", "Licence: " + bibtex_escape(licence)))
    body = ",\n".join(f"  {name} = {{{value}}}" for name, value in fields)
    return f"@misc{{{bibtex_key(title, authors, released)},\n{body}\n}}\n"


def citation_text(title: str, authors: Sequence[str], *, version: str = "",
                  released: dt.date | None = None, url: str = "") -> str:
    """The citation as one line of plain text for the downloads page."""
    who = "; ".join(authors) if authors else "Unnamed authors"
    year = f" ({released.year})" if released is not None else ""
    text = f"{who}{year}. {title}."
    if version:
        text += f" Version {version}."
    if url:
        text += f" {url}"
    return text


def _base(url: str) -> str:
    return url if not url or url.endswith("/") else url + "/"


# --- JSON-LD and sitemap -------------------------------------------------------------------

def jsonld(page: PagePlan, site) -> str:
    """The schema.org JSON-LD of a page, as the body of a ``<script type="application/ld+json">``.

    ``site`` is the render stage's site information (title, licence, language, and, when it
    carries them, ``base_url`` and ``authors``). JSON-LD is data, not script, so the CSP does
    not block it. Every ``<``, ``>`` and ``&`` is written as a JSON ``\\u`` escape, which is
    stricter than writing ``</`` as ``<\\/``: no value can close or confuse the element, and
    the text of a page title never appears raw in the head.
    """
    base = _base(getattr(site, "base_url", "") or "")
    root = root_of(page.path)
    context = page.context
    kind = context.get("kind", "")
    title = str(context.get("title", ""))
    authors = [{"@type": "Person", "name": a} for a in getattr(site, "authors", ()) or ()]

    def url(path: str) -> str:
        return base + path if base else root + path

    whole = {"@type": "Dataset", "name": site.title, "url": url("index.html")}
    data: dict = {"@context": "https://schema.org", "inLanguage": site.language,
                  "name": title, "url": url(page.path)}
    if site.licence:
        data["license"] = LICENCE_URL.format(site.licence)
    if kind == "home":
        data.update({"@type": "Dataset", "name": site.title})
        if context.get("subtitle"):
            data["description"] = str(context["subtitle"])
        if authors:
            data["creator"] = authors
        data["distribution"] = [
            {"@type": "DataDownload", "encodingFormat": fmt, "contentUrl": url(f"{FOLDER}/{f}")}
            for f, fmt in (("matrix.csv", "text/csv"), ("trees.nex", "text/plain"),
                           ("places.geojson", "application/geo+json"),
                           ("stats.json", "application/json"))]
    else:
        data.update({"@type": "WebPage", "isPartOf": whole})
        about = {"object": ("Thing", "identifier", (context.get("object") or {}).get("id")),
                 "node": ("Thing", "identifier", context.get("node_id")),
                 "character": ("DefinedTerm", None, None),
                 "place": ("Place", "identifier", context.get("place_id"))}.get(kind)
        if about is not None:
            thing = {"@type": about[0], "name": title}
            if about[1] and about[2]:
                thing[about[1]] = str(about[2])
            data["about"] = thing
        if kind == "search":
            data["@type"] = "SearchResultsPage"
    text = json.dumps(data, ensure_ascii=False, sort_keys=True, separators=(",", ":"))
    for char, code in (("<", "\\u003c"), (">", "\\u003e"), ("&", "\\u0026")):
        text = text.replace(char, code)  # so "</" can never close the element
    return text


def sitemap(base_url: str, pages: Sequence[PagePlan]) -> dict[str, str]:
    """``{"sitemap.xml": ...}`` with an absolute URL per page under ``base_url``; ``{}`` without.

    No ``lastmod``: the build writes no dates it was not given.
    """
    if not base_url:
        return {}
    base = _base(base_url)
    lines = ['<?xml version="1.0" encoding="UTF-8"?>',
             '<urlset xmlns="http://www.sitemaps.org/schemas/sitemap/0.9">']
    for path in sorted({p.path for p in pages}):
        lines.append(f"  <url><loc>{xml_escape(base + path)}</loc></url>")
    lines += ["</urlset>", ""]
    return {"sitemap.xml": "\n".join(lines)}


# --- the kiosk: nothing leaves ----------------------------------------------------------

_LEAVING_LINK = re.compile(
    r"""<a\b(?=[^>]*\shref\s*=\s*(?:"|')?\s*(?:[a-z][a-z0-9+.-]*:|//|(?:\.\./)*downloads/))"""
    r"""[^>]*>(.*?)</a\s*>""", re.IGNORECASE | re.DOTALL)


def unlink_external(html: str) -> str:
    """The page with every link that leaves the site (another site, ``mailto:``, a download)
    turned into its plain text, for the gallery kiosk.

    >>> unlink_external('<a href="mailto:curator@example.org">write <b>to us</b></a>, '
    ...                 '<a href="objects/a.html">a page</a>')
    '<span class="kiosk-unlinked">write <b>to us</b></span>, <a href="objects/a.html">a page</a>'
    """
    return _LEAVING_LINK.sub(r'<span class="kiosk-unlinked">\1</span>', html)


# --- the page ------------------------------------------------------------------------------

def evidence_csv(atlas: Atlas, labels: Mapping[str, str]) -> str:
    """The evidence ledger of the published objects: ``object,character,state,source,note``."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["object", "character", "state", "source", "note"])
    order = {c.id: j for j, c in enumerate(atlas.characters)}
    for (oid, cid), entries in sorted(atlas.evidence.items(),
                                      key=lambda kv: (_label_order(labels[kv[0][0]]),
                                                      order.get(kv[0][1], 0))):
        for e in entries:
            writer.writerow([labels[oid], cid, e.state, e.source, e.note])
    return buffer.getvalue()


# Marked with N_ for the catalogue; translated where the page is planned.
_DESCRIPTIONS = {
    "CITATION.cff": (N_("Citation (CFF 1.2.0)"),
        N_("How to cite the atlas, for reference managers and code hosts.")),
    "atlas.bib": (N_("Citation (BibTeX)"),
        N_("One @misc entry.")),
    "matrix.csv": (N_("Trait matrix (CSV)"),
        N_("One row per object, one column per character, as coded: ? unknown, - not "
           "applicable, 0/1 polymorphic.")),
    "evidence.csv": (N_("Evidence ledger (CSV)"),
        N_("One row per coded cell of a published object: its state, the source it was read "
           "from and a note.")),
    "trees.nex": (N_("Sampled trees (NEXUS)"),
        N_("The trees kept after burn-in, with a TAXA block.")),
    "trees.nwk": (N_("Sampled trees (Newick)"),
        N_("The same trees, one per line.")),
    "summary.nwk": (N_("Summary tree (Newick)"),
        N_("The tree the site is drawn on; internal labels are clade posterior "
           "probabilities.")),
    "places.geojson": (N_("Places (GeoJSON)"),
        N_("Published places; generalised places at their generalised coordinates, withheld "
           "places left out.")),
    "stats.json": (N_("Study numbers (JSON)"),
        N_("Clade support, parsimony indices, the fitted model and the reconstructed states "
           "at every node.")),
}


def _size(n: int) -> str:
    return f"{n} bytes" if n < 1000 else f"{n / 1000:.1f} kB"


def download_texts(atlas: Atlas, results: Results, stats: dict, *,
                   released: dt.date | None = None) -> dict[str, str]:
    """The downloadable files (name -> text): citations, matrix, trees, places and stats.

    ``stats`` is :func:`atlas.stats.study_stats` of the same atlas and results; ``released``
    the date from :func:`release_date` (None: no date is written anywhere). The sampled trees
    are relabelled and written once for both the Newick and the NEXUS file.
    """
    config = atlas.config
    labels = public_labels(atlas)
    cite = _cite(atlas, released)
    newicks = [write_newick(_relabelled(t, labels)[0]) for t in atlas.sample.trees]
    return {
        "CITATION.cff": citation_cff(config.title, config.authors, config.licence, **cite),
        "atlas.bib": citation_bibtex(config.title, config.authors, config.licence, **cite),
        "matrix.csv": matrix_csv(atlas, labels),
        **({"evidence.csv": evidence_csv(atlas, labels)} if atlas.evidence else {}),
        "trees.nex": trees_nexus(atlas, labels, newicks),
        "trees.nwk": trees_newick(atlas, labels, newicks),
        "summary.nwk": summary_newick(atlas, results, labels),
        "places.geojson": places_geojson(atlas, labels),
        "stats.json": stats_json(stats, labels),
    }


def _cite(atlas: Atlas, released: dt.date | None) -> dict:
    version = str(getattr(atlas.config, "version", "") or "")
    return {"version": version, "released": released, "url": _base(atlas.config.base_url)}


def downloads_plan(atlas: Atlas, results: Results, links: Links, stats: dict | None = None, *,
                   released: dt.date | None = None, texts: dict[str, str] | None = None
                   ) -> tuple[PagePlan, dict[str, str]]:
    """The downloads page (``downloads/index.html``) and its files (path -> text).

    ``texts`` are the files from :func:`download_texts` when already made (e.g. in another
    process); otherwise they are made here from ``stats`` and ``released``.
    """
    config = atlas.config
    if texts is None:
        assert stats is not None, "give the stats or the texts"
        texts = download_texts(atlas, results, stats, released=released)
    cite = _cite(atlas, released)
    root = root_of(PAGE)
    _ = atlas.i18n.gettext
    files = [{"href": name, "label": _(_DESCRIPTIONS[name][0]), "about": _(_DESCRIPTIONS[name][1]),
              "size": _size(len(text.encode("utf-8")))} for name, text in texts.items()]
    n_withheld = sum(1 for o in atlas.objects.values() if o.withheld)
    page = PagePlan(PAGE, "downloads.html", {
        "kind": "downloads", "title": _("Downloads and citation"),
        "citation": citation_text(config.title, config.authors, **cite),
        "bibtex": texts["atlas.bib"], "has_authors": bool(config.authors),
        "files": files, "withheld": n_withheld, "licence": config.licence,
        "breadcrumbs": [(_("Methods"), root + "methods.html")],
    })
    return page, {f"{FOLDER}/{name}": text for name, text in texts.items()}
