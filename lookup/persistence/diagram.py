"""Persistence diagrams of the alpha (Čech) filtration of a point pattern.

The alpha complex has the homotopy type of the union of
balls of radius r around the points, i.e. of the Čech complex (nerve
theorem; Edelsbrunner & Harer, *Computational Topology*, 2010).  gudhi's
filtration values are squared radii; we report radii r = sqrt(value) and the
normalised radius

    rho = r * (n / |W|)^(1/d),

under which the null law of the diagram depends only on d, n and the shape
of the window.  Pairs of zero length are not stored; they contribute
nothing to any summary computed here.

Two engines compute the same diagram:

``fast`` (default)
    Our exact kernels: ``lookup.persistence.alpha2d`` (all of H0 and H1 in 2D) and
    ``lookup.persistence.alpha3d`` (H0, H2, Betti and Euler curves and total H1
    persistence in 3D; the H1 pairs themselves, needed only by pair-level
    summaries of loops in 3D, are computed by gudhi on first use).  Values are
    exactly rounded, so ties in lattices stay ties.
``gudhi``
    gudhi's ``AlphaComplex`` (default precision) with its generic matrix
    reduction: the reference.  Pairs of relative length below
    ``ZERO_LENGTH`` are dropped (ties split by rounding).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["Diagram", "alpha_diagram", "intensity_scale", "ZERO_LENGTH", "ENGINES"]

#: Diagram engines accepted by :func:`alpha_diagram`.
ENGINES = ("fast", "gudhi")

#: Pairs with (death - birth) <= ZERO_LENGTH * death count as zero length.
ZERO_LENGTH = 1e-9


def intensity_scale(n: int, measure: float, dim: int) -> float:
    """The factor (n / |W|)^(1/d) that turns radii into normalised radii."""
    return (n / measure) ** (1.0 / dim)


@dataclass
class Diagram:
    """Persistence pairs per homology dimension, in normalised radius units.

    Attributes
    ----------
    pairs : list of ndarray
        ``pairs[q]`` has shape (k_q, 2): (birth, death) in normalised radius
        rho; infinite deaths are ``numpy.inf`` (the one H0 class).
    n : int
        Number of points.
    dim : int
        Dimension of the ambient space.
    scale : float
        (n / |W|)^(1/d); radii are ``pairs / scale``.

    Examples
    --------
    >>> import numpy as np
    >>> from nullatlas.lookup import Diagram
    >>> dg = Diagram(pairs=[np.array([[0.0, np.inf], [0.0, 1.0]]), np.array([[1.0, 1.5]])],
    ...              n=2, dim=2)
    >>> dg.finite(0), dg.total_lifetime(1), dg.max_dim
    (array([[0., 1.]]), 0.5, 1)
    >>> dg.betti_counts(1, np.array([0.5, 1.2, 1.5]))
    array([0, 1, 0])
    """

    pairs: list
    n: int
    dim: int
    scale: float = 1.0
    meta: dict = field(default_factory=dict)

    def finite(self, q: int) -> np.ndarray:
        """Pairs of dimension ``q`` with finite death."""
        p = self.pairs[q] if q < len(self.pairs) else np.empty((0, 2))
        return p[np.isfinite(p[:, 1])]

    def radii(self, q: int) -> np.ndarray:
        """Pairs of dimension ``q`` in radius units of the input."""
        return self.pairs[q] / self.scale

    @property
    def homology_dims(self) -> range:
        """Dimensions q that can hold classes: 0..d-1 in Euclidean space (the
        union of balls never has a d-dimensional class); 0..d on a torus
        (``lookup.persistence.periodic.PeriodicDiagram``)."""
        return range(self.dim)

    @property
    def max_dim(self) -> int:
        """Highest homology dimension stored (d - 1)."""
        return len(self.pairs) - 1

    def betti_counts(self, q: int, grid: np.ndarray) -> np.ndarray:
        """#{pairs (b, d) of dimension q : b <= rho < d} at each rho of ``grid``."""
        p = self.pairs[q] if q < len(self.pairs) else np.empty((0, 2))
        b = np.sort(p[:, 0])
        d = np.sort(p[:, 1])
        return np.searchsorted(b, grid, side="right") - np.searchsorted(d, grid, side="right")

    def total_lifetime(self, q: int) -> float:
        """sum(d - b) over the finite pairs of dimension q."""
        p = self.finite(q)
        return float(np.sum(p[:, 1] - p[:, 0]))


