"""Issue 18 item 3: trusting the finite-window model beyond the n it was
validated at, where its extrapolation error is measured small."""

import json
import math

import h5py
import numpy as np
import pytest

from nullatlas.calibrate.csrlimits import LIMIT_SOURCES, csr_limit
from nullatlas.calibrate.model import MODEL_TOL_SD, fit_geomodel
from nullatlas.calibrate.validate import MEAN_TOL_SD, validated_range
from nullatlas.lookup.inference.asymptotic import (
    EXTRAPOLATION_TOL_SD,
    N_TRUST_MAX,
    extrapolation_limit,
)
from nullatlas.lookup.inference.nullmoments import limit_growth
from nullatlas.lookup.inference.tablereader import shipped_tables
from nullatlas.lookup.patterns.boundary import MEASURES
from nullatlas.lookup.summaries import grids


def test_the_tolerances_agree():
    # the runtime cannot import calibrate: the same 0.1 sd written twice
    assert EXTRAPOLATION_TOL_SD == MEAN_TOL_SD == MODEL_TOL_SD


def test_extrapolation_limit_solves_the_bias_bound():
    """bias_hi + growth (sqrt(n) - sqrt(n_hi)) = 0.1 at the returned n."""
    n_hi, bias, g = 20_000, 0.03, 8e-5
    top = extrapolation_limit(g, n_hi, bias)
    assert bias + g * (math.sqrt(top) - math.sqrt(n_hi)) == pytest.approx(0.1, abs=1e-6)
    assert bias + g * (math.sqrt(top + 10_000) - math.sqrt(n_hi)) > 0.1
    # faster growth, or less room left at n_hi: a smaller range
    assert extrapolation_limit(2 * g, n_hi, bias) < top
    assert extrapolation_limit(g, n_hi, 0.06) < top
    # no room left, or nothing measured: the validated range only
    assert extrapolation_limit(g, n_hi, 0.1) == n_hi
    assert extrapolation_limit(None, n_hi, bias) == n_hi
    assert extrapolation_limit(g, n_hi, None) == n_hi
    assert extrapolation_limit(0.0, n_hi, bias) == N_TRUST_MAX == 10 ** 9


def test_limit_growth_is_two_se_of_the_limit_per_pattern_sd():
    g = {"mean_se": np.array([[1e-5, 1, 1], [4e-5, 1, 1], [1.0, 1, 1]]),
         "var_coef": np.array([[0.25, 0, 0], [0.04, 0, 0], [1e-6, 0, 0]])}
    # the third grid point is not usable: it does not count
    assert limit_growth(g, np.array([1, 1, 0])) == pytest.approx(2 * 4e-5 / 0.2)
    assert limit_growth({"mean_coef": g["mean_se"]}) is None
    # a model that misfits its cells (chi2/dof = 4) has its SE doubled (Birge ratio)
    g.update({"mean_chi2": np.array([40.0, 40.0, 40.0]), "dof": 10.0})
    assert limit_growth(g, np.array([1, 1, 0])) == pytest.approx(2 * 2 * 4e-5 / 0.2)
    g["mean_chi2"] = np.array([5.0, 5.0, 5.0])       # chi2/dof < 1: never shrunk
    assert limit_growth(g, np.array([1, 1, 0])) == pytest.approx(2 * 4e-5 / 0.2)


def _cells(mu, c1, rng, fixed_noise=1e-4):
    cells = []
    for shape, kappa in (("a", 4.0), ("b", 3.5), ("c", 5.0), ("d", 6.0)):
        for n in (100, 500, 2_000, 10_000, 50_000):
            b1 = kappa * n ** -0.5
            cov = np.array([[1.0, b1, 0.0, 1.0 / n]])
            mean = mu + c1 * b1 + fixed_noise * rng.standard_normal(2)
            cells.append({"name": f"{shape}{n}", "shape": shape, "n": n, "cov": cov,
                          "mean": mean, "var": np.full(2, (fixed_noise ** 2) * 1000),
                          "count": 1000})
    return cells


