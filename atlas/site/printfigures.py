"""Publication figures of the lineage tree as standalone SVG, sized for a printed page.

Three drawings share one rectangular layout (:func:`atlas.site.figures.tree_layout`):

- :func:`tree_figure`: the summary tree with the posterior probability of every clade;
- :func:`pies_figure`: one character, a pie of the reconstructed state probabilities at each
  internal node and the observed state(s) at each tip;
- :func:`states_figure`: one character, every branch coloured by the most probable state at
  the node it leads to (the state map), tips marked with their observed state.

Page geometry: 17 cm wide at 96 px per inch (642.5 px), text at 9.5 pt, one tip row every
14 px; the SVG states its size in centimetres so it prints at that size. States are coloured
with the palette of Okabe, M. & Ito, K. (2008), "Color Universal Design (CUD): how to make
figures and presentations that are friendly to colorblind people", J*Fly, in its published
order, which stays distinct for readers with any common colour-vision deficiency.

Every figure is black on white, carries a ``<title>`` and a ``<desc>``, and uses only
elements every SVG renderer knows (paths, circles, rects, text).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from html import escape

import numpy as np

from .figures import LayoutNode

PX_PER_CM = 96 / 2.54
PAGE_WIDTH_CM = 17.0
FONT_PT = 9.5
FONT_PX = FONT_PT * 96 / 72  # 12.67 px
SMALL_PX = 8 * 96 / 72  # support values and the scale bar, 8 pt
ROW_PX = 14.0
# Okabe & Ito (2008): orange, sky blue, bluish green, yellow, blue, vermillion, reddish purple;
# grey stands for any state beyond seven.
STATE_COLOURS = ("#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7",
                 "#999999")
INK = "#000000"
BRANCH = "#333333"
UNKNOWN = "#FFFFFF"


def state_colour(k: int) -> str:
    return STATE_COLOURS[min(k, len(STATE_COLOURS) - 1)]


@dataclass(frozen=True)
class Page:
    """Where things go on the page, in px of the viewBox (96 per inch)."""

    width: float
    height: float
    left: float
    top: float
    plot_width: float
    max_x: float

    def x(self, node: LayoutNode) -> float:
        return self.left + self.plot_width * node.x / self.max_x

    def y(self, node: LayoutNode) -> float:
        return self.top + ROW_PX * node.y


def _page(layout: list[LayoutNode], legend_rows: int, width_cm: float) -> Page:
    tips = [n for n in layout if n.kind == "tip"]
    width = width_cm * PX_PER_CM
    label_room = 8 + 0.55 * FONT_PX * max((len(n.label) for n in tips), default=4)
    label_room = min(label_room, width * 0.45)
    top = 14 + FONT_PX * 2  # room for the heading line
    plot_width = max(width - label_room - 30, 80)
    rows = max(len(tips), 1)
    height = top + ROW_PX * rows + 48 + legend_rows * (FONT_PX + 4)
    max_x = max((n.x for n in layout), default=1.0) or 1.0
    return Page(width, height, 14, top, plot_width, max_x)


def _open(page: Page, title: str, desc: str) -> list[str]:
    w_cm = page.width / PX_PER_CM
    h_cm = page.height / PX_PER_CM
    return [
        '<?xml version="1.0" encoding="UTF-8"?>\n',
        (f'<svg xmlns="http://www.w3.org/2000/svg" width="{w_cm:.2f}cm" height="{h_cm:.2f}cm" '
        f'viewBox="0 0 {page.width:.1f} {page.height:.1f}" role="img" '
        f'font-family="Helvetica, Arial, sans-serif" font-size="{FONT_PX:.2f}">'),
        f"<title>{escape(title)}</title>",
        f"<desc>{escape(desc)}</desc>",
        f'<rect width="{page.width:.1f}" height="{page.height:.1f}" fill="#FFFFFF"/>',
        (f'<text x="{page.left:.1f}" y="{10 + FONT_PX:.1f}" font-weight="bold" fill="{INK}">'
        f"{escape(title)}</text>"),
    ]


def _clip(text: str, page: Page) -> str:
    room = page.width - page.left - page.plot_width - 24
    chars = max(6, int(room / (0.55 * FONT_PX)))
    return text if len(text) <= chars else text[: chars - 1].rstrip() + "\u2026"


def _branches(layout: list[LayoutNode], page: Page, colour_of=None, width: float = 1.2) -> str:
    """Elbow branches; ``colour_of(node)`` gives a branch's colour (default: dark grey)."""
    groups: dict[str, list[str]] = {}
    for node in layout:
        if node.parent < 0:
            continue
        parent = layout[node.parent]
        colour = colour_of(node) if colour_of else BRANCH
        groups.setdefault(colour, []).append(
            f"M{page.x(parent):.1f},{page.y(parent):.1f}V{page.y(node):.1f}H{page.x(node):.1f}")
    return "".join(f'<path fill="none" stroke="{c}" stroke-width="{width}" '
                   f'stroke-linecap="square" d="{"".join(d)}"/>' for c, d in sorted(groups.items()))


