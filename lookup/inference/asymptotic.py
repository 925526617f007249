"""Instant tests from the null tables, and the trust verdict.

For an observed summary S with tabled null mean m and covariance C
(``lookup.inference.nullmoments``):

* additive scalars: z = (S - m) / sd, p from N(0, 1) (``scipy.stats.norm``):
  two-sided 2 P(Z > |z|), or one-sided towards the direction the statistic
  moves under the chosen alternative;
* extremes: the tabled empirical null with a Gumbel tail
  (``lookup.inference.extremes``), never a normal approximation; the lower tail is the
  empirical rank p-value, two-sided is twice the smaller tail;
* curves: z_j over the usable grid points; the primary p-value is that of
  max_j |z_j| under the Gaussian limit N(0, R), R the tabled correlation,
  by simulating ``n_gauss`` Gaussian vectors (the Monte Carlo route tests the
  same studentised maximum, ``lookup.inference.ranks.maxabs_test``).  Beyond
  every simulated maximum the p-value is reported as an upper bound: the
  smaller of Sidak's bound (``globaltests.sidak_bound``) and 3/N, the 95 %
  upper confidence limit of a probability when none of N draws exceeded
  (the "rule of three": Hanley & Lippman-Hand, JAMA 249, 1983).  Their seed is derived from
  the null moments used (table, cells, statistic, n, grid points), so the
  p-value is a function of the data and the table alone (not of ``--seed``),
  and the simulated null is cached per process; the regularised
  Mahalanobis chi-square p-value is reported beside it
  (``lookup.inference.globaltests``).

Trust verdict (:func:`verdict`): a result is untrusted when there is no
table for the dimension or statistic, n is below the audited n_min of the
test (or no calibrated n passed the audit), the table's cells have too few
replicates for their mean or their audit to hold the size
(:func:`replicate_reasons`), the answer comes from the
finite-window model (a window that is not a calibrated shape, or n beyond
the shape's cells) outside the range where the model was validated on
held-out windows (n, share of the window near its boundary, share in
narrow parts), the window was estimated from the data, a curve has no
usable grid point, or more than 1 % of the points were duplicates dropped
or jittered.
"""
from __future__ import annotations

import zlib

import numpy as np

from ..results import P_FLOOR, StatResult
from . import globaltests as gt
from .extremes import GumbelTail
from .nullmoments import NullMoments

__all__ = ["P_FLOOR", "N_GAUSS", "DUPLICATE_LIMIT", "test_key", "verdict", "instant_moments",
           "asymptotic_result"]

#: Gaussian vectors simulated for the max |z| p-value of a curve.
N_GAUSS = 10_000
#: Fraction of handled duplicate points above which no asymptotic answer is trusted.
DUPLICATE_LIMIT = 0.01
#: Largest error of the size of a 0.05 test that a trusted answer may carry.
SIZE_TOLERANCE = 0.01
#: Level at which the replicate rule (:func:`replicate_reasons`) is judged.
SIZE_LEVEL = 0.05


def replicate_reasons(replicates: int, alpha: float = SIZE_LEVEL,
                      tol: float = SIZE_TOLERANCE) -> list:
    """Reasons against trusting moments estimated from ``replicates`` patterns.

    Two Monte Carlo errors of a table limit what it can promise:

    1. The tabled mean has standard error 1/sqrt(R) pattern sd.  A mean off
       by e pattern sd moves the size of a one-sided test at level alpha by
       about phi(z_(1-alpha)) |e| (0.103 |e| at 0.05, the steepest case: a
       two-sided test moves only to second order).  Within its 95 % bound,
       |e| <= 2/sqrt(R), the shift must stay within ``tol``:
       2 phi(z_(1-alpha)) / sqrt(R) <= tol, i.e. R >= 425 at 0.05 and 0.01.
    2. The audit that set n_min estimated the size from the same R patterns,
       with binomial standard error sqrt(alpha (1 - alpha) / R); when that
       exceeds ``tol`` the audit could not tell a size of alpha from one of
       alpha + tol even at one standard error, so it has not checked the
       size: R >= 475 at 0.05 and 0.01.

    Tables of 500 or more replicates per cell (the shipped ones) pass both;
    a table of 200 does not.

    Parameters
    ----------
    replicates : int
        Replicates behind the moments (smallest over the cells used).
    alpha, tol : float
        Level and tolerance of the size.

    Returns
    -------
    list of str
        Empty when the replicates suffice.
    """
    from .tails import norm

    r = max(int(replicates), 1)
    out = []
    shift = 2 * float(norm.pdf(norm.isf(alpha))) / np.sqrt(r)
    if shift > tol:
        out.append(f"the table's cells have only {r} replicates: the standard error of the "
                   f"tabled mean ({1 / np.sqrt(r):.3g} pattern sd) could shift the size of a "
                   f"{alpha:g} test by up to {shift:.4f} (95% bound; tolerance {tol:g})")
    se = float(np.sqrt(alpha * (1 - alpha) / r))
    if se > tol:
        out.append(f"the audit of {r} replicates has a binomial standard error of {se:.4f} at "
                   f"size {alpha:g}, more than the tolerance {tol:g}: it cannot have checked the "
                   "size")
    return out


