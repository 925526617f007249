"""Tests of nullatlas.lookup.persistence.delaunay3d (exact numba Delaunay tetrahedralisation).

The checks are independent of the module's own predicates: exact signs come from
fractions.Fraction (every float is a dyadic rational), behind a deliberately loose
floating-point filter that only lets the clear-cut cases through plain numpy.
"Strictly inside the circumsphere" is decided exactly from the circumcentre (a
Fraction solution of the 3x3 linear system), not from the lifted determinant the
module uses.
"""
from __future__ import annotations

import itertools
import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.spatial import ConvexHull, Delaunay

from nullatlas.lookup.persistence.delaunay3d import (
    _WS_SIZE,
    _exact_pred,
    _hilbert_index_3d,
    _insphere_filter,
    _orient3d_filter,
    delaunay_mesh_3d,
)

# --------------------------------------------------------------------------------------
# exact reference arithmetic
# --------------------------------------------------------------------------------------
_LOOSE = 1e-9     # filter bound relative to the permanent: ~10^6 times Shewchuk's


def _sign(x) -> int:
    return int(x > 0) - int(x < 0)


def _F(p):
    return [Fraction(float(v)) for v in p]


def _det3(r0, r1, r2):
    return (r0[0] * (r1[1] * r2[2] - r1[2] * r2[1])
            - r0[1] * (r1[0] * r2[2] - r1[2] * r2[0])
            + r0[2] * (r1[0] * r2[1] - r1[1] * r2[0]))


def frac_orient(a, b, c, d) -> int:
    """Exact sign of det[b - a; c - a; d - a]."""
    a, b, c, d = map(_F, (a, b, c, d))
    return _sign(_det3([b[i] - a[i] for i in range(3)], [c[i] - a[i] for i in range(3)],
                       [d[i] - a[i] for i in range(3)]))


def frac_in_sphere(a, b, c, d, e) -> int:
    """+1 if e is strictly inside the sphere through the non-coplanar a, b, c, d,
    0 on it, -1 outside: exact circumcentre by Cramer's rule, then distances."""
    a, b, c, d, e = map(_F, (a, b, c, d, e))
    rows = [[2 * (q[i] - a[i]) for i in range(3)] for q in (b, c, d)]
    rhs = [sum(q[i] * q[i] - a[i] * a[i] for i in range(3)) for q in (b, c, d)]
    den = _det3(*rows)
    assert den != 0
    ctr = []
    for col in range(3):
        m = [r[:] for r in rows]
        for r in range(3):
            m[r][col] = rhs[r]
        ctr.append(_det3(*m) / den)
    r2 = sum((a[i] - ctr[i]) ** 2 for i in range(3))
    e2 = sum((e[i] - ctr[i]) ** 2 for i in range(3))
    return _sign(r2 - e2)


def _exact_ints(*arrs):
    """The float arrays as object arrays of Python ints, all multiplied by one
    common power of two (exact: every float is m 2^e with an integer m)."""
    flat = np.concatenate([np.asarray(a, dtype=np.float64).ravel() for a in arrs])
    mant, ex = np.frexp(flat)
    M = (mant * 2.0 ** 53).astype(np.int64)              # exact 53-bit integers
    E = ex.astype(np.int64) - 53
    S = int(E[M != 0].min()) if (M != 0).any() else 0
    vals = np.array([int(m) << int(e - S) if m else 0 for m, e in zip(M, E)], dtype=object)
    out, pos = [], 0
    for a in arrs:
        k = np.asarray(a).size
        out.append(vals[pos:pos + k].reshape(np.shape(a)))
        pos += k
    return out


def _int_det3(u, v, w):
    return (u[:, 0] * (v[:, 1] * w[:, 2] - v[:, 2] * w[:, 1])
            - u[:, 1] * (v[:, 0] * w[:, 2] - v[:, 2] * w[:, 0])
            + u[:, 2] * (v[:, 0] * w[:, 1] - v[:, 1] * w[:, 0]))


def _int_signs(x) -> np.ndarray:
    return np.array([_sign(v) for v in x], dtype=np.int64)


