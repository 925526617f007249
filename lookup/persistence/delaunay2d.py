"""Exact, fast 2D Delaunay triangulation compiled with numba.

Public API
----------
``delaunay_triangles(points)``
    (n, 2) float64 -> (m, 3) int64 counter-clockwise triangles of the Delaunay
    triangulation of the distinct points (first occurrence of a duplicate kept).
``delaunay_triangles_qhull(points)``
    Same convention, computed by ``scipy.spatial.Delaunay`` on centred
    coordinates (a fallback / cross-check).
``orient2d(a, b, c)``, ``incircle(a, b, c, d)``
    The exact-sign predicates used internally (Python-level convenience wrappers).

Algorithm
---------
* Insertion order: BRIO, "biased randomized insertion order" (N. Amenta, S. Choi,
  G. Rote, "Incremental constructions con BRIO", Proc. 19th ACM Symposium on
  Computational Geometry (SoCG), 2003, pp. 211-219).  The points are split at
  random into rounds of geometrically growing size (each round about as large as
  all earlier ones together); inside a round the points follow a Hilbert
  space-filling curve (D. Hilbert, "Ueber die stetige Abbildung einer Linie auf ein
  Flaechenstueck", Math. Ann. 38, 1891), its direction alternating between rounds
  so that one round ends near where the next one starts.  (A plain Hilbert order
  is ~10 % faster on uniform points but degrades to quadratic time on inputs such
  as points along a parabola; the random rounds prevent that.)
* Point location: "remembering stochastic walk" (O. Devillers, S. Pion,
  M. Teillaud, "Walking in a triangulation", Int. J. Found. Comput. Sci. 13(2),
  2002) from the last created triangle: it terminates with probability 1 in any
  triangulation (co-circular ties included) and, thanks to the insertion order,
  takes about 3 steps per point.
* Insertion: Bowyer-Watson cavity retriangulation (A. Bowyer, "Computing
  Dirichlet tessellations", Comput. J. 24(2), 1981; D. F. Watson, "Computing the
  n-dimensional Delaunay tessellation with application to Voronoi polytopes",
  Comput. J. 24(2), 1981).  The convex hull is closed with "ghost" triangles
  sharing one infinite vertex (as in J. R. Shewchuk's Triangle and in CGAL), so no
  bounding super-triangle exists and none has to be removed or can perturb the
  hull: a ghost triangle over hull edge (a, b) is in conflict with p when p lies
  strictly outside the edge's line, or on the open segment (a, b).  Conflicts with
  real triangles use the strict incircle test, so co-circular ties are never
  "in conflict" and the cavity is always star-shaped from p.
* Predicates: J. R. Shewchuk, "Adaptive Precision Floating-Point Arithmetic and
  Fast Robust Geometric Predicates", Discrete & Computational Geometry 18(3),
  305-363, 1997.  orient2d and incircle are first evaluated in floating point
  with the a-priori error bounds of that paper (ccwerrboundA, iccerrboundA); when
  the filter cannot certify the sign, the determinant is evaluated exactly with
  floating-point expansion arithmetic (Two-Sum, Two-Product with Dekker's split,
  Fast-Expansion-Sum-Zeroelim, Scale-Expansion-Zeroelim of the same paper; the
  coordinate differences are themselves carried as exact two-term expansions).
  Exactness assumes IEEE-754 binary64 with round-to-nearest-even (numba does not
  contract to FMA without fastmath) and no overflow or underflow in the degree-4
  incircle products.  The input is first rescaled by an exact power of two when
  its largest |coordinate| is outside 2^-64 .. 2^64 (signs are scale-invariant),
  so overflow cannot occur; underflow needs nonzero coordinate differences below
  ~1e-60 times the largest |coordinate|.  In that regime results may be invalid;
  guards (walk length, cavity Euler count) keep the data structure in bounds and
  raise FloatingPointError when they detect the inconsistency.

All per-point work runs inside ``numba.njit(cache=True)`` functions.
"""
from __future__ import annotations

import numpy as np

from .expansions import (
    _EPS,
    _fast_expansion_sum_zeroelim,
    _scale_expansion_zeroelim,
    scale_for_predicates,
)
from .jit import njit

__all__ = [
    "delaunay_mesh", "delaunay_triangles", "delaunay_triangles_qhull", "orient2d", "incircle"]