def test_key(kind: str, alternative: str, curve_test: str = "maxabs") -> str:
    """Which audited test (n_min key) a run uses."""
    if kind == "curve":
        return curve_test
    if kind == "extreme":
        return "upper"
    return {"two-sided": "two_sided", "greater": "upper", "less": "lower"}[alternative]


def _pct(v: float) -> str:
    """A share in per cent, with enough digits for small ones."""
    v = max(float(v), 0.0)
    return f"{v:.1%}" if v == 0.0 or v >= 0.01 else f"{v:.2%}" if v >= 0.0001 else f"{v:.1e}"


#: Largest n ever trusted (the range asked of the tiled path: 10^9 points).
#: Beyond it nothing (the limit, the Gaussian approximation, sums of 10^9
#: terms in double precision) was examined.
N_TRUST_MAX = 10 ** 9
#: The bias (pattern sd) allowed to the model's mean: the tolerance of the
#: held-out validation (``calibrate.validate.MEAN_TOL_SD``; a bias of 0.1 sd
#: moves a two-sided size at 0.05 by about 0.001).
EXTRAPOLATION_TOL_SD = 0.1


def extrapolation_limit(growth, n_hi: int, bias_hi) -> int:
    """The largest n to which a model validated up to ``n_hi`` is trusted.

    Beyond the held-out windows' largest n the terms of the model's error
    that come from the boundary vanish or stay constant in units of the
    pattern sd (B1 sqrt(n) is constant in 2D, B2 and B3 decay), and were
    measured at ``n_hi``: at most ``bias_hi`` sd.  The one part that grows
    is the error of the limit mu, as ``growth * sqrt(n)``
    (:func:`~nullatlas.lookup.inference.nullmoments.limit_growth`), so the
    bias at n is at most ``bias_hi + growth (sqrt(n) - sqrt(n_hi))``, and
    the model is trusted while that stays within
    :data:`EXTRAPOLATION_TOL_SD`:

        sqrt(n_max) = sqrt(n_hi) + (EXTRAPOLATION_TOL_SD - bias_hi) / growth,

    capped at :data:`N_TRUST_MAX` (reached where the limit is exact and held
    fixed: growth 0).  A table without ``bias_hi`` or ``growth`` (older
    tables) is trusted up to ``n_hi`` only.

    Examples
    --------
    >>> from nullatlas.lookup.inference.asymptotic import extrapolation_limit
    >>> extrapolation_limit(0.0, 20_000, 0.03)          # exact limit
    1000000000
    >>> extrapolation_limit(8e-5, 20_000, 0.03)         # a fitted limit
    1033112
    >>> extrapolation_limit(None, 20_000, 0.03)         # no standard errors stored
    20000
    """
    if growth is None or bias_hi is None:
        return int(n_hi)
    room = EXTRAPOLATION_TOL_SD - float(bias_hi)
    if room <= 0:
        return int(n_hi)
    if growth <= 0:
        return N_TRUST_MAX
    top = (np.sqrt(n_hi) + room / float(growth)) ** 2
    return int(min(N_TRUST_MAX, np.floor(top)))


