"""The whole pattern's summaries from the tiles' parts.

* Euler characteristic: chi(rho) = n - E(rho) + T(rho), the tiles' counts
  of owned edges and triangles with normalised radius <= rho summed (every
  simplex has one owner).
* H0: Kruskal over the union of the tiles' spanning forests gives the
  minimum spanning tree's weights -- the H0 deaths -- as one process does
  (a spanning tree's weight multiset does not depend on how ties are
  broken); beta_0(rho) = n - #{deaths <= rho}.
* beta_1(rho) = beta_0(rho) - chi(rho) (Euler-Poincare in 2D).

:class:`TiledDiagram` answers the questions the statistics ask of a
diagram (Betti counts, total H0 lifetime) with the same arithmetic, in the
same order, as :class:`~nullatlas.lookup.persistence.diagram.Diagram`, so the
values are bit for bit those of one process.  The H1 pairs themselves are
not formed: statistics that need them (total H1 persistence, the largest
loop, APF, silhouettes) are left to the single-process path.
"""
from __future__ import annotations

import numpy as np

from ..errors import OptionError
from ..persistence.diagram import Diagram

__all__ = ["TiledDiagram", "TiledSummary", "merge_parts", "TILED_STATISTICS"]

#: Statistics computed exactly from tiles (2D).
TILED_STATISTICS = ("euler", "betti0", "betti1", "total0", "nnmean", "gfunc")


class TiledDiagram(Diagram):
    """What the statistics need of a 2D alpha diagram, from tiles.

    ``deaths`` are the H0 deaths (normalised radii, increasing); ``chi`` the
    Euler characteristic at each ``grid`` value.
    """

    def __init__(self, deaths: np.ndarray, chi: np.ndarray, grid: np.ndarray, n: int,
                 scale: float):
        super().__init__(pairs=[], n=int(n), dim=2, scale=scale, meta={"engine": "tiled"})
        self.deaths = deaths
        self.chi = chi
        self.grid = grid

    @property
    def homology_dims(self) -> range:
        return range(2)

    def _beta0(self, grid):
        d = np.append(self.deaths, np.inf)
        return np.where(np.asarray(grid) >= 0, self.n, 0) - np.searchsorted(d, grid, side="right")

    def betti_counts(self, q: int, grid: np.ndarray) -> np.ndarray:
        if q == 0:
            return self._beta0(grid)
        if q == 1 and np.array_equal(grid, self.grid):
            return self._beta0(grid) - self.chi
        raise OptionError(f"a tiled run has the Betti-{q} numbers only on the curves' grid")

    def total_lifetime(self, q: int) -> float:
        if q == 0:
            return float(np.sum(self.deaths - 0.0))
        raise OptionError("a tiled run does not form the H1 pairs; total H1 persistence needs "
                          "the single-process run")

    def finite(self, q: int) -> np.ndarray:
        if q == 0:
            return np.column_stack([np.zeros(len(self.deaths)), self.deaths])
        raise OptionError("a tiled run does not form the H1 pairs")


class TiledSummary:
    """The ``PatternSummary`` interface the tiled statistics use."""

    def __init__(self, diagram: TiledDiagram, nn, bdist, window, scale: float):
        self.diagram = diagram
        self.nn = nn
        self.bdist = bdist
        self.window = window
        self.scale = scale
        self.n = diagram.n
        self.dim = 2
        self.periodic = False
        self.want_h1_pairs = False


def merge_parts(parts: list, n: int, grid: np.ndarray, scale: float) -> tuple:
    """(H0 deaths as normalised radii, chi on ``grid``, nn, bdist) from the tiles."""
    from ..persistence.pairing import _kruskal, radix_argsort

    e = sum(p["e_counts"] for p in parts)
    t = sum(p["t_counts"] for p in parts)
    chi = n - e + t
    u = np.concatenate([p["cand_u"] for p in parts]).astype(np.int64)
    v = np.concatenate([p["cand_v"] for p in parts]).astype(np.int64)
    val = np.concatenate([p["cand_val"] for p in parts])
    for p in parts:                      # free the tiles' copies as we go
        p.pop("cand_u"), p.pop("cand_v"), p.pop("cand_val")
    d0, _ = _kruskal(int(n), u, v, val, radix_argsort(val))
    del u, v, val
    deaths = np.sqrt(d0) * scale
    nn = bdist = None
    if parts and "nn" in parts[0]:
        nn = np.empty(n)
        for p in parts:
            nn[p["own"]] = p["nn"]
    if parts and "bdist" in parts[0]:
        bdist = np.empty(n)
        for p in parts:
            bdist[p["own"]] = p["bdist"]
    return deaths, chi, nn, bdist