# --------------------------------------------------------------------------------------
# Floating-point expansion arithmetic (Shewchuk 1997, section 2).  The error-free
# transformations are written out inline below (their formulas, and why inline:
# ``expansions.py``); Scale-Expansion-Zeroelim and Fast-Expansion-Sum-Zeroelim are
# shared with the 3D kernel.
# --------------------------------------------------------------------------------------
_CCW_ERRBOUND_A = (3.0 + 16.0 * _EPS) * _EPS
_ICC_ERRBOUND_A = (10.0 + 96.0 * _EPS) * _EPS


@njit(cache=True)
def _mul_expansion(elen, e, flen, f, h, t1, t2):
    """h <- e * f: sum of the Scale-Expansions of the longer expansion by each
    component of the shorter one (t1, t2: scratch)."""
    if elen < flen:
        elen, e, flen, f = flen, f, elen, e
    hlen = _scale_expansion_zeroelim(elen, e, f[0], h)
    for k in range(1, flen):
        l1 = _scale_expansion_zeroelim(elen, e, f[k], t1)
        l2 = _fast_expansion_sum_zeroelim(hlen, h, l1, t1, t2)
        for i in range(l2):
            h[i] = t2[i]
        hlen = l2
    return hlen


@njit(cache=True)
def _orient2d_exact(ax, ay, bx, by, cx, cy):
    """Most significant component of the exact value of
    (ax - cx)(by - cy) - (ay - cy)(bx - cx).  The four differences are first
    turned into exact two-term expansions (Two-Diff)."""
    ws = np.empty(1168, dtype=np.float64)    # scratch (this path is rare)
    v = (ax, cx, by, cy, ay, cy, bx, cx)
    lens = ws[8:12]
    for k in range(4):
        a = v[2 * k]
        b = v[2 * k + 1]
        x = a - b
        bv = a - x
        av = x + bv
        y = (a - av) + (bv - b)
        if y != 0.0:
            ws[2 * k] = y
            ws[2 * k + 1] = x
            lens[k] = 2.0
        else:
            ws[2 * k] = x
            lens[k] = 1.0
    p = ws[16:32]
    q = ws[32:48]
    t1 = ws[48:112]
    t2 = ws[112:1136]
    det = ws[1136:1168]
    lp = _mul_expansion(int(lens[0]), ws[0:2], int(lens[1]), ws[2:4], p, t1, t2)
    lq = _mul_expansion(int(lens[2]), ws[4:6], int(lens[3]), ws[6:8], q, t1, t2)
    for i in range(lq):
        q[i] = -q[i]
    n = _fast_expansion_sum_zeroelim(lp, p, lq, q, det)
    return det[n - 1]


@njit(cache=True)
def _incircle_exact(ax, ay, bx, by, cx, cy, dx, dy):
    """Most significant component of the exact incircle determinant
        sum over (u, v, w) in ((a,b,c), (b,c,a), (c,a,b)) of
            (udx^2 + udy^2) * (vdx * wdy - wdx * vdy),    udx = ux - dx, ...
    with the six differences carried as exact two-term expansions."""
    ws = np.empty(4800, dtype=np.float64)    # scratch (this path is rare)
    v = (ax, dx, ay, dy, bx, dx, by, dy, cx, dx, cy, dy)
    lens = ws[12:18]
    for k in range(6):                  # ws[2k:2k+2] = adx, ady, bdx, bdy, cdx, cdy
        a = v[2 * k]
        b = v[2 * k + 1]
        x = a - b
        bv = a - x
        av = x + bv
        y = (a - av) + (bv - b)
        if y != 0.0:
            ws[2 * k] = y
            ws[2 * k + 1] = x
            lens[k] = 2.0
        else:
            ws[2 * k] = x
            lens[k] = 1.0
    p = ws[32:48]
    q = ws[48:64]
    cross = ws[64:96]
    lift = ws[96:128]
    t1 = ws[128:192]
    t2 = ws[192:1216]
    term = ws[1216:1728]
    acc = ws[1728:3264]
    acc2 = ws[3264:4800]
    la = np.int64(1)
    for k in range(3):
        u = k
        vv = k + 1 if k < 2 else 0
        w = vv + 1 if vv < 2 else 0
        # cross = vdx * wdy - wdx * vdy
        lp = _mul_expansion(int(lens[2 * vv]), ws[4 * vv:4 * vv + 2],
                            int(lens[2 * w + 1]), ws[4 * w + 2:4 * w + 4], p, t1, t2)
        lq = _mul_expansion(int(lens[2 * w]), ws[4 * w:4 * w + 2],
                            int(lens[2 * vv + 1]), ws[4 * vv + 2:4 * vv + 4], q, t1, t2)
        for i in range(lq):
            q[i] = -q[i]
        lc = _fast_expansion_sum_zeroelim(lp, p, lq, q, cross)
        # lift = udx^2 + udy^2
        lx = int(lens[2 * u])
        ly = int(lens[2 * u + 1])
        lp = _mul_expansion(lx, ws[4 * u:4 * u + 2], lx, ws[4 * u:4 * u + 2], p, t1, t2)
        lq = _mul_expansion(ly, ws[4 * u + 2:4 * u + 4], ly, ws[4 * u + 2:4 * u + 4],
                            q, t1, t2)
        ll = _fast_expansion_sum_zeroelim(lp, p, lq, q, lift)
        lt = _mul_expansion(ll, lift, lc, cross, term, t1, t2)
        if k == 0:
            for i in range(lt):
                acc[i] = term[i]
            la = lt
        else:
            la = _fast_expansion_sum_zeroelim(la, acc, lt, term, acc2)
            for i in range(la):
                acc[i] = acc2[i]
    return acc[la - 1]