def _beyond_reason(stat, n: int, lo: int, hi: int, top: int) -> str:
    if top >= N_TRUST_MAX:
        return (f"n = {n:,} is beyond {N_TRUST_MAX:,}, the largest n the instant test is "
                "trusted at")
    if top <= hi:
        return (f"n = {n} is outside the n where the model of '{stat.name}' was validated on "
                f"held-out windows ({lo}..{hi}), and the table holds no measure of its "
                "extrapolation error")
    return (f"n = {n:,} is beyond {top:,}, where the uncertainty of the model's n -> infinity "
            f"limit of '{stat.name}' could bias the test by more than "
            f"{EXTRAPOLATION_TOL_SD:g} sd (validated on held-out windows up to n = {hi:,}; "
            "the table's model fits this limit rather than holding an exact one fixed)")


def _model_trust(nm: NullMoments, stat, n: int, window, key: str) -> list:
    """Reasons against a model-route answer: the window at this n must lie
    inside the range where the table's validation on held-out windows
    measured the model to hold (``calibrate.validate``)."""
    from ..patterns.boundary import NARROW_WIDTH, trust_measures

    if nm.route == "nearest-shape":
        return [nm.approximate or f"no model for '{stat.name}' in this table"]
    if nm.route == "kappa-model":
        return [f"the table ({nm.table}) predates the validated geometric model (schema "
                f"version {nm.extra.get('schema_version', 1)}); rebuild it or use the shipped "
                "tables"]
    if not nm.extra.get("trust"):       # one cause for every statistic of the table
        return [f"the model route of {_table_name(nm)} was not validated on held-out windows "
                "(run 'nullatlas-calibrate validate' on it)"]
    per = nm.extra["trust"].get(key)
    if not per:
        return [f"the model route of '{stat.name}' ({key} test) was not validated on held-out "
                "windows in this table"]
    if not per.get("passed"):
        return [f"the model route of '{stat.name}' ({key} test) did not hold its size on any "
                "held-out window"]
    m = trust_measures(window, n, nm.kappa_range, nm.extra.get("periodic_n_range"))
    nm.extra["measures"] = m
    out = []
    lo, hi = int(per["n_lo"]), int(per["n_hi"])
    if n < lo:
        out.append(f"n = {n} is below the n where the model of '{stat.name}' was validated on "
                   f"held-out windows ({lo}..{hi})")
    elif n > hi:
        top = extrapolation_limit(nm.extra.get("limit_growth"), hi, per.get("bias_hi"))
        nm.extra["n_extrapolation"] = top
        if n > top:
            out.append(_beyond_reason(stat, n, lo, hi, top))
    if m["narrow_share"] > per["narrow_share_max"] + 1e-12:
        out.append(f"{_pct(m['narrow_share'])} of the window lies in parts narrower than "
                   f"{NARROW_WIDTH:g} mean spacings (validated up to "
                   f"{_pct(per['narrow_share_max'])} for '{stat.name}')")
    if m["second_order"] > per.get("second_order_max", np.inf) + 1e-12:
        out.append(f"the window's corners, tips or curvature are too strong for this n "
                   f"(second-order term |B2| sqrt(n) = {m['second_order']:.3g}; the model of "
                   f"'{stat.name}' was validated up to {per['second_order_max']:.3g})")
    if m["holes"] > per.get("holes_max", np.inf) + 1e-12:
        out.append(f"the window has {int(m['holes'])} hole(s): each is a loop of the union of "
                   f"balls in every pattern, and the model of '{stat.name}' was validated on "
                   f"windows with at most {int(max(per['holes_max'], 0))}")
    if m["hull_deficit"] > per.get("hull_deficit_max", np.inf) + 1e-12:
        out.append(f"the window's concavities ({_pct(m['hull_deficit'])} of its convex hull) "
                   f"are deeper than on the held-out windows where the model of '{stat.name}' "
                   f"held ({_pct(per['hull_deficit_max'])})")
    if m["kappa_excess"] > per.get("kappa_excess_max", np.inf) + 1e-12:
        lo, hi = nm.kappa_range
        out.append(f"the window's kappa {float(window.kappa):.3g} (boundary measure per content, "
                   f"scale-free) is outside the training shapes' range [{lo:.3g}, {hi:.3g}] by "
                   f"more than the model of '{stat.name}' was validated for")
    if m["curved_share"] > per.get("curved_share_max", np.inf) + 1e-12:
        out.append(f"{_pct(m['curved_share'])} of the window's boundary is curved; the model "
                   f"of '{stat.name}' was validated for windows with up to "
                   f"{_pct(per['curved_share_max'])}")
    if m["periodic"] > per.get("periodic_max", np.inf) + 1e-12:
        if per["periodic_max"] < 1.0:
            out.append(f"the route of '{stat.name}' for periodic boxes did not hold on the "
                       "held-out periodic windows")
        else:
            out.append(f"n = {n} lies a factor {m['periodic']:.3g} outside the n of the periodic "
                       f"cells of '{stat.name}'; their extrapolation held on held-out periodic "
                       f"windows up to a factor {per['periodic_max']:.3g}")
    if m["boundary_share"] > per["boundary_share_max"] + 1e-12:
        out.append(f"{_pct(m['boundary_share'])} of the window lies within one mean spacing of "
                   f"its boundary (the model of '{stat.name}' was validated up to "
                   f"{_pct(per['boundary_share_max'])})")
    return out


