"""Tests for atlas.analysis.geography against pyproj, SciPy, DendroPy, closed forms and
brute-force enumeration. Every tree, place and matrix here is invented."""

from __future__ import annotations

import doctest
import itertools
import math

import dendropy
import numpy as np
import pytest
from pyproj import Geod, Proj
from scipy.spatial import ConvexHull
from scipy.stats import pearsonr

from atlas.analysis.geography import (
    EARTH_RADIUS_KM,
    clade_range,
    convex_hull,
    distance_matrix,
    great_circle_km,
    lambert_azimuthal_equal_area,
    mantel,
    patristic_distances,
)
from atlas.errors import AtlasError
from atlas.sources.trees import parse_newick

R = EARTH_RADIUS_KM
WGS84 = Geod(ellps="WGS84")


def random_points(n: int, seed: int, lat=(-80, 80), lon=(-180, 180)):
    rng = np.random.default_rng(seed)
    return rng.uniform(*lat, n), rng.uniform(*lon, n)


def upper(m: np.ndarray) -> np.ndarray:
    return m[np.triu_indices(m.shape[0], 1)]


# --- great-circle distances -------------------------------------------------------------------

def test_great_circle_against_the_wgs84_ellipsoid():
    lat1, lon1 = random_points(200, seed=11)
    lat2, lon2 = random_points(200, seed=12)
    ours = great_circle_km(lat1, lon1, lat2, lon2)
    _, _, metres = WGS84.inv(lon1, lat1, lon2, lat2)  # pyproj: geodesics on the WGS84 ellipsoid
    # A sphere of radius 6371.0 km lies between the ellipsoid's meridional radius of curvature
    # at the equator, a(1 - e^2) = 6335.4 km (0.56 % shorter), and at the poles, a^2 / b =
    # 6399.6 km (0.45 % longer), so a spherical distance is off by at most about 0.56 %
    # (WGS84 a = 6378.137 km, 1/f = 298.257223563, from memory).
    relative = np.abs(ours - metres / 1000) / (metres / 1000)
    assert relative.max() < 0.006
    assert relative.mean() < 0.003  # most pairs are far better than the worst case


def test_great_circle_closed_forms():
    # a quarter meridian, equator to pole: pi / 2 * R (closed form)
    assert great_circle_km(0, 0, 90, 0) == pytest.approx(math.pi / 2 * R, rel=1e-12)
    assert great_circle_km(-90, 0, 0, 77) == pytest.approx(math.pi / 2 * R, rel=1e-12)
    # antipodes: pi R (closed form), on the equator and off it
    assert great_circle_km(0, 0, 0, 180) == pytest.approx(math.pi * R, rel=1e-12)
    assert great_circle_km(10, 20, -10, -160) == pytest.approx(math.pi * R, rel=1e-9)
    # one degree of the equator: pi R / 180 (closed form)
    assert great_circle_km(0, 30, 0, 31) == pytest.approx(math.pi * R / 180, rel=1e-12)
    assert great_circle_km(12.5, 40, 12.5, 40) == 0.0


def test_great_circle_broadcasts_and_propagates_nan():
    d = great_circle_km([0, np.nan], [0, 0], 0, [90, 90])
    assert d[0] == pytest.approx(math.pi / 2 * R)  # a quarter of the equator (closed form)
    assert np.isnan(d[1])


def test_distance_matrix_matches_pairwise_distances():
    lat, lon = random_points(7, seed=3)
    lat[4] = np.nan  # an invented object without coordinates
    lon[4] = np.nan
    d = distance_matrix(lat, lon)
    assert d.shape == (7, 7)
    assert np.array_equal(d, d.T, equal_nan=True)
    assert np.isnan(d[4]).all() and np.isnan(d[:, 4]).all()
    for i, j in itertools.combinations([0, 1, 2, 3, 5, 6], 2):
        assert d[i, j] == pytest.approx(float(great_circle_km(lat[i], lon[i], lat[j], lon[j])))
        assert d[i, i] == 0.0


