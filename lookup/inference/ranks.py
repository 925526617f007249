"""Monte Carlo p-values: rank tests for scalars, global envelope tests for curves.

Scalar statistics (Davison & Hinkley, *Bootstrap Methods and their
Application*, 1997, ch. 4): with m null values T_1..T_m and observed T_0,

    p_greater = (1 + #{i : T_i >= T_0}) / (m + 1)
    p_less    = (1 + #{i : T_i <= T_0}) / (m + 1)
    p_two     = min(1, 2 * min(p_greater, p_less))

Under the null (and without ties) p_greater is uniform on {1/(m+1), ..., 1}.

Curves, default: the studentised maximum, the test of the instant route
(``lookup.inference.asymptotic``) with the null moments estimated from the
simulations instead of a table.  Of the m + 1 curves (observed first), curve
j is standardised at each usable grid point k by the mean and sd of the
*other* m curves (leave-one-out over the pooled set),

    T_j = max_k |T_jk - mean_(-j),k| / sd_(-j),k ,

so the observed curve is standardised by the simulations' moments exactly as
the instant route standardises it by the table's, and under the null the
m + 1 maxima are exchangeable: p = (1 + #{i >= 1 : T_i >= T_0}) / (m + 1) is
an exact Monte Carlo p-value (the rank argument of Davison & Hinkley above;
leave-one-out studentisation keeps exchangeability, common practice for
studentised global envelope tests).

Curves, optional: the global extreme rank envelope test with the extreme rank length
(ERL) ordering (Myllymäki, Mrkvička, Grabarnik, Seijo & Hahn, JRSS B 79,
2017).  For the m + 1 curves (observed first) the pointwise two-sided rank
of curve i at grid point k is

    R_ik = min(#{j : T_jk <= T_ik}, #{j : T_jk >= T_ik})

(1 = most extreme).  Each curve's sorted rank vector is compared
lexicographically (smaller = more extreme); the p-value is the fraction of
the m + 1 curves at least as extreme as the observed one.  The 100(1-alpha)%
global envelope is the pointwise range of the curves whose own ERL p-value
exceeds alpha.  Grid points where a curve is NaN in any replicate, or where
all curves coincide, carry no information and are left out.
"""
from __future__ import annotations

import numpy as np

__all__ = ["rank_pvalue", "erl_test", "maxabs_test", "ALTERNATIVES"]

ALTERNATIVES = ("two-sided", "greater", "less")


def rank_pvalue(t_obs: float, t_sims: np.ndarray, alternative: str = "two-sided") -> float:
    """Monte Carlo rank p-value of a scalar statistic.

    Parameters
    ----------
    t_obs : float
    t_sims : ndarray, shape (m,)
    alternative : {"two-sided", "greater", "less"}
    """
    t = np.asarray(t_sims, float)
    m = len(t)
    upper = (1 + np.count_nonzero(t >= t_obs)) / (m + 1)
    lower = (1 + np.count_nonzero(t <= t_obs)) / (m + 1)
    if alternative == "greater":
        return float(upper)
    if alternative == "less":
        return float(lower)
    if alternative == "two-sided":
        return float(min(1.0, 2 * min(upper, lower)))
    raise ValueError(f"alternative must be one of {ALTERNATIVES}")


def informative_points(obs: np.ndarray, sims: np.ndarray) -> np.ndarray:
    """Mask of grid points that are finite everywhere and not constant."""
    allc = np.vstack([obs[None, :], sims])
    finite = np.all(np.isfinite(allc), axis=0)
    spread = np.ptp(np.where(np.isfinite(allc), allc, 0.0), axis=0) > 0
    return finite & spread


def _pointwise_ranks(curves: np.ndarray) -> np.ndarray:
    """R_ik = min(rank from below, rank from above), ties counted fully."""
    s = np.sort(curves, axis=0)
    m1 = curves.shape[0]
    below = np.empty_like(curves, dtype=np.int64)
    above = np.empty_like(curves, dtype=np.int64)
    for k in range(curves.shape[1]):
        below[:, k] = np.searchsorted(s[:, k], curves[:, k], side="right")
        above[:, k] = m1 - np.searchsorted(s[:, k], curves[:, k], side="left")
    return np.minimum(below, above)


