"""Normal and chi-square tails without importing scipy.stats (a light stand-in).

Importing ``scipy.stats`` costs about a second and ``scipy.special`` about a
third of one; the instant route needs only a few tail functions, computed
here from the C library's ``erf``/``erfc``/``exp`` (``math``):

* the standard normal distribution function, with the branches of the
  Cephes ``ndtr`` (Moshier, *Methods and Programs for Mathematical
  Functions*, 1989): Phi(x) = 1/2 + erf(x/sqrt 2)/2 for |x| < 1, else
  erfc(|x|/sqrt 2)/2 reflected, so the tails keep full relative precision;
* its quantile function (``statistics.NormalDist``, Wichura's AS 241,
  Appl. Statist. 37, 1988) and density;
* the chi-square survival function with integer degrees of freedom k, the
  finite Poisson sums (Abramowitz & Stegun 26.4.4 and 26.4.5):
  k = 2m:   Q = exp(-x/2) sum_{j<m} (x/2)^j / j!,
  k = 2m+1: Q = erfc(sqrt(x/2)) + exp(-x/2) sum_{j<m} (x/2)^(j+1/2) / Gamma(j+3/2),
  every term positive, so no cancellation (other k: ``scipy.special.chdtrc``).

They agree with ``scipy.stats`` to a few units in the last place
(``tests/test_aot.py``), not bit for bit: the C library's erfc is not
Cephes' erfc.  Any other name (``tails.gumbel_r``, ``tails.norm.logsf``, ...)
is looked up in ``scipy.stats`` on first use, so this module can stand where
``scipy.stats`` was imported.
"""
from __future__ import annotations

import math

import numpy as np

__all__ = ["ndtr", "norm", "chi2", "chi2_sf"]

_SQRT1_2 = math.sqrt(0.5)


def _ndtr1(a: float) -> float:
    if math.isnan(a):
        return math.nan
    x = a * _SQRT1_2
    z = abs(x)
    if z < 1.0:
        return 0.5 + 0.5 * math.erf(x)
    y = 0.5 * math.erfc(z)
    return 1.0 - y if x > 0 else y


def _vectorise(f, x):
    arr = np.asarray(x, dtype=float)
    if arr.ndim == 0:
        return np.float64(f(float(arr)))
    return np.array([f(float(v)) for v in arr.ravel()], dtype=float).reshape(arr.shape)


def ndtr(x):
    """Standard normal distribution function Phi(x) (scalar or array)."""
    return _vectorise(_ndtr1, x)


def _chi2_sf1(x: float, k: int) -> float:
    if math.isnan(x):
        return math.nan
    if x <= 0.0:
        return 1.0
    h = 0.5 * x
    if k % 2 == 0:
        term, s = 1.0, 1.0
        for j in range(1, k // 2):
            term *= h / j
            s += term
        return math.exp(-h) * s if h < 745.2 else math.exp(-h + math.log(s))
    # odd k
    rh = math.sqrt(h)
    q = math.erfc(rh)
    if k == 1:
        return q
    term = rh / math.gamma(1.5)          # (x/2)^(1/2) / Gamma(3/2)
    s = term
    for j in range(1, (k - 1) // 2):
        term *= h / (j + 0.5)
        s += term
    return q + (math.exp(-h) * s if h < 745.2 else math.exp(-h + math.log(s)))


def chi2_sf(x, k):
    """Chi-square(k) survival function P(X > x) (see module doc)."""
    kf = float(k)
    if kf != int(kf) or kf < 1:
        from scipy.special import chdtrc

        return chdtrc(kf, np.asarray(x, float))
    return _vectorise(lambda v: _chi2_sf1(v, int(kf)), x)


class _Dist:
    """A distribution of scipy.stats with a few methods computed here; any other
    attribute comes from scipy.stats."""

    _name = ""

    def __getattr__(self, name):
        import scipy.stats

        return getattr(getattr(scipy.stats, self._name), name)


class _Norm(_Dist):
    _name = "norm"

    def cdf(self, x, loc=0.0, scale=1.0):
        return ndtr((np.asarray(x, float) - loc) / scale)

    def sf(self, x, loc=0.0, scale=1.0):
        return ndtr(-(np.asarray(x, float) - loc) / scale)

    def pdf(self, x, loc=0.0, scale=1.0):
        z = (np.asarray(x, float) - loc) / scale
        out = np.exp(-0.5 * z * z) / math.sqrt(2.0 * math.pi) / scale
        return out[()] if out.ndim == 0 else out

    def ppf(self, q, loc=0.0, scale=1.0):
        from statistics import NormalDist

        def f(v):
            if not 0.0 < v < 1.0:
                return -math.inf if v == 0.0 else (math.inf if v == 1.0 else math.nan)
            return NormalDist().inv_cdf(v)
        return loc + scale * _vectorise(f, q)

    def isf(self, q, loc=0.0, scale=1.0):
        return loc - scale * self.ppf(q)


class _Chi2(_Dist):
    _name = "chi2"

    def sf(self, x, df):
        return chi2_sf(x, df)


#: The standard normal distribution (cdf, sf, pdf, ppf, isf computed here).
norm = _Norm()
#: The chi-square distribution (sf computed here).
chi2 = _Chi2()


def __getattr__(name):
    if name.startswith("__"):
        raise AttributeError(name)
    import scipy.stats

    return getattr(scipy.stats, name)
