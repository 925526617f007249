"""Periodic windows (flat tori): a box whose opposite faces are identified.

A :class:`PeriodicBox` is the flat torus R^d / (L_1 Z x ... x L_d Z).  It has
no boundary, so ``boundary_measure = 0``, ``kappa = 0`` and every point lies
at infinite distance from the (empty) boundary: border-corrected estimators
use every point, and distances are periodic (minimum-image) distances.  Its
exact alpha persistence is ``lookup.persistence.periodic.periodic_diagram``.
"""
from __future__ import annotations

import math

import numpy as np

from ..errors import WindowError
from .windows import Window

__all__ = ["PeriodicBox", "parse_torus"]


class _PeriodicChecked(type(Window)):
    """Metaclass of periodic windows: checks the content only (no boundary)."""

    def __call__(cls, *args, **kwargs):
        w = type.__call__(cls, *args, **kwargs)
        with np.errstate(all="ignore"):
            m = float(w.measure)
        if not (math.isfinite(m) and m > 0 and m ** (1.0 / w.dim) > 1e-100):
            raise WindowError(f"window {w.spec()}: its volume {m:.3g} is out of "
                              "floating-point range; rescale the coordinates")
        return w


class PeriodicBox(Window, metaclass=_PeriodicChecked):
    """Axis-aligned box with opposite faces identified (a flat torus), 2D or 3D.

    Parameters
    ----------
    *bounds : float
        ``xmin, ymin, xmax, ymax`` (2D) or ``xmin, ymin, zmin, xmax, ymax,
        zmax`` (3D).

    Attributes
    ----------
    lo, hi : ndarray
        Lower and upper corners; ``sides = hi - lo`` are the periods.
    periodic : bool
        Always True: distances and persistence use periodic images.

    Notes
    -----
    The torus has no boundary: ``boundary_measure`` and ``kappa`` are 0,
    :meth:`boundary_distance` is +inf everywhere, and the inner parallel set
    at any distance and the opening by any ball are the whole torus.
    """

    kind = "torus"
    periodic = True
    convex = True
    holes = 0

    def __init__(self, *bounds):
        if len(bounds) not in (4, 6):
            raise WindowError(f"torus needs 4 (2D) or 6 (3D) numbers, got {len(bounds)}")
        vals = [float(v) for v in bounds]
        if not all(math.isfinite(v) for v in vals):
            raise WindowError(f"torus: coordinates must be finite numbers, got {list(bounds)}")
        d = len(vals) // 2
        self.dim = d
        self.lo = np.array(vals[:d])
        self.hi = np.array(vals[d:])
        if np.any(self.hi <= self.lo):
            raise WindowError(f"{self.spec()} has zero or negative "
                              f"{'area' if d == 2 else 'volume'} (need min < max on every axis)")

    @property
    def sides(self) -> np.ndarray:
        """The periods L_i = hi_i - lo_i."""
        return self.hi - self.lo

    @property
    def measure(self) -> float:
        return float(np.prod(self.sides))

    @property
    def boundary_measure(self) -> float:
        return 0.0

    def contains(self, points) -> np.ndarray:
        p = np.asarray(points, float)
        return np.all((p >= self.lo) & (p <= self.hi), axis=1)

    def boundary_distance(self, points) -> np.ndarray:
        """+inf for every point: a torus has no boundary."""
        return np.full(len(np.asarray(points)), np.inf)

    def sample(self, n, rng) -> np.ndarray:
        """n i.i.d. uniform points (the uniform law on the torus)."""
        return self.lo + self.sides * rng.random((n, self.dim))

    def inner_content(self, t):
        """Content of {x : dist(x, boundary) > t}: the whole torus for every t."""
        return np.full(np.shape(t), self.measure) if np.ndim(t) else self.measure

    def opened_content(self, r):
        """Content of the opening by a ball of radius r: the whole torus."""
        return np.full(np.shape(r), self.measure) if np.ndim(r) else self.measure

    def spec(self) -> str:
        return "torus:" + ",".join(f"{v:.17g}" for v in (*self.lo, *self.hi))

    def describe(self) -> dict:
        out = super().describe()
        out["periodic"] = True
        return out

    def wrap(self, points) -> np.ndarray:
        """Coordinates relative to ``lo`` wrapped into [0, L_i) (for
        ``scipy.spatial.cKDTree(..., boxsize=sides)``)."""
        x = np.asarray(points, float) - self.lo
        L = self.sides
        x = np.where(x >= L, x - L, x)
        x = np.where(x < 0, x + L, x)
        # rounding can leave x == L after adding L to a tiny negative value
        return np.where(x >= L, 0.0, x)

    def tree(self, points):
        """A periodic k-d tree of the points: its distances are torus distances."""
        from scipy.spatial import cKDTree

        return cKDTree(self.wrap(points), boxsize=self.sides)


def parse_torus(spec: str, rest: str) -> PeriodicBox:
    """``torus:xmin,ymin,xmax,ymax`` or ``torus:xmin,ymin,zmin,xmax,ymax,zmax``."""
    parts = rest.split(",")
    if len(parts) not in (4, 6):
        raise WindowError(f"window '{spec}': torus needs 4 (2D) or 6 (3D) numbers, "
                          f"got {len(parts)}")
    try:
        vals = [float(s) for s in parts]
    except ValueError:
        raise WindowError(f"window '{spec}': not all of {rest!r} are numbers") from None
    return PeriodicBox(*vals)