class FastDiagram3D(Diagram):
    """3D diagram from ``lookup.persistence.alpha3d``: H0 and H2 pairs, the Betti-1 curve
    from chi = b0 - b1 + b2 and the total H1 persistence from the filtration;
    the H1 pairs are computed (by gudhi) only when asked for."""

    def __init__(self, points: np.ndarray, alpha, scale: float):
        self._points = points
        self._alpha = alpha
        self._h1 = None
        self.n = len(points)
        self.dim = 3
        self.scale = scale
        self.meta = {"engine": "fast"}

    def _pairs_h1(self) -> np.ndarray:
        if self._h1 is None:
            ref = _gudhi_diagram(self._points, None)
            self._h1 = ref.pairs[1] * self.scale
        return self._h1

    @property
    def pairs(self) -> list:
        return [self._alpha.h0 * self.scale, self._pairs_h1(), self._alpha.h2 * self.scale]

    def finite(self, q: int) -> np.ndarray:
        if q == 1:
            p = self._pairs_h1()
        elif q in (0, 2):
            p = (self._alpha.h0 if q == 0 else self._alpha.h2) * self.scale
        else:
            return np.empty((0, 2))
        return p[np.isfinite(p[:, 1])]

    def betti_counts(self, q: int, grid: np.ndarray) -> np.ndarray:
        a = self._alpha
        r = np.asarray(grid, dtype=float) / self.scale
        if q == 0:
            return a.betti0(r)
        if q == 1:
            return a.betti1(r)
        if q == 2:
            return a.betti2(r)
        return np.zeros(len(r), dtype=np.int64)

    def total_lifetime(self, q: int) -> float:
        if q == 1:
            return float(self._alpha.total_h1 * self.scale)
        return super().total_lifetime(q)


def alpha_diagram(points: np.ndarray, measure: float | None = None,
                  engine: str = "fast") -> Diagram:
    """Persistence diagram of the alpha filtration of ``points``.

    Parameters
    ----------
    points : ndarray, shape (n, d), d in {2, 3}
    measure : float, optional
        Area/volume of the window, for normalisation.  Without it radii are
        left unnormalised (``scale = 1``).
    engine : {"fast", "gudhi"}
        See the module docstring; both give the same pairs (to rounding).

    Returns
    -------
    Diagram
        H0..H(d-1), radius units scaled to normalised radius.

    Examples
    --------
    The four corners of a square of side 2: three components merge at
    radius 1 (half a side), and the loop they close is filled at sqrt(2),
    the circumradius of the triangles:

    >>> import numpy as np
    >>> from nullatlas.lookup import alpha_diagram
    >>> square = np.array([[0.0, 0.0], [2.0, 0.0], [2.0, 2.0], [0.0, 2.0]])
    >>> dg = alpha_diagram(square)
    >>> dg.pairs[0]
    array([[ 0.,  1.],
           [ 0.,  1.],
           [ 0.,  1.],
           [ 0., inf]])
    >>> dg.pairs[1]
    array([[1.        , 1.41421356]])
    >>> alpha_diagram(square, engine="gudhi").pairs[1]
    array([[1.        , 1.41421356]])

    With the window's area the radii are normalised, rho = r (n / |W|)^(1/d):

    >>> dg = alpha_diagram(square, measure=16.0)
    >>> dg.scale, dg.pairs[1]
    (0.5, array([[0.5       , 0.70710678]]))
    """
    if engine not in ENGINES:
        raise ValueError(f"engine must be one of {ENGINES}")
    p = np.ascontiguousarray(points, dtype=float)
    if engine == "gudhi":
        return _gudhi_diagram(p, measure)
    n, d = p.shape
    scale = intensity_scale(n, measure, d) if measure else 1.0
    if d == 2:
        from .alpha2d import alpha_pairs_2d, sort_rows

        h0, h1 = alpha_pairs_2d(p, sort=False)
        # H1 rows sorted by (birth, death): sums over them do not depend on the
        # order of the sweep (a tiled run forms them in another order)
        return Diagram(pairs=[h0 * scale, sort_rows(h1 * scale)], n=n, dim=2, scale=scale,
                       meta={"engine": "fast"})
    if d == 3:
        from .alpha3d import betti_euler_3d

        try:
            alpha = betti_euler_3d(p)
        except ValueError:                 # e.g. all points coplanar: the reference copes
            return _gudhi_diagram(p, measure)
        return FastDiagram3D(p, alpha, scale)
    raise ValueError("points must be 2D or 3D")


def _gudhi_diagram(p: np.ndarray, measure: float | None) -> Diagram:
    """The reference engine: gudhi's AlphaComplex and matrix reduction."""
    import gudhi

    n, d = p.shape
    # Centre the coordinates: the filtration is translation invariant, and
    # centring keeps gudhi's arithmetic well conditioned for offset data.
    st = gudhi.AlphaComplex(points=p - p.mean(axis=0)).create_simplex_tree()
    st.compute_persistence(homology_coeff_field=2, persistence_dim_max=False)
    scale = intensity_scale(n, measure, d) if measure else 1.0
    pairs = []
    for q in range(d):
        iv = np.asarray(st.persistence_intervals_in_dimension(q), dtype=float).reshape(-1, 2)
        iv = np.sqrt(np.maximum(iv, 0.0)) * scale
        # gudhi's default ('safe') values carry a relative error far below 1e-9;
        # pairs shorter than that are ties split by rounding, not features.
        keep = np.isinf(iv[:, 1]) | ((iv[:, 1] - iv[:, 0]) > ZERO_LENGTH * iv[:, 1])
        pairs.append(iv[keep])
    return Diagram(pairs=pairs, n=n, dim=d, scale=scale, meta={"engine": "gudhi"})
