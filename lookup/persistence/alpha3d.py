"""Exact persistence of the 3D alpha (Čech) filtration: H0, H2, Euler and Betti curves.

Filtration values as in ``lookup.persistence.alpha2d`` (gudhi's convention, exactly
rounded by ``lookup.persistence.exactvalues``): tetrahedra get their squared circumradius,
a triangle attached by a tetrahedron (the opposite vertex strictly inside its
smallest circumsphere) the smallest value of its cofaces, otherwise its own
squared circumradius; edges likewise with their diametral sphere.

* H0: Kruskal over the edges (``lookup.persistence.pairing``).
* H2: the elder-rule sweep of the dual graph (tetrahedra plus the outer cell)
  over the triangles in decreasing order (Alexander duality).
* H1 is not paired here.  Its Betti curve follows from the Euler
  characteristic, chi = b0 - b1 + b2, with chi(r) counted from the simplices
  of value <= r^2; its total persistence is sum(sqrt value of negative
  triangles) - sum(sqrt value of positive edges), summed exactly
  (``math.fsum``), which equals the integral of the Betti-1 step function.
  The pairs themselves (for the APF of loops) come from gudhi.

The tetrahedralisation is scipy's Qhull on centred coordinates; its output is
checked with exact predicates (no flat tetrahedron, every interior triangle
locally Delaunay) and on failure the exact CGAL triangulation of
``gudhi.DelaunayComplex`` is used instead (slower: read from a simplex tree).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .alpha2d import _gudhi_top_simplices, _prepare, _remap, sort_rows
from .exactvalues import (
    _edge_value,
    _insphere,
    _new_regs,
    _obtuse,
    _tet_value,
    _tri3_value,
    _tri_attach,
    _tri_attach_filter,
)
from .jit import njit
from .meshrepair import _facet_adjacency
from .pairing import _dual_pairs, _kruskal, radix_argsort, radix_argsort_keys

__all__ = ["Alpha3D", "Filtration3D", "alpha_filtration_3d", "betti_euler_3d",
           "total_h1_3d", "scipy_tetrahedra_3d"]


def scipy_tetrahedra_3d(points: np.ndarray) -> np.ndarray:
    """Delaunay tetrahedra by ``scipy.spatial.Delaunay`` on centred coordinates."""
    from scipy.spatial import Delaunay

    P = np.asarray(points, dtype=np.float64)
    return Delaunay(P - P.mean(axis=0)).simplices.astype(np.int64)


def _exact_mesh_3d(Ps):
    """(local points, tets, neighbours) from ``lookup.persistence.delaunay3d``, or None."""
    try:
        from .delaunay3d import delaunay_mesh_3d
    except ImportError:
        return None
    try:
        _, P, T, nb = delaunay_mesh_3d(Ps)
    except (ValueError, FloatingPointError):
        return None
    return np.ascontiguousarray(P), np.ascontiguousarray(T), np.ascontiguousarray(nb)


@njit(cache=True)
def _tet_values(P, tets):
    """Exact values of the tetrahedra, plus the outer cell (+inf) last."""
    R, L = _new_regs()
    m = tets.shape[0]
    tv = np.empty(m + 1)
    for t in range(m):
        tv[t] = _tet_value(P, tets[t, 0], tets[t, 1], tets[t, 2], tets[t, 3], R, L)
    tv[m] = np.inf
    return tv


@njit(cache=True)
def _tet_values_and_check(P, tets, nb):
    """Tet values; status 0 ok, 1 flat tetrahedron, 2 not locally Delaunay."""
    R, L = _new_regs()
    m = tets.shape[0]
    tv = np.empty(m + 1)
    status = 0
    for t in range(m):
        tv[t] = _tet_value(P, tets[t, 0], tets[t, 1], tets[t, 2], tets[t, 3], R, L)
        if tv[t] == np.inf:
            status = 1
    tv[m] = np.inf
    if status:
        return tv, status
    for t in range(m):
        for k in range(4):
            u = nb[t, k]
            if u > t:
                j = 0
                while j < 4 and nb[u, j] != t:
                    j += 1
                if j == 4:
                    return tv, 2
                s = _insphere(P, tets[t, 0], tets[t, 1], tets[t, 2], tets[t, 3], tets[u, j], R, L)
                if s > 0:
                    return tv, 2
    return tv, status


@njit(cache=True)
def _triangles_3d(P, tets, nb, tv, nt):
    """Triangles (vertices, two cofaces) and their values."""
    R, L = _new_regs()
    m = tets.shape[0]
    tri = np.empty((nt, 3), dtype=np.int64)
    ta = np.empty(nt, dtype=np.int64)
    tb = np.empty(nt, dtype=np.int64)
    val = np.empty(nt)
    f = 0
    for t in range(m):
        for k in range(4):
            u = nb[t, k]
            if u >= 0 and u < t:
                continue
            q = 0
            for c in range(4):
                if c != k:
                    tri[f, q] = tets[t, c]
                    q += 1
            a = tri[f, 0]
            b = tri[f, 1]
            c2 = tri[f, 2]
            ta[f] = t
            f0 = _tri_attach_filter(P, a, b, c2, tets[t, k])
            attached = f0 == 1 if f0 >= 0 else _tri_attach(P, a, b, c2, tets[t, k], R, L)
            vmin = tv[t]
            if u >= 0:
                tb[f] = u
                j = 0
                while nb[u, j] != t:
                    j += 1
                if not attached:
                    f0 = _tri_attach_filter(P, a, b, c2, tets[u, j])
                    attached = f0 == 1 if f0 >= 0 else _tri_attach(P, a, b, c2, tets[u, j], R, L)
                if tv[u] < vmin:
                    vmin = tv[u]
            else:
                tb[f] = m
            if attached:
                val[f] = vmin
            else:
                val[f] = _tri3_value(P, a, b, c2, R, L)
            f += 1
    return tri, ta, tb, val


@njit(cache=True)
def _edges_3d(P, tri, tval, hkey, order):
    """Edges from the triangles' half-edges sorted by key; values per gudhi."""
    R, L = _new_regs()
    h = order.shape[0]
    # count groups
    ne = 0
    for q in range(h):
        if q == 0 or hkey[order[q]] != hkey[order[q - 1]]:
            ne += 1
    eu = np.empty(ne, dtype=np.int64)
    ev = np.empty(ne, dtype=np.int64)
    val = np.empty(ne)
    e = -1
    q = 0
    while q < h:
        r = q
        while r < h and hkey[order[r]] == hkey[order[q]]:
            r += 1
        e += 1
        first = order[q]
        t0 = first // 3
        s0 = first % 3
        u = tri[t0, s0]
        v = tri[t0, (s0 + 1) % 3]
        eu[e] = u
        ev[e] = v
        attached = False
        vmin = np.inf
        for z in range(q, r):
            hz = order[z]
            t = hz // 3
            s = hz % 3
            w = tri[t, (s + 2) % 3]
            if not attached:
                attached = _obtuse(P, u, v, w, R, L)
            if tval[t] < vmin:
                vmin = tval[t]
        if attached:
            val[e] = vmin
        else:
            val[e] = _edge_value(P, u, v, R, L)
        for z in range(q, r):
            t = order[z] // 3
            if tval[t] < val[e]:
                tval[t] = val[e]
        q = r
    return eu, ev, val


