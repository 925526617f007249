"""Alternative point processes against published facts (the Thomas K
function is checked in test_ref_nn.py)."""
import math
import os

import numpy as np
import pytest
from scipy.spatial import cKDTree

from nullatlas.lookup.errors import OptionError
from nullatlas.lookup.patterns import windows
from nullatlas.lookup.processes import alternatives as A
from nullatlas.lookup.summaries import grids, statistics

S = statistics.STATISTICS


@pytest.mark.parametrize("W", [windows.Rectangle(0, 0, 12, 8), windows.Disk(0, 0, 6),
                               windows.Box(0, 0, 0, 5, 5, 4)])
def test_matern_hardcore_distance_and_retained_intensity(W):
    """Matérn II: no two points closer than r (by construction), and the
    retained intensity lambda_p (1 - exp(-lambda_p v)) / (lambda_p v)
    (Illian, Penttinen, Stoyan & Stoyan 2008; from memory, checked against the
    mean of 150 patterns within 4 standard errors)."""
    rng = np.random.default_rng(11)
    lam_p, r = 3.0, 0.35
    counts = []
    for _ in range(150):
        x = A.matern_hardcore(W, lam_p, r, rng)
        assert np.all(W.contains(x))
        if len(x) > 1:
            assert cKDTree(x).query(x, k=2)[0][:, 1].min() >= r
        counts.append(len(x))
    v = A.ball_volume(r, W.dim)
    expect = lam_p * (1 - math.exp(-lam_p * v)) / (lam_p * v) * W.measure
    se = np.std(counts, ddof=1) / math.sqrt(len(counts))
    assert abs(np.mean(counts) - expect) <= 4 * se, (np.mean(counts), expect)
    # without dilated proposals the boundary would be too dense: the count
    # would exceed the formula by several standard errors; check the test can see it
    assert 4 * se < 0.05 * expect


def test_strauss_with_gamma_one_is_csr():
    """Strauss with gamma = 1 is a Poisson process: its border-corrected L
    function is rho (Ripley 1977), and its count is Poisson(beta |W|)."""
    W = windows.Rectangle(0, 0, 10, 10)
    rng = np.random.default_rng(3)
    Ls, counts = [], []
    for _ in range(40):
        x = A.strauss(W, 4.0, 1.0, 0.3, rng)
        counts.append(len(x))
        Ls.append(statistics.compute(x, W, [S["lfunc"]])["lfunc"])
    L = np.array(Ls)
    se = L.std(axis=0, ddof=1) / math.sqrt(len(L))
    assert np.all(np.abs(L.mean(axis=0) - grids.L_RHO) <= 4 * se + 0.01)
    c = np.array(counts)
    assert abs(c.mean() - 400) <= 4 * math.sqrt(400 / len(c))


def test_strauss_inhibition_removes_close_pairs():
    W = windows.Rectangle(0, 0, 10, 10)
    rng = np.random.default_rng(4)
    x = A.strauss(W, 4.0, 0.0, 0.3, rng)               # gamma = 0: hard core
    assert cKDTree(x).query(x, k=2)[0][:, 1].min() >= 0.3
    y = A.strauss(W, 4.0, 0.3, 0.3, rng)
    z = A.strauss(W, 4.0, 1.0, 0.3, rng)
    def pairs(p):
        return len(cKDTree(p).query_pairs(0.3)) / len(p)
    assert pairs(y) < 0.6 * pairs(z)


def test_inhomogeneous_counts_match_the_integrated_intensity():
    """Counts in the left and right halves against the integral of
    lambda(x, y) = 2 exp(-x / 5) over each half (Poisson: variance = mean)."""
    W = windows.Rectangle(0, 0, 10, 10)
    rng = np.random.default_rng(5)
    left, right = [], []
    for _ in range(200):
        x = A.inhomogeneous_poisson(W, "2*exp(-x/5)", 2.0, rng)
        left.append(np.sum(x[:, 0] < 5))
        right.append(np.sum(x[:, 0] >= 5))
    il = 2 * 5 * (1 - math.exp(-1)) * 10
    ir = 2 * 5 * (math.exp(-1) - math.exp(-2)) * 10
    assert abs(np.mean(left) - il) <= 4 * math.sqrt(il / 200)
    assert abs(np.mean(right) - ir) <= 4 * math.sqrt(ir / 200)
    f = A.intensity_function("2*exp(-x/5) + 0*y", 2)
    np.testing.assert_allclose(f(np.array([[0.0, 1.0], [5.0, 2.0]])), [2, 2 * math.exp(-1)])


