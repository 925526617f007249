"""Monte Carlo testing machinery: rank p-values, the ERL envelope test, reproducibility.

Sources:
* Davison & Hinkley, Bootstrap Methods and their Application (1997), as
  given in /work/shared/REFERENCES.md ("Testing machinery"): the rank
  p-value (1 + #{T_i >= T_obs})/(m + 1) is uniform on {1/(m+1), ..., 1}
  under the null (continuous statistic); with ties it is conservative.
* Global extreme rank length envelope test: Myllymäki, Mrkvička,
  Grabarnik, Seijo & Hahn, JRSS B 79 (2017), as cited in DESIGN.md: under
  the null the observed curve is exchangeable with the simulated ones, so
  its p-value is (super-)uniform on the same grid.

Goodness-of-fit on the discrete grid uses scipy.stats (chi-square) and a
Kolmogorov-type distance of the empirical CDF at the grid points.  Each
uniformity test is also run on deliberately broken rank rules to show that
its tolerance would catch them.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from nullatlas.lookup.csrtest import csr_test
from nullatlas.lookup.inference import ranks
from nullatlas.lookup.patterns import windows

KS_CRIT = 1.63  # asymptotic 1% critical value of sqrt(R) * sup|F_R - F| (Kolmogorov)


def grid_index(p, m):
    """k = p (m + 1), which must be an integer in 1..m+1."""
    k = np.asarray(p, float) * (m + 1)
    ki = np.rint(k).astype(int)
    return ki, np.allclose(k, ki, atol=1e-9, rtol=0)


def uniform_on_grid_ok(p, m, chi2_level=0.01):
    """True when p looks uniform on {1/(m+1), ..., 1}: on the grid, >= 1/(m+1),
    chi-square p-value above ``chi2_level`` and KS distance below 1% level."""
    ki, on_grid = grid_index(p, m)
    if not on_grid or ki.min() < 1 or ki.max() > m + 1:
        return False
    R = len(p)
    counts = np.bincount(ki, minlength=m + 2)[1:]
    if stats.chisquare(counts).pvalue < chi2_level:
        return False
    ecdf = np.cumsum(counts) / R
    return np.max(np.abs(ecdf - np.arange(1, m + 2) / (m + 1))) < KS_CRIT / math.sqrt(R)


# Broken rules, for the power checks ---------------------------------------

def p_no_plus_one(t_obs, t_sims):          # #{T_i >= T_obs} / m
    return np.count_nonzero(t_sims >= t_obs) / len(t_sims)


def p_strict(t_obs, t_sims):               # ">" instead of ">="
    return (1 + np.count_nonzero(t_sims > t_obs)) / (len(t_sims) + 1)


def p_numerator_only(t_obs, t_sims):       # forgot +1 in the numerator
    return np.count_nonzero(t_sims >= t_obs) / (len(t_sims) + 1)


def p_reversed(t_obs, t_sims):              # ">=" and "<=" swapped (a lower-tail p for "greater")
    return (1 + np.count_nonzero(t_sims <= t_obs)) / (len(t_sims) + 1)


# ---------------------------------------------------------------------------
# rank_pvalue
# ---------------------------------------------------------------------------

def test_rank_pvalue_definition_by_hand():
    # Davison & Hinkley (1997): p = (1 + #{T_i >= T_obs}) / (m + 1)
    sims = np.array([1.0, 2.0, 3.0, 4.0])
    assert ranks.rank_pvalue(2.5, sims, "greater") == pytest.approx(3 / 5)
    assert ranks.rank_pvalue(2.5, sims, "less") == pytest.approx(3 / 5)
    assert ranks.rank_pvalue(9.0, sims, "greater") == pytest.approx(1 / 5)   # never 0
    assert ranks.rank_pvalue(9.0, sims, "less") == pytest.approx(1.0)
    assert ranks.rank_pvalue(-9.0, sims, "less") == pytest.approx(1 / 5)
    assert ranks.rank_pvalue(9.0, sims, "two-sided") == pytest.approx(2 / 5)
    assert ranks.rank_pvalue(2.5, sims, "two-sided") == pytest.approx(1.0)    # capped at 1
    # ties count as at least as extreme (>=), on both sides
    assert ranks.rank_pvalue(3.0, sims, "greater") == pytest.approx(3 / 5)
    assert ranks.rank_pvalue(3.0, sims, "less") == pytest.approx(4 / 5)
    assert ranks.rank_pvalue(1.0, np.ones(9), "greater") == pytest.approx(1.0)
    with pytest.raises(ValueError):
        ranks.rank_pvalue(1.0, sims, "sideways")


@pytest.mark.parametrize("m, reps", [(19, 4000), (99, 3000)])
def test_rank_pvalue_uniform_continuous_null(m, reps):
    # Davison & Hinkley (1997): under the null and without ties, p_greater
    # and p_less are uniform on {1/(m+1), ..., 1}.  T_obs and T_1..T_m are
    # i.i.d. from one continuous law (exchangeable), drawn with a fixed seed.
    rng = np.random.default_rng(m)
    t = rng.standard_normal((reps, m + 1))
    pg = np.array([ranks.rank_pvalue(r[0], r[1:], "greater") for r in t])
    pl = np.array([ranks.rank_pvalue(r[0], r[1:], "less") for r in t])
    assert pg.min() >= 1 / (m + 1) and pl.min() >= 1 / (m + 1)
    assert uniform_on_grid_ok(pg, m) and uniform_on_grid_ok(pl, m)
    # exact complement for continuous data: p_greater + p_less = (m + 2)/(m + 1)
    np.testing.assert_allclose(pg + pl, (m + 2) / (m + 1))
    # the checks above reject broken rules
    for broken in (p_no_plus_one, p_numerator_only):
        pb = np.array([broken(r[0], r[1:]) for r in t])
        assert not uniform_on_grid_ok(pb, m), broken.__name__
    # direction: T_obs from a law shifted up by 5 sd gets the smallest
    # p_greater, 1/(m+1) (a swapped-tail rule would give 1)
    shifted = t.copy()
    shifted[:, 0] += 5.0
    p_up = np.array([ranks.rank_pvalue(r[0], r[1:], "greater") for r in shifted[:200]])
    p_sw = np.array([p_reversed(r[0], r[1:]) for r in shifted[:200]])
    assert np.mean(p_up == 1 / (m + 1)) > 0.95 and np.mean(p_sw == 1.0) > 0.95


def test_rank_pvalue_two_sided_level():
    # Two-sided p = min(1, 2 min(p_greater, p_less)): for continuous
    # exchangeable data P(p <= 2k/(m+1)) = 2k/(m+1) exactly, k < (m+2)/2
    # (the rank of T_obs is uniform on 1..m+1).
    m, reps = 19, 4000
    rng = np.random.default_rng(77)
    t = rng.standard_normal((reps, m + 1))
    p2 = np.array([ranks.rank_pvalue(r[0], r[1:], "two-sided") for r in t])
    assert p2.min() >= 2 / (m + 1) - 1e-12 and p2.max() <= 1.0
    for k in range(1, 10):
        level = 2 * k / (m + 1)
        se = math.sqrt(level * (1 - level) / reps)
        assert np.mean(p2 <= level + 1e-12) == pytest.approx(level, abs=4 * se)


def test_rank_pvalue_conservative_with_ties():
    # With ties (a discrete statistic) the ">=" rule keeps P(p <= a) <= a
    # for every a on the grid (Davison & Hinkley 1997); the ">" rule does not.
    m, reps = 19, 4000
    rng = np.random.default_rng(5)
    t = rng.poisson(2.0, size=(reps, m + 1)).astype(float)
    p = np.array([ranks.rank_pvalue(r[0], r[1:], "greater") for r in t])
    pb = np.array([p_strict(r[0], r[1:]) for r in t])
    levels = np.arange(1, m + 2) / (m + 1)
    se = np.sqrt(levels * (1 - levels) / reps) + 1e-9
    size = np.array([np.mean(p <= a + 1e-12) for a in levels])
    size_b = np.array([np.mean(pb <= a + 1e-12) for a in levels])
    assert np.all(size <= levels + 3 * se)
    assert np.any(size_b > levels + 6 * se)          # ">" is anti-conservative
    assert p.min() >= 1 / (m + 1)


@pytest.mark.parametrize("alternative", ["clustered", "regular"])
def test_csr_test_rank_pvalues_uniform_under_csr(alternative):
    # The whole Monte Carlo route on real patterns: CSR data (n = 15 uniform
    # points in a disk, the binomial null of DESIGN.md), the Clark-Evans
    # statistic, m = 19 simulations.  One-sided alternatives map nnmean to
    # "less"/"greater" (a continuous statistic), so the p-values must be
    # uniform on {1/20, ..., 1} (Davison & Hinkley 1997).  200 seeded runs.
    m, reps = 19, 200
    W = windows.Disk(0.0, 0.0, 1.0)
    data_rng = np.random.default_rng(2025 if alternative == "clustered" else 2026)
    p = np.array([csr_test(W.sample(15, data_rng), W, stats=["nnmean"], method="mc", n_sims=m, seed=i,
                           alternative=alternative).pvalue
                  for i in range(reps)])
    assert p.min() >= 1 / (m + 1)
    assert uniform_on_grid_ok(p, m)


# ---------------------------------------------------------------------------
# ERL global envelope test
# ---------------------------------------------------------------------------

def _null_curves(rng, count, k=20):
    """Smooth-ish random curves: cumulative sums of Gaussian steps."""
    return np.cumsum(rng.standard_normal((count, k)), axis=1)


def test_erl_uniform_under_null():
    # Myllymäki et al. (2017): exchangeable curves -> the ERL p-value of the
    # observed one is (nearly exactly, few ties) uniform on {1/(m+1), ..., 1}.
    m, reps = 99, 400
    rng = np.random.default_rng(31)
    p = []
    for _ in range(reps):
        c = _null_curves(rng, m + 1)
        res = ranks.erl_test(c[0], c[1:])
        assert res["pvalue"] == res["pvalues_all"][0]
        assert res["pvalue"] >= 1 / (m + 1)
        p.append(res["pvalue"])
    p = np.array(p)
    ki, on_grid = grid_index(p, m)
    assert on_grid
    ecdf = np.array([np.mean(p <= j / (m + 1) + 1e-12) for j in range(1, m + 2)])
    assert np.max(np.abs(ecdf - np.arange(1, m + 2) / (m + 1))) < KS_CRIT / math.sqrt(reps)
    for a in (0.05, 0.10):
        assert np.mean(p <= a) == pytest.approx(a, abs=4 * math.sqrt(a * (1 - a) / reps))


def test_erl_conservative_with_ties():
    # Step-like integer curves (as Betti counts are): many ties, yet the
    # ERL p-value must not be anti-conservative (Myllymäki et al. 2017).
    m, reps = 49, 300
    rng = np.random.default_rng(32)
    p = []
    for _ in range(reps):
        c = np.cumsum(rng.poisson(1.0, (m + 1, 15)), axis=1).astype(float)
        p.append(ranks.erl_test(c[0], c[1:])["pvalue"])
    p = np.array(p)
    for a in (0.02, 0.06, 0.1, 0.2, 0.5):
        assert np.mean(p <= a) <= a + 3 * math.sqrt(a * (1 - a) / reps)
    assert p.min() >= 1 / (m + 1)


def test_erl_rejects_shifted_curve():
    # A curve shifted by 4 null standard deviations is the most extreme of
    # all m + 1 curves: p = 1/(m + 1), and it leaves the global envelope.
    m = 99
    rng = np.random.default_rng(33)
    sims = _null_curves(rng, m)
    sd = sims.std(axis=0)
    obs = _null_curves(rng, 1)[0] + 4 * sd
    res = ranks.erl_test(obs, sims, alpha=0.05)
    assert res["pvalue"] == pytest.approx(1 / (m + 1))
    assert res["extreme_rank"] == 1
    assert np.any((obs > res["hi"]) | (obs < res["lo"]))
    # partially shifted (only on the last quarter of the grid): still rejected
    obs2 = _null_curves(rng, 1)[0]
    obs2[-5:] -= 5 * sd[-5:]
    assert ranks.erl_test(obs2, sims)["pvalue"] <= 0.05
    # the null curve itself sits inside its envelope and is not rejected
    null_obs = _null_curves(rng, 1)[0]
    res0 = ranks.erl_test(null_obs, sims)
    assert res0["pvalue"] >= 1 / (m + 1)
    assert np.all(res0["lo"][res0["mask"]] <= res0["hi"][res0["mask"]])


# ---------------------------------------------------------------------------
# Reproducibility across worker counts
# ---------------------------------------------------------------------------

def _strip(d):
    d = dict(d)
    d.pop("elapsed_s", None)
    return d


@pytest.mark.slow
def test_csr_test_bit_identical_for_jobs_1_and_2():
    # DESIGN.md: replicate i uses the i-th SeedSequence child, so the null
    # sample and every p-value are the same whatever the worker count.
    W = windows.Rectangle(0.0, 0.0, 2.0, 1.0)
    pts = W.sample(60, np.random.default_rng(8))
    kw = dict(stats=["euler", "nnmean", "lfunc", "total1"], method="mc", n_sims=39, seed=123)
    r1 = csr_test(pts, W, jobs=1, **kw)
    r2 = csr_test(pts, W, jobs=2, **kw)
    assert _strip(r1.as_dict()) == _strip(r2.as_dict())      # exact equality, curves included
    for a, b in zip(r1.results, r2.results):
        assert a.pvalue == b.pvalue and a.statistic == b.statistic
        np.testing.assert_array_equal([a.null_mean, a.null_sd], [b.null_mean, b.null_sd])
        if a.curve is not None:
            for key in ("observed", "null_mean", "null_sd", "global_lo", "global_hi"):
                np.testing.assert_array_equal(a.curve[key], b.curve[key])
    # and the seed matters (the comparison above is not vacuous)
    r3 = csr_test(pts, W, jobs=1, **{**kw, "seed": 124})
    assert [r.null_mean for r in r3.results] != [r.null_mean for r in r1.results]