def _tip_labels(layout: list[LayoutNode], page: Page, offset: float = 6) -> str:
    return "".join(
        f'<text x="{page.x(n) + offset:.1f}" y="{page.y(n) + FONT_PX * 0.35:.1f}" fill="{INK}">'
        f"{escape(_clip(n.label, page))}</text>" for n in layout if n.kind == "tip")


def _scale_bar(layout: list[LayoutNode], page: Page, use_lengths: bool) -> str:
    """A bar of a round length (1, 2 or 5 times a power of ten) about a fifth of the plot."""
    y = page.top + ROW_PX * max(sum(1 for n in layout if n.kind == "tip"), 1) + 6
    target = page.max_x / 5
    power = 10 ** math.floor(math.log10(target)) if target > 0 else 1
    length = min((m * power for m in (1, 2, 5, 10)), key=lambda v: abs(v - target))
    px = page.plot_width * length / page.max_x
    unit = f"{length:g} (branch length)" if use_lengths else f"{length:g} steps"
    return (f'<path stroke="{INK}" stroke-width="1.2" d="M{page.left:.1f},{y:.1f}h{px:.1f}"/>'
            f'<text x="{page.left:.1f}" y="{y + SMALL_PX + 3:.1f}" font-size="{SMALL_PX:.2f}" '
            f'fill="{INK}">{escape(unit)}</text>')


def _legend(page: Page, rows: int, entries: list[tuple[str, str]], heading: str) -> str:
    """Colour keys below the plot, one per line: (colour, words)."""
    y = page.height - (rows * (FONT_PX + 4)) - 4
    parts = [(f'<text x="{page.left:.1f}" y="{y:.1f}" font-weight="bold" fill="{INK}">'
             f"{escape(heading)}</text>")]
    for i, (colour, words) in enumerate(entries):
        yy = y + (i + 1) * (FONT_PX + 4)
        parts.append(f'<rect x="{page.left:.1f}" y="{yy - FONT_PX * 0.8:.1f}" width="12" '
                     f'height="{FONT_PX * 0.8:.1f}" fill="{colour}" stroke="{INK}" '
                     f'stroke-width="0.6"/>'
                     f'<text x="{page.left + 18:.1f}" y="{yy:.1f}" fill="{INK}">'
                     f"{escape(words)}</text>")
    return "".join(parts)