def verdict(nm: NullMoments | None, stat, n: int, window, alternative: str,
            n_duplicates: int = 0, curve_test: str = "maxabs",
            n_input: int | None = None) -> tuple[bool, list]:
    """(trusted, reasons) of the asymptotic test of ``stat`` (a Statistic).

    A calibrated shape within its cells is trusted from the audited n_min of
    the test; any other window, or n beyond the shape's cells, goes through
    the model and is trusted only where the table's validation on held-out
    windows measured the model to hold: n within the validated range, and
    the window's share within one mean spacing of its boundary and its
    share in narrow parts no larger than on the held-out windows where the
    size held (``lookup.patterns.boundary.trust_measures``)."""
    reasons = []
    if nm is None:
        return False, [f"no null table covers '{stat.name}' in {window.dim}D"]
    if getattr(window, "estimated", False):
        reasons.append("the window was estimated from the data (bbox/hull): the instant "
                       "answers assume a known window")
    key = test_key(nm.kind, alternative, curve_test)
    if nm.route in ("model", "kappa-model", "nearest-shape"):
        reasons += _model_trust(nm, stat, n, window, key)
    if n < nm.n_range[0]:
        reasons.append(f"n = {n} is below the smallest calibrated n ({nm.n_range[0]})")
    nmin = nm.n_min.get(key, "missing")
    where = nm.shape or "every calibrated shape"
    if nmin == "missing":
        reasons.append(f"the table has no audit of the {key} test of '{stat.name}'")
    elif nmin is None:
        reasons.append(f"the asymptotic {key} test of '{stat.name}' did not hold at any "
                       f"calibrated n for {where}")
    elif n < nmin:
        reasons.append(f"n = {n} is below n_min = {nmin} of the {key} test of '{stat.name}' "
                       f"for {where}")
    reasons += replicate_reasons(nm.replicates)
    if nm.kind == "curve" and (nm.usable is None or not np.any(nm.usable)):
        reasons.append(f"no grid point of '{stat.name}' has a near-normal null at this n")
    # one rule for 'drop' and 'jitter': the share of the points read
    if n_duplicates > DUPLICATE_LIMIT * max(n_input or n, 1):
        reasons.append(f"{n_duplicates} duplicate points were dropped or jittered "
                       f"(more than {DUPLICATE_LIMIT:.0%})")
    return (not reasons), reasons


def _table_name(nm: NullMoments) -> str:
    import os

    return os.path.basename(str(nm.table or "")) or "this table"