@njit(cache=True)
def _raise_tets(tv, ta, tb, tval):
    m = tv.shape[0] - 1
    for f in range(ta.shape[0]):
        if tv[ta[f]] < tval[f]:
            tv[ta[f]] = tval[f]
        if tb[f] < m and tv[tb[f]] < tval[f]:
            tv[tb[f]] = tval[f]


@dataclass
class Alpha3D:
    """H0 and H2 of the 3D alpha filtration, simplex values and derived curves.

    All quantities are in radius units (square roots of gudhi's values).
    """

    n: int
    h0: np.ndarray
    h2: np.ndarray
    edge_radii: np.ndarray      # sorted
    triangle_radii: np.ndarray  # sorted
    tet_radii: np.ndarray       # sorted
    total_h1: float
    meta: dict = field(default_factory=dict)

    def euler(self, r) -> np.ndarray:
        """chi(r) = #V - #E(r) + #T(r) - #Tet(r) (simplices with radius <= r)."""
        r = np.asarray(r, dtype=float)
        c = (self.n - np.searchsorted(self.edge_radii, r, side="right")
             + np.searchsorted(self.triangle_radii, r, side="right")
             - np.searchsorted(self.tet_radii, r, side="right"))
        return np.where(r >= 0, c, 0).astype(np.int64)

    @staticmethod
    def _betti(pairs, r):
        b = np.sort(pairs[:, 0])
        d = np.sort(pairs[:, 1])
        return (np.searchsorted(b, r, side="right") - np.searchsorted(d, r, side="right")).astype(np.int64)

    def betti0(self, r) -> np.ndarray:
        return self._betti(self.h0, np.asarray(r, dtype=float))

    def betti2(self, r) -> np.ndarray:
        return self._betti(self.h2, np.asarray(r, dtype=float))

    def betti1(self, r) -> np.ndarray:
        """b1 = b0 + b2 - chi."""
        return self.betti0(r) + self.betti2(r) - self.euler(r)

    def betti_curves(self, r) -> np.ndarray:
        """(3, len(r)) array of b0, b1, b2."""
        b0, b2, chi = self.betti0(r), self.betti2(r), self.euler(r)
        return np.stack([b0, b0 + b2 - chi, b2])


@dataclass
class Filtration3D:
    points: np.ndarray
    tets: np.ndarray
    tet_values: np.ndarray
    triangles: np.ndarray
    triangle_values: np.ndarray
    triangle_tets: np.ndarray
    edges: np.ndarray
    edge_values: np.ndarray