def exact_orient_rows(A, B, C, D) -> np.ndarray:
    """Exact signs of det[b - a; c - a; d - a] (Python integers)."""
    A, B, C, D = _exact_ints(A, B, C, D)
    return _int_signs(_int_det3(B - A, C - A, D - A))


def exact_in_sphere_rows(A, B, C, D, E) -> np.ndarray:
    """Exact +1 / 0 / -1: E strictly inside / on / outside the sphere through the
    non-coplanar A, B, C, D (any orientation), with Python integers: the sign of
    the lifted determinant [p - e, |p - e|^2] times minus the orientation."""
    A, B, C, D, E = _exact_ints(A, B, C, D, E)
    rows = [X - E for X in (A, B, C, D)]
    lift = [r[:, 0] * r[:, 0] + r[:, 1] * r[:, 1] + r[:, 2] * r[:, 2] for r in rows]
    # expand along the lift column: sum_i (-1)^(i+3) lift_i det3(other rows)
    det = 0
    for i in range(4):
        others = [rows[r] for r in range(4) if r != i]
        det = det + (-1) ** (i + 3) * lift[i] * _int_det3(*others)
    o = _int_signs(_int_det3(B - A, C - A, D - A))
    return -_int_signs(det) * o


@np.errstate(all="ignore")      # overflowing filters just fall through to exact ints
def orient_signs(A, B, C, D) -> np.ndarray:
    """Exact signs of det[b - a; c - a; d - a] for rows of (k, 3) arrays."""
    u, v, w = B - A, C - A, D - A
    t1 = u[:, 0] * (v[:, 1] * w[:, 2] - v[:, 2] * w[:, 1])
    t2 = u[:, 1] * (v[:, 0] * w[:, 2] - v[:, 2] * w[:, 0])
    t3 = u[:, 2] * (v[:, 0] * w[:, 1] - v[:, 1] * w[:, 0])
    det = t1 - t2 + t3
    perm = (np.abs(u[:, 0]) * (np.abs(v[:, 1] * w[:, 2]) + np.abs(v[:, 2] * w[:, 1]))
            + np.abs(u[:, 1]) * (np.abs(v[:, 0] * w[:, 2]) + np.abs(v[:, 2] * w[:, 0]))
            + np.abs(u[:, 2]) * (np.abs(v[:, 0] * w[:, 1]) + np.abs(v[:, 1] * w[:, 0])))
    out = np.sign(det).astype(np.int64)
    unsure = np.flatnonzero(~(np.abs(det) > _LOOSE * perm))
    if len(unsure):
        out[unsure] = exact_orient_rows(A[unsure], B[unsure], C[unsure], D[unsure])
    return out


@np.errstate(all="ignore")
def in_sphere_signs(A, B, C, D, E) -> np.ndarray:
    """Exact +1 / 0 / -1 (E strictly inside / on / outside the sphere through the
    non-coplanar A, B, C, D, whatever their orientation) for rows of (k, 3) arrays.
    Float: sign of the lifted 4x4 determinant times the orientation sign, behind a
    loose filter; unsure rows are decided with Python integers."""
    rows = [X - E for X in (A, B, C, D)]
    lift = [np.einsum("ij,ij->i", r, r) for r in rows]
    M = np.stack([np.column_stack([r, q]) for r, q in zip(rows, lift)], axis=1)
    det = np.linalg.det(M)
    # Hadamard-type bound on |det| (product of the rows' 1-norms): the LU
    # determinant's rounding error is ~1e-15 of it, far below the 1e-7 cut
    scale = np.prod(np.abs(M).sum(axis=2), axis=1)
    o = orient_signs(A, B, C, D)
    # the lifted det is positive inside for det[a - d; b - d; c - d] > 0, i.e. o < 0
    out = -np.sign(det).astype(np.int64) * o
    unsure = np.flatnonzero(~(np.abs(det) > 1e-7 * scale))
    if len(unsure):
        out[unsure] = exact_in_sphere_rows(A[unsure], B[unsure], C[unsure], D[unsure],
                                           E[unsure])
    return out


