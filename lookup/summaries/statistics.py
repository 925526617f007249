"""Registry of named test statistics and their computation for one pattern.

Each statistic has a name (as given to ``--stat``), a kind (``curve`` on a
fixed grid, ``scalar`` additive, or ``extreme``), the dimensions where it is
defined, and, where it is known, the direction in which it moves under
clustering (+1 larger, -1 smaller); regular (inhibited) patterns move the
other way.  Directions are documented in the README.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Callable

import numpy as np

from ..errors import OptionError
from ..persistence.diagram import Diagram, alpha_diagram, intensity_scale
from . import classical, grids, topological

if TYPE_CHECKING:  # scipy.spatial is imported only where a k-d tree is needed
    from scipy.spatial import cKDTree

__all__ = ["Statistic", "STATISTICS", "resolve_stats", "PatternSummary", "compute",
           "default_stats", "evaluate"]


@dataclass(frozen=True)
class Statistic:
    """Definition of a named statistic.

    Attributes
    ----------
    name : str
    kind : {"curve", "scalar", "extreme"}
    dims : tuple of int
        Dimensions where it is defined.
    clustered : int or None
        +1 if clustering increases it, -1 if it decreases it, None if the
        direction is not known in general.
    grid : ndarray or None
        Grid of a curve (for persistent Betti numbers: (k, 2) pairs).
    needs_diagram : bool
    description : str
    """

    name: str
    kind: str
    dims: tuple
    clustered: int | None
    grid: np.ndarray | None
    needs_diagram: bool
    description: str
    func: Callable = None

    @property
    def is_curve(self) -> bool:
        return self.kind == "curve"

    @property
    def needs_h1_pairs(self) -> bool:
        """Needs the H1 pairs themselves, not only Betti counts or total
        persistence (matters in 3D, where the fast engine gets H1 pairs from
        gudhi)."""
        return self.name in ("pbetti1", "apf1", "maxpers1", "maxratio1", "silhouette1")


def _mk():
    S = {}

    def add(name, kind, dims, clustered, grid, diag, desc, func):
        S[name] = Statistic(name, kind, dims, clustered, grid, diag, desc, func)

    for q in range(3):
        dims = (2, 3) if q < 2 else (3,)
        add(f"betti{q}", "curve", dims, None, grids.RHO, True,
            f"Betti-{q} curve beta_{q}(rho)/n",
            lambda ps, q=q: topological.betti_curve(ps.diagram, q))
        add(f"pbetti{q}", "curve", dims, None, grids.PBETTI_PAIRS, True,
            f"persistent Betti-{q} numbers beta_{q}(s,t)/n",
            lambda ps, q=q: topological.persistent_betti(ps.diagram, q))
        add(f"apf{q}", "curve", dims, None, grids.APF_AGE, True,
            f"accumulated persistence function of H{q}",
            lambda ps, q=q: topological.apf(ps.diagram, q))
        # H0 total persistence is half the MST length per point: clustering
        # shortens it.  Higher dimensions: direction depends on the alternative.
        add(f"total{q}", "scalar", dims, -1 if q == 0 else None, None, True,
            f"total persistence of H{q} per point",
            lambda ps, q=q: topological.total_persistence(ps.diagram, q))
        if q >= 1:
            # Large empty regions between clusters make long-lived holes.
            add(f"maxpers{q}", "extreme", dims, +1, None, True,
                f"largest H{q} lifetime (normalised radius)",
                lambda ps, q=q: topological.max_lifetime(ps.diagram, q))
            add(f"maxratio{q}", "extreme", dims, +1, None, True,
                f"largest H{q} death/birth ratio",
                lambda ps, q=q: topological.max_ratio(ps.diagram, q))
            add(f"silhouette{q}", "curve", dims, None, grids.SILHOUETTE_T, True,
                f"power-weighted silhouette of H{q}",
                lambda ps, q=q: topological.silhouette(ps.diagram, q))
    add("euler", "curve", (2, 3), None, grids.RHO, True,
        "Euler characteristic curve chi(rho)/n",
        lambda ps: topological.euler_curve(ps.diagram))
    add("nnmean", "scalar", (2, 3), -1, None, False,
        "Clark-Evans mean nearest-neighbour distance (normalised)",
        lambda ps: classical.nn_mean(ps.nn, ps.scale))
    add("gfunc", "curve", (2, 3), None, grids.NN_RHO, False,
        "nearest-neighbour distribution G, border corrected",
        lambda ps: classical.g_function(ps.nn, ps.bdist, ps.scale))
    add("lfunc", "curve", (2, 3), None, grids.L_RHO, False,
        "Besag L function, border corrected",
        lambda ps: classical.l_function(ps.points, ps.bdist, ps.scale, pairs=ps.pairs))
    return S


STATISTICS: dict[str, Statistic] = _mk()


def default_stats(dim: int) -> list[str]:
    """Primary statistic first (the Euler curve), then the secondary ones."""
    # in 3D the largest void lifetime: the H1 pairs behind maxpers1 would need
    # gudhi's generic path for every pattern
    extra = ["total0", "total1"] + (["total2", "maxpers2"] if dim == 3 else ["maxpers1"]) + \
        ["nnmean", "lfunc"]
    return ["euler"] + extra


def resolve_stats(names, dim: int) -> list[Statistic]:
    """Look up statistic names; raise OptionError on unknown or wrong-dimension names."""
    if not names:
        names = default_stats(dim)
    out, seen = [], set()
    for raw in names:
        for name in str(raw).split(","):
            name = name.strip().lower()
            if not name or name in seen:
                continue
            if name not in STATISTICS:
                raise OptionError(f"unknown statistic '{name}'; choose from {', '.join(sorted(STATISTICS))}")
            st = STATISTICS[name]
            if dim not in st.dims:
                raise OptionError(f"statistic '{name}' is not defined in {dim}D")
            seen.add(name)
            out.append(st)
    if not out:
        raise OptionError("no statistic given")
    return out


class PatternSummary:
    """Lazily computed ingredients shared by the statistics of one pattern."""

    def __init__(self, points: np.ndarray, window, engine: str = "fast"):
        self.points = np.asarray(points, float)
        self.window = window
        self.engine = engine
        self.want_h1_pairs = False
        self.n, self.dim = self.points.shape
        self.scale = intensity_scale(self.n, window.measure, self.dim)
        self._cache = {}

    def _get(self, key, make):
        if key not in self._cache:
            self._cache[key] = make()
        return self._cache[key]

    @property
    def periodic(self) -> bool:
        """True on a torus (``lookup.patterns.periodic``): periodic images everywhere."""
        return bool(getattr(self.window, "periodic", False))

    @property
    def diagram(self) -> Diagram:
        if self.periodic:
            from ..persistence.periodic import periodic_diagram
            return self._get("diagram", lambda: periodic_diagram(self.points, self.window,
                                                                 self.engine))
        engine = self.engine
        if self.dim == 3 and self.want_h1_pairs:
            # the fast 3D engine would compute H1 pairs with gudhi on top of its
            # own work: let gudhi do all of it once
            engine = "gudhi"
        return self._get("diagram", lambda: alpha_diagram(self.points, self.window.measure,
                                                         engine))

    @property
    def tree(self) -> cKDTree:
        if self.periodic:       # torus distances: cKDTree(points - lo, boxsize=sides)
            return self._get("tree", lambda: self.window.tree(self.points))
        from scipy.spatial import cKDTree

        return self._get("tree", lambda: cKDTree(self.points))

    @property
    def pairs(self):
        """Pairs closer than the L-function grid's largest radius, with distances
        (a periodic k-d tree on a torus, the compiled cell grid otherwise)."""
        return self._get("pairs", lambda: classical.close_pairs(
            self.points, grids.L_RHO[-1] / self.scale, self.tree if self.periodic else None))

    @property
    def nn(self) -> np.ndarray:
        return self._get("nn", lambda: classical.nn_from_pairs(
            self.points, *self.pairs, tree=self.tree if self.periodic else None))

    @property
    def bdist(self) -> np.ndarray:
        return self._get("bdist", lambda: self.window.boundary_distance(self.points))


def compute(points, window, stats: list[Statistic], engine: str = "fast") -> dict:
    """Values of ``stats`` for one pattern: name -> float or ndarray.

    ``engine`` selects the diagram engine (see :func:`lookup.persistence.diagram.alpha_diagram`)."""
    return evaluate(PatternSummary(points, window, engine), stats)


def evaluate(ps: PatternSummary, stats: list[Statistic]) -> dict:
    """Values of ``stats`` from a (possibly already used) :class:`PatternSummary`."""
    ps.want_h1_pairs = ps.want_h1_pairs or any(s.needs_h1_pairs for s in stats)
    return {s.name: np.asarray(s.func(ps), dtype=float) for s in stats}
