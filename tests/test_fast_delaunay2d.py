"""Tests of nullatlas.lookup.persistence.delaunay2d (exact numba Delaunay triangulation).

The checks here are independent of the module's own predicates: exact signs are
computed with fractions.Fraction (every float is a dyadic rational), behind a
deliberately loose floating-point filter that only sends the clear-cut cases
through plain numpy.
"""
from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.spatial import Delaunay

from nullatlas.lookup.persistence.delaunay2d import (
    delaunay_triangles,
    delaunay_triangles_qhull,
    incircle,
    orient2d,
)

# --------------------------------------------------------------------------------------
# exact reference arithmetic
# --------------------------------------------------------------------------------------
_LOOSE = 1e-9     # filter bound, relative to the permanent: ~10^6 times Shewchuk's


def _sign(x) -> int:
    return int(x > 0) - int(x < 0)


def frac_orient(a, b, c) -> int:
    ax, ay, bx, by, cx, cy = map(Fraction, (a[0], a[1], b[0], b[1], c[0], c[1]))
    return _sign((ax - cx) * (by - cy) - (ay - cy) * (bx - cx))


def frac_incircle(a, b, c, d) -> int:
    ax, ay, bx, by, cx, cy, dx, dy = map(
        Fraction, (a[0], a[1], b[0], b[1], c[0], c[1], d[0], d[1]))
    adx, ady, bdx, bdy, cdx, cdy = ax - dx, ay - dy, bx - dx, by - dy, cx - dx, cy - dy
    det = ((adx * adx + ady * ady) * (bdx * cdy - cdx * bdy)
           + (bdx * bdx + bdy * bdy) * (cdx * ady - adx * cdy)
           + (cdx * cdx + cdy * cdy) * (adx * bdy - bdx * ady))
    return _sign(det)


@np.errstate(all="ignore")      # overflowing filters just fall through to Fraction
def orient_signs(A, B, C) -> np.ndarray:
    """Exact signs of orient2d for rows of (k,2) arrays A, B, C."""
    acx, acy = A[:, 0] - C[:, 0], A[:, 1] - C[:, 1]
    bcx, bcy = B[:, 0] - C[:, 0], B[:, 1] - C[:, 1]
    left, right = acx * bcy, acy * bcx
    det = left - right
    perm = np.abs(left) + np.abs(right)
    out = np.sign(det).astype(np.int64)
    unsure = ~(np.abs(det) > _LOOSE * perm)
    for i in np.flatnonzero(unsure):
        out[i] = frac_orient(A[i], B[i], C[i])
    return out


@np.errstate(all="ignore")
def incircle_signs(A, B, C, D) -> np.ndarray:
    """Exact signs of incircle for rows of (k,2) arrays A, B, C, D."""
    adx, ady = A[:, 0] - D[:, 0], A[:, 1] - D[:, 1]
    bdx, bdy = B[:, 0] - D[:, 0], B[:, 1] - D[:, 1]
    cdx, cdy = C[:, 0] - D[:, 0], C[:, 1] - D[:, 1]
    al, bl, cl = adx * adx + ady * ady, bdx * bdx + bdy * bdy, cdx * cdx + cdy * cdy
    t1, t2 = bdx * cdy, cdx * bdy
    t3, t4 = cdx * ady, adx * cdy
    t5, t6 = adx * bdy, bdx * ady
    det = al * (t1 - t2) + bl * (t3 - t4) + cl * (t5 - t6)
    perm = (np.abs(t1) + np.abs(t2)) * al + (np.abs(t3) + np.abs(t4)) * bl \
        + (np.abs(t5) + np.abs(t6)) * cl
    out = np.sign(det).astype(np.int64)
    unsure = ~(np.abs(det) > _LOOSE * perm)
    for i in np.flatnonzero(unsure):
        out[i] = frac_incircle(A[i], B[i], C[i], D[i])
    return out


def first_occurrences(points) -> np.ndarray:
    seen = {}
    for i, p in enumerate(map(tuple, points)):
        seen.setdefault(p, i)
    return np.array(sorted(seen.values()), dtype=np.int64)


