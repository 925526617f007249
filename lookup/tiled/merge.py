"""The whole pattern's summaries from the tiles' parts.

* Euler characteristic: chi(rho) = n - E(rho) + T(rho), the tiles' counts
  of owned edges and triangles with normalised radius <= rho summed (every
  simplex has one owner).
* H0: Kruskal over the union of the tiles' spanning forests gives the
  minimum spanning tree's weights -- the H0 deaths -- as one process does
  (a spanning tree's weight multiset does not depend on how ties are
  broken); beta_0(rho) = n - #{deaths <= rho}.
* beta_1(rho) = beta_0(rho) - chi(rho) (Euler-Poincare in 2D).
* H1 pairs (when a statistic needs them): the elder-rule union-find on the
  dual graph swept in decreasing order (``persistence.pairing._dual_pairs``,
  as one process does) over the union of the tiles' dual spanning forests
  (``local._dual_forest``), in the total order (value, smaller global
  vertex, larger global vertex) that each tile used; a face is named by its
  sorted global vertices.  The H1 diagram of a filtration does not depend on
  how ties are broken, and one process's H1 rows are sorted by (birth,
  death) (``persistence.diagram.alpha_diagram``) as these are, so sums over
  them are bit for bit equal too.

:class:`TiledDiagram` answers the questions the statistics ask of a
diagram (Betti counts, total lifetimes, the pairs) with the same arithmetic,
in the same order, as :class:`~nullatlas.lookup.persistence.diagram.Diagram`,
so the values are bit for bit those of one process.
"""
from __future__ import annotations

import numpy as np

from ..errors import OptionError
from ..persistence.diagram import Diagram

__all__ = ["TiledDiagram", "TiledSummary", "merge_parts", "merge_h1", "TILED_STATISTICS",
           "H1_STATISTICS"]

#: Statistics computed exactly from tiles (2D).
TILED_STATISTICS = ("euler", "betti0", "betti1", "total0", "nnmean", "gfunc", "total1",
                    "maxpers1", "maxratio1", "apf0", "apf1", "pbetti0", "pbetti1", "silhouette1")
#: Those of them that need the H1 pairs (the dual merge).
H1_STATISTICS = ("total1", "maxpers1", "maxratio1", "apf1", "pbetti1", "silhouette1")


class TiledDiagram(Diagram):
    """What the statistics need of a 2D alpha diagram, from tiles.

    ``deaths`` are the H0 deaths (normalised radii, increasing); ``chi`` the
    Euler characteristic at each ``grid`` value.
    """

    def __init__(self, deaths: np.ndarray, chi: np.ndarray, grid: np.ndarray, n: int,
                 scale: float, h1: np.ndarray | None = None):
        h0 = np.zeros((len(deaths) + 1, 2))
        h0[:-1, 1] = deaths
        h0[-1, 1] = np.inf
        super().__init__(pairs=[h0] if h1 is None else [h0, h1], n=int(n), dim=2, scale=scale,
                         meta={"engine": "tiled"})
        self.deaths = deaths
        self.chi = chi
        self.grid = grid
        self.h1 = h1

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
        return super().total_lifetime(self._need_h1(q))

    def finite(self, q: int) -> np.ndarray:
        if q == 0:
            return np.column_stack([np.zeros(len(self.deaths)), self.deaths])
        return super().finite(self._need_h1(q))

    def _need_h1(self, q: int) -> int:
        if q != 1 or self.h1 is None:
            raise OptionError("this tiled run did not form the H1 pairs")
        return q


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


def merge_h1(parts: list, scale: float) -> np.ndarray:
    """H1 pairs (normalised radii, rows sorted by birth then death) from the
    tiles' dual forests (module doc)."""
    from ..persistence.alpha2d import sort_rows
    from ..persistence.pairing import _dual_pairs

    def take(key):
        out = np.concatenate([p.pop(key) for p in parts]) if parts else np.empty(0)
        return out

    val, gmin, gmax = take("h1_val"), take("h1_gmin"), take("h1_gmax")
    apa, apb, va, vb = take("h1_apa"), take("h1_apb"), take("h1_va"), take("h1_vb")
    m = len(val)
    # each face by its sorted global vertices; the outer face is (-1, -1, -1)
    keys = np.empty((2 * m, 3), dtype=np.int64)
    for half, ap in ((slice(0, m), apa), (slice(m, 2 * m), apb)):
        k = np.column_stack([gmin, gmax, ap])
        k.sort(axis=1)
        k[ap < 0] = -1
        keys[half] = k
    order = np.lexsort((keys[:, 2], keys[:, 1], keys[:, 0]))
    ks = keys[order]
    new = np.ones(2 * m, dtype=bool)
    new[1:] = np.any(ks[1:] != ks[:-1], axis=1)
    node = np.empty(2 * m, dtype=np.int64)
    node[order] = np.cumsum(new) - 1
    node_val = np.empty(int(new.sum()))
    node_val[node] = np.concatenate([va, vb])
    del keys, ks, order, new
    none = np.empty(0, dtype=np.int32)
    b1, d1, _ = _dual_pairs(node_val, node[:m], node[m:], val,
                            np.lexsort((gmax, gmin, val)), none, none, np.zeros(m, bool))
    return sort_rows(np.column_stack([np.sqrt(b1) * scale, np.sqrt(d1) * scale]))


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
