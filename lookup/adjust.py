"""Multiple-testing adjustments of the p-values of a batch.

* Holm (1979), step-down family-wise error control: with p sorted
  increasingly, p~_(i) = max_{j <= i} min(1, (m - j + 1) p_(j)).
* Benjamini & Hochberg (J. R. Statist. Soc. B 57, 1995), false discovery
  rate: p~_(i) = min_{j >= i} min(1, m p_(j) / j); the same values as
  ``scipy.stats.false_discovery_control(p, method="bh")``.

Missing p-values (NaN: a file that failed) are left out of m and stay NaN.
"""
from __future__ import annotations

import numpy as np

__all__ = ["holm", "benjamini_hochberg"]


def _prep(p):
    p = np.asarray(p, float)
    ok = np.isfinite(p)
    if np.any((p[ok] < 0) | (p[ok] > 1)):
        raise ValueError("p-values must lie in [0, 1]")
    return p, ok


def holm(p) -> np.ndarray:
    """Holm-adjusted p-values (NaN kept)."""
    p, ok = _prep(p)
    out = np.full(p.shape, np.nan)
    q = p[ok]
    m = len(q)
    if m:
        order = np.argsort(q, kind="stable")
        adj = np.minimum(1.0, np.maximum.accumulate((m - np.arange(m)) * q[order]))
        res = np.empty(m)
        res[order] = adj
        out[ok] = res
    return out


def benjamini_hochberg(p) -> np.ndarray:
    """Benjamini–Hochberg adjusted p-values (NaN kept)."""
    p, ok = _prep(p)
    out = np.full(p.shape, np.nan)
    q = p[ok]
    m = len(q)
    if m:
        order = np.argsort(q, kind="stable")
        ranked = q[order] * m / np.arange(1, m + 1)
        adj = np.minimum(1.0, np.minimum.accumulate(ranked[::-1])[::-1])
        res = np.empty(m)
        res[order] = adj
        out[ok] = res
    return out
