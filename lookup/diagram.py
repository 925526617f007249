"""Persistence diagrams of the alpha (Čech) filtration of a point pattern.

The alpha complex (computed by gudhi) has the homotopy type of the union of
balls of radius r around the points, i.e. of the Čech complex (nerve
theorem; Edelsbrunner & Harer, *Computational Topology*, 2010).  gudhi's
filtration values are squared radii; we report radii r = sqrt(value) and the
normalised radius

    rho = r * (n / |W|)^(1/d),

under which the null law of the diagram depends only on d, n and the shape
of the window.  Pairs of zero length are not stored (gudhi drops them; we
also drop pairs of relative length below ``ZERO_LENGTH``, ties split by
rounding); they contribute nothing to any summary computed here.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["Diagram", "alpha_diagram", "intensity_scale", "ZERO_LENGTH"]

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
    def max_dim(self) -> int:
        """Highest homology dimension stored (d - 1)."""
        return len(self.pairs) - 1


def alpha_diagram(points: np.ndarray, measure: float | None = None) -> Diagram:
    """Persistence diagram of the alpha filtration of ``points``.

    Parameters
    ----------
    points : ndarray, shape (n, d), d in {2, 3}
    measure : float, optional
        Area/volume of the window, for normalisation.  Without it radii are
        left unnormalised (``scale = 1``).

    Returns
    -------
    Diagram
        H0..H(d-1), radius units scaled to normalised radius.
    """
    import gudhi

    p = np.ascontiguousarray(points, dtype=float)
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
    return Diagram(pairs=pairs, n=n, dim=d, scale=scale)