def test_distance_matrix_rejects_mismatched_columns():
    with pytest.raises(AtlasError, match="3 latitudes but 2 longitudes"):
        distance_matrix([1, 2, 3], [1, 2])


# --- patristic distances ----------------------------------------------------------------------

HAND = "((A:1,B:2):3,(C:4,(D:5,E:6):7):8);"  # invented case
HAND_DISTANCES = {  # by hand: the sum of the lengths on the path between two tips
    ("A", "B"): 1 + 2, ("A", "C"): 1 + 3 + 8 + 4, ("A", "D"): 1 + 3 + 8 + 7 + 5,
    ("A", "E"): 1 + 3 + 8 + 7 + 6, ("B", "C"): 2 + 3 + 8 + 4, ("B", "D"): 2 + 3 + 8 + 7 + 5,
    ("B", "E"): 2 + 3 + 8 + 7 + 6, ("C", "D"): 4 + 7 + 5, ("C", "E"): 4 + 7 + 6,
    ("D", "E"): 5 + 6,
}


def test_patristic_distances_by_hand():
    tree = parse_newick(HAND)
    d = patristic_distances(tree)
    index = {name: i for i, name in enumerate(tree.taxa)}
    assert np.diag(d).tolist() == [0.0] * 5
    for (x, y), expected in HAND_DISTANCES.items():
        assert d[index[x], index[y]] == expected
        assert d[index[y], index[x]] == expected


def test_patristic_without_lengths_counts_branches():
    # no lengths: each branch is one step (by hand: A-B 2, A-C 3, C-D 2, A-D 3 via the root)
    tree = parse_newick("((A,B),(C,D));")
    d = patristic_distances(tree)
    assert d[0].tolist() == [0.0, 2.0, 4.0, 4.0]
    assert d[2, 3] == 2.0


def test_patristic_with_a_polytomy_and_an_absent_taxon():
    # invented: a three-way root and a taxon "Z" in the namespace that is not in this tree
    tree = parse_newick("(A:1,B:2,(C:1,D:1):0.5);", taxa=("A", "B", "C", "D", "Z"))
    d = patristic_distances(tree)
    assert d[0, 1] == 3.0 and d[0, 2] == 2.5 and d[2, 3] == 2.0  # by hand
    assert np.isnan(d[4]).all() and np.isnan(d[:, 4]).all()


def random_newick(n: int, seed: int) -> str:
    """An invented random binary tree with random lengths, tips t00 .. t(n-1)."""
    rng = np.random.default_rng(seed)
    nodes = [f"t{i:02d}" for i in range(n)]
    while len(nodes) > 1:
        i, j = sorted(rng.choice(len(nodes), 2, replace=False).tolist())
        a, b = nodes.pop(j), nodes.pop(i)
        nodes.append(f"({a}:{rng.uniform(0.01, 2):.4f},{b}:{rng.uniform(0.01, 2):.4f})")
    return nodes[0] + ";"


def test_patristic_distances_against_dendropy():
    text = random_newick(25, seed=5)
    ours_tree = parse_newick(text)
    ours = patristic_distances(ours_tree)
    theirs = dendropy.Tree.get(data=text, schema="newick", preserve_underscores=True)
    pdm = theirs.phylogenetic_distance_matrix()  # DendroPy's patristic distances
    taxon = {t.label: t for t in theirs.taxon_namespace}
    for i, j in itertools.combinations(range(len(ours_tree.taxa)), 2):
        expected = pdm.patristic_distance(taxon[ours_tree.taxa[i]], taxon[ours_tree.taxa[j]])
        assert ours[i, j] == pytest.approx(expected, rel=1e-12)