def tree_figure(layout: list[LayoutNode], title: str, use_lengths: bool,
                width_cm: float = PAGE_WIDTH_CM) -> str:
    """The summary tree with every clade's posterior probability (two decimals) at its node.

    Support is the fraction of sampled trees containing the clade (Margush & McMorris 1981,
    Bull. Math. Biol. 43: 239-244, for the majority-rule tree it is read from); the root has
    none. Clades of support 0.95 or more get a filled square, the others an open one.
    """
    page = _page(layout, 2, width_cm)
    parts = _open(page, title, "Summary tree; numbers give the posterior probability of each "
                  "clade (the fraction of sampled trees containing it).")
    parts.append(_branches(layout, page))
    for n in layout:
        if n.kind == "tip" or n.parent < 0:
            continue
        x, y = page.x(n), page.y(n)
        strong = n.support is not None and n.support >= 0.95
        parts.append(f'<rect x="{x - 2.5:.1f}" y="{y - 2.5:.1f}" width="5" height="5" '
                     f'fill="{INK if strong else "#FFFFFF"}" stroke="{INK}" stroke-width="0.8"/>')
        if n.support is not None:
            parts.append(f'<text x="{x - 4:.1f}" y="{y - 4:.1f}" font-size="{SMALL_PX:.2f}" '
                         f'text-anchor="end" fill="{INK}">{n.support:.2f}</text>')
    parts.append(_tip_labels(layout, page))
    parts.append(_scale_bar(layout, page, use_lengths))
    parts.append(_legend(page, 2, [(INK, "support 0.95 or more"), ("#FFFFFF", ("support below "
                                                                             "0.95"))],
                         "Clade support (posterior probability)"))
    parts.append("</svg>\n")
    return "".join(parts)


def pie_slices(cx: float, cy: float, r: float, probs: np.ndarray) -> list[tuple[int, str]]:
    """SVG paths of a pie chart: slice ``k`` spans ``2 pi probs[k]`` radians, clockwise from
    twelve o'clock. A share of (nearly) one is a full circle; shares below 0.001 are left out.

    Tiny example: probabilities (0.25, 0.75) at centre (0, 0), radius 1: the first slice runs
    from (0, -1) to (1, 0) (a quarter turn), the second from (1, 0) back to (0, -1).
    """
    total = float(np.sum(probs))
    shares = probs / total if total > 0 else probs
    out: list[tuple[int, str]] = []
    start = 0.0
    for k, share in enumerate(shares.tolist()):
        if share < 0.001:
            continue
        if share > 0.999:
            out.append((k, (f"M{cx - r:.2f},{cy:.2f}a{r:.2f},{r:.2f} 0 1,0 {2 * r:.2f},0"
                           f"a{r:.2f},{r:.2f} 0 1,0 {-2 * r:.2f},0Z")))
            start += 2 * math.pi * share
            continue
        end = start + 2 * math.pi * share
        # rounded, and + 0.0 turns a rounded -0.0 into 0.0 so no "-0.00" is written
        x0, y0 = (round(cx + r * math.sin(start), 2) + 0.0, round(cy - r * math.cos(start), 2)
                  + 0.0)
        x1, y1 = round(cx + r * math.sin(end), 2) + 0.0, round(cy - r * math.cos(end), 2) + 0.0
        large = 1 if share > 0.5 else 0
        out.append((k, (f"M{cx:.2f},{cy:.2f}L{x0:.2f},{y0:.2f}"
                       f"A{r:.2f},{r:.2f} 0 {large},1 {x1:.2f},{y1:.2f}Z")))
        start = end
    return out


def _observed(mask: int, k: int) -> list[int]:
    """The states in a tip's state set; empty when every state is possible (unknown)."""
    states = [s for s in range(k) if mask >> s & 1]
    return [] if len(states) == k and k > 1 else states


def _state_legend(symbols, descriptions) -> list[tuple[str, str]]:
    entries = [(state_colour(k), f"{s}: {d}" if d and d != s else s)
               for k, (s, d) in enumerate(zip(symbols, descriptions))]
    return entries + [(UNKNOWN, "? unknown or not applicable")]


