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
