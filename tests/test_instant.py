"""The instant (table) test: size on fresh null patterns, agreement with Monte
Carlo, the trust verdict and its fallback, user tables."""
import json
import os

import numpy as np
import pytest
import shapely

from nullatlas.lookup import csr_test
from nullatlas.lookup.inference.asymptotic import asymptotic_result, verdict
from nullatlas.lookup.inference.montecarlo import simulate_null
from nullatlas.lookup.inference.nullmoments import default_tables, null_moments
from nullatlas.lookup.patterns import windows
from nullatlas.lookup.summaries.statistics import (
    STATISTICS,
    PatternSummary,
    evaluate,
    resolve_stats,
)

# Fresh null patterns: a seed family unrelated to the tables' root seed.
FRESH = 777_001


def _sizes(window, n, stats, reps, seed):
    """Rejection rates at 0.05 of the trusted instant tests on CSR patterns."""
    tabs = default_tables()
    chosen = resolve_stats(stats, window.dim)
    nms = {s.name: null_moments(tabs, window, n, s.name) for s in chosen}
    trusted = {s.name: verdict(nms[s.name], s, n, window, "two-sided") for s in chosen}
    rej = {s.name: 0 for s in chosen}
    for ss in np.random.SeedSequence(seed).spawn(reps):
        pts = window.sample(n, np.random.default_rng(ss))
        obs = evaluate(PatternSummary(pts, window), chosen)
        for s in chosen:
            r = asymptotic_result(s, obs[s.name], nms[s.name], "two-sided", n, True, [])
            rej[s.name] += r.pvalue <= 0.05
    return {k: v / reps for k, v in rej.items()}, trusted, nms


@pytest.mark.slow
def test_size_in_a_shipped_cell():
    """Square, n = 1000 (a shipped cell): every trusted test rejects CSR at
    0.05 in 0.05 +- 0.015 of 1200 fresh null patterns."""
    w = windows.Rectangle(0, 0, 3, 3)
    sizes, trusted, nms = _sizes(w, 1000, ["euler", "total0", "total1", "nnmean", "lfunc",
                                           "maxpers1"], 1200, FRESH)
    for name, size in sizes.items():
        assert trusted[name][0], (name, trusted[name])
        assert nms[name].route == "cell"
        assert abs(size - 0.05) <= 0.015, (name, size)


@pytest.mark.slow
def test_size_in_a_convex_window_not_in_the_tables():
    """A regular hexagon (kappa 3.72, between disk and square) at n = 1500:
    the finite-window model route; its trusted tests hold their size."""
    hexa = shapely.Polygon([(10 + 5 * np.cos(a), 5 * np.sin(a)) for a in np.arange(6) * np.pi / 3])
    w = windows.PolygonWindow(hexa)
    sizes, trusted, nms = _sizes(w, 1500, ["euler", "total0", "nnmean", "total1"], 1000, FRESH + 1)
    assert nms["euler"].route == "model" and nms["euler"].shape is None
    checked = 0
    for name, size in sizes.items():
        if trusted[name][0]:
            checked += 1
            assert abs(size - 0.05) <= 0.015, (name, size)
    assert checked >= 3


@pytest.mark.slow
def test_size_in_a_nonconvex_window_never_fitted_or_validated():
    """A U-shaped polygon (two reflex corners, hull deficit 0.2) at n = 3000,
    in neither the training nor the held-out windows: the model route;
    every test the verdict trusts holds its size within 0.05 +- 0.02 on 800
    fresh patterns (2.2 binomial SE)."""
    u = shapely.Polygon([(0, 0), (6, 0), (6, 5), (4, 5), (4, 2), (2, 2), (2, 5), (0, 5)])
    w = windows.PolygonWindow(u)
    sizes, trusted, nms = _sizes(w, 3000, ["euler", "total0", "total1", "nnmean", "lfunc"],
                                 800, FRESH + 2)
    assert nms["euler"].route == "model"
    checked = [name for name in sizes if trusted[name][0]]
    for name in checked:
        assert abs(sizes[name] - 0.05) <= 0.02, (name, sizes[name])
    assert "euler" in checked and len(checked) >= 2, trusted