def _tip_marks(layout: list[LayoutNode], page: Page, tip_masks: dict[int, int], k: int) -> str:
    parts = []
    for n in layout:
        if n.kind != "tip":
            continue
        x, y = page.x(n), page.y(n)
        states = _observed(tip_masks.get(n.index, (1 << k) - 1), k)
        if not states:
            parts.append(f'<rect x="{x - 3.5:.1f}" y="{y - 3.5:.1f}" width="7" height="7" '
                         f'fill="{UNKNOWN}" stroke="{INK}" stroke-width="0.7"/>')
            continue
        w = 7 / len(states)  # a polymorphic tip: its states side by side
        for i, s in enumerate(states):
            parts.append(f'<rect x="{x - 3.5 + i * w:.2f}" y="{y - 3.5:.1f}" width="{w:.2f}" '
                         f'height="7" fill="{state_colour(s)}" stroke="{INK}" '
                         f'stroke-width="0.7"/>')
    return "".join(parts)


def pies_figure(layout: list[LayoutNode], title: str, use_lengths: bool, symbols, descriptions,
                probs: np.ndarray, tip_masks: dict[int, int],
                width_cm: float = PAGE_WIDTH_CM) -> str:
    """Pies of the marginal ancestral state probabilities at every internal node.

    ``probs[v, k]`` is the probability of state ``k`` at node ``v`` (marginal reconstruction,
    Yang, Kumar & Nei 1995, Genetics 141: 1641-1650); slice ``k`` of node ``v``'s pie spans
    ``2 pi probs[v, k]`` (see :func:`pie_slices`). ``tip_masks[v]`` is tip ``v``'s observed
    state set (bit ``k`` = state ``k``), drawn as a coloured square.
    """
    k = len(symbols)
    entries = _state_legend(symbols, descriptions)
    page = _page(layout, len(entries) + 1, width_cm)
    parts = _open(page, title, "Pie charts at the nodes give the reconstructed probability of "
                  "each state; squares at the tips give the observed states.")
    parts.append(_branches(layout, page))
    radius = min(6.0, ROW_PX * 0.45)
    for n in layout:
        if n.kind == "tip":
            continue
        x, y = page.x(n), page.y(n)
        row = np.asarray(probs[n.index, :k], dtype=float)
        parts.append(f'<g class="pie" data-node="{n.index}">')
        for s, d in pie_slices(x, y, radius, row):
            parts.append(f'<path d="{d}" fill="{state_colour(s)}" stroke="{INK}" '
                         f'stroke-width="0.5" data-state="{s}"/>')
        parts.append("</g>")
    parts.append(_tip_marks(layout, page, tip_masks, k))
    parts.append(_tip_labels(layout, page, offset=7))
    parts.append(_scale_bar(layout, page, use_lengths))
    parts.append(_legend(page, len(entries) + 1, entries, "States"))
    parts.append("</svg>\n")
    return "".join(parts)


def states_figure(layout: list[LayoutNode], title: str, use_lengths: bool, symbols,
                  descriptions, probs: np.ndarray, tip_masks: dict[int, int],
                  width_cm: float = PAGE_WIDTH_CM) -> str:
    """The state map: each branch coloured by the most probable state at the node below it.

    The state of branch ``v`` is ``argmax_k probs[v, k]`` (the first state on a tie); tips show
    their observed states as squares, so a branch and its tip disagree only where the
    reconstruction does.
    """
    k = len(symbols)
    entries = _state_legend(symbols, descriptions)
    page = _page(layout, len(entries) + 1, width_cm)
    parts = _open(page, title, "Branches are coloured by the most probable state at the node "
                  "they lead to; squares at the tips give the observed states.")
    best = np.argmax(np.asarray(probs[:, :k], dtype=float), axis=1)
    parts.append(_branches(layout, page, lambda n: state_colour(int(best[n.index])), width=3))
    parts.append(_tip_marks(layout, page, tip_masks, k))
    parts.append(_tip_labels(layout, page, offset=7))
    parts.append(_scale_bar(layout, page, use_lengths))
    parts.append(_legend(page, len(entries) + 1, entries, "Most probable state"))
    parts.append("</svg>\n")
    return "".join(parts)