def exact_hull(points) -> list[int]:
    """Strictly convex hull (counter-clockwise, collinear points dropped) by
    Andrew's monotone chain with exact orientation."""
    idx = sorted(range(len(points)), key=lambda i: (points[i][0], points[i][1]))
    P = points

    def build(seq):
        h = []
        for i in seq:
            while len(h) >= 2 and frac_orient(P[h[-2]], P[h[-1]], P[i]) <= 0:
                h.pop()
            h.append(i)
        return h

    lower, upper = build(idx), build(idx[::-1])
    return lower[:-1] + upper[:-1]


def frac_area2(a, b, c) -> Fraction:
    ax, ay, bx, by, cx, cy = map(Fraction, (a[0], a[1], b[0], b[1], c[0], c[1]))
    return (bx - ax) * (cy - ay) - (by - ay) * (cx - ax)


# --------------------------------------------------------------------------------------
# the validity checker
# --------------------------------------------------------------------------------------
def check_delaunay(points, tris, brute_force=True):
    """Assert that tris is a Delaunay triangulation of the distinct points."""
    points = np.asarray(points, dtype=np.float64)
    tris = np.asarray(tris)
    assert tris.dtype == np.int64 and tris.ndim == 2 and tris.shape[1] == 3
    keep = first_occurrences(points)
    n = len(keep)
    # vertices: exactly the first occurrences of the distinct points
    assert np.array_equal(np.unique(tris), keep)
    # strictly counter-clockwise
    A, B, C = points[tris[:, 0]], points[tris[:, 1]], points[tris[:, 2]]
    assert (orient_signs(A, B, C) > 0).all()
    # manifold structure: each directed edge once; boundary = unpaired edges
    edges = np.concatenate([tris[:, [0, 1]], tris[:, [1, 2]], tris[:, [2, 0]]])
    as_set = set(map(tuple, edges))
    assert len(as_set) == len(edges), "a directed edge occurs twice"
    boundary = np.array([e for e in as_set if (e[1], e[0]) not in as_set], dtype=np.int64)
    # boundary edges lie on the hull boundary: no point strictly right of them
    P = points[keep]
    for u, v in boundary:
        k = len(P)
        s = orient_signs(np.repeat(points[u][None], k, 0), np.repeat(points[v][None], k, 0), P)
        assert (s >= 0).all(), "boundary edge not on the convex hull"
    # area = hull area, exactly
    hull = [int(keep[i]) for i in exact_hull([tuple(p) for p in P])]
    hull_area2 = sum((frac_area2(points[hull[0]], points[hull[i]], points[hull[i + 1]])
                      for i in range(1, len(hull) - 1)), Fraction(0))
    tri_area2 = sum((frac_area2(points[a], points[b], points[c]) for a, b, c in tris),
                    Fraction(0))
    assert tri_area2 == hull_area2
    # Euler: m = 2n - 2 - h, h = number of points on the hull boundary (collinear
    # points inside hull edges included); the boundary edges form one cycle of h edges
    h = len(boundary)
    assert len(np.unique(boundary[:, 0])) == h
    assert len(tris) == 2 * n - 2 - h
    # the hull boundary points counted independently from the exact hull
    on_hull = np.zeros(len(P), dtype=bool)
    for i in range(len(hull)):
        a, b = points[hull[i]], points[hull[(i + 1) % len(hull)]]
        k = len(P)
        s = orient_signs(np.repeat(a[None], k, 0), np.repeat(b[None], k, 0), P)
        lo, hi = np.minimum(a, b), np.maximum(a, b)
        inbox = ((P >= lo) & (P <= hi)).all(axis=1)
        on_hull |= (s == 0) & inbox
    assert on_hull.sum() == h
    # empty circumcircles
    if brute_force:
        for t in range(len(tris)):
            D = P
            k = len(D)
            s = incircle_signs(np.repeat(A[t][None], k, 0), np.repeat(B[t][None], k, 0),
                               np.repeat(C[t][None], k, 0), D)
            assert (s <= 0).all(), f"point inside circumcircle of triangle {t}"
    else:
        check_locally_delaunay(points, tris)


