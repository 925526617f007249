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


def _adjusted(p, step) -> np.ndarray:
    """Apply ``step(sorted finite p, m)`` and put the result back in place."""
    p, ok = _prep(p)
    out = np.full(p.shape, np.nan)
    q = p[ok]
    if len(q):
        order = np.argsort(q, kind="stable")
        res = np.empty(len(q))
        res[order] = step(q[order], len(q))
        out[ok] = res
    return out


def holm(p) -> np.ndarray:
    """Holm-adjusted p-values (NaN kept)."""
    return _adjusted(p, lambda s, m: np.minimum(1.0, np.maximum.accumulate((m - np.arange(m)) * s)))


def benjamini_hochberg(p) -> np.ndarray:
    """Benjamini–Hochberg adjusted p-values (NaN kept)."""
    return _adjusted(p, lambda s, m: np.minimum(
        1.0, np.minimum.accumulate((s * m / np.arange(1, m + 1))[::-1])[::-1]))
