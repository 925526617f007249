"""Point process simulators: the CSR null and two alternatives.

* CSR conditional on n (binomial process): n i.i.d. uniform points in W.
* Thomas cluster process (Thomas 1949; Diggle 2013): Poisson parents of
  intensity ``kappa`` and a Poisson(``mu``) number of offspring per parent,
  displaced by N(0, sigma^2 I); parents are simulated in the window's
  bounding box dilated by 4 sigma so that clusters centred outside W still
  contribute.  K(r) = pi r^2 + (1 - exp(-r^2 / (4 sigma^2))) / kappa in 2D.
* Perturbed lattice (a regular alternative): a triangular (2D) or cubic
  (3D) lattice of the window's intensity, randomly shifted, each site moved
  by a uniform offset of relative size ``jitter``.

Seeds: every replicate gets its own child of a ``numpy.random.SeedSequence``
so that results do not depend on how replicates are split among workers.
"""
from __future__ import annotations

import numpy as np

from .errors import OptionError

__all__ = ["csr", "thomas", "perturbed_lattice", "replicate_seeds"]


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


def thomas(window, kappa: float, mu: float, sigma: float, rng: np.random.Generator) -> np.ndarray:
    """A Thomas cluster process observed in ``window``.

    Parameters
    ----------
    kappa : float
        Parent intensity (parents per unit area/volume).
    mu : float
        Mean number of offspring per parent.
    sigma : float
        Standard deviation of the Gaussian displacement, per coordinate.
    """
    if kappa <= 0 or mu <= 0 or sigma <= 0:
        raise OptionError("Thomas process needs positive kappa, mu and sigma")
    lo, hi = _bounds(window)
    lo, hi = lo - 4 * sigma, hi + 4 * sigma
    vol = float(np.prod(hi - lo))
    npar = rng.poisson(kappa * vol)
    parents = lo + (hi - lo) * rng.random((npar, window.dim))
    counts = rng.poisson(mu, npar)
    kids = np.repeat(parents, counts, axis=0) + sigma * rng.standard_normal((counts.sum(), window.dim))
    return kids[window.contains(kids)] if len(kids) else kids


def perturbed_lattice(window, n_target: int, jitter: float, rng: np.random.Generator) -> np.ndarray:
    """A randomly shifted, jittered lattice of about ``n_target`` points in W."""
    d = window.dim
    lam = n_target / window.measure
    lo, hi = _bounds(window)
    if d == 2:
        a = np.sqrt(2.0 / (np.sqrt(3.0) * lam))  # triangular lattice spacing
        basis = np.array([[a, 0.0], [a / 2, a * np.sqrt(3) / 2]])
    else:
        a = lam ** (-1.0 / 3.0)
        basis = np.eye(3) * a
    span = (hi - lo).max() * 2
    k = int(np.ceil(span / a)) + 2
    idx = np.stack(np.meshgrid(*[np.arange(-k, k + 1)] * d, indexing="ij"), -1).reshape(-1, d)
    pts = idx @ basis + (lo + hi) / 2 + rng.random(d) @ basis
    pts = pts + jitter * a * (rng.random(pts.shape) - 0.5)
    return pts[window.contains(pts)]