@njit(cache=True)
def _orient2d(ax, ay, bx, by, cx, cy):
    """> 0 if a, b, c are counter-clockwise, < 0 if clockwise, 0 if collinear.

    Sign is exact (Shewchuk's orient2d: error-bounded float filter, exact fallback)."""
    detleft = (ax - cx) * (by - cy)
    detright = (ay - cy) * (bx - cx)
    det = detleft - detright
    if detleft > 0.0:
        if detright <= 0.0:
            return det
        detsum = detleft + detright
    elif detleft < 0.0:
        if detright >= 0.0:
            return det
        detsum = -detleft - detright
    else:
        return det
    errbound = _CCW_ERRBOUND_A * detsum
    if det >= errbound or -det >= errbound:
        return det
    return _orient2d_exact(ax, ay, bx, by, cx, cy)


@njit(cache=True)
def _incircle(ax, ay, bx, by, cx, cy, dx, dy):
    """> 0 if d is strictly inside the circle through a, b, c (taken counter-
    clockwise), < 0 if strictly outside, 0 if co-circular.  Exact sign."""
    adx = ax - dx
    bdx = bx - dx
    cdx = cx - dx
    ady = ay - dy
    bdy = by - dy
    cdy = cy - dy
    bdxcdy = bdx * cdy
    cdxbdy = cdx * bdy
    alift = adx * adx + ady * ady
    cdxady = cdx * ady
    adxcdy = adx * cdy
    blift = bdx * bdx + bdy * bdy
    adxbdy = adx * bdy
    bdxady = bdx * ady
    clift = cdx * cdx + cdy * cdy
    det = (alift * (bdxcdy - cdxbdy) + blift * (cdxady - adxcdy)
           + clift * (adxbdy - bdxady))
    permanent = ((abs(bdxcdy) + abs(cdxbdy)) * alift
                 + (abs(cdxady) + abs(adxcdy)) * blift
                 + (abs(adxbdy) + abs(bdxady)) * clift)
    errbound = _ICC_ERRBOUND_A * permanent
    if det > errbound or -det > errbound:
        return det
    return _incircle_exact(ax, ay, bx, by, cx, cy, dx, dy)


def _point2(p):
    a = np.asarray(p, dtype=np.float64).reshape(-1)
    if a.shape != (2,):
        raise ValueError("expected a 2D point")
    return float(a[0]), float(a[1])


def orient2d(a, b, c) -> float:
    """Exact-sign orientation of three 2D points: > 0 counter-clockwise,
    < 0 clockwise, 0 exactly collinear (only the sign is exact)."""
    return float(_orient2d(*_point2(a), *_point2(b), *_point2(c)))


def incircle(a, b, c, d) -> float:
    """Exact-sign incircle test: > 0 if d is strictly inside the circle through
    the counter-clockwise triangle a, b, c; < 0 outside; 0 exactly co-circular."""
    return float(_incircle(*_point2(a), *_point2(b), *_point2(c), *_point2(d)))


