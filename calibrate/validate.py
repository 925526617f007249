"""Scoring the instant answers on held-out windows, and the validated range.

For every held-out cell (window, n) simulated by ``calibrate.heldout`` and
every statistic, the stored CSR statistics are standardised exactly as the
runtime does (``lookup.nullmoments.null_moments`` on the table being
validated; the same z-tests, Gumbel-tail extremes and max |z| curve tests as
``lookup.asymptotic``), and scored:

* ``mean_err_sd``: (mean of the simulated statistic - predicted mean) / its
  sd, the bias a z-test feels (curves: the root mean square over the usable
  grid points less the simulation noise of the means, sqrt(max(0,
  mean(err^2) - 1/m)); the largest pointwise error, mostly noise over 60
  grid points, is ``max_err_sd``); ``sd_ratio``: simulated sd / predicted
  sd (median over the grid for curves);
* ``size``: rejection rate of the two-sided test at 0.05 (curves: the
  global max |z| test; extremes: upper tail at 0.05 as well);
* ``lower``, ``upper``: each tail at 0.025 (scalars: z below -1.96 / above
  1.96).

A cell passes when |mean_err_sd| <= 0.1 (a bias of 0.1 sd moves a
two-sided size at 0.05 by about 0.001), and the size lies within 0.05 +- 0.01
and each tail within 0.025 +- 0.007.  Scalars are judged twice: (a) as
implied by the measured bias and sd ratio under normality (these moments
are estimated to about 0.03 sd, far more precisely than a rejection rate),
and (b) as observed, widened by two binomial standard errors of the m
patterns, a guard against a null that is not normal.  Curves (the max |z|
test) and extremes (the Gumbel-tail test) have no such moment summary:
their observed rate must lie within the tolerance widened by one binomial
SE (with m = 1,000 a rate is known to +-0.007, with the 2,000 of the
shipped held-out cells to +-0.005: a test of exact size 0.05 fails a bare
+-0.01 band in 15% or 5% of checks, and one false failure removes a whole
region from the validated range).

The validated range of a statistic and test (:func:`validated_range`):
upper bounds on the boundary share (share of the window within one mean
spacing of the boundary), the second-order share (|B2| sqrt(n): corners,
tips, curvature), the narrow share (share in parts narrower than
``lookup.patterns.boundary.NARROW_WIDTH`` mean spacings), the number of holes and
the hull deficit (concavities) and the kappa excess (outside the training
shapes' kappa range), such that no failing cell lies inside,
chosen by a beam search to hold as many passing cells as possible, and the n range
of the held-out cells.  The runtime trusts the model route only
inside it (``lookup.asymptotic.verdict``).
"""
from __future__ import annotations

import math

import numpy as np

from nullatlas.lookup.inference.asymptotic import _curve_null, _gumbel, test_key
from nullatlas.lookup.inference.globaltests import maxabs_pvalue
from nullatlas.lookup.inference.nullmoments import null_moments
from nullatlas.lookup.patterns.boundary import MEASURES, trust_measures
from nullatlas.lookup.summaries.statistics import STATISTICS

from .heldout import HELDOUT, heldout_ns, heldout_window, load_heldout

__all__ = ["score_cell", "validated_range", "validate_tables", "MEAN_TOL_SD", "SIZE_TOL",
           "TAIL_TOL"]

MEAN_TOL_SD = 0.1
SIZE_TOL = 0.01
TAIL_TOL = 0.007
_Z = 1.959964


def _se(p: float, m: int) -> float:
    return math.sqrt(p * (1 - p) / max(m, 1))


def _ok(rate, target, tol, m, k=1.0):
    return bool(np.isfinite(rate) and abs(rate - target) <= tol + k * _se(target, m))


def _implied_tails(bias: float, ratio: float) -> tuple[float, float]:
    """Tails at 0.025 of a z-test whose statistic is normal with mean
    ``bias`` and sd ``ratio`` (in units of the predicted sd)."""
    from scipy.special import ndtr

    return float(ndtr((-_Z - bias) / ratio)), float(ndtr((bias - _Z) / ratio))


