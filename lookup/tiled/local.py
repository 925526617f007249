"""One tile: its exact share of the Euler curve, H0 candidates and nearest neighbours.

A tile triangulates its own points together with its halo with the exact
Delaunay kernel and takes the alpha values of every simplex
(``lookup.persistence.alpha2d._filtration_2d``, exactly rounded, so a
simplex gets the same value in every tile that sees it, and the same as in
one process).  What it may keep:

* **Certified simplices.**  A local triangle is a triangle of the whole
  pattern's Delaunay triangulation when its circumdisk lies inside the
  rectangle whose points the tile has (tile plus halo): no point outside
  can then lie in it.  An edge is certified when the triangles on both
  sides are, or when one side is the local outer face and the open
  half-plane beyond the edge meets the window's bounding box only inside
  that rectangle (a hull edge of the whole pattern).  The value of a
  certified edge (its half length, or its attaching triangle's value)
  depends only on what the tile sees.
* **Owned simplices.**  Each simplex belongs to the tile of its vertex with
  the smallest global index: exactly one owner.
* **Completeness.**  When every triangle and edge at an own point is
  certified, the tile's star of each own point is the whole pattern's, so
  every simplex the tile owns is found.  Otherwise the caller doubles the
  halo and asks again (:func:`tile_part` returns None).

From its owned simplices a tile returns the counts of edges and triangles
with normalised radius <= rho on the grid, its minimum spanning forest over
its owned edges (an edge that is the longest on a cycle of owned edges is
in no minimum spanning tree of the whole graph, so this filter keeps every
edge the global Kruskal needs), and for its own points the nearest-neighbour
distance as ``PatternSummary.nn`` computes it (close pairs within the L
grid's radius, else a k-d tree query), certified by the halo.
"""
from __future__ import annotations

import numpy as np

from ..errors import PointsError

__all__ = ["tile_part"]

#: Relative safety margin of the circumdisk tests: the centre and radius are
#: computed with a relative error of a few units of rounding (about 1e-16),
#: so a margin of 1e-12 of the radius is safe yet keeps the flat slivers along
#: the hull (radii of 10^7 and more in a unit window) certifiable by the rim.
_MARGIN = 1e-12


def _circumcentres(P, tri):
    a, b, c = P[tri[:, 0]], P[tri[:, 1]], P[tri[:, 2]]
    bx, by = b[:, 0] - a[:, 0], b[:, 1] - a[:, 1]
    cx, cy = c[:, 0] - a[:, 0], c[:, 1] - a[:, 1]
    d = 2.0 * (bx * cy - by * cx)
    with np.errstate(divide="ignore", invalid="ignore"):
        ux = (cy * (bx * bx + by * by) - by * (cx * cx + cy * cy)) / d
        uy = (bx * (cx * cx + cy * cy) - cx * (bx * bx + by * by)) / d
    return np.column_stack([a[:, 0] + ux, a[:, 1] + uy]), np.hypot(ux, uy)


def _rect_distance(c, r0):
    """Distance of points ``c`` to the rectangle ``r0`` (0 inside)."""
    dx = np.maximum.reduce([r0[0] - c[:, 0], np.zeros(len(c)), c[:, 0] - r0[2]])
    dy = np.maximum.reduce([r0[1] - c[:, 1], np.zeros(len(c)), c[:, 1] - r0[3]])
    return np.hypot(dx, dy)


def _inside(centre, radius, rect, box, tol):
    """Circumdisks that meet the box only inside ``rect`` (no point lies
    outside the box, so the rest of the disk cannot hold one): the disk
    must keep clear of each strip of the box beyond a side of ``rect``."""
    r = radius * (1 + _MARGIN) + tol
    ok = np.isfinite(radius)
    x0, y0, x1, y1 = box
    strips = [(x0, y0, rect[0], y1) if rect[0] > x0 else None,
              (rect[2], y0, x1, y1) if rect[2] < x1 else None,
              (x0, y0, x1, rect[1]) if rect[1] > y0 else None,
              (x0, rect[3], x1, y1) if rect[3] < y1 else None]
    for st in strips:
        if st is not None:
            ok &= _rect_distance(centre, st) >= r
    return ok