def check_locally_delaunay(points, tris):
    """Every interior edge is locally Delaunay (which, for a triangulation, implies
    that all circumcircles are empty: Delaunay's lemma)."""
    opp = {}
    for t, (a, b, c) in enumerate(tris):
        opp[(a, b)] = c
        opp[(b, c)] = a
        opp[(c, a)] = b
    rows = [(a, b, c, opp[(b, a)]) for (a, b), c in opp.items() if (b, a) in opp]
    q = np.array(rows, dtype=np.int64)
    s = incircle_signs(points[q[:, 0]], points[q[:, 1]], points[q[:, 2]], points[q[:, 3]])
    assert (s <= 0).all()


def tri_set(tris):
    return set(map(tuple, np.sort(np.asarray(tris), axis=1)))


# --------------------------------------------------------------------------------------
# predicates
# --------------------------------------------------------------------------------------
def test_orient2d_classic_near_collinear_grid():
    # Kettner et al.'s "classroom example": p = (0.5 + i u, 0.5 + j u) against the
    # line through (12, 12) and (24, 24), u = ulp(0.5) = 2^-53.
    u = 2.0 ** -53
    q, r = (12.0, 12.0), (24.0, 24.0)
    naive_wrong = 0
    for i in range(48):
        for j in range(48):
            p = (0.5 + i * u, 0.5 + j * u)
            exact = frac_orient(p, q, r)
            assert _sign(orient2d(p, q, r)) == exact
            assert _sign(orient2d(q, r, p)) == exact
            assert _sign(orient2d(r, p, q)) == exact
            naive = (p[0] - r[0]) * (q[1] - r[1]) - (p[1] - r[1]) * (q[0] - r[0])
            naive_wrong += _sign(naive) != exact
    assert naive_wrong > 0          # the test really exercises the exact path


def test_orient2d_near_line_large_offsets():
    rng = np.random.default_rng(5)
    naive_wrong = 0
    for _ in range(1500):
        base = rng.uniform(-1e6, 1e6, 2)
        d = rng.uniform(-1, 1, 2) * 10.0 ** rng.integers(-2, 6)
        t = rng.uniform(-3, 3)
        a, b = base, base + d
        c = base + t * d
        c = c + rng.integers(-3, 4, 2) * np.spacing(np.abs(c))
        exact = frac_orient(a, b, c)
        assert _sign(orient2d(a, b, c)) == exact
        naive = (a[0] - c[0]) * (b[1] - c[1]) - (a[1] - c[1]) * (b[0] - c[0])
        naive_wrong += _sign(naive) != exact
    assert naive_wrong > 0


def test_incircle_near_cocircular():
    rng = np.random.default_rng(11)
    naive_wrong = 0
    checked_zero = 0
    for _ in range(300):
        off = rng.uniform(-1e6, 1e6, 2) * rng.integers(0, 2)
        r = rng.uniform(0.1, 10.0)
        ang = np.sort(rng.uniform(0, 2 * np.pi, 4))
        pts = off + r * np.c_[np.cos(ang), np.sin(ang)]
        d = pts[3] + rng.integers(-2, 3, 2) * np.spacing(np.abs(pts[3]))
        a, b, c = pts[0], pts[1], pts[2]
        exact = frac_incircle(a, b, c, d)
        assert _sign(incircle(a, b, c, d)) == exact
        adx, ady = a - d
        bdx, bdy = b - d
        cdx, cdy = c - d
        naive = ((adx * adx + ady * ady) * (bdx * cdy - cdx * bdy)
                 + (bdx * bdx + bdy * bdy) * (cdx * ady - adx * cdy)
                 + (cdx * cdx + cdy * cdy) * (adx * bdy - bdx * ady))
        naive_wrong += _sign(naive) != exact
    # exactly co-circular inputs (integer and dyadic points on x^2 + y^2 = 5^2 13^2)
    R2 = 65 ** 2
    circ = [(x, y) for x in range(-65, 66) for y in range(-65, 66) if x * x + y * y == R2]
    for k in range(0, len(circ) - 3, 3):
        for s in (1.0, 0.125, 1e-3):
            a, b, c, d = (np.array(circ[k + i], float) * s + 1e6 for i in range(4))
            exact = frac_incircle(a, b, c, d)
            assert _sign(incircle(a, b, c, d)) == exact
            checked_zero += exact == 0
    assert naive_wrong > 0 and checked_zero > 0


_tiny = st.integers(-4, 4)