# --------------------------------------------------------------------------------------
# BRIO + Hilbert insertion order.
# --------------------------------------------------------------------------------------
_HILBERT_BITS = 16
_BRIO_FIRST_ROUND = 256


@njit(cache=True)
def _brio_keys(pts, rank, bits, first_round):
    """Sort keys (BRIO round << 40) | Hilbert index, the curve reversed in odd rounds.

    ``rank`` is a random permutation of range(n); point j goes to round 0 if
    rank[j] < first_round, else to round 1 + floor(log2(rank[j] / first_round)),
    so each round is as large as all earlier ones together (Amenta, Choi & Rote
    2003).  The Hilbert index of the quantised cell (qx, qy) on a 2^bits grid uses
    the classical iterative rotate-and-reflect formulation of the curve."""
    n = pts.shape[0]
    xmin = pts[0, 0]
    xmax = xmin
    ymin = pts[0, 1]
    ymax = ymin
    for i in range(n):
        x = pts[i, 0]
        y = pts[i, 1]
        if x < xmin:
            xmin = x
        if x > xmax:
            xmax = x
        if y < ymin:
            ymin = y
        if y > ymax:
            ymax = y
    side = np.int64(1) << bits
    top = side - 1
    sx = top / (xmax - xmin) if xmax > xmin else 0.0
    sy = top / (ymax - ymin) if ymax > ymin else 0.0
    maxd = (np.int64(1) << (2 * bits)) - 1
    keys = np.empty(n, dtype=np.int64)
    for j in range(n):
        q = np.int64(rank[j]) // first_round
        rnd = np.int64(0)
        while q > 0:
            rnd += 1
            q >>= 1
        qx = np.int64((pts[j, 0] - xmin) * sx)
        qy = np.int64((pts[j, 1] - ymin) * sy)
        qx = min(max(qx, 0), top)
        qy = min(max(qy, 0), top)
        d = np.int64(0)
        s = side >> 1
        while s > 0:
            rx = 1 if (qx & s) > 0 else 0
            ry = 1 if (qy & s) > 0 else 0
            d += s * s * ((3 * rx) ^ ry)
            if ry == 0:
                if rx == 1:
                    qx = top - qx
                    qy = top - qy
                qx, qy = qy, qx
            s >>= 1
        if rnd & 1:
            d = maxd - d
        keys[j] = (rnd << 40) | d
    return keys


# --------------------------------------------------------------------------------------
# Triangulation data structure: one record of 8 int32 per triangle t,
#   T[8t + k], k < 3: k-th vertex of t (counter-clockwise); inf = n is the
#                     infinite vertex of the ghost triangles;
#   T[8t + 3]:        stamp of the last insertion that examined t;
#   T[8t + 4 + k]:    triangle across the edge opposite vertex k, i.e. the edge
#                     (T[8t + k+1], T[8t + k+2]) (indices mod 3).
# A ghost triangle (a, b, inf) lies over hull edge a -> b, the outside of the hull
# being on the left of a -> b.  Its "circumdisk" is that open half-plane plus the
# open segment (a, b) (the limit of circumdisks through a, b and a far point).
# --------------------------------------------------------------------------------------

