"""Exact specialised alpha persistence against gudhi's exact alpha complex.

Reference: ``gudhi.AlphaComplex(points=P, precision='exact')`` (CGAL exact
Delaunay triangulation, exactly rounded squared-radius filtration values), the
alpha (Čech-nerve-equivalent) filtration of Edelsbrunner & Mücke, "Three-
dimensional alpha shapes", ACM Trans. Graphics 13(1), 1994: a simplex of the
Delaunay complex enters at its squared circumradius, or, when it is *attached*
(a coface vertex lies strictly inside its smallest circumsphere), at the
smallest value of its cofaces.

The reference diagram of dimension q is ``st.persistence_intervals_in_dimension(q)``
after ``st.compute_persistence(min_persistence=0)``, taken to radius units with
``sqrt``; rows with death <= birth are dropped on both sides and rows are sorted
lexicographically.  In 2D the diagrams of ``nullatlas.lookup.persistence.alpha2d`` must have
the same number of rows and be bit-identical (both sides take ``sqrt`` of the
same exactly rounded doubles); in 3D H0/H2 must match in count and to 1e-12
relative, the Euler and Betti-1 curves must equal those derived from gudhi's
diagrams, and the total H1 persistence must equal gudhi's to 1e-12 relative.

The utility kernels are checked against plain numpy definitions (stable
argsort, distinct rows) and, for the triangulator, against exact rational
arithmetic (``fractions.Fraction``).
"""
from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest

gudhi = pytest.importorskip("gudhi")
from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

from nullatlas.lookup.persistence.alpha2d import alpha_filtration_2d, alpha_pairs_2d, scipy_triangles_2d  # noqa: E402
from nullatlas.lookup.persistence.alpha3d import betti_euler_3d  # noqa: E402
from nullatlas.lookup.persistence.delaunay2d import delaunay_mesh  # noqa: E402
from nullatlas.lookup.persistence.pairing import radix_argsort  # noqa: E402
from nullatlas.lookup.persistence.pointsets import distinct_morton  # noqa: E402