def instant_moments(tables, window, n: int, stat, alternative: str, n_duplicates: int = 0,
                    curve_test: str = "maxabs", n_input: int | None = None):
    """The null moments of the first table, in order, whose instant answer is trusted.

    A table given by the user comes before the shipped ones; when it cannot
    give a trusted answer (e.g. n beyond its cells, no validated model) and a
    later table can, the later one answers, so that a table of one's own
    never makes the answer worse than the shipped tables would.  When no
    table gives a trusted answer, the first table's answer is kept, with
    its reasons.

    Parameters
    ----------
    tables : TableSet
    window, n, stat, alternative, n_duplicates, curve_test, n_input
        As for :func:`verdict`.

    Returns
    -------
    (NullMoments or None, bool, list of str)
        The moments, whether trusted, and the reasons against them; each
        reason names the table it comes from when several tables were asked,
        and an answer by a later table says why the earlier ones did not give it.
    """
    from .nullmoments import null_moments_each

    tried = []
    for nm in null_moments_each(tables, window, n, stat.name):
        ok, why = verdict(nm, stat, n, window, alternative, n_duplicates, curve_test, n_input)
        if ok:
            if tried:
                nm.extra["passed_over"] = [
                    f"{_table_name(m)} could not give a trusted answer ({'; '.join(w)})"
                    for m, w in tried]
            return nm, True, []
        tried.append((nm, why))
    if not tried:
        return (None,) + verdict(None, stat, n, window, alternative)
    nm, why = tried[0]
    if len(tables.for_dimension(window.dim)) > 1:
        why = [f"{_table_name(nm)}: {w}" for w in why]
    return nm, False, why


_NULL_CACHE: dict = {}


def _cached(key, make):
    hit = _NULL_CACHE.get(key)
    if hit is None:
        if len(_NULL_CACHE) > 512:
            _NULL_CACHE.clear()
        hit = _NULL_CACHE[key] = make()
    return hit


def _table_identity(path) -> str:
    """What identifies a table's content: its creation time and root seed."""
    from .tablereader import open_table_cached

    if not path:
        return ""
    try:
        info = open_table_cached(str(path))
    except (OSError, ValueError):   # not a readable table file (TableError is a ValueError)
        return str(path)
    return f"{info.attrs.get('created', '')}/{info.attrs.get('root_seed', '')}"


def _curve_null(nm: NullMoments, n: int, use: np.ndarray, n_gauss: int, rng=None):
    """(sorted simulated max |z|, Spectral) of a curve's usable grid points."""
    def make(rng=rng):
        corr = gt.correlation(nm.cov[np.ix_(use, use)])
        if rng is None:
            # the table's identity (when it was written, its root seed), not its
            # path: the same table gives the same p-value wherever it is installed
            ident = (_table_identity(nm.table),) + key[1:5] + (use.astype(np.int8).tolist(),)
            rng = np.random.default_rng(zlib.crc32(repr(ident).encode()))
        return gt.maxabs_null(corr, n_gauss, rng), gt.spectral(corr)

    key = (nm.table, tuple(nm.cells), nm.stat, nm.route, int(n), use.tobytes(), int(n_gauss))
    return make() if rng is not None else _cached(key, make)


def _gumbel(nm: NullMoments, n: int) -> GumbelTail:
    return _cached((nm.table, tuple(nm.cells), nm.stat, nm.route, int(n), "gumbel"),
                   lambda: GumbelTail(nm.values))


def _scalar_p(z: float, alternative: str) -> float:
    from .tails import ndtr

    if alternative == "greater":
        return float(ndtr(-z))
    if alternative == "less":
        return float(ndtr(z))
    return float(min(1.0, 2 * ndtr(-abs(z))))


