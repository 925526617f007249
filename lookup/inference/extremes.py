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
"""
from __future__ import annotations

import numpy as np
from scipy import stats as _st

__all__ = ["K_TAIL", "GumbelTail", "fit_tail", "extreme_pvalue"]

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
        self.loc, self.scale = _st.gumbel_r.fit(v)
        self.u = v[-K_TAIL]

    @property
    def m(self) -> int:
        return len(self.values)

    def pvalue(self, x) -> np.ndarray:
        """Upper-tail p-value of observed value(s) ``x``."""
        x = np.asarray(x, float)
        k = self.m - np.searchsorted(self.values, x, side="left")
        body = (k + 1.0) / (self.m + 1.0)
        su = _st.gumbel_r.sf(self.u, self.loc, self.scale)
        sx = _st.gumbel_r.sf(x, self.loc, self.scale)
        with np.errstate(divide="ignore", invalid="ignore"):
            tail = (K_TAIL + 1.0) / (self.m + 1.0) * np.where(su > 0, sx / su, 0.0)
        return np.where(k >= K_TAIL, body, np.minimum(tail, (K_TAIL + 1.0) / (self.m + 1.0)))


def fit_tail(values) -> GumbelTail:
    """A :class:`GumbelTail` of null ``values``."""
    return GumbelTail(values)


def extreme_pvalue(x, values) -> np.ndarray:
    """Upper-tail p-value of ``x`` against null ``values`` (see module doc)."""
    return GumbelTail(values).pvalue(x)