RTOL = 1e-12
HYP = dict(deadline=None, derandomize=True, database=None,
           suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


# --------------------------------------------------------------------------------------
# reference helpers (numpy + gudhi only; nothing from the code under test)
# --------------------------------------------------------------------------------------


def lexsorted(p) -> np.ndarray:
    p = np.asarray(p, dtype=float).reshape(-1, 2)
    return p[np.lexsort((p[:, 1], p[:, 0]))]


def positive(p) -> np.ndarray:
    """Drop rows with death <= birth, sort lexicographically."""
    p = np.asarray(p, dtype=float).reshape(-1, 2)
    return lexsorted(p[p[:, 1] > p[:, 0]])


def gudhi_tree(P):
    stree = gudhi.AlphaComplex(points=np.asarray(P, dtype=float),
                               precision="exact").create_simplex_tree()
    stree.compute_persistence(min_persistence=0)
    return stree


def gudhi_diagrams(P, dims, stree=None):
    """sqrt of gudhi-exact intervals per dimension, zero-length dropped, sorted."""
    stree = gudhi_tree(P) if stree is None else stree
    out = []
    for q in dims:
        iv = np.asarray(stree.persistence_intervals_in_dimension(q), dtype=float)
        out.append(positive(np.sqrt(iv.reshape(-1, 2))))
    return out


def n_distinct(P) -> int:
    return len(np.unique(np.asarray(P, dtype=float).reshape(len(P), -1), axis=0))


def assert_same_diagram(ours, ref, exact=True, what=""):
    ours = positive(ours)
    ref = positive(ref)
    assert ours.shape == ref.shape, f"{what}: {len(ours)} pairs vs gudhi {len(ref)}"
    if len(ref) == 0:
        return
    # infinite entries must coincide; finite ones to 1e-12 relative
    assert np.array_equal(np.isinf(ours), np.isinf(ref)), what
    fin = np.isfinite(ref)
    assert np.allclose(ours[fin], ref[fin], rtol=RTOL, atol=0), \
        f"{what}: max rel err {np.max(np.abs(ours[fin] - ref[fin]) / np.maximum(np.abs(ref[fin]), 1e-300))}"
    if exact:
        assert np.array_equal(ours[fin], ref[fin]), f"{what}: not bit-identical"


def check_2d(P, exact=True, extra_paths=True):
    """fast, general (and general with scipy's triangulation) against gudhi exact."""
    P = np.asarray(P, dtype=float)
    ref = gudhi_diagrams(P, (0, 1))
    results = {"fast": alpha_pairs_2d(P, path="fast"),
               "auto": alpha_pairs_2d(P),
               "general": alpha_pairs_2d(P, path="general")}
    if extra_paths:
        results["scipy"] = alpha_pairs_2d(P, triangulate=scipy_triangles_2d)
    for name, (h0, h1) in results.items():
        # our H0 holds exactly one (0, inf) row, all births are 0
        assert np.count_nonzero(np.isinf(h0[:, 1])) == 1, name
        assert np.all(h0[:, 0] == 0.0), name
        assert np.all(h1[:, 1] > h1[:, 0]), f"{name}: zero-length H1 pair not dropped"
        assert_same_diagram(h0, ref[0], exact, f"{name} H0")
        assert_same_diagram(h1, ref[1], exact, f"{name} H1")
    # the paths agree with each other bit for bit
    for name in results:
        for q in (0, 1):
            assert np.array_equal(lexsorted(results[name][q]), lexsorted(results["fast"][q])), \
                f"{name} vs fast, H{q}"
    return results["fast"]


# --------------------------------------------------------------------------------------
# 2D inputs
# --------------------------------------------------------------------------------------


def uniform(n, seed, d=2):
    return np.random.default_rng(seed).random((n, d))


def thomas(seed, parents=6, mean_children=25, sigma=0.015):
    rng = np.random.default_rng(seed)
    par = rng.random((parents, 2))
    pts = [c + sigma * rng.standard_normal((rng.poisson(mean_children) + 1, 2)) for c in par]
    return np.vstack(pts)


def square_grid(k=9, h=0.1):
    i, j = np.meshgrid(np.arange(k), np.arange(k))
    return np.column_stack([i.ravel() * h, j.ravel() * h])


def hex_lattice(k=8, h=0.1):
    pts = [((i + 0.5 * (j % 2)) * h, j * h * math.sqrt(3) / 2) for j in range(k) for i in range(k)]
    return np.array(pts)


def circle_float(n=16):
    t = 2 * np.pi * np.arange(n) / n
    return np.column_stack([np.cos(t), np.sin(t)])


def circle_exact():
    """The 12 integer points of x^2 + y^2 = 25 (exactly co-circular), and the centre."""
    pts = {(5, 0), (-5, 0), (0, 5), (0, -5)}
    for a, b in ((3, 4), (4, 3)):
        for sa in (1, -1):
            for sb in (1, -1):
                pts.add((sa * a, sb * b))
    return np.array(sorted(pts), dtype=float)


CASES_2D = {
    "uniform5": lambda: uniform(5, 0),
    "uniform17": lambda: uniform(17, 1),
    "uniform60": lambda: uniform(60, 2),
    "uniform150": lambda: uniform(150, 3),
    "uniform300": lambda: uniform(300, 4),
    "thomas_a": lambda: thomas(5),
    "thomas_b": lambda: thomas(6, parents=3, mean_children=40, sigma=0.005),
    "grid9x9": lambda: square_grid(9, 0.1),
    "grid_offset1e6": lambda: square_grid(9, 0.1) + 1e6,
    "hex": lambda: hex_lattice(8, 0.1),
    "circle_float": lambda: circle_float(16),
    "circle_exact": circle_exact,
    "circle_exact_centre": lambda: np.vstack([circle_exact(), [[0.0, 0.0]]]),
    "uniform_offset1e6": lambda: uniform(80, 7) + 1e6,
    "integer_coords": lambda: np.random.default_rng(8).integers(0, 11, (70, 2)).astype(float),
    "integer_grid": lambda: square_grid(7, 1.0),
    "mixed_scale": lambda: np.vstack([uniform(30, 9) * 1e-3, uniform(30, 10) * 1e3]),
}


@pytest.mark.parametrize("name", sorted(CASES_2D))
def test_pairs_2d_equal_gudhi_exact(name):
    check_2d(CASES_2D[name]())


def test_grid_has_no_spurious_pairs():
    """On the 9x9 grid every unit square is co-circular: each square is one
    loop born at h/2 (its sides) and filled at h/sqrt(2) (its circumradius, also
    the value of the diagonal), 64 pairs, and no tiny pairs from the diagonals."""
    h = 0.1
    P = square_grid(9, h)
    h0, h1 = alpha_pairs_2d(P)
    assert len(h0) == 81
    assert len(h1) == 64
    assert np.allclose(h1[:, 0], h / 2, rtol=1e-12)
    assert np.allclose(h1[:, 1], h / math.sqrt(2), rtol=1e-12)
    ref0, ref1 = gudhi_diagrams(P, (0, 1))
    assert len(ref1) == 64 and len(ref0) == 81


def test_hex_lattice_h1():
    """Equilateral triangles are acute: each of the 2*7*7 triangles of the 8x8
    lattice is a loop born at h/2 and filled at its circumradius h/sqrt(3)."""
    h = 0.1
    h0, h1 = alpha_pairs_2d(hex_lattice(8, h))
    assert len(h1) == 98
    assert np.allclose(h1[:, 0], h / 2, rtol=1e-12)
    assert np.allclose(h1[:, 1], h / math.sqrt(3), rtol=1e-12)
    assert len(h0) == 64
    assert np.allclose(h0[:-1, 1], h / 2, rtol=1e-12)


def test_regular_polygon_one_loop():
    """16 points on the unit circle: one H1 pair (chord/2, ~1)."""
    n = 16
    h0, h1 = alpha_pairs_2d(circle_float(n))
    assert len(h1) == 1
    assert np.isclose(h1[0, 0], math.sin(math.pi / n), rtol=1e-12)
    assert np.isclose(h1[0, 1], 1.0, rtol=1e-12)
    assert np.allclose(h0[:-1, 1], math.sin(math.pi / n), rtol=1e-12)


COLLINEAR = {
    "horizontal": lambda: np.column_stack([np.random.default_rng(11).random(25), np.full(25, 0.3)]),
    "vertical": lambda: np.column_stack([np.full(20, -2.0), np.random.default_rng(12).random(20)]),
    "diagonal": lambda: np.repeat(np.random.default_rng(13).random(18)[:, None], 2, axis=1),
    "integer_slope": lambda: (np.random.default_rng(14).integers(-50, 50, 30)[:, None]
                              * np.array([[3.0, -1.0]])),
    "offset1e6": lambda: np.column_stack([1e6 + np.random.default_rng(15).random(15), np.full(15, 1e6)]),
    "two_points": lambda: np.array([[0.0, 0.0], [1.0, 2.0]]),
}


@pytest.mark.parametrize("name", sorted(COLLINEAR))
def test_collinear(name):
    P = COLLINEAR[name]()
    h0, h1 = check_2d(P, extra_paths=False)
    assert len(h1) == 0
    # H0 = half the gaps between consecutive distinct points along the line
    U = np.unique(P, axis=0)
    gaps = np.hypot(*np.diff(U, axis=0).T) / 2
    assert len(h0) == len(U)
    assert np.allclose(np.sort(h0[:-1, 1]), np.sort(gaps), rtol=1e-12, atol=0)
    assert h0[-1, 1] == np.inf


DUPLICATE_BASES = {
    "uniform": lambda: uniform(40, 21),
    "grid": lambda: square_grid(6, 0.1),
    "offset": lambda: uniform(30, 22) + 1e6,
    "collinear": lambda: np.column_stack([np.arange(10) * 0.1, np.zeros(10)]),
}


@pytest.mark.parametrize("name", sorted(DUPLICATE_BASES))
def test_duplicates_count_once(name):
    U = DUPLICATE_BASES[name]()
    rng = np.random.default_rng(23)
    extra = U[rng.integers(0, len(U), 2 * len(U))]
    P = np.vstack([U, extra])[rng.permutation(3 * len(U))]
    # a duplicated -0.0 is the same point as 0.0
    P = np.vstack([P, -np.zeros((2, 2)), np.zeros((1, 2))]) if name == "grid" else P
    res = check_2d(P)
    base = alpha_pairs_2d(U)
    for q in (0, 1):
        assert np.array_equal(res[q], base[q])
    assert len(res[0]) == len(U)


def test_sort_false_orders():
    P = uniform(100, 31)
    s0, s1 = alpha_pairs_2d(P)
    for path in ("fast", "general"):
        u0, u1 = alpha_pairs_2d(P, path=path, sort=False)
        assert np.all(np.diff(u0[:, 1]) >= 0)  # H0 by increasing death
        assert np.array_equal(lexsorted(u0), s0)
        assert np.array_equal(lexsorted(u1), s1)


def test_invalid_path_rejected():
    with pytest.raises(ValueError):
        alpha_pairs_2d(uniform(10, 0), path="slow")


def test_given_nondelaunay_triangulation_is_repaired():
    """A valid but non-Delaunay triangulation (Delaunay of the points stretched
    5x in y, an orientation-preserving affine image) repaired by flips."""
    for seed, P in ((41, uniform(80, 41)), (42, thomas(42)), (43, uniform(50, 43) + 1e6)):
        tri = scipy_triangles_2d(P * np.array([1.0, 5.0]))
        ref = gudhi_diagrams(P, (0, 1))
        h0, h1 = alpha_pairs_2d(P, triangles=tri)
        assert_same_diagram(h0, ref[0], True, f"seed {seed} H0")
        assert_same_diagram(h1, ref[1], True, f"seed {seed} H1")
        h0b, h1b = alpha_pairs_2d(P, triangulate=lambda Q: scipy_triangles_2d(Q * np.array([1.0, 5.0])))
        assert np.array_equal(h0b, h0) and np.array_equal(h1b, h1)


# hypothesis: arbitrary small arrays of multiples of 1/8 in [-20, 20]
coords = st.integers(-160, 160).map(lambda k: k / 8.0)
small_sets = st.lists(st.tuples(coords, coords), min_size=3, max_size=40)
clumped_sets = st.lists(st.tuples(st.integers(-3, 3).map(float), st.integers(-3, 3).map(float)),
                        min_size=3, max_size=40)


def _hyp_check(rows):
    P = np.array(rows, dtype=float)
    if n_distinct(P) < 2:
        for path in ("fast", "general"):
            h0, h1 = alpha_pairs_2d(P, path=path)
            assert np.array_equal(h0, [[0.0, np.inf]]) and len(h1) == 0
        return
    check_2d(P)


@settings(max_examples=40, **HYP)
@given(small_sets)
def test_hypothesis_2d_fast_general_gudhi(rows):
    _hyp_check(rows)


@settings(max_examples=25, **HYP)
@given(clumped_sets)
def test_hypothesis_2d_integer_ties(rows):
    _hyp_check(rows)


# --------------------------------------------------------------------------------------
# 2D filtration values against gudhi's simplex tree
# --------------------------------------------------------------------------------------


def gudhi_filtration(P):
    stree = gudhi.AlphaComplex(points=P, precision="exact").create_simplex_tree()
    out = {1: {}, 2: {}, 3: {}}
    for s, f in stree.get_filtration():
        out[len(s)][frozenset(s)] = f
    return out


def ours_filtration_keyed(P):
    """alpha_filtration_2d simplices keyed by input row indices (distinct P)."""
    F = alpha_filtration_2d(P)
    index = {tuple(r): i for i, r in enumerate(P.tolist())}
    gid = np.array([index[tuple(r)] for r in F.points.tolist()])
    edges = {frozenset(gid[e].tolist()): v for e, v in zip(F.edges, F.edge_values)}
    tris = {frozenset(gid[t].tolist()): v for t, v in zip(F.triangles, F.triangle_values)}
    assert len(edges) == len(F.edges) and len(tris) == len(F.triangles)
    return F, edges, tris


FILTRATION_GENERIC = {
    "uniform30": lambda: uniform(30, 51),
    "uniform120": lambda: uniform(120, 52),
    "thomas": lambda: thomas(53, parents=3, mean_children=15),
    "offset1e6": lambda: uniform(40, 54) + 1e6,
    "collinear": lambda: np.column_stack([np.random.default_rng(55).random(9), np.zeros(9)]),
}


@pytest.mark.parametrize("name", sorted(FILTRATION_GENERIC))
def test_filtration_2d_values_equal_gudhi(name):
    """General position: same simplices and bit-identical values."""
    P = FILTRATION_GENERIC[name]()
    ref = gudhi_filtration(P)
    F, edges, tris = ours_filtration_keyed(P)
    assert set(edges) == set(ref[2])
    assert set(tris) == set(ref[3])
    for k, v in edges.items():
        assert v == ref[2][k], (sorted(k), v, ref[2][k])
    for k, v in tris.items():
        assert v == ref[3][k], (sorted(k), v, ref[3][k])
    assert len(F.points) == len(ref[1])
    # consistency: CCW triangles, every edge value <= its cofaces' values
    if len(F.triangles):
        a, b, c = (F.points[F.triangles[:, i]] for i in range(3))
        cross = (b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1]) - (b[:, 1] - a[:, 1]) * (c[:, 0] - a[:, 0])
        assert np.all(cross > 0)
        tv = np.append(F.triangle_values, np.inf)
        assert np.all(F.edge_values <= tv[F.edge_tris[:, 0]])
        assert np.all(F.edge_values <= tv[F.edge_tris[:, 1]])


