"""The features of a point pattern, with the simplices that make them.

Loops (2D) and voids (3D)
    The elder-rule sweep of the dual graph of the exact alpha filtration
    (top simplices plus the outer face, joined across codimension-1 faces in
    decreasing order of value; Alexander duality, as in
    ``lookup.persistence.alpha2d``) pairs each codimension-1 face ``e`` (the
    *creator*, value = birth) with the oldest top simplex of the younger
    dual component (the *destroyer*, value = death).  The same pairs as
    ``alpha_diagram``; here the simplices are kept, because they give the
    feature's place (``lookup.features.regions``).

Loops in 3D (H1)
    The fast 3D engine keeps no H1 pairs, so they come from gudhi's
    ``AlphaComplex`` (the same call as the diagram's reference engine,
    ``lookup.persistence.diagram``): ``SimplexTree.persistence_pairs()``
    gives each class's birth edge and death triangle; the 1-skeleton (edges
    with their values) is kept for the class's representative cycle
    (``lookup.features.regions.loop_cycle``).  Pairs shorter than the
    diagram's ``ZERO_LENGTH`` (ties split by rounding) are dropped there and
    here alike, so the pairs are the diagram's H1.

Clusters (H0)
    Every H0 class is born at radius 0, so H0 lifetimes only measure gaps.
    A cluster's strength is measured on the single-linkage tree of the
    Euclidean minimum spanning tree (edges of radius |uv|/2, the H0 deaths of
    the Čech filtration): a component becomes a *cluster* when it first holds
    ``min_size`` points (its birth b) and stays one until it merges with
    another cluster (its death d); the merged component is a new cluster
    born at d.  Strength = d / b, scale free like the death/birth ratio of
    loops.  The component that survives all merges is never counted.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["DualPairs", "dual_pairs", "LoopPairs", "loop_pairs_3d", "ClusterPairs",
           "cluster_pairs", "mst_edges"]


@dataclass
class DualPairs:
    """Persistence pairs of the top homology dimension (d - 1) with their simplices.

    Attributes
    ----------
    creator : ndarray of int
        Codimension-1 face (edge in 2D, triangle in 3D) that creates the class.
    destroyer : ndarray of int
        Top simplex (triangle in 2D, tetrahedron in 3D) that fills it.
    birth, death : ndarray
        Radii in the data's units.
    face_values, top_values : ndarray
        Squared-radius values of all faces and top simplices.
    face_tops : ndarray (E, 2)
        The two top simplices of each face (``len(top_values)``: outside).
    face_key : ndarray of int
        Position of each face in the (value, index) order of the sweep.
    """

    creator: np.ndarray
    destroyer: np.ndarray
    birth: np.ndarray
    death: np.ndarray
    face_values: np.ndarray
    top_values: np.ndarray
    face_tops: np.ndarray
    face_key: np.ndarray


def _find(parent, x):
    root = x
    while parent[root] != root:
        root = parent[root]
    while parent[x] != root:
        parent[x], x = root, parent[x]
    return root


def dual_pairs(face_values, face_tops, top_values) -> DualPairs:
    """Elder-rule sweep of the dual graph that keeps creators and destroyers.

    Parameters
    ----------
    face_values : ndarray (E,)
        Squared-radius values of the codimension-1 faces.
    face_tops : ndarray (E, 2)
        Their two top simplices; ``len(top_values)`` stands for the outside.
    top_values : ndarray (m,)
        Squared-radius values of the top simplices.

    Returns
    -------
    DualPairs
        Pairs of positive length, radii in the data's units.
    """
    fv = np.asarray(face_values, float)
    ft = np.asarray(face_tops, np.int64)
    m = len(top_values)
    node_val = np.append(np.asarray(top_values, float), np.inf).tolist()
    order = np.lexsort((np.arange(len(fv)), fv))
    key = np.empty(len(fv), np.int64)
    key[order] = np.arange(len(fv))
    parent = list(range(m + 1))
    oldest = list(range(m + 1))          # per root: its oldest node (largest value, index)
    cr, de, bi, dv = [], [], [], []
    fa, fb, fvl = ft[:, 0].tolist(), ft[:, 1].tolist(), fv.tolist()
    for e in order[::-1].tolist():
        ra, rb = _find(parent, fa[e]), _find(parent, fb[e])
        if ra == rb:
            continue
        ia, ib = oldest[ra], oldest[rb]
        if (node_val[ia], ia) > (node_val[ib], ib):
            io, iy = ia, ib
        else:
            io, iy = ib, ia
        x = fvl[e]
        if x < node_val[iy]:
            cr.append(e)
            de.append(iy)
            bi.append(x)
            dv.append(node_val[iy])
        parent[rb] = ra
        oldest[ra] = io
    return DualPairs(np.array(cr, np.int64), np.array(de, np.int64),
                     np.sqrt(np.array(bi, float)), np.sqrt(np.array(dv, float)),
                     fv, np.asarray(top_values, float), ft, key)


@dataclass
class LoopPairs:
    """H1 pairs of a 3D alpha filtration with their simplices (module doc).

    Attributes
    ----------
    birth, death : ndarray
        Radii in the data's units.
    birth_edge : ndarray (k, 2) of int
        The edge that creates each class (rows of the points).
    death_triangle : ndarray (k, 3) of int
        The triangle that fills it.
    edges : ndarray (E, 2) of int
        All edges of the alpha complex.
    edge_values : ndarray (E,)
        Their squared-radius values.
    birth_value : ndarray (k,)
        Squared-radius value of each birth edge (as in ``edge_values``).
    """

    birth: np.ndarray
    death: np.ndarray
    birth_edge: np.ndarray
    death_triangle: np.ndarray
    edges: np.ndarray
    edge_values: np.ndarray
    birth_value: np.ndarray


def loop_pairs_3d(points: np.ndarray) -> LoopPairs:
    """H1 pairs of the alpha filtration of 3D points, with birth edges and death triangles.

    Parameters
    ----------
    points : ndarray (n, 3)
        Distinct points.

    Returns
    -------
    LoopPairs
        Finite pairs of positive length, in the order gudhi reports them.
    """
    import gudhi
    from scipy.spatial import cKDTree

    from ..persistence.diagram import ZERO_LENGTH

    P = np.asarray(points, float)
    centred = P - P.mean(axis=0)
    ac = gudhi.AlphaComplex(points=centred)
    st = ac.create_simplex_tree()
    st.compute_persistence(homology_coeff_field=2, persistence_dim_max=False)
    # gudhi's vertex v is the point ac.get_point(v): map vertices to rows
    nv = st.num_vertices()
    gp = np.array([ac.get_point(v) for v in range(nv)], float).reshape(nv, 3)
    rows = cKDTree(centred).query(gp)[1].astype(np.int64)
    be, dt, bv, dv = [], [], [], []
    for b, d in st.persistence_pairs():
        if len(b) == 2 and len(d) == 3:
            fb, fd = st.filtration(b), st.filtration(d)
            rb, rd = np.sqrt(max(fb, 0.0)), np.sqrt(max(fd, 0.0))
            if rd - rb > ZERO_LENGTH * rd:
                be.append(b)
                dt.append(d)
                bv.append(fb)
                dv.append(fd)
    ed, ev = [], []
    for s, f in st.get_skeleton(1):
        if len(s) == 2:
            ed.append(s)
            ev.append(f)
    k = len(bv)
    return LoopPairs(np.sqrt(np.maximum(np.array(bv, float), 0.0)),
                     np.sqrt(np.maximum(np.array(dv, float), 0.0)),
                     rows[np.array(be, np.int64).reshape(k, 2)],
                     rows[np.array(dt, np.int64).reshape(k, 3)],
                     rows[np.array(ed, np.int64).reshape(-1, 2)], np.array(ev, float),
                     np.array(bv, float))


def mst_edges(points: np.ndarray):
    """Edges of the Euclidean minimum spanning tree, in increasing length.

    Returns
    -------
    (u, v, radius) : ndarrays
        End points and half lengths (the Čech radius at which the edge enters).
    """
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import minimum_spanning_tree
    from scipy.spatial import Delaunay

    P = np.asarray(points, float)
    n, d = P.shape
    simp = Delaunay(P - P.mean(axis=0)).simplices
    a = np.concatenate([simp[:, i] for i in range(d + 1) for j in range(i + 1, d + 1)])
    b = np.concatenate([simp[:, j] for i in range(d + 1) for j in range(i + 1, d + 1)])
    lo, hi = np.minimum(a, b), np.maximum(a, b)
    k = np.unique(lo * n + hi)
    lo, hi = k // n, k % n
    w = np.linalg.norm(P[lo] - P[hi], axis=1)
    T = minimum_spanning_tree(coo_matrix((w, (lo, hi)), shape=(n, n))).tocoo()
    o = np.lexsort((T.col, T.row, T.data))
    return T.row[o].astype(np.int64), T.col[o].astype(np.int64), T.data[o] / 2.0


@dataclass
class ClusterPairs:
    """Clusters of the single-linkage tree (module doc): birth, death (radii in
    the data's units), one member point each (``seed``), and the MST edges."""

    birth: np.ndarray
    death: np.ndarray
    seed: np.ndarray
    edges: tuple


def cluster_pairs(points: np.ndarray, min_size: int = 5, edges=None) -> ClusterPairs:
    """Clusters of at least ``min_size`` points, with birth and death radii.

    Parameters
    ----------
    points : ndarray (n, d)
    min_size : int
        Points a component needs to count as a cluster (>= 2).
    edges : tuple, optional
        ``mst_edges(points)``, if already computed.

    Returns
    -------
    ClusterPairs
    """
    if min_size < 2:
        raise ValueError("min_size must be at least 2")
    u, v, r = edges if edges is not None else mst_edges(points)
    n = len(points)
    parent = list(range(n))
    size = [1] * n
    born = [None] * n                     # per root: cluster birth radius, or None
    seed = list(range(n))
    bi, de, sd = [], [], []
    for a, b, x in zip(u.tolist(), v.tolist(), r.tolist()):
        ra, rb = _find(parent, a), _find(parent, b)
        if ra == rb:
            continue
        ba, bb = born[ra], born[rb]
        if ba is not None and bb is not None:
            bi += [ba, bb]
            de += [x, x]
            sd += [seed[ra], seed[rb]]
            nb = x
        else:
            nb = ba if ba is not None else bb
        if size[ra] < size[rb]:
            ra, rb = rb, ra
        keep_seed = seed[ra] if born[ra] is not None or born[rb] is None else seed[rb]
        parent[rb] = ra
        size[ra] += size[rb]
        if nb is None and size[ra] >= min_size:
            nb = x
        born[ra] = nb
        seed[ra] = keep_seed
    return ClusterPairs(np.array(bi, float), np.array(de, float), np.array(sd, np.int64),
                        (u, v, r))


def max_cluster_ratio(points: np.ndarray, min_size: int = 5) -> float:
    """Largest death/birth ratio of the clusters of ``points`` (1 if none)."""
    c = cluster_pairs(points, min_size)
    return float(np.max(c.death / c.birth)) if len(c.birth) else 1.0
