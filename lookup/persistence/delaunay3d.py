"""Exact, fast 3D Delaunay tetrahedralisation compiled with numba.

Public API
----------
``delaunay_mesh_3d(points)``
    (n, 3) float64 -> ``(order, local_points, tets, neighbours)``: the Delaunay
    tetrahedralisation of the distinct points with its face adjacency, in the
    triangulator's own (insertion) vertex order.

Sign conventions
----------------
``orient3d(a, b, c, d) = det[b - a; c - a; d - a]`` (six times the signed volume,
right-handed): > 0 when a, b, c appear counter-clockwise seen from d.  This is the
*negative* of the quantity Shewchuk (1997) calls orient3d,
``det[a - d; b - d; c - d]``.  Every returned tetrahedron (a, b, c, d) has
``orient3d(a, b, c, d) > 0``.  ``insphere(a, b, c, d, e)`` is > 0 when e lies
strictly inside the sphere through a positively oriented a, b, c, d (the negative
of Shewchuk's insphere, for the same reason).  The private kernels
``_orient3d_filter``, ``_insphere_filter`` (float filters, NaN when unsure) and
``_exact_pred`` (exact fallback) follow these conventions.

Algorithm
---------
* Insertion order: BRIO, "biased randomized insertion order" (N. Amenta, S. Choi,
  G. Rote, "Incremental constructions con BRIO", Proc. 19th ACM Symposium on
  Computational Geometry (SoCG), 2003, pp. 211-219).  The points are split at
  random into rounds of geometrically growing size (each round about as large as
  all earlier ones together); inside a round the points follow a 3D Hilbert curve
  (D. Hilbert, Math. Ann. 38, 1891), its index computed with Skilling's transpose
  algorithm (J. Skilling, "Programming the Hilbert curve", AIP Conf. Proc. 707,
  2004, pp. 381-387), its direction alternating between rounds.  The rounds keep
  the expected cost of the randomized incremental construction; the curve keeps
  consecutive points close together (short walks, few cache misses).
* Point location: "remembering stochastic walk" (O. Devillers, S. Pion,
  M. Teillaud, "Walking in a triangulation", Int. J. Found. Comput. Sci. 13(2),
  2002, pp. 181-199) from the last created tetrahedron: cross a face that has p
  strictly on its far side, never back through the face just crossed, the first
  face tried chosen pseudo-randomly.  In a Delaunay tetrahedralisation the
  "in front of" relation is acyclic (H. Edelsbrunner, "An acyclicity theorem for
  cell complexes in d dimensions", Combinatorica 10, 1990), so the walk ends,
  co-spherical ties included.
* Insertion: Bowyer-Watson cavity retriangulation (A. Bowyer, "Computing
  Dirichlet tessellations", Comput. J. 24(2), 1981, pp. 162-166; D. F. Watson,
  "Computing the n-dimensional Delaunay tessellation with application to Voronoi
  polytopes", Comput. J. 24(2), 1981, pp. 167-172).  The convex hull is closed with
  "ghost" tetrahedra sharing one infinite vertex (a common device of
  incremental Delaunay codes), so no bounding super-tetrahedron exists.  A ghost over hull face
  F = (a, b, c) is in conflict with p when p lies strictly outside F's plane, or
  on that plane strictly inside the circumcircle of F; the latter is decided
  exactly as ``insphere`` of p against the real tetrahedron under F (its
  circumsphere meets F's plane in F's circumcircle).  Real tetrahedra use the
  strict insphere test, so co-spherical ties are never "in conflict" and every
  boundary face of the cavity sees p strictly on its inner side: the cavity is
  star-shaped from p and its cone from p is a valid set of positively oriented
  tetrahedra.  The new tetrahedra are glued across the cavity boundary's edges
  through a small open-addressing hash table; the boundary is checked to be a
  closed 2-sphere (every edge in exactly two faces, V - E + F = 2).
* Predicates: J. R. Shewchuk, "Adaptive Precision Floating-Point Arithmetic and
  Fast Robust Geometric Predicates", Discrete & Computational Geometry 18(3),
  1997, pp. 305-363.  orient3d and insphere are first evaluated in floating point
  with the semi-static error bounds of that paper (o3derrboundA = (7 + 56 eps) eps,
  isperrboundA = (16 + 224 eps) eps, times the "permanent" of the expression);
  when the filter cannot certify the sign, the determinant is evaluated exactly
  on the raw coordinates, as the 4x4 determinant [x y z 1] (orient3d) or the 5x5
  determinant [x y z x^2+y^2+z^2 1] (insphere), expanded through exact 2x2 and
  3x3 minors with floating-point expansion arithmetic (Two-Sum, Two-Product with
  Dekker's split, Fast-Expansion-Sum-Zeroelim and Scale-Expansion-Zeroelim of the
  same paper; this is the structure of Shewchuk's orient3dexact / insphereexact).
  Exactness assumes IEEE-754 binary64 with round-to-nearest-even (numba does not
  contract to FMA without fastmath) and no overflow or underflow in the degree-5
  products.  The input is first rescaled by an exact power of two when its largest
  |coordinate| is outside 2^-64 .. 2^64 (signs are scale-invariant), so overflow
  cannot occur; underflow needs nonzero coordinates (or their differences) below
  about 1e-60 times the largest |coordinate|.  In that regime the result may be
  invalid; guards (walk length, cavity topology) keep the data structure in
  bounds and raise FloatingPointError when they detect an inconsistency.

All per-point work runs inside ``numba.njit(cache=True)`` functions.
"""
from __future__ import annotations

import numpy as np

from .expansions import (
    _EPS,
    _SPLITTER,
    _fast_expansion_sum_zeroelim,
    _scale_expansion_zeroelim,
    scale_for_predicates,
)
from .jit import njit

__all__ = ["delaunay_mesh_3d"]

# --------------------------------------------------------------------------------------
# Floating-point expansion arithmetic (Shewchuk 1997, section 2).  The error-free
# transformations are written out inline below (their formulas: ``expansions.py``);
# Scale-Expansion-Zeroelim and Fast-Expansion-Sum-Zeroelim are shared with the 2D
# kernel.
# --------------------------------------------------------------------------------------
_O3D_ERRBOUND_A = (7.0 + 56.0 * _EPS) * _EPS
_ISP_ERRBOUND_A = (16.0 + 224.0 * _EPS) * _EPS

