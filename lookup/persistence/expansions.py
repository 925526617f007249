"""Floating-point expansion arithmetic shared by the exact Delaunay kernels.

J. R. Shewchuk, "Adaptive Precision Floating-Point Arithmetic and Fast
Robust Geometric Predicates", Discrete & Computational Geometry 18(3),
305-363, 1997, section 2.  The error-free transformations, each giving
x + y == the exact result::

    Two-Sum (Knuth):     x = a + b;  bv = x - a;  av = x - bv;  y = (a - av) + (b - bv)
    Fast-Two-Sum (Dekker, |a| >= |b|):  x = a + b;  y = b - (x - a)
    Two-Diff:            x = a - b;  bv = a - x;  av = x + bv;  y = (a - av) + (bv - b)
    Split (Dekker):      c = (2^27 + 1) a;  hi = c - (c - a);  lo = a - hi
    Two-Product:         x = a b;  y = lo_a lo_b - (((x - hi_a hi_b) - lo_a hi_b) - hi_a lo_b)

An "expansion" is an array of components of increasing magnitude, strongly
nonoverlapping, whose exact sum is the value; its sign is the sign of its last
(largest) component.  Numba does not contract a*b + c into FMA instructions
(no fast-math), which these identities require.

The kernels of ``delaunay2d`` and ``delaunay3d`` write these transformations
out inline (rather than as tiny helper functions) to keep the number of
separately compiled numba functions -- and so the cold compile time and the
cache-load time -- small.  What they share lives here: the constants, the two
expansion operations (Scale-Expansion-Zeroelim, Fast-Expansion-Sum-Zeroelim)
and :func:`scale_for_predicates`.  ``exactvalues`` keeps its own expansion
routines (``_e_scale``, ``_e_sum``), written for its register file.

Note for numba's cache: a cached kernel is not recompiled when only a function
it calls in another module changes; after editing this module, clear the
``__pycache__`` of ``delaunay2d`` and ``delaunay3d`` (or touch those files).
"""
from __future__ import annotations

import math

import numpy as np

from .jit import njit

__all__ = ["scale_for_predicates"]

_EPS = 2.0 ** -53                      # Shewchuk's "epsilon": half an ulp of 1.0
_SPLITTER = 2.0 ** 27 + 1.0            # Dekker split constant for 53-bit mantissas


def scale_for_predicates(points: np.ndarray, limit: int = 64):
    """Rescale coordinates by an exact power of two when they are very large or small.

    The orientation and in-circle/in-sphere predicates are homogeneous: an
    exact power-of-two rescaling of all coordinates changes no sign, and keeps
    their degree-4 (2D) or degree-5 (3D) products of very large (or very
    small) coordinates clear of overflow (underflow).

    Parameters
    ----------
    points : ndarray of float64
        Finite coordinates, any shape, at least one of them.
    limit : int
        Rescale only when the binary exponent of the largest absolute
        coordinate lies outside [-limit, limit].

    Returns
    -------
    scaled : ndarray
        ``points * 2**-e`` with the largest absolute coordinate in [0.5, 1),
        or ``points`` itself (the same object) when no rescaling is needed.
    rescaled : bool
        Whether ``scaled`` is a rescaled copy.

    Examples
    --------
    >>> import numpy as np
    >>> p = np.array([[3e30, 1.0], [0.0, -2e30]])
    >>> s, rescaled = scale_for_predicates(p)
    >>> rescaled, bool(0.5 <= np.abs(s).max() < 1), bool(np.all(s * (p.max() / s.max()) == p))
    (True, True, True)
    >>> q = np.array([[1.0, 2.0]])
    >>> scale_for_predicates(q)[0] is q
    True
    """
    big = float(np.abs(points).max())
    if big > 0.0:
        e = math.frexp(big)[1]
        if e > limit or e < -limit:
            return points * math.ldexp(1.0, -e), True
    return points, False


@njit(cache=True)
def _scale_expansion_zeroelim(elen, e, b, h):
    """h <- b * e (Shewchuk's Scale-Expansion-Zeroelim); returns len(h) >= 1."""
    c = _SPLITTER * b
    bhi = c - (c - b)
    blo = b - bhi
    a = e[0]
    q = a * b
    c = _SPLITTER * a
    ahi = c - (c - a)
    alo = a - ahi
    hh = alo * blo - (((q - ahi * bhi) - alo * bhi) - ahi * blo)
    hindex = 0
    if hh != 0.0:
        h[hindex] = hh
        hindex += 1
    for i in range(1, elen):
        a = e[i]
        p1 = a * b
        c = _SPLITTER * a
        ahi = c - (c - a)
        alo = a - ahi
        p0 = alo * blo - (((p1 - ahi * bhi) - alo * bhi) - ahi * blo)
        s = q + p0                      # Two-Sum(q, p0) -> s + hh
        bv = s - q
        av = s - bv
        hh = (q - av) + (p0 - bv)
        if hh != 0.0:
            h[hindex] = hh
            hindex += 1
        q = p1 + s                      # Fast-Two-Sum(p1, s) -> q + hh
        hh = s - (q - p1)
        if hh != 0.0:
            h[hindex] = hh
            hindex += 1
    if q != 0.0 or hindex == 0:
        h[hindex] = q
        hindex += 1
    return hindex


@njit(cache=True)
def _fast_expansion_sum_zeroelim(elen, e, flen, f, h):
    """h <- e + f (Shewchuk's Fast-Expansion-Sum-Zeroelim); returns len(h) >= 1.

    The components of e and f are merged by increasing magnitude and accumulated
    with (Fast-)Two-Sum; strongly nonoverlapping inputs give a strongly
    nonoverlapping exact sum (Shewchuk 1997, Theorem 13)."""
    enow = e[0]
    fnow = f[0]
    ei = 0
    fi = 0
    if (fnow > enow) == (fnow > -enow):
        q = enow
        ei += 1
        if ei < elen:
            enow = e[ei]
    else:
        q = fnow
        fi += 1
        if fi < flen:
            fnow = f[fi]
    hi = 0
    if ei < elen and fi < flen:
        if (fnow > enow) == (fnow > -enow):
            g = enow
            ei += 1
            if ei < elen:
                enow = e[ei]
        else:
            g = fnow
            fi += 1
            if fi < flen:
                fnow = f[fi]
        qn = g + q                      # Fast-Two-Sum(g, q)
        hh = q - (qn - g)
        q = qn
        if hh != 0.0:
            h[hi] = hh
            hi += 1
        while ei < elen and fi < flen:
            if (fnow > enow) == (fnow > -enow):
                g = enow
                ei += 1
                if ei < elen:
                    enow = e[ei]
            else:
                g = fnow
                fi += 1
                if fi < flen:
                    fnow = f[fi]
            qn = q + g                  # Two-Sum(q, g)
            bv = qn - q
            av = qn - bv
            hh = (q - av) + (g - bv)
            q = qn
            if hh != 0.0:
                h[hi] = hh
                hi += 1
    while ei < elen or fi < flen:       # at most one of e, f has components left
        if ei < elen:
            g = enow
            ei += 1
            if ei < elen:
                enow = e[ei]
        else:
            g = fnow
            fi += 1
            if fi < flen:
                fnow = f[fi]
        qn = q + g                      # Two-Sum(q, g)
        bv = qn - q
        av = qn - bv
        hh = (q - av) + (g - bv)
        q = qn
        if hh != 0.0:
            h[hi] = hh
            hi += 1
    if q != 0.0 or hi == 0:
        h[hi] = q
        hi += 1
    return hi
