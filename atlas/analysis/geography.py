"""Geography of the objects: distances on the globe, distance on the tree, and where clades lie.

All functions are pure and work on numpy arrays of decimal degrees (WGS84 latitude and
longitude, as the gazetteer gives them). The Earth is a sphere of radius
:data:`EARTH_RADIUS_KM` = 6371.0088 km, the IUGG mean radius ``R1 = (2a + b) / 3`` (Moritz
2000, Journal of Geodesy 74:128-133, "Geodetic Reference System 1980"); against the WGS84
ellipsoid a spherical distance is off by at most about 0.5 %.

- :func:`great_circle_km`, :func:`distance_matrix`: haversine distances;
- :func:`patristic_distances`: path lengths between the tips of a tree;
- :func:`mantel`: does distance on the tree follow distance on the ground?
- :func:`clade_range`: centre, spread, area and outline of a set of places;
- :func:`convex_hull`: the outline itself (Andrew's monotone chain) on projected points;
- :func:`lambert_azimuthal_equal_area`: the projection behind the area.

Objects without coordinates are ``nan`` throughout: their distances are ``nan``, the Mantel
test leaves them out (see :func:`mantel`), and a clade's range is computed from the members
that have coordinates (``Range.n`` says how many).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np

from atlas.analysis.tree import Tree
from atlas.errors import AtlasError, Problem

EARTH_RADIUS_KM = 6371.0088
EXACT_MANTEL_MAX_N = 9  # 9! = 362,880 permutations: under a second; 10! would be ten times more
_CHUNK_VALUES = 2_000_000  # permuted pair values held in memory at once


def great_circle_km(lat1, lon1, lat2, lon2) -> np.ndarray:
    """Great-circle distance in km between points given in degrees (broadcasting arrays).

    The haversine formula (Sinnott 1984, Sky and Telescope 68:159) on a sphere of radius
    ``R = 6371.0088`` km::

        a = sin^2((phi2 - phi1) / 2) + cos(phi1) cos(phi2) sin^2((lambda2 - lambda1) / 2)
        d = 2 R atan2(sqrt(a), sqrt(1 - a))

    with ``1 - a`` taken as ``sin^2((phi1 + phi2) / 2) + cos(phi1) cos(phi2)
    cos^2((lambda2 - lambda1) / 2)`` (the haversine of the distance to the other point's
    antipode), so that nearly antipodal points keep full precision instead of losing it to the
    subtraction.

    ``nan`` in any coordinate gives ``nan``. By hand: a quarter of a meridian, from (0, 0) to
    the pole, is ``pi / 2 * R``:

    >>> round(float(great_circle_km(0, 0, 90, 0)), 3), round(math.pi / 2 * EARTH_RADIUS_KM, 3)
    (10007.557, 10007.557)
    """
    phi1, lam1, phi2, lam2 = (np.radians(np.asarray(v, dtype=np.float64))
                              for v in (lat1, lon1, lat2, lon2))
    cos_cos = np.cos(phi1) * np.cos(phi2)
    a = np.sin((phi2 - phi1) / 2) ** 2 + cos_cos * np.sin((lam2 - lam1) / 2) ** 2
    rest = np.sin((phi1 + phi2) / 2) ** 2 + cos_cos * np.cos((lam2 - lam1) / 2) ** 2
    return 2 * EARTH_RADIUS_KM * np.arctan2(np.sqrt(a), np.sqrt(rest))


def distance_matrix(lats, lons) -> np.ndarray:
    """All pairwise great-circle distances (km) of ``n`` points: an ``n x n`` symmetric matrix.

    Rows and columns of a point without coordinates (``nan``) are ``nan``; the diagonal of the
    others is 0.

    >>> distance_matrix([0, 0, float("nan")], [0, 90, 0]).round(1).tolist()
    [[0.0, 10007.6, nan], [10007.6, 0.0, nan], [nan, nan, nan]]
    """
    lat = np.asarray(lats, dtype=np.float64).ravel()
    lon = np.asarray(lons, dtype=np.float64).ravel()
    if lat.shape != lon.shape:
        raise AtlasError(Problem("gazetteer", None,
                                 f"{lat.size} latitudes but {lon.size} longitudes"))
    d = great_circle_km(lat[:, None], lon[:, None], lat[None, :], lon[None, :])
    d = (d + d.T) / 2  # exactly symmetric whatever the rounding of the two orders
    known = np.isfinite(lat) & np.isfinite(lon)
    d[np.flatnonzero(known), np.flatnonzero(known)] = 0.0
    return d


def patristic_distances(tree: Tree) -> np.ndarray:
    """Patristic distances: ``D[i, j]`` is the sum of branch lengths on the path between tips.

    Rows and columns follow ``tree.taxa``; a taxon that is not a tip of this tree has a row of
    ``nan``. A branch without a length (``nan``) counts as one step, so a tree without lengths
    gives the number of branches between two tips (the topological distance); the root's own
    branch is never on a path.

    With ``depth(v)`` the path length from the root to ``v`` and ``lca`` the most recent common
    ancestor, ``D[i, j] = depth(i) + depth(j) - 2 depth(lca(i, j))`` (e.g. Felsenstein 2004,
    *Inferring Phylogenies*, Sinauer, ch. 11). Every internal node ``v`` is the ``lca`` of the
    pairs of tips taken from two different children, so one pass over the nodes fills each
    pair once.

    By hand, ``((A:1,B:2):3,C:4)``: ``D[A,B] = 1 + 2 = 3``, ``D[A,C] = 1 + 3 + 4 = 8``,
    ``D[B,C] = 9``.

    >>> t = Tree([2, 2, 4, 4, -1], [1, 2, 3, 4, float("nan")], [0, 1, -1, 2, -1], ("A", "B", "C"))
    >>> patristic_distances(t).tolist()
    [[0.0, 3.0, 8.0], [3.0, 0.0, 9.0], [8.0, 9.0, 0.0]]
    """
    n = tree.n_nodes
    length = np.where(np.isnan(tree.length), 1.0, tree.length)
    parent = tree.parent.tolist()
    depth = np.zeros(n)
    for v in range(n - 2, -1, -1):  # reversed postorder is a preorder: parents first
        depth[v] = depth[parent[v]] + length[v]
    out = np.full((len(tree.taxa), len(tree.taxa)), np.nan)
    below: list[list[int]] = [[] for _ in range(n)]  # taxa under each node, built bottom-up
    tip = tree.tip.tolist()
    tip_depth = np.full(len(tree.taxa), np.nan)
    for v in range(n):
        if tip[v] >= 0:
            below[v] = [tip[v]]
            tip_depth[tip[v]] = depth[v]
            out[tip[v], tip[v]] = 0.0
            continue
        groups = [np.asarray(below[c], dtype=np.int64) for c in tree.children(v).tolist()]
        for g, h in itertools.combinations(groups, 2):
            block = tip_depth[g][:, None] + tip_depth[h][None, :] - 2 * depth[v]
            out[np.ix_(g, h)] = block
            out[np.ix_(h, g)] = block.T
        below[v] = [t for c in tree.children(v).tolist() for t in below[c]]
        for c in tree.children(v).tolist():
            below[c] = []
    return out


@dataclass(frozen=True)
class MantelResult:
    """``r``: the Mantel correlation; ``p``: its one-sided permutation p-value; ``permutations``:
    how many were drawn (``n!`` when enumerated); ``n``: the objects the test used."""

    r: float
    p: float
    permutations: int
    n: int


def mantel(a, b, *, permutations: int | str = 999, seed: int = 1) -> MantelResult:
    """The Mantel test of association between two distance matrices (Mantel 1967, Cancer
    Research 27:209-220), in its standardised form: ``r`` is the Pearson correlation of the
    ``m = n (n - 1) / 2`` entries above the diagonal,

        r = sum_(i<j) (a_ij - mean a)(b_ij - mean b)
            / sqrt(sum_(i<j) (a_ij - mean a)^2 * sum_(i<j) (b_ij - mean b)^2)

    and its null distribution comes from relabelling the objects of one matrix: rows and columns
    of ``b`` are permuted together (``b'_ij = b_(pi(i) pi(j))``), which keeps the structure of
    each matrix and breaks only their pairing. The one-sided p-value (large ``r`` = the two
    distances agree) counts the observed labelling among the permutations (Hope 1968, JRSS B
    30:582-598; Legendre & Legendre 2012, *Numerical Ecology*, 3rd ed., Elsevier, 10.5.1)::

        p = (#{permutations with r' >= r} + 1) / (permutations + 1)

    ``permutations="all"`` enumerates all ``n!`` relabellings (``n <= 9``) and gives the exact
    ``p = #{pi : r_pi >= r} / n!`` (the identity included). Ties are counted as ``>=`` within
    ``1e-12``. Permutations come from ``numpy.random.default_rng(seed)``, so a seed gives the
    same p every time; ``permutations=0`` gives ``r`` alone (``p`` is ``nan``).

    Missing values: an object without coordinates has a row of ``nan``. Before permuting,
    objects are dropped one at a time, each time the one with most ``nan`` entries off the
    diagonal in either matrix (the first such object on ties), until none is left; ``n`` in the
    result counts the objects kept. With fewer than 3 objects, or a matrix whose kept entries
    are all equal, ``r`` and ``p`` are ``nan``.

    By hand, three objects: ``a`` entries (1, 2, 3) and ``b`` entries (2, 4, 6) give ``r = 1``;
    of the 3! = 6 relabellings only the identity reaches it, so ``p = 1/6``.

    >>> a = [[0, 1, 2], [1, 0, 3], [2, 3, 0]]
    >>> res = mantel(a, [[0, 2, 4], [2, 0, 6], [4, 6, 0]], permutations="all")
    >>> round(res.r, 12), res.p, res.permutations
    (1.0, 0.16666666666666666, 6)
    """
    a = _square(a, "first")
    b = _square(b, "second")
    if a.shape != b.shape:
        raise AtlasError(Problem("mantel", None, f"the matrices differ in size: {a.shape[0]} "
                                 f"and {b.shape[0]} objects"))
    exact = permutations == "all"
    if not exact and (isinstance(permutations, bool) or not isinstance(permutations, int)
                      or permutations < 0):
        raise AtlasError(Problem("mantel", None, f"permutations must be a count >= 0 or 'all', "
                                 f"not {permutations!r}"))
    keep = _drop_missing(np.isnan(a) | np.isnan(b))
    a, b = a[np.ix_(keep, keep)], b[np.ix_(keep, keep)]
    n = len(keep)
    if exact and n > EXACT_MANTEL_MAX_N:
        raise AtlasError(Problem("mantel", None, f"exact enumeration of {n}! permutations is "
                                 "too many", f"use it for at most {EXACT_MANTEL_MAX_N} objects"))
    total = math.factorial(n) if exact else int(permutations)
    nan = MantelResult(math.nan, math.nan, total, n)
    if n < 3:
        return nan
    iu, ju = (v.astype(np.int32) for v in np.triu_indices(n, 1))
    xa = a[iu, ju] - a[iu, ju].mean()
    yb = b[iu, ju] - b[iu, ju].mean()
    na, nb = math.sqrt(float(xa @ xa)), math.sqrt(float(yb @ yb))
    if na == 0 or nb == 0:
        return nan
    xa = xa / na
    zb = (b - b[iu, ju].mean()) / nb  # permuting objects only reorders the entries of b
    r = float(xa @ zb[iu, ju])
    if total == 0:
        return MantelResult(r, math.nan, 0, n)
    upper = np.zeros(zb.shape)  # made once for every chunk of permutations
    upper[iu, ju] = xa
    zb = np.ascontiguousarray(zb)
    chunk = max(1, _CHUNK_VALUES // len(iu))
    hits = 0
    if exact:
        orders = itertools.permutations(range(n))
        while batch := list(itertools.islice(orders, chunk)):
            hits += _count_at_least(np.asarray(batch), upper, zb, r)
        return MantelResult(r, hits / total, total, n)
    rng = np.random.default_rng(seed)
    done = 0
    while done < total:
        k = min(chunk, total - done)
        perms = np.argsort(rng.random((k, n)), axis=1, kind="stable")
        hits += _count_at_least(perms, upper, zb, r)
        done += k
    return MantelResult(r, (hits + 1) / (total + 1), total, n)


def _count_at_least(perms: np.ndarray, upper: np.ndarray, zb: np.ndarray, r: float) -> int:
    """Relabellings in ``perms`` whose statistic reaches ``r`` (compiled:
    :func:`atlas.analysis.kernels.mantel_hits`; ``upper`` holds the standardised first
    matrix above its diagonal)."""
    from atlas.analysis.kernels import mantel_hits  # compiled on first use

    return int(mantel_hits(np.ascontiguousarray(perms, dtype=np.int64), upper, zb, float(r)))


def _square(m, which: str) -> np.ndarray:
    try:
        out = np.array(m, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise AtlasError(Problem("mantel", None,
                                 f"the {which} matrix is not numeric: {exc}")) from None
    if out.ndim != 2 or out.shape[0] != out.shape[1]:
        raise AtlasError(Problem("mantel", None,
                                 f"the {which} matrix is not square: shape {out.shape}"))
    same = np.isclose(out, out.T, rtol=1e-9, atol=1e-12) | (np.isnan(out) & np.isnan(out.T))
    if not same.all():
        i, j = np.argwhere(~same)[0]
        raise AtlasError(Problem("mantel", None, f"the {which} matrix is not symmetric: "
                                 f"entry ({i}, {j}) is {out[i, j]:g}, ({j}, {i}) is {out[j, i]:g}"))
    return out


def _drop_missing(missing: np.ndarray) -> np.ndarray:
    """Indices kept after dropping, one by one, the object with most missing entries."""
    missing = missing.copy()
    np.fill_diagonal(missing, False)
    keep = np.arange(missing.shape[0])
    while keep.size and missing.any():
        worst = int(np.argmax(missing.sum(axis=1)))
        keep = np.delete(keep, worst)
        missing = np.delete(np.delete(missing, worst, axis=0), worst, axis=1)
    return keep


def lambert_azimuthal_equal_area(lat, lon, lat0: float, lon0: float,
                                 radius: float = EARTH_RADIUS_KM) -> tuple[np.ndarray, np.ndarray]:
    """The Lambert azimuthal equal-area projection of a sphere, centred on ``(lat0, lon0)``.

    Snyder 1987, *Map Projections: A Working Manual*, USGS Professional Paper 1395, p. 185,
    equations (24-2), (22-4), (22-5)::

        k' = sqrt(2 / (1 + sin phi1 sin phi + cos phi1 cos phi cos(lambda - lambda0)))
        x  = R k' cos phi sin(lambda - lambda0)
        y  = R k' (cos phi1 sin phi - sin phi1 cos phi cos(lambda - lambda0))

    Areas on the map equal areas on the sphere. The point opposite the centre has no image
    (``nan``). By hand: the centre goes to (0, 0), and a point 90 degrees away along the equator
    (centre (0, 0)) to ``x = R sqrt(2)``:

    >>> x, y = lambert_azimuthal_equal_area(0, 90, 0, 0, radius=1)
    >>> round(float(x), 12), round(float(y), 12)
    (1.414213562373, 0.0)
    """
    phi = np.radians(np.asarray(lat, dtype=np.float64))
    dlam = np.radians(np.asarray(lon, dtype=np.float64) - lon0)
    phi1 = math.radians(lat0)
    cos_c = math.sin(phi1) * np.sin(phi) + math.cos(phi1) * np.cos(phi) * np.cos(dlam)
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.where(cos_c > -1 + 1e-15, np.sqrt(2 / np.maximum(1 + cos_c, 1e-300)), np.nan)
    x = radius * k * np.cos(phi) * np.sin(dlam)
    y = radius * k * (math.cos(phi1) * np.sin(phi) - math.sin(phi1) * np.cos(phi) * np.cos(dlam))
    return x, y


@dataclass(frozen=True)
class Range:
    """Where a set of places lies: spherical mean (degrees), mean distance to it (km), area of
    the convex hull (km^2), the number of places with coordinates, and the hull's vertices as
    ``(lat, lon)`` pairs in counter-clockwise order on the equal-area projection (one distinct
    place: no vertex, two: the two ends of a line, three or more: the polygon, not closed)."""

    centroid_lat: float
    centroid_lon: float
    spread_km: float
    area_km2: float
    n: int
    hull: tuple[tuple[float, float], ...] = ()


def clade_range(lats, lons) -> Range:
    """The range of a clade's places: centre, spread, area and outline.

    - centre: the spherical mean, the normalised mean of the unit vectors
      ``(cos phi cos lambda, cos phi sin lambda, sin phi)`` (Fisher, Lewis & Embleton 1987,
      *Statistical Analysis of Spherical Data*, Cambridge UP, 3.2.1); undefined (``nan``) when
      the vectors cancel, e.g. two antipodal points;
    - spread: the mean great-circle distance from the places to the centre;
    - area: the area of the convex hull of the places projected by the Lambert azimuthal
      equal-area projection centred on the centre (:func:`lambert_azimuthal_equal_area`), by
      the shoelace formula ``A = |sum (x_i y_(i+1) - x_(i+1) y_i)| / 2`` over the hull (Andrew's
      monotone chain, Andrew 1979, Information Processing Letters 9:216-219). The hull's edges
      are straight on the projection, so for a range across a continent it is a good
      approximation, not a spherical polygon. Fewer than 3 distinct places, or places on one
      line, give 0;
    - outline: the same hull's vertices (:func:`convex_hull`), given back as the ``(lat, lon)``
      of the places they are, so no coordinate is made up or moved. The convex hull of the
      occurrences is the "extent of occurrence" of a range (IUCN 2012, *IUCN Red List
      Categories and Criteria* 3.1, 2nd ed., criterion B1; Gaston & Fuller 2009, Journal of
      Applied Ecology 46:1-9, who discuss what the hull does and does not measure). A single
      distinct place gives no outline, two give a line.

    Places with ``nan`` coordinates are left out; ``n`` counts the others.

    By hand: (0, -1) and (0, 1) have their centre at (0, 0), each 1 degree
    (``pi R / 180 = 111.195`` km) away, and no area.

    >>> r = clade_range([0, 0], [-1, 1])
    >>> r.centroid_lat, r.centroid_lon, round(r.spread_km, 3), r.area_km2, r.n
    (0.0, 0.0, 111.195, 0.0, 2)
    >>> r.hull
    ((0.0, -1.0), (0.0, 1.0))
    """
    lat = np.asarray(lats, dtype=np.float64).ravel()
    lon = np.asarray(lons, dtype=np.float64).ravel()
    if lat.shape != lon.shape:
        raise AtlasError(Problem("gazetteer", None,
                                 f"{lat.size} latitudes but {lon.size} longitudes"))
    known = np.isfinite(lat) & np.isfinite(lon)
    lat, lon = lat[known], lon[known]
    n = int(lat.size)
    if n == 0:
        return Range(math.nan, math.nan, math.nan, 0.0, 0)
    phi, lam = np.radians(lat), np.radians(lon)
    v = np.stack([np.cos(phi) * np.cos(lam), np.cos(phi) * np.sin(lam), np.sin(phi)]).mean(axis=1)
    norm = float(np.linalg.norm(v))
    if norm < 1e-9:
        return Range(math.nan, math.nan, math.nan, math.nan, n)
    v = v / norm
    c_lat = math.degrees(math.asin(max(-1.0, min(1.0, float(v[2])))))
    c_lon = math.degrees(math.atan2(float(v[1]), float(v[0]))) if abs(c_lat) < 90 else 0.0
    c_lat, c_lon = _clean(c_lat), _clean(c_lon)
    spread = float(great_circle_km(lat, lon, c_lat, c_lon).mean())
    x, y = lambert_azimuthal_equal_area(lat, lon, c_lat, c_lon)
    order = convex_hull(x, y)
    if len(order) < 2:  # one distinct place: no outline
        order = []
    hull = tuple((float(lat[i]), float(lon[i])) for i in order)
    return Range(c_lat, c_lon, spread, _polygon_area(x[order], y[order]), n, hull)


def _clean(value: float) -> float:
    """Round off the last bits of a degree value (so a symmetric set gives exactly 0)."""
    value = round(value, 12)
    return 0.0 if value == 0 else value


def convex_hull(x, y) -> list[int]:
    """Indices of the points on the convex hull, counter-clockwise, starting from the lowest
    ``x`` (then lowest ``y``); collinear points on an edge are left out.

    Andrew's monotone chain (Andrew 1979, Information Processing Letters 9:216-219): sort the
    points by ``(x, y)``, build the lower chain left to right and the upper chain right to
    left, popping the last point while it does not make a left turn, i.e. while the cross
    product ``(p - o) x (q - o) = (p_x - o_x)(q_y - o_y) - (p_y - o_y)(q_x - o_x) <= 0``.
    ``O(n log n)``. Points equal after rounding to 1e-9 count once (the first index kept);
    one distinct point gives ``[i]``, all points on one line give its two ends.

    By hand, the unit square with its centre: the centre is inside, the corners are the hull.

    >>> convex_hull([0, 1, 1, 0, 0.5], [0, 0, 1, 1, 0.5])
    [0, 1, 2, 3]
    """
    xs = np.round(np.asarray(x, dtype=np.float64).ravel(), 9).tolist()
    ys = np.round(np.asarray(y, dtype=np.float64).ravel(), 9).tolist()
    first: dict[tuple[float, float], int] = {}
    for i, p in enumerate(zip(xs, ys, strict=True)):
        first.setdefault(p, i)
    points = sorted(first)
    if len(points) < 3:
        return [first[p] for p in points]

    def cross(o: tuple[float, float], p: tuple[float, float], q: tuple[float, float]) -> float:
        return (p[0] - o[0]) * (q[1] - o[1]) - (p[1] - o[1]) * (q[0] - o[0])

    def half(seq: list[tuple[float, float]]) -> list[tuple[float, float]]:
        chain: list[tuple[float, float]] = []
        for p in seq:
            while len(chain) >= 2 and cross(chain[-2], chain[-1], p) <= 0:
                chain.pop()
            chain.append(p)
        return chain[:-1]

    hull = half(points) + half(points[::-1])
    if len(hull) < 3:  # all on one line: its two ends
        hull = [points[0], points[-1]]
    return [first[p] for p in hull]


def _polygon_area(hx: np.ndarray, hy: np.ndarray) -> float:
    """The shoelace formula; fewer than 3 vertices have no area."""
    if len(hx) < 3:
        return 0.0
    return float(abs(np.dot(hx, np.roll(hy, -1)) - np.dot(np.roll(hx, -1), hy)) / 2)