@njit(cache=True)
def _build_mesh(points, orig):
    """Delaunay triangulation of points inserted in the order ``orig``.

    Returns (T, ntri, rep, pts, status): the triangle records T (see below; ghost
    triangles carry the vertex ``n``), their number, ``rep[i]`` the input index
    kept for local vertex i, the points in insertion order, and status 0 on
    success, 1 if all points are collinear or fewer than 3 are distinct, 2 if the
    predicates were inconsistent (only possible outside their exact range, i.e.
    with floating-point underflow; guards keep the data structure in bounds)."""
    n = points.shape[0]
    pts = np.empty((n, 2), dtype=np.float64)      # copy in insertion order (locality)
    for i in range(n):
        pts[i, 0] = points[orig[i], 0]
        pts[i, 1] = points[orig[i], 1]
    inf = np.int64(n)
    empty = np.empty(0, dtype=np.int32)
    norep = np.empty(0, dtype=np.int64)

    # ---- initial triangle: first point, first point different from it, first
    # point not collinear with those two (in insertion order); the points skipped
    # on the way are inserted later like all others.
    i0 = 0
    i1 = -1
    for i in range(1, n):
        if pts[i, 0] != pts[0, 0] or pts[i, 1] != pts[0, 1]:
            i1 = i
            break
    if i1 < 0:
        return empty, 0, norep, pts, 1
    i2 = -1
    for i in range(i1 + 1, n):
        if _orient2d(pts[i0, 0], pts[i0, 1], pts[i1, 0], pts[i1, 1],
                     pts[i, 0], pts[i, 1]) != 0.0:
            i2 = i
            break
    if i2 < 0:
        return empty, 0, norep, pts, 1
    if _orient2d(pts[i0, 0], pts[i0, 1], pts[i1, 0], pts[i1, 1],
                 pts[i2, 0], pts[i2, 1]) < 0.0:
        i1, i2 = i2, i1

    # Euler: n points give exactly 2n - 2 triangles, ghosts included.
    maxt = 2 * n + 8
    # one 32-byte record per triangle t (two per cache line):
    #   T[8t + k], k < 3: vertices;  T[8t + 3]: stamp;  T[8t + 4 + k]: neighbours
    T = np.empty(8 * maxt, dtype=np.int32)
    cav = np.empty(maxt, dtype=np.int32)          # cavity triangles (BFS queue)
    bu = np.empty(maxt + 4, dtype=np.int32)       # cavity boundary edges u -> v,
    bv = np.empty(maxt + 4, dtype=np.int32)       # the triangle outside them and
    bo = np.empty(maxt + 4, dtype=np.int32)       # the slot in it pointing back
    bj = np.empty(maxt + 4, dtype=np.int8)
    start_at = np.empty(n + 1, dtype=np.int32)    # new triangle whose edge starts at v
    rep = orig.copy()                             # original index kept for each vertex

    # real triangle (i0, i1, i2) and the three ghosts over its edges
    T[0] = i0
    T[1] = i1
    T[2] = i2
    T[8] = i1
    T[9] = i0
    T[10] = inf
    T[16] = i2
    T[17] = i1
    T[18] = inf
    T[24] = i0
    T[25] = i2
    T[26] = inf
    # neighbours (worked out by hand: T[8t + 4 + k] is across the edge opposite k)
    T[4] = 2
    T[5] = 3
    T[6] = 1
    T[12] = 3
    T[13] = 2
    T[14] = 0
    T[20] = 1
    T[21] = 3
    T[22] = 0
    T[28] = 2
    T[29] = 1
    T[30] = 0
    T[3] = 0                                      # stamps
    T[11] = 0
    T[19] = 0
    T[27] = 0
    ntri = 4
    last = 0                                      # a real triangle to start walks at
    rng_state = np.int64(0x2545F4914F6CDD1D)

    for it in range(n):
        if it == i0 or it == i1 or it == i2:
            continue
        px = pts[it, 0]
        py = pts[it, 1]

        # ---- point location: "remembering stochastic walk" (Devillers, Pion &
        # Teillaud 2002) from `last`: cross any edge that has p strictly on its
        # far side, never back through the edge just crossed, the first edge
        # tried chosen pseudo-randomly (so the walk terminates in any
        # triangulation, even in the presence of co-circular ties).  Ends in a
        # real triangle whose closure contains p, or in a ghost triangle whose
        # hull edge p is strictly outside of.
        t = np.int64(last)
        prev = np.int64(-1)
        steps = 0
        while True:
            steps += 1
            if steps > 4 * ntri + 64:            # cannot happen with exact predicates
                return empty, 0, norep, pts, 2
            b8 = 8 * t
            rng_state = (rng_state * 6364136223846793005 + 1442695040888963407) & 0x7FFFFFFFFFFFFFFF
            k0 = (rng_state >> 33) % 3
            moved = False
            for kk in range(3):
                k = k0 + kk
                if k >= 3:
                    k -= 3
                nb = np.int64(T[b8 + 4 + k])
                if nb == prev:
                    continue
                k1 = k + 1 if k < 2 else 0
                k2 = k1 + 1 if k1 < 2 else 0
                u = T[b8 + k1]
                w = T[b8 + k2]
                if _orient2d(pts[u, 0], pts[u, 1], pts[w, 0], pts[w, 1], px, py) < 0.0:
                    prev = t
                    t = nb
                    moved = True
                    break
            if not moved:
                break
            if T[8 * t] == inf or T[8 * t + 1] == inf or T[8 * t + 2] == inf:
                break
        t0 = t

        # ---- duplicate point?  If p coincides with a vertex the walk has ended
        # in a real triangle having that vertex as a corner.
        a = T[8 * t0]
        b = T[8 * t0 + 1]
        c = T[8 * t0 + 2]
        if a != inf and b != inf and c != inf:
            dup = -1
            if pts[a, 0] == px and pts[a, 1] == py:
                dup = a
            elif pts[b, 0] == px and pts[b, 1] == py:
                dup = b
            elif pts[c, 0] == px and pts[c, 1] == py:
                dup = c
            if dup >= 0:
                if orig[it] < rep[dup]:
                    rep[dup] = orig[it]
                continue

        # ---- Bowyer-Watson cavity: all triangles whose circumdisk contains p,
        # grown breadth-first from t0 (cav doubles as the queue).  stamp marks
        # triangles found in (sc) or out of (sr) conflict during this insertion.
        sc = 2 * it + 2
        sr = sc + 1
        cav[0] = t0
        T[8 * t0 + 3] = sc
        ncav = 1
        nbd = 0
        qi = 0
        while qi < ncav:
            t = cav[qi]
            qi += 1
            b8 = 8 * t
            for k in range(3):
                nb = np.int64(T[b8 + 4 + k])
                s = T[8 * nb + 3]
                if s == sc:
                    continue
                if s != sr:
                    # is p inside the open circumdisk of nb (ghost or real)?
                    a = T[8 * nb]
                    b = T[8 * nb + 1]
                    c = T[8 * nb + 2]
                    if a == inf or b == inf or c == inf:
                        if c == inf:
                            gs = a
                            ge = b
                        elif a == inf:
                            gs = b
                            ge = c
                        else:
                            gs = c
                            ge = a
                        sx = pts[gs, 0]
                        sy = pts[gs, 1]
                        ex = pts[ge, 0]
                        ey = pts[ge, 1]
                        o = _orient2d(sx, sy, ex, ey, px, py)
                        if o > 0.0:
                            conflict = True
                        elif o < 0.0:
                            conflict = False
                        elif sx != ex:
                            # collinear with the hull edge: exact comparisons
                            conflict = (sx < px < ex) or (ex < px < sx)
                        else:
                            conflict = (sy < py < ey) or (ey < py < sy)
                    else:
                        # _incircle(a, b, c, p) > 0, its float filter inlined by hand
                        ax = pts[a, 0]
                        ay = pts[a, 1]
                        bx = pts[b, 0]
                        by = pts[b, 1]
                        cx = pts[c, 0]
                        cy = pts[c, 1]
                        adx = ax - px
                        bdx = bx - px
                        cdx = cx - px
                        ady = ay - py
                        bdy = by - py
                        cdy = cy - py
                        bdxcdy = bdx * cdy
                        cdxbdy = cdx * bdy
                        alift = adx * adx + ady * ady
                        cdxady = cdx * ady
                        adxcdy = adx * cdy
                        blift = bdx * bdx + bdy * bdy
                        adxbdy = adx * bdy
                        bdxady = bdx * ady
                        clift = cdx * cdx + cdy * cdy
                        det = (alift * (bdxcdy - cdxbdy) + blift * (cdxady - adxcdy)
                               + clift * (adxbdy - bdxady))
                        permanent = ((abs(bdxcdy) + abs(cdxbdy)) * alift
                                     + (abs(cdxady) + abs(adxcdy)) * blift
                                     + (abs(adxbdy) + abs(bdxady)) * clift)
                        errbound = _ICC_ERRBOUND_A * permanent
                        if det > errbound:
                            conflict = True
                        elif -det > errbound:
                            conflict = False
                        else:
                            conflict = _incircle_exact(ax, ay, bx, by, cx, cy, px, py) > 0.0
                    if conflict:
                        T[8 * nb + 3] = sc
                        cav[ncav] = nb
                        ncav += 1
                        continue
                    T[8 * nb + 3] = sr
                k1 = k + 1 if k < 2 else 0
                k2 = k1 + 1 if k1 < 2 else 0
                bu[nbd] = T[b8 + k1]
                bv[nbd] = T[b8 + k2]
                bo[nbd] = nb
                if T[8 * nb + 4] == t:
                    bj[nbd] = 0
                elif T[8 * nb + 4 + 1] == t:
                    bj[nbd] = 1
                else:
                    bj[nbd] = 2
                nbd += 1

        # ---- retriangulate the (star-shaped) cavity: one triangle (u, v, p) per
        # boundary edge u -> v, reusing the cavity's slots (nbd = ncav + 2).
        if nbd != ncav + 2:                      # cannot happen with exact predicates
            return empty, 0, norep, pts, 2
        base = ntri
        for k in range(nbd):
            nt = cav[k] if k < ncav else base + (k - ncav)
            u = bu[k]
            T[8 * nt] = u
            T[8 * nt + 1] = bv[k]
            T[8 * nt + 2] = it
            T[8 * nt + 3] = sc
            o = bo[k]
            T[8 * nt + 4 + 2] = o
            T[8 * o + 4 + bj[k]] = nt
            start_at[u] = nt
            if u != inf and bv[k] != inf:
                last = nt
        for k in range(nbd):
            nt = cav[k] if k < ncav else base + (k - ncav)
            s = start_at[bv[k]]
            T[8 * nt + 4] = s                         # across edge (v, p)
            T[8 * s + 4 + 1] = nt                     # across edge (p, v) of s
        ntri = base + (nbd - ncav)

    return T, ntri, rep, pts, 0