def test_asymptotic_and_monte_carlo_agree():
    """Same pattern, same statistics: instant p-values against Monte Carlo
    p-values from 999 simulations of the same statistic, within 3 Monte
    Carlo standard errors (plus the 1/(m+1) grid)."""
    w = windows.Disk(0, 0, 1)
    rng = np.random.default_rng(5)
    # a mildly clustered pattern, so that p-values are not all near 1/2
    parents = w.sample(60, rng)
    pts = parents[rng.integers(0, 60, 2000)] + rng.normal(0, 0.06, (2000, 2))
    pts = pts[w.contains(pts)][:1600]
    n = len(pts)
    stats = resolve_stats(["total0", "nnmean", "total1", "euler"], 2)
    r = csr_test(pts, w, [s.name for s in stats], method="asymptotic", seed=3)
    null = simulate_null(w, n, stats, np.random.SeedSequence(9).spawn(999), jobs=2)
    obs = evaluate(PatternSummary(pts, w), stats)
    m = 999
    for s in stats:
        res = r[s.name]
        assert res.trusted, res.reason
        if s.kind == "curve":
            mu, sd = null[s.name].mean(0), null[s.name].std(0, ddof=1)
            use = np.asarray(res.curve["usable"], bool)
            t_sim = np.max(np.abs((null[s.name][:, use] - mu[use]) / sd[use]), axis=1)
            t_obs = np.max(np.abs((obs[s.name][use] - mu[use]) / sd[use]))
            p_mc = (1 + np.sum(t_sim >= t_obs)) / (m + 1)
        else:
            x, v = obs[s.name], null[s.name]
            p_mc = min(1.0, 2 * min((1 + np.sum(v >= x)) / (m + 1), (1 + np.sum(v <= x)) / (m + 1)))
        se = np.sqrt(max(p_mc * (1 - p_mc), 1 / m) / m)
        assert abs(res.pvalue - p_mc) <= 3 * se + 2 / (m + 1), (s.name, res.pvalue, p_mc)


def test_trust_verdicts_and_auto_fallback():
    rng = np.random.default_rng(1)
    # a 30-point pattern: below every calibrated n
    w = windows.Rectangle(0, 0, 1, 1)
    r = csr_test(w.sample(30, rng), w, ["total0"], method="asymptotic", seed=1)
    assert not r.primary.trusted and "below the smallest calibrated n" in r.primary.reason
    r = csr_test(w.sample(30, rng), w, ["total0"], method="auto", n_sims=39, seed=1)
    assert r.primary.method == "mc-rank" and r.primary.trusted
    assert any("Monte Carlo used instead" in m for m in r.warnings)
    # a polygon with an off-centre hole (not a calibrated shape): loop
    # statistics were never validated on windows with holes -- the hole is a
    # loop of every pattern in it
    poly = shapely.Polygon([(0, 0), (4, 0), (4, 4), (0, 4)], [[(0.6, 0.7), (2.2, 0.7), (1.4, 2.6)]])
    pw = windows.PolygonWindow(poly)
    r = csr_test(pw.sample(800, rng), pw, ["maxpers1"], method="asymptotic", seed=1)
    assert r.primary.details["route"] == "model"
    assert not r.primary.trusted and "hole" in r.primary.reason
    r = csr_test(pw.sample(800, rng), pw, ["maxpers1"], method="auto", n_sims=19, seed=1)
    assert r.primary.method == "mc-rank"
    # the square with a centred hole is a calibrated shape (cells, audited)
    holed = windows.PolygonWindow(shapely.Polygon([(0, 0), (4, 0), (4, 4), (0, 4)],
                                                  [[(1, 1), (3, 1), (3, 3), (1, 3)]]))
    r = csr_test(holed.sample(800, rng), holed, ["total0"], method="asymptotic", seed=1)
    assert r.primary.details["route"] in ("cell", "interpolated") and r.primary.trusted
    # a 3D ball: its kappa is below every training shape's, and the Euler
    # curve's model missed the held-out ball at n <= 300, so the validated
    # range excludes it
    b = windows.Ball(0, 0, 0, 1)
    r = csr_test(b.sample(300, rng), b, ["euler"], method="asymptotic", seed=1)
    assert not r.primary.trusted and "validated" in r.primary.reason
    r = csr_test(b.sample(300, rng), b, ["euler"], method="auto", n_sims=19, seed=1)
    assert r.primary.method.startswith("mc-")      # the curve's Monte Carlo envelope test
    # beyond the largest calibrated 3D n and far beyond the held-out n
    # (5,000), the uncertainty of the fitted limit is too large: untrusted
    cube = windows.Box(0, 0, 0, 1, 1, 1)
    nm = null_moments(default_tables(), cube, 40_000, "total2")
    ok, why = verdict(nm, STATISTICS["total2"], 40_000, cube, "two-sided")
    assert not ok and any("beyond" in w and "limit" in w for w in why), why
    assert 5_000 < nm.extra["n_extrapolation"] < 40_000


