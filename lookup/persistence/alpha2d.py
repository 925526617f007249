"""Exact persistence of the 2D alpha (Čech) filtration: all of H0 and H1.

Filtration values follow gudhi's ``AlphaComplex`` convention in squared radii
(Edelsbrunner & Mücke 1994; Edelsbrunner & Harer 2010, III.4): a triangle
gets its squared circumradius; an edge is *attached* by a triangle whose third
vertex lies strictly inside the edge's diametral circle (an obtuse angle
opposite it) and then gets that triangle's value, otherwise its squared half
length (a *Gabriel* edge); vertices get 0.  Values are exactly rounded the way
gudhi's exact mode rounds them (``lookup.persistence.exactvalues``), so lattices and other
co-circular inputs give exactly gudhi's pairs, with no spurious tiny ones.

Persistence in one sweep of union-find (``lookup.persistence.pairing``):

* A triangle attaches at most one edge (two obtuse angles opposite one edge
  would violate the Delaunay property), and an attached edge e enters the
  filtration together with its triangle t: the pair (e, t) has length zero.
  Such edges are paired up front by joining t with the face across e in the
  dual union-find; they never merge components (u and v are already joined
  through the obtuse vertex, by shorter edges).
* H0: Kruskal over the Gabriel edges in increasing (value, index) order -- the
  Euclidean minimum spanning tree is a subgraph of the Gabriel graph.
* H1: the complement of a spanning tree of a plane graph is a spanning tree of
  its dual (triangles plus the outer face).  The Gabriel edges not in the
  minimum spanning tree are swept in decreasing order; each joins two dual
  components and kills the younger one (elder rule), giving the pair
  (edge value, value of that component's oldest triangle).

Pairs of zero length are dropped, as gudhi does.  The triangulation comes from
``lookup.persistence.delaunay2d.delaunay_mesh`` (exact, with adjacency, in Hilbert order
for memory locality).  When it cannot be used, any triangulation (scipy's Qhull
on centred coordinates by default) is checked and repaired into an exact
Delaunay one (``lookup.persistence.meshrepair``), and the full filtration of every edge is
computed (:func:`alpha_filtration_2d`).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .exactvalues import (
    _edge2_dd,
    _edge_exact,
    _edge_value,
    _new_regs,
    _obtuse,
    _obtuse2_filter,
    _obtuse_exact,
    _orient2d,
    _tri2_dd,
    _tri2_exact,
    _tri2_value,
)
from .jit import njit
from .meshrepair import _facet_adjacency, _insert_missing, _legalize, _orient_all
from .pairing import _dual_pairs, _kruskal, radix_argsort
from .pointsets import check_points, distinct_morton, power_of_two_scale

__all__ = ["alpha_pairs_2d", "alpha_filtration_2d", "Filtration2D", "scipy_triangles_2d"]


# --------------------------------------------------------------------------------------
# Fast path: exact Delaunay mesh with adjacency -> pairs
# --------------------------------------------------------------------------------------


@njit(cache=True)
def _triangles_and_obtuse(P, tri):
    """Triangle values (plus the outer face, +inf, last) and, per triangle, the
    vertex k (0..2) whose angle is obtuse, or -1.  Coordinates are loaded once
    per triangle; the exact evaluators run only when a filter cannot decide."""
    R, L = _new_regs()
    m = tri.shape[0]
    tv = np.empty(m + 1)
    obt = np.full(m, -1, dtype=np.int8)
    for t in range(m):
        a = tri[t, 0]
        b = tri[t, 1]
        c = tri[t, 2]
        ax = P[a, 0]
        ay = P[a, 1]
        bx = P[b, 0]
        by = P[b, 1]
        cx = P[c, 0]
        cy = P[c, 1]
        v, ok = _tri2_dd(ax, ay, bx, by, cx, cy)
        tv[t] = v if ok else _tri2_exact(P, a, b, c, R, L)
        f = _obtuse2_filter(bx, by, cx, cy, ax, ay)
        if f < 0:
            f = 1 if _obtuse_exact(P, b, c, a, R, L) else 0
        if f == 1:
            obt[t] = 0
            continue
        f = _obtuse2_filter(cx, cy, ax, ay, bx, by)
        if f < 0:
            f = 1 if _obtuse_exact(P, c, a, b, R, L) else 0
        if f == 1:
            obt[t] = 1
            continue
        f = _obtuse2_filter(ax, ay, bx, by, cx, cy)
        if f < 0:
            f = 1 if _obtuse_exact(P, a, b, c, R, L) else 0
        if f == 1:
            obt[t] = 2
    tv[m] = np.inf
    return tv, obt


@njit(cache=True)
def _obtuse_components(nb, obt, tv):
    """Components of the triangles joined across their attached edges.

    Each obtuse triangle points across its attached edge (to the outer face when
    that edge is on the hull); the pointers form a forest whose roots are the
    non-obtuse triangles and the outer face, and values never decrease along a
    pointer (the circumcentre moves away along the Voronoi edge), so a root
    holds the component's largest value -- its oldest node under the elder
    rule.  Returns the component id of every triangle (the outer face last) and
    the values of the components."""
    m = nb.shape[0]
    root = np.full(m + 1, -1, dtype=np.int64)
    root[m] = m
    for t in range(m):
        if obt[t] < 0:
            root[t] = t
    path = np.empty(m + 1, dtype=np.int64)
    for t in range(m):
        if root[t] >= 0:
            continue
        k = 0
        x = t
        while root[x] < 0:
            path[k] = x
            k += 1
            y = nb[x, obt[x]]
            x = y if y >= 0 else m
        r = root[x]
        for i in range(k):
            root[path[i]] = r
    cid = np.full(m + 1, -1, dtype=np.int32)
    K = 0
    for t in range(m):
        if obt[t] < 0:
            cid[t] = K
            K += 1
    cid[m] = K
    K += 1
    comp = np.empty(m + 1, dtype=np.int32)
    for t in range(m + 1):
        comp[t] = cid[root[t]]
    cval = np.empty(K)
    for t in range(m + 1):
        if cid[t] >= 0:
            cval[cid[t]] = tv[t]
    return comp, cval


@njit(cache=True)
def _gabriel_edges(P, tri, nb, obt, comp):
    """The non-attached edges: vertices, the dual components on either side
    (``comp[m]`` is the outer face's) and values.  (A Gabriel edge never exceeds
    its cofaces: (|uv|/2)^2 <= R^2 exactly, and the rounding is monotone.)"""
    R, L = _new_regs()
    m = tri.shape[0]
    cap = 2 * m + 3
    eu = np.empty(cap, dtype=np.int32)
    ev = np.empty(cap, dtype=np.int32)
    ea = np.empty(cap, dtype=np.int32)
    eb = np.empty(cap, dtype=np.int32)
    val = np.empty(cap)
    e = 0
    for t in range(m):
        for k in range(3):
            u = nb[t, k]
            if u >= 0 and u < t:
                continue
            if obt[t] == k:
                continue
            if u >= 0:
                j = 0
                while nb[u, j] != t:
                    j += 1
                if obt[u] == j:
                    continue
            b = tri[t, (k + 1) % 3]
            c = tri[t, (k + 2) % 3]
            eu[e] = b
            ev[e] = c
            ea[e] = comp[t]
            eb[e] = comp[u] if u >= 0 else comp[m]
            x, ok = _edge2_dd(P[b, 0], P[b, 1], P[c, 0], P[c, 1])
            if not ok:
                x = _edge_exact(P, b, c, R, L)
            val[e] = x
            e += 1
    return eu[:e], ev[:e], ea[:e], eb[:e], val[:e]


def _pairs_from_mesh(P, tri, nb, n_vertices):
    """[H0, H1] in squared values from an exact Delaunay mesh of P."""
    tv, obt = _triangles_and_obtuse(P, tri)
    comp, cval = _obtuse_components(nb, obt, tv)
    eu, ev, ea, eb, val = _gabriel_edges(P, tri, nb, obt, comp)
    order = radix_argsort(val)
    d0, is_mst = _kruskal(n_vertices, eu, ev, val, order)
    none = np.empty(0, dtype=np.int32)
    b1, d1, _ = _dual_pairs(cval, ea, eb, val, order, none, none, is_mst)
    return d0, b1, d1


def _h0_rows(d0, inv, have_points):
    h0 = np.zeros((len(d0) + (1 if have_points else 0), 2))
    h0[: len(d0), 1] = np.sqrt(d0 * inv)
    if have_points:
        h0[-1, 1] = np.inf
    return h0


def _fast_pairs(Ps, inv):
    """Pairs via ``delaunay_mesh``; None when it cannot triangulate exactly."""
    from .delaunay2d import delaunay_mesh

    try:
        _, P, tri, nb = delaunay_mesh(Ps)
    except (ValueError, FloatingPointError):
        return None
    d0, b1, d1 = _pairs_from_mesh(P, tri, nb, len(P))
    h1 = np.stack([np.sqrt(b1 * inv), np.sqrt(d1 * inv)], axis=1)
    return [_h0_rows(d0, inv, True), h1]


# --------------------------------------------------------------------------------------
# General path: any triangulation, repaired; the full filtration
# --------------------------------------------------------------------------------------


@dataclass
class Filtration2D:
    """The 2D alpha filtration (gudhi's squared-radius values).

    ``points`` are the distinct input points (in an internal, Morton order);
    ``edges`` (E, 2) vertex pairs, ``edge_tris`` (E, 2) their two triangles (the
    value ``len(triangles)`` stands for the outer face), ``triangles`` (m, 3) CCW.
    """

    points: np.ndarray
    edges: np.ndarray
    edge_values: np.ndarray
    edge_tris: np.ndarray
    triangles: np.ndarray
    triangle_values: np.ndarray


@njit(cache=True)
def _filtration_2d(P, tri, nb, ne):
    """Edges (u, v, t1, t2) and the values of edges and triangles."""
    R, L = _new_regs()
    m = tri.shape[0]
    tv = np.empty(m + 1)
    for t in range(m):
        tv[t] = _tri2_value(P, tri[t, 0], tri[t, 1], tri[t, 2], R, L)
    tv[m] = np.inf
    eu = np.empty(ne, dtype=np.int64)
    ev = np.empty(ne, dtype=np.int64)
    ea = np.empty(ne, dtype=np.int64)
    eb = np.empty(ne, dtype=np.int64)
    val = np.empty(ne)
    e = 0
    for t in range(m):
        for k in range(3):
            u2 = nb[t, k]
            if u2 >= 0 and u2 < t:
                continue
            w = tri[t, k]
            b = tri[t, (k + 1) % 3]
            c = tri[t, (k + 2) % 3]
            eu[e] = b
            ev[e] = c
            ea[e] = t
            attached = _obtuse(P, b, c, w, R, L)
            vmin = tv[t]
            if u2 >= 0:
                eb[e] = u2
                j = 0
                while nb[u2, j] != t:
                    j += 1
                if not attached:
                    attached = _obtuse(P, b, c, tri[u2, j], R, L)
                if tv[u2] < vmin:
                    vmin = tv[u2]
            else:
                eb[e] = m
            if attached:
                val[e] = vmin
            else:
                val[e] = _edge_value(P, b, c, R, L)
            # safeguard: a triangle is never below its edges
            if tv[t] < val[e]:
                tv[t] = val[e]
            if u2 >= 0 and tv[u2] < val[e]:
                tv[u2] = val[e]
            e += 1
    return eu, ev, ea, eb, val, tv


@njit(cache=True)
def _line_values(P, order):
    R, L = _new_regs()
    k = order.shape[0] - 1
    out = np.empty(max(k, 0))
    for i in range(k):
        out[i] = _edge_value(P, order[i], order[i + 1], R, L)
    return out


@njit(cache=True)
def _all_collinear(P):
    R, L = _new_regs()
    n = P.shape[0]
    if n < 3:
        return True
    # lexicographic extremes are distinct for distinct points
    a = 0
    b = 0
    for i in range(n):
        if P[i, 0] < P[a, 0] or (P[i, 0] == P[a, 0] and P[i, 1] < P[a, 1]):
            a = i
        if P[i, 0] > P[b, 0] or (P[i, 0] == P[b, 0] and P[i, 1] > P[b, 1]):
            b = i
    for i in range(n):
        if _orient2d(P, a, b, i, R, L) != 0:
            return False
    return True


def scipy_triangles_2d(points: np.ndarray) -> np.ndarray:
    """Delaunay triangles by ``scipy.spatial.Delaunay`` on centred coordinates."""
    from scipy.spatial import Delaunay

    P = np.asarray(points, dtype=np.float64)
    return Delaunay(P - P.mean(axis=0)).simplices.astype(np.int64)


def _default_triangulate_2d(P):
    try:
        from .delaunay2d import delaunay_triangles
    except ImportError:
        return scipy_triangles_2d(P)
    try:
        return np.asarray(delaunay_triangles(P), dtype=np.int64)
    except Exception:  # pragma: no cover - a failing triangulator falls back
        return scipy_triangles_2d(P)


def _gudhi_top_simplices(P, dim):
    import gudhi

    st = gudhi.DelaunayComplex(points=P).create_simplex_tree()
    simp = [s for s, _ in st.get_skeleton(dim) if len(s) == dim + 1]
    return np.asarray(simp, dtype=np.int64).reshape(-1, dim + 1)


def _delaunay_2d(P, triangles, triangulate):
    """An exact Delaunay triangulation (CCW) of the distinct points P, with adjacency."""
    n = len(P)
    if triangles is None:
        try:
            tri = (triangulate or _default_triangulate_2d)(P)
        except Exception:
            tri = np.empty((0, 3), dtype=np.int64)
    else:
        tri = triangles
    tri = np.array(tri, dtype=np.int64).reshape(-1, 3)
    for attempt in range(2):
        ok = len(tri) > 0 and tri.min() >= 0 and tri.max() < n
        if ok:
            if _orient_all(P, tri) > 0:
                ok = False
        if ok:
            missing = np.setdiff1d(np.arange(n), tri.ravel())
            if len(missing):
                try:
                    tri = _insert_missing(P, tri, missing)
                except ValueError:
                    ok = False
        if ok:
            nb, ne = _facet_adjacency(tri, n)
            ok = nb is not None and n - ne + len(tri) == 1
        if ok:
            _legalize(P, tri, nb)
            return tri, nb, ne
        if attempt == 0:       # repair impossible: exact CGAL triangulation
            tri = _gudhi_top_simplices(P, 2)
    raise ValueError("could not build a Delaunay triangulation")


def _remap(simp, inv, k):
    """Input-row simplices -> distinct-point simplices, dropping degenerate ones."""
    S = np.asarray(simp, dtype=np.int64).reshape(-1, k)
    S = inv[S]
    srt = np.sort(S, axis=1)
    keep = np.all(srt[:, 1:] != srt[:, :-1], axis=1)
    return np.ascontiguousarray(S[keep])


def _prepare(points, dim):
    """Distinct points (Morton order) scaled by s = 2^k, s, and input -> distinct map."""
    P, inv = distinct_morton(check_points(points, dim))
    Ps, s = power_of_two_scale(P)
    return np.ascontiguousarray(Ps), s, inv


def alpha_filtration_2d(points, triangles=None, triangulate=None) -> Filtration2D:
    """The exact alpha filtration of a 2D point set, every edge included.

    ``triangles`` (indices into the input ``points``) or a
    ``triangulate(P) -> (m, 3)`` callable may be supplied; any triangulation of
    the distinct points is repaired into a Delaunay one with exact flips.
    """
    Ps, s, inv_map = _prepare(points, 2)
    P = Ps / s
    if triangles is not None:
        triangles = _remap(triangles, inv_map, 3)
    n = len(Ps)
    inv = 1.0 / (s * s)
    empty_i = np.empty((0, 2), dtype=np.int64)
    if n < 3 or _all_collinear(Ps):
        order = np.lexsort((Ps[:, 1], Ps[:, 0])).astype(np.int64)
        vals = _line_values(Ps, order) * inv
        edges = np.stack([order[:-1], order[1:]], axis=1) if n > 1 else empty_i
        return Filtration2D(P, edges, vals, np.full((len(vals), 2), 0, dtype=np.int64),
                            np.empty((0, 3), dtype=np.int64), np.empty(0))
    tri, nb, ne = _delaunay_2d(Ps, triangles, triangulate)
    eu, ev, ea, eb, val, tv = _filtration_2d(Ps, tri, nb, ne)
    return Filtration2D(P, np.stack([eu, ev], axis=1), val * inv,
                        np.stack([ea, eb], axis=1), tri, tv[:-1] * inv)


def _pairs_from_filtration_2d(F: Filtration2D):
    n = len(F.points)
    val = F.edge_values
    order = radix_argsort(val)
    eu = np.ascontiguousarray(F.edges[:, 0])
    ev = np.ascontiguousarray(F.edges[:, 1])
    d0, _ = _kruskal(n, eu, ev, val, order)
    h0 = _h0_rows(d0, 1.0, n > 0)
    if len(F.triangles) == 0:
        return [h0, np.empty((0, 2))]
    node_val = np.append(F.triangle_values, np.inf)
    none = np.empty(0, dtype=np.int64)
    b1, d1, _ = _dual_pairs(node_val, np.ascontiguousarray(F.edge_tris[:, 0]),
                            np.ascontiguousarray(F.edge_tris[:, 1]), val, order,
                            none, none, np.zeros(len(val), dtype=np.bool_))
    h1 = np.stack([np.sqrt(b1), np.sqrt(d1)], axis=1)
    return [h0, h1]


def sort_rows(p: np.ndarray) -> np.ndarray:
    """Rows of a (k, 2) pair array sorted by (birth, death)."""
    if len(p) == 0:
        return p.reshape(0, 2)
    return p[np.lexsort((p[:, 1], p[:, 0]))]


def alpha_pairs_2d(points, triangles=None, triangulate=None, path: str = "auto",
                   sort: bool = True) -> list:
    """Persistence pairs [H0, H1] of the 2D alpha filtration, in radius units.

    Equal (as multisets) to ``sqrt`` of the intervals of
    ``gudhi.AlphaComplex(points, precision='exact')`` with zero-length pairs
    dropped; H0 holds one (0, inf) row.

    Parameters
    ----------
    points : array_like, shape (n, 2)
        Finite coordinates; duplicate points count once.
    triangles, triangulate : optional
        A triangulation of ``points`` (rows of input indices) or a callable
        ``triangulate(P) -> (m, 3)``; either selects the general path.
    path : {"auto", "fast", "general"}
        ``auto`` uses the fast path and falls back to the general one when the
        exact triangulator cannot be used; ``fast`` raises ValueError then.
    sort : bool
        Sort rows by (birth, death); otherwise H0 is in increasing death
        order and H1 in the order of the sweep.
    """
    arrange = sort_rows if sort else (lambda p: p)
    if path not in ("auto", "fast", "general"):
        raise ValueError("path must be 'auto', 'fast' or 'general'")
    if triangles is None and triangulate is None and path != "general":
        P = check_points(points, 2)
        Ps, s = power_of_two_scale(P)
        if len(Ps) >= 3:
            pairs = _fast_pairs(np.ascontiguousarray(Ps), 1.0 / (s * s))
            if pairs is not None:
                return [arrange(p) for p in pairs]
        if path == "fast":
            U = np.unique(Ps, axis=0)
            if len(U) >= 3 and not _all_collinear(np.ascontiguousarray(U)):
                raise ValueError("the exact triangulator could not be used")
    pairs = _pairs_from_filtration_2d(alpha_filtration_2d(points, triangles, triangulate))
    return [arrange(p) for p in pairs]