# --------------------------------------------------------------------------------------
# the validity checker
# --------------------------------------------------------------------------------------
def check_mesh(points, out, brute_force=False, hull_check=True):
    """Assert that ``out = delaunay_mesh_3d(points)`` is a Delaunay
    tetrahedralisation of the convex hull of the distinct points."""
    points = np.asarray(points, dtype=np.float64)
    order, local, tets, nb = out
    n = len(points)
    assert order.dtype == np.int64 and order.shape == (n,)
    assert np.array_equal(np.sort(order), np.arange(n))
    assert local.dtype == np.float64 and local.flags.c_contiguous
    assert np.array_equal(local, points[order])
    assert tets.dtype == np.int64 and nb.dtype == np.int64
    assert tets.ndim == 2 and tets.shape[1] == 4 and nb.shape == tets.shape
    m = len(tets)
    assert m >= 1 and tets.min() >= 0 and tets.max() < n
    # vertices: one local vertex per distinct point, each distinct point used
    used = np.unique(tets)
    used_pts = {tuple(p) for p in local[used]}
    assert len(used_pts) == len(used), "two vertices at the same point"
    assert used_pts == {tuple(p) for p in points}, "a distinct point is not a vertex"
    # every tetrahedron positively oriented (so none is flat)
    A, B, C, D = (local[tets[:, i]] for i in range(4))
    assert (orient_signs(A, B, C, D) > 0).all()
    # adjacency: neighbours[t, k] shares the face opposite vertex k, symmetric
    drop = np.array([[1, 2, 3], [0, 2, 3], [0, 1, 3], [0, 1, 2]])
    F = np.sort(tets[:, drop], axis=2).reshape(-1, 3)          # row 4 t + k
    uniq, inv, cnt = np.unique(F, axis=0, return_inverse=True, return_counts=True)
    inv = inv.ravel()
    assert cnt.max() <= 2, "a face in three tetrahedra"
    flat_nb = nb.ravel()
    single = cnt[inv] == 1
    assert (flat_nb[single] == -1).all() and (flat_nb[~single] >= 0).all()
    pair = np.argsort(inv[~single], kind="stable")
    rows = np.flatnonzero(~single)[pair].reshape(-1, 2)        # the two (t, k) of a face
    t, k, u, j = rows[:, 0] // 4, rows[:, 0] % 4, rows[:, 1] // 4, rows[:, 1] % 4
    assert (nb[t, k] == u).all() and (nb[u, j] == t).all()
    assert (tets[t, k] != tets[u, j]).all()
    hull_faces = [(r // 4, r % 4) for r in np.flatnonzero(single)]
    # Euler characteristic of a triangulated 3-ball: V - E + F - T = 1
    pairs = np.array(list(itertools.combinations(range(4), 2)))
    edges = np.unique(np.sort(tets[:, pairs], axis=2).reshape(-1, 2), axis=0)
    assert len(used) - len(edges) + len(uniq) - m == 1
    # hull faces support the point set: no point strictly outside any of them
    # (the face's own tetrahedron is on the inner side) -> union = convex hull
    P = np.unique(points, axis=0)
    if hull_check:
        for ht, hk in hull_faces:
            cols = [np.repeat(local[tets[ht, i]][None], len(P), 0) for i in range(4)]
            cols[hk] = P
            assert (orient_signs(*cols) >= 0).all(), "hull face not on the convex hull"
    # total volume = hull volume: an independent float cross-check (on a scaled
    # copy) against Qhull, whenever the hull is not nearly flat
    ctr = P.mean(axis=0)
    sc = np.abs(P - ctr).max()
    Q = (local - ctr) / sc
    a, b, c, d = (Q[tets[:, i]] for i in range(4))
    vol = np.einsum("ij,ij->i", np.cross(b - a, c - a), d - a).sum() / 6.0
    if vol > 1e-6:
        assert math.isclose(vol, ConvexHull((P - ctr) / sc).volume, rel_tol=1e-9)
    # locally Delaunay across every interior face
    if len(t):
        T0 = tets[t]
        s = in_sphere_signs(local[T0[:, 0]], local[T0[:, 1]], local[T0[:, 2]],
                            local[T0[:, 3]], local[tets[u, j]])
        assert (s <= 0).all(), "a face is not locally Delaunay"
    if brute_force:
        for t in range(m):
            k = len(P)
            rep = [np.repeat(local[tets[t, i]][None], k, 0) for i in range(4)]
            assert (in_sphere_signs(*rep, P) <= 0).all(), "non-empty circumsphere"
    return len(hull_faces)


def tet_set(order, tets):
    return set(map(tuple, np.sort(order[tets], axis=1)))


# --------------------------------------------------------------------------------------
# predicates
# --------------------------------------------------------------------------------------
_WS = np.empty(_WS_SIZE)


def _o(a, b, c, d, exact_only=False):
    """The module's orient3d sign: float filter (NaN = unsure), exact fallback."""
    s = np.nan if exact_only else _orient3d_filter(*a, *b, *c, *d)
    if s != s:
        s = _exact_pred(4, *a, *b, *c, *d, 0.0, 0.0, 0.0, _WS)
    return _sign(s)


def _s(a, b, c, d, e, exact_only=False):
    """The module's insphere sign: float filter (NaN = unsure), exact fallback."""
    s = np.nan if exact_only else _insphere_filter(*a, *b, *c, *d, *e)
    if s != s:
        s = _exact_pred(5, *a, *b, *c, *d, *e, _WS)
    return _sign(s)


def test_orient3d_near_coplanar():
    rng = np.random.default_rng(5)
    naive_wrong = zero = 0
    for trial in range(210):
        off = np.round(rng.uniform(-1e6, 1e6, 3)) * (trial % 2)
        if trial % 3 == 0:
            # exactly coplanar: dyadic lattice points a + i (b - a) + j (c - a)
            a, b, c = off + rng.integers(-8, 9, (3, 3)) * 2.0 ** -int(rng.integers(0, 6))
            i, j = rng.integers(-3, 4, 2)
            d = a + i * (b - a) + j * (c - a)
        else:
            a, b, c = off + rng.uniform(-1, 1, (3, 3)) * 10.0 ** rng.integers(-3, 3)
            s, t = rng.uniform(-2, 2, 2)
            d = a + s * (b - a) + t * (c - a)
            d = d + rng.integers(-2, 3, 3) * np.spacing(np.abs(d))
        exact = frac_orient(a, b, c, d)
        for p in itertools.permutations(range(4)):
            q = [(a, b, c, d)[i] for i in p]
            par = 1 - 2 * (sum(p[i] > p[j] for i in range(4) for j in range(i + 1, 4)) % 2)
            assert _o(*q) == par * exact
        assert _o(a, b, c, d, exact_only=True) == exact
        u, v, w = b - a, c - a, d - a
        naive = np.dot(u, np.cross(v, w))
        naive_wrong += _sign(naive) != exact
        zero += exact == 0
    assert naive_wrong > 0 and zero > 0       # the exact path is really exercised


def _sphere_points(r2):
    """All integer points on x^2 + y^2 + z^2 = r2 (exactly co-spherical)."""
    r = math.isqrt(r2)
    return np.array([p for p in itertools.product(range(-r, r + 1), repeat=3)
                     if sum(x * x for x in p) == r2], dtype=float)


def test_insphere_near_cospherical():
    rng = np.random.default_rng(11)
    S = _sphere_points(81)
    naive_wrong = zero = 0
    for trial in range(240):
        scale = (1.0, 0.125, 0.1, 3e-4)[trial % 4]
        off = (0.0, 1e6, -7.25)[trial % 3]
        idx = rng.choice(len(S), 5, replace=False)
        pts = S[idx] * scale + off
        if frac_orient(*pts[:4]) == 0:
            continue
        if trial % 2:
            # a few ulps (of the scale at zero coordinates: subnormal nudges would
            # leave the exact range, where products underflow)
            ulp = np.spacing(np.maximum(np.abs(pts[4]), scale))
            pts[4] = pts[4] + rng.integers(-2, 3, 3) * ulp
        a, b, c, d, e = pts
        exact = frac_in_sphere(a, b, c, d, e)
        o = frac_orient(a, b, c, d)
        assert _s(a, b, c, d, e) == exact * o        # > 0 inside for a positive tet
        assert _s(a, b, c, d, e, exact_only=True) == exact * o
        assert _s(b, a, c, d, e) == -exact * o
        # the determinant is antisymmetric in its five points
        assert _s(a, b, c, e, d) == -_s(a, b, c, d, e)
        assert _s(e, b, c, d, a) == -_s(a, b, c, d, e)
        M = np.array([np.r_[p - e, np.dot(p - e, p - e)] for p in (a, b, c, d)])
        naive_wrong += -_sign(np.linalg.det(M)) * o != exact
        zero += exact == 0
    assert zero > 30 and naive_wrong > 0


@settings(max_examples=80, deadline=None)
@given(st.lists(st.tuples(*[st.integers(-2, 2)] * 3, *[st.integers(-3, 3)] * 3),
                min_size=5, max_size=5),
       st.sampled_from([1.0, 0.1, 1e-7, 3.0e5]), st.sampled_from([0.0, 1e6, -7.25]))
def test_predicates_match_fractions(raw, scale, offset):
    # small-integer configurations (many exactly degenerate) nudged by a few ulps
    def nudge(v, e):
        return v + e * (np.spacing(v) if v != 0.0 else scale * 2.0 ** -40)

    pts = [np.array([nudge(r[i] * scale + offset, r[3 + i]) for i in range(3)]) for r in raw]
    a, b, c, d, e = pts
    o = frac_orient(a, b, c, d)
    assert _o(a, b, c, d) == o
    assert _o(a, b, c, d, exact_only=True) == o
    if o != 0:
        ins = o * frac_in_sphere(a, b, c, d, e)
        assert _s(a, b, c, d, e) == ins
        assert _s(a, b, c, d, e, exact_only=True) == ins


# --------------------------------------------------------------------------------------
# agreement with scipy (general position)
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("n", [4, 5, 12, 100, 700, 2500])
@pytest.mark.parametrize("seed", [0, 1])
def test_matches_scipy_random(n, seed):
    pts = np.random.default_rng(seed * 1000 + n).random((n, 3))
    order, local, tets, nb = delaunay_mesh_3d(pts)
    ref = Delaunay(pts - pts.mean(axis=0)).simplices
    assert tet_set(order, tets) == set(map(tuple, np.sort(ref, axis=1)))
    A, B, C, D = (local[tets[:, i]] for i in range(4))
    assert (orient_signs(A, B, C, D) > 0).all()
    # neighbour symmetry and shared faces
    t, k = np.nonzero(nb >= 0)
    u = nb[t, k]
    back = (nb[u] == t[:, None])
    assert (back.sum(axis=1) == 1).all()
    j = back.argmax(axis=1)
    drop = np.array([[1, 2, 3], [0, 2, 3], [0, 1, 3], [0, 1, 2]])
    face_t = np.sort(np.take_along_axis(tets[t], drop[k], axis=1), axis=1)
    face_u = np.sort(np.take_along_axis(tets[u], drop[j], axis=1), axis=1)
    assert np.array_equal(face_t, face_u)
    assert (tets[t, k] != tets[u, j]).all()
    assert len(np.unique(tets)) == n


def test_matches_scipy_anisotropic_gaussian():
    pts = np.random.default_rng(3).normal(size=(6_000, 3)) * [3.0, 1.0, 0.2] + [5.0, -2.0, 1e3]
    order, local, tets, nb = delaunay_mesh_3d(pts)
    ref = Delaunay(pts - pts.mean(axis=0)).simplices
    assert tet_set(order, tets) == set(map(tuple, np.sort(ref, axis=1)))
    # hull faces in our mesh = scipy's convex hull facets
    t, k = np.nonzero(nb < 0)
    ours = {tuple(sorted(order[v] for i, v in enumerate(tets[a]) if i != b)) for a, b in zip(t, k)}
    hull = ConvexHull(pts - pts.mean(axis=0)).simplices
    assert ours == set(map(tuple, np.sort(hull, axis=1)))


def test_random_small_brute_force():
    for seed in range(4):
        pts = np.random.default_rng(seed).random((40, 3))
        check_mesh(pts, delaunay_mesh_3d(pts), brute_force=True)


# --------------------------------------------------------------------------------------
# degenerate inputs
# --------------------------------------------------------------------------------------
def _grid(k, step=1.0, offset=0.0):
    g = np.array(list(itertools.product(range(k), repeat=3)), dtype=float)
    return g * step + offset


def _lat_long_sphere(nlat, nlon):
    th = np.arange(1, nlat) * np.pi / nlat
    ph = np.arange(nlon) * 2 * np.pi / nlon
    T, P = np.meshgrid(th, ph, indexing="ij")
    pts = np.c_[(np.sin(T) * np.cos(P)).ravel(), (np.sin(T) * np.sin(P)).ravel(),
                np.cos(T).ravel()]
    return np.r_[pts, [[0, 0, 1.0], [0, 0, -1.0]]]


def _cube_surface(k):
    g = _grid(k) / (k - 1)
    return g[(g == 0).any(axis=1) | (g == 1).any(axis=1)]


DEGENERATE = {
    "cube_corners": lambda: _grid(2),
    "cube_corners_centre": lambda: np.r_[_grid(2), [[0.5, 0.5, 0.5]]],
    "grid4_0.1": lambda: _grid(4, 0.1),
    "grid5_0.1": lambda: _grid(5, 0.1),
    "grid5_0.1_offset_1e6": lambda: _grid(5, 0.1, 1e6),
    "grid4_integer_offset_1e6": lambda: _grid(4, 1.0, 1e6 + 0.5),
    "sphere_integer_r5": lambda: _sphere_points(25),
    "sphere_integer_r9_with_centre": lambda: np.r_[_sphere_points(81) * 0.1 + 3.0, [[3.0] * 3]],
    "sphere_lat_long": lambda: _lat_long_sphere(6, 10),
    "coplanar_plus_apex": lambda: np.r_[
        np.c_[np.random.default_rng(0).random((60, 2)), np.zeros(60)], [[0.5, 0.5, 0.7]]],
    "coplanar_grid_plus_apex": lambda: np.r_[
        np.c_[_grid(6)[:36, 1:], np.zeros(36)], [[2.5, 2.5, -1.0]]],
    "two_parallel_planes": lambda: np.r_[
        np.c_[_grid(4)[:16, 1:] * 0.1, np.zeros(16)],
        np.c_[_grid(4)[:16, 1:] * 0.1 + 0.05, np.full(16, 0.3)]],
    "collinear_plus_three": lambda: np.r_[
        np.c_[np.linspace(0, 1, 40), np.linspace(0, 1, 40) * 0.3, np.zeros(40)],
        [[0.5, 0.6, 0.1], [0.2, -0.4, 0.0], [0.1, 0.1, -0.5]]],
    "points_on_hull_faces": lambda: np.r_[
        _cube_surface(5), np.random.default_rng(4).random((20, 3))],
    "duplicates": lambda: np.r_[_grid(3), _grid(3)[::-1],
                                np.random.default_rng(1).random((15, 3))][
        np.random.default_rng(2).permutation(69)],
    "random_offset_1e6": lambda: 1e6 + np.random.default_rng(2).random((300, 3)),
    "tiny_perturbations": lambda: _grid(4) + np.random.default_rng(2).integers(
        -1, 2, (64, 3)) * 1e-15,
    "single_tet": lambda: np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]]),
}