# Layout of the float64 workspace of the exact predicates (up to 5 points, indices
# 0..4; minors are stored sparsely by index for simplicity).
_WS_C = 0                  # coordinates: 3 per point                         (15)
_WS_M = 16                 # 2x2 minors m(i, j), i < j: 4 slots at 4 (5 i + j)  (100)
_WS_ML = 116               # their lengths                                      (25)
_WS_D = 144                # 3x3 minors d(i, j, k): 24 slots at 24 (25 i + 5 j + k)
_WS_DL = 3144              # their lengths                                     (125)
_WS_S1 = 3272              # scratch: one scaled expansion                     (192)
_WS_S2 = 3472              # w_i * O_i                                        (1152)
_WS_S3 = 4624              # scratch for sums into S2                         (1152)
_WS_Q = 5776               # O_i (an orient3d of four points)                   (96)
_WS_QT = 5872              # scratch for sums into Q / a 3x3 minor              (96)
_WS_W = 5968               # w_i = x^2 + y^2 + z^2                               (6)
_WS_WT = 5976              # scratch for sums into W                             (6)
_WS_ACC = 5984             # the insphere accumulator                         (5760)
_WS_ACC2 = 11744           # scratch for sums into it                         (5760)
_WS_SIZE = 17504


@njit(cache=True)
def _two_product(a, b, h):
    """h <- a * b as an expansion of length 1 or 2 (Two-Product); returns it."""
    x = a * b
    c = _SPLITTER * a
    ahi = c - (c - a)
    alo = a - ahi
    c = _SPLITTER * b
    bhi = c - (c - b)
    blo = b - bhi
    y = alo * blo - (((x - ahi * bhi) - alo * bhi) - ahi * blo)
    if y != 0.0:
        h[0] = y
        h[1] = x
        return 2
    h[0] = x
    return 1


@njit(cache=True)
def _exact_pred(npts, ax, ay, az, bx, by, bz, cx, cy, cz, dx, dy, dz, ex, ey, ez, ws):
    """Most significant component of an exact determinant, in this module's sign
    conventions, of the points a, b, c, d (npts = 4) or a, ..., e (npts = 5):

    * npts = 4: ``det[b - a; c - a; d - a]``, minus Shewchuk's orient3d(a, b, c, d)
      = minus det[[x y z 1]] over the rows a, b, c, d;
    * npts = 5: minus Shewchuk's insphere(a, b, c, d, e).  That equals the 5x5
      determinant with rows [x, y, z, w, 1], w = x^2 + y^2 + z^2 (subtract row e,
      expand along the ones, then drop the multiple 2 e.(p - e) of the first
      three columns from the lifted column).  Expanding along the w column,

          insphere_S = sum_i (-1)^(i+1) w_i O_i,   i = 0..4 over (a, b, c, d, e),

      with O_i = det[[x y z 1]] of the other four points in order.

    Everything is computed from the raw coordinates as in Shewchuk's
    orient3dexact / insphereexact: exact 2x2 minors m(i, j) = x_i y_j - x_j y_i
    (Two-Product, Fast-Expansion-Sum), 3x3 minors d(i, j, k) = z_i m(j, k) -
    z_j m(i, k) + z_k m(i, j) (Scale-Expansion), O = d(p,q,r) - d(p,q,s) +
    d(p,r,s) - d(q,r,s) (cofactors along the ones), then the lifted sum.  The
    expansion lengths are bounded by 4, 24, 96, 6 (w), 1152 (w O) and 5760."""
    c = ws[_WS_C:_WS_C + 15]
    c[0] = ax
    c[1] = ay
    c[2] = az
    c[3] = bx
    c[4] = by
    c[5] = bz
    c[6] = cx
    c[7] = cy
    c[8] = cz
    c[9] = dx
    c[10] = dy
    c[11] = dz
    c[12] = ex
    c[13] = ey
    c[14] = ez
    s1 = ws[_WS_S1:_WS_S1 + 192]
    s2 = ws[_WS_S2:_WS_S2 + 1152]
    s3 = ws[_WS_S3:_WS_S3 + 1152]
    quad = ws[_WS_Q:_WS_Q + 96]
    qt = ws[_WS_QT:_WS_QT + 96]
    w = ws[_WS_W:_WS_W + 6]
    wt = ws[_WS_WT:_WS_WT + 6]
    acc = ws[_WS_ACC:_WS_ACC + 5760]
    acc2 = ws[_WS_ACC2:_WS_ACC2 + 5760]
    # 2x2 minors
    for i in range(npts):
        for j in range(i + 1, npts):
            la = _two_product(c[3 * i], c[3 * j + 1], s1[0:2])
            lb = _two_product(-c[3 * j], c[3 * i + 1], s1[2:4])
            o = _WS_M + 4 * (5 * i + j)
            ws[_WS_ML + 5 * i + j] = _fast_expansion_sum_zeroelim(
                la, s1[0:2], lb, s1[2:4], ws[o:o + 4])
    # 3x3 minors: terms (p, q, r) = (j, k, i), (i, k, j), (i, j, k) of z_r m(p, q),
    # signs +, -, +
    for i in range(npts):
        for j in range(i + 1, npts):
            for k in range(j + 1, npts):
                o = _WS_D + 24 * (25 * i + 5 * j + k)
                dm = ws[o:o + 24]
                ld = 0
                for t in range(3):
                    p = j if t == 0 else i
                    q = j if t == 2 else k
                    r = i if t == 0 else (j if t == 1 else k)
                    z = -c[3 * r + 2] if t == 1 else c[3 * r + 2]
                    om = _WS_M + 4 * (5 * p + q)
                    ls = _scale_expansion_zeroelim(int(ws[_WS_ML + 5 * p + q]), ws[om:om + 4],
                                                   z, s1)
                    if t == 0:
                        for m in range(ls):
                            dm[m] = s1[m]
                        ld = ls
                    else:
                        ld = _fast_expansion_sum_zeroelim(ld, dm, ls, s1, qt)
                        for m in range(ld):
                            dm[m] = qt[m]
                ws[_WS_DL + 25 * i + 5 * j + k] = ld
    la = 0
    for om in range(4 if npts == 4 else 0, 5):
        # O_om over the other four points p0 < p1 < p2 < p3: sum over the dropped
        # one, index u, of (-1)^(u+1) d(the remaining three)
        lq = 0
        for u in range(4):
            tr0 = -1
            tr1 = -1
            tr2 = -1
            idx = 0
            for p in range(5 if npts == 5 else 4):
                if p == om:
                    continue
                if idx != u:
                    if tr0 < 0:
                        tr0 = p
                    elif tr1 < 0:
                        tr1 = p
                    else:
                        tr2 = p
                idx += 1
            di = 25 * tr0 + 5 * tr1 + tr2
            ld = int(ws[_WS_DL + di])
            neg = (u & 1) == 0
            for m in range(ld):
                v = ws[_WS_D + 24 * di + m]
                s1[m] = -v if neg else v
            if u == 0:
                for m in range(ld):
                    quad[m] = s1[m]
                lq = ld
            else:
                lq = _fast_expansion_sum_zeroelim(lq, quad, ld, s1, qt)
                for m in range(lq):
                    quad[m] = qt[m]
        if npts == 4:
            return -quad[lq - 1]
        # w_om = x^2 + y^2 + z^2 exactly, times (-1)^om
        lw = 0
        for t in range(3):
            x = c[3 * om + t]
            if om & 1:
                l1 = _two_product(-x, x, s1)
            else:
                l1 = _two_product(x, x, s1)
            if t == 0:
                for m in range(l1):
                    w[m] = s1[m]
                lw = l1
            else:
                lw = _fast_expansion_sum_zeroelim(lw, w, l1, s1, wt)
                for m in range(lw):
                    w[m] = wt[m]
        # term = w O: the sum of O scaled by each component of w
        lt = 0
        for t in range(lw):
            ls = _scale_expansion_zeroelim(lq, quad, w[t], s1)
            if t == 0:
                for m in range(ls):
                    s2[m] = s1[m]
                lt = ls
            else:
                lt = _fast_expansion_sum_zeroelim(lt, s2, ls, s1, s3)
                for m in range(lt):
                    s2[m] = s3[m]
        if om == 0:
            for m in range(lt):
                acc[m] = s2[m]
            la = lt
        else:
            la = _fast_expansion_sum_zeroelim(la, acc, lt, s2, acc2)
            for m in range(la):
                acc[m] = acc2[m]
    return acc[la - 1]


