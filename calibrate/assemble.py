"""From one cell's replicate summaries to what its table cell stores.

* streaming moments of every statistic (``calibrate.moments``), over the
  replicates where the statistic is finite;
* empirical tails: the sorted values of extreme statistics (their p-values
  come from the empirical null with a Gumbel tail, never from a normal
  approximation) and fine quantiles of additive scalars;
* the expected counts n E[beta_q(rho)] behind Betti-curve grid points;
* a cross-fitted audit of the asymptotic tests (:func:`audit_cell`).
"""
from __future__ import annotations

import numpy as np
from scipy import stats as _st

from nullatlas.lookup.inference import globaltests as gt
from nullatlas.lookup.inference.extremes import GumbelTail
from nullatlas.lookup.summaries.statistics import STATISTICS

from .moments import Moments

__all__ = ["ALPHAS", "QUANTILE_LEVELS", "GAUSS_SIMS", "CellData", "assemble_cell", "audit_cell"]

#: Levels of the audit.
ALPHAS = np.array([0.01, 0.05, 0.10])
#: Probability levels of the stored quantiles of additive scalars.
QUANTILE_LEVELS = np.round(np.concatenate([[0.001, 0.002, 0.005], np.arange(1, 100) / 100,
                                           [0.995, 0.998, 0.999]]), 6)
#: Largest share of replicates where a statistic may be undefined (NaN) for
#: its cell to be audited (and hence ever trusted).
MAX_NONFINITE = 0.01
#: Simulated Gaussian vectors for the max |z| critical values in the audit.
GAUSS_SIMS = 20_000


class CellData(dict):
    """What is stored for one statistic of one cell (a dict of arrays)."""


def _finite_rows(x: np.ndarray) -> np.ndarray:
    return np.all(np.isfinite(x), axis=1)


def assemble_cell(n: int, data: dict, rng: np.random.Generator) -> dict:
    """Per statistic: moments, tails, expected counts and audit of one cell.

    Parameters
    ----------
    n : int
    data : dict stat -> (R, k) array in replicate order
    rng : Generator
        For the simulated Gaussian vectors of the curve audit.

    Returns
    -------
    dict stat -> CellData with keys ``moments`` (Moments), ``nonfinite``,
    optionally ``values`` / ``quantiles`` / ``expected_count``, and ``audit``
    (dict of arrays).
    """
    out = {}
    for name, x in data.items():
        st = STATISTICS[name]
        x = np.asarray(x, float)
        ok = _finite_rows(x)
        cd = CellData(moments=Moments.of(x[ok]), nonfinite=int(np.sum(~ok)))
        if st.kind == "extreme":
            cd["values"] = np.sort(x[ok, 0]).astype(np.float32)
        elif st.kind == "scalar":
            cd["quantiles"] = np.quantile(x[ok, 0], QUANTILE_LEVELS) if ok.any() else \
                np.full(len(QUANTILE_LEVELS), np.nan)
        if name.startswith("betti"):
            cd["expected_count"] = n * cd["moments"].mean
        if st.kind == "curve":
            m = cd["moments"]
            cd["usable"] = gt.usable_coordinates(m.mean, m.sd, m.skewness, n,
                                                 name.startswith("betti")).astype(np.int8)
        if cd["nonfinite"] > MAX_NONFINITE * len(x):
            # the moments describe only the replicates where the statistic was
            # defined (border-corrected L/G need points far from the boundary):
            # no asymptotic test is audited -- hence none is trusted -- here
            cd["audit"] = {"n": np.int64(0), "nonfinite_share": np.float64(cd["nonfinite"] / len(x))}
        else:
            cd["audit"] = audit_cell(st.kind, x, rng, n=n, count_based=name.startswith("betti"))
        out[name] = cd
    return out


def _folds(x: np.ndarray):
    """Cross-fitting: replicates with even and odd index standardised by the
    moments of the other fold."""
    idx = np.arange(len(x))
    ok = _finite_rows(x)
    a, b = x[(idx % 2 == 0) & ok], x[(idx % 2 == 1) & ok]
    return a, b


