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

__all__ = ["simulate_null", "mc_results", "untested_result"]


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
    """Map clustered/regular to greater/less for this statistic."""
    if alternative == "two-sided":
        return "two-sided", ""
    if stat.clustered is None or stat.is_curve:
        return "two-sided", (f"no known direction for '{stat.name}' under a {alternative} "
                             "alternative; tested two-sided")
    up = (stat.clustered > 0) == (alternative == "clustered")
    return ("greater" if up else "less"), ""


def mc_results(observed: dict, null: dict, stats: list[Statistic], alternative: str = "two-sided",
               alpha: float = 0.05) -> list[StatResult]:
    """Turn observed and simulated statistics into :class:`StatResult` objects."""
    out = []
    for i, st in enumerate(stats):
        obs = observed[st.name]
        sims = null[st.name]
        m = len(sims)
        alt, note = _alternative_for(st, alternative)
        if st.is_curve:
            env = ranks.erl_test(obs, sims, alpha=alpha)
            mask = env["mask"]
            mean = np.nanmean(sims, axis=0) if m else np.full(obs.shape, np.nan)
            sd = np.nanstd(sims, axis=0, ddof=1) if m > 1 else np.full(obs.shape, np.nan)
            # a sd at rounding level (all simulations equal up to the last
            # bits) standardises nothing: those grid points are left out
            live = mask & (sd > _SD_FLOOR * np.maximum(1.0, np.abs(mean)))
            with np.errstate(invalid="ignore", divide="ignore"):
                zc = np.where(live, (obs - mean) / sd, np.nan)
                zs = np.where(live[None, :], (sims - mean) / sd, np.nan)
            t_obs = float(np.nanmax(np.abs(zc))) if np.isfinite(zc).any() else 0.0
            t_sims = np.nanmax(np.abs(zs), axis=1) if np.isfinite(zs).any() else np.zeros(m)
            lo_pw = np.nanquantile(sims, alpha / 2, axis=0)
            hi_pw = np.nanquantile(sims, 1 - alpha / 2, axis=0)
            grid = st.grid.tolist()
            curve = {"grid": grid, "observed": obs, "null_mean": mean, "null_sd": sd, "z": zc,
                     "pointwise_lo": lo_pw, "pointwise_hi": hi_pw,
                     "global_lo": env["lo"], "global_hi": env["hi"],
                     "extreme_rank": env["extreme_rank"]}
            p = env["pvalue"]
            method = "mc-erl-envelope"
            reason = note or ("global extreme rank length envelope test over "
                              f"{int(mask.sum())} informative grid points")
        else:
            t_obs, t_sims, curve = float(obs), sims.astype(float), None
            p = ranks.rank_pvalue(t_obs, t_sims, alt)
            method = "mc-rank"
            reason = note or f"Monte Carlo rank test, {m} simulations"
        mu = float(np.mean(t_sims)) if m else float("nan")
        sdv = float(np.std(t_sims, ddof=1)) if m > 1 else float("nan")
        z = (t_obs - mu) / sdv if sdv and np.isfinite(sdv) and \
            sdv > _SD_FLOOR * max(1.0, abs(mu)) else float("nan")
        out.append(StatResult(name=st.name, kind=st.kind, statistic=t_obs, pvalue=p,
                              observed=t_obs, null_mean=mu, null_sd=sdv, z=z, method=method,
                              alternative=alt if not note else "two-sided", trusted=True,
                              reason=reason, primary=(i == 0), n_sims=m, curve=curve))
    return out


def untested_result(stat: Statistic, reasons: list, primary: bool) -> StatResult:
    """A result without a p-value (no table and Monte Carlo not requested)."""
    nan = float("nan")
    return StatResult(name=stat.name, kind=stat.kind, statistic=nan, pvalue=nan, observed=nan,
                      null_mean=nan, null_sd=nan, z=nan, method="none", trusted=False,
                      reason="; ".join(reasons) + "; use --method mc or auto", primary=primary)
