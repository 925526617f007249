"""Global tests over whole curves: max |z| and a regularised Mahalanobis test.

Both standardise a curve pointwise, z_j = (S_j - mean_j) / sd_j, over the grid
points j where the null variance is positive, and use the null correlation
matrix C of z (from a table, or from a training sample).

* max |z|: T = max_j |z_j|.  Under the Gaussian limit z ~ N(0, C), so its null
  law is that of max_j |G_j| for G ~ N(0, C), simulated (seeded) from the
  eigen-decomposition of C.  The p-value is (1 + #{T_i >= T}) / (m + 1) over
  m simulated vectors (Davison & Hinkley 1997, as in the Monte Carlo route).
* Mahalanobis: C is replaced by its leading principal components that
  explain ``keep`` (default 90 %) of the trace (a spectral cut-off, common
  practice for near-singular covariance matrices of smooth curves; 90 %
  because the trailing components of the shipped tables' curves are
  estimated too noisily and are too far from Gaussian for a chi-square
  reference: with 99 % the audited size of the Euler-curve test at 0.05 was
  0.06 even at n = 10,000, with 90 % 0.052); then
  D^2 = sum_i (u_i' z)^2 / lambda_i over the kept components is chi-square
  with r = (number kept) degrees of freedom under the Gaussian limit.

Both tests use only the *usable* grid points of a curve
(:func:`usable_coordinates`): positive null variance, |skewness| <=
SKEW_MAX, and for Betti curves an expected count n E[beta(rho)] >= MIN_COUNT.
Grid points where the summary is a small, skewed count (few loops at small
radii, one component at large radii) have no normal limit and made the
global tests liberal (DESIGN.md, pilot: tails within about 0.005 once the
count is about 100).  A Poisson count with mean 100 has skewness 0.1.
"""
from __future__ import annotations

import numpy as np

from . import tails as _st

__all__ = ["SKEW_MAX", "MIN_COUNT", "skewness", "usable_coordinates", "valid_coordinates", "correlation",
           "maxabs_null", "maxabs_pvalue", "sidak_bound", "Spectral", "spectral", "mahalanobis_pvalue"]


def valid_coordinates(sd: np.ndarray, mean: np.ndarray) -> np.ndarray:
    """Grid points with a usable null variance (sd > 1e-9 (1 + |mean|))."""
    sd = np.asarray(sd, float)
    return np.isfinite(sd) & (sd > 1e-9 * (1.0 + np.abs(np.asarray(mean, float))))


#: Largest |skewness| of a grid point used by the global tests.
SKEW_MAX = 0.1
#: Smallest expected count n E[beta(rho)] of a Betti-curve grid point used.
MIN_COUNT = 100.0


def usable_coordinates(mean, sd, skewness, n: int, count_based: bool) -> np.ndarray:
    """Grid points of a curve that the global tests use (see module doc)."""
    use = valid_coordinates(sd, mean) & (np.abs(np.nan_to_num(np.asarray(skewness, float),
                                                               nan=np.inf)) <= SKEW_MAX)
    if count_based:
        use &= n * np.asarray(mean, float) >= MIN_COUNT
    return use


def skewness(x: np.ndarray) -> np.ndarray:
    """Per-column moment skewness g1 of a sample (0 where the column is constant);
    the estimator of ``calibrate.moments.Moments.skewness``."""
    x = np.asarray(x, float)
    c = x - x.mean(axis=0)
    m2 = np.mean(c ** 2, axis=0)
    m3 = np.mean(c ** 3, axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        g = m3 / m2 ** 1.5
    return np.where(m2 > 0, g, 0.0)


def correlation(cov: np.ndarray) -> np.ndarray:
    """Correlation matrix of a covariance matrix with positive diagonal."""
    s = np.sqrt(np.diag(cov))
    c = cov / np.outer(s, s)
    np.fill_diagonal(c, 1.0)
    return c


def _factor(corr: np.ndarray) -> np.ndarray:
    w, v = np.linalg.eigh(corr)
    return v * np.sqrt(np.clip(w, 0.0, None))


def maxabs_null(corr: np.ndarray, nsim: int, rng: np.random.Generator) -> np.ndarray:
    """Sorted max_j |G_j| of ``nsim`` Gaussian vectors G ~ N(0, corr)."""
    f = _factor(np.asarray(corr, float))
    out = np.empty(nsim)
    step = 4096
    for i in range(0, nsim, step):
        k = min(step, nsim - i)
        g = rng.standard_normal((k, f.shape[1])) @ f.T
        out[i:i + k] = np.abs(g).max(axis=1)
    out.sort()
    return out


def maxabs_pvalue(t, null_sorted: np.ndarray) -> np.ndarray:
    """(1 + #{null >= t}) / (m + 1) for each observed max |z| ``t``."""
    m = len(null_sorted)
    t = np.asarray(t, float)
    ge = m - np.searchsorted(null_sorted, t, side="left")
    return (1.0 + ge) / (m + 1.0)


def sidak_bound(t: float, k: int) -> float:
    """Upper bound of P(max_j |G_j| >= t) for G ~ N(0, C) of dimension k with
    unit variances, whatever the correlation C:

        P(max_j |G_j| >= t) <= 1 - (1 - 2 Phi(-t))^k

    (Sidak's inequality, Z. Sidak, "Rectangular confidence regions for the
    means of multivariate normal distributions", JASA 62, 1967: the
    probability that every |G_j| < t is at least the product of the
    marginal probabilities.)  Computed as -expm1(k log1p(-2 Phi(-t))) so
    that it keeps its precision far in the tail.

    Examples
    --------
    >>> from nullatlas.lookup.inference.globaltests import sidak_bound
    >>> round(sidak_bound(1.959964, 1), 6)
    0.05
    >>> sidak_bound(6.0, 50) < 50 * 1.98e-9
    True
    """
    from .tails import ndtr

    q = 2.0 * float(ndtr(-abs(float(t))))
    return float(-np.expm1(int(k) * np.log1p(-min(q, 1.0)))) if q < 1.0 else 1.0


class Spectral:
    """Kept principal components of a correlation matrix (see module doc)."""

    def __init__(self, vectors: np.ndarray, values: np.ndarray):
        self.vectors = vectors
        self.values = values

    @property
    def rank(self) -> int:
        return len(self.values)

    def statistic(self, z: np.ndarray) -> np.ndarray:
        """D^2 for each row of ``z`` (or for one vector)."""
        proj = np.asarray(z, float) @ self.vectors
        return np.sum(proj ** 2 / self.values, axis=-1)


def spectral(corr: np.ndarray, keep: float = 0.90) -> Spectral:
    """Leading eigenpairs of ``corr`` explaining ``keep`` of its trace."""
    w, v = np.linalg.eigh(np.asarray(corr, float))
    w, v = w[::-1], v[:, ::-1]
    w = np.clip(w, 0.0, None)
    frac = np.cumsum(w) / max(np.sum(w), 1e-300)
    r = int(min(len(w), np.searchsorted(frac, keep) + 1))
    r = max(1, min(r, int(np.sum(w > 1e-12 * max(w[0], 1e-300)))))
    return Spectral(v[:, :r], w[:r])


def mahalanobis_pvalue(d2, rank: int) -> np.ndarray:
    """Upper chi-square(rank) tail probability of D^2."""
    return _st.chi2.sf(np.asarray(d2, float), rank)