FILTRATION_DEGENERATE = {
    "grid": lambda: square_grid(6, 0.1),
    "grid_offset": lambda: square_grid(5, 0.1) + 1e6,
    "hex": lambda: hex_lattice(5, 0.1),
    "circle_exact_centre": lambda: np.vstack([circle_exact(), [[0.0, 0.0]]]),
    "circle_exact": circle_exact,
    "integer": lambda: np.unique(np.random.default_rng(56).integers(0, 6, (30, 2)).astype(float), axis=0),
}


@pytest.mark.parametrize("name", sorted(FILTRATION_DEGENERATE))
def test_filtration_2d_value_multisets_equal_gudhi(name):
    """Co-circular inputs: the Delaunay triangulation is not unique, but the
    multiset of values per dimension is (a co-circular cell and all its
    diagonals get the circumradius), and it must equal gudhi's exactly."""
    P = FILTRATION_DEGENERATE[name]()
    ref = gudhi_filtration(P)
    F, edges, tris = ours_filtration_keyed(P)
    assert np.array_equal(np.sort(F.edge_values), np.sort(list(ref[2].values())))
    assert np.array_equal(np.sort(F.triangle_values), np.sort(list(ref[3].values())))
    # where the simplices coincide, the values must too
    for k in set(edges) & set(ref[2]):
        assert edges[k] == ref[2][k]
    for k in set(tris) & set(ref[3]):
        assert tris[k] == ref[3][k]


