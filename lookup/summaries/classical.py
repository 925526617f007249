"""Classical distance summaries, in normalised units, for comparison.

With lambda = n / |W| and the normalised distance rho = r lambda^(1/d):

Clark–Evans mean nearest-neighbour distance (Clark & Evans, Ecology 35, 1954)
    nnmean = lambda^(1/d) * mean_i min_{j != i} |x_i - x_j|
    (no edge correction: the finite-window model of the tables absorbs the
    boundary term, cf. Donnelly 1978);  CSR limit 0.5 in 2D,
    Gamma(4/3) (4 pi / 3)^(-1/3) = 0.55396 in 3D.
Nearest-neighbour distribution function, border (reduced-sample) corrected
(Diggle, *Statistical Analysis of Spatial and Spatio-Temporal Point
Patterns*, 3rd ed., 2013)
    G(r) = #{i : nn_i <= r, b_i >= r} / #{i : b_i >= r},
    b_i the distance of x_i to the boundary;  CSR: 1 - exp(-lambda |B_r|).
Besag's L function from Ripley's K, border corrected (Ripley, JRSS B 39,
1977; Besag 1977)
    lambda K(r) = sum_{i : b_i >= r} #{j != i : |x_i - x_j| <= r} / #{i : b_i >= r}
    L(rho) = (lambda K / pi)^(1/2) (2D),  (3 lambda K / (4 pi))^(1/3) (3D);
    CSR: L(rho) = rho.
Grid points with no interior point (#{i : b_i >= r} = 0) are NaN.
On a periodic window (a torus, ``lookup.patterns.periodic``) the k-d tree is periodic,
distances are minimum-image distances and b_i = inf: G and K then use every
point and every pair, with no edge correction needed (no boundary).
"""
from __future__ import annotations

import math

import numpy as np
from scipy.spatial import cKDTree

from ..persistence.jit import njit
from . import grids

__all__ = ["close_pairs", "nn_distances", "nn_from_pairs", "nn_mean", "g_function", "l_function"]


def nn_distances(points: np.ndarray, tree: cKDTree | None = None) -> np.ndarray:
    """Distance of each point to its nearest other point."""
    tree = tree or cKDTree(points)
    d, _ = tree.query(points, k=2)
    return d[:, 1]


def close_pairs(points: np.ndarray, radius: float, tree: cKDTree | None = None):
    """All unordered pairs closer than ``radius``: (pairs (m, 2) int, distances (m,))."""
    tree = tree or cKDTree(points)
    pairs = tree.query_pairs(radius, output_type="ndarray")
    if len(pairs) == 0:
        return np.zeros((0, 2), dtype=np.intp), np.zeros(0)
    if tree.boxsize is None:
        diff = points[pairs[:, 0]] - points[pairs[:, 1]]
    else:                     # periodic tree (a torus): minimum-image differences
        x = tree.data
        diff = x[pairs[:, 0]] - x[pairs[:, 1]]
        box = tree.boxsize[: x.shape[1]]
        diff -= box * np.round(diff / box)
    dist = np.sqrt(np.sum(diff ** 2, axis=1))
    return pairs, dist


def nn_from_pairs(points: np.ndarray, pairs: np.ndarray, dist: np.ndarray,
                  tree: cKDTree | None = None) -> np.ndarray:
    """Nearest-neighbour distances from the close pairs of :func:`close_pairs`;
    points with no close pair are queried in the tree (same result as
    :func:`nn_distances`, faster when most points have a close pair)."""
    nn = _pair_minimum(len(points), np.ascontiguousarray(pairs, dtype=np.int64),
                       np.ascontiguousarray(dist, dtype=float))
    miss = np.flatnonzero(~np.isfinite(nn))
    if len(miss):
        tree = tree or cKDTree(points)
        d, _ = tree.query(tree.data[miss], k=2)   # the tree's coordinates (periodic: wrapped)
        nn[miss] = d[:, 1]
    return nn


@njit(cache=True, nogil=True)
def _pair_minimum(n, pairs, dist):  # pragma: no cover - compiled
    nn = np.full(n, np.inf)
    for k in range(pairs.shape[0]):
        i, j, d = pairs[k, 0], pairs[k, 1], dist[k]
        if d < nn[i]:
            nn[i] = d
        if d < nn[j]:
            nn[j] = d
    return nn


def nn_mean(nn: np.ndarray, scale: float) -> float:
    """Clark–Evans mean nearest-neighbour distance in normalised units."""
    return float(np.mean(nn) * scale)


def g_function(nn: np.ndarray, bdist: np.ndarray, scale: float,
               grid: np.ndarray = grids.NN_RHO) -> np.ndarray:
    """Border-corrected G on the normalised ``grid``."""
    rn = nn * scale
    bn = bdist * scale
    bs = np.sort(bn)
    denom = len(bs) - np.searchsorted(bs, grid, side="left")  # b_i >= rho
    # numerator: nn_i <= rho <= b_i, counted with a difference array
    lo = np.searchsorted(grid, rn, side="left")     # first grid >= nn_i
    hi = np.searchsorted(grid, bn, side="right")    # first grid > b_i
    ok = lo < hi
    m = len(grid) + 1
    diff = (np.bincount(lo[ok], minlength=m) - np.bincount(hi[ok], minlength=m)).astype(float)
    num = np.cumsum(diff)[:-1]
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(denom > 0, num / np.maximum(denom, 1), np.nan)


def l_function(points: np.ndarray, bdist: np.ndarray, scale: float,
               tree: cKDTree | None = None, grid: np.ndarray = grids.L_RHO,
               pairs=None) -> np.ndarray:
    """Border-corrected Besag L on the normalised ``grid`` (CSR: L = rho).

    ``pairs``: optional (pairs, distances) of :func:`close_pairs` for a radius of
    at least ``grid[-1] / scale`` (shared with the nearest-neighbour summaries)."""
    n, d = points.shape
    rmax = grid[-1] / scale
    if pairs is None:
        pairs = close_pairs(points, rmax, tree)
    pr, dist = pairs
    bn = bdist * scale
    bs = np.sort(bn)
    denom = n - np.searchsorted(bs, grid, side="left")
    m = len(grid) + 1
    diff = np.zeros(m)
    if len(pr):
        dist = dist * scale
        lo = np.searchsorted(grid, dist, side="left")
        for end in (0, 1):  # each unordered pair counts once from each end
            hi = np.searchsorted(grid, bn[pr[:, end]], side="right")
            ok = lo < hi
            diff += np.bincount(lo[ok], minlength=m) - np.bincount(hi[ok], minlength=m)
    num = np.cumsum(diff)[:-1]
    with np.errstate(invalid="ignore", divide="ignore"):
        lk = np.where(denom > 0, num / np.maximum(denom, 1), np.nan)
    if d == 2:
        return np.sqrt(lk / math.pi)
    return np.cbrt(3.0 * lk / (4.0 * math.pi))