@pytest.mark.parametrize("name", sorted(DEGENERATE))
def test_degenerate_inputs_valid(name):
    pts = DEGENERATE[name]()
    check_mesh(pts, delaunay_mesh_3d(pts), brute_force=len(pts) <= 70)


def test_cube_corners_structure():
    out = delaunay_mesh_3d(_grid(2))
    # 8 co-spherical corners: any Delaunay tetrahedralisation of the cube has 5 or
    # 6 tetrahedra and volume 1
    assert len(out[2]) in (5, 6)
    check_mesh(_grid(2), out, brute_force=True)


def test_grid5_counts():
    pts = _grid(5, 0.1)
    order, local, tets, nb = delaunay_mesh_3d(pts)
    h = check_mesh(pts, (order, local, tets, nb))
    # the hull of the 5x5x5 grid is the cube surface: 6 faces of 4x4 squares
    # (all 98 surface points lie on hull faces), each square split in two
    assert h == 6 * 16 * 2
    assert len(np.unique(tets)) == 125


@pytest.mark.parametrize("name", ["grid4_0.1", "sphere_integer_r5", "coplanar_grid_plus_apex"])
def test_degenerate_inputs_shuffled(name):
    pts = DEGENERATE[name]()
    rng = np.random.default_rng(4)
    for _ in range(3):
        q = pts[rng.permutation(len(pts))]
        check_mesh(q, delaunay_mesh_3d(q))