def _tails(z: np.ndarray) -> dict:
    """Lower, upper and two-sided rejection rates at ALPHAS (tails at alpha/2)."""
    c = _st.norm.isf(ALPHAS / 2)
    lower = np.array([np.mean(z < -ci) for ci in c])
    upper = np.array([np.mean(z > ci) for ci in c])
    return {"lower": lower, "upper": upper, "two_sided": lower + upper}


def audit_cell(kind: str, x: np.ndarray, rng: np.random.Generator, n: int = 0,
               count_based: bool = False) -> dict:
    """Cross-fitted audit of the asymptotic tests of one statistic in one cell.

    Scalars: z = (x - mean') / sd' with the other fold's mean' and sd';
    Kolmogorov–Smirnov distance of the pooled z to N(0, 1) and rejection
    rates of the lower tail, the upper tail (each at alpha/2) and the
    two-sided test at alpha, for alpha in ALPHAS.

    Extremes: the runtime's test, the other fold's values as the empirical
    null with a Gumbel tail (``lookup.inference.extremes.GumbelTail``): its upper-tail
    rejection rate at ALPHAS; KS distances of z to N(0, 1) and of the
    Gumbel probability transform (Gumbel fitted to the other fold) to U(0, 1).

    Curves: pointwise tail rates at 0.05 per grid point and the sizes at
    ALPHAS of the global max |z| test (critical values from GAUSS_SIMS
    Gaussian vectors with the other fold's correlation) and of the
    regularised Mahalanobis test (``lookup.inference.globaltests``), both over the
    grid points usable in the other fold (``usable_coordinates``, with the
    cell's ``n``; ``count_based`` for Betti curves).  No usable grid point:
    no global rates (the global test is never trusted there).
    """
    a, b = _folds(x)
    res = {"n": np.int64(len(a) + len(b))}
    if len(a) < 20 or len(b) < 20:      # too few for an audit (and a Gumbel tail)
        res["n"] = np.int64(0)
        return res
    zs, extra = [], []
    for test, train in ((a, b), (b, a)):
        m, sd = train.mean(axis=0), train.std(axis=0, ddof=1)
        valid = gt.valid_coordinates(sd, m)
        if kind == "curve":
            skew = gt.skewness(train)
            extra.append((test, train, m, sd, gt.usable_coordinates(m, sd, skew, n, count_based)))
        with np.errstate(divide="ignore", invalid="ignore"):
            zs.append(np.where(valid, (test - m) / np.where(valid, sd, 1.0), 0.0))
    z = np.concatenate(zs)
    if kind in ("scalar", "extreme"):
        z1 = z[:, 0]
        res["ks"] = np.float64(_st.kstest(z1, "norm").statistic)
        if kind == "scalar":
            res.update(_tails(z1))
        else:
            u, p = [], []
            for test, train in ((a, b), (b, a)):
                tail = GumbelTail(train[:, 0])
                u.append(_st.gumbel_r.cdf(test[:, 0], tail.loc, tail.scale))
                p.append(tail.pvalue(test[:, 0]))
            u, p = np.concatenate(u), np.concatenate(p)
            res["ks_gumbel"] = np.float64(_st.kstest(u, "uniform").statistic)
            res["upper"] = np.array([np.mean(p <= al) for al in ALPHAS])
        return res
    # curves
    c05 = _st.norm.isf(0.025)
    res["point_lower"] = np.mean(z < -c05, axis=0)
    res["point_upper"] = np.mean(z > c05, axis=0)
    pmax, pmah = [], []
    for (test, train, m, sd, use), zf in zip(extra, zs):
        both = use
        if both.sum() == 0:
            continue
        cov = np.cov(train[:, both].T).reshape(both.sum(), both.sum())
        corr = gt.correlation(cov)
        null = gt.maxabs_null(corr, GAUSS_SIMS, rng)
        pmax.append(gt.maxabs_pvalue(np.abs(zf[:, both]).max(axis=1), null))
        sp = gt.spectral(corr)
        pmah.append(gt.mahalanobis_pvalue(sp.statistic(zf[:, both]), sp.rank))
    if len(pmax) == 2:
        pmax, pmah = np.concatenate(pmax), np.concatenate(pmah)
        res["maxabs"] = np.array([np.mean(pmax <= al) for al in ALPHAS])
        res["mahalanobis"] = np.array([np.mean(pmah <= al) for al in ALPHAS])
    return res
