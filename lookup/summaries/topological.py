"""Persistence summaries of a diagram, each on its fixed grid (see ``grids``).

All additive summaries are divided by n (per-point densities), so that they
have finite limits as n grows (DESIGN.md).  Radii are normalised radii rho.

Formulas
--------
Betti curve (Edelsbrunner & Harer, *Computational Topology*, 2010)
    beta_q(rho) = #{pairs (b, d) of dim q : b <= rho < d} / n
Euler characteristic curve (Euler–Poincaré formula)
    chi(rho) = sum_q (-1)^q beta_q(rho)
Persistent Betti numbers (Edelsbrunner & Harer 2010)
    beta_q(s, t) = #{(b, d) : b <= s, d > t} / n,  s <= t
Accumulated persistence function (Biscio & Møller, JCGS 28, 2019)
    APF_q(m) = (1/n) sum_{(b,d) : (b+d)/2 <= m} (d - b)
Total persistence (Cohen-Steiner et al., Found. Comput. Math. 10, 2010)
    T_q = (1/n) sum (d - b)^alpha,  alpha = 1
Maximal persistence (Bobrowski, Kahle & Skraba, AAP 27, 2017)
    max lifetime max(d - b) and max ratio max(d / b)
Power-weighted silhouette (Chazal et al., SoCG 2014)
    phi(t) = sum_j w_j L_j(t) / sum_j w_j,  w_j = (d_j - b_j)^p,
    L_j(t) = max(0, min(t - b_j, d_j - t)),  p = 1
"""
from __future__ import annotations

import numpy as np

from ..persistence.diagram import Diagram
from . import grids

__all__ = [
    "betti_curve", "euler_curve", "persistent_betti", "apf", "total_persistence",
    "max_lifetime", "max_ratio", "silhouette",
]


def betti_curve(diag: Diagram, q: int, grid: np.ndarray = grids.RHO) -> np.ndarray:
    """beta_q(rho)/n on ``grid`` (infinite classes included)."""
    return diag.betti_counts(q, grid) / diag.n


def euler_curve(diag: Diagram, grid: np.ndarray = grids.RHO) -> np.ndarray:
    """chi(rho)/n = sum_q (-1)^q beta_q(rho)/n on ``grid``."""
    return sum((-1) ** q * betti_curve(diag, q, grid) for q in diag.homology_dims)


def persistent_betti(diag: Diagram, q: int, pairs: np.ndarray = grids.PBETTI_PAIRS) -> np.ndarray:
    """beta_q(s, t)/n for each (s, t) row of ``pairs``."""
    p = diag.pairs[q] if q < len(diag.pairs) else np.empty((0, 2))
    if len(p) == 0:
        return np.zeros(len(pairs))
    # #{b <= s, d > t}: the deaths of the pairs born by s, counted per query
    # (memory of one pass over the pairs, not pairs x queries)
    order = np.argsort(p[:, 0], kind="stable")
    b, d = p[order, 0], p[order, 1]
    born = np.searchsorted(b, pairs[:, 0], side="right")
    counts = np.array([np.count_nonzero(d[:k] > t) for k, t in zip(born, pairs[:, 1])])
    return counts / diag.n


def apf(diag: Diagram, q: int, grid: np.ndarray = grids.APF_AGE) -> np.ndarray:
    """APF_q(m) on ``grid``: per-point lifetime of features of mean age <= m."""
    p = diag.finite(q)
    if len(p) == 0:
        return np.zeros(len(grid))
    age = 0.5 * (p[:, 0] + p[:, 1])
    life = p[:, 1] - p[:, 0]
    order = np.argsort(age)
    cum = np.concatenate([[0.0], np.cumsum(life[order])])
    return cum[np.searchsorted(age[order], grid, side="right")] / diag.n


def total_persistence(diag: Diagram, q: int, alpha: float = 1.0) -> float:
    """(1/n) sum over finite pairs of (d - b)^alpha."""
    if alpha == 1.0:
        return diag.total_lifetime(q) / diag.n
    p = diag.finite(q)
    return float(np.sum((p[:, 1] - p[:, 0]) ** alpha) / diag.n)


def max_lifetime(diag: Diagram, q: int) -> float:
    """Largest finite lifetime d - b of dimension q (0 if none)."""
    p = diag.finite(q)
    return float(np.max(p[:, 1] - p[:, 0])) if len(p) else 0.0


def max_ratio(diag: Diagram, q: int) -> float:
    """Largest death/birth ratio of dimension q >= 1 (1 if none)."""
    p = diag.finite(q)
    p = p[p[:, 0] > 0]
    return float(np.max(p[:, 1] / p[:, 0])) if len(p) else 1.0


def silhouette(diag: Diagram, q: int, grid: np.ndarray = grids.SILHOUETTE_T,
               power: float = 1.0) -> np.ndarray:
    """Power-weighted silhouette of the finite pairs of dimension q."""
    p = diag.finite(q)
    if len(p) == 0:
        return np.zeros(len(grid))
    p = p[p[:, 1] > p[:, 0]]
    if len(p) == 0:
        return np.zeros(len(grid))
    b, d = p[:, 0], p[:, 1]
    w = (d - b) ** power
    # tents in blocks of pairs: memory of one block, whatever the number of pairs
    acc = np.zeros(len(grid))
    for lo in range(0, len(b), _BLOCK):
        bb, dd = b[lo:lo + _BLOCK], d[lo:lo + _BLOCK]
        tent = np.maximum(0.0, np.minimum(grid[:, None] - bb[None, :], dd[None, :] - grid[:, None]))
        # numpy's pairwise sum, not a BLAS product: the same digits in every
        # process (a BLAS kernel's rounding can depend on memory alignment)
        acc += (tent * w[lo:lo + _BLOCK]).sum(axis=1)
    return acc / w.sum()


#: Pairs per block of the silhouette's tents (60 grid points x 65,536 pairs: 31 MB).
_BLOCK = 65_536
