"""Window shapes of the null tables, normalised to unit area/volume.

Under the binomial null the law of the normalised summaries depends only on
the dimension, n and the *shape* of the window up to similarity (DESIGN.md,
"The null model and its normalisation").  A table cell is therefore simulated
in one representative of each shape: centred at the origin, scaled to unit
content and, for rectangles and boxes, with sides sorted ascending.

Named shapes (the shipped tables):

=========  ===  ==========================================  ==============
name       d    representative                               kappa
=========  ===  ==========================================  ==============
square     2    side 1                                       4
rect2      2    sides 2^(-1/2) x 2^(1/2) (aspect 2)          3 / sqrt(2) * 2 = 4.2426
rect4      2    sides 1/2 x 2 (aspect 4)                     5
disk       2    radius pi^(-1/2)                             2 sqrt(pi) = 3.5449
cube       3    side 1                                       6
box114     3    sides a, a, 4a with a = 4^(-1/3)             18 / 4^(2/3) = 7.1433
=========  ===  ==========================================  ==============

A user's own window (``--window SPEC``) is normalised the same way
(:func:`normalise`); polygons are also rotated onto the principal axes of
their vertices and reflected into a canonical orientation, so that the name
(a hash of the normalised vertices) does not depend on position, size or
orientation -- except for shapes whose vertices have equal principal
moments (e.g. regular polygons), where the axes are not defined and two
rotated copies may get different names (the table still applies to both).
"""
from __future__ import annotations

import hashlib
import math

import numpy as np

from ..errors import OptionError, WindowError
from . import windows as W

__all__ = ["SHAPES", "SHIPPED", "shape_window", "normalise", "shape_dimension"]


def _box(sides):
    s = np.asarray(sides, float)
    lo, hi = -s / 2, s / 2
    return W.Rectangle(*lo, *hi) if len(s) == 2 else W.Box(*lo, *hi)


def _aspect(a: float, d: int):
    """Sides with aspect a (longest / shortest), unit content."""
    if d == 2:
        return [a ** -0.5, a ** 0.5]
    s = (1.0 / a) ** (1.0 / 3.0)
    return [s, s, a * s]


#: name -> (dimension, factory of the unit-content representative, description)
SHAPES = {
    "square": (2, lambda: _box([1.0, 1.0]), "square"),
    "rect2": (2, lambda: _box(_aspect(2.0, 2)), "rectangle, aspect 2"),
    "rect4": (2, lambda: _box(_aspect(4.0, 2)), "rectangle, aspect 4"),
    "disk": (2, lambda: W.Disk(0.0, 0.0, 1.0 / math.sqrt(math.pi)), "disk"),
    "cube": (3, lambda: _box([1.0, 1.0, 1.0]), "cube"),
    "box114": (3, lambda: _box(_aspect(4.0, 3)), "box with sides 1:1:4"),
}

#: Shapes of the shipped tables, per dimension.
SHIPPED = {2: ["square", "rect2", "rect4", "disk"], 3: ["cube", "box114"]}


def shape_dimension(name: str) -> int:
    """Dimension of a named shape (OptionError if unknown)."""
    if name not in SHAPES:
        raise OptionError(f"unknown shape '{name}'; choose from {', '.join(SHAPES)}")
    return SHAPES[name][0]


def shape_window(name: str) -> W.Window:
    """The unit-content representative of a named shape."""
    shape_dimension(name)
    return SHAPES[name][1]()


def _poly_normalise(w: W.PolygonWindow) -> W.Window:
    import shapely
    from shapely import affinity

    g = w.geometry
    c = g.centroid
    g = affinity.translate(g, -c.x, -c.y)
    g = affinity.scale(g, 1 / math.sqrt(g.area), 1 / math.sqrt(g.area), origin=(0, 0))
    # principal axes of the boundary vertices (area moments would be nicer;
    # any rotation-equivariant choice makes the name rotation-invariant)
    v = np.asarray(shapely.get_coordinates(g))
    evals, evecs = np.linalg.eigh(np.cov(v.T))
    ang = math.degrees(math.atan2(evecs[1, -1], evecs[0, -1]))
    g = affinity.rotate(g, -ang, origin=(0, 0))
    # the axes' signs are arbitrary: take the reflection whose sorted rounded
    # vertices come first (reflections leave CSR statistics unchanged)
    best = None
    for sx in (1.0, -1.0):
        for sy in (1.0, -1.0):
            vv = np.round(shapely.get_coordinates(g) * (sx, sy), 6) + 0.0
            key = tuple(map(tuple, vv[np.lexsort(vv.T[::-1])]))
            if best is None or key < best[0]:
                best = (key, sx, sy)
    g = affinity.scale(g, best[1], best[2], origin=(0, 0))
    g = shapely.set_precision(g, 1e-9)
    return W.PolygonWindow(shapely.normalize(g)), best[0]


def normalise(window: W.Window, allow_estimated: bool = False) -> tuple[str, W.Window]:
    """Name and unit-content representative of a user's window.

    Rectangles and boxes keep their aspect (sides sorted); disks and balls
    become the unit disk/ball; polygons are centred, scaled and rotated onto
    their principal axes.  Windows estimated from the data are refused
    unless ``allow_estimated`` (the runtime looks their shape up; a table is
    never built for them).

    Returns
    -------
    (name, window)
    """
    if window.estimated and not allow_estimated:
        raise WindowError("a table cannot be built for a window estimated from the data "
                          "(bbox/hull); give the window explicitly")
    if isinstance(window, W.Rectangle):       # also Box
        sides = np.sort(window.hi - window.lo)
        sides = sides / np.prod(sides) ** (1.0 / len(sides))
        rounded = np.round(sides / sides[0], 6)
        for name, (d, make, _) in SHAPES.items():
            rep = make()
            if d == len(sides) and isinstance(rep, W.Rectangle):
                rs = np.sort(rep.hi - rep.lo)
                if np.allclose(rs / rs[0], rounded, rtol=1e-6):
                    return name, rep
        tag = "x".join(f"{v:g}" for v in rounded)
        return f"{'rect' if len(sides) == 2 else 'box'}-{tag}", _box(sides)
    if isinstance(window, W.Disk):
        return "disk", shape_window("disk")
    if isinstance(window, W.Ball):
        return "ball", W.Ball(0.0, 0.0, 0.0, (3.0 / (4.0 * math.pi)) ** (1.0 / 3.0))
    if isinstance(window, W.PolygonWindow):
        rep, key = _poly_normalise(window)
        digest = hashlib.sha1(repr(key).encode()).hexdigest()[:10]
        return f"polygon-{digest}", rep
    raise WindowError(f"no table can be built for a window of kind '{window.kind}'")