def test_patristic_distances_satisfy_the_four_point_condition():
    # Buneman 1974: a tree metric has, for every four tips, the two largest of
    # d(ij) + d(kl), d(ik) + d(jl), d(il) + d(jk) equal
    d = patristic_distances(parse_newick(random_newick(12, seed=8)))
    quads = np.array(list(itertools.combinations(range(12), 4)))
    i, j, k, m = quads.T
    sums = np.sort(np.stack([d[i, j] + d[k, m], d[i, k] + d[j, m], d[i, m] + d[j, k]]), axis=0)
    assert np.allclose(sums[2], sums[1], rtol=1e-12, atol=1e-12)
    assert (sums[1] - sums[0] > 1e-6).any()  # not trivially all equal: the tree has structure


# --- Mantel test ------------------------------------------------------------------------------

def correlated_pair(n: int, seed: int, noise: float):
    """Invented: distances between random points, and the same plus symmetric noise."""
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 10, (n, 2))
    a = np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1))
    e = rng.uniform(0, noise, (n, n))
    b = a + (e + e.T)
    np.fill_diagonal(b, 0.0)
    return a, b


def test_mantel_r_equals_pearson_of_the_upper_triangles():
    a, b = correlated_pair(15, seed=2, noise=4.0)
    res = mantel(a, b, permutations=99)
    expected = pearsonr(upper(a), upper(b)).statistic  # SciPy
    assert res.r == pytest.approx(expected, rel=1e-12)
    assert res.n == 15 and res.permutations == 99


def brute_force_p(a: np.ndarray, b: np.ndarray) -> float:
    """All n! relabellings of b, each correlated by SciPy; the identity is among them."""
    observed = pearsonr(upper(a), upper(b)).statistic
    n = a.shape[0]
    hits = total = 0
    for perm in itertools.permutations(range(n)):
        p = np.asarray(perm)
        r = pearsonr(upper(a), upper(b[np.ix_(p, p)])).statistic
        hits += r >= observed - 1e-12
        total += 1
    return hits / total


def test_mantel_exact_and_monte_carlo_p_against_brute_force():
    a, b = correlated_pair(6, seed=4, noise=9.0)
    exact = brute_force_p(a, b)  # brute force over all 720 permutations
    assert 0.05 < exact < 0.95  # a case where the p-value is not at its bounds
    res = mantel(a, b, permutations="all")
    assert res.permutations == 720
    assert res.p == pytest.approx(exact, abs=1e-12)
    sampled = mantel(a, b, permutations=4999, seed=7)
    # binomial standard error at p ~ 0.5 is sqrt(0.25 / 5000) = 0.007: 0.03 is over 4 of them
    assert abs(sampled.p - exact) < 0.03
    assert sampled.r == pytest.approx(res.r, rel=1e-12)


def test_mantel_perfect_correlation():
    a, _ = correlated_pair(10, seed=9, noise=1.0)
    b = 2 * a + 5  # an affine copy: r = 1 (closed form); only the identity reaches it
    np.fill_diagonal(b, 0.0)
    res = mantel(a, b, permutations=999, seed=3)
    assert res.r == pytest.approx(1.0, abs=1e-12)
    assert res.p == pytest.approx(1 / 1000)  # (0 + 1) / (999 + 1)
    negative = mantel(a, -b, permutations=999, seed=3)
    assert negative.r == pytest.approx(-1.0, abs=1e-12)
    assert negative.p == pytest.approx(1.0)  # every relabelling reaches r >= -1


def test_mantel_is_deterministic_with_a_seed():
    a, b = correlated_pair(12, seed=6, noise=6.0)
    first = mantel(a, b, permutations=500, seed=42)
    assert mantel(a, b, permutations=500, seed=42) == first
    assert 0 < first.p <= 1


def test_mantel_drops_objects_without_coordinates():
    lat, lon = random_points(9, seed=21, lat=(30, 50), lon=(0, 30))
    tree = parse_newick(random_newick(9, seed=22))
    geo = distance_matrix(lat, lon)
    lat_missing = lat.copy()
    lat_missing[[2, 6]] = np.nan
    geo_missing = distance_matrix(lat_missing, lon)
    patristic = patristic_distances(tree)
    res = mantel(geo_missing, patristic, permutations=199, seed=1)
    keep = [0, 1, 3, 4, 5, 7, 8]
    reduced = mantel(geo[np.ix_(keep, keep)], patristic[np.ix_(keep, keep)], permutations=199,
                     seed=1)
    assert res == reduced
    assert res.n == 7
    assert res.r == pytest.approx(pearsonr(upper(geo[np.ix_(keep, keep)]),
                                           upper(patristic[np.ix_(keep, keep)])).statistic)


