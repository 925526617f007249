"""The Monte Carlo CSR test: simulate m null patterns, rank the observed one.

Replicate i is drawn from the i-th child of the root ``SeedSequence``, so the
null sample -- and every p-value -- is the same whatever the number of
workers and however the replicates are chunked.  Chunks run in parallel
with joblib (loky processes).
"""
from __future__ import annotations

import numpy as np

from ..processes.csr import csr
from ..results import StatResult
from ..summaries.statistics import Statistic, compute
from . import ranks

__all__ = ["simulate_null", "mc_results", "untested_result", "sample_usable", "CURVE_TESTS"]


#: Relative sd below which simulated values are taken as constant (rounding).
_SD_FLOOR = 1e-9


def _draw(window, n, model, rng):
    if model is None or model[0] == "csr":
        return csr(window, n, rng)
    from ..processes.registry import simulate
    return simulate(window, model[0], model[1], n, rng, n)


def _one(window, n, stats, seed, engine, model):
    pts = _draw(window, n, model, np.random.default_rng(seed))
    est = getattr(window, "estimator", None)
    if est:
        # the observed window was estimated from the data: estimate it again
        # from this simulated pattern, so that the null includes the estimation
        from ..patterns.windows import estimate_window
        window = estimate_window(est, pts)
    return compute(pts, window, stats, engine)


def _chunk(window, n, stats, seeds, engine="fast", model=None):
    out = [_one(window, n, stats, s, engine, model) for s in seeds]
    return {s.name: np.stack([o[s.name] for o in out]) for s in stats}


def simulate_null(window, n: int, stats: list[Statistic], seeds, jobs: int = 1,
                  progress: bool | None = False, engine: str = "fast", model=None) -> dict:
    """Statistics of ``len(seeds)`` null patterns of ``n`` points in ``window``
    (CSR, or ``model`` = (name, params) of ``lookup.processes.registry``).

    Parameters
    ----------
    seeds : list of numpy.random.SeedSequence
        One per replicate (see :func:`nullatlas.lookup.processes.csr.replicate_seeds`).
    jobs : int
        Worker processes (1 = in this process).
    progress : bool or None
        Show a progress bar (None: in a Jupyter notebook, tqdm's notebook bar
        where ipywidgets is installed, or on a terminal, the text bar).
    engine : {"fast", "gudhi"}
        Diagram engine (see :func:`lookup.persistence.diagram.alpha_diagram`).

    Returns
    -------
    dict name -> ndarray of shape (m,) or (m, k)
    """
    from ..progressbar import progress_bar

    m = len(seeds)
    size = max(1, min(64, int(np.ceil(m / (max(jobs, 1) * 8)))))
    chunks = [seeds[i:i + size] for i in range(0, m, size)]
    bar = progress_bar(m, "null simulations", "sim", progress, leave=False)
    parts = []
    try:
        if jobs <= 1:
            for c in chunks:
                parts.append(_chunk(window, n, stats, c, engine, model))
                bar.update(len(c))
        else:
            from joblib import Parallel, delayed

            gen = Parallel(n_jobs=jobs, return_as="generator")(
                delayed(_chunk)(window, n, stats, c, engine, model) for c in chunks)
            for c, part in zip(chunks, gen):
                parts.append(part)
                bar.update(len(c))
    finally:
        bar.close()
    return {s.name: np.concatenate([p[s.name] for p in parts]) for s in stats}


def _alternative_for(stat: Statistic, alternative: str) -> tuple[str, str]:
    """The tail of ``stat`` tested under ``alternative`` (clustered/regular
    map to greater/less by the statistic's known direction), and a note
    when the test stays two-sided."""
    if alternative == "two-sided":
        return "two-sided", ""
    if stat.clustered is None or stat.is_curve:
        return "two-sided", (f"no known direction for '{stat.name}' under a {alternative} "
                             "alternative; tested two-sided")
    up = (stat.clustered > 0) == (alternative == "clustered")
    return ("greater" if up else "less"), ""


#: Curve tests of the Monte Carlo route: the studentised maximum (the test of
#: the instant route, default) and the extreme rank length envelope.
CURVE_TESTS = ("maxabs", "erl")


def sample_usable(stat: Statistic, sims: np.ndarray, n: int) -> np.ndarray:
    """Usable grid points of a curve judged from its simulated null sample,
    by the rule the tables apply to theirs (``globaltests.usable_coordinates``),
    for when no table covers the window and n."""
    from . import globaltests as gt

    ok = np.all(np.isfinite(sims), axis=0)
    x = np.where(ok[None, :], sims, 0.0)
    return ok & gt.usable_coordinates(x.mean(axis=0), x.std(axis=0, ddof=1), gt.skewness(x), n,
                                      stat.name.startswith("betti"))


