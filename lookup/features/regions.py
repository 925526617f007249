"""The place of one feature.

Loop (2D) / void (3D)
    At radius r in [birth, death) the hole is the component of its destroyer
    in the uncovered part: the top simplices reachable from the destroyer
    across faces of value above r (at the birth itself: faces later in the
    sweep order than the creator), never through the outside.  At the birth
    it is largest and often runs into fjords between neighbouring gaps;
    just before the death it is the destroyer alone.  ``locate_features``
    draws it at the radius of ``stable_radius``: the middle (log scale) of
    the longest stretch of the hole's life over which the region does not
    change, its most persistent shape.  Earlier choices, the birth and the
    middle of the whole life sqrt(birth * death), overlapped planted empty
    disks worse (median intersection over union 0.29 and 0.71 for an empty
    disk of radius 40 mm on a 300-defect wafer; the rule here: README,
    ``scripts/feature_fwer.py``).  Their union is the region of the hole (a
    polygon in 2D, a set of tetrahedra in 3D); the faces of the region that
    are not crossed are present at the birth and form the representative
    cycle (2D: the polygon's boundary) or the enclosing surface (3D); their
    vertices are the points on the boundary.
Loop in 3D (H1)
    A representative cycle of the class born with edge uv at squared radius
    b2: uv closed by a shortest path (Euclidean edge lengths, Dijkstra)
    from v to u in the 1-skeleton of the complex just before the birth,
    the edges of value < b2.  Every such cycle contains the one edge that
    creates the class, so it is nonzero in homology at the birth (a cycle of
    the earlier complex plus uv), and the shortest one is the tightest
    loop through the creating edge.  Its points, in order, are the loop's
    points.
Cluster (H0)
    The component of a member point in the union of balls of radius r*, the
    geometric middle sqrt(b d) of the cluster's life (the middle of its
    range of scales on the log scale): a breadth-first search over the
    minimum spanning tree edges of radius <= r*.
"""
from __future__ import annotations

from collections import deque

import numpy as np

__all__ = ["hole_region", "stable_radius", "loop_cycle", "cluster_members"]


def _adjacency(face_tops: np.ndarray, m: int):
    """CSR lists of (neighbouring top simplex, face) per top simplex."""
    ft = np.asarray(face_tops, np.int64)
    e = np.arange(len(ft))
    node = np.concatenate([ft[:, 0], ft[:, 1]])
    other = np.concatenate([ft[:, 1], ft[:, 0]])
    face = np.concatenate([e, e])
    o = np.argsort(node, kind="stable")
    start = np.searchsorted(node[o], np.arange(m + 2))
    return start, other[o], face[o]


def hole_region(pairs, k: int, adjacency=None, radius: float | None = None):
    """Top simplices of the hole of pair ``k`` and its boundary faces, at
    ``radius`` (data units; default: at its birth).

    Parameters
    ----------
    pairs : lookup.features.pairs.DualPairs
    k : int
        Index of the pair.
    adjacency : tuple, optional
        ``_adjacency(pairs.face_tops, m)``, cached by the caller.
    radius : float, optional
        In [birth, death) of the pair.

    Returns
    -------
    (tops, boundary_faces) : ndarrays of int
    """
    m = len(pairs.top_values)
    start, other, face = adjacency if adjacency is not None else _adjacency(pairs.face_tops, m)
    if radius is None:
        limit = pairs.face_key[pairs.creator[k]]
        key = pairs.face_key
    else:                       # faces of value <= radius^2 are present: their key is <= limit
        limit = 0.5
        key = (pairs.face_values > radius * radius).astype(np.int64)
    seen = {int(pairs.destroyer[k])}
    todo = deque(seen)
    boundary = []
    while todo:
        t = todo.popleft()
        for j in range(start[t], start[t + 1]):
            f = face[j]
            o = other[j]
            if key[f] > limit and o != m:
                if o not in seen:
                    seen.add(int(o))
                    todo.append(int(o))
            elif key[f] <= limit:
                boundary.append((int(f), int(o)))
    # faces between two simplices of the region are inside it, not on its boundary
    out = [f for f, o in boundary if o not in seen]
    return np.array(sorted(seen), np.int64), np.unique(np.array(out, np.int64))