def test_trusted_result_fields_and_json(capsys, tmp_path):
    from nullatlas.lookup import cli
    w = windows.Disk(0, 0, 150)
    pts = w.sample(2000, np.random.default_rng(4))
    f = tmp_path / "p.npy"
    np.save(f, pts)
    assert cli.main(["test", str(f), "-w", "disk:0,0,150", "--json", "--seed", "2"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["method"] == "auto"
    prim = d["results"][0]
    assert prim["name"] == "euler" and prim["method"] == "asymptotic-maxabs"
    assert prim["trusted"] is True and prim["details"]["route"] == "cell"
    assert 0 < prim["pvalue"] <= 1 and "mahalanobis_pvalue" in prim["details"]
    # p-values of the instant test do not depend on --seed
    assert cli.main(["test", str(f), "-w", "disk:0,0,150", "--json", "--seed", "3"]) == 0
    d2 = json.loads(capsys.readouterr().out)
    assert [r["pvalue"] for r in d2["results"]] == [r["pvalue"] for r in d["results"]]


def test_users_table_takes_precedence(tmp_path):
    from nullatlas.calibrate import build, shapes
    out = tmp_path / "mine.h5"
    build.build_table(str(out), [("disk", shapes.shape_window("disk"))], [300, 600], 480,
                      stats=["nnmean"], root_seed=5, progress=False, n_fit=10)
    w = windows.Disk(5, 5, 2)
    pts = w.sample(300, np.random.default_rng(2))
    r = csr_test(pts, w, ["nnmean"], method="asymptotic", tables=[str(out)])
    assert r.primary.trusted and r.primary.details["table"] == str(out)
    assert "mine.h5" in r.primary.reason
    r2 = csr_test(pts, w, ["nnmean"], method="asymptotic")
    assert r2.primary.details["table"] != str(out)


def test_replicate_rule_of_the_trust_verdict():
    """Issue 14: the Monte Carlo error of a table's moments and of its audit
    limit trust: 200 replicates fail both parts of the rule, 500 pass."""
    from nullatlas.lookup.inference.asymptotic import replicate_reasons
    few = replicate_reasons(200)
    assert len(few) == 2 and "200 replicates" in few[0] and "0.0707 pattern sd" in few[0]
    assert "binomial standard error of 0.0154" in few[1]
    assert replicate_reasons(500) == [] and replicate_reasons(5000) == []
    assert len(replicate_reasons(450)) == 1          # mean fine, audit too noisy (R < 475)


def test_a_table_of_few_replicates_is_not_trusted(tmp_path):
    """Issue 14: a user table of 60 replicates per cell is not trusted like
    one of thousands, and says why (alone, without the shipped tables)."""
    from nullatlas.calibrate import build, shapes
    out = tmp_path / "few.h5"
    build.build_table(str(out), [("disk", shapes.shape_window("disk"))], [300, 600], 60,
                      stats=["nnmean"], root_seed=5, progress=False, n_fit=10)
    w = windows.Disk(5, 5, 2)
    pts = w.sample(300, np.random.default_rng(2))
    r = csr_test(pts, w, ["nnmean"], method="asymptotic", tables=[str(out)], use_shipped=False)
    assert not r.primary.trusted and r.primary.details["table"] == str(out)
    assert "only 60 replicates" in r.primary.reason and "cannot have checked" in r.primary.reason


def test_a_users_table_never_makes_the_answer_worse(tmp_path):
    """Issue 14: a table of the square at n = 200, 500 cannot answer n = 600
    for the extreme maxpers1 (beyond its cells, no model); the shipped table
    can, so it answers, and the reason says which table answered and why the
    user's did not (a true reason: n outside its cells, not 'nearest kappa')."""
    from nullatlas.calibrate import build, shapes
    out = tmp_path / "sq.h5"
    build.build_table(str(out), [("square", shapes.shape_window("square"))], [200, 500], 480,
                      stats=["maxpers1"], root_seed=5, progress=False, n_fit=10)
    w = windows.Rectangle(0, 0, 1, 1)
    pts = w.sample(600, np.random.default_rng(4))
    mine = csr_test(pts, w, ["maxpers1"], method="asymptotic", tables=[str(out)])
    shipped = csr_test(pts, w, ["maxpers1"], method="asymptotic")
    r = mine.primary
    assert shipped.primary.trusted and r.trusted and r.pvalue == shipped.primary.pvalue
    assert "null2d.h5" in r.reason and "sq.h5 could not give a trusted answer" in r.reason
    assert "outside the table's cells of this window's shape (n 200..500)" in r.reason
    assert "nearest kappa" not in r.reason


def test_interpolation_between_cells_is_between_them():
    tabs = default_tables()
    w = windows.Rectangle(0, 0, 2, 1)           # aspect 2: shape rect2
    a = null_moments(tabs, w, 1000, "total0")
    b = null_moments(tabs, w, 2000, "total0")
    c = null_moments(tabs, w, 1400, "total0")
    assert a.route == b.route == "cell" and c.route == "interpolated" and c.shape == "rect2"
    lo, hi = sorted([a.mean[0], b.mean[0]])
    assert lo <= c.mean[0] <= hi
    # n Var interpolates: the sd of total0 per point scales like n^(-1/2)
    assert a.sd[0] > c.sd[0] > b.sd[0]


def test_a_p_value_is_never_zero():
    """A strongly clustered pattern (z about -80 for total0) is far beyond
    what the normal limit resolves: the p-value is the floor 1e-16, flagged
    as an upper bound (issue 15), never 0."""
    from nullatlas.lookup.inference.asymptotic import P_FLOOR

    rng = np.random.default_rng(3)
    w = windows.Rectangle(0, 0, 1, 1)
    parents = rng.random((20, 2))
    pts = np.clip(parents[rng.integers(0, 20, 4000)] + 0.002 * rng.standard_normal((4000, 2)),
                  0, 1)
    r = csr_test(pts, w, ["total0"], method="asymptotic", seed=1)
    assert r.primary.z < -38                      # beyond what the normal tail resolves
    assert r.primary.pvalue == P_FLOOR == 1e-16 and r.primary.pvalue_is_bound
    assert r.primary.details["pvalue_floor"] == P_FLOOR
    assert "(p < 1e-16)" in r.summary()


def test_estimated_windows_ripley_rasson_and_unbiased_bbox():
    """The Ripley-Rasson hull (Ripley & Rasson, J. Appl. Probab. 14, 1977) and
    the unbiased uniform-range box estimate the unit square's area without
    the plain hull's shrinkage; both contain the points."""
    import shapely

    from nullatlas.lookup.patterns.windows import estimate_window

    sq = windows.Rectangle(0, 0, 1, 1)
    rr, plain, box = [], [], []
    for i in range(300):
        pts = sq.sample(200, np.random.default_rng(i))
        w = estimate_window("hull", pts)
        assert w.contains(pts).all() and w.estimated and w.estimator == "hull"
        rr.append(w.measure)
        plain.append(shapely.MultiPoint(pts).convex_hull.area)
        box.append(estimate_window("bbox", pts).measure)
    assert np.mean(plain) < 0.975                       # the hull is too small
    assert abs(np.mean(rr) - 1) < 0.01 and abs(np.mean(box) - 1) < 0.01


@pytest.mark.slow
def test_monte_carlo_with_an_estimated_hull_holds_its_size():
    """CSR, n = 200 in the unit square, window 'hull' estimated from the data:
    the Monte Carlo null re-estimates the window from every simulated
    pattern, so the test holds its size (measured 0.047-0.057 on 300
    patterns with 39 simulations; a null in the fixed hull rejected
    0.13-0.26).  Here 200 patterns: 0.05 +- 0.035 (2.3 binomial SE)."""
    import warnings

    sq = windows.Rectangle(0, 0, 1, 1)
    rej = {"total0": 0, "nnmean": 0}
    for i in range(200):
        pts = sq.sample(200, np.random.default_rng(5000 + i))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            w = windows.parse_window("hull", pts)
        r = csr_test(pts, w, list(rej), method="auto", n_sims=39, seed=i)
        assert all(x.method == "mc-rank" for x in r.results)      # never instant
        for x in r.results:
            rej[x.name] += x.pvalue <= 0.05
    for name, k in rej.items():
        assert abs(k / 200 - 0.05) <= 0.035, (name, k / 200)


def test_duplicates_one_rule_for_drop_and_jitter():
    """Issue 13: exactly 1% duplicates is within the limit for both policies
    (the share is of the points read), 1% + 1 is beyond it for both."""
    w = windows.Rectangle(0, 0, 1, 1)
    base = w.sample(990, np.random.default_rng(7))
    for extra, trusted in ((10, True), (11, False)):
        pts = np.vstack([base, base[:extra]]) if extra == 10 else \
            np.vstack([base[:989], base[:11]])
        assert len(pts) == 1000
        for policy in ("drop", "jitter"):
            r = csr_test(pts, w, ["total0"], method="asymptotic", on_duplicates=policy, seed=1)
            assert r.primary.trusted is trusted, (extra, policy, r.primary.reason)


def test_requests_that_cannot_finish_are_refused_or_capped(capsys):
    """Issue 13: an absurd number of simulations is one line and status 2
    (saying how long it would take); absurd --jobs is capped with a warning."""
    from nullatlas.lookup.cli import main

    f = os.path.join(os.path.dirname(__file__), "..", "examples", "wafer_lot_random.csv")
    assert main(["test", f, "-w", "disk:0,0,150", "--method", "mc",
                 "--sims", "100000000000000"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "years" in err[0]
    r = csr_test(f, windows.Disk(0, 0, 150), ["total0"], method="mc", n_sims=9, jobs=10_000,
                 seed=1)
    assert any("workers" in w for w in r.warnings) and np.isfinite(r.primary.pvalue)


def test_monte_carlo_z_is_not_made_of_rounding():
    """Issue 13: simulated values equal up to the last bits (a 3D pattern of
    5 points has a constant Euler characteristic at many radii) have a sd of
    order 1e-17; no z may be made of it (it was 3.5e15)."""
    from nullatlas.lookup.inference.montecarlo import mc_results

    rng = np.random.default_rng(0)
    flat = 0.2 + np.ldexp(rng.integers(-2, 3, 39), -55)        # 0.2 up to rounding
    res = mc_results({"total0": 0.4}, {"total0": flat}, [STATISTICS["total0"]])[0]
    assert np.isnan(res.z) and res.pvalue > 0
    w = windows.Box(0, 0, 0, 1, 1, 1)
    r = csr_test(w.sample(5, np.random.default_rng(2)), w, ["euler"], method="mc", n_sims=39,
                 seed=3)
    z = np.asarray(r.primary.curve["z"], float)
    assert np.all(~np.isfinite(z) | (np.abs(z) < 1e6))


def test_long_monte_carlo_fallback_is_announced_and_can_be_capped(monkeypatch, capsys):
    """Issue 13: before a Monte Carlo fallback of --method auto, its time is
    estimated (monkeypatched here to 2 h); without a budget it runs and is
    announced first; beyond --fallback-budget it is not run and the
    untrusted statistics keep their instant answers, flagged, with the
    estimate in the reason; trusted statistics never pay for an estimate."""
    from nullatlas.lookup import csrtest
    from nullatlas.lookup.cli import main
    from nullatlas.lookup.inference import montecarlo

    w = windows.Rectangle(0, 0, 1, 1)
    pts = w.sample(300, np.random.default_rng(5))
    stats = ["total0", "nnmean"]
    monkeypatch.setattr(csrtest, "fallback_seconds", lambda *a: (7200.0, False, None))
    real, simulated = montecarlo.simulate_null, []
    monkeypatch.setattr(montecarlo, "simulate_null",
                        lambda *a, **k: (simulated.append(len(a[3])), real(*a, **k))[1])
    notes = []
    # 'bbox' (estimated from the data): no instant answer is trusted
    capped = csr_test(pts, "bbox", stats, n_sims=19, seed=1, fallback_budget=600,
                      notify=notes.append)
    assert simulated == [] and notes == []
    for r in capped.results:
        assert not r.trusted and r.method == "asymptotic-normal" and 0 < r.pvalue <= 1
        assert "fallback not run" in r.reason and "2.0 h" in r.reason and "600 s" in r.reason
    assert any("not run" in m and "total0, nnmean" in m for m in capped.warnings)
    ran = csr_test(pts, "bbox", stats, n_sims=19, seed=1, notify=notes.append)   # default
    assert simulated == [19] and [r.method for r in ran.results] == ["mc-rank"] * 2
    assert len(notes) == 1 and "2.0 h" in notes[0] and "--fallback-budget" in notes[0]
    assert all(r.trusted for r in ran.results)
    simulated.clear()
    roomy = csr_test(pts, "bbox", stats, n_sims=19, seed=1, fallback_budget=3 * 3600)
    assert simulated == [19] and [r.pvalue for r in roomy.results] == [r.pvalue for r in ran.results]
    # trusted instant answers: no estimate, no simulation
    monkeypatch.setattr(csrtest, "fallback_seconds", lambda *a: pytest.fail("estimated"))
    simulated.clear()
    known = csr_test(w.sample(2000, np.random.default_rng(6)), w, stats, seed=1,
                     fallback_budget=0)
    assert simulated == [] and all(r.trusted for r in known.results)
    # the command line: the option, the note on stderr, valid JSON
    monkeypatch.setattr(csrtest, "fallback_seconds", lambda *a: (7200.0, False, None))
    f = os.path.join(os.path.dirname(__file__), "..", "examples", "wafer_lot_random.csv")
    args = ["test", f, "-w", "bbox", "--stat", "nnmean", "--sims", "19", "--seed", "2", "--json"]
    assert main(args + ["--fallback-budget", "60"]) == 0
    out = capsys.readouterr()
    d = json.loads(out.out)
    assert d["results"][0]["trusted"] is False and "fallback not run" in d["results"][0]["reason"]
    assert main(args) == 0
    out = capsys.readouterr()
    assert json.loads(out.out)["results"][0]["method"] == "mc-rank"
    assert "note:" in out.err and "2.0 h" in out.err
    assert main(args + ["--fallback-budget", "-1"]) == 2
    assert "--fallback-budget" in capsys.readouterr().err


def test_fallback_estimate_keeps_its_replicate_and_the_lower_bound_simulates_nothing(monkeypatch):
    """The estimate times the first null replicate and keeps it: the fallback
    equals --method mc with the same seed (for any --jobs); a budget below the
    per-point lower bound is decided without simulating anything."""
    from nullatlas.lookup import csrtest
    from nullatlas.lookup.inference import montecarlo

    w = windows.Rectangle(0, 0, 1, 1)
    pts = w.sample(200, np.random.default_rng(8))
    mc = csr_test(pts, "bbox", ["nnmean", "euler"], method="mc", n_sims=19, seed=4)
    for jobs in (1, 2):
        auto = csr_test(pts, "bbox", ["nnmean", "euler"], n_sims=19, seed=4, jobs=jobs,
                        fallback_budget=1e9)
        assert [r.pvalue for r in auto.results] == [r.pvalue for r in mc.results]
        np.testing.assert_array_equal([r.null_mean for r in auto.results],
                                      [r.null_mean for r in mc.results])
    monkeypatch.setattr(montecarlo, "_chunk", lambda *a, **k: pytest.fail("simulated"))
    plan = csrtest.plan_fallback(w, 10_000, resolve_stats(["nnmean"], 2),
                                 np.random.SeedSequence(1).spawn(999), 1, "fast", None, 1.0)
    assert plan.skip and plan.lower_bound and plan.first is None and plan.seconds > 1.0


def test_each_cause_is_printed_once_with_its_statistics(tmp_path):
    """Issue 14: a cause shared by several statistics (too few replicates in
    the table) is one warning and one 'untrusted' line naming them all."""
    import io

    from nullatlas.calibrate import build, shapes
    from nullatlas.lookup import cli as lcli
    out = tmp_path / "few.h5"
    build.build_table(str(out), [("disk", shapes.shape_window("disk"))], [300, 600], 60,
                      stats=["nnmean", "total0"], root_seed=5, progress=False, n_fit=10)
    w = windows.Disk(5, 5, 2)
    pts = w.sample(300, np.random.default_rng(2))
    kw = dict(tables=[str(out)], use_shipped=False, seed=1)
    r = csr_test(pts, w, ["nnmean", "total0"], method="auto", n_sims=19, **kw)
    few = [m for m in r.warnings if "only 60 replicates" in m]
    assert len(few) == 1 and "nnmean, total0" in few[0]
    assert sum("Monte Carlo used instead" in m for m in r.warnings) == 1
    r = csr_test(pts, w, ["nnmean", "total0"], method="asymptotic", **kw)
    buf = io.StringIO()
    lcli._print_table(r, 0.05, buf)
    lines = [x for x in buf.getvalue().splitlines() if "only 60 replicates" in x]
    assert lines == [x for x in lines if x.startswith("untrusted nnmean, total0: ")]
    assert len(lines) == 1


def test_curve_pvalue_does_not_depend_on_where_the_table_is(tmp_path):
    """The Gaussian vectors of the max |z| null are seeded from the table's
    identity, not its path: a copy of the shipped table elsewhere gives the
    same p-value (it differed by 0.01 when the path was the seed)."""
    import shutil

    from nullatlas.lookup.inference.tablereader import shipped_tables

    copy = tmp_path / "elsewhere.h5"
    shutil.copyfile(shipped_tables()[2], copy)
    w = windows.Rectangle(0, 0, 1, 1)
    pts = w.sample(3000, np.random.default_rng(3))
    a = csr_test(pts, w, stats=["euler"], method="asymptotic")
    b = csr_test(pts, w, stats=["euler"], method="asymptotic", tables=[str(copy)],
                           use_shipped=False)
    assert a.results[0].pvalue == b.results[0].pvalue