def test_mantel_with_too_few_objects_is_nan():
    a = np.array([[0.0, 1.0], [1.0, 0.0]])
    res = mantel(a, a)
    assert math.isnan(res.r) and math.isnan(res.p) and res.n == 2


@pytest.mark.parametrize("a, b, permutations, message", [
    (np.zeros((3, 4)), np.zeros((3, 4)), 9, "not square"),
    (np.zeros((3, 3)), np.zeros((4, 4)), 9, "differ in size"),
    ([[0, 1, 2], [5, 0, 3], [2, 3, 0]], np.zeros((3, 3)), 9, "not symmetric"),
    (np.zeros((3, 3)), np.zeros((3, 3)), "many", "permutations must be"),
    (np.zeros((3, 3)), np.zeros((3, 3)), -1, "permutations must be"),
    (np.zeros((10, 10)), np.zeros((10, 10)), "all", "too many"),
    ([["x"]], [["y"]], 9, "not numeric"),
])
def test_mantel_bad_input(a, b, permutations, message):
    with pytest.raises(AtlasError, match=message):
        mantel(a, b, permutations=permutations)


# --- clade ranges -----------------------------------------------------------------------------

def test_clade_range_of_symmetric_points():
    # invented: four places 5 degrees from (0, 30) in the four directions; by symmetry the
    # spherical mean is (0, 30) and each lies 5 degrees of arc, 5 pi R / 180 km, from it
    r = clade_range([5, -5, 0, 0], [30, 30, 25, 35])
    assert r.centroid_lat == pytest.approx(0.0, abs=1e-12)
    assert r.centroid_lon == pytest.approx(30.0, abs=1e-12)
    assert r.spread_km == pytest.approx(5 * math.pi * R / 180, rel=1e-12)
    assert r.n == 4 and r.area_km2 > 0


def test_clade_range_around_a_pole():
    # invented: four places on the 80th parallel, a quarter turn apart: the mean is the pole
    # and each is 10 degrees of arc away (closed form)
    r = clade_range([80, 80, 80, 80], [0, 90, 180, -90])
    assert r.centroid_lat == pytest.approx(90.0, abs=1e-9)
    assert r.spread_km == pytest.approx(10 * math.pi * R / 180, rel=1e-9)


def test_clade_range_area_of_a_one_degree_square():
    lats, lons = [0, 0, 1, 1], [0, 1, 1, 0]  # invented: a 1 x 1 degree square at the equator
    r = clade_range(lats, lons)
    area, _ = WGS84.polygon_area_perimeter(lons, lats)  # pyproj: geodesic polygon, WGS84
    # about 111.3 km x 110.6 km = 12,308 km^2 on the ellipsoid (from memory)
    assert r.area_km2 == pytest.approx(abs(area) / 1e6, rel=0.01)
    # on the sphere the cell is R^2 (lambda2 - lambda1)(sin phi2 - sin phi1) (closed form);
    # the hull's straight edges on the projection lose a little against it
    sphere = R**2 * math.radians(1) * math.sin(math.radians(1))
    assert r.area_km2 == pytest.approx(sphere, rel=1e-3)


def test_lambert_azimuthal_equal_area_against_pyproj():
    lat, lon = random_points(50, seed=31, lat=(10, 70), lon=(-40, 60))
    x, y = lambert_azimuthal_equal_area(lat, lon, 40.0, 10.0)
    laea = Proj(proj="laea", lat_0=40, lon_0=10, R=R * 1000)  # pyproj, spherical Earth
    ex, ey = laea(lon, lat)
    assert np.allclose(x, np.asarray(ex) / 1000, rtol=0, atol=1e-6)
    assert np.allclose(y, np.asarray(ey) / 1000, rtol=0, atol=1e-6)