def score_cell(tset, window, n: int, raw: dict, stats) -> list[dict]:
    """Scores of each statistic in ``stats`` on one held-out cell (see the
    module doc); ``raw`` maps statistic names to the (m,) or (m, k) values."""
    rows = []
    for name in stats:
        if name not in raw:
            continue
        st = STATISTICS[name]
        nm = null_moments(tset, window, n, name)
        if nm is None:
            continue
        v = np.asarray(raw[name], float)
        row = {"statistic": name, "kind": st.kind, "n": int(n), "route": nm.route}
        meas = trust_measures(window, n, nm.kappa_range, nm.extra.get("periodic_n_range"))
        row.update({k: meas[k] for k in MEASURES})
        if st.kind == "curve":
            sd = nm.sd
            use = np.asarray(nm.usable, bool) if nm.usable is not None else np.zeros(len(sd), bool)
            use &= sd > 0
            ok = np.all(np.isfinite(v[:, use]), axis=1) if use.any() else np.zeros(len(v), bool)
            m = int(ok.sum())
            if not use.any() or m < 50:
                continue
            z = (v[ok][:, use] - nm.mean[use]) / sd[use]
            null, _ = _curve_null(nm, n, use, 10_000)
            p = maxabs_pvalue(np.max(np.abs(z), axis=1), null)
            emp_sd = v[ok][:, use].std(axis=0, ddof=1)
            err = (v[ok][:, use].mean(axis=0) - nm.mean[use]) / emp_sd
            size = float(np.mean(p <= 0.05))
            j = int(np.argmax(np.abs(err)))
            # systematic bias over the grid: the RMS error less the simulation
            # noise of the m-pattern means (variance 1/m in sd units); the
            # largest pointwise error of 60 noisy means is mostly noise
            rms = float(np.sqrt(max(0.0, float(np.mean(err ** 2)) - 1.0 / m)))
            row.update({"m": m, "mean_err_sd": rms, "max_err_sd": float(err[j]),
                        "sd_ratio": float(np.median(emp_sd / sd[use])), "size": size,
                        "grid_points": int(use.sum())})
            row["passed"] = bool(rms <= MEAN_TOL_SD and _ok(size, 0.05, SIZE_TOL, m))
            row["tests"] = {test_key("curve", "two-sided"): row["passed"]}
        else:
            x = v.reshape(len(v), -1)[:, 0]
            x = x[np.isfinite(x)]
            m = len(x)
            if m < 50:
                continue
            mu, sd = float(nm.mean[0]), float(nm.sd[0])
            emp_sd = float(x.std(ddof=1))
            err = (x.mean() - mu) / emp_sd if emp_sd > 0 else float("nan")
            row.update({"m": m, "mean_err_sd": float(err),
                        "sd_ratio": float(emp_sd / sd) if sd > 0 else float("nan")})
            if st.kind == "extreme":
                tail = _gumbel(nm, n)
                up = np.asarray(tail.pvalue(x), float)
                low = (np.searchsorted(tail.values, x, side="right") + 1.0) / (tail.m + 1.0)
                size = float(np.mean(np.minimum(1.0, 2 * np.minimum(up, low)) <= 0.05))
                upper05 = float(np.mean(up <= 0.05))
                row.update({"size": size, "upper": float(np.mean(up <= 0.025)),
                            "lower": float(np.mean(low <= 0.025)), "upper_05": upper05})
                good_up = abs(err) <= MEAN_TOL_SD and _ok(upper05, 0.05, SIZE_TOL, m)
                good_two = good_up and _ok(size, 0.05, SIZE_TOL, m)
                row["passed"] = bool(good_two)
                row["tests"] = {"upper": bool(good_up)}
            else:
                z = (x - mu) / sd
                size = float(np.mean(np.abs(z) > _Z))
                lo_r, up_r = float(np.mean(z < -_Z)), float(np.mean(z > _Z))
                row.update({"size": size, "lower": lo_r, "upper": up_r})
                # implied by the measured bias and sd ratio (precise: SE of
                # about 0.03 sd each) and, against a shape that is not normal,
                # the rates themselves within tolerance + 2 binomial SE
                il, iu = _implied_tails(float(err) * row["sd_ratio"], row["sd_ratio"])
                row.update({"implied_lower": il, "implied_upper": iu})
                bias_ok = abs(err) <= MEAN_TOL_SD
                lo_ok = _ok(lo_r, 0.025, TAIL_TOL, m, 2) and abs(il - 0.025) <= TAIL_TOL
                up_ok = _ok(up_r, 0.025, TAIL_TOL, m, 2) and abs(iu - 0.025) <= TAIL_TOL
                two_ok = _ok(size, 0.05, SIZE_TOL, m, 2) and abs(il + iu - 0.05) <= SIZE_TOL
                row["passed"] = bool(bias_ok and lo_ok and up_ok and two_ok)
                row["tests"] = {"two_sided": bool(bias_ok and lo_ok and up_ok and two_ok),
                                "lower": bool(bias_ok and lo_ok), "upper": bool(bias_ok and up_ok)}
        rows.append(row)
    return rows