@settings(max_examples=300, deadline=None)
@given(st.lists(st.tuples(st.integers(-3, 3), st.integers(-3, 3), _tiny, _tiny),
                min_size=4, max_size=4),
       st.sampled_from([1.0, 0.1, 1e-7, 3.0e5]), st.sampled_from([0.0, 1e6, -7.25]))
def test_predicates_match_fractions(raw, scale, offset):
    # small-integer configurations (many exactly degenerate) nudged by a few ulps
    # (at 0 by 2^-40 scale instead: ulp(0) is subnormal, outside the exact range,
    # where products of differences underflow)
    def nudge(v, e):
        return v + e * (np.spacing(v) if v != 0.0 else scale * 2.0 ** -40)

    pts = [(nudge(x * scale + offset, ex), nudge(y * scale + offset, ey))
           for x, y, ex, ey in raw]
    a, b, c, d = pts
    assert _sign(orient2d(a, b, c)) == frac_orient(a, b, c)
    assert _sign(incircle(a, b, c, d)) == frac_incircle(a, b, c, d)


# --------------------------------------------------------------------------------------
# agreement with scipy (general position)
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("n", [3, 4, 10, 100, 257, 1000, 5000])
@pytest.mark.parametrize("seed", [0, 1])
def test_matches_scipy_random(n, seed):
    pts = np.random.default_rng(seed * 1000 + n).random((n, 2))
    ours = delaunay_triangles(pts)
    assert tri_set(ours) == tri_set(Delaunay(pts).simplices)
    A, B, C = pts[ours[:, 0]], pts[ours[:, 1]], pts[ours[:, 2]]
    assert (orient_signs(A, B, C) > 0).all()


def test_matches_scipy_100k_gaussian():
    pts = np.random.default_rng(3).normal(size=(100_000, 2)) * [3.0, 0.5]
    ours = delaunay_triangles(pts)
    assert tri_set(ours) == tri_set(Delaunay(pts).simplices)


def test_random_small_full_check():
    for seed in range(5):
        pts = np.random.default_rng(seed).random((60, 2))
        check_delaunay(pts, delaunay_triangles(pts))


# --------------------------------------------------------------------------------------
# degenerate inputs
# --------------------------------------------------------------------------------------
def _grid(k, step=1.0, offset=0.0):
    i, j = np.meshgrid(np.arange(k), np.arange(k), indexing="ij")
    return np.c_[i.ravel() * step + offset, j.ravel() * step + offset]


def _hexagonal(k, offset=0.0):
    i, j = np.meshgrid(np.arange(k), np.arange(k), indexing="ij")
    x = i + 0.5 * (j % 2)
    y = j * (math.sqrt(3) / 2)
    return np.c_[x.ravel(), y.ravel()] + offset


def _pythagorean_circle(R=65, centre=(0.0, 0.0), scale=1.0):
    pts = [(x, y) for x in range(-R, R + 1) for y in range(-R, R + 1) if x * x + y * y == R * R]
    return np.array(pts, dtype=float) * scale + np.asarray(centre)


DEGENERATE = {
    "integer_grid": lambda: _grid(15),
    "grid_0.1": lambda: _grid(18, 0.1),
    "grid_0.1_offset_1e6": lambda: _grid(14, 0.1, 1e6),
    "integer_grid_offset_1e6": lambda: _grid(14, 1.0, 1e6 + 0.5),
    "hexagonal": lambda: _hexagonal(14),
    "hexagonal_offset_1e6": lambda: _hexagonal(12, 1e6),
    "circle_exact": lambda: _pythagorean_circle(),
    "circle_exact_with_centre": lambda: np.r_[_pythagorean_circle(325, (3, 4), 0.01), [[3, 4]]],
    "circle_cos_sin": lambda: np.c_[np.cos(np.arange(64) * np.pi / 32),
                                    np.sin(np.arange(64) * np.pi / 32)],
    "collinear_plus_two": lambda: np.r_[np.c_[np.linspace(0, 1, 200), np.linspace(0, 1, 200) * 0.3],
                                        [[0.5, 0.6], [0.2, -0.4]]],
    "collinear_plus_one_far": lambda: np.r_[np.c_[np.arange(150.0), np.zeros(150)], [[75.0, 1e-9]]],
    "collinear_diagonal_offset": lambda: np.r_[
        np.c_[1e6 + np.arange(120) * 0.1, 1e6 + np.arange(120) * 0.1],
        [[1e6 + 3.0, 1e6 + 2.9], [1e6 + 5.0, 1e6 + 5.2]]],
    "two_lines": lambda: np.r_[np.c_[np.arange(40.0), np.zeros(40)],
                               np.c_[np.arange(40.0) * 0.5, np.ones(40) * 3]],
    "random_offset_1e6": lambda: 1e6 + np.random.default_rng(8).random((400, 2)),
    "random_on_grid_with_dups": lambda: np.random.default_rng(9).integers(
        0, 8, (300, 2)).astype(float),
    "clustered_tiny_perturbations": lambda: _grid(10) + np.random.default_rng(2).integers(
        -1, 2, (100, 2)) * 1e-15,
    "square_corners_and_centre": lambda: np.array([[0, 0], [1, 0], [1, 1], [0, 1], [0.5, 0.5]]),
    "triangle_only": lambda: np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]]),
}