def test_clade_range_area_against_scipy_convex_hull():
    lat, lon = random_points(40, seed=33, lat=(20, 35), lon=(40, 60))
    r = clade_range(lat, lon)
    laea = Proj(proj="laea", lat_0=r.centroid_lat, lon_0=r.centroid_lon, R=R * 1000)
    x, y = laea(lon, lat)  # pyproj's projection, then SciPy's (Qhull) hull
    expected = ConvexHull(np.column_stack([x, y])).volume / 1e6  # a 2-d hull's volume is area
    assert r.area_km2 == pytest.approx(expected, rel=1e-9)


def test_clade_range_hull_vertices_match_scipy_convex_hull():
    # invented places; the reference is SciPy's Qhull on pyproj's projection of the same points
    lat, lon = random_points(60, seed=35, lat=(-10, 25), lon=(100, 140))
    r = clade_range(lat, lon)
    laea = Proj(proj="laea", lat_0=r.centroid_lat, lon_0=r.centroid_lon, R=R * 1000)
    x, y = laea(lon, lat)
    qhull = ConvexHull(np.column_stack([x, y]))
    expected = {(float(lat[i]), float(lon[i])) for i in qhull.vertices}
    assert set(r.hull) == expected and len(r.hull) == len(qhull.vertices)
    # SciPy gives 2-d hull vertices counter-clockwise; ours run the same way round
    hx, hy = laea([p[1] for p in r.hull], [p[0] for p in r.hull])
    signed = np.dot(hx, np.roll(hy, -1)) - np.dot(np.roll(hx, -1), hy)
    assert signed > 0
    start = list(qhull.vertices).index(int(np.flatnonzero((lat == r.hull[0][0])
                                                         & (lon == r.hull[0][1]))[0]))
    rolled = np.roll(qhull.vertices, -start)
    assert [(float(lat[i]), float(lon[i])) for i in rolled] == list(r.hull)


def test_convex_hull_against_scipy_on_random_planes():
    rng = np.random.default_rng(37)  # invented point clouds
    for n in (3, 4, 10, 200):
        pts = rng.normal(size=(n, 2))
        ours = convex_hull(pts[:, 0], pts[:, 1])
        assert sorted(ours) == sorted(ConvexHull(pts).vertices.tolist())


def test_clade_range_hull_of_one_and_two_places():
    # closed forms: one distinct place has no outline, two give the segment between them
    assert clade_range([5, 5], [10, 10]).hull == ()
    assert clade_range([5], [10]).hull == ()
    two = clade_range([5, 5, 7], [10, 10, 12])
    assert sorted(two.hull) == [(5.0, 10.0), (7.0, 12.0)] and two.area_km2 == 0.0
    # collinear places (the equator) give its two ends
    assert sorted(clade_range([0, 0, 0, 0], [1, 2, 3, 4]).hull) == [(0.0, 1.0), (0.0, 4.0)]


def test_clade_range_degenerate_cases():
    # fewer than 3 distinct places, or places on one line (the equator, through the centre)
    assert clade_range([10, 10, 12], [5, 5, 7]).area_km2 == 0.0
    assert clade_range([0, 0, 0, 0], [1, 2, 3, 4]).area_km2 == 0.0
    empty = clade_range([], [])
    assert empty.n == 0 and math.isnan(empty.centroid_lat) and empty.area_km2 == 0.0
    # places without coordinates are left out
    some = clade_range([np.nan, 0, 0], [np.nan, -1, 1])
    assert some.n == 2 and some.centroid_lon == pytest.approx(0.0, abs=1e-12)
    # two antipodal places have no mean direction
    assert math.isnan(clade_range([0, 0], [0, 180]).centroid_lat)


def test_docstring_examples():
    # the hand-checkable examples in the module's docstrings (worked by hand there)
    import atlas.analysis.geography as module

    result = doctest.testmod(module)
    assert result.attempted > 0 and result.failed == 0
