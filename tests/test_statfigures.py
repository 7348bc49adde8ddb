"""Tests for atlas.site.statfigures: bins against numpy.histogram, bar heights read back from
the SVG against counts numpy computes, the RI strip against the parsimony indices, and the
figures of the invented starter atlas. Every number here is invented or computed by numpy."""

from __future__ import annotations

import doctest
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from atlas.site.statfigures import (
    BOTTOM,
    HEIGHT,
    SUPPORT_EDGES,
    TOP,
    histogram,
    histogram_svg,
    methods_figures,
    nice_step,
    strip_svg,
)

SVG = "{http://www.w3.org/2000/svg}"


def bars(svg: str) -> list[ET.Element]:
    return ET.fromstring(svg).findall(f".//{SVG}rect[@class='bar']")


def test_histogram_matches_numpy_including_edge_values():
    rng = np.random.default_rng(41)  # invented values
    # fractions count / n as clade supports are, many of them exactly on a bin edge
    values = rng.integers(0, 21, size=500) / 20
    expected, _ = np.histogram(values, bins=SUPPORT_EDGES)  # numpy, the reference
    assert histogram(values, SUPPORT_EDGES).tolist() == expected.tolist()
    edges = np.linspace(0, 7.5, 16)
    skewed = rng.gamma(2.0, 1.0, size=1000)
    inside = skewed[skewed <= 7.5]
    assert histogram(skewed, edges).tolist() == np.histogram(inside, bins=edges)[0].tolist()
    assert histogram([np.nan, 0.5], [0, 1]).tolist() == [1]


def test_histogram_bar_heights_follow_numpy_counts():
    rng = np.random.default_rng(43)
    values = rng.beta(0.6, 0.4, size=300)  # invented supports
    expected, edges = np.histogram(values, bins=10, range=(0, 1))  # numpy, the reference
    svg = histogram_svg(histogram(values, edges), edges, title="Support (invented)",
                        x_label="Support", y_label="Clades")
    found = bars(svg)
    assert [int(b.get("data-count")) for b in found] == expected.tolist()
    heights = np.array([float(b.get("height")) for b in found])
    plot_h = HEIGHT - TOP - BOTTOM
    # the tallest bar reaches the largest count over the axis top, a round step above it
    step = nice_step(expected.max())
    top = step * np.ceil(expected.max() / step)
    assert np.allclose(heights, expected / top * plot_h, atol=0.06)  # heights rounded to 0.1 px
    # bars stand on the x axis, left to right in bin order
    bottoms = [float(b.get("y")) + float(b.get("height")) for b in found]
    assert max(bottoms) - min(bottoms) <= 0.11
    xs = [float(b.get("x")) for b in found]
    assert xs == sorted(xs)


def test_histogram_svg_is_labelled():
    root = ET.fromstring(histogram_svg([1, 2], [0, 0.5, 1], title="T <&> invented",
                                       x_label="X label", y_label="Y label", svg_id="h"))
    assert root.get("role") == "img" and root.get("aria-labelledby") == "h-title h-desc"
    assert root.find(f"{SVG}title").text == "T <&> invented"
    assert "0 to 0.5: 1" in root.find(f"{SVG}desc").text
    texts = [t.text for t in root.iter(f"{SVG}text")]
    assert "X label" in texts and "Y label" in texts


def test_strip_has_one_tick_per_finite_value_at_its_value():
    groups = [("Form", [0.2, 0.9, float("nan"), 1.0]), ("Decoration", [0.5])]  # invented RIs
    root = ET.fromstring(strip_svg(groups, title="RI (invented)", x_label="RI"))
    rows = root.findall(f".//{SVG}g[@class='row']")
    assert [(r.get("data-group"), int(r.get("data-n"))) for r in rows] == [("Form", 3),
                                                                          ("Decoration", 1)]
    ticks = rows[0].findall(f".//{SVG}line[@class='tick']")
    values = [float(t.get("data-value")) for t in ticks]
    assert values == [0.2, 0.9, 1.0]
    xs = np.array([float(t.get("x1")) for t in ticks])
    # x is linear in the value: the same px per unit between every pair
    slope = (xs[2] - xs[0]) / (1.0 - 0.2)
    assert xs[1] - xs[0] == pytest.approx(slope * 0.7, abs=0.15)
    median = rows[0].find(f"{SVG}line[@class='median']")
    assert float(median.get("x1")) == pytest.approx(xs[1], abs=0.06)  # median of 0.2, 0.9, 1


def test_methods_figures_of_the_starter_atlas(starter):
    from atlas.analysis.results import analyse
    from atlas.build import load

    atlas = load(starter)
    results = analyse(atlas)
    figures, files = methods_figures(atlas, results)
    tree = results.tree
    internal = [v for v in range(tree.n_nodes) if tree.tip[v] < 0 and v != tree.root]
    expected, _ = np.histogram(results.summary.support[internal], bins=SUPPORT_EDGES)
    found = [int(b.get("data-count")) for b in bars(files["figures/support.svg"])]
    assert found == expected.tolist()
    assert [r["count"] for r in figures["support"]["rows"]] == expected.tolist()
    ri = results.indices.ri
    root = ET.fromstring(files["figures/retention.svg"])
    ticks = sorted(float(t.get("data-value")) for t in root.iter(f"{SVG}line")
                   if t.get("class") == "tick")
    finite = sorted(round(float(ri[c.column]), 4) for c in atlas.discrete
                    if np.isfinite(ri[c.column]))
    assert ticks == pytest.approx(finite, abs=5e-5)
    if results.changes is not None:
        per_branch = np.nansum(results.changes.total, axis=1)
        branches = [per_branch[v] for v in range(tree.n_nodes) if v != tree.root]
        svg = files["figures/changes.svg"]
        counts = [int(b.get("data-count")) for b in bars(svg)]
        assert sum(counts) == len(branches)
        lows = [float(r["range"].split(" to ")[0]) for r in figures["changes"]["rows"]]
        highs = [float(r["range"].split(" to ")[1]) for r in figures["changes"]["rows"]]
        edges = np.array(lows + highs[-1:])
        assert counts == np.histogram(branches, bins=edges)[0].tolist()


def test_docstring_examples():
    import atlas.site.statfigures as module

    result = doctest.testmod(module)  # the hand-checkable examples in the docstrings
    assert result.attempted > 0 and result.failed == 0
