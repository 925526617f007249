"""Issue 15: one curve test on both routes, honest p-value bounds, one vocabulary."""
import json
import os

import numpy as np
import pytest

import nullatlas
from nullatlas.lookup.cli import main
from nullatlas.lookup.inference import globaltests as gt
from nullatlas.lookup.inference.ranks import maxabs_test
from nullatlas.lookup.results import P_FLOOR, RESULT_KEYS, SCHEMA, format_pvalue

EX = os.path.join(os.path.dirname(os.path.dirname(__file__)), "examples")
WAFER = "disk:0,0,150"


def test_leave_one_out_studentisation_matches_brute_force():
    """Each simulated curve is standardised by the other m curves (the
    observed one included), the observed one by the m simulations."""
    rng = np.random.default_rng(1)
    sims = rng.normal(3.0, 2.0, (30, 6)) + np.arange(6)
    obs = sims.mean(axis=0) + 2.5 * sims.std(axis=0)
    use = np.array([True, True, False, True, True, True])
    out = maxabs_test(obs, sims, use)
    pooled = np.vstack([obs, sims])
    t = []
    for j in range(len(pooled)):
        rest = np.delete(pooled, j, axis=0)[:, use]
        t.append(np.max(np.abs(pooled[j, use] - rest.mean(0)) / rest.std(0, ddof=1)))
    assert out["statistic"] == pytest.approx(t[0], rel=1e-12)
    np.testing.assert_allclose(out["null"], np.sort(t[1:]), rtol=1e-10)
    assert out["pvalue"] == (1 + np.sum(np.array(t[1:]) >= t[0])) / 31
    assert not out["mask"][2] and np.isnan(out["z"][2])


def test_studentised_max_is_an_exact_monte_carlo_test():
    """Under the null the m + 1 leave-one-out maxima are exchangeable, so
    P(p <= k/(m+1)) = k/(m+1) exactly (Davison & Hinkley 1997, ch. 4); a
    test that standardised the simulations by moments including
    themselves would be liberal at small m."""
    rng = np.random.default_rng(7)
    m, reps, k = 19, 4000, 8
    cov = 0.6 ** np.abs(np.subtract.outer(np.arange(k), np.arange(k)))
    f = np.linalg.cholesky(cov)
    p = []
    for _ in range(reps):
        x = rng.standard_normal((m + 1, k)) @ f.T
        p.append(maxabs_test(x[0], x[1:], np.ones(k, bool))["pvalue"])
    p = np.array(p)
    for level in (1, 2, 5):
        share = np.mean(p <= level / (m + 1) + 1e-12)
        se = np.sqrt(level / (m + 1) * (1 - level / (m + 1)) / reps)
        assert abs(share - level / (m + 1)) < 4 * se, (level, share)


def test_sidak_bound_is_exact_for_independent_and_a_bound_for_correlated():
    """Sidak (JASA 62, 1967): P(max|G_j| >= t) <= 1 - (1 - 2 Phi(-t))^k, with
    equality when the G_j are independent."""
    from scipy.special import ndtr

    assert gt.sidak_bound(2.0, 7) == pytest.approx(1 - (1 - 2 * ndtr(-2.0)) ** 7, rel=1e-12)
    rng = np.random.default_rng(3)
    k = 12
    cov = 0.8 ** np.abs(np.subtract.outer(np.arange(k), np.arange(k)))
    g = np.abs(rng.standard_normal((200_000, k)) @ np.linalg.cholesky(cov).T).max(axis=1)
    for t in (2.0, 2.5, 3.0):
        assert np.mean(g >= t) <= gt.sidak_bound(t, k)
    # far in the tail it keeps its relative precision (k * 2 Phi(-t) to first order)
    assert gt.sidak_bound(8.0, 100) == pytest.approx(100 * 2 * ndtr(-8.0), rel=1e-10)
    assert gt.sidak_bound(0.0, 5) == 1.0


def test_both_routes_give_close_p_values_for_the_same_curve_test():
    """The instant route and the Monte Carlo route test the same studentised
    maximum over the same (tabled) usable grid points: on CSR patterns in
    the square their Euler-curve p-values differ by little (the Monte Carlo
    error of 199 simulations, about 0.035 at p = 0.5, plus the table's)."""
    w = nullatlas.Rectangle(0, 0, 1, 1)
    diffs = []
    for s in range(4):
        pts = w.sample(400, np.random.default_rng(100 + s))
        a = nullatlas.csr_test(pts, w, ["euler"], method="asymptotic", seed=1)
        b = nullatlas.csr_test(pts, w, ["euler"], method="mc", n_sims=199, seed=1)
        ra, rb = a.primary, b.primary
        assert rb.method == "mc-maxabs" and rb.details["usable_from"] == "table"
        np.testing.assert_array_equal(ra.curve["usable"], rb.curve["usable"])
        assert rb.details["grid_points_used"] == ra.details["grid_points_used"]
        assert ra.statistic == pytest.approx(rb.statistic, rel=0.1)
        diffs.append(abs(ra.pvalue - rb.pvalue))
    assert max(diffs) < 0.15, diffs


