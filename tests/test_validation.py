"""The held-out validation of the model route and the validated range
(calibrate.validate, lookup.asymptotic.verdict), and the extremes'
exceedance model (lookup.nullmoments.extreme_sample)."""
import numpy as np
import pytest

from nullatlas.calibrate.validate import score_cell, validated_range
from nullatlas.lookup.patterns.boundary import MEASURES


def _row(ok, **m):
    r = {k: 0.0 for k in MEASURES}
    r.update(m)
    r.update({"n": m.get("n", 500), "tests": {"two_sided": ok}})
    return r


def test_validated_range_excludes_every_failing_cell():
    rows = [_row(True, boundary_share=0.05, n=20000), _row(True, boundary_share=0.1, n=2000),
            _row(True, boundary_share=0.2, second_order=0.1, n=500),
            _row(False, boundary_share=0.15, second_order=0.4, n=2000),   # sharp tips
            _row(True, boundary_share=0.4, second_order=0.05, n=100),
            _row(False, boundary_share=0.5, second_order=0.05, n=100)]
    r = validated_range(rows, "two_sided")
    box = np.array([r[f"{k}_max"] for k in MEASURES])
    X = np.array([[x[k] for k in MEASURES] for x in rows])
    inside = np.all(X <= box + 1e-12, axis=1)
    ok = np.array([x["tests"]["two_sided"] for x in rows])
    assert not np.any(inside & ~ok)              # no failing cell is trusted
    assert r["passed"] == 4                      # every passing cell kept here
    assert r["second_order_max"] < 0.4 and r["boundary_share_max"] < 0.5
    assert (r["n_lo"], r["n_hi"]) == (100, 20000)


def test_validated_range_when_nothing_passes():
    r = validated_range([_row(False, boundary_share=0.1)], "two_sided")
    assert r["passed"] == 0 and r["boundary_share_max"] < 0


def test_score_cell_flags_a_biased_prediction(monkeypatch):
    from nullatlas.calibrate import validate as V
    from nullatlas.lookup.inference.nullmoments import NullMoments
    from nullatlas.lookup.patterns.windows import Rectangle

    # the "table set" argument carries the predicted mean; sd 1
    def fake(tset, window, n, stat):
        return NullMoments(stat, "scalar", np.array([tset]), np.array([[1.0]]), None, None,
                           "model", [], None, {}, (4, 4), (50, 100000))

    monkeypatch.setattr(V, "null_moments", fake)
    rng = np.random.default_rng(0)
    raw = {"total0": rng.standard_normal(4000)}
    good = score_cell(0.0, Rectangle(0, 0, 1, 1), 500, raw, ["total0"])[0]
    assert good["passed"] and abs(good["size"] - 0.05) < 0.015
    bad = score_cell(0.3, Rectangle(0, 0, 1, 1), 500, raw, ["total0"])[0]   # bias 0.3 sd
    assert not bad["passed"] and bad["mean_err_sd"] == pytest.approx(-0.3, abs=0.05)
    assert bad["tests"]["lower"] is False        # the lower tail is too heavy (0.04)


def test_extreme_sample_inverts_a_gumbel_exceedance_model():
    # F(x) = exp(-(n a(x))) with a(x) = exp(-x) / n0: the maximum of n/n0
    # standard Gumbel variables, location log(n / n0) (Gumbel max-stability)
    from nullatlas.lookup.inference.nullmoments import extreme_sample

    x = np.linspace(-2, 8, 200)
    n0 = 100.0
    coef = np.column_stack([np.exp(-x) / n0, np.zeros_like(x), np.zeros_like(x)])
    for n in (100, 1000, 100000):
        v = extreme_sample(x, coef, n, 0.0, m=4000)
        loc = np.log(n / n0)
        assert np.median(v) == pytest.approx(loc - np.log(np.log(2)), abs=0.02)
        assert np.mean(v) == pytest.approx(loc + 0.5772, abs=0.03)    # Euler-Mascheroni
        assert np.all(np.diff(v) >= 0)


def _nm_model(trust):
    from nullatlas.lookup.inference.nullmoments import NullMoments
    nm = NullMoments("total0", "scalar", np.array([0.3]), np.array([[1e-4]]), None, None,
                     "model", [], None, {"two_sided": 50, "lower": 50, "upper": 50},
                     (3.5, 7.0), (50, 100000), replicates=2000)
    nm.extra["trust"] = trust
    return nm


