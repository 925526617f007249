"""Nearest-neighbour and second-order summaries under CSR and for the Thomas process.

Sources (see /work/shared/REFERENCES.md, "Nearest-neighbour distances under
CSR" and "Ripley's K and Besag's L"):

* Clark & Evans, Ecology 35 (1954): mean NN distance 0.5/sqrt(lambda) in 2D,
  standard error 0.26136/sqrt(n lambda) ignoring edges.
* Donnelly (1978), Simulation Methods in Archaeology, Cambridge UP -- FROM
  MEMORY per REFERENCES.md: edge-corrected mean 0.5 sqrt(A/n) +
  (0.0514 + 0.041/sqrt(n)) P/n, variance 0.0703 A/n^2 + 0.037 P sqrt(A/n^5).
  Tolerances on these are deliberately generous (see the tests).
* Diggle, Statistical Analysis of Spatial and Spatio-Temporal Point
  Patterns, 3rd ed. (2013): G(r) = 1 - exp(-lambda pi r^2) in 2D,
  1 - exp(-lambda 4/3 pi r^3) in 3D.
* Ripley, JRSS B 39 (1977): CSR K(r) = pi r^2, L(r) = r.
* Thomas process: K(r) = pi r^2 + (1 - exp(-r^2/(4 sigma^2)))/kappa
  (Diggle 2013; Illian, Penttinen, Stoyan & Stoyan 2008).

Everything is in the normalised units of the library, rho = r (n/|W|)^(1/d)
(unit intensity), so the CSR references become 0.5, 1 - exp(-pi rho^2), ...
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import gamma

from nullatlas.lookup.patterns import windows
from nullatlas.lookup.persistence.diagram import intensity_scale
from nullatlas.lookup.processes import alternatives
from nullatlas.lookup.summaries import classical, grids, statistics

S = statistics.STATISTICS
CLARK_EVANS_SD = 0.26136  # Clark & Evans (1954): sd of one NN distance, normalised


def _interior_nn(window, n, reps, seed, margin):
    """Normalised NN distances of points farther than ``margin`` (normalised)
    from the boundary: for them the nearest neighbour is never cut off by
    the window unless it is farther than ``margin`` (probability
    exp(-|B_margin|), negligible here), so they follow the infinite-pattern law."""
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(reps):
        pts = window.sample(n, rng)
        scale = intensity_scale(n, window.measure, window.dim)
        nn = classical.nn_distances(pts)
        inner = window.boundary_distance(pts) * scale > margin
        out.append(nn[inner] * scale)
    return out


# ---------------------------------------------------------------------------
# Clark-Evans
# ---------------------------------------------------------------------------

def test_clark_evans_mean_and_sd_2d_interior():
    # Clark & Evans (1954): E[D] = 0.5/sqrt(lambda), sd = 0.26136/sqrt(lambda)
    # (normalised: 0.5 and 0.26136).  5 x 20000 points, ~92000 interior;
    # SE of the mean <= 0.27/sqrt(92000) = 0.0009 -> tolerance 0.004 (4.5 SE).
    parts = _interior_nn(windows.Rectangle(0, 0, 3, 2), 20000, 5, 101, margin=3.0)
    d = np.concatenate(parts)
    assert len(d) > 80000
    assert classical.nn_mean(d, 1.0) == pytest.approx(0.5, abs=0.004)
    assert d.std(ddof=1) == pytest.approx(CLARK_EVANS_SD, rel=0.02)
    # and not the diameter-type mistake 1/sqrt(lambda) or 0.5/lambda^(1/3)
    assert abs(d.mean() - 1.0) > 0.4


def test_clark_evans_mean_3d_interior():
    # 3D analogue derived from the G function of REFERENCES.md (Diggle 2013):
    # E[D] = int_0^inf exp(-4/3 pi r^3) dr = Gamma(4/3) (4 pi/3)^(-1/3) = 0.55396
    # (the value also quoted in classical.py).  sd from E[D^2] = Gamma(5/3) (4 pi/3)^(-2/3).
    mean3 = gamma(4 / 3) * (4 * math.pi / 3) ** (-1 / 3)
    sd3 = math.sqrt(gamma(5 / 3) * (4 * math.pi / 3) ** (-2 / 3) - mean3 ** 2)
    assert mean3 == pytest.approx(0.55396, abs=1e-5)
    parts = _interior_nn(windows.Box(0, 0, 0, 1, 1, 1), 20000, 4, 102, margin=2.5)
    d = np.concatenate(parts)
    se = sd3 / math.sqrt(len(d))
    assert len(d) > 40000
    assert d.mean() == pytest.approx(mean3, abs=4.5 * se)
    assert d.std(ddof=1) == pytest.approx(sd3, rel=0.03)


@pytest.mark.parametrize("window", [windows.Rectangle(0, 0, 1, 1), windows.Disk(0.0, 0.0, 1.0)],
                         ids=["square", "disk"])
@pytest.mark.parametrize("n", [50, 400])
def test_nnmean_statistic_vs_donnelly(window, n):
    # Donnelly (1978), FROM MEMORY (REFERENCES.md): mean and variance of the
    # uncorrected mean NN distance in a window of area A and perimeter P,
    # here in normalised units (times sqrt(n/A)).  Generous tolerances
    # because the constants are recalled, not looked up: the mean within
    # 25% of Donnelly's edge excess (plus 3 SE), the variance within 20%.
    # The library's nnmean has no edge correction (classical.py), so it must
    # sit clearly above the Clark-Evans 0.5 by about Donnelly's excess.
    A, P = window.measure, window.boundary_measure
    mean_d = (0.5 * math.sqrt(A / n) + (0.0514 + 0.041 / math.sqrt(n)) * P / n) * math.sqrt(n / A)
    var_d = (0.0703 * A / n ** 2 + 0.037 * P * math.sqrt(A / n ** 5)) * (n / A)
    # The same in the finite-window form of REFERENCES.md: mu + c kappa n^-1/2 + e n^-1
    assert mean_d == pytest.approx(0.5 + 0.0514 * window.kappa / math.sqrt(n)
                                   + 0.041 * window.kappa / n, rel=1e-12)
    rng = np.random.default_rng(1000 + n)
    reps = 1000
    v = np.array([float(statistics.compute(window.sample(n, rng), window, [S["nnmean"]])["nnmean"])
                  for _ in range(reps)])
    se = v.std(ddof=1) / math.sqrt(reps)
    excess = mean_d - 0.5
    assert abs(v.mean() - mean_d) <= 0.25 * excess + 3 * se
    assert v.mean() - 0.5 > 0.5 * excess          # edge effect present, as documented
    assert v.var(ddof=1) == pytest.approx(var_d, rel=0.20)


# ---------------------------------------------------------------------------
# G function (border corrected)
# ---------------------------------------------------------------------------

def _mean_curve(window, n, reps, seed, name):
    rng = np.random.default_rng(seed)
    cs = np.array([statistics.compute(window.sample(n, rng), window, [S[name]])[name]
                   for _ in range(reps)])
    return cs.mean(axis=0), cs.std(axis=0, ddof=1) / math.sqrt(reps), cs


@pytest.mark.parametrize("window", [windows.Rectangle(0, 0, 2, 1), windows.Disk(1.0, -2.0, 3.0),
                                    windows.Box(0, 0, 0, 1, 1, 1), windows.Ball(0, 0, 0, 1)],
                         ids=["rect", "disk", "box", "ball"])
def test_g_function_csr(window):
    # Diggle (2013): G(r) = 1 - exp(-lambda |B_r|); normalised lambda = 1.
    # 40 x 5000 points; SE of the mean curve < 0.0025 (asserted); tolerance
    # 0.01 absolute (4 SE).  A diameter/radius mix-up or a missing pi would
    # be off by more than 0.2.
    g = grids.NN_RHO
    vol = math.pi * g ** 2 if window.dim == 2 else 4 / 3 * math.pi * g ** 3
    ref = 1 - np.exp(-vol)
    mean, se, cs = _mean_curve(window, 5000, 40, 200 + window.dim, "gfunc")
    assert np.all(np.isfinite(cs)) and np.all((cs >= 0) & (cs <= 1))
    assert np.all(np.diff(cs, axis=1) >= -0.05)  # nearly monotone per pattern
    tol = 0.01
    assert se.max() < tol / 4
    np.testing.assert_allclose(mean, ref, atol=tol, rtol=0)
    for wrong in (1 - np.exp(-vol * 2 ** window.dim), 1 - np.exp(-vol / math.pi)):
        assert np.abs(mean - wrong).max() > 10 * tol


# ---------------------------------------------------------------------------
# Besag's L (border corrected)
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("window", [windows.Rectangle(0, 0, 1, 1), windows.Disk(0, 0, 1),
                                    windows.Box(0, 0, 0, 2, 1, 1), windows.Ball(0, 0, 0, 1)],
                         ids=["square", "disk", "box", "ball"])
def test_l_function_csr(window):
    # Ripley (1977): K(r) = |B_r| under CSR, so lambda K = |B_rho| and
    # L(rho) = rho in normalised units.  The normalisation uses the observed
    # n, and the binomial process has (n-1)/|W| other points per unit area,
    # so E[lambda K] = (n-1)/n |B_rho| (a 2e-4 effect here).
    # 20 x 5000 points.  Tolerances: lambda K within 4% relative where the
    # expected number of pairs is large (rho >= 0.2), L within 0.01 absolute
    # there (L at tiny rho is a root of a handful of pairs: Jensen bias).
    n, reps, d = 5000, 20, window.dim
    rho = grids.L_RHO
    mean_l, _, ls = _mean_curve(window, n, reps, 300 + d, "lfunc")
    lk = math.pi * ls ** 2 if d == 2 else 4 / 3 * math.pi * ls ** 3
    vol = math.pi * rho ** 2 if d == 2 else 4 / 3 * math.pi * rho ** 3
    big = rho >= 0.2
    np.testing.assert_allclose(lk.mean(axis=0)[big], (n - 1) / n * vol[big], rtol=0.04)
    np.testing.assert_allclose(mean_l[big], rho[big], atol=0.01)
    # a diameter-for-radius slip (L = 2 rho) would be far outside
    assert np.abs(mean_l - 2 * rho).max() > 0.5


# ---------------------------------------------------------------------------
# Thomas cluster process
# ---------------------------------------------------------------------------

def thomas_k(r, kappa, sigma):
    """K(r) = pi r^2 + (1 - exp(-r^2/(4 sigma^2)))/kappa (Diggle 2013; Illian et al. 2008)."""
    return math.pi * r ** 2 + (1 - np.exp(-r ** 2 / (4 * sigma ** 2))) / kappa


def test_thomas_k_function():
    # Diggle (2013) / Illian et al. (2008): the Thomas K function.  Estimated
    # from l_function: in normalised units lambda_hat K(r) = pi L(rho)^2 with
    # r = rho / sqrt(n_obs/|W|) and lambda_hat = n_obs/|W| -- the observed n
    # of each pattern (it fluctuates by ~5% between patterns).  We compare
    # the cluster excess K(r) - pi r^2 with (1 - exp(-r^2/(4 sigma^2)))/kappa,
    # averaged over 30 patterns of ~10,000 points (100 x 100, kappa 0.05,
    # mu 20, sigma 0.5).  Tolerance: 4 standard errors (from the replicates)
    # plus 1% of the excess for the ratio-estimator bias.
    W = windows.Rectangle(0, 0, 100, 100)
    kappa, mu, sigma = 0.05, 20.0, 0.5
    rng = np.random.default_rng(400)
    rho = grids.L_RHO
    est, ref, alt_var, alt_2s = [], [], [], []
    for _ in range(30):
        pts = alternatives.thomas(W, kappa, mu, sigma, rng)
        n = len(pts)
        lam = n / W.measure
        r = rho / math.sqrt(lam)
        L = statistics.compute(pts, W, [S["lfunc"]])["lfunc"]
        est.append(math.pi * L ** 2 / lam - math.pi * r ** 2)
        ref.append(thomas_k(r, kappa, sigma) - math.pi * r ** 2)
        alt_var.append(thomas_k(r, kappa, math.sqrt(sigma)) - math.pi * r ** 2)   # sigma read as variance
        alt_2s.append((1 - np.exp(-r ** 2 / (2 * sigma ** 2))) / kappa)           # 2 sigma^2 for 4 sigma^2
    est, ref = np.array(est), np.array(ref)
    diff = est - ref
    se = diff.std(axis=0, ddof=1) / math.sqrt(len(diff))
    tol = 4 * se + 0.01 * ref.mean(axis=0)
    assert np.all(np.abs(diff.mean(axis=0)) <= tol)
    # clustering is strong: far from the CSR value 0 ...
    assert np.all(est.mean(axis=0)[rho >= 0.3] > 10 * tol[rho >= 0.3])
    # ... and the test would notice a wrong spread convention in the simulator
    for alt in (alt_var, alt_2s):
        assert np.any(np.abs(est.mean(axis=0) - np.mean(alt, axis=0)) > 3 * tol)


def test_thomas_intensity_and_window():
    # Stationarity of the Thomas process (Diggle 2013): intensity kappa * mu
    # everywhere, so E[N(W)] = kappa mu |W| including near the boundary --
    # which needs parents outside W.  Small window, wide clusters (sigma = 2
    # on 40 x 40): simulating parents only inside W would lose ~8% of the
    # points (about lambda * P * sigma / sqrt(2 pi) = 128 of 1600), i.e. ~10
    # standard errors.  Tolerance 3.5 SE.
    W = windows.Rectangle(-20, -20, 20, 20)
    kappa, mu, sigma = 0.05, 20.0, 2.0
    rng = np.random.default_rng(500)
    counts = []
    for _ in range(200):
        pts = alternatives.thomas(W, kappa, mu, sigma, rng)
        assert pts.shape[1] == 2 and np.all(W.contains(pts))
        counts.append(len(pts))
    counts = np.array(counts)
    se = counts.std(ddof=1) / math.sqrt(len(counts))
    expected = kappa * mu * W.measure
    assert abs(counts.mean() - expected) <= 3.5 * se
    assert 3.5 * se < 128 / 2  # power to see the missing-parents deficit
