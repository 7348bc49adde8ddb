"""``atlas figures``: print-ready SVG figures of the lineage tree (and PNG when possible).

``write_figures`` runs the first stages of the pipeline (load, link, analyse) and writes:

- ``tree.svg``: the summary tree with the support of every clade;
- for each requested character ``ID``: ``tree-<ID>-pies.svg`` (pies of the reconstructed state
  probabilities at the nodes, observed states at the tips) and ``tree-<ID>-states.svg`` (the
  branches coloured by the most probable state).

PNG copies are written beside them when the optional ``cairosvg`` library can be imported;
otherwise they are skipped with a note. Only those files are written, each checked to lie
inside the output folder; the build profile's access rules apply, so a withheld object is
drawn as "Withheld" and never named.
"""

from __future__ import annotations

import importlib.util
from collections.abc import Callable
from pathlib import Path

from .analysis.results import Results, analyse
from .build import load
from .errors import AtlasError, Problem
from .link import slug
from .model import Atlas
from .site import printfigures
from .site.figures import LayoutNode, tree_layout
from .site.treedata import check_character_ids
from .site.views import clade_notes_by_node, node_title


def _quiet(_: str) -> None:
    pass


def figure_layout(atlas: Atlas, results: Results) -> tuple[list[LayoutNode], bool]:
    """The tree layout with print labels: object titles, "Withheld", or the clade's title."""
    tree = results.tree
    notes = clade_notes_by_node(atlas, results)
    labels, withheld = [], set()
    for v, nid in enumerate(results.ids):
        if tree.tip[v] >= 0:
            obj = atlas.objects[nid]
            labels.append("Withheld" if obj.withheld else obj.title)
            if obj.withheld:
                withheld.add(v)
        else:
            labels.append(node_title(atlas, results, v, notes))
    return tree_layout(tree, ["" if v in withheld else i for v, i in enumerate(results.ids)],
                       labels, [""] * tree.n_nodes, results.summary.support, withheld)


def _inside(out: Path, name: str) -> Path:
    path = (out / name).resolve()
    if not path.is_relative_to(out) or path == out:
        raise AtlasError(Problem(str(out), None, f"refusing to write {name!r} outside the "
                                 "output folder"))
    return path


def _png_converter():
    if importlib.util.find_spec("cairosvg") is None:
        return None
    import cairosvg

    return cairosvg.svg2png


def write_figures(directory: Path | str, out: Path | str, characters: list[str] | tuple = (),
                  profile: str = "public", say: Callable[[str], None] = _quiet) -> list[Path]:
    """Write the tree figures for ``profile`` into ``out``; return the files written, in order.

    Unknown character ids (or continuous ones) are reported all at once as an
    :class:`AtlasError` before anything is written.
    """
    directory, out = Path(directory), Path(out)
    atlas = load(directory, profile, say)
    check_character_ids(atlas, list(characters))
    if out.exists() and not out.is_dir():
        raise AtlasError(Problem(str(out), None, "the output path is a file, not a folder"))
    say("Analysing: summary tree, support, likelihood")
    results = analyse(atlas)
    layout, use_lengths = figure_layout(atlas, results)
    title = atlas.config.title
    figures: list[tuple[str, str]] = [
        ("tree.svg", printfigures.tree_figure(layout, f"Lineage tree: {title}", use_lengths))]
    by_id = {c.id: c for c in atlas.discrete}
    tree = results.tree
    for cid in dict.fromkeys(characters):  # each once, in the order given
        c = by_id[cid]
        masks = {v: int(atlas.masks[tree.tip[v], c.column]) for v in range(tree.n_nodes)
                 if tree.tip[v] >= 0}
        probs = results.probs[:, c.column, :]
        name = slug(cid)
        figures.append((f"tree-{name}-pies.svg", printfigures.pies_figure(
            layout, f"{c.label}: reconstructed states", use_lengths, c.symbols, c.descriptions,
            probs, masks)))
        figures.append((f"tree-{name}-states.svg", printfigures.states_figure(
            layout, f"{c.label}: most probable state on each branch", use_lengths, c.symbols,
            c.descriptions, probs, masks)))

    out.mkdir(parents=True, exist_ok=True)
    root = out.resolve()
    targets = [(_inside(root, name), text) for name, text in figures]  # all checked first
    to_png = _png_converter()
    if to_png is None:
        say("PNG copies skipped: the cairosvg library is not installed (SVG files only)")
    written: list[Path] = []
    for path, text in targets:
        say(f"Writing {path.name}")
        path.write_text(text, encoding="utf-8")
        written.append(path)
        if to_png is not None:
            png = _inside(root, path.with_suffix(".png").name)
            to_png(bytestring=text.encode("utf-8"), write_to=str(png), dpi=192, scale=2)
            written.append(png)
    return written