def asymptotic_result(stat, observed, nm: NullMoments, alternative: str, n: int,
                      trusted: bool, reasons: list, primary: bool = False, note: str = "",
                      n_gauss: int = N_GAUSS, rng=None, asked: str | None = None) -> StatResult:
    """The instant test of one statistic (a :class:`StatResult`).

    ``alternative`` is the tail tested ("two-sided", "greater", "less"),
    ``asked`` the alternative the user asked for (default: the same);
    ``rng``: a Generator for the Gaussian vectors instead of the derived seed
    (no caching)."""
    obs = np.asarray(observed, float)
    mean, sd = nm.mean, nm.sd
    bound = False
    details = {"route": nm.route, "cells": list(nm.cells), "table": nm.table,
               "shape": nm.shape, "replicates": nm.replicates, "n_min": nm.n_min}
    if "measures" in nm.extra:      # model route: the window's trust measures at this n
        details["window_measures"] = {k: float(v) for k, v in nm.extra["measures"].items()}
    if "n_extrapolation" in nm.extra:   # beyond the held-out windows' n: how far it holds
        details["n_extrapolation"] = int(nm.extra["n_extrapolation"])
        details["limit"] = nm.extra.get("limit") or "fitted"
    curve = None
    if nm.kind == "curve":
        use = np.asarray(nm.usable, bool) if nm.usable is not None else np.zeros(len(mean), bool)
        use &= np.isfinite(obs) & (sd > 0)
        with np.errstate(invalid="ignore", divide="ignore"):
            z = np.where(sd > 0, (obs - mean) / np.where(sd > 0, sd, 1.0), np.nan)
        if use.any():
            null, sp = _curve_null(nm, n, use, n_gauss, rng)
            t = float(np.max(np.abs(z[use])))
            p = float(gt.maxabs_pvalue(t, null))
            if t > null[-1]:
                # beyond every simulated Gaussian maximum: the simulation only
                # says p < 3/N (95 % confidence); Sidak's inequality gives a
                # bound that needs no simulation
                bounds = {"sidak": gt.sidak_bound(t, int(use.sum())),
                          "simulation_95": 3.0 / len(null)}
                p, bound = min(bounds.values()), True
                details["pvalue_bounds"] = bounds
            d2 = float(sp.statistic(z[use]))
            details.update({"mahalanobis": d2, "mahalanobis_df": sp.rank,
                            "mahalanobis_pvalue": float(gt.mahalanobis_pvalue(d2, sp.rank)),
                            "grid_points_used": int(use.sum()), "gaussian_vectors": n_gauss})
            c95 = float(null[int(0.95 * (len(null) - 1))])
        else:
            t, p, c95 = float("nan"), float("nan"), float("nan")
        grid = np.asarray(stat.grid).tolist()
        curve = {"grid": grid, "observed": obs, "null_mean": mean, "null_sd": sd,
                 "z": np.where(use, z, np.nan), "usable": use,
                 "pointwise_lo": mean - 1.959964 * sd, "pointwise_hi": mean + 1.959964 * sd,
                 "global_lo": mean - c95 * sd, "global_hi": mean + c95 * sd,
                 "global_critical_z": c95}
        statistic, method, alt = t, "asymptotic-maxabs", "two-sided"
        zz, mu_s, sd_s = t, float("nan"), float("nan")
    elif nm.kind == "extreme":
        x = float(obs.reshape(-1)[0])
        tail = _gumbel(nm, n)
        up = float(tail.pvalue(x))
        low = float((np.searchsorted(tail.values, x, side="right") + 1.0) / (tail.m + 1.0))
        p = {"greater": up, "less": low}.get(alternative, min(1.0, 2 * min(up, low)))
        details.update({"gumbel_loc": tail.loc, "gumbel_scale": tail.scale,
                        "null_values": tail.m})
        mu_s, sd_s = float(mean[0]), float(sd[0])
        zz = (x - mu_s) / sd_s if sd_s > 0 else float("nan")
        statistic, method, alt = x, "table-empirical-gumbel-tail", alternative
    else:
        x = float(obs.reshape(-1)[0])
        mu_s, sd_s = float(mean[0]), float(sd[0])
        zz = (x - mu_s) / sd_s if sd_s > 0 else float("nan")
        p = _scalar_p(zz, alternative) if np.isfinite(zz) else float("nan")
        statistic, method, alt = x, "asymptotic-normal", alternative
    if np.isfinite(p) and p < P_FLOOR:
        # a p-value is never 0, and no limit law is accurate so far in its
        # tail: report the floor as an upper bound of the true value
        details["pvalue_floor"] = P_FLOOR
        p, bound = P_FLOOR, True
    reason = "; ".join(([note] if note else []) + reasons) if not trusted else \
        (note or f"instant test from the null table {_table_name(nm)} ({nm.route}: "
         f"{', '.join(nm.cells)})")
    if not trusted:
        details["reasons"] = ([note] if note else []) + list(reasons)
    if trusted and nm.extra.get("passed_over"):
        reason += "; " + "; ".join(nm.extra["passed_over"])
        details["passed_over"] = list(nm.extra["passed_over"])
    return StatResult(name=stat.name, kind=stat.kind, statistic=statistic, pvalue=p,
                      null_mean=mu_s, null_sd=sd_s, z=zz, method=method,
                      alternative=asked or alt, tail=alt, trusted=trusted, reason=reason,
                      primary=primary, n_sims=0, pvalue_is_bound=bound, curve=curve,
                      details=details)