@njit(cache=True)
def _orient3d_filter(ax, ay, az, bx, by, bz, cx, cy, cz, dx, dy, dz):
    """Floating-point det[b - a; c - a; d - a] if its sign is certain, else NaN.

    Shewchuk's orient3d, det[a - d; b - d; c - d], with his a-priori filter
    (|det| > o3derrboundA times the permanent certifies the sign), negated.
    Takes no array argument, so calls from the builder carry no reference
    counting; the uncertain case goes to ``_exact_pred``."""
    adx = ax - dx
    bdx = bx - dx
    cdx = cx - dx
    ady = ay - dy
    bdy = by - dy
    cdy = cy - dy
    adz = az - dz
    bdz = bz - dz
    cdz = cz - dz
    bdxcdy = bdx * cdy
    cdxbdy = cdx * bdy
    cdxady = cdx * ady
    adxcdy = adx * cdy
    adxbdy = adx * bdy
    bdxady = bdx * ady
    det = adz * (bdxcdy - cdxbdy) + bdz * (cdxady - adxcdy) + cdz * (adxbdy - bdxady)
    permanent = ((abs(bdxcdy) + abs(cdxbdy)) * abs(adz)
                 + (abs(cdxady) + abs(adxcdy)) * abs(bdz)
                 + (abs(adxbdy) + abs(bdxady)) * abs(cdz))
    errbound = _O3D_ERRBOUND_A * permanent
    if det > errbound or -det > errbound:
        return -det
    return np.nan


@njit(cache=True)
def _insphere_filter(ax, ay, az, bx, by, bz, cx, cy, cz, dx, dy, dz, ex, ey, ez):
    """Floating-point insphere determinant if its sign is certain, else NaN.

    Shewchuk's insphere (the 4x4 determinant of the differences p - e and their
    squared lengths, through 2x2 and 3x3 minors) with his a-priori filter
    (|det| > isperrboundA times the permanent), negated for this module's
    orientation; the uncertain case goes to ``_exact_pred``."""
    aex = ax - ex
    bex = bx - ex
    cex = cx - ex
    dex = dx - ex
    aey = ay - ey
    bey = by - ey
    cey = cy - ey
    dey = dy - ey
    aez = az - ez
    bez = bz - ez
    cez = cz - ez
    dez = dz - ez
    aexbey = aex * bey
    bexaey = bex * aey
    ab = aexbey - bexaey
    bexcey = bex * cey
    cexbey = cex * bey
    bc = bexcey - cexbey
    cexdey = cex * dey
    dexcey = dex * cey
    cd = cexdey - dexcey
    dexaey = dex * aey
    aexdey = aex * dey
    da = dexaey - aexdey
    aexcey = aex * cey
    cexaey = cex * aey
    ac = aexcey - cexaey
    bexdey = bex * dey
    dexbey = dex * bey
    bd = bexdey - dexbey
    abc = aez * bc - bez * ac + cez * ab
    bcd = bez * cd - cez * bd + dez * bc
    cda = cez * da + dez * ac + aez * cd
    dab = dez * ab + aez * bd + bez * da
    alift = aex * aex + aey * aey + aez * aez
    blift = bex * bex + bey * bey + bez * bez
    clift = cex * cex + cey * cey + cez * cez
    dlift = dex * dex + dey * dey + dez * dez
    det = (dlift * abc - clift * dab) + (blift * cda - alift * bcd)
    aezp = abs(aez)
    bezp = abs(bez)
    cezp = abs(cez)
    dezp = abs(dez)
    abp = abs(aexbey) + abs(bexaey)
    bcp = abs(bexcey) + abs(cexbey)
    cdp = abs(cexdey) + abs(dexcey)
    dap = abs(dexaey) + abs(aexdey)
    acp = abs(aexcey) + abs(cexaey)
    bdp = abs(bexdey) + abs(dexbey)
    permanent = ((cdp * bezp + bdp * cezp + bcp * dezp) * alift
                 + (dap * cezp + acp * dezp + cdp * aezp) * blift
                 + (abp * dezp + bdp * aezp + dap * bezp) * clift
                 + (bcp * aezp + acp * bezp + abp * cezp) * dlift)
    errbound = _ISP_ERRBOUND_A * permanent
    if det > errbound or -det > errbound:
        return -det
    return np.nan