def test_moment_curve_quadratic_size():
    # points on the moment curve: Theta(n^2) tetrahedra, cavities of hundreds of
    # tetrahedra -- exercises the growth of every buffer
    t = np.linspace(-1.0, 1.0, 150)
    pts = np.c_[t, t * t, t ** 3]
    out = delaunay_mesh_3d(pts)
    assert len(out[2]) > 10 * len(pts)
    check_mesh(pts, out, hull_check=False)


def test_two_skew_lines_buffer_growth():
    # two skew lines (Theta(n^2) tetrahedra) with points between them inserted
    # late: large cavities, tetrahedron counts that grow and then shrink again
    # (the free-slot stack, the cavity buffers and the edge hash table all grow)
    k = 150
    mid = np.random.default_rng(0).random((30, 3)) * 0.2 + [0.0, 0.0, 0.4]
    pts = np.r_[np.c_[np.linspace(-1, 1, k), np.zeros(k), np.zeros(k)],
                np.c_[np.zeros(k), np.linspace(-1, 1, k), np.ones(k)], mid]
    out = delaunay_mesh_3d(pts)
    assert len(out[2]) > 20 * len(pts)
    check_mesh(pts, out, hull_check=False)


def test_underflow_regime_fails_cleanly():
    # outside the exact range (products of coordinates underflow) the result is
    # not guaranteed, but every call must end with a result or a clean error
    rng = np.random.default_rng(0)
    outcomes = set()
    for _ in range(150):
        n = int(rng.integers(4, 30))
        pts = rng.integers(-3, 4, (n, 3)) * np.power(
            10.0, rng.choice([-320, -310, -300, -170, -10, 0], (n, 3)))
        try:
            order, local, tets, nb = delaunay_mesh_3d(pts)
            assert tets.ndim == 2 and tets.shape[1] == 4
            assert tets.min() >= 0 and tets.max() < n and nb.max() < len(tets)
            outcomes.add("ok")
        except ValueError:
            outcomes.add("coplanar")
        except FloatingPointError:
            outcomes.add("inconsistent")
    assert "ok" in outcomes