# --------------------------------------------------------------------------------------
# 3D
# --------------------------------------------------------------------------------------


def grid3(k=4, h=0.1):
    i, j, m = np.meshgrid(np.arange(k), np.arange(k), np.arange(k), indexing="ij")
    return np.column_stack([i.ravel(), j.ravel(), m.ravel()]) * h


def sphere_float(n, seed):
    X = np.random.default_rng(seed).standard_normal((n, 3))
    return X / np.linalg.norm(X, axis=1, keepdims=True)


def sphere_exact():
    """The 30 integer points with x^2 + y^2 + z^2 = 9 (exactly co-spherical)."""
    pts = set()
    for v in ((3, 0, 0), (1, 2, 2)):
        for perm in {(v[a], v[b], v[c]) for a, b, c in
                     ((0, 1, 2), (0, 2, 1), (1, 0, 2), (1, 2, 0), (2, 0, 1), (2, 1, 0))}:
            for sx in (1, -1):
                for sy in (1, -1):
                    for sz in (1, -1):
                        pts.add((sx * perm[0], sy * perm[1], sz * perm[2]))
    return np.array(sorted(pts), dtype=float)


def with_duplicates(U, seed):
    rng = np.random.default_rng(seed)
    P = np.vstack([U, U[rng.integers(0, len(U), len(U))]])
    return P[rng.permutation(len(P))]


