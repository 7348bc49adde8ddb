"""The methods page's figures: clade support, retention index per character, changes per branch.

Each figure is a static SVG file in ``figures/`` (shown with ``<img>``, so the page stays small
at any number of characters) and a table of the same numbers on the page. The SVG is drawn
here from plain numbers: no script, no external reference, fixed decimals, so the same input
gives the same bytes. Every word and number in them (title, description, axis labels, tick
labels, each bar's title) is in the language being rendered (``atlas.i18n``), so they are
written per language (``fr/figures/support.svg``). Colours are the site's light palette
(``--fg``, ``--muted``, ``--border``, ``--clade-0`` in ``assets/atlas.css``) on a white ground,
which reads the same on screen, on a phone (the figure scales to the column) and on paper.

- :func:`histogram`: counts of values in bins, the convention of ``numpy.histogram``;
- :func:`histogram_svg`: a histogram drawn with its axes, title and labels;
- :func:`strip_svg`: one row per group, a tick per value (per-character RI by group);
- :func:`methods_figures`: the three figures of an atlas, as page context and files.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import replace
from html import escape

import numpy as np

from ..analysis.results import Results
from ..i18n import N_, Translator
from ..model import Atlas
from .views import PagePlan, fmt

ENGLISH = Translator()  # the figures' words when no other language is asked for

FG, MUTED, GRID, BAR = "#1c1f23", "#565c63", "#cfccc4", "#0072b2"  # atlas.css, light scheme
WIDTH, HEIGHT = 420, 260
LEFT, RIGHT, TOP, BOTTOM = 50, 14, 34, 50  # plot margins, px
FONT = 'font-family="sans-serif"'


def histogram(values, edges) -> np.ndarray:
    """How many ``values`` fall in each bin ``[edges[i], edges[i + 1])``, the last bin closed
    on the right too; values outside or not finite are not counted. The convention of
    ``numpy.histogram`` (Harris et al. 2020, Nature 585:357-362), computed here by a binary
    search of each value among the edges.

    >>> histogram([0.0, 0.5, 0.5, 1.0, 2.0], [0.0, 0.5, 1.0]).tolist()
    [1, 3]
    """
    x = np.asarray(values, dtype=np.float64).ravel()
    e = np.asarray(edges, dtype=np.float64)
    x = x[np.isfinite(x) & (x >= e[0]) & (x <= e[-1])]
    k = np.searchsorted(e, x, side="right") - 1
    k[x == e[-1]] = len(e) - 2
    return np.bincount(k, minlength=len(e) - 1).astype(np.int64)


def nice_step(top: float, ticks: int = 5) -> float:
    """A round step (1, 2 or 5 times a power of ten) giving about ``ticks`` steps up to
    ``top``.

    >>> nice_step(37), nice_step(1), nice_step(0.8)
    (10.0, 0.2, 0.2)
    """
    if not top > 0:
        return 1.0
    raw = top / ticks
    power = 10.0 ** math.floor(math.log10(raw))
    for m in (1, 2, 5, 10):
        if raw <= m * power * (1 + 1e-9):
            return float(m * power)
    return float(10 * power)


def _n(v: float) -> str:
    text = f"{v:.1f}"
    return "0.0" if text == "-0.0" else text


def _label(v: float, tr: Translator = ENGLISH) -> str:
    """A tick or bin edge as the reader writes it: ``0.5`` (``0,5`` in French)."""
    return tr.number(f"{v:g}")


def _bin_text(tr: Translator, a: float, b: float, count: int | None = None) -> str:
    low, high = _label(round(a, 10), tr), _label(round(b, 10), tr)
    if count is None:
        return tr.gettext("{low} to {high}").format(low=low, high=high)
    return tr.gettext("{low} to {high}: {count}").format(low=low, high=high,
                                                         count=tr.number(count))


def _frame(title: str, svg_id: str, desc: str, height: int = HEIGHT,
           left: float = LEFT) -> list[str]:
    sid = escape(svg_id, quote=True)
    return [f'<svg xmlns="http://www.w3.org/2000/svg" class="stat-figure" '
            f'viewBox="0 0 {WIDTH} {height}" width="{WIDTH}" height="{height}" role="img" '
            f'aria-labelledby="{sid}-title {sid}-desc">',
            f'<title id="{sid}-title">{escape(title)}</title>',
            f'<desc id="{sid}-desc">{escape(desc)}</desc>',
            f'<rect width="{WIDTH}" height="{height}" fill="#ffffff"/>',
            f'<text x="{_n(left)}" y="20" {FONT} font-size="14" font-weight="bold" '
            f'fill="{FG}">{escape(title)}</text>']


def histogram_svg(counts: Sequence[int], edges: Sequence[float], *, title: str, x_label: str,
                  y_label: str, svg_id: str = "histogram", tr: Translator = ENGLISH) -> str:
    """A histogram: bar ``i`` spans ``edges[i]..edges[i + 1]`` on the x axis and its height
    is ``counts[i] / y_top`` of the plot's height, ``y_top`` the largest count rounded up to
    a :func:`nice_step`. Each bar carries ``data-count`` and a ``<title>`` with its range and
    count; the axes have ticks, labels and a light grid. Words and numbers are written in
    ``tr``'s language (``data-count`` stays a plain integer)."""
    counts = [int(c) for c in counts]
    edges = [float(e) for e in edges]
    plot_w, plot_h = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM
    step = nice_step(max(counts, default=0) or 1)
    y_top = step * max(1, math.ceil((max(counts, default=0) or 1) / step))
    x0, x1 = edges[0], edges[-1]

    def px(x: float) -> float:
        return LEFT + (x - x0) / (x1 - x0) * plot_w

    def py(y: float) -> float:
        return TOP + plot_h - y / y_top * plot_h

    desc = "; ".join(_bin_text(tr, a, b, c) for a, b, c in zip(edges, edges[1:], counts))
    parts = _frame(title, svg_id, desc)
    ticks = []
    y = 0.0
    while y <= y_top + 1e-9:
        ticks.append(f'<line x1="{LEFT}" x2="{LEFT + plot_w}" y1="{_n(py(y))}" y2="{_n(py(y))}" '
                     f'stroke="{GRID}"/><text x="{LEFT - 6}" y="{_n(py(y) + 4)}" '
                     f'text-anchor="end">{_label(round(y, 10), tr)}</text>')
        y += step
    parts.append(f'<g class="y-axis" {FONT} font-size="12" fill="{MUTED}">{"".join(ticks)}</g>')
    bars = []
    for a, b, c in zip(edges, edges[1:], counts):
        h = c / y_top * plot_h
        bars.append(f'<rect class="bar" data-count="{c}" x="{_n(px(a) + 1)}" '
                    f'y="{_n(py(0) - h)}" width="{_n(max(px(b) - px(a) - 2, 0.5))}" '
                    f'height="{_n(h)}"><title>{escape(_bin_text(tr, a, b, c))}</title></rect>')
    parts.append(f'<g class="bars" fill="{BAR}">{"".join(bars)}</g>')
    every = max(1, math.ceil(len(edges) / 11))
    xt = [f'<text x="{_n(px(e))}" y="{TOP + plot_h + 16}" text-anchor="middle">'
          f'{_label(e, tr)}</text>'
          for i, e in enumerate(edges) if i % every == 0 or i == len(edges) - 1]
    parts.append(f'<g class="x-axis" {FONT} font-size="12" fill="{MUTED}">'
                 f'<line x1="{LEFT}" x2="{LEFT + plot_w}" y1="{_n(py(0))}" y2="{_n(py(0))}" '
                 f'stroke="{FG}"/>{"".join(xt)}</g>')
    parts.append(_axis_labels(x_label, y_label, plot_w, plot_h))
    parts.append("</svg>")
    return "".join(parts)


