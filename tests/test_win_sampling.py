"""Uniform sampling in windows (the binomial null process).

Every statistical check uses a fixed seed and a threshold far in the tail
(p > 1e-4 for the library sampler), and the same check is run on a
deliberately biased sampler to show that it has the power to catch it.
"""
import math

import numpy as np
import pytest
import shapely
from scipy import stats

from nullatlas.lookup.patterns.windows import (
    Ball,
    Box,
    ConvexPolytope,
    Disk,
    PolygonWindow,
    Rectangle,
)

P_OK = 1e-4       # the library sampler must not be rejected at this level
P_BIASED = 1e-8   # a biased sampler must be rejected at this level

# A 10 x 10 square whose bottom edge carries 41 vertices (so the constrained
# Delaunay triangulation has many small triangles along it) and two holes.
_BOTTOM = [(float(x), 0.0) for x in np.linspace(0, 10, 41)]
HOLES = [[(1, 1), (3, 1), (3, 3), (1, 3)], [(6, 6), (9, 6), (9, 8), (6, 8)]]
HOLED = shapely.Polygon(_BOTTOM + [(10, 10), (0, 10)], HOLES)

GRID = 4                       # 4 x 4 cells of side 2.5
CELL = 10 / GRID
CELLS = [shapely.box(i * CELL, j * CELL, (i + 1) * CELL, (j + 1) * CELL)
         for j in range(GRID) for i in range(GRID)]