@pytest.mark.parametrize("name", sorted(DEGENERATE))
def test_degenerate_inputs_valid(name):
    pts = DEGENERATE[name]()
    tris = delaunay_triangles(pts)
    check_delaunay(pts, tris)


@pytest.mark.parametrize("name", ["integer_grid", "hexagonal", "circle_exact"])
def test_degenerate_inputs_shuffled(name):
    pts = DEGENERATE[name]()
    rng = np.random.default_rng(4)
    for _ in range(3):
        q = pts[rng.permutation(len(pts))]
        check_delaunay(q, delaunay_triangles(q))


def test_large_grid_locally_delaunay():
    pts = _grid(80, 0.1, 12345.0)                    # 6 400 co-circular-rich points
    tris = delaunay_triangles(pts)
    n, h = len(pts), 4 * 79
    assert len(tris) == 2 * n - 2 - h
    A, B, C = pts[tris[:, 0]], pts[tris[:, 1]], pts[tris[:, 2]]
    assert (orient_signs(A, B, C) > 0).all()
    check_locally_delaunay(pts, tris)
    area2 = np.abs((B[:, 0] - A[:, 0]) * (C[:, 1] - A[:, 1])
                   - (B[:, 1] - A[:, 1]) * (C[:, 0] - A[:, 0]))
    assert math.isclose(area2.sum() / 2, (7.9) ** 2, rel_tol=1e-9)


def test_duplicates_first_occurrence_kept():
    rng = np.random.default_rng(12)
    base = rng.random((500, 2))
    dup_idx = rng.integers(0, 500, 300)
    pts = np.r_[base, base[dup_idx], base[:50]]
    pts = pts[np.r_[np.arange(500), rng.permutation(np.arange(500, len(pts)))]]
    tris = delaunay_triangles(pts)
    used = np.unique(tris)
    assert np.array_equal(used, np.arange(500))       # only the first copies
    assert tri_set(tris) == tri_set(Delaunay(base).simplices)
    # also when later copies come first in the insertion order: reverse the array
    rev = pts[::-1].copy()
    tris = delaunay_triangles(rev)
    check_delaunay(rev, tris)


def test_many_identical_and_three_distinct():
    pts = np.r_[np.zeros((50, 2)), [[1.0, 0.0]] * 20, [[0.0, 1.0]] * 5]
    tris = delaunay_triangles(pts)
    assert tris.shape == (1, 3)
    assert set(tris[0]) == {0, 50, 70}


# --------------------------------------------------------------------------------------
# hypothesis: arbitrary small configurations
# --------------------------------------------------------------------------------------
def _expect_valid_or_collinear(pts):
    keep = first_occurrences(pts)
    P = pts[keep]
    collinear = len(P) < 3 or all(
        frac_orient(P[0], P[1], P[i]) == 0 for i in range(2, len(P)))
    if len(pts) < 3 or collinear:
        with pytest.raises(ValueError):
            delaunay_triangles(pts)
    else:
        check_delaunay(pts, delaunay_triangles(pts))