def _axis_labels(x_label: str, y_label: str, plot_w: float, plot_h: float) -> str:
    cy = TOP + plot_h / 2
    return (f'<g class="axis-labels" {FONT} font-size="12" fill="{FG}" text-anchor="middle">'
            f'<text x="{_n(LEFT + plot_w / 2)}" y="{HEIGHT - 12}">{escape(x_label)}</text>'
            f'<text transform="translate(16 {_n(cy)}) rotate(-90)">{escape(y_label)}</text></g>')


def strip_svg(groups: Sequence[tuple[str, Sequence[float]]], *, title: str, x_label: str,
              svg_id: str = "strip", tr: Translator = ENGLISH) -> str:
    """One row per group, a thin tick per value at ``x = value`` on a 0-1 axis, the group's
    median as a taller dark tick. Rows carry ``data-group`` and ``data-n``; each value tick
    carries ``data-value``. Values that are not finite are left out. Words and numbers are
    written in ``tr``'s language."""
    rows = [(name, [float(v) for v in values if math.isfinite(float(v))])
            for name, values in groups]
    label_w = 130
    left = LEFT + label_w - 40
    plot_w = WIDTH - left - RIGHT
    row_h = 26
    height = TOP + row_h * max(len(rows), 1) + BOTTOM
    desc = "; ".join(tr.ngettext("{group}: {n} character, median {median}",
                                 "{group}: {n} characters, median {median}", len(v)).format(
                         group=name, n=tr.number(len(v)),
                         median=tr.number(float(np.median(v)), 2))
                     if v else tr.gettext("{group}: none").format(group=name)
                     for name, v in rows)
    parts = _frame(title, svg_id, desc, height=height, left=12)

    def px(x: float) -> float:
        return left + x * plot_w

    bottom = TOP + row_h * len(rows)
    grid = "".join(f'<line x1="{_n(px(t))}" x2="{_n(px(t))}" y1="{TOP}" y2="{bottom}" '
                   f'stroke="{GRID}"/><text x="{_n(px(t))}" y="{bottom + 16}" '
                   f'text-anchor="middle">{_label(t, tr)}</text>' for t in np.linspace(0, 1, 6))
    parts.append(f'<g class="x-axis" {FONT} font-size="12" fill="{MUTED}">{grid}</g>')
    for r, (name, values) in enumerate(rows):
        y = TOP + r * row_h + row_h / 2
        short = name if len(name) <= 18 else name[:17] + "…"
        ticks = "".join(f'<line class="tick" data-value="{v:.4f}" x1="{_n(px(v))}" '
                        f'x2="{_n(px(v))}" y1="{_n(y - 6)}" y2="{_n(y + 6)}"/>' for v in values)
        median = ""
        if values:
            m = px(float(np.median(values)))
            median = (f'<line class="median" x1="{_n(m)}" x2="{_n(m)}" y1="{_n(y - 10)}" '
                      f'y2="{_n(y + 10)}" stroke="{FG}" stroke-width="2.5"/>')
        parts.append(f'<g class="row" data-group="{escape(name, quote=True)}" '
                     f'data-n="{len(values)}"><text x="{left - 8}" y="{_n(y + 4)}" {FONT} '
                     f'font-size="12" fill="{FG}" text-anchor="end">{escape(short)}</text>'
                     f'<g stroke="{BAR}" stroke-opacity="0.7" stroke-width="1.5">{ticks}</g>'
                     f'{median}</g>')
    cx = left + plot_w / 2
    parts.append(f'<text x="{_n(cx)}" y="{height - 12}" {FONT} font-size="12" fill="{FG}" '
                 f'text-anchor="middle">{escape(x_label)}</text>')
    parts.append("</svg>")
    return "".join(parts)