CASES_3D = {
    "uniform20": lambda: uniform(20, 61, 3),
    "uniform80": lambda: uniform(80, 62, 3),
    "uniform200": lambda: uniform(200, 63, 3),
    "grid4": lambda: grid3(4, 0.1),
    "grid4_offset1e6": lambda: grid3(4, 0.1) + 1e6,
    "sphere_float": lambda: sphere_float(40, 64),
    "sphere_exact": sphere_exact,
    "sphere_exact_centre": lambda: np.vstack([sphere_exact(), np.zeros((1, 3))]),
    "uniform_offset1e6": lambda: uniform(60, 65, 3) + 1e6,
    "duplicates": lambda: with_duplicates(uniform(50, 66, 3), 67),
    "grid_duplicates": lambda: with_duplicates(grid3(3, 0.1), 68),
}


def betti_from_intervals(iv, r):
    iv = np.asarray(iv, dtype=float).reshape(-1, 2)
    return ((iv[None, :, 0] <= r[:, None]) & (r[:, None] < iv[None, :, 1])).sum(axis=1)


@pytest.mark.parametrize("name", sorted(CASES_3D))
def test_3d_equal_gudhi_exact(name):
    P = CASES_3D[name]()
    stree = gudhi_tree(P)
    g0, g1, g2 = gudhi_diagrams(P, (0, 1, 2), stree)
    A = betti_euler_3d(P)
    assert A.n == n_distinct(P)
    assert np.count_nonzero(np.isinf(A.h0[:, 1])) == 1
    # 1e-12 relative is the claim; in fact the values are bit-identical too
    assert_same_diagram(A.h0, g0, exact=True, what="H0")
    assert_same_diagram(A.h2, g2, exact=True, what="H2")
    assert np.all(A.h2[:, 1] > A.h2[:, 0])

    # r grid: every critical radius of gudhi's filtration, midpoints, 0, beyond
    crit = np.unique(np.sqrt([f for _, f in stree.get_filtration()]))
    mids = (crit[1:] + crit[:-1]) / 2
    r = np.unique(np.concatenate([[0.0], crit, mids, [2 * crit[-1] + 1]]))
    b0, b1, b2 = (betti_from_intervals(g, r) for g in (g0, g1, g2))
    assert np.array_equal(A.betti0(r), b0)
    assert np.array_equal(A.betti1(r), b1)
    assert np.array_equal(A.betti2(r), b2)
    assert np.array_equal(A.euler(r), b0 - b1 + b2)
    assert np.array_equal(A.betti_curves(r), np.stack([b0, b1, b2]))
    # Euler characteristic counted directly from gudhi's simplices
    fr = [(len(s) - 1, math.sqrt(f)) for s, f in stree.get_filtration()]
    dims = np.array([d for d, _ in fr])
    rad = np.array([v for _, v in fr])
    chi = ((-1.0) ** dims[None, :] * (rad[None, :] <= r[:, None])).sum(axis=1)
    assert np.array_equal(A.euler(r), chi.astype(np.int64))

    ref_total = math.fsum((g1[:, 1] - g1[:, 0]).tolist())
    assert np.isfinite(ref_total)
    scale = max(ref_total, float(np.max(crit)))
    assert abs(A.total_h1 - ref_total) <= RTOL * scale, (A.total_h1, ref_total)
    if ref_total > 0:
        assert abs(A.total_h1 - ref_total) <= RTOL * ref_total


