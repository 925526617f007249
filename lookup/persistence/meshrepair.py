"""Checks and repair of a 2D triangulation into an exact Delaunay one.

Any triangulation of the distinct points is accepted: it is oriented with the
exact orientation predicate, points it misses are inserted, and Lawson's edge
flips with the exact in-circle predicate turn it into a Delaunay triangulation
(co-circular ties are left alone: every triangulation of a co-circular polygon
gives the same alpha diagram).  Also the facet adjacency of 2D and 3D meshes.
This is the slow, general path; ``lookup.persistence.delaunay2d`` gives an exact Delaunay
triangulation with its adjacency directly.
"""
from __future__ import annotations

import numpy as np

from .exactvalues import _incircle, _new_regs, _orient2d
from .jit import njit

# ======================================================================================
# 2D triangulation repair: orientation, adjacency, missing points, Lawson flips
# ======================================================================================


@njit(cache=True)
def _orient_all(P, tri):
    """Make every triangle CCW in place; returns the number of flat triangles."""
    R, L = _new_regs()
    flat = 0
    for t in range(tri.shape[0]):
        o = _orient2d(P, tri[t, 0], tri[t, 1], tri[t, 2], R, L)
        if o < 0:
            x = tri[t, 1]
            tri[t, 1] = tri[t, 2]
            tri[t, 2] = x
        elif o == 0:
            flat += 1
    return flat