def _outer_ok(P, u, v, apex, box, rect, tol):
    """For local hull edges (u, v) with the triangle's third vertex ``apex``:
    does the open half-plane beyond the edge meet ``box`` only inside ``rect``?"""
    out = np.zeros(len(u), dtype=bool)
    x0, y0, x1, y1 = box
    corners = np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]])
    for k in range(len(u)):
        p, q, w = P[u[k]], P[v[k]], P[apex[k]]
        nrm = np.array([q[1] - p[1], p[0] - q[0]])
        if np.dot(nrm, w - p) > 0:
            nrm = -nrm                              # points away from the apex
        s = (corners - p) @ nrm
        pts = [corners[i] for i in range(4) if s[i] > 0]
        for i in range(4):                          # where the line crosses the box edges
            j = (i + 1) % 4
            if (s[i] > 0) != (s[j] > 0):
                f = s[i] / (s[i] - s[j])
                pts.append(corners[i] + f * (corners[j] - corners[i]))
        if not pts:
            out[k] = True
            continue
        pts = np.array(pts)
        out[k] = bool(np.all((pts[:, 0] >= rect[0] + tol) & (pts[:, 0] <= rect[2] - tol)
                             & (pts[:, 1] >= rect[1] + tol) & (pts[:, 1] <= rect[3] - tol)))
    return out


def _precise(cert, at_own, centre, radius, rect, inner, tol):
    """Clear more circumdisks (those at own points that the box test could
    not) against the exact unseen region: ``inner`` outside ``rect``."""
    import shapely

    todo = np.flatnonzero(at_own & ~cert & np.isfinite(radius))
    if not len(todo):
        return
    unseen = inner.difference(shapely.box(*rect))
    if unseen.is_empty:
        cert[todo] = True
        return
    d = shapely.distance(shapely.points(centre[todo]), unseen)
    cert[todo] = d >= radius[todo] * (1 + _MARGIN) + tol


def _precise_outer(ok, at_own, P, u, v, apex, box, rect, inner):
    """Clear more hull edges (at own points) against the exact unseen
    region: the open half-plane beyond the edge, within the box, must not
    meet ``inner`` outside ``rect``."""
    import shapely

    todo = np.flatnonzero(at_own & ~ok)
    if not len(todo):
        return
    unseen = inner.difference(shapely.box(*rect))
    big = 4.0 * max(box[2] - box[0], box[3] - box[1])
    frame = shapely.box(*box)
    for k in todo:
        p, q, w = P[u[k]], P[v[k]], P[apex[k]]
        d = (q - p) / max(np.hypot(*(q - p)), 1e-300)
        nrm = np.array([d[1], -d[0]])
        if np.dot(nrm, w - p) > 0:
            nrm = -nrm
        a, b = p - big * d, q + big * d
        half = shapely.Polygon([a, b, b + big * nrm, a + big * nrm]).intersection(frame)
        ok[k] = unseen.is_empty or not half.intersects(unseen)


def _counts(r, grid):
    return np.searchsorted(np.sort(r), grid, side="right").astype(np.int64)


