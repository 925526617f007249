"""Streaming moments (calibrate.moments) against one-pass numpy/scipy values.

References: pairwise update formulas of Chan, Golub & LeVeque (1983) and
Pébay (2008); checked here against numpy.cov and scipy.stats.skew (bias=True,
the moment estimator g1) on the pooled data.
"""
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from nullatlas.calibrate.moments import Moments


def _pooled(chunks):
    acc = Moments.empty(chunks[0].shape[1])
    for c in chunks:
        acc = acc.update(c)
    return acc


def test_chunks_equal_one_pass():
    rng = np.random.default_rng(0)
    x = rng.gamma(2.0, size=(1000, 5)) + 1e3          # skewed, offset (cancellation)
    x[:, 1] = 0.3 * x[:, 0] + rng.standard_normal(1000)
    chunks = np.array_split(x, [7, 300, 301, 650])
    m = _pooled(chunks)
    assert m.count == 1000
    np.testing.assert_allclose(m.mean, x.mean(axis=0), rtol=1e-13)
    np.testing.assert_allclose(m.cov, np.cov(x, rowvar=False), rtol=1e-10)
    np.testing.assert_allclose(m.skewness, stats.skew(x, axis=0), rtol=1e-8)
    np.testing.assert_allclose(m.sem, x.std(axis=0, ddof=1) / np.sqrt(1000), rtol=1e-10)


def test_gamma_skewness_is_recovered():
    """Gamma(shape a) has skewness 2/sqrt(a) (a textbook fact)."""
    x = np.random.default_rng(1).gamma(4.0, size=(200_000, 1))
    m = _pooled(np.array_split(x, 17))
    assert m.skewness[0] == pytest.approx(1.0, abs=0.03)


@settings(max_examples=40, deadline=None, derandomize=True)
@given(st.lists(st.integers(0, 30), min_size=1, max_size=6), st.integers(0, 10_000))
def test_any_split_gives_the_same_moments(sizes, seed):
    rng = np.random.default_rng(seed)
    total = sum(sizes)
    x = rng.standard_normal((total, 3)) * [1.0, 1e-3, 50.0]
    chunks = np.split(x, np.cumsum(sizes)[:-1])
    a = _pooled(chunks)
    b = Moments.of(x)
    assert a.count == b.count == total
    if total:
        np.testing.assert_allclose(a.mean, b.mean, rtol=1e-12, atol=1e-12)
        np.testing.assert_allclose(a.m2, b.m2, rtol=1e-9, atol=1e-9)
        np.testing.assert_allclose(a.m3, b.m3, rtol=1e-7, atol=1e-7)


def test_fixed_merge_order_is_bit_reproducible():
    rng = np.random.default_rng(3)
    chunks = [rng.standard_normal((50, 4)) for _ in range(8)]
    a = _pooled(chunks)
    b = _pooled([c.copy() for c in chunks])
    assert np.array_equal(a.m2, b.m2) and np.array_equal(a.m3, b.m3)


def test_round_trip_and_validation():
    m = Moments.of(np.random.default_rng(4).random((20, 3)))
    r = Moments.from_arrays(m.as_arrays())
    assert r.count == 20 and np.array_equal(r.m2, m.m2)
    bad = m.as_arrays()
    bad["m3"] = np.zeros(2)
    with pytest.raises(ValueError):
        Moments.from_arrays(bad)
    with pytest.raises(ValueError):
        m.merge(Moments.empty(4))
    with pytest.raises(ValueError):
        Moments.of(np.array([[1.0, np.nan]]))
    assert np.isnan(Moments.of(np.ones((1, 2))).cov).all()
    assert np.array_equal(Moments.of(np.ones((5, 2))).skewness, [0.0, 0.0])
    assert Moments.of(np.arange(4.0)).k == 1