@pytest.mark.parametrize("scale", [1e-200, 1e-40, 1e120, 1e300])
def test_extreme_coordinate_scales(scale):
    pts = np.r_[_grid(3), np.random.default_rng(1).random((15, 3)) * 2] * scale
    out = delaunay_mesh_3d(pts)
    assert np.array_equal(out[1], pts[out[0]])          # returned unscaled
    check_mesh(pts, out)


def test_duplicates_one_vertex_each():
    rng = np.random.default_rng(12)
    base = rng.random((300, 3))
    pts = np.r_[base, base[rng.integers(0, 300, 200)], base[:30]]
    pts = pts[rng.permutation(len(pts))]
    order, local, tets, nb = delaunay_mesh_3d(pts)
    used = np.unique(tets)
    assert len(used) == 300
    assert len({tuple(p) for p in local[used]}) == 300
    # as coordinates, the same tetrahedra as scipy on the distinct points
    ours = {tuple(sorted(map(tuple, local[tt]))) for tt in tets}
    ref = {tuple(sorted(map(tuple, base[s]))) for s in Delaunay(base - 0.5).simplices}
    assert ours == ref


def test_many_identical_and_four_distinct():
    pts = np.r_[np.zeros((30, 3)), [[1.0, 0, 0]] * 10, [[0, 1.0, 0]] * 5, [[0, 0, 1.0]] * 3]
    order, local, tets, nb = delaunay_mesh_3d(pts)
    assert tets.shape == (1, 4) and (nb == -1).all()
    assert {tuple(local[v]) for v in tets[0]} == {(0, 0, 0), (1, 0, 0), (0, 1, 0), (0, 0, 1)}