def tile_part(gidx, P, own, rect, box, scale, grid, r_pairs, window=None, want_nn=True,
              want_bdist=False, rim: float = 0.0, inner=None, want_h1=False):
    """The tile's exact share, or None when its halo is too small.

    Parameters
    ----------
    gidx : ndarray of int64
        Global index of each local point; the first ``own`` are the tile's own.
    P : ndarray (k, 2)
        Local points (own first, then the halo).
    rect : tuple
        The rectangle whose points the tile has (tile plus halo).
    box : tuple
        The window's bounding box (all points lie in it).
    scale : float
        (n / |W|)^(1/2) of the whole pattern: radii -> normalised radii.
    grid : ndarray
        Normalised radii of the Euler and Betti curves.
    r_pairs : float
        Radius (data units) of the close pairs behind the nearest-neighbour
        distances (``PatternSummary.pairs``).
    rim : float
        When positive, the tile also has every point within ``rim`` of the
        window's boundary: the region it does not see shrinks to the window
        eroded by ``rim`` (``inner``, a shapely region containing it, used
        for the disks that the box test cannot clear), outside its rectangle.
    want_h1 : bool
        Also return the tile's H1 candidates (:func:`_dual_forest`).
    """
    from ..persistence.alpha2d import _filtration_2d
    from ..persistence.delaunay2d import delaunay_mesh
    from ..persistence.pairing import _kruskal, radix_argsort
    from ..persistence.pointsets import distinct_morton, power_of_two_scale

    ext = float(max(box[2] - box[0], box[3] - box[1]))
    tol = 1e-12 * ext
    covers = (rect[0] <= box[0] and rect[1] <= box[1] and rect[2] >= box[2]
              and rect[3] >= box[3])
    if len(distinct_morton(P)[0]) < len(P):
        raise PointsError("the pattern has duplicate points; a tiled run needs distinct points "
                          "(remove them, or use the single-process run with --on-duplicates)")
    Ps, s = power_of_two_scale(P)
    inv = 1.0 / (s * s)
    try:
        order, L, tri, nb = delaunay_mesh(np.ascontiguousarray(Ps))
    except ValueError:                  # collinear or too few points: a larger halo
        return None if not covers else _degenerate()
    m = len(tri)
    ne = (3 * m + int(np.count_nonzero(nb < 0))) // 2
    eu, ev, ea, eb, val, tv = _filtration_2d(L, tri, nb, ne)
    glob = gidx[order]
    is_own = order < own
    # certification in the local (scaled) coordinates: rect * s is exact
    srect = tuple(v * s for v in rect)
    sbox = tuple(v * s for v in box)
    if covers:
        cert_t = np.ones(m, dtype=bool)
        cert_e = np.ones(len(eu), dtype=bool)
    else:
        cc, rr = _circumcentres(L, tri)
        # the region without unseen points: the box, or with the rim the box
        # shrunk by it (the window eroded by the rim lies inside)
        ibox = sbox if rim <= 0 else (sbox[0] + rim * s, sbox[1] + rim * s,
                                      sbox[2] - rim * s, sbox[3] - rim * s)
        cert_t = _inside(cc, rr, srect, ibox, tol * s)
        if rim > 0 and inner is not None:
            at_own = is_own[tri].any(axis=1)
            _precise(cert_t, at_own, cc / s, rr / s, rect, inner, tol)
        cert_e = cert_t[ea].copy()
        two = eb < m
        cert_e[two] &= cert_t[eb[two]]
        hull = np.flatnonzero(~two)
        if len(hull):
            t = ea[hull]
            apex = tri[t].sum(axis=1) - eu[hull] - ev[hull]
            ok = _outer_ok(L, eu[hull], ev[hull], apex, ibox, srect, tol * s)
            if rim > 0 and inner is not None:
                at = is_own[eu[hull]] | is_own[ev[hull]]
                _precise_outer(ok, at, L / s, eu[hull], ev[hull], apex, box, rect, inner)
            cert_e[hull] &= ok
        # completeness: every triangle and edge at an own point is certified
        at_own_t = is_own[tri].any(axis=1)
        at_own_e = is_own[eu] | is_own[ev]
        if not (cert_t[at_own_t].all() and cert_e[at_own_e].all()):
            return None
    # ownership: the vertex with the smallest global index
    gu, gv = glob[eu], glob[ev]
    own_e = np.where(gu < gv, is_own[eu], is_own[ev])
    gt3 = glob[tri]
    own_t = is_own[tri[np.arange(m), np.argmin(gt3, axis=1)]] if m else np.zeros(0, bool)
    ve = val[own_e] * inv                     # exact values (a power-of-two rescaling)
    vt = tv[:m][own_t] * inv
    e_counts = _counts(np.sqrt(ve) * scale, grid)
    t_counts = _counts(np.sqrt(vt) * scale, grid)
    # the tile's minimum spanning forest of its owned edges
    ou, ov = eu[own_e], ev[own_e]
    _, is_mst = _kruskal(len(L), ou.astype(np.int64), ov.astype(np.int64), ve,
                         radix_argsort(ve))
    out = {"own": gidx[:own].copy(), "e_counts": e_counts, "t_counts": t_counts,
           "cand_u": glob[ou[is_mst]], "cand_v": glob[ov[is_mst]], "cand_val": ve[is_mst],
           "edges": int(own_e.sum()), "triangles": int(own_t.sum())}
    if want_h1:
        out.update(_dual_forest(np.flatnonzero(own_e), eu, ev, ea, eb, tri, glob, ve,
                                tv * inv, m))
    if want_nn:
        nn = _nearest(P, own, r_pairs, rect, box, covers)
        if nn is None:
            return None
        out["nn"] = nn
    if want_bdist:
        out["bdist"] = window.boundary_distance(P[:own])
    return out


