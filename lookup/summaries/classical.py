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
from typing import TYPE_CHECKING

import numpy as np

from ..persistence.jit import njit
from . import grids

if TYPE_CHECKING:  # scipy.spatial is imported only where a k-d tree is needed
    from scipy.spatial import cKDTree

__all__ = ["close_pairs", "nn_distances", "nn_from_pairs", "nn_mean", "g_function", "l_function"]


def nn_distances(points: np.ndarray, tree: cKDTree | None = None) -> np.ndarray:
    """Distance of each point to its nearest other point."""
    if tree is None:
        from scipy.spatial import cKDTree

        tree = cKDTree(points)
    d, _ = tree.query(points, k=2)
    return d[:, 1]


def close_pairs(points: np.ndarray, radius: float, tree: cKDTree | None = None):
    """All unordered pairs closer than ``radius``: (pairs (m, 2) int, distances (m,)).

    With a k-d ``tree`` (a periodic one on a torus), the tree's
    ``query_pairs``; without, the compiled cell-grid search
    :func:`_grid_pairs`, which finds the same pairs (i < j, squared distance
    summed over the axes in order, at most ``radius ** 2``) without importing
    scipy.spatial.  Pairs come in no particular order."""
    if tree is None:
        pairs = _grid_pairs(np.ascontiguousarray(points, dtype=np.float64), float(radius))
    else:
        pairs = tree.query_pairs(radius, output_type="ndarray")
    if len(pairs) == 0:
        return np.zeros((0, 2), dtype=np.intp), np.zeros(0)
    if tree is None or tree.boxsize is None:
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
        if tree is None and len(miss) * len(points) <= BRUTE_MAX:
            # few points without a close pair: a compiled scan of all points
            # (the same squared distances as the tree's, so the same roots)
            x = np.ascontiguousarray(points, dtype=np.float64)
            nn[miss] = np.sqrt(_nearest_sq(x, miss.astype(np.int64)))
            return nn
        if tree is None:
            from scipy.spatial import cKDTree

            tree = cKDTree(points)
        d, _ = tree.query(tree.data[miss], k=2)   # the tree's coordinates (periodic: wrapped)
        nn[miss] = d[:, 1]
    return nn


#: Largest (points without a close pair) x (points) scanned directly by
#: :func:`nn_from_pairs` rather than through a k-d tree.
BRUTE_MAX = 20_000_000


@njit(cache=True)
def _nearest_sq(x, targets):  # pragma: no cover - compiled
    """Squared distance of each target row of ``x`` to its nearest other row."""
    n, d = x.shape
    out = np.full(targets.shape[0], np.inf)
    for t in range(targets.shape[0]):
        i = targets[t]
        best = np.inf
        for j in range(n):
            if j == i:
                continue
            s = 0.0
            for a in range(d):
                diff = x[i, a] - x[j, a]
                s += diff * diff
            if s < best:
                best = s
        out[t] = best
    return out


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


@njit(cache=True)
def _grid_pairs(x, r):  # pragma: no cover - compiled
    """Pairs i < j of rows of ``x`` with squared distance <= r * r: points binned
    in cells of side at least r (at most about 4 n cells), each pair found
    from the cell of i and its 3^d neighbours; counted, then written."""
    n, d = x.shape
    out = np.empty((0, 2), np.int64)
    if n < 2:
        return out
    lo = np.empty(d)
    hi = np.empty(d)
    for a in range(d):
        lo[a] = x[0, a]
        hi[a] = x[0, a]
    for i in range(1, n):
        for a in range(d):
            v = x[i, a]
            if v < lo[a]:
                lo[a] = v
            if v > hi[a]:
                hi[a] = v
    side = r if r > 0.0 else 1.0
    while True:                       # keep the number of cells near the number of points
        total = 1
        for a in range(d):
            total *= int((hi[a] - lo[a]) / side) + 1
        if total <= 4 * n + 16:
            break
        side *= 2.0
    nc = np.empty(d, np.int64)
    for a in range(d):
        nc[a] = int((hi[a] - lo[a]) / side) + 1
    cell = np.empty(n, np.int64)
    for i in range(n):
        c = 0
        for a in range(d):
            k = int((x[i, a] - lo[a]) / side)
            if k >= nc[a]:
                k = nc[a] - 1
            c = c * nc[a] + k
        cell[i] = c
    start = np.zeros(total + 1, np.int64)
    for i in range(n):
        start[cell[i] + 1] += 1
    for c in range(total):
        start[c + 1] += start[c]
    fill = start[:-1].copy()
    members = np.empty(n, np.int64)
    for i in range(n):
        members[fill[cell[i]]] = i
        fill[cell[i]] += 1
    r2 = r * r
    offs = 1
    for a in range(d):
        offs *= 3
    coord = np.empty(d, np.int64)
    for sweep in range(2):
        m = 0
        for i in range(n):
            c = cell[i]
            for a in range(d - 1, -1, -1):
                coord[a] = c % nc[a]
                c //= nc[a]
            for o in range(offs):
                t = o
                nb = 0
                ok = True
                for a in range(d):
                    k = coord[a] + (t % 3) - 1
                    t //= 3
                    if k < 0 or k >= nc[a]:
                        ok = False
                        break
                    nb = nb * nc[a] + k
                if not ok:
                    continue
                for q in range(start[nb], start[nb + 1]):
                    j = members[q]
                    if j <= i:
                        continue
                    s = 0.0
                    for a in range(d):
                        diff = x[i, a] - x[j, a]
                        s += diff * diff
                    if s <= r2:
                        if sweep == 1:
                            out[m, 0] = i
                            out[m, 1] = j
                        m += 1
        if sweep == 0:
            out = np.empty((m, 2), np.int64)
    return out


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