@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(st.integers(0, 6), st.integers(0, 6)), min_size=3, max_size=45),
       st.sampled_from([1.0, 0.1, 1e-5]), st.sampled_from([0.0, 1e6]))
def test_hypothesis_integer_lattice(raw, scale, offset):
    pts = np.array(raw, dtype=float) * scale + offset
    _expect_valid_or_collinear(pts)


# exactness needs products of coordinate differences clear of underflow, so
# magnitudes below 1e-30 (other than 0) are left out here
_coord = st.floats(-1e3, 1e3, allow_nan=False, allow_infinity=False, width=64).filter(
    lambda x: x == 0.0 or abs(x) >= 1e-30)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(_coord, _coord), min_size=3, max_size=30))
def test_hypothesis_floats(raw):
    _expect_valid_or_collinear(np.array(raw, dtype=float))


# --------------------------------------------------------------------------------------
# errors and the qhull fallback
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("bad", [
    np.zeros((0, 2)), np.zeros((2, 2)), np.ones((10, 2)),
    np.c_[np.arange(10.0), 2 * np.arange(10.0) + 1],
    np.c_[np.arange(10.0), np.zeros(10)] + 1e6,
])
def test_raises_value_error(bad):
    with pytest.raises(ValueError):
        delaunay_triangles(bad)


@pytest.mark.parametrize("scale", [1e-200, 1e-40, 1e120, 1e300])
def test_extreme_coordinate_scales(scale):
    # integer lattice + random points scaled by huge / tiny factors: the exact
    # power-of-two rescaling keeps incircle's degree-4 products finite
    pts = np.r_[_grid(5), np.random.default_rng(1).random((15, 2)) * 4] * scale
    check_delaunay(pts, delaunay_triangles(pts))


def test_parabola_and_circle_no_quadratic_blowup():
    # inputs on which a plain space-filling-curve order is quadratic
    for n, curve in ((8_000, lambda x: np.c_[x, x * x]),
                     (2_000, lambda x: np.c_[np.cos(np.pi * x), np.sin(np.pi * x)])):
        pts = curve(np.linspace(-1.0, 1.0, n, endpoint=False))
        tris = delaunay_triangles(pts)
        A, B, C = pts[tris[:, 0]], pts[tris[:, 1]], pts[tris[:, 2]]
        assert (orient_signs(A, B, C) > 0).all()
        assert len(tris) == n - 2                    # all points on the hull
        check_locally_delaunay(pts, tris)


def test_underflow_regime_fails_cleanly():
    # outside the exact range (products of coordinate differences underflow) the
    # result is not guaranteed, but the call must end with a result or a clean error
    rng = np.random.default_rng(0)
    outcomes = set()
    for _ in range(300):
        n = int(rng.integers(3, 40))
        pts = rng.integers(-3, 4, (n, 2)) * np.power(
            10.0, rng.choice([-320, -310, -300, -170, -10, 0], (n, 2)))
        try:
            tris = delaunay_triangles(pts)
            assert tris.ndim == 2 and tris.shape[1] == 3
            assert tris.min(initial=0) >= 0 and tris.max(initial=0) < n
            outcomes.add("ok")
        except ValueError:
            outcomes.add("collinear")
        except FloatingPointError:
            outcomes.add("inconsistent")
    assert "ok" in outcomes


def test_rejects_bad_shapes_and_nonfinite():
    with pytest.raises(ValueError):
        delaunay_triangles(np.zeros((5, 3)))
    with pytest.raises(ValueError):
        delaunay_triangles(np.array([[0, 0], [1, 0], [0, np.nan]]))


def test_qhull_fallback():
    pts = np.random.default_rng(21).random((2000, 2)) + 1e6
    q = delaunay_triangles_qhull(pts)
    assert q.dtype == np.int64
    A, B, C = pts[q[:, 0]], pts[q[:, 1]], pts[q[:, 2]]
    assert (orient_signs(A, B, C) > 0).all()
    assert tri_set(q) == tri_set(delaunay_triangles(pts))
    dup = np.r_[pts[:10], pts[:5]]
    assert np.unique(delaunay_triangles_qhull(dup)).max() < 10
    with pytest.raises(ValueError):
        delaunay_triangles_qhull(np.c_[np.arange(5.0), np.arange(5.0)])