# --------------------------------------------------------------------------------------
# hypothesis: arbitrary small lattice configurations
# --------------------------------------------------------------------------------------
def _coplanar(pts) -> bool:
    """Exact: are all the (distinct) points on one plane (or fewer than 4)?"""
    P = [_F(p) for p in np.unique(pts, axis=0)]
    if len(P) < 4:
        return True

    def sub(u, v):
        return [u[i] - v[i] for i in range(3)]

    u = sub(P[1], P[0])
    for q in P[2:]:
        v = sub(q, P[0])
        c = [u[1] * v[2] - u[2] * v[1], u[2] * v[0] - u[0] * v[2], u[0] * v[1] - u[1] * v[0]]
        if any(c):
            return all(sum(c[i] * w[i] for i in range(3)) == 0 for w in (sub(r, P[0]) for r in P))
    return True                       # all collinear


@settings(max_examples=45, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(*[st.integers(0, 3)] * 3), min_size=4, max_size=30),
       st.sampled_from([1.0, 0.1, 1e-5]), st.sampled_from([0.0, 1e6]))
def test_hypothesis_integer_lattice(raw, scale, offset):
    pts = np.array(raw, dtype=float) * scale + offset
    if _coplanar(pts):
        with pytest.raises(ValueError):
            delaunay_mesh_3d(pts)
    else:
        check_mesh(pts, delaunay_mesh_3d(pts))