def test_verdict_trusts_the_model_only_inside_the_validated_range():
    import shapely

    from nullatlas.lookup.inference.asymptotic import verdict
    from nullatlas.lookup.patterns.windows import PolygonWindow, Rectangle
    from nullatlas.lookup.summaries.statistics import STATISTICS

    st = STATISTICS["total0"]
    rng = {"boundary_share_max": 0.3, "second_order_max": 0.5, "narrow_share_max": 0.05,
           "holes_max": 0.0, "hull_deficit_max": 0.3, "kappa_excess_max": 0.1,
           "n_lo": 100, "n_hi": 20000, "cells": 20, "passed": 12, "failed": 3}
    nm = _nm_model({"two_sided": rng})
    sq = Rectangle(0, 0, 2, 1)
    ok, why = verdict(nm, st, 2000, sq, "two-sided")
    assert ok and not why
    ok, why = verdict(nm, st, 60, sq, "two-sided")              # below the validated n
    assert not ok and any("validated" in w and "100..20000" in w for w in why)
    ok, why = verdict(nm, st, 50000, sq, "two-sided")           # beyond it: not measured
    assert not ok and any("100..20000" in w for w in why)
    holed = PolygonWindow(shapely.box(0, 0, 4, 4).difference(shapely.box(1, 1, 2, 2)))
    ok, why = verdict(nm, st, 5000, holed, "two-sided")
    assert not ok and any("hole" in w for w in why)
    thin = Rectangle(0, 0, 40, 1)                                # kappa 6.6 but a thin strip
    ok, why = verdict(nm, st, 200, thin, "two-sided")
    assert not ok and any("narrower" in w or "boundary" in w for w in why)
    nm_none = _nm_model(None)
    ok, why = verdict(nm_none, st, 2000, sq, "two-sided")
    assert not ok and any("not validated" in w for w in why)


def test_validate_command_scores_a_table_and_draws_it(tmp_path, capsys):
    """End to end on a copy of the shipped 2D table: held-out patterns of the
    L-shaped window (few, to be quick), scores and validated range written
    into the table, JSON and figure; a bad window name is one line, status 2."""
    import json
    import shutil

    from nullatlas.calibrate.cli import main
    from nullatlas.calibrate.heldout import simulate_heldout
    from nullatlas.lookup.inference.tablereader import open_table, shipped_tables

    table = tmp_path / "t.h5"
    shutil.copyfile(shipped_tables()[2], table)
    folder = tmp_path / "held"
    for n in (100, 500):
        simulate_heldout(str(folder), "L", n, 120, stats=["euler", "total0"])
    fig = tmp_path / "v.png"
    assert main(["validate", str(table), "--heldout", str(folder), "--window", "L",
                 "--no-refit", "--plot", str(fig), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    rows = out["rows"]
    assert {(r["n"], r["statistic"]) for r in rows} == {(100, "euler"), (100, "total0"),
                                                        (500, "euler"), (500, "total0")}
    assert all(r["route"] == "model" and r["m"] == 120 for r in rows)
    assert fig.exists() and fig.stat().st_size > 10_000
    info = open_table(str(table))
    assert set(info.trust) == {"euler", "total0"}
    assert info.trust["euler"]["maxabs"]["n_lo"] == 100
    # the text report names each row's statistic (it once asked for a key
    # the rows do not have, a traceback)
    assert main(["validate", str(table), "--heldout", str(folder), "--window", "L",
                 "--no-refit"]) == 0
    text = capsys.readouterr().out
    assert any(line.split()[:3] == ["L", "500", "total0"] for line in text.splitlines()), text
    assert main(["validate", str(table), "--heldout", str(folder), "--window", "nosuch"]) == 2
    assert "unknown held-out window" in capsys.readouterr().err



def test_heldout_cell_extends_to_more_patterns_with_the_same_seeds(tmp_path):
    # pattern i has seed child i: extending a cell from 3 to 5 patterns gives
    # exactly the 5 patterns simulated at once (so adding patterns to every
    # cell never re-draws the ones already scored)
    from nullatlas.calibrate.heldout import load_heldout, simulate_heldout

    simulate_heldout(str(tmp_path / "a"), "box11h", 100, 5)
    simulate_heldout(str(tmp_path / "b"), "box11h", 100, 3)
    part = load_heldout(str(tmp_path / "b"), "box11h", 100)
    simulate_heldout(str(tmp_path / "b"), "box11h", 100, 5)
    a = load_heldout(str(tmp_path / "a"), "box11h", 100)
    b = load_heldout(str(tmp_path / "b"), "box11h", 100)
    assert part["_reps"] == 3 and a["_reps"] == b["_reps"] == 5
    for k in ("euler", "total1", "maxpers2"):
        assert a[k].shape[0] == 5
        np.testing.assert_array_equal(a[k], b[k])
        np.testing.assert_array_equal(a[k][:3], part[k])
    assert not np.array_equal(a["total1"][:1], a["total1"][1:2])    # distinct patterns


def test_an_unvalidated_table_is_one_cause_for_every_statistic():
    """Issue 14: a table whose model route was never validated gives the same
    reason for every statistic, so that it is printed once with their list."""
    from nullatlas.lookup.inference.asymptotic import verdict
    from nullatlas.lookup.patterns.windows import Rectangle
    from nullatlas.lookup.summaries.statistics import STATISTICS

    sq = Rectangle(0, 0, 2, 1)
    nm = _nm_model(None)
    nm.table = "/x/mine.h5"
    _, a = verdict(nm, STATISTICS["total0"], 2000, sq, "two-sided")
    _, b = verdict(nm, STATISTICS["nnmean"], 2000, sq, "two-sided")
    assert a == b == ["the model route of mine.h5 was not validated on held-out windows "
                      "(run 'nullatlas-calibrate validate' on it)"]