def _cell_index(p):
    i = np.minimum((p[:, 0] // CELL).astype(int), GRID - 1)
    j = np.minimum((p[:, 1] // CELL).astype(int), GRID - 1)
    return i + GRID * j


def _cell_pvalue(points, geom):
    expected = np.array([geom.intersection(c).area for c in CELLS]) / geom.area
    counts = np.bincount(_cell_index(points), minlength=len(CELLS))
    use = expected > 0
    assert counts[~use].sum() == 0
    return stats.chisquare(counts[use], expected[use] * len(points)).pvalue


def _triangles(geom):
    parts = shapely.get_parts(shapely.constrained_delaunay_triangles(geom))
    coords = shapely.get_coordinates(parts).reshape(len(parts), 4, 2)[:, :3]
    return coords, shapely.area(parts)


def _sample_triangles(coords, weights, n, rng):
    """Reference triangle sampler with arbitrary triangle weights."""
    cum = np.cumsum(weights) / np.sum(weights)
    k = np.minimum(np.searchsorted(cum, rng.random(n), side="right"), len(cum) - 1)
    u = rng.random((n, 2))
    flip = u.sum(axis=1) > 1
    u[flip] = 1 - u[flip]
    a = coords[k, 0]
    return a + u[:, :1] * (coords[k, 1] - a) + u[:, 1:] * (coords[k, 2] - a)


def _all_windows():
    corners = np.array([[x, y, z] for x in (0, 1) for y in (0, 2) for z in (0, 3)], float)
    tetra = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]], float)
    return {
        "rect": Rectangle(-1, 2, 3, 2.5),
        "disk": Disk(5, -5, 0.5),
        "box": Box(0, 0, 0, 1, 2, 3),
        "ball": Ball(1, 1, 1, 2),
        "polygon": PolygonWindow(shapely.Polygon([(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)])),
        "holed": PolygonWindow(HOLED),
        "multi": PolygonWindow(shapely.MultiPolygon([shapely.box(0, 0, 1, 1), shapely.box(3, 0, 5, 2)])),
        "cuboid-hull": ConvexPolytope(corners),
        "tetra-hull": ConvexPolytope(tetra),
    }


WINDOWS = _all_windows()


# --------------------------------------------------------------------------
# Shape, containment, reproducibility
# --------------------------------------------------------------------------

@pytest.mark.parametrize("name", sorted(WINDOWS))
@pytest.mark.parametrize("n", [1, 7, 2000])
def test_sample_shape_and_inside(name, n):
    w = WINDOWS[name]
    p = w.sample(n, np.random.default_rng(11))
    assert isinstance(p, np.ndarray)
    assert p.shape == (n, w.dim)
    assert p.dtype == np.float64
    assert np.isfinite(p).all()
    assert w.contains(p).all()


@pytest.mark.parametrize("name", sorted(WINDOWS))
def test_sample_zero_points(name):
    w = WINDOWS[name]
    assert w.sample(0, np.random.default_rng(0)).shape == (0, w.dim)


@pytest.mark.parametrize("name", sorted(WINDOWS))
def test_sample_reproducible(name):
    w = WINDOWS[name]
    a = w.sample(300, np.random.default_rng(123))
    b = w.sample(300, np.random.default_rng(123))
    c = w.sample(300, np.random.default_rng(124))
    np.testing.assert_array_equal(a, b)
    assert not np.array_equal(a, c)


@pytest.mark.parametrize("name", sorted(WINDOWS))
def test_sample_points_distinct(name):
    p = WINDOWS[name].sample(5000, np.random.default_rng(5))
    assert len(np.unique(p, axis=0)) == len(p)


def test_sample_fresh_window_object_reproducible():
    """The cached triangulation must not change the stream of points."""
    a = PolygonWindow(HOLED).sample(100, np.random.default_rng(9))
    w = PolygonWindow(HOLED)
    w.sample(10, np.random.default_rng(0))
    b = w.sample(100, np.random.default_rng(9))
    np.testing.assert_array_equal(a, b)


# --------------------------------------------------------------------------
# Polygons: holes and area weighting
# --------------------------------------------------------------------------

def test_no_sample_in_holes():
    w = PolygonWindow(HOLED)
    p = w.sample(20000, np.random.default_rng(1))
    for hole in HOLES:
        assert not shapely.contains_xy(shapely.Polygon(hole), p[:, 0], p[:, 1]).any()
    # hole 1 = (1,3)^2 strictly, hole 2 = (6,9) x (6,8) strictly
    in1 = (p[:, 0] > 1) & (p[:, 0] < 3) & (p[:, 1] > 1) & (p[:, 1] < 3)
    in2 = (p[:, 0] > 6) & (p[:, 0] < 9) & (p[:, 1] > 6) & (p[:, 1] < 8)
    assert not (in1 | in2).any()
    assert shapely.intersects_xy(HOLED, p[:, 0], p[:, 1]).all()


def test_holed_polygon_cell_counts_proportional_to_area():
    p = PolygonWindow(HOLED).sample(20000, np.random.default_rng(2024))
    assert _cell_pvalue(p, HOLED) > P_OK


@pytest.mark.parametrize("bias", ["triangle-count", "sqrt-area", "area^0.8"])
def test_cell_count_check_catches_biased_triangle_weights(bias):
    """The check above has power: weighting triangles by anything but area fails."""
    coords, areas = _triangles(HOLED)
    weights = {"triangle-count": np.ones_like(areas), "sqrt-area": np.sqrt(areas),
               "area^0.8": areas ** 0.8}[bias]
    rng = np.random.default_rng(2024)
    assert _cell_pvalue(_sample_triangles(coords, areas, 20000, rng), HOLED) > P_OK
    assert _cell_pvalue(_sample_triangles(coords, weights, 20000, rng), HOLED) < P_BIASED


def test_quadrant_counts_proportional_to_area():
    quads = [shapely.box(0, 0, 5, 5), shapely.box(5, 0, 10, 5),
             shapely.box(0, 5, 5, 10), shapely.box(5, 5, 10, 10)]
    expected = np.array([HOLED.intersection(q).area for q in quads]) / HOLED.area
    n = 20000
    p = PolygonWindow(HOLED).sample(n, np.random.default_rng(77))
    q = (p[:, 0] >= 5).astype(int) + 2 * (p[:, 1] >= 5).astype(int)
    counts = np.bincount(q, minlength=4)
    assert stats.chisquare(counts, expected * n).pvalue > P_OK


def test_multipolygon_parts_weighted_by_area():
    w = PolygonWindow(shapely.MultiPolygon([shapely.box(0, 0, 1, 1), shapely.box(3, 0, 5, 2)]))
    n = 10000
    p = w.sample(n, np.random.default_rng(3))
    small = int((p[:, 0] <= 1).sum())
    assert small + int((p[:, 0] >= 3).sum()) == n
    assert stats.binomtest(small, n, 1 / 5).pvalue > P_OK


def test_uniform_within_a_triangle():
    """Barycentric coordinate of a uniform point in a triangle is Beta(1, 2)."""
    a, b, c = np.array([0.0, 0.0]), np.array([4.0, 1.0]), np.array([1.0, 3.0])
    w = PolygonWindow(shapely.Polygon([a, b, c]))
    p = w.sample(20000, np.random.default_rng(8))
    lam = np.linalg.solve(np.column_stack([b - a, c - a]), (p - a).T).T
    for col in (lam[:, 0], lam[:, 1], 1 - lam.sum(axis=1)):
        assert stats.kstest(col, stats.beta(1, 2).cdf).pvalue > P_OK
    # Power: normalised uniform weights (a common mistake) are not uniform.
    rng = np.random.default_rng(8)
    u = rng.random((20000, 3))
    u /= u.sum(axis=1, keepdims=True)
    assert stats.kstest(u[:, 0], stats.beta(1, 2).cdf).pvalue < P_BIASED


def test_l_shape_halves():
    # L-shape of area 3: the top arm [0,1]x[1,2] holds 1/3 of the area.
    w = WINDOWS["polygon"]
    n = 12000
    p = w.sample(n, np.random.default_rng(4))
    assert stats.binomtest(int((p[:, 1] > 1).sum()), n, 1 / 3).pvalue > P_OK


# --------------------------------------------------------------------------
# Rectangles, boxes, disks, balls, hulls
# --------------------------------------------------------------------------

@pytest.mark.parametrize("w", [Rectangle(-1, 2, 3, 2.5), Box(0, 0, 0, 1, 2, 3)])
def test_rectangle_and_box_marginals_uniform(w):
    p = w.sample(10000, np.random.default_rng(6))
    for j in range(w.dim):
        u = (p[:, j] - w.lo[j]) / (w.hi[j] - w.lo[j])
        assert stats.kstest(u, "uniform").pvalue > P_OK


@pytest.mark.parametrize("w", [Disk(5, -5, 0.5), Disk(0, 0, 100), Ball(1, 1, 1, 2), Ball(0, 0, 0, 1e-3)])
def test_radial_distribution(w):
    n = 20000
    p = w.sample(n, np.random.default_rng(12))
    s = np.linalg.norm(p - w.centre, axis=1) / w.r
    assert s.max() <= 1 + 1e-12
    assert stats.kstest(s ** w.dim, "uniform").pvalue > P_OK
    # Power: radius proportional to U (not U^(1/d)) is caught.
    naive = np.random.default_rng(12).random(n)
    assert stats.kstest(naive ** w.dim, "uniform").pvalue < P_BIASED


def test_disk_angle_uniform():
    w = Disk(2, 3, 1.5)
    p = w.sample(20000, np.random.default_rng(13))
    ang = np.arctan2(p[:, 1] - 3, p[:, 0] - 2)
    assert stats.kstest((ang + math.pi) / (2 * math.pi), "uniform").pvalue > P_OK


def test_ball_direction_uniform():
    # Archimedes: each coordinate of a uniform direction on S^2 is U(-1, 1).
    w = Ball(0, 0, 0, 1)
    p = w.sample(20000, np.random.default_rng(14))
    d = p / np.linalg.norm(p, axis=1, keepdims=True)
    for j in range(3):
        assert stats.kstest((d[:, j] + 1) / 2, "uniform").pvalue > P_OK


def test_tetrahedron_hull_uniform():
    # For a uniform point in the corner simplex, P(x + y + z <= t) = t^3.
    w = WINDOWS["tetra-hull"]
    p = w.sample(20000, np.random.default_rng(15))
    s = p.sum(axis=1)
    assert stats.kstest(s ** 3, "uniform").pvalue > P_OK
    assert stats.kstest(p[:, 0], stats.beta(1, 3).cdf).pvalue > P_OK


def test_cuboid_hull_marginals_uniform():
    w = WINDOWS["cuboid-hull"]
    p = w.sample(10000, np.random.default_rng(16))
    for j, side in enumerate((1, 2, 3)):
        assert stats.kstest(p[:, j] / side, "uniform").pvalue > P_OK


def test_polygon_square_matches_rectangle_law():
    """A square given as polygon samples the same law as the rectangle."""
    n = 10000
    a = PolygonWindow(shapely.box(0, 0, 1, 1)).sample(n, np.random.default_rng(17))
    b = Rectangle(0, 0, 1, 1).sample(n, np.random.default_rng(18))
    for j in range(2):
        assert stats.ks_2samp(a[:, j], b[:, j]).pvalue > P_OK
