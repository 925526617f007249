"""The CSR null and the seeds of replicates.

* CSR conditional on n (binomial process): n i.i.d. uniform points in W.
* The bounding box of any window, where the alternatives of
  :mod:`nullatlas.lookup.processes.alternatives` place parents, proposals
  and lattices.

Seeds: every replicate gets its own child of a ``numpy.random.SeedSequence``
so that results do not depend on how replicates are split among workers.
"""
from __future__ import annotations

import numpy as np

__all__ = ["csr", "replicate_seeds"]


def replicate_seeds(seed, m: int) -> list[np.random.SeedSequence]:
    """``m`` independent child seeds of ``seed`` (int, SeedSequence or None)."""
    ss = seed if isinstance(seed, np.random.SeedSequence) else np.random.SeedSequence(seed)
    return ss.spawn(m)


def csr(window, n: int, rng: np.random.Generator) -> np.ndarray:
    """n i.i.d. uniform points in ``window`` (CSR conditional on n)."""
    return window.sample(int(n), rng)


def _bounds(window):
    if hasattr(window, "lo"):
        return np.asarray(window.lo), np.asarray(window.hi)
    if hasattr(window, "centre"):
        return window.centre - window.r, window.centre + window.r
    if hasattr(window, "geometry"):
        b = window.geometry.bounds
        return np.array(b[:2]), np.array(b[2:])
    pts = window.sample(4096, np.random.default_rng(12345))
    return pts.min(axis=0), pts.max(axis=0)