# --------------------------------------------------------------------------------------
# errors, determinism, insertion order
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("bad", [
    np.zeros((0, 3)), np.zeros((3, 3)), np.ones((10, 3)),
    np.c_[np.random.default_rng(0).random((20, 2)), np.zeros(20)],          # coplanar
    np.random.default_rng(0).integers(-9, 9, (20, 2)) @ np.array(
        [[1.0, 2.0, 3.0], [-1.0, 0.5, 2.0]]) + 1e6,                          # tilted plane
    np.c_[np.arange(10.0), 2 * np.arange(10.0) + 1, np.zeros(10)],           # collinear
    np.r_[np.zeros((5, 3)), [[1.0, 0, 0]] * 5, [[0, 1.0, 0]] * 5, [[1.0, 1.0, 0]]],
    _grid(5, 0.1)[:25],                                                     # a face of the grid
])
def test_raises_value_error(bad):
    with pytest.raises(ValueError):
        delaunay_mesh_3d(bad)


def test_rejects_bad_shapes_and_nonfinite():
    with pytest.raises(ValueError):
        delaunay_mesh_3d(np.zeros((5, 2)))
    with pytest.raises(ValueError):
        delaunay_mesh_3d(np.r_[_grid(2), [[0, 0, np.nan]]])
    with pytest.raises(ValueError):
        delaunay_mesh_3d(np.r_[_grid(2), [[0, np.inf, 0]]])


def test_deterministic():
    pts = np.r_[np.random.default_rng(7).random((2000, 3)), _grid(5, 0.1)]
    a = delaunay_mesh_3d(pts)
    b = delaunay_mesh_3d(pts.copy())
    for x, y in zip(a, b):
        assert np.array_equal(x, y)


def test_insertion_order_is_spatially_coherent():
    pts = np.random.default_rng(9).random((20_000, 3))
    order, local, tets, nb = delaunay_mesh_3d(pts)
    step = np.linalg.norm(np.diff(local, axis=0), axis=1)
    rand = np.linalg.norm(np.diff(pts, axis=0), axis=1)
    assert np.median(step) < 0.25 * np.median(rand)


def test_hilbert_curve_visits_adjacent_cells():
    bits = 3
    side = 1 << bits
    cells = {}
    for x, y, z in itertools.product(range(side), repeat=3):
        cells[_hilbert_index_3d(x, y, z, bits)] = (x, y, z)
    assert sorted(cells) == list(range(side ** 3))
    for i in range(side ** 3 - 1):
        assert sum(abs(p - q) for p, q in zip(cells[i], cells[i + 1])) == 1