def _dual_forest(oe, eu, ev, ea, eb, tri, glob, ve, node_val, m):
    """The tile's H1 candidates: its owned edges in the maximum spanning
    forest of the dual graph (triangles and the outer face as nodes, edges
    joining the two faces of each edge).

    H1 of a 2D alpha filtration is H0 of the dual graph swept in decreasing
    order (elder rule, ``lookup.persistence.pairing._dual_pairs``): an edge
    that joins two dual components gives the pair (its value, the smaller of
    the two components' largest triangle values).  An owned edge that is the
    smallest, in the total order (value, smaller global vertex, larger
    global vertex), on a cycle of the tile's owned dual edges joins nothing
    in the whole graph either, so only the forest is kept.  Every owned edge
    has an own vertex, so both its faces are certified.  An edge is sent as
    its global vertices, the global apex of each face (-1: the outer face)
    and the faces' values."""
    from ..persistence.pairing import _dual_pairs

    a, b = ea[oe], eb[oe]
    u, v = eu[oe], ev[oe]
    gu, gv = glob[u], glob[v]
    gmin, gmax = np.minimum(gu, gv), np.maximum(gu, gv)
    order = np.lexsort((gmax, gmin, ve))
    none = np.empty(0, dtype=np.int32)
    _, _, tree = _dual_pairs(node_val, a, b, ve, order, none, none, np.zeros(len(oe), bool))
    ia = tri[a].sum(axis=1) - u - v
    inner_b = b < m
    ib = np.where(inner_b, tri[np.where(inner_b, b, 0)].sum(axis=1) - u - v, 0)
    apb = np.where(inner_b, glob[ib], -1)
    return {"h1_val": ve[tree], "h1_gmin": gmin[tree], "h1_gmax": gmax[tree],
            "h1_apa": glob[ia][tree], "h1_apb": apb[tree],
            "h1_va": node_val[a][tree], "h1_vb": node_val[b][tree]}


def _degenerate():
    raise PointsError("the points are all collinear: no tiled run (and no alpha complex "
                      "with triangles)")


def _nearest(P, own, r_pairs, rect, box, covers):
    """Nearest-neighbour distances of the own points, computed by the same
    functions as ``PatternSummary.nn`` (close pairs, then the nearest point
    for those without one); None if the halo cannot certify one of them."""
    from ..summaries.classical import close_pairs, nn_from_pairs

    pairs, dist = close_pairs(P, r_pairs)
    nn = nn_from_pairs(P, pairs, dist)[:own]
    if not covers:
        x, y = P[:own, 0], P[:own, 1]
        room = np.minimum.reduce([x - rect[0] if rect[0] > box[0] else np.full(own, np.inf),
                                  rect[2] - x if rect[2] < box[2] else np.full(own, np.inf),
                                  y - rect[1] if rect[1] > box[1] else np.full(own, np.inf),
                                  rect[3] - y if rect[3] < box[3] else np.full(own, np.inf)])
        if np.any(nn > room):
            return None
    return nn