def test_intensity_expressions_are_parsed_not_executed():
    for bad in ("__import__('os').system('true')", "x.__class__", "open('f')", "[x]", "x if y else 1"):
        with pytest.raises(OptionError):
            A.intensity_function(bad, 2)
    with pytest.raises(OptionError, match="lambda_max"):
        A.inhomogeneous_poisson(windows.Rectangle(0, 0, 1, 1), "5", 2.0, np.random.default_rng(0))


def test_matern_cluster_is_stationary_up_to_the_boundary():
    """E N(W) = kappa mu |W| also near the boundary (parents in the dilated box)."""
    W = windows.Disk(0, 0, 10)
    rng = np.random.default_rng(6)
    c = np.array([len(A.matern_cluster(W, 0.05, 10, 2.0, rng)) for _ in range(200)])
    expect = 0.05 * 10 * W.measure
    assert abs(c.mean() - expect) <= 4 * c.std(ddof=1) / math.sqrt(len(c))
    x = A.matern_cluster(windows.Box(0, 0, 0, 5, 5, 5), 0.1, 8, 0.6, rng)
    assert x.shape[1] == 3


def test_voids_leave_the_vacant_fraction():
    """Vacant fraction of a Boolean model of discs: exp(-lambda_h pi R^2)
    (Chiu, Stoyan, Kendall & Mecke 2013); the retained share of Poisson points
    estimates it."""
    W = windows.Rectangle(0, 0, 40, 40)
    rng = np.random.default_rng(8)
    lam_h, R = 0.01, 2.5
    kept = [len(A.voids(W, 5.0, lam_h, R, rng)) / (5.0 * W.measure) for _ in range(60)]
    expect = math.exp(-lam_h * math.pi * R * R)
    assert abs(np.mean(kept) - expect) <= 4 * np.std(kept, ddof=1) / math.sqrt(60) + 0.005


def test_monte_carlo_route_with_a_cluster_null(capsys):
    """--null: the Monte Carlo route simulates the given model conditioned on n.
    A Thomas pattern is rejected against CSR but not against its own model."""
    from nullatlas.lookup import csr_test
    from nullatlas.lookup.processes.registry import simulate
    W = windows.Disk(0, 0, 1)
    rng = np.random.default_rng(9)
    spec = ("thomas", {"parents": 0.05, "sigma": 0.25})
    pts = simulate(W, *spec, 400, rng)
    r_csr = csr_test(pts, W, ["total0"], method="mc", n_sims=99, seed=1)
    r_own = csr_test(pts, W, ["total0"], method="mc", n_sims=99, seed=1,
                     null="thomas:parents=0.05,sigma=0.25")
    assert r_csr.pvalue <= 0.02 and r_own.pvalue > 0.05
    assert r_own.as_dict()["null"] == "thomas:parents=0.05,sigma=0.25"
    with pytest.raises(OptionError, match="CSR only"):
        csr_test(pts, W, ["total0"], method="asymptotic", null="thomas")
    x = simulate(W, "strauss", {"gamma": 0.2, "r": 0.7}, 300, rng, 300)
    assert x.shape == (300, 2) and np.all(W.contains(x))


@pytest.mark.parametrize("spec", ["thomas:parents=nan,sigma=0.3", "thomas:sigma=inf",
                                  "thomas:parents=1e9", "matern:parents=nan", "hardcore:r=nan",
                                  "voids:radius=nan", "thomas:sigma=1_0e-1", "strauss:gamma=2"])
def test_model_parameters_must_be_finite_and_in_range(spec, capsys):
    """Issue 13: NaN, infinite, absurd or malformed parameters are one line and
    exit status 2 on the command line, before anything is simulated."""
    from nullatlas.lookup.cli import main

    pts = os.path.join(os.path.dirname(__file__), "..", "examples", "wafer_lot_random.csv")
    assert main(["test", pts, "-w", "disk:0,0,150", "--null", spec, "--method", "mc",
                 "--sims", "9", "--seed", "1"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "model" in err[0] and "Traceback" not in err[0]
