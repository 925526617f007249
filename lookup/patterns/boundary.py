"""Geometric measures of a window that drive the finite-window correction.

Additive summaries are sums of local contributions, so under CSR their mean
per point depends on the window only through how much of it lies at each
distance from its boundary (DESIGN.md, "A boundary correction for any
window").  With s = (n/|W|)^(1/d) the factor that turns lengths into
normalised units (mean spacing 1) and V(t) = |{x in W : d(x, dW) > t}| the
content of the inner parallel set (``Window.inner_content``; holes are part
of the boundary):

    B1 = |dW| s^(d-1) / n  = kappa n^(-1/d)
         the normalised boundary measure per point: the first-order term of
         the Miles/Donnelly edge effect (Steiner: V'(0) = -|dW|);
    B2 = B1 h - 1 + V(h / s) / |W|
       = (1/n) int_0^h (P*(0) - P*(t)) dt,
         P*(t) the normalised perimeter (surface) of the inner parallel set
         at normalised depth t, h the depth that contributions at this grid
         point reach (:func:`grid_depths`: 2 rho, at least ``DEPTH``): how much the
         boundary band falls short of (boundary measure x depth).  It is
         tau h^2 / (2 n) for a convex polygon with tau = sum over corners of
         2 cot(angle / 2) (2 pi for a disk), negative around holes and reflex
         corners (the inner parallel set grows there), of order n^(-2/3) in
         3D (edges), and large where parts of the window are narrower than
         2 h, where the bands from two sides overlap;
    B3 = 1 / n
         fixed-n (binomial) and corner terms of order 1/n;
    BC = C s^(d-2) / n
         the curvature of the smooth curved parts of the boundary per point
         (``Window.smooth_curvature`` C: the integrated mean curvature in
         3D, 4 pi r for a ball, pi h for a cylinder's mantle; 0 for faces,
         edges and rasters).  B2 sees curvature and edges alike through the
         inner parallel sets, but a point near a gently curved surface and a
         point near a 90-degree edge lose different features: in 3D, loop
         and void statistics need the two apart (fitted with BC, the
         training misfit of total1 falls from chi2/dof 314 to 21, and its
         error on the held-out ball from 0.7-1.6 to under 0.2 pattern sd).
         In 2D the curvature of a disk is 2 pi / n, of the same order as B3,
         and the 2D model does not use it (``calibrate.model.CANDIDATES``).

The model (``calibrate.model``) is E[S] = mu + c1 B1 + c2 B2 + c3 B3 (+ c4
BC in 3D) and likewise n Var[S]; for a convex polygon B2 and B3 are both of
order 1/n, so the shipped two-term model mu + c kappa n^(-1/d) + e n^(-2/d)
is the special case c2 = 0 in 2D.  A table's coefficients may be fewer than
the covariates (tables fitted before BC existed): the runtime uses the first
ones.

Trust measures (``lookup.asymptotic``):

    boundary_share = 1 - V(1 / s) / |W|
        the share of the window within one mean spacing of its boundary;
    second_order = |B2| sqrt(n)
        the size of the second-order term in units of a pattern's sd (up to
        a constant per statistic): corners, acute tips, curvature, holes;
    narrow_share = share of the window in parts narrower than
        ``NARROW_WIDTH`` mean spacings (1 - |opening of W by a ball of
        radius NARROW_WIDTH / 2| / |W|);
    holes = number of holes of the window (a hole is a loop of the union of
        balls in every pattern, no local boundary term);
    hull_deficit = 1 - |W| / |convex hull of W|
        concavities whose mouths close before they fill make loops too;
    kappa_excess = how far the window's kappa lies outside the range of the
        table's training shapes, relative (max(0, kappa_lo / kappa - 1,
        kappa / kappa_hi - 1)): the model extrapolates there;
    curved_share = the share of the boundary that is curved (disks, balls,
        a cylinder's mantle; ``Window.curved_share``): in 3D the model was
        trained mostly on flat faces;
    periodic = 0 for a window with a boundary; for a periodic window
        max(1, n / n_hi, n_lo / n), [n_lo, n_hi] the n range of the table's
        periodic cells: 1 where the periodic cells bracket n, larger the
        further they are extrapolated (its own route, validated on its own).
"""
from __future__ import annotations

import numpy as np

__all__ = ["DEPTH", "NARROW_WIDTH", "MEASURES", "covariates", "grid_depths", "trust_measures", "COVARIATES"]

#: The trust measures, in the order of the validated range.
MEASURES = ("boundary_share", "second_order", "narrow_share", "holes", "hull_deficit",
            "kappa_excess", "curved_share", "periodic")

#: Depth h (mean spacings) of the band behind the second-order term B2.
DEPTH = 1.0
#: Parts of a window narrower than this many mean spacings count as narrow.
NARROW_WIDTH = 3.0
#: Names of the model's covariates, in the order of the coefficients.
COVARIATES = ("1", "B1", "B2", "B3", "BC")


def _scale(window, n: int) -> float:
    return (n / float(window.measure)) ** (1.0 / window.dim)