#: Boxes kept at each step of the search of :func:`_search_box`.
BEAM = 24


def _search_box(X: np.ndarray, ok: np.ndarray):
    """The box {x <= b} holding the most passing rows of ``X`` and no failing
    one (beam search): start from the box of all passing rows; while a
    failing row lies inside, lower one bound to the largest passing value
    below that row's, keeping the BEAM boxes that hold the most passing rows
    at each step.  Returns (bounds, number of passing rows inside); bounds
    of -1 where no passing row can be kept."""
    if not ok.any():
        return np.full(X.shape[1], -1.0), 0

    def kept(b):
        return int(np.sum(np.all(X[ok] <= b + 1e-12, axis=1)))

    beam = [X[ok].max(axis=0)]
    best = (-1, None)
    while beam:
        nxt = {}
        for box in beam:
            inside = np.all(X <= box + 1e-12, axis=1)
            bad = np.flatnonzero(inside & ~ok)
            if bad.size == 0:
                k = kept(box)
                if k > best[0]:
                    best = (k, box)
                continue
            f = bad[0]
            for j in range(X.shape[1]):
                below = X[ok & inside & (X[:, j] < X[f, j] - 1e-12), j]
                cand = box.copy()
                cand[j] = below.max() if below.size else -1.0
                nxt[tuple(np.round(cand, 12))] = cand
        ranked = sorted(nxt.values(), key=kept, reverse=True)
        beam = [b for b in ranked[:BEAM] if kept(b) > best[0]]
    return best[1], best[0]


def validated_range(rows: list[dict], test: str) -> dict:
    """The validated range of one statistic's ``test`` from its scored
    held-out cells: upper bounds on the trust measures
    (``lookup.patterns.boundary.MEASURES``) such that no failing cell lies
    inside the box they span, holding as many passing cells as the search of
    :func:`_search_box` finds.  Also the n range of the held-out cells."""
    pts = [r for r in rows if test in r.get("tests", {})]
    if not pts:
        return {}
    X = np.array([[r[k] for k in MEASURES] for r in pts], float)
    ok = np.array([bool(r["tests"][test]) for r in pts])
    box, passed = _search_box(X, ok)
    ns = [r["n"] for r in pts]
    out = {f"{k}_max": float(v) for k, v in zip(MEASURES, box)}
    out.update({"n_lo": int(min(ns)), "n_hi": int(max(ns)), "cells": len(pts),
                "passed": passed, "failed": int(np.sum(~ok))})
    # the largest bias (pattern sd) of a passing cell inside the box at the
    # largest n: the part of the tolerance already used where extrapolation
    # in n starts (``lookup.inference.asymptotic``, beyond n_hi)
    top = [abs(float(r["mean_err_sd"])) for r, good, x in zip(pts, ok, X)
           if good and r["n"] == out["n_hi"] and np.all(x <= box + 1e-12)
           and np.isfinite(r.get("mean_err_sd", np.nan))]
    out["bias_hi"] = max(top) if top else None
    return out


def validate_tables(tset, folder: str, dimension: int, names=None, ns=None) -> dict:
    """Score every stored held-out cell of ``dimension`` against the tables
    ``tset`` and derive the validated ranges.

    Returns
    -------
    dict with ``rows`` (one per window, n and statistic) and ``trust``
    (statistic -> test -> range of :func:`validated_range`).
    """
    from .plan import DEFAULT_STATS

    rows = []
    for name, (d, _, _) in HELDOUT.items():
        if d != dimension or (names and name not in names):
            continue
        try:
            w = heldout_window(name)
        except (ImportError, AttributeError):     # window kind not available here
            continue
        for n in (ns or heldout_ns(name)):
            raw = load_heldout(folder, name, n)
            if raw is None:
                continue
            for r in score_cell(tset, w, n, raw, DEFAULT_STATS[d]):
                r["window"] = name
                rows.append(r)
    trust = {}
    for stat in DEFAULT_STATS[dimension]:
        mine = [r for r in rows if r["statistic"] == stat and r["route"] == "model"]
        tests = sorted({k for r in mine for k in r.get("tests", {})})
        per = {t: validated_range(mine, t) for t in tests}
        per = {k: v for k, v in per.items() if v}
        if per:
            trust[stat] = per
    return {"rows": rows, "trust": trust}


