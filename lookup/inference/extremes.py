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

The maximum-likelihood fit needs ``scipy.stats`` (about a second to import)
and depends only on the null values, so its (loc, scale) is kept in the
cache folder (:func:`lookup.persistence.jit.cache_root`, ``gumbel/``) under
a hash of the values: a later process with the same null values reads the
same two doubles back instead of fitting again.
"""
from __future__ import annotations

import hashlib
import os

import numpy as np

from ..persistence.jit import cache_root
from . import tails as _st

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


def _gumbel_fit(v: np.ndarray) -> tuple:
    """``scipy.stats.gumbel_r.fit(v)``, kept on disk under a hash of ``v`` (see module doc)."""
    key = hashlib.sha256(np.ascontiguousarray(v, dtype="<f8").tobytes()).hexdigest()[:32]
    path = os.path.join(cache_root(), "gumbel", key)
    try:
        with open(path) as fh:
            loc, scale = (float.fromhex(t) for t in fh.read().split())
        return loc, scale
    except (OSError, ValueError):
        pass
    loc, scale = (float(t) for t in _st.gumbel_r.fit(v))
    try:                      # best effort: a read-only cache only costs the fit again
        os.makedirs(os.path.dirname(path), exist_ok=True)
        tmp = f"{path}.{os.getpid()}.tmp"
        with open(tmp, "w") as fh:
            fh.write(f"{loc.hex()} {scale.hex()}\n")
        os.replace(tmp, path)
    except OSError:
        pass
    return loc, scale


def fit_tail(values) -> GumbelTail:
    """A :class:`GumbelTail` of null ``values``."""
    return GumbelTail(values)


def extreme_pvalue(x, values) -> np.ndarray:
    """Upper-tail p-value of ``x`` against null ``values`` (see module doc)."""
    return GumbelTail(values).pvalue(x)