def alpha_filtration_3d(points, tets=None, triangulate=None) -> Filtration3D:
    """The exact 3D alpha filtration (gudhi's squared-radius values)."""
    Ps, s, inv_map = _prepare(points, 3)
    n = len(Ps)
    if tets is not None:
        tets = _remap(tets, inv_map, 4)
    inv = 1.0 / (s * s)
    if n < 4:
        raise ValueError("need at least 4 distinct points in 3D")
    T = None
    ok = False
    if tets is None and triangulate is None:
        mesh = _exact_mesh_3d(Ps)
        if mesh is not None:                  # exact Delaunay: no checks needed
            Ps, T, nb = mesh
            tv = _tet_values(Ps, T)
            nt = (4 * len(T) + int(np.count_nonzero(nb < 0))) // 2
            ok = True
    elif tets is not None:
        T = tets
    if not ok and T is None:
        try:
            T = (triangulate or scipy_tetrahedra_3d)(Ps)
        except Exception:
            T = None
    for attempt in range(0 if ok else 2):
        ok = T is not None and len(T) > 0
        if ok:
            T = np.ascontiguousarray(np.asarray(T, dtype=np.int64).reshape(-1, 4))
            nb, nt = _facet_adjacency(T, n)
            ok = nb is not None
        if ok:
            tv, status = _tet_values_and_check(Ps, T, nb)
            ok = status == 0 and len(np.unique(T)) == n
        if ok:
            break
        if attempt == 0:
            T = _gudhi_top_simplices(Ps, 3)
    if not ok:
        raise ValueError("could not build a Delaunay tetrahedralization (coplanar points?)")
    tri, ta, tb, tval = _triangles_3d(Ps, T, nb, tv, nt)
    # half-edges of triangles: (t, s) -> vertices tri[t, s], tri[t, s+1]
    a = tri
    b = np.roll(tri, -1, axis=1)
    lo = np.minimum(a, b).ravel()
    hi = np.maximum(a, b).ravel()
    hkey = lo * n + hi
    order = radix_argsort_keys(hkey)
    eu, ev, ev_val = _edges_3d(Ps, tri, tval, hkey, order)
    _raise_tets(tv, ta, tb, tval)
    return Filtration3D(Ps / s, T, tv[:-1] * inv, tri, tval * inv, np.stack([ta, tb], axis=1),
                        np.stack([eu, ev], axis=1), ev_val * inv)


def betti_euler_3d(points, tets=None, triangulate=None) -> Alpha3D:
    """H0 and H2 pairs, Euler/Betti curves and total H1 persistence in 3D.

    Matches ``gudhi.AlphaComplex(points, precision='exact')``: H0 and H2 pairs
    (radius units, zero-length dropped, H0 with one (0, inf) row) equal gudhi's,
    ``euler(r)`` counts simplices with sqrt(value) <= r, ``betti1(r)`` equals the
    Betti-1 curve of gudhi's H1 diagram and ``total_h1`` its total persistence
    sum(death - birth).
    """
    F = alpha_filtration_3d(points, tets, triangulate)
    n = len(F.points)
    ev = F.edge_values
    eorder = radix_argsort(ev)
    d0, is_mst = _kruskal(n, np.ascontiguousarray(F.edges[:, 0]),
                          np.ascontiguousarray(F.edges[:, 1]), ev, eorder)
    h0 = np.zeros((len(d0) + 1, 2))
    h0[:-1, 1] = np.sqrt(d0)
    h0[-1, 1] = np.inf
    tval = F.triangle_values
    torder = radix_argsort(tval)
    node_val = np.append(F.tet_values, np.inf)
    none = np.empty(0, dtype=np.int64)
    b2, d2, is_tree = _dual_pairs(node_val, np.ascontiguousarray(F.triangle_tets[:, 0]),
                                  np.ascontiguousarray(F.triangle_tets[:, 1]), tval, torder,
                                  none, none, np.zeros(len(tval), dtype=np.bool_))
    h2 = np.stack([np.sqrt(b2), np.sqrt(d2)], axis=1)
    er = np.sqrt(ev)
    tr = np.sqrt(tval)
    total = math.fsum(np.concatenate([tr[~is_tree], -er[~is_mst]]).tolist())
    return Alpha3D(n=n, h0=sort_rows(h0), h2=sort_rows(h2), edge_radii=np.sort(er),
                   triangle_radii=np.sort(tr), tet_radii=np.sort(np.sqrt(F.tet_values)),
                   total_h1=float(total))


def total_h1_3d(points, tets=None, triangulate=None) -> float:
    """Total persistence sum(death - birth) of H1 of the 3D alpha filtration
    (radius units), exactly from the filtration: the integral of the Betti-1
    step function b0 + b2 - chi."""
    return betti_euler_3d(points, tets, triangulate).total_h1
