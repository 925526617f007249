"""p-values of extreme statistics (largest lifetime, largest death/birth
ratio) from a tabled empirical null with a Gumbel tail.

Extremes have no normal limit (Bobrowski, Kahle & Skraba, Ann. Appl. Probab.
27, 2017; DESIGN.md, pilot), so their p-values never use a normal
approximation.  With m null values v_1..v_m and k = #{v_i >= x}:

* k >= K_TAIL (the body): the Monte Carlo rank p-value (k + 1) / (m + 1)
  (Davison & Hinkley 1997);
* k < K_TAIL (beyond the K_TAIL-th largest null value u): the empirical tail
  at u, extended with a Gumbel distribution G fitted to all m values by
  maximum likelihood (``scipy.stats.gumbel_r``):
  p = (K_TAIL + 1) / (m + 1) * S_G(x) / S_G(u), S_G the survival function.
  This keeps p continuous at u and lets it go below 1 / (m + 1).

The maximum-likelihood fit is :func:`gumbel_mle`, the algorithm of
``scipy.stats.gumbel_r.fit`` (scipy 1.17: the score equation of the scale
solved by Brent's method -- Brent, *Algorithms for Minimization without
Derivatives*, 1973, ch. 4 -- then the closed-form location) written out
here so that the instant route need not import scipy.stats (about a second):
it returns the same two doubles as scipy on the samples of
``tests/test_aot.py``.
"""
from __future__ import annotations

import math

import numpy as np

from . import tails as _st

__all__ = ["K_TAIL", "GumbelTail", "gumbel_mle", "fit_tail", "extreme_pvalue"]

#: Number of largest null values beyond which the Gumbel tail takes over.
K_TAIL = 10


class GumbelTail:
    """Empirical null values with a fitted Gumbel tail (see module doc)."""

    def __init__(self, values):
        v = np.sort(np.asarray(values, float))
        v = v[np.isfinite(v)]
        if len(v) < 2 * K_TAIL:
            raise ValueError(f"an extreme-value null needs at least {2 * K_TAIL} values")
        self.values = v
        self.loc, self.scale = _gumbel_fit(v)
        self.u = v[-K_TAIL]

    @property
    def m(self) -> int:
        return len(self.values)

    def pvalue(self, x) -> np.ndarray:
        """Upper-tail p-value of observed value(s) ``x``."""
        x = np.asarray(x, float)
        k = self.m - np.searchsorted(self.values, x, side="left")
        body = (k + 1.0) / (self.m + 1.0)
        if np.all(k >= K_TAIL):      # all in the body: no Gumbel tail (nor scipy.stats) needed
            return np.asarray(body, dtype=float)
        su = _st.gumbel_r.sf(self.u, self.loc, self.scale)
        sx = _st.gumbel_r.sf(x, self.loc, self.scale)
        with np.errstate(divide="ignore", invalid="ignore"):
            tail = (K_TAIL + 1.0) / (self.m + 1.0) * np.where(su > 0, sx / su, 0.0)
        return np.where(k >= K_TAIL, body, np.minimum(tail, (K_TAIL + 1.0) / (self.m + 1.0)))


def _brentq(f, xa: float, xb: float, xtol: float, rtol: float, maxiter: int) -> float:
    """A root of ``f`` in [xa, xb] by Brent's method (the classic bracketing
    iteration: inverse quadratic or secant steps, bisection when they do not
    shrink the bracket fast enough), step for step as ``scipy.optimize.brentq``."""
    xpre, xcur = xa, xb
    xblk = fblk = spre = scur = 0.0
    fpre, fcur = f(xpre), f(xcur)
    if fpre * fcur > 0:
        raise ValueError("the bracket holds no sign change")
    if fpre == 0:
        return xpre
    if fcur == 0:
        return xcur
    for _ in range(maxiter):
        if fpre != 0 and fcur != 0 and math.copysign(1.0, fpre) != math.copysign(1.0, fcur):
            xblk, fblk = xpre, fpre
            spre = scur = xcur - xpre
        if abs(fblk) < abs(fcur):
            xpre, xcur, xblk = xcur, xblk, xcur
            fpre, fcur, fblk = fcur, fblk, fcur
        delta = (xtol + rtol * abs(xcur)) / 2
        sbis = (xblk - xcur) / 2
        if fcur == 0 or abs(sbis) < delta:
            return xcur
        if abs(spre) > delta and abs(fcur) < abs(fpre):
            if xpre == xblk:                       # secant
                stry = -fcur * (xcur - xpre) / (fcur - fpre)
            else:                                  # inverse quadratic
                dpre = (fpre - fcur) / (xpre - xcur)
                dblk = (fblk - fcur) / (xblk - xcur)
                stry = -fcur * (fblk * dblk - fpre * dpre) / (dblk * dpre * (fblk - fpre))
            if 2 * abs(stry) < min(abs(spre), 3 * abs(sbis) - delta):
                spre, scur = scur, stry
            else:
                spre = scur = sbis
        else:
            spre = scur = sbis
        xpre, fpre = xcur, fcur
        xcur += scur if abs(scur) > delta else (delta if sbis > 0 else -delta)
        fcur = f(xcur)
    raise ValueError("Brent's method did not converge")


def gumbel_mle(values) -> tuple:
    """Maximum-likelihood (loc, scale) of a Gumbel (maximum) distribution.

    The scale s solves mean(x) - sum(x w) / sum(w) - s = 0 with
    w = exp(-x / s) (Evans, Hastings & Peacock, *Statistical Distributions*,
    3rd ed., 2000, p. 101), bracketed from [1/2, 2] outwards and solved to
    1e-14; then loc = -s (log sum exp(-x / s) - log m).  The same operations
    as ``scipy.stats.gumbel_r.fit`` (see module doc).

    Parameters
    ----------
    values : array_like
        The sample (finite).

    Returns
    -------
    tuple of float
        (loc, scale).
    """
    x = np.asarray(values, dtype=float)

    def score(scale):
        lw = -x / scale
        return x.mean() - np.average(x, weights=np.exp(lw - lw.max())) - scale

    lo, hi = 0.5, 2.0
    while np.sign(score(lo)) == np.sign(score(hi)) and (lo > 0 or hi < np.inf):
        lo /= 2
        hi *= 2
    scale = _brentq(score, lo, hi, 1e-14, 1e-14, 100)
    a = -x / scale                          # log-sum-exp, the largest terms taken apart
    top = a == a.max()
    m = float(np.sum(top.astype(float)))
    s = np.sum(np.exp(np.where(top, -np.inf, a) - a.max()))
    s = s if s == 0 else s / m
    loc = -scale * (np.log1p(s) + np.log(m) + a.max() - np.log(len(x)))
    return float(loc), float(scale)


def _gumbel_fit(v: np.ndarray) -> tuple:
    """:func:`gumbel_mle`, or scipy's fit where it fails (a degenerate sample)."""
    try:
        with np.errstate(all="ignore"):
            loc, scale = gumbel_mle(v)
        if math.isfinite(loc) and math.isfinite(scale) and scale > 0:
            return loc, scale
    except (ValueError, ZeroDivisionError, FloatingPointError):
        pass
    return tuple(float(t) for t in _st.gumbel_r.fit(v))


def fit_tail(values) -> GumbelTail:
    """A :class:`GumbelTail` of null ``values``."""
    return GumbelTail(values)


def extreme_pvalue(x, values) -> np.ndarray:
    """Upper-tail p-value of ``x`` against null ``values`` (see module doc)."""
    return GumbelTail(values).pvalue(x)