@njit(cache=True)
def _collect_triangles(T, ntri, rep, n):
    """The real triangles of a mesh, as input indices (rows of rep)."""
    inf = n
    m = 0
    for t in range(ntri):
        if T[8 * t] != inf and T[8 * t + 1] != inf and T[8 * t + 2] != inf:
            m += 1
    out = np.empty((m, 3), dtype=np.int64)
    m = 0
    for t in range(ntri):
        a = T[8 * t]
        b = T[8 * t + 1]
        c = T[8 * t + 2]
        if a != inf and b != inf and c != inf:
            out[m, 0] = rep[a]
            out[m, 1] = rep[b]
            out[m, 2] = rep[c]
            m += 1
    return out


@njit(cache=True)
def _collect_mesh(T, ntri, n):
    """The real triangles in local (insertion-order) vertex indices, and their
    neighbours: nb[t, k] is the triangle across the edge opposite vertex k, -1
    on the convex hull."""
    inf = n
    cid = np.full(ntri, -1, dtype=np.int64)
    m = 0
    for t in range(ntri):
        if T[8 * t] != inf and T[8 * t + 1] != inf and T[8 * t + 2] != inf:
            cid[t] = m
            m += 1
    tri = np.empty((m, 3), dtype=np.int64)
    nb = np.empty((m, 3), dtype=np.int64)
    for t in range(ntri):
        c = cid[t]
        if c < 0:
            continue
        for k in range(3):
            tri[c, k] = T[8 * t + k]
            nb[c, k] = cid[T[8 * t + 4 + k]]
    return tri, nb


