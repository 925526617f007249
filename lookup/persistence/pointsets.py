"""Point-set preparation shared by the exact alpha-filtration kernels.

Distinct points in Morton (Z-curve) order for memory locality, scaled by an
exact power of two so that their extent lies in [0.5, 1) (keeps the degree-6
polynomials of the exact evaluators clear of overflow and underflow; the
scaling changes no predicate and multiplies every squared radius by s^2
exactly).
"""
from __future__ import annotations

import math

import numpy as np

from .jit import njit

__all__ = ["check_points", "power_of_two_scale", "distinct_morton", "duplicate_groups"]


def check_points(points, dim: int) -> np.ndarray:
    """float64 (n, dim) copy of ``points`` with -0.0 turned into 0.0; ValueError
    on a wrong shape or non-finite values."""
    P = np.asarray(points, dtype=np.float64)
    if P.ndim != 2 or P.shape[1] != dim:
        raise ValueError(f"points must have shape (n, {dim})")
    if not np.all(np.isfinite(P)):
        raise ValueError("points must be finite")
    return np.ascontiguousarray(P + 0.0)


def power_of_two_scale(P: np.ndarray):
    """(P * s, s) with s = 2^k making the extent of P lie in [0.5, 1), or (P, 1)
    when that scaling would lose bits (under/overflow)."""
    if len(P) == 0:
        return P, 1.0
    ext = float(np.max(P.max(axis=0) - P.min(axis=0)))
    if ext <= 0:
        return P, 1.0
    s = math.ldexp(1.0, -math.frexp(ext)[1])
    Ps = P * s
    if not np.array_equal(Ps / s, P):
        return P, 1.0
    return Ps, s


@njit(cache=True)
def _morton_kernel(P, lo, inv_ext, bits):
    n, d = P.shape
    key = np.empty(n, dtype=np.uint64)
    top = 2.0 ** bits - 1.0
    for i in range(n):
        k = np.uint64(0)
        for c in range(d):
            q = np.uint64(min(max((P[i, c] - lo[c]) * inv_ext[c] * top, 0.0), top))
            for b in range(bits):
                k |= ((q >> np.uint64(b)) & np.uint64(1)) << np.uint64(d * b + c)
        key[i] = k
    return key


@njit(cache=True)
def _lex_less(P, a, b):
    for c in range(P.shape[1]):
        if P[a, c] < P[b, c]:
            return True
        if P[a, c] > P[b, c]:
            return False
    return False


@njit(cache=True)
def _order_runs_and_dedupe(P, key, order):
    """Sort runs of equal Morton key lexicographically (insertion sort; runs are
    tiny) and mark the rows equal to their predecessor."""
    n = order.shape[0]
    i = 0
    while i < n:
        j = i + 1
        while j < n and key[order[j]] == key[order[i]]:
            j += 1
        for a in range(i + 1, j):
            x = order[a]
            b = a - 1
            while b >= i and _lex_less(P, x, order[b]):
                order[b + 1] = order[b]
                b -= 1
            order[b + 1] = x
        i = j
    keep = np.ones(n, dtype=np.bool_)
    for a in range(1, n):
        same = True
        for c in range(P.shape[1]):
            if P[order[a], c] != P[order[a - 1], c]:
                same = False
                break
        keep[a] = not same
    return keep


def distinct_morton(P: np.ndarray):
    """Distinct rows of P in Morton order, and the map input row -> distinct row."""
    n, d = P.shape
    if n == 0:
        return P, np.empty(0, dtype=np.int64)
    lo = P.min(axis=0)
    ext = P.max(axis=0) - lo
    ext[ext == 0] = 1.0
    key = _morton_kernel(P, lo, 1.0 / ext, 31 if d == 2 else 21)
    from .pairing import radix_argsort_keys

    order = radix_argsort_keys(key).astype(np.int64)     # stable, like argsort(kind="stable")
    keep = _order_runs_and_dedupe(P, key, order)
    inv = np.empty(n, dtype=np.int64)
    inv[order] = np.cumsum(keep) - 1
    return np.ascontiguousarray(P[order[keep]]), inv


def duplicate_groups(P: np.ndarray):
    """First input index and multiplicity of each distinct row of P (finite,
    float64, 2 or 3 columns); -0.0 and 0.0 are the same coordinate.

    One integer sort of Morton keys, several times faster than
    ``np.unique(axis=0)``, which sorts rows as structured records."""
    P = np.ascontiguousarray(P, dtype=np.float64)
    U, inv = distinct_morton(P)
    if len(U) == len(P):                 # the usual case: inv is a permutation
        first = np.empty(len(P), dtype=np.int64)
        first[inv] = np.arange(len(P))
        return first, np.ones(len(P), dtype=np.int64)
    first = np.full(len(U), len(P), dtype=np.int64)
    np.minimum.at(first, inv, np.arange(len(P)))
    return first, np.bincount(inv, minlength=len(U))