def test_a_fixed_limit_is_kept_and_the_boundary_term_refitted():
    rng = np.random.default_rng(1)
    mu, c1 = np.array([0.5, 0.25]), np.array([0.05, -0.02])
    cells = _cells(mu, c1, rng)
    free = fit_geomodel(cells, 2, 100, (0, 1))
    fixed = fit_geomodel(cells, 2, 100, (0, 1), limit=mu)
    np.testing.assert_array_equal(fixed.mean_coef[:, 0], mu)
    np.testing.assert_array_equal(fixed.mean_se[:, 0], 0.0)
    assert np.all(free.mean_se[:, 0] > 0)
    np.testing.assert_allclose(fixed.mean_coef[:, 1], c1, atol=5e-4)
    # a wrong limit shows in the fit: its chi-square explodes
    wrong = fit_geomodel(cells, 2, 100, (0, 1), limit=mu + 0.002)
    assert np.all(wrong.mean_chi2 > 20 * np.maximum(fixed.mean_chi2, 1.0))


def test_the_exact_limits_on_their_grids():
    """Miles (1976), Clark & Evans (1954), the Poisson void probability and
    Besag (1977), as REFERENCES.md gives them; a wrong grid or formula
    (diameter for radius, no exponential) would fail these values."""
    e, _ = csr_limit("euler", 2)
    assert e.shape == grids.RHO.shape
    rho = grids.RHO[19]                    # 0.5
    eta = math.pi * rho ** 2
    assert e[19] == pytest.approx(math.exp(-eta) * (1 - eta))
    # the sign changes where pi rho^2 = 1
    assert np.all(e[grids.RHO < 1 / math.sqrt(math.pi)] > 0)
    assert np.all(e[grids.RHO > 1 / math.sqrt(math.pi)] < 0)
    assert csr_limit("nnmean", 2)[0].tolist() == [0.5]
    g, _ = csr_limit("gfunc", 2)
    assert g[-1] == pytest.approx(1 - math.exp(-math.pi * grids.NN_RHO[-1] ** 2))
    np.testing.assert_array_equal(csr_limit("lfunc", 2)[0], grids.L_RHO)
    assert csr_limit("total0", 2) is None and csr_limit("euler", 3) is None


def test_the_shipped_2d_model_holds_the_exact_limits_fixed():
    path = shipped_tables()[2]
    with h5py.File(path, "r") as fh:
        for stat in LIMIT_SOURCES:
            g = fh[f"geomodel/{stat}"]
            exact, source = csr_limit(stat, 2)
            assert g.attrs["limit"] == source
            np.testing.assert_array_equal(g["mean_coef"][:, 0], exact)
            assert np.all(g["mean_se"][:, 0] == 0)
        assert fh["geomodel/total0"].attrs["limit"] == ""
        assert fh["geomodel/total0"]["mean_se"][0, 0] > 0
        # the held-out validation stored how much bias was left at its largest n
        for stat in ("euler", "nnmean", "total0"):
            for test, text in fh[f"trust/{stat}"].attrs.items():
                rng = json.loads(text)
                assert 0 <= rng["bias_hi"] <= 0.1 and rng["n_hi"] == 20_000, (stat, test)


def test_validated_range_records_the_bias_left_at_the_largest_n():
    def row(n, bias, ok, share):
        r = {k: 0.0 for k in MEASURES}
        r.update({"n": n, "mean_err_sd": bias, "tests": {"two_sided": ok}, "boundary_share": share})
        return r

    rows = [row(1000, 0.05, True, 0.1), row(20_000, 0.02, True, 0.01),
            row(20_000, -0.07, True, 0.02), row(20_000, 0.3, False, 0.5)]
    out = validated_range(rows, "two_sided")
    assert out["n_hi"] == 20_000 and out["bias_hi"] == pytest.approx(0.07)
