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

__all__ = ["DualPairs", "dual_pairs", "ClusterPairs", "cluster_pairs", "mst_edges"]


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
