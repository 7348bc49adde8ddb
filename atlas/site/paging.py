"""Long per-character tables split into parts, so no page outgrows the page-weight budget.

The trait sheet of a node, the coded traits of an object and the glossary list every
character; with hundreds of characters one page would weigh several hundred kilobytes. Their
rows (grouped as the views give them) are cut into parts of at most :data:`PER_PART` rows,
keeping the groups in order (a group cut in two says it is continued). The first part stays
on the page itself; each further part is a page of its own beside it
(``nodes/<id>.traits-2.html``; template ``traits.html``) with the same table, a link back
and a list of every part. Nothing is left out: every row is on exactly one part.
"""

from __future__ import annotations

import posixpath
from dataclasses import replace

from .views import PagePlan

PER_PART = 100  # rows per part: about 12 KB of table on a trait sheet


def split_groups(groups: list[dict], per_part: int = PER_PART) -> list[list[dict]]:
    """Groups of rows cut into parts of at most ``per_part`` rows, in order.

    >>> parts = split_groups([{"name": "a", "rows": [1, 2, 3]}, {"name": "b", "rows": [4]}], 2)
    >>> [[(g["name"], g["rows"], g["continued"]) for g in part] for part in parts]
    [[('a', [1, 2], False)], [('a', [3], True), ('b', [4], False)]]
    """
    parts: list[list[dict]] = []
    current: list[dict] = []
    room = per_part
    for group in groups:
        rows = list(group["rows"])
        start = 0
        while start < len(rows) or (not rows and start == 0):
            take = rows[start:start + room]
            current.append({**group, "rows": take, "continued": start > 0})
            start += max(len(take), 1)
            room -= len(take)
            if room <= 0:
                parts.append(current)
                current, room = [], per_part
    if current or not parts:
        parts.append(current)
    return parts


def _spans(sizes: list[int]) -> list[str]:
    """The rows each part holds, counted through the parts.

    >>> _spans([100, 100, 7])
    ['1–100', '101–200', '201–207']
    """
    out, first = [], 1
    for n in sizes:
        out.append(f"{first}–{first + n - 1}")
        first += n
    return out


def part_path(path: str, k: int) -> str:
    """The page of part ``k`` (from 1) of the page at ``path``."""
    return path if k == 1 else f"{path[:-5]}.traits-{k}.html"


def paged(page: PagePlan, table: str, label: str, per_part: int | None = None
          ) -> list[PagePlan]:
    """``page`` with only its first part of ``groups``, then a page for each further part.

    ``table`` names the table layout in ``traits.html`` (``node``, ``object`` or
    ``glossary``); ``label`` is the title of the parts, e.g. "Reconstructed traits". Every
    page gets ``parts``: one entry per part (``label`` "1-100", ``href`` relative to the page,
    ``current``), empty when there is a single part.
    """
    parts = split_groups(page.context["groups"], per_part or PER_PART)
    if len(parts) == 1:
        return [replace(page, context={**page.context, "groups": parts[0], "parts": [],
                                       "anchors": {}})]
    names = [posixpath.basename(part_path(page.path, k)) for k in range(1, len(parts) + 1)]
    spans = _spans([sum(len(g["rows"]) for g in part) for part in parts])
    anchors = {}  # a group's anchor lives on the part where the group starts
    for name, part in zip(names, parts):
        for g in part:
            if not g["continued"] and "slug" in g:
                anchors[g["slug"]] = name

    def pager(k: int) -> list[dict]:
        return [{"label": spans[i], "href": names[i], "current": i == k}
                for i in range(len(parts))]

    out = [replace(page, context={**page.context, "groups": parts[0], "parts": pager(0),
                                  "anchors": anchors})]
    keep = {key: page.context[key] for key in ("has_evidence", "uncertain_threshold")
            if key in page.context}
    for k in range(1, len(parts)):
        out.append(PagePlan(part_path(page.path, k + 1), "traits.html", {
            "kind": "traits", "table": table, "label": label,
            "title": f"{page.context['title']}: {label} ({spans[k]})",
            "back": {"href": names[0], "title": page.context["title"]},
            "groups": parts[k], "parts": pager(k), "anchors": anchors, **keep,
        }))
    return out


BRIEF_ROWS = 250  # characters per part of a reconstruction brief: about 30 KB


def paged_brief(page: PagePlan, per_part: int | None = None) -> list[PagePlan]:
    """A reconstruction brief in parts of whole groups of at most about ``per_part``
    characters (a group is never cut: the brief is read and printed group by group). The
    first part stays at the brief's own path; the others are ``briefs/<id>.part-2.html``,
    ... with the same template; every part gets ``parts`` as :func:`paged` gives them.

    >>> plan = PagePlan("briefs/n.html", "brief.html", {"title": "B", "groups": [
    ...     {"name": "a", "had": [1] * 2, "lacked": [], "unsure": []},
    ...     {"name": "b", "had": [1], "lacked": [2], "unsure": []}]})
    >>> [(p.path, [g["name"] for g in p.context["groups"]]) for p in paged_brief(plan, 2)]
    [('briefs/n.html', ['a']), ('briefs/n.part-2.html', ['b'])]
    """
    def size(g: dict) -> int:
        return len(g["had"]) + len(g["lacked"]) + len(g["unsure"])

    per_part = per_part or BRIEF_ROWS
    parts: list[list[dict]] = [[]]
    for g in page.context["groups"]:
        if parts[-1] and sum(map(size, parts[-1])) + size(g) > per_part:
            parts.append([])
        parts[-1].append(g)
    if len(parts) == 1:
        return [replace(page, context={**page.context, "parts": []})]
    paths = [page.path if k == 1 else f"{page.path[:-5]}.part-{k}.html"
             for k in range(1, len(parts) + 1)]
    spans = _spans([sum(map(size, part)) for part in parts])
    return [replace(page, path=paths[k], context={
        **page.context, "groups": parts[k],
        "parts": [{"label": spans[i], "href": posixpath.basename(paths[i]), "current": i == k}
                  for i in range(len(parts))]})
        for k in range(len(parts))]


def paged_glossary(page: PagePlan, label: str) -> list[PagePlan]:
    """The glossary in parts; its list of groups (``toc``) names every group on every part."""
    toc = [{"name": g["name"], "slug": g["slug"]} for g in page.context["groups"]]
    return paged(replace(page, context={**page.context, "toc": toc}), "glossary", label)