def test_envelope_is_a_separate_option_named_as_another_test(capsys):
    w = nullatlas.Rectangle(0, 0, 1, 1)
    pts = w.sample(200, np.random.default_rng(2))
    r = nullatlas.csr_test(pts, w, ["euler"], method="mc", n_sims=39, seed=1, curve_test="erl")
    assert r.primary.method == "mc-erl-envelope"
    assert "different curve test" in r.primary.method_label
    auto = nullatlas.csr_test(pts, w, ["euler", "nnmean"], n_sims=39, seed=1, curve_test="erl")
    assert [x.method for x in auto.results] == ["mc-erl-envelope", "asymptotic-normal"]
    with pytest.raises(ValueError, match="needs simulations"):
        nullatlas.csr_test(pts, w, ["euler"], method="asymptotic", curve_test="erl")
    assert main(["test", os.path.join(EX, "wafer_lot_random.csv"), "-w", WAFER,
                 "--method", "asymptotic", "--curve-test", "erl"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "needs simulations" in err[0]


def test_curve_beyond_every_simulated_maximum_reports_a_bound():
    """With 200 Gaussian vectors the simulation cannot resolve p < 1/201: the
    p-value becomes the smaller of Sidak's bound and the rule of three 3/N,
    flagged as a bound and printed with '<'."""
    from nullatlas.lookup.inference.asymptotic import asymptotic_result, instant_moments
    from nullatlas.lookup.inference.nullmoments import default_tables
    from nullatlas.lookup.summaries.statistics import compute, resolve_stats

    w = nullatlas.Disk(0, 0, 150)
    rng = np.random.default_rng(4)
    pts = np.vstack([w.sample(330, rng), nullatlas.Disk(40, -30, 30).sample(70, rng)])
    st = resolve_stats(["euler"], 2)[0]
    nm, ok, _ = instant_moments(default_tables(), w, len(pts), st, "two-sided")
    obs = compute(pts, w, [st])["euler"]
    r = asymptotic_result(st, obs, nm, "two-sided", len(pts), ok, [], n_gauss=200,
                          rng=np.random.default_rng(0))
    b = r.details["pvalue_bounds"]
    assert r.pvalue_is_bound and r.pvalue == max(min(b.values()), P_FLOOR)
    assert b["simulation_95"] == pytest.approx(3 / 200)
    assert b["sidak"] == pytest.approx(gt.sidak_bound(r.statistic, r.details["grid_points_used"]))
    assert repr(r).split("pvalue=")[1].startswith("<")


def test_p_values_print_with_their_precision():
    assert format_pvalue(0.04999) == "0.05" and format_pvalue(0.000123) == "0.00012"
    assert format_pvalue(P_FLOOR, True) == "< 1e-16"
    assert format_pvalue(2 / 1000, True, 999) == "<= 0.002"
    assert format_pvalue(float("nan")) == "-"


def test_one_vocabulary_in_json_python_and_batch(capsys, tmp_path):
    """JSON keys are the Python attribute names; the schema says so."""
    assert main(["test", os.path.join(EX, "wafer_lot_regular.csv"), "-w", WAFER,
                 "--stat", "nnmean,euler", "--alternative", "regular", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["schema"] == SCHEMA == 2
    r = d["results"][0]
    assert list(r)[:len(RESULT_KEYS)] == list(RESULT_KEYS)
    assert r["name"] == "nnmean" and isinstance(r["statistic"], float)
    assert r["alternative"] == "regular" and r["tail"] == "greater"
    res = nullatlas.csr_test(os.path.join(EX, "wafer_lot_regular.csv"), WAFER, ["nnmean"],
                             method="asymptotic", alternative="regular", seed=1)
    assert res.primary.as_dict()["pvalue"] == res.pvalue == r["pvalue"]
    assert res.primary.observed == res.primary.statistic          # the schema-1 name
    out = tmp_path / "b.json"
    assert main(["batch", "--manifest", os.path.join(EX, "wafers.manifest"), "--stat", "nnmean",
                 "--method", "asymptotic", "--out", str(out), "--json"]) == 0
    b = json.loads(capsys.readouterr().out)
    assert b == json.loads(out.read_text())
    assert b["schema"] == 2
    assert {"name", "statistic", "pvalue", "pvalue_is_bound", "pvalue_holm",
            "pvalue_bh"} <= set(b["rows"][0])