# --------------------------------------------------------------------------------------
# BRIO + 3D Hilbert insertion order.
# --------------------------------------------------------------------------------------
_HILBERT_BITS = 16
_BRIO_FIRST_ROUND = 256
_BRIO_SEED = 0x5EED_D3A6


@njit(cache=True)
def _hilbert_index_3d(qx, qy, qz, bits):
    """Index of the cell (qx, qy, qz) along the 3D Hilbert curve on a 2^bits grid.

    Skilling (2004), "AxestoTranspose": undo the excess rotations/reflections from
    the top bit down, Gray-encode, then read the transposed bits interleaved
    (x's bit first) from the most significant level."""
    x0 = qx
    x1 = qy
    x2 = qz
    m = np.int64(1) << (bits - 1)
    q = m
    while q > 1:
        p = q - 1
        if x0 & q:                       # i = 0
            x0 ^= p
        if x1 & q:                       # i = 1
            x0 ^= p
        else:
            t = (x0 ^ x1) & p
            x0 ^= t
            x1 ^= t
        if x2 & q:                       # i = 2
            x0 ^= p
        else:
            t = (x0 ^ x2) & p
            x0 ^= t
            x2 ^= t
        q >>= 1
    x1 ^= x0                             # Gray encode
    x2 ^= x1
    t = np.int64(0)
    q = m
    while q > 1:
        if x2 & q:
            t ^= q - 1
        q >>= 1
    x0 ^= t
    x1 ^= t
    x2 ^= t
    d = np.int64(0)
    for b in range(bits - 1, -1, -1):
        d = (d << 3) | (((x0 >> b) & 1) << 2) | (((x1 >> b) & 1) << 1) | ((x2 >> b) & 1)
    return d


@njit(cache=True)
def _brio_keys_3d(pts, rank, bits, first_round):
    """Sort keys (BRIO round << 3 bits) | Hilbert index, the curve reversed in odd
    rounds.

    ``rank`` is a random permutation of range(n); point j goes to round 0 if
    rank[j] < first_round, else to round 1 + floor(log2(rank[j] / first_round)),
    so each round is as large as all earlier ones together (Amenta, Choi & Rote
    2003).  The points are quantised on a 2^bits grid of cubic cells over their
    bounding box (one scale for all axes, so the cells stay cubes)."""
    n = pts.shape[0]
    lo = np.empty(3)
    hi = np.empty(3)
    for a in range(3):
        lo[a] = pts[0, a]
        hi[a] = pts[0, a]
    for i in range(n):
        for a in range(3):
            x = pts[i, a]
            if x < lo[a]:
                lo[a] = x
            if x > hi[a]:
                hi[a] = x
    ext = max(hi[0] - lo[0], hi[1] - lo[1], hi[2] - lo[2])
    top = (np.int64(1) << bits) - 1
    s = top / ext if ext > 0.0 else 0.0
    maxd = (np.int64(1) << (3 * bits)) - 1
    keys = np.empty(n, dtype=np.int64)
    for j in range(n):
        q = np.int64(rank[j]) // first_round
        rnd = np.int64(0)
        while q > 0:
            rnd += 1
            q >>= 1
        qx = min(max(np.int64((pts[j, 0] - lo[0]) * s), 0), top)
        qy = min(max(np.int64((pts[j, 1] - lo[1]) * s), 0), top)
        qz = min(max(np.int64((pts[j, 2] - lo[2]) * s), 0), top)
        d = _hilbert_index_3d(qx, qy, qz, bits)
        if rnd & 1:
            d = maxd - d
        keys[j] = (rnd << (3 * bits)) | d
    return keys


# --------------------------------------------------------------------------------------
# Tetrahedralisation data structure: one record of 8 int32 per tetrahedron t,
#   T[8t + k], k < 4: k-th vertex (positively oriented); inf = n is the infinite
#                     vertex of the ghost tetrahedra; T[8t] = -1 marks a free slot;
#   T[8t + 4 + k]:    4 u + j for the tetrahedron u across the face opposite vertex
#                     k, whose face j is that same face ("mirror index" j).
# A ghost tetrahedron is positive in the sense that replacing inf by any point
# strictly outside its hull face gives a positive tetrahedron.
# During an insertion, two flag bits above the vertex index in T[8t + 3] mark the
# tetrahedra found in conflict with the new point (_F_IN) or tested and found not
# in conflict (_F_OUT), in the record's own cache line (a separate stamp array
# would cost a second cache miss per tetrahedron visited); both are cleared again
# before the insertion ends.  Vertex indices (inf = n included) fit in 28 bits.
# --------------------------------------------------------------------------------------
_MAX_TETS = 2 ** 29                  # 4 t + j must fit in int32
_VMASK = (1 << 28) - 1
_F_IN = 1 << 29
_F_OUT = 1 << 30