def test_3d_duplicates_equal_distinct():
    U = uniform(50, 66, 3)
    A = betti_euler_3d(U)
    B = betti_euler_3d(with_duplicates(U, 67))
    assert np.array_equal(A.h0, B.h0) and np.array_equal(A.h2, B.h2)
    assert A.total_h1 == B.total_h1
    r = np.linspace(0, 0.5, 101)
    assert np.array_equal(A.betti_curves(r), B.betti_curves(r))


# --------------------------------------------------------------------------------------
# utilities
# --------------------------------------------------------------------------------------

nonneg = st.floats(min_value=0.0, allow_nan=False, allow_infinity=True)
pool = st.sampled_from([0.0, 1e-300, 5e-324, 0.25, 0.5, 1.0, 1.0 + 2 ** -52, 3.0, 1e300, np.inf])


@settings(max_examples=60, **HYP)
@given(st.lists(st.one_of(nonneg, pool), min_size=0, max_size=300))
def test_radix_argsort_matches_stable_argsort(vals):
    x = np.array(vals, dtype=np.float64)
    got = radix_argsort(x)
    assert np.array_equal(got, np.argsort(x, kind="stable"))


def test_radix_argsort_large_tied_and_inf():
    rng = np.random.default_rng(71)
    x = rng.integers(0, 20, 5000).astype(float) / 4
    x[rng.integers(0, 5000, 300)] = np.inf
    assert np.array_equal(radix_argsort(x), np.argsort(x, kind="stable"))
    y = rng.random(4000) ** 8 * 1e-200
    assert np.array_equal(radix_argsort(y), np.argsort(y, kind="stable"))
    z = np.full(100, 7.0)
    assert np.array_equal(radix_argsort(z), np.arange(100))


def test_radix_argsort_negative_zero():
    """-0.0 ties with +0.0 (its sign bit must not put it after +inf)."""
    x = np.array([0.0, -0.0, 1.0, np.inf])
    assert np.array_equal(radix_argsort(x), np.argsort(x, kind="stable"))


def _check_distinct(P):
    U, inv = distinct_morton(P)
    assert U.shape[1] == P.shape[1]
    assert len(inv) == len(P)
    assert np.array_equal(U[inv], P)
    assert len(np.unique(U, axis=0)) == len(U)          # rows distinct
    assert {tuple(r) for r in U.tolist()} == {tuple(r) for r in P.tolist()}


