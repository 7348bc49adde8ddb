"""Figures without a browser: the tree layout shared by every view, and static SVG drawings.

The layout is computed once per build and written to ``data/tree.js``; the interactive tree,
the static SVG fallback and the print figures all draw from it, so they always agree.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from html import escape

import numpy as np

from ..analysis.tree import Tree
from ..i18n import Translator


@dataclass(frozen=True)
class LayoutNode:
    index: int
    id: str
    kind: str  # "tip" or "node"
    x: float
    y: float
    parent: int
    label: str
    href: str
    support: float | None
    withheld: bool = False


def tree_layout(tree: Tree, ids: list[str], labels: list[str], hrefs: list[str],
                support: np.ndarray, withheld: set[int] | None = None,
                ) -> tuple[list[LayoutNode], bool]:
    """Rectangular layout: x = distance from the root, y = tip order (internal: mean of children).

    Branch lengths are used when every non-root branch has a finite, non-negative length and
    at least one is positive; otherwise every branch counts one step (returned flag False).
    """
    n = tree.n_nodes
    lengths = tree.length[:-1]
    use_lengths = bool(n > 1 and np.all(np.isfinite(lengths)) and np.all(lengths >= 0)
                       and np.any(lengths > 0))
    x = np.zeros(n)
    for v in range(n - 2, -1, -1):
        step = tree.length[v] if use_lengths else 1.0
        x[v] = x[tree.parent[v]] + step
    if not use_lengths:
        # Equal depths: tips aligned at the deepest level, internal nodes at their height.
        height = np.zeros(n)
        for v in range(n):
            kids = tree.children(v)
            if len(kids):
                height[v] = 1 + max(height[k] for k in kids)
        x = height[-1] - height
    y = np.zeros(n)
    order = 0
    # Tips in the order a preorder walk meets them, so clades stay together.
    stack = [tree.root]
    while stack:
        v = stack.pop()
        kids = tree.children(v)
        if len(kids) == 0:
            y[v] = order
            order += 1
        else:
            stack.extend(reversed(kids.tolist()))
    for v in range(n):
        kids = tree.children(v)
        if len(kids):
            y[v] = float(np.mean(y[kids]))
    withheld = withheld or set()
    out = []
    for v in range(n):
        s = support[v]
        out.append(LayoutNode(
            index=v, id=ids[v], kind="tip" if tree.tip[v] >= 0 else "node",
            x=round(float(x[v]), 6), y=round(float(y[v]), 3), parent=int(tree.parent[v]),
            label=labels[v], href=hrefs[v],
            support=None if s is None or not math.isfinite(s) else round(float(s), 4),
            withheld=v in withheld,
        ))
    return out, use_lengths


def tree_svg(layout: list[LayoutNode], root: str, *, highlight: set[int] | None = None,
             width: int = 760, row: int = 18, title: str = "Lineage tree",
             standalone: bool = False, tr: Translator | None = None) -> str:
    """A static SVG of the tree with links to object pages and trait sheets.

    Tips and nodes are ``<a>`` elements (keyboard-focusable in browsers that show SVG links),
    support values stand beside internal nodes, highlighted nodes are drawn in the accent class.
    The words and numbers it adds (a trait sheet link's name, the supports) are in ``tr``'s
    language (English without one).
    """
    tr = tr or Translator()
    highlight = highlight or set()
    tips = [n for n in layout if n.kind == "tip"]
    label_room = 12 + 7 * max((len(n.label) for n in tips), default=4)
    plot_w = max(width - label_room - 30, 120)
    max_x = max((n.x for n in layout), default=1.0) or 1.0
    height = row * max(len(tips), 1) + 30

    def px(node: LayoutNode) -> float:
        return 15 + plot_w * node.x / max_x

    def py(node: LayoutNode) -> float:
        return 15 + row * node.y

    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" class="tree-svg" viewBox="0 0 {width} {height}"'
        f' width="{width}" height="{height}" role="group" aria-labelledby="tree-svg-title">',
        f'<title id="tree-svg-title">{escape(title)}</title>',
    ]
    if standalone:  # a file of its own: black on white whatever the page's colour scheme
        parts.append('<rect width="100%" height="100%" fill="#fff"/>'
                     '<g fill="#1a1a1a" color="#1a1a1a" font-family="sans-serif">')
    edges = []
    for node in layout:
        if node.parent < 0:
            continue
        p = layout[node.parent]
        cls = "edge hl" if node.index in highlight else "edge"
        edges.append(f'<path class="{cls}" d="M{px(p):.1f},{py(p):.1f}V{py(node):.1f}'
                     f'H{px(node):.1f}"/>')
    parts.append('<g fill="none" stroke="currentColor" stroke-width="1.4">' + "".join(edges)
                 + "</g>")
    for node in layout:
        x, y = px(node), py(node)
        cls = ' class="hl"' if node.index in highlight else ""
        if node.kind == "tip":
            text = escape(node.label)
            mark = (f'<circle cx="{x:.1f}" cy="{y:.1f}" r="3"{cls}/>'
                    f'<text x="{x + 7:.1f}" y="{y + 4:.1f}" font-size="12">{text}</text>')
        else:
            # The support number stands beside the link, so the link's name is its label alone.
            support = "" if node.support is None or node.support >= 0.9995 else \
                f'<text x="{x - 4:.1f}" y="{y - 4:.1f}" font-size="10" text-anchor="end">' \
                f"{tr.number(node.support, 2)}</text>"
            mark = f'<rect x="{x - 3:.1f}" y="{y - 3:.1f}" width="6" height="6"{cls}/>'
            parts.append(support)
        if node.href and not node.withheld:
            name = node.label if node.kind == "tip" else \
                tr.gettext("{title} (trait sheet)").format(title=node.label)
            parts.append(f'<a href="{escape(root + node.href)}" aria-label="{escape(name)}">'
                         f"{mark}</a>")
        else:
            parts.append(mark)
    if standalone:
        parts.append("</g>")
    parts.append("</svg>")
    return "".join(parts)


def neighbourhood(layout: list[LayoutNode], focus: int, depth: int = 1) -> list[LayoutNode]:
    """The part of the layout around one node: its parent, the node, and its subtree."""
    keep = {focus}
    p = layout[focus].parent
    for _ in range(depth):
        if p < 0:
            break
        keep.add(p)
        p = layout[p].parent
    children: dict[int, list[int]] = {}
    for n in layout:
        children.setdefault(n.parent, []).append(n.index)
    stack = [focus]
    while stack:
        v = stack.pop()
        for c in children.get(v, []):
            keep.add(c)
            stack.append(c)
    nodes = [n for n in layout if n.index in keep]
    new_index = {n.index: i for i, n in enumerate(nodes)}
    ys = sorted({n.y for n in nodes if n.kind == "tip"})
    rank = {y: i for i, y in enumerate(ys)}
    out = []
    for n in nodes:
        out.append(LayoutNode(
            index=new_index[n.index], id=n.id, kind=n.kind, x=n.x, y=0.0, parent=
            new_index.get(n.parent, -1), label=n.label, href=n.href, support=n.support,
            withheld=n.withheld,
        ))
    # Re-space: tips by rank, internal nodes at the mean of their children.
    ys_new = {}
    for n in out:
        if n.kind == "tip":
            ys_new[n.index] = float(rank[nodes[n.index].y])
    for n in out:  # postorder is kept, children before parents
        kids = [c.index for c in out if c.parent == n.index]
        if kids:
            ys_new[n.index] = sum(ys_new[k] for k in kids) / len(kids)
    min_x = min(n.x for n in out)
    return [LayoutNode(n.index, n.id, n.kind, n.x - min_x, ys_new.get(n.index, 0.0), n.parent,
                       n.label, n.href, n.support, n.withheld) for n in out]
