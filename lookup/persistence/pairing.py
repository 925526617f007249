"""Union-find persistence kernels: Kruskal for H0, the elder-rule dual sweep
for the top dimension, and a stable radix argsort of non-negative doubles.

H0: Kruskal's algorithm over the edges in increasing (value, index) order; each
merge kills a component born at 0 (elder rule).  Top dimension (H1 in 2D, H2 in
3D): by Alexander duality the positive (d-1)-simplices are the edges of a
maximum spanning forest of the dual graph (d-simplices plus one outer node of
value +inf; each (d-1)-simplex joins its two cofaces, or its coface and the
outer node).  Processing the (d-1)-simplices in decreasing order with
union-find, each merge kills the younger dual component, i.e. the one whose
oldest d-simplex has the smaller (value, index); the pair is (value of the
(d-1)-simplex, value of that d-simplex) (Edelsbrunner & Harer 2010, VII.2;
the planar case is the classic duality of spanning trees of a plane graph and
its dual).
"""
from __future__ import annotations

import numpy as np

from .jit import njit

# ======================================================================================
# Union-find persistence kernels
# ======================================================================================


@njit(cache=True)
def _find(parent, x):
    """Root of x; roots hold -size (union by size), paths are halved."""
    while parent[x] >= 0:
        p = parent[x]
        if parent[p] >= 0:
            parent[x] = parent[p]
        x = p
    return x


@njit(cache=True)
def _kruskal(nv, eu, ev, val, order):
    """H0 by Kruskal: returns (deaths of merges with value > 0, is_mst mask).

    The edges are gathered in sorted order first, so the sweep reads them
    sequentially; only the union-find lookups are random."""
    parent = np.full(nv, -1, dtype=np.int32)
    ne = order.shape[0]
    su = np.empty(ne, dtype=np.int32)
    sv = np.empty(ne, dtype=np.int32)
    for q in range(ne):
        su[q] = eu[order[q]]
        sv[q] = ev[order[q]]
    is_mst = np.zeros(eu.shape[0], dtype=np.bool_)
    deaths = np.empty(max(nv - 1, 0))
    k = 0
    merges = 0
    for q in range(ne):
        ru = _find(parent, su[q])
        rv = _find(parent, sv[q])
        if ru == rv:
            continue
        if parent[ru] > parent[rv]:            # -size: ru is the smaller tree
            ru, rv = rv, ru
        parent[ru] += parent[rv]
        parent[rv] = ru
        e = order[q]
        is_mst[e] = True
        if val[e] > 0.0:
            deaths[k] = val[e]
            k += 1
        merges += 1
        if merges == nv - 1:
            break
    return deaths[:k], is_mst


@njit(cache=True)
def _dual_pairs(node_val, ea, eb, val, order, pre_a, pre_b, skip):
    """Elder-rule union-find on the dual graph in decreasing order.

    Parameters
    ----------
    node_val : values of the top simplices plus, last, the outer node (+inf).
    ea, eb : the two dual nodes of each codimension-1 simplex.
    val, order : their values and the increasing (value, index) order.
    pre_a, pre_b : dual nodes joined before the sweep (zero-length pairs known
        up front); may be empty.
    skip : mask of simplices left out of the sweep (known not to join).

    Returns (births, deaths) of positive-length pairs and the dual-tree mask.
    Each root keeps (value, index) of its oldest node in one record, so a union
    touches two cache lines.
    """
    nn = node_val.shape[0]
    parent = np.full(nn, -1, dtype=np.int32)
    rec = np.empty((nn, 2))
    for x in range(nn):
        rec[x, 0] = node_val[x]
        rec[x, 1] = x
    ne = order.shape[0]
    npre = pre_a.shape[0]
    m = 0
    for q in range(ne):
        if not skip[order[q]]:
            m += 1
    sa = np.empty(npre + m, dtype=np.int32)
    sb = np.empty(npre + m, dtype=np.int32)
    sv = np.empty(npre + m)
    se = np.empty(npre + m, dtype=np.int64)
    for q in range(npre):
        sa[q] = pre_a[q]
        sb[q] = pre_b[q]
        sv[q] = -1.0
        se[q] = -1
    z = npre
    for q in range(ne - 1, -1, -1):
        e = order[q]
        if not skip[e]:
            sa[z] = ea[e]
            sb[z] = eb[e]
            sv[z] = val[e]
            se[z] = e
            z += 1
    is_tree = np.zeros(ea.shape[0], dtype=np.bool_)
    births = np.empty(nn)
    deaths = np.empty(nn)
    k = 0
    for q in range(z):
        ra = _find(parent, sa[q])
        rb = _find(parent, sb[q])
        if ra == rb:
            continue
        va = rec[ra, 0]
        ia = rec[ra, 1]
        vb = rec[rb, 0]
        ib = rec[rb, 1]
        # older = larger (value, index)
        if va > vb or (va == vb and ia > ib):
            vo, io, vy = va, ia, vb
        else:
            vo, io, vy = vb, ib, va
        x = sv[q]
        if x >= 0.0 and x < vy:
            births[k] = x
            deaths[k] = vy
            k += 1
        if parent[ra] > parent[rb]:
            ra, rb = rb, ra
        parent[ra] += parent[rb]
        parent[rb] = ra
        rec[ra, 0] = vo
        rec[ra, 1] = io
        if se[q] >= 0:
            is_tree[se[q]] = True
    return births[:k], deaths[:k], is_tree


def radix_argsort(val):
    """Stable argsort of non-negative doubles (-0.0 and +inf allowed, no NaN);
    see :func:`_radix_argsort_bits`."""
    return _radix_argsort_bits(np.ascontiguousarray(val, dtype=np.float64).view(np.uint64), True)


def radix_argsort_keys(keys):
    """Stable argsort of non-negative int64 (or uint64) keys."""
    return _radix_argsort_bits(np.ascontiguousarray(keys).view(np.uint64), False)


@njit(cache=True)
def _radix_argsort_bits(bits, is_float):
    """Stable LSD radix argsort of 64-bit unsigned keys.

    For doubles x >= 0 the IEEE-754 bit pattern, read as an unsigned integer, is
    monotone in x, so an LSD radix sort of the bit patterns (11-bit digits; the
    keys travel with the indices so every pass reads sequentially; passes whose
    digit is constant are skipped) sorts the values, ties in index order.
    """
    n = bits.shape[0]
    ka = bits.copy()
    if is_float:
        for i in range(n):                     # -0.0 ties with +0.0
            if ka[i] == np.uint64(0x8000000000000000):
                ka[i] = np.uint64(0)
    kb = np.empty(n, dtype=np.uint64)
    a = np.arange(n).astype(np.int64)
    b = np.empty(n, dtype=np.int64)
    cnt = np.empty(2049, dtype=np.int64)
    mask = np.uint64(2047)
    for shift in range(0, 64, 11):
        sh = np.uint64(shift)
        cnt[:] = 0
        for i in range(n):
            cnt[((ka[i] >> sh) & mask) + 1] += 1
        if n == 0 or cnt[((ka[0] >> sh) & mask) + 1] == n:
            continue
        for d in range(2048):
            cnt[d + 1] += cnt[d]
        for i in range(n):
            k = ka[i]
            dg = (k >> sh) & mask
            j = cnt[dg]
            kb[j] = k
            b[j] = a[i]
            cnt[dg] = j + 1
        a, b = b, a
        ka, kb = kb, ka
    return a