@settings(max_examples=40, **HYP)
@given(st.integers(2, 3).flatmap(lambda d: st.lists(
    st.tuples(*([st.one_of(st.integers(-3, 3).map(float),
                           st.floats(-1e6, 1e6, allow_nan=False))] * d)),
    min_size=1, max_size=60)))
def test_distinct_morton(rows):
    _check_distinct(np.array(rows, dtype=float))


def test_distinct_morton_fixed():
    rng = np.random.default_rng(72)
    U = rng.random((200, 2))
    P = np.vstack([U, U[::3], U[5:9]])[rng.permutation(200 + 67 + 4)]
    _check_distinct(P)
    U3 = np.random.default_rng(73).integers(0, 4, (300, 3)).astype(float)
    _check_distinct(U3)
    _check_distinct(np.vstack([uniform(100, 74) + 1e6] * 2))


def _frac_orient(a, b, c):
    a, b, c = ([Fraction(float(v)) for v in p] for p in (a, b, c))
    return (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0])


def _frac_incircle(a, b, c, d):
    m = []
    for p in (a, b, c):
        x, y = Fraction(float(p[0])) - Fraction(float(d[0])), Fraction(float(p[1])) - Fraction(float(d[1]))
        m.append((x, y, x * x + y * y))
    (a0, a1, a2), (b0, b1, b2), (c0, c1, c2) = m
    return (a0 * (b1 * c2 - b2 * c1) - a1 * (b0 * c2 - b2 * c0) + a2 * (b0 * c1 - b1 * c0))


def _check_mesh(P, check_delaunay=True):
    order, L, tri, nb = delaunay_mesh(P)
    assert np.array_equal(L, P[order])
    m = len(tri)
    assert nb.shape == (m, 3)
    edge_count = {}
    for t in range(m):
        assert _frac_orient(*L[tri[t]]) > 0, "triangle not CCW"
        for k in range(3):
            b, c = int(tri[t, (k + 1) % 3]), int(tri[t, (k + 2) % 3])
            edge_count[frozenset((b, c))] = edge_count.get(frozenset((b, c)), 0) + 1
            u = int(nb[t, k])
            if u < 0:
                continue
            # symmetric, and u holds the same edge in the opposite direction
            ks = [j for j in range(3) if nb[u, j] == t]
            assert len(ks) == 1, "neighbour relation not symmetric"
            j = ks[0]
            assert (int(tri[u, (j + 1) % 3]), int(tri[u, (j + 2) % 3])) == (c, b)
            assert int(tri[u, j]) not in (b, c)
    # hull edges (-1) in exactly one triangle, interior edges in exactly two
    for t in range(m):
        for k in range(3):
            e = frozenset((int(tri[t, (k + 1) % 3]), int(tri[t, (k + 2) % 3])))
            assert edge_count[e] == (1 if nb[t, k] < 0 else 2)
    # every distinct point is a vertex; Euler: V - E + F = 1
    used = np.unique(tri)
    assert len(np.unique(L[used], axis=0)) == len(used) == n_distinct(P)
    assert len(used) - len(edge_count) + m == 1
    if check_delaunay:
        for t in range(m):
            a, b, c = L[tri[t]]
            for v in used:
                assert _frac_incircle(a, b, c, L[v]) <= 0, "circumcircle not empty"


@pytest.mark.parametrize("P", [uniform(40, 81), square_grid(5, 0.1), circle_exact(),
                               np.vstack([uniform(25, 82), uniform(25, 82)[:7]]),
                               hex_lattice(5, 0.1) + 1e6],
                         ids=["uniform", "grid", "circle", "dups", "hex_offset"])
def test_delaunay_mesh_structure(P):
    _check_mesh(P)


def test_delaunay_mesh_larger_structure():
    _check_mesh(uniform(400, 83), check_delaunay=False)


@settings(max_examples=25, **HYP)
@given(small_sets)
def test_hypothesis_delaunay_mesh(rows):
    P = np.array(rows, dtype=float)
    try:
        _check_mesh(P)
    except ValueError:
        # only allowed for all-collinear input / fewer than 3 distinct points
        U = np.unique(P, axis=0)
        if len(U) >= 3:
            assert all(_frac_orient(U[0], U[1], u) == 0 for u in U), "ValueError on non-collinear input"