@njit(cache=True)
def _grow_i32(a, need):
    """A copy of the int32 array a, enlarged to at least ``need`` entries."""
    m = max(need, a.shape[0] + a.shape[0] // 2 + 16)
    b = np.empty(m, dtype=np.int32)
    for i in range(a.shape[0]):
        b[i] = a[i]
    return b


# status codes of an insertion run
_ST_DONE = 0
_ST_INCONSISTENT = 2
_ST_TOO_MANY = 3
_ST_GROW_TETS = 10
_ST_GROW_CAVITY = 11
_ST_GROW_FREE = 12
_ST_GROW_HASH = 13


@njit(cache=True)
def _unmark(T, cav, ncav, bfo, nbd):
    """Clear the conflict flags of an abandoned insertion attempt."""
    for i in range(ncav):
        T[8 * cav[i] + 3] &= _VMASK
    for i in range(nbd):
        T[8 * (bfo[i] >> 2) + 3] &= _VMASK


@njit(cache=True)
def _build_mesh_3d(pts):
    """Delaunay tetrahedralisation of the points inserted in their row order.

    Returns (T, ntet, status): the tetrahedron records (see above; ghost
    tetrahedra carry the vertex ``n``, free slots T[8t] = -1), the number of
    slots used, and status 0 on success, 1 if all points are coplanar or fewer
    than 4 are distinct, 2 if the predicates were inconsistent (only possible
    outside their exact range, i.e. with floating-point underflow), 3 if the
    tetrahedron count exceeds the int32 index range.

    The points are inserted in a run over fixed buffers (the inner loop: no
    array is reassigned in it, so numba needs no reference counting there).  A
    run stops early when a buffer is too small, before anything is modified for
    the pending point; the (cold) outer loop enlarges the buffer and starts a
    new run at that point."""
    n = pts.shape[0]
    inf = n
    pf = pts.ravel()                               # x, y, z of point i at 3 i ..
    ws = np.empty(_WS_SIZE, dtype=np.float64)
    four = np.int64(4)
    five = np.int64(5)
    empty = np.empty(0, dtype=np.int32)

    # ---- initial tetrahedron: first point, first point different from it, first
    # point not collinear with those, first point not coplanar with those three
    # (in insertion order); the points skipped on the way are inserted later.
    i0 = 0
    i1 = -1
    for i in range(1, n):
        if pf[3 * i] != pf[0] or pf[3 * i + 1] != pf[1] or pf[3 * i + 2] != pf[2]:
            i1 = i
            break
    if i1 < 0:
        return empty, 0, 1
    # collinear iff the projections onto the three coordinate planes are: the
    # 2D orientation of a projection (u, v) is exactly the orient3d of the lifted
    # points (u, v, 0) and the apex (0, 0, 1)
    i2 = -1
    for i in range(i1 + 1, n):
        collinear = True
        for u in range(3):
            v = u + 1 if u < 2 else 0
            ax = pf[3 * i0 + u]
            ay = pf[3 * i0 + v]
            bx = pf[3 * i1 + u]
            by = pf[3 * i1 + v]
            cx = pf[3 * i + u]
            cy = pf[3 * i + v]
            s = _orient3d_filter(ax, ay, 0.0, bx, by, 0.0, cx, cy, 0.0, 0.0, 0.0, 1.0)
            if s != s:
                s = _exact_pred(four, ax, ay, 0.0, bx, by, 0.0, cx, cy, 0.0, 0.0, 0.0, 1.0,
                                0.0, 0.0, 0.0, ws)
            if s != 0.0:
                collinear = False
                break
        if not collinear:
            i2 = i
            break
    if i2 < 0:
        return empty, 0, 1
    i3 = -1
    s = 0.0
    for i in range(i2 + 1, n):
        s = _orient3d_filter(pf[3 * i0], pf[3 * i0 + 1], pf[3 * i0 + 2],
                             pf[3 * i1], pf[3 * i1 + 1], pf[3 * i1 + 2],
                             pf[3 * i2], pf[3 * i2 + 1], pf[3 * i2 + 2],
                             pf[3 * i], pf[3 * i + 1], pf[3 * i + 2])
        if s != s:
            s = _exact_pred(four, pf[3 * i0], pf[3 * i0 + 1], pf[3 * i0 + 2],
                                pf[3 * i1], pf[3 * i1 + 1], pf[3 * i1 + 2],
                                pf[3 * i2], pf[3 * i2 + 1], pf[3 * i2 + 2],
                                pf[3 * i], pf[3 * i + 1], pf[3 * i + 2], 0.0, 0.0, 0.0, ws)
        if s != 0.0:
            i3 = i
            break
    if i3 < 0:
        return empty, 0, 1
    if s < 0.0:
        i1, i2 = i2, i1

    # Uniform random points give ~6.8 n tetrahedra (ghosts: O(n^(2/3))); the
    # buffers grow on demand (the worst case is quadratic).
    maxt = min(7 * n + 256, _MAX_TETS)
    T = np.empty(8 * maxt, dtype=np.int32)
    vmark = np.zeros(n + 1, dtype=np.int32)       # boundary vertex marks (Euler check)
    cav = np.empty(256, dtype=np.int32)            # cavity tetrahedra (BFS queue)
    bfv = np.empty(4 * 256, dtype=np.int32)        # per boundary face: new tet's vertices,
    bfk = np.empty(256, dtype=np.int32)            # the position of p in it,
    bfo = np.empty(256, dtype=np.int32)            # the outside neighbour's code
    freel = np.empty(256, dtype=np.int32)          # free slots
    hkey = np.empty(1024, dtype=np.int64)          # edge hash table
    for i in range(hkey.shape[0]):
        hkey[i] = -1
    hval = np.empty(1024, dtype=np.int32)
    hused = np.empty(1024, dtype=np.int32)
    # side[9k + 3r + (0, 1, 2)]: for the r-th position j != k of a tetrahedron,
    # j and the positions of the edge opposite both j and k
    side = np.empty(36, dtype=np.int64)
    for k in range(4):
        r = 0
        for j in range(4):
            if j != k:
                side[9 * k + 3 * r] = j
                q = 1
                for e in range(4):
                    if e != j and e != k:
                        side[9 * k + 3 * r + q] = e
                        q += 1
                r += 1

    # real tetrahedron 0 and the four ghosts over its faces: ghost k (slot
    # 1 + k) is tet 0 with vertex k replaced by inf and the vertices at
    # positions a = k+1, b = k+2 (mod 4) swapped (odd permutation: inf lies on
    # the other side of face k than vertex k).  Adjacency: face k of tet 0 is
    # face k (opposite inf) of ghost k; ghosts k and l share the face through
    # inf without vertices k and l, opposite (original) vertex l in ghost k.
    v = (i0, i1, i2, i3)
    for k in range(4):
        T[k] = v[k]
        T[4 + k] = 4 * (1 + k) + k
    for k in range(4):
        g = 8 * (1 + k)
        a = (k + 1) & 3
        b = (k + 2) & 3
        for i in range(4):
            T[g + i] = v[i]
        T[g + k] = inf
        T[g + a], T[g + b] = T[g + b], T[g + a]
        T[g + 4 + k] = k                           # -> tet 0, face k
        for lv in range(4):
            if lv == k:
                continue
            # position of original vertex lv in ghost k, and of vertex k in ghost lv
            pk = b if lv == a else (a if lv == b else lv)
            al = (lv + 1) & 3
            bl = (lv + 2) & 3
            pl = bl if k == al else (al if k == bl else k)
            T[g + 4 + pk] = 4 * (1 + lv) + pl

    ntet = 5
    nfree = 0
    last = 0                                       # a real tetrahedron to start walks at
    rng_state = np.int64(0x2545F4914F6CDD1D)
    stampc = 0                                     # insertion attempts (vmark stamps)
    start = 0
    while True:
        # ---- one run of insertions over the current buffers
        maxt = T.shape[0] // 8
        hmask = hkey.shape[0] - 1
        ncap = cav.shape[0]
        status = _ST_DONE
        need = 0
        cur = start
        for it in range(start, n):
            cur = it
            if it == i0 or it == i1 or it == i2 or it == i3:
                continue
            px = pf[3 * it]
            py = pf[3 * it + 1]
            pz = pf[3 * it + 2]

            # ---- point location: remembering stochastic walk (Devillers, Pion &
            # Teillaud 2002) from `last`: cross a face with p strictly on its far
            # side, never back through the face just crossed, the first face tried
            # chosen pseudo-randomly.  Ends in a real tetrahedron whose closure
            # contains p, or in a ghost whose hull face has p strictly outside.
            t = last
            prev = np.int64(-1)
            steps = 0
            ghost = False
            while True:
                steps += 1
                if steps > 2 * ntet + 64:              # cannot happen with exact predicates
                    status = _ST_INCONSISTENT
                    break
                b8 = 8 * t
                rng_state = ((rng_state * 6364136223846793005 + 1442695040888963407)
                             & 0x7FFFFFFFFFFFFFFF)
                k0 = (rng_state >> 33) & 3
                moved = False
                for kk in range(4):
                    k = (k0 + kk) & 3
                    nb = np.int64(T[b8 + 4 + k]) >> 2
                    if nb == prev:
                        continue
                    # orientation of t with vertex k replaced by p = orient3d(face k
                    # in an order keeping the sign, p): (k+1, k+2, k+3) mod 4, the
                    # last two swapped for even k
                    fa = T[b8 + ((k + 1) & 3)] & _VMASK
                    fb = T[b8 + ((k + 2) & 3)] & _VMASK
                    fc = T[b8 + ((k + 3) & 3)] & _VMASK
                    if (k & 1) == 0:
                        fb, fc = fc, fb
                    ax = pf[3 * fa]
                    ay = pf[3 * fa + 1]
                    az = pf[3 * fa + 2]
                    bx = pf[3 * fb]
                    by = pf[3 * fb + 1]
                    bz = pf[3 * fb + 2]
                    cx = pf[3 * fc]
                    cy = pf[3 * fc + 1]
                    cz = pf[3 * fc + 2]
                    s = _orient3d_filter(ax, ay, az, bx, by, bz, cx, cy, cz, px, py, pz)
                    if s != s:
                        s = _exact_pred(four, ax, ay, az, bx, by, bz, cx, cy, cz, px, py, pz,
                                        0.0, 0.0, 0.0, ws)
                    if s < 0.0:
                        prev = t
                        t = nb
                        moved = True
                        break
                if not moved:
                    break
                b8 = 8 * t
                if (T[b8] == inf or T[b8 + 1] == inf or T[b8 + 2] == inf
                        or (T[b8 + 3] & _VMASK) == inf):
                    ghost = True
                    break
            if status != _ST_DONE:
                break
            t0 = t

            # ---- duplicate point?  If p coincides with a vertex, the walk has ended
            # in a real tetrahedron having that vertex as a corner.
            if not ghost:
                dup = False
                for i in range(4):
                    w = T[8 * t0 + i] & _VMASK
                    if pf[3 * w] == px and pf[3 * w + 1] == py and pf[3 * w + 2] == pz:
                        dup = True
                if dup:
                    continue

            # ---- Bowyer-Watson cavity: all tetrahedra in conflict with p, grown
            # breadth-first from t0 (cav doubles as the queue), flagged _F_IN; the
            # tetrahedra tested and found not in conflict are flagged _F_OUT.
            stampc += 1
            cav[0] = t0
            T[8 * t0 + 3] |= _F_IN
            ncav = 1
            nbd = 0
            qi = 0
            ncap = cav.shape[0]
            while qi < ncav:
                t = cav[qi]
                qi += 1
                b8 = 8 * t
                # load the four neighbour records together (their cache misses overlap)
                e0 = T[b8 + 4]
                e1 = T[b8 + 5]
                e2 = T[b8 + 6]
                e3 = T[b8 + 7]
                g0 = T[8 * (e0 >> 2) + 3]
                g1 = T[8 * (e1 >> 2) + 3]
                g2 = T[8 * (e2 >> 2) + 3]
                g3 = T[8 * (e3 >> 2) + 3]
                # ... and the coordinates of their opposite vertices (inf clamped)
                pre = (pf[3 * min(T[8 * (e0 >> 2) + (e0 & 3)] & _VMASK, n - 1)]
                       + pf[3 * min(T[8 * (e1 >> 2) + (e1 & 3)] & _VMASK, n - 1)]
                       + pf[3 * min(T[8 * (e2 >> 2) + (e2 & 3)] & _VMASK, n - 1)]
                       + pf[3 * min(T[8 * (e3 >> 2) + (e3 & 3)] & _VMASK, n - 1)])
                if pre != pre:                         # (never true: keeps the loads)
                    qi += 0
                for k in range(4):
                    code = T[b8 + 4 + k]
                    nb = code >> 2
                    c8 = 8 * nb
                    f3 = g0 if k == 0 else (g1 if k == 1 else (g2 if k == 2 else g3))
                    if f3 & _F_IN:
                        continue
                    if not (f3 & _F_OUT):
                        a0 = T[c8]
                        a1 = T[c8 + 1]
                        a2 = T[c8 + 2]
                        a3 = f3 & _VMASK
                        gpos = -1
                        if a0 == inf:
                            gpos = 0
                        elif a1 == inf:
                            gpos = 1
                        elif a2 == inf:
                            gpos = 2
                        elif a3 == inf:
                            gpos = 3
                        conflict = False
                        sph = c8                       # the tetrahedron whose sphere decides
                        if gpos >= 0:
                            # ghost: p strictly outside its hull face (the face opposite
                            # inf, oriented as in the walk), or on the face's plane
                            # strictly inside the face's circumcircle, i.e. inside the
                            # circumsphere of the real tetrahedron under the face
                            fa = T[c8 + ((gpos + 1) & 3)] & _VMASK
                            fb = T[c8 + ((gpos + 2) & 3)] & _VMASK
                            fc = T[c8 + ((gpos + 3) & 3)] & _VMASK
                            if (gpos & 1) == 0:
                                fb, fc = fc, fb
                            ax = pf[3 * fa]
                            ay = pf[3 * fa + 1]
                            az = pf[3 * fa + 2]
                            bx = pf[3 * fb]
                            by = pf[3 * fb + 1]
                            bz = pf[3 * fb + 2]
                            cx = pf[3 * fc]
                            cy = pf[3 * fc + 1]
                            cz = pf[3 * fc + 2]
                            og = _orient3d_filter(ax, ay, az, bx, by, bz, cx, cy, cz, px, py, pz)
                            if og != og:
                                og = _exact_pred(four, ax, ay, az, bx, by, bz, cx, cy, cz,
                                                     px, py, pz, 0.0, 0.0, 0.0, ws)
                            if og > 0.0:
                                conflict = True
                                sph = -1
                            elif og < 0.0:
                                sph = -1
                            else:
                                sph = 8 * (T[c8 + 4 + gpos] >> 2)
                        if sph >= 0:
                            a0 = T[sph]
                            a1 = T[sph + 1]
                            a2 = T[sph + 2]
                            a3 = T[sph + 3] & _VMASK
                            ax = pf[3 * a0]
                            ay = pf[3 * a0 + 1]
                            az = pf[3 * a0 + 2]
                            bx = pf[3 * a1]
                            by = pf[3 * a1 + 1]
                            bz = pf[3 * a1 + 2]
                            cx = pf[3 * a2]
                            cy = pf[3 * a2 + 1]
                            cz = pf[3 * a2 + 2]
                            dx = pf[3 * a3]
                            dy = pf[3 * a3 + 1]
                            dz = pf[3 * a3 + 2]
                            ins = _insphere_filter(ax, ay, az, bx, by, bz, cx, cy, cz, dx, dy, dz,
                                                   px, py, pz)
                            if ins != ins:
                                ins = _exact_pred(five, ax, ay, az, bx, by, bz, cx, cy, cz,
                                                      dx, dy, dz, px, py, pz, ws)
                            conflict = ins > 0.0
                        if conflict:
                            if ncav >= ncap:
                                status = _ST_GROW_CAVITY
                                need = 2 * ncap
                                break
                            T[c8 + 3] = f3 | _F_IN
                            cav[ncav] = nb
                            ncav += 1
                            continue
                        T[c8 + 3] = f3 | _F_OUT
                    # boundary face: the new tetrahedron is t with vertex k replaced by p
                    if nbd >= ncap:
                        T[c8 + 3] &= _VMASK
                        status = _ST_GROW_CAVITY
                        need = 2 * ncap
                        break
                    for i in range(4):
                        bfv[4 * nbd + i] = T[b8 + i] & _VMASK
                    bfv[4 * nbd + k] = it
                    bfk[nbd] = k
                    bfo[nbd] = code
                    nbd += 1
                if status != _ST_DONE:
                    break
            if status != _ST_DONE:
                _unmark(T, cav, ncav, bfo, nbd)
                break

            # ---- capacity checks (before anything is modified): tetrahedron slots,
            # free-slot stack, edge hash table (3 nbd / 2 edges at load <= 1/2)
            extra = nbd - ncav
            if extra > nfree:
                need = ntet + extra - nfree
                if need > _MAX_TETS:
                    status = _ST_TOO_MANY
                elif need > maxt:
                    status = _ST_GROW_TETS
            if status == _ST_DONE and -extra > freel.shape[0] - nfree:
                status = _ST_GROW_FREE
                need = nfree - extra
            if status == _ST_DONE and 3 * nbd > hmask:
                status = _ST_GROW_HASH
                need = 4 * nbd
            if status != _ST_DONE:
                _unmark(T, cav, ncav, bfo, nbd)
                break

            # ---- slots for the nbd new tetrahedra: the cavity's, then free ones,
            # then fresh ones at the end; surplus cavity slots become free
            for i in range(ncav, nbd):
                if nfree > 0:
                    nfree -= 1
                    cav[i] = freel[nfree]
                else:
                    cav[i] = ntet
                    ntet += 1
            for i in range(nbd, ncav):
                T[8 * cav[i]] = -1
                freel[nfree] = cav[i]
                nfree += 1

            # ---- create the new tetrahedra, glue them to the outside across the
            # boundary faces and to each other across the edges of those faces
            nused = 0
            nmatch = 0
            nvert = 0                                  # distinct vertices, p included
            bad = False
            for i in range(nbd):
                nt = cav[i]
                n8 = 8 * nt
                b4 = 4 * i
                k = bfk[i]
                w0 = bfv[b4]
                w1 = bfv[b4 + 1]
                w2 = bfv[b4 + 2]
                w3 = bfv[b4 + 3]
                T[n8] = w0
                T[n8 + 1] = w1
                T[n8 + 2] = w2
                T[n8 + 3] = w3
                if w0 != inf and w1 != inf and w2 != inf and w3 != inf:
                    last = nt
                for q in range(4):
                    w = bfv[b4 + q]
                    if vmark[w] != stampc:
                        vmark[w] = stampc
                        nvert += 1
                code = bfo[i]
                T[n8 + 4 + k] = code
                o8 = 8 * (code >> 2)
                T[o8 + 3] &= _VMASK                      # clear _F_OUT
                T[o8 + 4 + (code & 3)] = 4 * nt + k
                # the side face opposite j (j != k) contains p and the edge of the
                # two remaining vertices; its twin is the other new tetrahedron on
                # that edge, found through the edge hash table
                s9 = 9 * k
                for r in range(3):
                    j = side[s9 + 3 * r]
                    eu = np.int64(bfv[b4 + side[s9 + 3 * r + 1]])
                    ev = np.int64(bfv[b4 + side[s9 + 3 * r + 2]])
                    if eu > ev:
                        eu, ev = ev, eu
                    key = eu * (n + 1) + ev
                    h = (eu * 0x9E3779B1) ^ (ev * 0x85EBCA77)
                    h = (h ^ (h >> 15)) & hmask
                    hk = hkey[h]
                    while hk != key and hk != -1:
                        h = (h + 1) & hmask
                        hk = hkey[h]
                    if hk == key:
                        other = hval[h]
                        if other < 0:                  # edge in a third face
                            bad = True
                        T[n8 + 4 + j] = other
                        T[8 * (other >> 2) + 4 + (other & 3)] = 4 * nt + j
                        hval[h] = -1
                        nmatch += 1
                    else:
                        hkey[h] = key
                        hval[h] = 4 * nt + j
                        hused[nused] = h
                        nused += 1
                if bad:
                    break
            for i in range(nused):
                hkey[hused[i]] = -1
            # the cavity boundary must be a closed 2-sphere: every edge in exactly two
            # faces (E = 3F/2) and V - E + F = 2
            if bad or 2 * nmatch != 3 * nbd or nused != nmatch or 2 * (nvert - 1) - nbd != 4:
                status = _ST_INCONSISTENT
                break


        # ---- end of a run: done, failed, or enlarge a buffer and resume at `cur`
        if status == _ST_DONE:
            return T, ntet, 0
        if status == _ST_GROW_TETS:
            maxt = min(max(need, maxt + maxt // 2), _MAX_TETS)
            T = _grow_i32(T, 8 * maxt)
        elif status == _ST_GROW_CAVITY:
            cav = _grow_i32(cav, need)
            bfk = _grow_i32(bfk, need)
            bfo = _grow_i32(bfo, need)
            bfv = _grow_i32(bfv, 4 * need)
        elif status == _ST_GROW_FREE:
            freel = _grow_i32(freel, 2 * need)
        elif status == _ST_GROW_HASH:
            m = hkey.shape[0]
            while m <= need:
                m *= 2
            hkey = np.empty(m, dtype=np.int64)
            for i in range(m):
                hkey[i] = -1
            hval = np.empty(m, dtype=np.int32)
            hused = np.empty(m, dtype=np.int32)
        else:
            return empty, 0, status
        start = cur


@njit(cache=True)
def _collect_mesh_3d(T, ntet, n):
    """The real tetrahedra (local vertex indices) and their neighbours:
    nb[t, k] is the tetrahedron across the face opposite vertex k, -1 on the
    convex hull."""
    inf = n
    cid = np.empty(ntet, dtype=np.int64)
    m = 0
    for t in range(ntet):
        cid[t] = -1
        a = T[8 * t]
        if a < 0:
            continue
        if (a == inf or T[8 * t + 1] == inf or T[8 * t + 2] == inf
                or (T[8 * t + 3] & _VMASK) == inf):
            continue
        cid[t] = m
        m += 1
    tets = np.empty((m, 4), dtype=np.int64)
    nb = np.empty((m, 4), dtype=np.int64)
    for t in range(ntet):
        c = cid[t]
        if c < 0:
            continue
        for k in range(4):
            tets[c, k] = T[8 * t + k] & _VMASK
            nb[c, k] = cid[T[8 * t + 4 + k] >> 2]
    return tets, nb


# --------------------------------------------------------------------------------------
# Public function.
# --------------------------------------------------------------------------------------
def _as_points_3d(points) -> np.ndarray:
    pts = np.ascontiguousarray(points, dtype=np.float64)
    if pts.ndim != 2 or pts.shape[1] != 3:
        raise ValueError(f"points must have shape (n, 3), got {pts.shape}")
    if pts.shape[0] < 4:
        raise ValueError("a tetrahedralisation needs at least 4 points")
    if not np.isfinite(pts).all():
        raise ValueError("points must be finite")
    return pts


def delaunay_mesh_3d(points: np.ndarray):
    """Exact Delaunay tetrahedralisation of 3D points, with face adjacency.

    Parameters
    ----------
    points : (n, 3) array_like of float64
        Finite coordinates; duplicates allowed.

    Returns
    -------
    order : (n,) int64
        Local vertex i is input row ``order[i]`` (the insertion order: BRIO rounds,
        a 3D Hilbert curve inside each round; good memory locality).
    local_points : (n, 3) float64, C-contiguous
        ``points[order]`` (as given, never rescaled).
    tets : (m, 4) int64
        Tetrahedra in local vertex indices, each positively oriented:
        ``orient3d(a, b, c, d) = det[b - a; c - a; d - a] > 0`` (right-handed;
        a, b, c counter-clockwise seen from d; minus Shewchuk's orient3d).
    neighbours : (m, 4) int64
        ``neighbours[t, k]``: the tetrahedron across the face opposite vertex k
        (``tets[t, k]``), -1 on the convex hull.

    Raises
    ------
    ValueError
        Fewer than 4 points, wrong shape, non-finite values, all points coplanar
        or fewer than 4 distinct points.
    FloatingPointError
        The geometric predicates were inconsistent (only possible when products
        of coordinates underflow, i.e. nonzero magnitudes below ~1e-60 times the
        largest |coordinate|).

    Notes
    -----
    Exact predicates are used throughout, so the result is a tetrahedralisation
    of the convex hull of the distinct points in which every distinct point is a
    vertex, no tetrahedron is flat, and every interior face is locally Delaunay
    (the vertex opposite it in the neighbour is not strictly inside the
    circumsphere), hence all circumspheres are empty.  When five or more points
    are co-spherical, one of the valid Delaunay tetrahedralisations is returned.
    Of duplicate points, one local vertex (the first inserted) is used; the
    other copies appear in no tetrahedron.  The output is deterministic.

    The algorithm (Bowyer 1981 / Watson 1981 insertion with ghost tetrahedra,
    BRIO after Amenta, Choi & Rote 2003, remembering stochastic walk after
    Devillers, Pion & Teillaud 2002, Shewchuk's 1997 adaptive-precision
    predicates) is described in the module docstring.
    """
    pts = _as_points_3d(points)
    n = pts.shape[0]
    if n >= 2 ** 28:
        raise ValueError("too many points (int32 tetrahedron indices)")
    work, _ = scale_for_predicates(pts)
    rank = np.random.default_rng(_BRIO_SEED).permutation(n)
    keys = _brio_keys_3d(work, rank, _HILBERT_BITS, _BRIO_FIRST_ROUND)
    del rank
    order = np.argsort(keys, kind="stable").astype(np.int64, copy=False)
    del keys
    local = np.ascontiguousarray(pts[order])
    local_work = local if work is pts else np.ascontiguousarray(work[order])
    T, ntet, status = _build_mesh_3d(local_work)
    if status == 1:
        raise ValueError("points are all coplanar (or fewer than 4 distinct points)")
    if status == 2:
        raise FloatingPointError(
            "inconsistent geometric predicates (products of coordinates underflow?)")
    if status == 3:
        raise ValueError("too many tetrahedra for int32 indices")
    tets, nb = _collect_mesh_3d(T, ntet, n)
    del T
    return order, local, tets, nb