def _inner_fraction(window, t) -> np.ndarray:
    """V(t) / |W| for physical distances t (1 for windows without boundary)."""
    t = np.atleast_1d(np.asarray(t, float))
    if getattr(window, "periodic", False) or float(window.boundary_measure) == 0.0:
        return np.ones_like(t)
    v = np.asarray(window.inner_content(t), float).reshape(-1)
    return v / float(window.measure)


def grid_depths(grid, kind: str) -> np.ndarray:
    """Depth h of the band behind B2 for each grid point of a statistic:
    contributions at normalised radius rho reach 2 rho into the window
    (DESIGN.md, pilot lessons), so h = max(DEPTH, 2 rho) for curves; scalars
    and extremes, which gather features up to rho of about 1, use 2."""
    if kind == "curve" and grid is not None:
        g = np.asarray(grid, float)
        g = g.max(axis=1) if g.ndim == 2 else g
        return np.maximum(DEPTH, 2.0 * g)
    return np.array([2.0])


def covariates(window, n: int, depth=DEPTH) -> np.ndarray:
    """The model covariates [1, B1, B2, B3, BC] of ``n`` points in ``window``:
    shape (5,) for a scalar ``depth``, (len(depth), 5) for an array."""
    n = int(n)
    d = window.dim
    s = _scale(window, n)
    scalar = np.ndim(depth) == 0
    h = np.atleast_1d(np.asarray(depth, float))
    b1 = float(window.boundary_measure) * s ** (d - 1) / n
    out = np.empty((len(h), len(COVARIATES)))
    out[:, 0] = 1.0
    out[:, 1] = b1
    out[:, 3] = 1.0 / n
    out[:, 2] = 0.0 if b1 == 0.0 else b1 * h - 1.0 + _inner_fraction(window, h / s)
    curv = 0.0 if b1 == 0.0 else float(getattr(window, "smooth_curvature", 0.0))
    out[:, 4] = curv * s ** (d - 2) / n
    return out[0] if scalar else out


def kappa_excess(kappa: float, kappa_range) -> float:
    """Relative distance of ``kappa`` outside ``kappa_range`` (0 inside)."""
    lo, hi = kappa_range
    if kappa <= 0 or lo <= 0:
        return 0.0
    return float(max(0.0, lo / kappa - 1.0, kappa / hi - 1.0))


def trust_measures(window, n: int, kappa_range=None, periodic_n_range=None) -> dict:
    """Geometric measures that the trust verdict compares with the validated
    range (``MEASURES``, see the module doc; ``kappa_excess`` relative to
    ``kappa_range``, the table's training shapes, 0 when not given;
    ``periodic`` relative to ``periodic_n_range``, 1 when not given), ``B1``
    and ``B2``."""
    s = _scale(window, int(n))
    cov = covariates(window, n)
    if getattr(window, "periodic", False) or float(window.boundary_measure) == 0.0:
        per = 0.0
        if getattr(window, "periodic", False):
            per = 1.0
            if periodic_n_range:
                lo, hi = periodic_n_range
                per = max(1.0, n / float(hi), float(lo) / n)
        return {"boundary_share": 0.0, "second_order": 0.0, "narrow_share": 0.0, "holes": 0.0,
                "hull_deficit": 0.0, "kappa_excess": 0.0, "curved_share": 0.0,
                "periodic": float(per), "B1": 0.0, "B2": 0.0}
    share = 1.0 - float(_inner_fraction(window, 1.0 / s)[0])
    narrow = 0.0
    fn = getattr(window, "narrow_share", None)
    if fn is not None:
        narrow = float(fn(NARROW_WIDTH / s))
    return {"boundary_share": float(share), "second_order": float(abs(cov[2]) * np.sqrt(n)),
            "narrow_share": float(max(narrow, 0.0)), "holes": float(getattr(window, "holes", 0)),
            "hull_deficit": hull_deficit(window),
            "kappa_excess": kappa_excess(float(window.kappa), kappa_range) if kappa_range else 0.0,
            "curved_share": float(getattr(window, "curved_share", 0.0)),
            "periodic": 0.0, "B1": float(cov[1]), "B2": float(cov[2])}


def hull_deficit(window) -> float:
    """1 - |W| / |convex hull of W| (0 for convex windows; 1 for a
    non-convex window whose hull is not known)."""
    if getattr(window, "convex", True) and not getattr(window, "holes", 0):
        return 0.0
    geom = getattr(window, "geometry", None)
    if geom is not None:
        return float(max(0.0, 1.0 - geom.area / geom.convex_hull.area))
    mask = getattr(window, "mask", None)
    if mask is not None and np.ndim(mask) == 3:
        # voxel mask: the hull of the corners of its inside voxels
        from scipy.spatial import ConvexHull, QhullError

        idx = np.argwhere(np.asarray(mask, bool)).astype(float)
        corners = (idx[:, None, :] + np.array([[i, j, k] for i in (0, 1) for j in (0, 1)
                                                 for k in (0, 1)], float)).reshape(-1, 3)
        try:
            hull = ConvexHull(np.unique(corners, axis=0))
        except (QhullError, ValueError):
            return 1.0
        return float(max(0.0, 1.0 - idx.shape[0] / hull.volume))
    # a non-convex window whose hull is not known: the worst case, so that
    # the verdict never trusts it on an unmeasured assumption
    return 1.0