SUPPORT_EDGES = np.linspace(0.0, 1.0, 11)


def _change_edges(values: np.ndarray) -> np.ndarray:
    """About twelve bins of a round width from 0 to past the largest value."""
    top = float(values.max()) if values.size else 1.0
    step = nice_step(top, 12) if top > 0 else 1.0
    return np.arange(0.0, step * (math.floor(top / step) + 1) + step / 2, step)


def _rows(counts, edges, tr: Translator = ENGLISH) -> list[dict]:
    return [{"range": _bin_text(tr, a, b), "count": int(c)}
            for a, b, c in zip(edges, edges[1:], counts)]


OTHER_GROUP = N_("Other traits")  # the group of a character that names none


def methods_figures(atlas: Atlas, results: Results) -> tuple[dict, dict[str, str]]:
    """The methods page's figures (context: per figure its ``src``, ``alt``, caption and table
    rows) and their SVG files, from numbers the analysis already computed:

    - support: the clade support (fraction of sampled trees containing the clade) of every
      clade of the summary tree except the root, in ten bins of 0.1;
    - RI: the retention index ``RI = (g - s) / (g - m)`` of each discrete character (Farris
      1989, Cladistics 5:417-419) by group; characters with ``g = m`` have none;
    - changes: the expected number of changes of all discrete characters on each branch
      (Minin & Suchard 2008, J. Math. Biol. 56:391-412), summed over characters.

    Titles, labels and numbers are in the language of ``atlas.i18n``.
    """
    tr = atlas.i18n
    _ = tr.gettext
    tree = results.tree
    internal = [v for v in range(tree.n_nodes) if tree.tip[v] < 0 and v != tree.root]
    support = np.asarray(results.summary.support, dtype=np.float64)[internal]
    counts = histogram(support, SUPPORT_EDGES)
    figures: dict = {}
    files: dict[str, str] = {}
    if internal:
        files["figures/support.svg"] = histogram_svg(
            counts, SUPPORT_EDGES, title=_("Clade support in the summary tree"),
            x_label=_("Support (fraction of sampled trees with the clade)"),
            y_label=_("Clades"), svg_id="support-figure", tr=tr)
        figures["support"] = {
            "src": "figures/support.svg", "rows": _rows(counts, SUPPORT_EDGES, tr),
            "n": len(internal), "median": fmt(float(np.median(support)))}
    ri = np.asarray(results.indices.ri, dtype=np.float64)
    groups: dict[str, list[float]] = {}
    for c in atlas.discrete:
        groups.setdefault(c.group or _(OTHER_GROUP), []).append(float(ri[c.column]))
    if groups:
        files["figures/retention.svg"] = strip_svg(
            list(groups.items()), title=_("Retention index per character, by group"),
            x_label=_("Retention index (RI): 0 homoplastic, 1 fully retained"),
            svg_id="retention-figure", tr=tr)
        rows = []
        for name, values in groups.items():
            v = np.asarray(values)
            ok = v[np.isfinite(v)]
            rows.append({"group": name, "n": int(ok.size), "none": int(v.size - ok.size),
                         "median": fmt(float(np.median(ok))) if ok.size else "–",
                         "low": fmt(float(ok.min())) if ok.size else "–",
                         "high": fmt(float(ok.max())) if ok.size else "–"})
        figures["retention"] = {"src": "figures/retention.svg", "rows": rows}
    if results.changes is not None and internal:
        per_branch = np.nansum(results.changes.total, axis=1)
        branches = np.asarray([per_branch[v] for v in range(tree.n_nodes) if v != tree.root])
        edges = _change_edges(branches)
        hist = histogram(branches, edges)
        files["figures/changes.svg"] = histogram_svg(
            hist, edges, title=_("Expected changes per branch"),
            x_label=_("Expected changes on the branch (all characters, likelihood)"),
            y_label=_("Branches"), svg_id="changes-figure", tr=tr)
        figures["changes"] = {"src": "figures/changes.svg", "rows": _rows(hist, edges, tr),
                              "n": int(branches.size),
                              "median": fmt(float(np.median(branches)))}
    return figures, files


def methods_page_figures(page: PagePlan, figures: dict) -> PagePlan:
    """The methods page with its figures' context (``figures``)."""
    return replace(page, context={**page.context, "figures": figures})
