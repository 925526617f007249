"""Null distribution of an extreme statistic in any window: the quantile model.

The largest lifetime (or death/birth ratio) of n points is the maximum over
about n weakly dependent local features, so its distribution is close to a
Gumbel law whose location grows like log n and whose scale changes slowly
(Bobrowski, Kahle & Skraba, Ann. Appl. Probab. 27, 2017, for the 'maximally
persistent cycles' in the bulk; the boundary of the window changes the
number and the kind of features near it).  The quantile function of the
null is therefore modelled, per probability level p, as linear in

    x = [1, log n, B1, B2, BC]           (3D; 2D without BC)

with B1, B2, BC the window covariates of ``lookup.patterns.boundary`` (at
the depth of 2 mean spacings used for scalars):

    Q(p | W, n) = sum_j beta_j(p) x_j,

fitted by weighted least squares per level over the calibrated cells
(``calibrate.model.fit_extreme_quantiles``).  A model of the quantiles
shares information across n at each level, which an exceedance model fitted
per value of the statistic cannot; on the held-out 3D windows it predicts
the upper 5% point of the largest void within about +-0.01 where the
exceedance model was 0.83 of the sd wide (README, "Windows of any shape").

At run time :func:`quantile_sample` turns the predicted quantiles into a
null sample: monotone (running maximum over p), interpolated at the levels
(i + 1/2) / m, and beyond the modelled levels continued linearly in the
Gumbel coordinate g(p) = -log(-log p), fitted to the predicted quantiles
of the outer 10% on each side.
"""
from __future__ import annotations

import numpy as np

__all__ = ["QUANTILE_P", "EXTREME_COLUMNS", "extreme_design", "quantile_sample"]

#: Probability levels at which the quantile function is modelled.
QUANTILE_P = np.linspace(0.005, 0.995, 100)

#: Design columns per dimension (names; see module doc).
EXTREME_COLUMNS = {2: ("1", "log n", "B1", "B2"), 3: ("1", "log n", "B1", "B2", "BC")}


def extreme_design(cov, n: int, columns) -> np.ndarray:
    """The design vector x of the quantile model for ``n`` points and the
    window covariates ``cov`` ([1, B1, B2, B3, BC] of
    ``lookup.patterns.boundary.covariates``; the first row if 2D)."""
    c = np.atleast_2d(np.asarray(cov, float))[0]
    pool = {"1": 1.0, "log n": float(np.log(n)), "B1": float(c[1]), "B2": float(c[2]),
            "B3": float(c[3]), "BC": float(c[4]) if c.size > 4 else 0.0}
    return np.array([pool[k] for k in columns], float)


def _gumbel_coord(p):
    return -np.log(-np.log(p))


def quantile_sample(p: np.ndarray, qcoef: np.ndarray, x: np.ndarray, m: int) -> np.ndarray:
    """A sorted null sample of m values from the quantile model: predicted
    quantiles ``qcoef @ x`` at levels ``p`` (made monotone), read at the
    levels (i + 1/2) / m, with Gumbel-coordinate extrapolation beyond
    ``p`` (see module doc).

    Examples
    --------
    >>> import numpy as np
    >>> p = np.linspace(0.005, 0.995, 100)
    >>> q = 2.0 - np.log(-np.log(p))               # a Gumbel(2, 1) quantile function
    >>> s = quantile_sample(p, q[:, None], np.array([1.0]), 20000)
    >>> round(float(s.mean()), 2), round(float(s.std()), 2)     # 2 + Euler's gamma, pi/sqrt(6)
    (2.58, 1.28)
    """
    p = np.asarray(p, float)
    q = np.asarray(qcoef, float) @ np.asarray(x, float)
    ok = np.isfinite(q)
    p, q = p[ok], np.maximum.accumulate(q[ok])
    levels = (np.arange(m) + 0.5) / m
    out = np.interp(levels, p, q)
    g = _gumbel_coord(p)
    for side in ("upper", "lower"):
        sel = p >= 0.9 if side == "upper" else p <= 0.1
        beyond = levels > p[-1] if side == "upper" else levels < p[0]
        if sel.sum() >= 3 and beyond.any():
            b, a = np.polyfit(g[sel], q[sel], 1)
            if b > 0:
                ext = a + b * _gumbel_coord(levels[beyond])
                out[beyond] = np.maximum(ext, q[-1]) if side == "upper" else np.minimum(ext, q[0])
    return np.sort(out)