def _triangulate(points, orig):
    """(triangles (m, 3) of input indices, status) -- see ``_build_mesh``."""
    T, ntri, rep, _, status = _build_mesh(points, orig)
    if status:
        return np.empty((0, 3), dtype=np.int64), status
    return _collect_triangles(T, ntri, rep, points.shape[0]), 0


@njit(cache=True)
def _orient_triangles(pts, tris):
    """Exact-sign orient2d of each triangle (rows of vertex indices into pts)."""
    out = np.empty(tris.shape[0], dtype=np.float64)
    for t in range(tris.shape[0]):
        a = tris[t, 0]
        b = tris[t, 1]
        c = tris[t, 2]
        out[t] = _orient2d(pts[a, 0], pts[a, 1], pts[b, 0], pts[b, 1],
                           pts[c, 0], pts[c, 1])
    return out


# --------------------------------------------------------------------------------------
# Public functions.
# --------------------------------------------------------------------------------------
_BRIO_SEED = 0x5EED_D1A6


def _as_points(points) -> np.ndarray:
    pts = np.ascontiguousarray(points, dtype=np.float64)
    if pts.ndim != 2 or pts.shape[1] != 2:
        raise ValueError(f"points must have shape (n, 2), got {pts.shape}")
    if pts.shape[0] < 3:
        raise ValueError("a triangulation needs at least 3 points")
    if not np.isfinite(pts).all():
        raise ValueError("points must be finite")
    return pts


