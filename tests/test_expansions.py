"""Tests of nullatlas.lookup.persistence.expansions (expansion arithmetic shared
by the 2D and 3D Delaunay kernels).

Every double is a dyadic rational, so the exact value of an expansion is the
``fractions.Fraction`` sum of its components; the results of Scale-Expansion
and Fast-Expansion-Sum must equal the exact product and sum, and keep the
expansion invariants (components nonzero, increasing in magnitude,
nonoverlapping) that the predicates rely on for their sign.
"""
from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from nullatlas.lookup.persistence.expansions import (
    _fast_expansion_sum_zeroelim,
    _scale_expansion_zeroelim,
    scale_for_predicates,
)

doubles = st.floats(min_value=-1e30, max_value=1e30, allow_nan=False, allow_infinity=False,
                    allow_subnormal=False).filter(lambda x: x == 0.0 or abs(x) > 1e-30)


def _exact(h, n):
    return sum((Fraction(float(x)) for x in h[:n]), Fraction(0))


def _two_sum_expansion(a, b):
    """The 2-component expansion of a + b (Knuth's Two-Sum), as the kernels build it."""
    x = a + b
    bv = x - a
    av = x - bv
    y = (a - av) + (b - bv)
    return np.array([y, x]) if y != 0.0 else np.array([x])


def _check_invariants(h, n):
    comps = [float(x) for x in h[:n]]
    if n == 1:
        return
    assert all(c != 0.0 for c in comps)
    for small, big in zip(comps, comps[1:]):
        assert abs(small) < abs(big)
        # nonoverlapping: the smaller component lies below the lowest set bit of the larger
        m, ex = math.frexp(abs(big))
        mant = int(math.ldexp(m, 53))
        lowbit = math.ldexp(float(mant & -mant), ex - 53)
        assert abs(small) < lowbit


@settings(max_examples=300, deadline=None)
@given(doubles, doubles, doubles)
def test_scale_expansion_is_exact(a, b, s):
    e = _two_sum_expansion(a, b)
    h = np.empty(2 * len(e))
    n = _scale_expansion_zeroelim(len(e), e, s, h)
    assert 1 <= n <= 2 * len(e)
    assert _exact(h, n) == (Fraction(a) + Fraction(b)) * Fraction(s)
    _check_invariants(h, n)


@settings(max_examples=300, deadline=None)
@given(doubles, doubles, doubles, doubles)
def test_fast_expansion_sum_is_exact(a, b, c, d):
    e = _two_sum_expansion(a, b)
    f = _two_sum_expansion(c, d)
    h = np.empty(len(e) + len(f))
    n = _fast_expansion_sum_zeroelim(len(e), e, len(f), f, h)
    assert 1 <= n <= len(e) + len(f)
    assert _exact(h, n) == Fraction(a) + Fraction(b) + Fraction(c) + Fraction(d)
    _check_invariants(h, n)


def test_cancellation_keeps_one_zero_component():
    e = np.array([1.0])
    f = np.array([-1.0])
    h = np.empty(2)
    assert _fast_expansion_sum_zeroelim(1, e, 1, f, h) == 1 and h[0] == 0.0
    assert _scale_expansion_zeroelim(1, e, 0.0, h) == 1 and h[0] == 0.0


@pytest.mark.parametrize("big", [3e30, 1e-30, 2.0 ** 70, 2.0 ** -70])
def test_scale_for_predicates_rescales_exactly(big):
    p = np.array([[big, -big / 3], [big / 7, 0.5 * big]])
    s, rescaled = scale_for_predicates(p)
    assert rescaled
    assert 0.5 <= np.abs(s).max() < 1.0
    factor = p[0, 0] / s[0, 0]
    assert math.frexp(factor)[0] == 0.5           # a power of two
    np.testing.assert_array_equal(s * factor, p)  # nothing rounded


@pytest.mark.parametrize("big", [1.0, 2.0 ** 63, 2.0 ** -64, 0.0])
def test_scale_for_predicates_leaves_moderate_points_alone(big):
    p = np.array([[big, 0.0], [0.0, big / 2]])
    s, rescaled = scale_for_predicates(p)
    assert s is p and not rescaled