def _curve_result(st, obs, sims, alpha, curve_test, use, n):
    """(statistic, p-value, bound flag, curve dict, method, reason, details) of a curve."""
    m = len(sims)
    lo_pw = np.nanquantile(sims, alpha / 2, axis=0) if m else np.full(obs.shape, np.nan)
    hi_pw = np.nanquantile(sims, 1 - alpha / 2, axis=0) if m else np.full(obs.shape, np.nan)
    grid = st.grid.tolist()
    if curve_test == "erl":
        env = ranks.erl_test(obs, sims, alpha=alpha)
        mask = env["mask"]
        mean = np.nanmean(sims, axis=0) if m else np.full(obs.shape, np.nan)
        sd = np.nanstd(sims, axis=0, ddof=1) if m > 1 else np.full(obs.shape, np.nan)
        live = mask & (sd > _SD_FLOOR * np.maximum(1.0, np.abs(mean)))
        with np.errstate(invalid="ignore", divide="ignore"):
            zc = np.where(live, (obs - mean) / sd, np.nan)
        t = float(np.nanmax(np.abs(zc))) if np.isfinite(zc).any() else float("nan")
        curve = {"grid": grid, "observed": obs, "null_mean": mean, "null_sd": sd, "z": zc,
                 "pointwise_lo": lo_pw, "pointwise_hi": hi_pw,
                 "global_lo": env["lo"], "global_hi": env["hi"],
                 "extreme_rank": env["extreme_rank"]}
        bound = env["pvalue"] <= 1.0 / (m + 1) + 1e-15
        reason = ("global extreme rank length envelope test over "
                  f"{int(mask.sum())} informative grid points (a different test from the "
                  "instant route's max |z|)")
        details = {"curve_test": "erl", "grid_points_used": int(mask.sum()),
                   "extreme_rank": env["extreme_rank"]}
        return t, env["pvalue"], bound, curve, "mc-erl-envelope", reason, details
    if use is None:
        use, source = sample_usable(st, sims, n), "the simulations"
    else:
        source = "the null table"
    out = ranks.maxabs_test(obs, sims, use, alpha=alpha)
    mean, sd, mask, c = out["mean"], out["sd"], out["mask"], out["critical"]
    curve = {"grid": grid, "observed": obs, "null_mean": mean, "null_sd": sd, "z": out["z"],
             "usable": mask, "pointwise_lo": lo_pw, "pointwise_hi": hi_pw,
             "global_lo": mean - c * sd, "global_hi": mean + c * sd, "global_critical_z": c}
    reason = (f"max |z| over {int(mask.sum())} usable grid points (chosen from {source}), "
              f"standardised by the moments of {m} simulations")
    details = {"curve_test": "maxabs", "grid_points_used": int(mask.sum()),
               "usable_from": "table" if source == "the null table" else "simulations"}
    return (out["statistic"], out["pvalue"], out["beyond"], curve, "mc-maxabs",
            reason, details)


def mc_results(observed: dict, null: dict, stats: list[Statistic], alternative: str = "two-sided",
               alpha: float = 0.05, curve_test: str = "maxabs", usable: dict | None = None,
               n: int | None = None) -> list[StatResult]:
    """Turn observed and simulated statistics into :class:`StatResult` objects.

    Parameters
    ----------
    observed, null : dict
        Statistic name -> observed value / simulated values (m rows).
    stats : list of Statistic
    alternative : {"two-sided", "clustered", "regular"}
    alpha : float
        Level of the envelopes.
    curve_test : {"maxabs", "erl"}
        The curves' test: the studentised maximum over the usable grid
        points (default; the instant route's test) or the extreme rank
        length envelope (``lookup.inference.ranks``).
    usable : dict, optional
        Statistic name -> usable grid points from a null table for this
        window and n, so that both routes test the same grid points; judged
        from the simulations when missing.
    n : int, optional
        Points per pattern (for the Betti curves' expected-count rule).
    """
    if curve_test not in CURVE_TESTS:
        raise ValueError(f"curve_test must be one of {CURVE_TESTS}, got {curve_test!r}")
    usable = usable or {}
    out = []
    for i, st in enumerate(stats):
        obs = np.asarray(observed[st.name], float)
        sims = np.asarray(null[st.name], float)
        m = len(sims)
        tail, note = _alternative_for(st, alternative)
        details = None
        if st.is_curve:
            t_obs, p, bound, curve, method, reason, details = _curve_result(
                st, obs, sims, alpha, curve_test, usable.get(st.name), n or 0)
            reason = note + "; " + reason if note else reason
            mu = sdv = float("nan")
            z = t_obs          # a curve's z is its studentised maximum, as on the instant route
        else:
            t_obs, t_sims, curve = float(obs), sims.astype(float), None
            p = ranks.rank_pvalue(t_obs, t_sims, tail)
            bound = m > 0 and p <= (2.0 if tail == "two-sided" else 1.0) / (m + 1) + 1e-15
            method = "mc-rank"
            reason = note or f"Monte Carlo rank test, {m} simulations"
            mu = float(np.mean(t_sims)) if m else float("nan")
            sdv = float(np.std(t_sims, ddof=1)) if m > 1 else float("nan")
            z = (t_obs - mu) / sdv if sdv and np.isfinite(sdv) and \
                sdv > _SD_FLOOR * max(1.0, abs(mu)) else float("nan")
        out.append(StatResult(name=st.name, kind=st.kind, statistic=t_obs, pvalue=p,
                              null_mean=mu, null_sd=sdv, z=z, method=method,
                              alternative=alternative, tail=tail, trusted=True,
                              reason=reason, primary=(i == 0), n_sims=m,
                              pvalue_is_bound=bool(bound), curve=curve, details=details))
    return out


def untested_result(stat: Statistic, reasons: list, primary: bool) -> StatResult:
    """A result without a p-value (no table and Monte Carlo not requested)."""
    nan = float("nan")
    return StatResult(name=stat.name, kind=stat.kind, statistic=nan, pvalue=nan,
                      null_mean=nan, null_sd=nan, z=nan, method="none", trusted=False,
                      reason="; ".join(reasons) + "; use --method mc or auto", primary=primary)