def delaunay_triangles(points: np.ndarray) -> np.ndarray:
    """(n,2) float64 -> (m,3) int64 array of triangle vertex indices (counter-clockwise),
    the Delaunay triangulation of the distinct points. Raises ValueError if fewer than 3
    points or all collinear. Duplicate points: keep the first occurrence only (later
    copies appear in no triangle).

    Exact predicates are used throughout, so the result is a valid triangulation of the
    convex hull whose triangles all have empty circumcircles (incircle <= 0 for every
    input point).  When four or more points are exactly co-circular, one of the valid
    Delaunay triangulations is returned.  Points on the hull boundary (also collinear
    ones in the interior of hull edges) are all vertices of the triangulation.
    """
    pts = _as_points(points)
    n = pts.shape[0]
    pts, _ = scale_for_predicates(pts)
    if n >= 2 ** 30:
        raise ValueError("too many points (int32 triangle indices)")
    rank = np.random.default_rng(_BRIO_SEED).permutation(n)
    keys = _brio_keys(pts, rank, _HILBERT_BITS, _BRIO_FIRST_ROUND)
    del rank
    order = np.argsort(keys).astype(np.int64, copy=False)
    del keys
    tris, status = _triangulate(pts, order)
    if status == 1:
        raise ValueError("points are all collinear (or fewer than 3 distinct points)")
    if status != 0:
        raise FloatingPointError(
            "inconsistent geometric predicates (coordinate differences so small that "
            "their products underflow?); try delaunay_triangles_qhull")
    return tris


def delaunay_mesh(points: np.ndarray):
    """Delaunay triangulation with adjacency, in the triangulator's own vertex order.

    Returns ``(order, local_points, triangles, neighbours)``: local vertex i is
    input row ``order[i]``, at ``local_points[i]`` (= ``points[order[i]]``; a
    Hilbert-curve order, good for memory locality);
    ``triangles`` (m, 3) CCW in local indices; ``neighbours[t, k]`` the triangle
    across the edge opposite vertex k, or -1 on the convex hull.  Of duplicate
    points one local vertex is used and the others appear in no triangle.
    Raises ValueError if all points are collinear (or fewer than 3 distinct),
    FloatingPointError if the predicates were inconsistent (see
    ``delaunay_triangles``).
    """
    pts = _as_points(points)
    n = pts.shape[0]
    pts, scaled = scale_for_predicates(pts)
    if n >= 2 ** 30:
        raise ValueError("too many points (int32 triangle indices)")
    rank = np.random.default_rng(_BRIO_SEED).permutation(n)
    keys = _brio_keys(pts, rank, _HILBERT_BITS, _BRIO_FIRST_ROUND)
    del rank
    order = np.argsort(keys).astype(np.int64, copy=False)
    del keys
    T, ntri, _, local, status = _build_mesh(pts, order)
    if status == 1:
        raise ValueError("points are all collinear (or fewer than 3 distinct points)")
    if status != 0:
        raise FloatingPointError("inconsistent geometric predicates")
    tri, nb = _collect_mesh(T, ntri, n)
    del T
    if scaled:
        local = np.ascontiguousarray(np.asarray(points, dtype=np.float64)[order])
    return order, local, tri, nb


def delaunay_triangles_qhull(points) -> np.ndarray:
    """Fallback via scipy.spatial.Delaunay on CENTRED coordinates (points - mean), same
    output convention (CCW)."""
    from scipy.spatial import Delaunay, QhullError

    pts = _as_points(points)
    # keep the first occurrence of duplicated points, as delaunay_triangles does
    # (+ 0.0 turns -0.0 into 0.0, which compare equal but differ bitwise)
    uniq, first = np.unique(pts + 0.0, axis=0, return_index=True)
    if uniq.shape[0] < 3:
        raise ValueError("a triangulation needs at least 3 distinct points")
    first = np.sort(first)
    sub = pts[first]
    centred = sub - sub.mean(axis=0)
    try:
        simp = Delaunay(centred).simplices.astype(np.int64)
    except QhullError as exc:
        raise ValueError(f"qhull failed (collinear points?): {exc}") from None
    # orientation with the exact predicate on the original (uncentred) coordinates
    orient = _orient_triangles(sub, simp)
    simp = simp[orient != 0.0]
    flip = orient[orient != 0.0] < 0.0
    simp[flip] = simp[flip][:, [0, 2, 1]]
    return first[simp]
