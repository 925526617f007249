"""Validation of a point pattern against its window, before any computation.

Checks, in order: dimension of points and window agree; enough points;
every point inside the window (reports how many are outside and the first);
duplicate points, handled by policy ``error`` (default), ``drop`` (keep one
of each) or ``jitter`` (displace each extra copy by a tiny seeded random
offset, staying inside the window); points not all on one line/plane.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import PointsError, WindowError
from ..persistence.pointsets import duplicate_groups

__all__ = ["validate_pattern", "ValidationReport", "MIN_POINTS", "DUPLICATE_POLICIES"]

#: Fewest points for which a test is computed, per dimension (d + 2).
MIN_POINTS = {2: 4, 3: 5}
DUPLICATE_POLICIES = ("error", "drop", "jitter")


@dataclass
class ValidationReport:
    """What validation did to the input.

    Attributes
    ----------
    n_input : int
        Number of points read.
    n_duplicates : int
        Number of points that repeat an earlier point exactly.
    duplicate_policy : str
        How duplicates were handled.
    """

    n_input: int
    n_duplicates: int = 0
    duplicate_policy: str = "error"

    def as_dict(self):
        return {"n_input": self.n_input, "n_duplicates": self.n_duplicates,
                "duplicate_policy": self.duplicate_policy}


def validate_pattern(points, window, on_duplicates="error", rng=None):
    """Validate ``points`` in ``window``; return (points, report).

    Parameters
    ----------
    points : ndarray, shape (n, d)
    window : Window
    on_duplicates : {"error", "drop", "jitter"}
    rng : numpy.random.Generator, optional
        Used by ``jitter`` (default: a generator seeded with 0, so the
        result is reproducible).

    Returns
    -------
    points : ndarray, shape (m, d)
        The points to test (duplicates dropped or jittered as asked).
    report : ValidationReport
        What was done.

    Raises
    ------
    PointsError, WindowError

    Examples
    --------
    >>> import numpy as np
    >>> from nullatlas import Rectangle, validate_pattern
    >>> w = Rectangle(0, 0, 10, 10)
    >>> pts = w.sample(50, np.random.default_rng(0))
    >>> twice = np.vstack([pts, pts[:2]])
    >>> kept, report = validate_pattern(twice, w, on_duplicates="drop")
    >>> kept.shape, report.n_duplicates
    ((50, 2), 2)
    >>> validate_pattern(pts + 20, w)
    Traceback (most recent call last):
    ...
    nullatlas.lookup.errors.PointsError: 50 of 50 points lie outside the window; first is point 0 at (...)
    """
    if on_duplicates not in DUPLICATE_POLICIES:
        raise PointsError(f"--on-duplicates must be one of {', '.join(DUPLICATE_POLICIES)}, "
                          f"got '{on_duplicates}'")
    try:
        p = np.asarray(points, dtype=float)
    except (ValueError, TypeError):
        raise PointsError("points must be a numeric (n, 2) or (n, 3) array") from None
    if p.ndim != 2 or p.shape[1] not in (2, 3):
        raise PointsError(f"points must have 2 or 3 coordinates per row, got shape {p.shape}")
    n, d = p.shape
    if not np.all(np.isfinite(p)):
        i = int(np.argwhere(~np.isfinite(p))[0, 0])
        raise PointsError(f"point {i} has a NaN or infinite coordinate")
    if d != window.dim:
        raise WindowError(f"points are {d}D but the window '{window.kind}' is {window.dim}D")
    report = ValidationReport(n_input=n, duplicate_policy=on_duplicates)
    if n < MIN_POINTS[d]:
        raise PointsError(f"too few points: {n} (need at least {MIN_POINTS[d]} in {d}D)")
    inside = window.contains(p)
    if not inside.all():
        bad = np.flatnonzero(~inside)
        first = ", ".join(f"{v:.6g}" for v in p[bad[0]])
        raise PointsError(f"{len(bad)} of {n} points lie outside the window; "
                          f"first is point {bad[0]} at ({first})")
    first_idx, counts = duplicate_groups(p)
    ndup = int(n - len(first_idx))
    report.n_duplicates = ndup
    if ndup:
        if on_duplicates == "error":
            rep = p[first_idx[np.argmax(counts > 1)]]
            raise PointsError(
                f"{ndup} duplicate point(s), e.g. ({', '.join(f'{v:.6g}' for v in rep)}); "
                "use --on-duplicates drop or jitter")
        keep = np.zeros(n, bool)
        keep[first_idx] = True
        if on_duplicates == "drop":
            p = p[np.sort(first_idx)]
        else:
            p = _jitter(p, ~keep, window, rng or np.random.default_rng(0))
        if len(p) < MIN_POINTS[d]:
            raise PointsError(f"too few distinct points: {len(duplicate_groups(p)[0])} "
                              f"(need at least {MIN_POINTS[d]} in {d}D)")
    centred = p - p.mean(axis=0)
    sv = np.linalg.svd(centred, compute_uv=False)
    if sv[-1] <= 1e-12 * max(sv[0], 1e-300):
        raise PointsError(f"all points lie on a {'line' if d == 2 else 'plane'}; nothing to test")
    return p, report


def _jitter(p, which, window, rng):
    """Move the points flagged ``which`` by a small random offset inside W."""
    p = p.copy()
    # Small against the mean spacing, but well above the float spacing of the
    # coordinates, so that jittered copies are distinct even far from the origin.
    scale = max(1e-6 * window.length_scale / np.sqrt(len(p)), 1e3 * float(np.spacing(np.abs(p).max())))
    idx = np.flatnonzero(which)
    for _ in range(100):
        if idx.size == 0:
            break
        cand = p[idx] + scale * rng.standard_normal((idx.size, p.shape[1]))
        ok = window.contains(cand)
        p[idx[ok]] = cand[ok]
        idx = idx[~ok]
    if idx.size:
        raise PointsError("could not jitter duplicate points inside the window")
    return p