@njit(cache=True)
def _adjacency_kernel(simp, n):
    """nb[t, k] = simplex across the facet opposite vertex k (-1: hull), and the
    number of distinct facets (-1 if some facet has more than two cofaces).

    Facets are bucketed by their smallest vertex (counting sort) and matched
    inside each bucket, so the work is linear in the number of simplices."""
    m = simp.shape[0]
    d1 = simp.shape[1]
    f = d1 - 1
    h = m * d1
    fv = np.empty((h, f), dtype=np.int64)       # sorted facet vertices
    cnt = np.zeros(n + 1, dtype=np.int64)
    for t in range(m):
        for k in range(d1):
            r = t * d1 + k
            q = 0
            for c in range(d1):
                if c != k:
                    fv[r, q] = simp[t, c]
                    q += 1
            for i in range(1, f):               # insertion sort (f <= 3)
                x = fv[r, i]
                j = i - 1
                while j >= 0 and fv[r, j] > x:
                    fv[r, j + 1] = fv[r, j]
                    j -= 1
                fv[r, j + 1] = x
            cnt[fv[r, 0] + 1] += 1
    for v in range(n):
        cnt[v + 1] += cnt[v]
    pos = cnt[:-1].copy()
    bucket = np.empty(h, dtype=np.int64)
    for r in range(h):
        v = fv[r, 0]
        bucket[pos[v]] = r
        pos[v] += 1
    nb = np.full((m, d1), -1, dtype=np.int64)
    done = np.zeros(h, dtype=np.bool_)
    nfacets = 0
    for v in range(n):
        for i in range(cnt[v], cnt[v + 1]):
            r = bucket[i]
            if done[r]:
                continue
            done[r] = True
            nfacets += 1
            mate = -1
            for j in range(i + 1, cnt[v + 1]):
                s = bucket[j]
                if done[s]:
                    continue
                same = True
                for c in range(1, f):
                    if fv[r, c] != fv[s, c]:
                        same = False
                        break
                if same:
                    if mate >= 0:
                        return nb, -1
                    mate = s
            if mate >= 0:
                done[mate] = True
                nb[r // d1, r % d1] = mate // d1
                nb[mate // d1, mate % d1] = r // d1
    return nb, nfacets


def _facet_adjacency(simp: np.ndarray, n: int):
    """Neighbours nb[t, k] across the facet opposite vertex k (-1 on the hull) and
    the number of distinct facets; (None, -1) if a facet has > 2 cofaces."""
    nb, nf = _adjacency_kernel(np.ascontiguousarray(simp, dtype=np.int64), n)
    if nf < 0:
        return None, -1
    return nb, nf



@njit(cache=True)
def _legalize(P, tri, nb):
    """Lawson's flip algorithm with the exact in-circle test; returns #flips."""
    R, L = _new_regs()
    m = tri.shape[0]
    cap = 3 * m + 16
    st_t = np.empty(cap, dtype=np.int64)
    st_k = np.empty(cap, dtype=np.int64)
    sp = 0
    for t in range(m):
        for k in range(3):
            u = nb[t, k]
            if u > t:
                st_t[sp] = t
                st_k[sp] = k
                sp += 1
    flips = 0
    while sp > 0:
        sp -= 1
        t = st_t[sp]
        k = st_k[sp]
        u = nb[t, k]
        if u < 0:
            continue
        a = tri[t, k]
        b = tri[t, (k + 1) % 3]
        c = tri[t, (k + 2) % 3]
        j = 0
        while j < 3 and nb[u, j] != t:
            j += 1
        if j == 3:
            raise ValueError("fastalpha: inconsistent adjacency")
        d = tri[u, j]
        if _incircle(P, a, b, c, d, R, L) <= 0:
            continue
        nbb = nb[t, (k + 1) % 3]      # across edge c-a
        nbc = nb[t, (k + 2) % 3]      # across edge a-b
        mc = nb[u, (j + 1) % 3]       # across edge b-d
        mb = nb[u, (j + 2) % 3]       # across edge d-c
        tri[t, 0] = a
        tri[t, 1] = b
        tri[t, 2] = d
        nb[t, 0] = mc
        nb[t, 1] = u
        nb[t, 2] = nbc
        tri[u, 0] = a
        tri[u, 1] = d
        tri[u, 2] = c
        nb[u, 0] = mb
        nb[u, 1] = nbb
        nb[u, 2] = t
        if mc >= 0:
            for q in range(3):
                if nb[mc, q] == u:
                    nb[mc, q] = t
        if nbb >= 0:
            for q in range(3):
                if nb[nbb, q] == t:
                    nb[nbb, q] = u
        flips += 1
        if sp + 4 > cap:
            ncap = 2 * cap
            a1 = np.empty(ncap, dtype=np.int64)
            a2 = np.empty(ncap, dtype=np.int64)
            a1[:sp] = st_t[:sp]
            a2[:sp] = st_k[:sp]
            st_t = a1
            st_k = a2
            cap = ncap
        st_t[sp] = t
        st_k[sp] = 0
        st_t[sp + 1] = t
        st_k[sp + 1] = 2
        st_t[sp + 2] = u
        st_k[sp + 2] = 0
        st_t[sp + 3] = u
        st_k[sp + 3] = 1
        sp += 4
    return flips


@njit(cache=True)
def _locate(P, tri, p):
    """(t, k): p strictly inside t (k = -1), on the edge opposite k, or (-1, -1)."""
    R, L = _new_regs()
    for t in range(tri.shape[0]):
        a = tri[t, 0]
        b = tri[t, 1]
        c = tri[t, 2]
        o0 = _orient2d(P, b, c, p, R, L)
        if o0 < 0:
            continue
        o1 = _orient2d(P, c, a, p, R, L)
        if o1 < 0:
            continue
        o2 = _orient2d(P, a, b, p, R, L)
        if o2 < 0:
            continue
        if o0 == 0:
            return t, 0
        if o1 == 0:
            return t, 1
        if o2 == 0:
            return t, 2
        return t, -1
    return -1, -1


@njit(cache=True)
def _visible_hull(P, tri, nb, p):
    """New CCW triangles joining p to the hull edges it sees strictly."""
    R, L = _new_regs()
    cnt = 0
    for t in range(tri.shape[0]):
        for k in range(3):
            if nb[t, k] < 0:
                b = tri[t, (k + 1) % 3]
                c = tri[t, (k + 2) % 3]
                if _orient2d(P, b, c, p, R, L) < 0:
                    cnt += 1
    out = np.empty((cnt, 3), dtype=np.int64)
    i = 0
    for t in range(tri.shape[0]):
        for k in range(3):
            if nb[t, k] < 0:
                b = tri[t, (k + 1) % 3]
                c = tri[t, (k + 2) % 3]
                if _orient2d(P, b, c, p, R, L) < 0:
                    out[i, 0] = c
                    out[i, 1] = b
                    out[i, 2] = p
                    i += 1
    return out


def _insert_missing(P: np.ndarray, tri: np.ndarray, missing: np.ndarray) -> np.ndarray:
    """Insert the vertices a triangulator left out (rare: near-duplicates etc.)."""
    n = len(P)
    for p in missing:
        p = int(p)
        t, k = _locate(P, tri, p)
        if t >= 0 and k < 0:
            a, b, c = tri[t]
            tri = np.concatenate([np.delete(tri, t, axis=0),
                                  np.array([[a, b, p], [b, c, p], [c, a, p]], dtype=np.int64)])
        elif t >= 0:
            a = tri[t, k]
            b = tri[t, (k + 1) % 3]
            c = tri[t, (k + 2) % 3]
            has_b = np.any(tri == b, axis=1)
            has_c = np.any(tri == c, axis=1)
            cand = np.flatnonzero(has_b & has_c)
            cand = cand[cand != t]
            new = [[a, b, p], [a, p, c]]
            drop = [t]
            if len(cand):
                u = int(cand[0])
                d = [x for x in tri[u] if x != b and x != c][0]
                new += [[d, c, p], [d, p, b]]
                drop.append(u)
            tri = np.concatenate([np.delete(tri, drop, axis=0), np.array(new, dtype=np.int64)])
        else:
            nb, _ = _facet_adjacency(tri, n)
            if nb is None:
                raise ValueError("invalid triangulation")
            add = _visible_hull(P, tri, nb, p)
            if len(add) == 0:
                raise ValueError("cannot insert a missing vertex")
            tri = np.concatenate([tri, add])
    return tri