def stable_radius(pairs, k: int, adjacency=None) -> tuple:
    """The radius at which the hole of pair ``k`` is drawn: the geometric middle
    of the longest stretch of its life, on the log scale, over which its
    region does not change.

    The region at r (``hole_region``) is the component of the destroyer in
    the graph of top simplices joined across faces of value > r^2.  Going
    down from the death, it grows exactly at the values of the faces whose
    opening joins another part to it: with those radii c_1 > ... > c_j in
    (birth, death) and c_0 = death, c_{j+1} = birth, the region is constant
    on each [c_{i+1}, c_i).  The widest of these stretches in log r is the
    hole's most persistent shape (the scale-free counterpart of reading a
    single-linkage tree at its largest gap), and r = sqrt(c_{i+1} c_i).  A
    union-find pass over the faces inside the region at birth, in decreasing
    value.

    Parameters
    ----------
    pairs : lookup.features.pairs.DualPairs
    k : int
        Index of the pair.
    adjacency : tuple, optional
        ``_adjacency(pairs.face_tops, m)``.

    Returns
    -------
    (r, lo, hi) : floats
        The radius and the stretch [lo, hi) it is the middle of (data units).
    """
    m = len(pairs.top_values)
    adj = adjacency if adjacency is not None else _adjacency(pairs.face_tops, m)
    b, d = float(pairs.birth[k]), float(pairs.death[k])
    region, _ = hole_region(pairs, k, adj)
    inside = np.zeros(m + 1, bool)
    inside[region] = True
    ft = pairs.face_tops
    faces = np.flatnonzero(inside[ft[:, 0]] & inside[ft[:, 1]])
    faces = faces[np.argsort(-pairs.face_values[faces], kind="stable")]
    parent = {int(t): int(t) for t in region}

    def find(x):
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    dest = int(pairs.destroyer[k])
    cuts = [d]
    for f in faces.tolist():
        r = float(np.sqrt(pairs.face_values[f]))
        if r <= b:
            break
        a, c = find(int(ft[f, 0])), find(int(ft[f, 1]))
        if a == c:
            continue
        if find(dest) in (a, c) and r < cuts[-1]:
            cuts.append(r)
        parent[a] = c
    cuts.append(b)
    c = np.array(cuts)
    w = np.log(c[:-1] / c[1:])
    i = int(np.argmax(w))
    return float(np.sqrt(c[i] * c[i + 1])), float(c[i + 1]), float(c[i])


def loop_cycle(points: np.ndarray, pairs, k: int) -> np.ndarray:
    """Representative cycle of 3D loop ``k`` (module doc): its points in order.

    Parameters
    ----------
    points : ndarray (n, 3)
    pairs : lookup.features.pairs.LoopPairs
    k : int
        Index of the pair.

    Returns
    -------
    ndarray of int
        Rows u, ..., v of the points: consecutive rows and (v, u), the birth
        edge, are edges of the alpha complex; no row repeats.
    """
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import dijkstra

    n = len(points)
    u, v = (int(x) for x in pairs.birth_edge[k])
    bval = pairs.birth_value[k]
    E, ev = pairs.edges, pairs.edge_values
    keep = ev < bval
    if not keep.any():
        raise ValueError("no edge precedes the birth edge: not an H1 creator")
    a, b = E[keep, 0], E[keep, 1]
    w = np.linalg.norm(points[a] - points[b], axis=1)
    G = coo_matrix((w, (a, b)), shape=(n, n)).tocsr()
    dist, pred = dijkstra(G, directed=False, indices=v, return_predecessors=True)
    if not np.isfinite(dist[u]):
        raise ValueError("the birth edge's ends are not joined before its birth: "
                         "not an H1 creator")
    path = [u]
    while path[-1] != v:
        path.append(int(pred[path[-1]]))
    return np.array(path, np.int64)


def cluster_members(n: int, edges, seed: int, radius: float) -> np.ndarray:
    """Points of the component of ``seed`` joined by MST edges of radius <= ``radius``."""
    u, v, r = edges
    keep = r <= radius
    a, b = u[keep], v[keep]
    nodes = np.concatenate([a, b])
    nbrs = np.concatenate([b, a])
    o = np.argsort(nodes, kind="stable")
    start = np.searchsorted(nodes[o], np.arange(n + 1))
    nb = nbrs[o]
    seen = {int(seed)}
    todo = [int(seed)]
    while todo:
        x = todo.pop()
        for y in nb[start[x]:start[x + 1]].tolist():
            if y not in seen:
                seen.add(y)
                todo.append(y)
    return np.array(sorted(seen), np.int64)