def erl_test(obs: np.ndarray, sims: np.ndarray, alpha: float = 0.05) -> dict:
    """Global extreme rank length envelope test of one curve.

    Parameters
    ----------
    obs : ndarray, shape (k,)
    sims : ndarray, shape (m, k)
    alpha : float
        Level of the returned global envelope.

    Returns
    -------
    dict with keys ``pvalue``, ``extreme_rank`` (the observed curve's
    smallest pointwise rank), ``mask`` (informative grid points),
    ``lo``/``hi`` (global envelope; NaN off the mask) and ``pvalues_all``
    (ERL p-value of every curve, observed first).
    """
    obs = np.asarray(obs, float)
    sims = np.asarray(sims, float)
    mask = informative_points(obs, sims)
    m1 = sims.shape[0] + 1
    lo = np.full(obs.shape, np.nan)
    hi = np.full(obs.shape, np.nan)
    if not mask.any():
        return {"pvalue": 1.0, "extreme_rank": m1, "mask": mask, "lo": lo, "hi": hi,
                "pvalues_all": np.ones(m1)}
    curves = np.vstack([obs[None, mask], sims[:, mask]])
    ranks = np.sort(_pointwise_ranks(curves), axis=1)
    # Lexicographic order of the sorted rank vectors; np.unique sorts rows.
    _, inv = np.unique(ranks, axis=0, return_inverse=True)
    inv = inv.ravel()
    counts = np.bincount(inv)
    at_most = np.cumsum(counts)  # curves with ERL vector <= each unique row
    p_all = at_most[inv] / m1
    keep = p_all[1:] > alpha
    if keep.any():
        lo[mask] = curves[1:][keep].min(axis=0)
        hi[mask] = curves[1:][keep].max(axis=0)
    return {"pvalue": float(p_all[0]), "extreme_rank": int(ranks[0, 0]), "mask": mask,
            "lo": lo, "hi": hi, "pvalues_all": p_all}


def maxabs_test(obs: np.ndarray, sims: np.ndarray, use: np.ndarray, alpha: float = 0.05) -> dict:
    """Studentised-maximum Monte Carlo test of one curve (see module doc).

    Parameters
    ----------
    obs : ndarray, shape (k,)
    sims : ndarray, shape (m, k)
    use : ndarray of bool, shape (k,)
        Grid points tested (the usable ones); points where any curve is not
        finite or all curves coincide are left out as well.
    alpha : float
        Level of the returned critical value.

    Returns
    -------
    dict with keys ``statistic`` (T_0), ``pvalue``, ``null`` (T_1..T_m),
    ``mask`` (grid points used), ``mean``/``sd`` (of the m simulations, the
    moments that standardise the observed curve), ``z`` (observed,
    standardised; NaN off the mask), ``critical`` (the 1 - alpha quantile of
    T_1..T_m, the half-width in sd of the global band) and ``beyond``
    (True when T_0 exceeds every T_i: the p-value is the floor 1/(m+1)).

    Examples
    --------
    >>> import numpy as np
    >>> from nullatlas.lookup.inference.ranks import maxabs_test
    >>> rng = np.random.default_rng(0)
    >>> sims = rng.standard_normal((99, 5))
    >>> out = maxabs_test(np.full(5, 6.0), sims, np.ones(5, bool))
    >>> out["pvalue"], out["beyond"]
    (0.01, True)
    """
    obs = np.asarray(obs, float)
    sims = np.asarray(sims, float)
    m = sims.shape[0]
    mask = np.asarray(use, bool) & informative_points(obs, sims)
    out = {"mask": mask, "mean": np.full(obs.shape, np.nan), "sd": np.full(obs.shape, np.nan),
           "z": np.full(obs.shape, np.nan)}
    if m < 3 or not mask.any():
        out.update(statistic=float("nan"), pvalue=float("nan"), null=np.zeros(0),
                   critical=float("nan"), beyond=False)
        return out
    x = np.vstack([obs[None, mask], sims[:, mask]])        # (m + 1, k), observed first
    x = x - x[1:].mean(axis=0)                             # centre for accuracy
    s1, s2 = x.sum(axis=0), (x ** 2).sum(axis=0)
    loo_mean = (s1[None, :] - x) / m                       # mean of the other m curves
    loo_var = (s2[None, :] - x ** 2 - m * loo_mean ** 2) / (m - 1)
    loo_sd = np.sqrt(np.clip(loo_var, 0.0, None))
    with np.errstate(invalid="ignore", divide="ignore"):
        zz = np.abs(x - loo_mean) / loo_sd
    zz = np.where(loo_sd > 0, zz, 0.0)
    t = zz.max(axis=1)
    t0, null = float(t[0]), t[1:]
    mean = sims[:, mask].mean(axis=0)
    sd = sims[:, mask].std(axis=0, ddof=1)
    out["mean"][mask], out["sd"][mask] = mean, sd
    with np.errstate(invalid="ignore", divide="ignore"):
        out["z"][mask] = np.where(sd > 0, (obs[mask] - mean) / sd, 0.0)
    ge = int(np.count_nonzero(null >= t0))
    out.update(statistic=t0, pvalue=(1.0 + ge) / (m + 1.0), null=np.sort(null),
               critical=float(np.quantile(null, 1 - alpha)), beyond=ge == 0)
    return out