def plot_validation(rows: list[dict], trust: dict, stats: list[str], path: str,
                    title: str = "") -> str:
    """Size at 0.05 of the instant test against n on every held-out window,
    one panel per statistic: filled markers where the window at that n lies
    inside the validated range (trusted), open markers outside it, a cross
    where the cell failed its check; the grey band is 0.05 +- 0.01."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from nullatlas.lookup.patterns.boundary import MEASURES
    from nullatlas.lookup.plots import save_figure

    def inside(r, rng):
        if not rng or not rng.get("passed") or not rng["n_lo"] <= r["n"] <= rng["n_hi"]:
            return False
        return all(r[k] <= rng[f"{k}_max"] + 1e-12 for k in MEASURES)

    rows = [r for r in rows if r["route"] == "model" and r["statistic"] in stats]
    windows = list(dict.fromkeys(r["window"] for r in rows))
    cmap = plt.get_cmap("tab10")
    colour = {w: cmap(i % 10) for i, w in enumerate(windows)}
    ncol = min(3, len(stats))
    nrow = -(-len(stats) // ncol)
    fig, axes = plt.subplots(nrow, ncol, figsize=(4.3 * ncol, 3.3 * nrow + 0.9), squeeze=False)
    for ax, s in zip(axes.ravel(), stats):
        ax.axhspan(0.04, 0.06, color="0.88", zorder=0)
        ax.axhline(0.05, color="k", lw=0.7, zorder=1)
        top = 0.12
        for w in windows:
            mine = sorted((r for r in rows if r["window"] == w and r["statistic"] == s),
                          key=lambda r: r["n"])
            if not mine:
                continue
            test = "two_sided" if mine[0]["kind"] == "scalar" else next(iter(mine[0]["tests"]))
            rng = trust.get(s, {}).get(test)
            xs = [r["n"] for r in mine]
            ys = [min(r.get("upper_05", r["size"]) if r["kind"] == "extreme" else r["size"], top)
                  for r in mine]
            ax.plot(xs, ys, "-", color=colour[w], lw=0.8, alpha=0.6)
            for r, x, y in zip(mine, xs, ys):
                ok = r["tests"].get(test, False)
                face = colour[w] if inside(r, rng) else "white"
                ax.plot([x], [y], "o" if ok else "X", ms=6 if ok else 7, mfc=face,
                        mec=colour[w], mew=1.2, zorder=3)
        ax.set_xscale("log")
        ax.set_ylim(0.0, top + 0.005)
        kind = STATISTICS[s].kind if s in STATISTICS else "scalar"
        label = {"extreme": "upper tail at 0.05", "curve": "max |z| test"}.get(kind, "two-sided")
        ax.set_title(f"{s} ({label})", fontsize=10)
        ax.set_xlabel("n")
        ax.set_ylabel("size at 0.05 (capped at 0.12)")
    for ax in axes.ravel()[len(stats):]:
        ax.set_visible(False)
    from matplotlib.lines import Line2D
    handles = [Line2D([], [], color=colour[w], marker="o", lw=0.8, label=w) for w in windows]
    handles += [Line2D([], [], color="0.3", marker="o", lw=0, mfc="0.3", label="trusted"),
                Line2D([], [], color="0.3", marker="o", lw=0, mfc="white", label="not trusted"),
                Line2D([], [], color="0.3", marker="X", lw=0, label="failed its check")]
    fig.legend(handles=handles, loc="lower center", ncol=min(6, len(handles)), fontsize=8,
               frameon=False)
    fig.suptitle(title or "instant test on held-out windows (band: 0.05 +- 0.01; a cell also fails "
                 "when its mean is off by more than 0.1 sd)", fontsize=11)
    fig.tight_layout(rect=(0, 0.04 + 0.025 * (len(handles) // 6), 1, 0.97))
    return save_figure(fig, path)
