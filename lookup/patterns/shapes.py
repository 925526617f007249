"""Window shapes of the null tables, normalised to unit area/volume.

Under the binomial null the law of the normalised summaries depends only on
the dimension, n and the *shape* of the window up to similarity (DESIGN.md,
"The null model and its normalisation").  A table cell is therefore simulated
in one representative of each shape: centred at the origin, scaled to unit
content and, for rectangles and boxes, with sides sorted ascending.

Named shapes (all in the shipped tables; the last ones are the training
shapes of the geometric finite-window model and the periodic cells):

=========  ===  ==========================================  ==============
name       d    representative                               kappa
=========  ===  ==========================================  ==============
square     2    side 1                                       4
rect2      2    sides 2^(-1/2) x 2^(1/2) (aspect 2)          3 / sqrt(2) * 2 = 4.2426
rect4      2    sides 1/2 x 2 (aspect 4)                     5
disk       2    radius pi^(-1/2)                             2 sqrt(pi) = 3.5449
cube       3    side 1                                       6
box114     3    sides a, a, 4a with a = 4^(-1/3)             18 / 4^(2/3) = 7.1433
triangle   2    equilateral, side 2 / 3^(1/4)                6 / 3^(1/4) = 4.5590
cross      2    plus sign of 5 squares of side 5^(-1/2)      12 / sqrt(5) = 5.3666
holed      2    square of side 2/sqrt(3), centred square     6 / sqrt(3) * 2 = 6.9282
                hole of side 1/sqrt(3)
box133     3    sides a, 3a, 3a with a = 9^(-1/3)            30 / 9^(2/3) = 6.9336
cyl1       3    cylinder, height = diameter = 2 (2 pi)^(-1/3) 6 pi / (2 pi)^(2/3) = 5.5358
cyl8       3    cylinder, height = 8 diameters                34 pi / (16 pi)^(2/3) = 7.8424
torus2     2    periodic unit square                         0 (no boundary)
torus3     3    periodic unit cube                           0 (no boundary)
=========  ===  ==========================================  ==============

A user's own window (``--window SPEC``) is normalised the same way
(:func:`normalise`).  A polygon that is a rectangle in any position and
rotation (to 1e-9 relative) is the rectangle shape of its aspect, and a
convex polytope that is a rectangular box is the box of its sides; a
cylinder is named by its aspect h / (2 r).  Other polygons are rotated onto
the principal axes of their vertices and reflected into a canonical
orientation, so that the name (a hash of the normalised vertices) does not
depend on position, size or orientation -- except for shapes whose vertices
have equal principal moments (e.g. regular polygons), where the axes are not
defined and two rotated copies may get different names (the table still
applies to both).  Voxel masks are named by a hash of the mask cropped to
its inside voxels, in the first of its 48 orientations by the symmetries of
the cube.
"""
from __future__ import annotations

import hashlib
import itertools
import math

import numpy as np

from ..errors import OptionError, WindowError
from . import windows as W

__all__ = ["SHAPES", "SHIPPED", "normalise", "shape_dimension", "shape_window"]


def _box(sides):
    s = np.asarray(sides, float)
    lo, hi = -s / 2, s / 2
    return W.Rectangle(*lo, *hi) if len(s) == 2 else W.Box(*lo, *hi)


def _polygon(shell, holes=()):
    """Unit-area polygon window centred at its centroid."""
    import shapely
    from shapely import affinity

    g = shapely.Polygon(shell, list(holes))
    c = g.centroid
    g = affinity.translate(g, -c.x, -c.y)
    s = 1.0 / math.sqrt(g.area)
    return W.PolygonWindow(affinity.scale(g, s, s, origin=(0, 0)))


def _triangle():
    # equilateral triangle (any size: _polygon scales to unit area)
    return _polygon([(0.0, 0.0), (1.0, 0.0), (0.5, math.sqrt(3.0) / 2.0)])


def _cross():
    # plus sign made of 5 unit squares: the centre one and four arms
    a, b = 0.5, 1.5
    return _polygon([(a, -a), (b, -a), (b, a), (a, a), (a, b), (-a, b), (-a, a),
                     (-b, a), (-b, -a), (-a, -a), (-a, -b), (a, -b)])


def _holed():
    # square of side 2 with a centred square hole of side 1
    return _polygon([(-1, -1), (1, -1), (1, 1), (-1, 1)],
                    [[(-0.5, -0.5), (0.5, -0.5), (0.5, 0.5), (-0.5, 0.5)]])


def _cylinder(aspect: float) -> W.Cylinder:
    """Unit-volume cylinder with h = 2 r aspect: pi r^2 h = 2 pi aspect r^3 = 1."""
    r = (1.0 / (2.0 * math.pi * aspect)) ** (1.0 / 3.0)
    h = 2.0 * r * aspect
    return W.Cylinder(0.0, 0.0, -h / 2, h / 2, r)


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
    "triangle": (2, _triangle, "equilateral triangle"),
    "cross": (2, _cross, "plus-shaped cross of 5 equal squares (4 reflex corners)"),
    "holed": (2, _holed, "square with a centred square hole of half its side"),
    "box133": (3, lambda: _box(np.array([1.0, 3.0, 3.0]) / 9.0 ** (1.0 / 3.0)),
               "box with sides 1:3:3"),
    "cyl1": (3, lambda: _cylinder(1.0), "cylinder with height = diameter"),
    "cyl8": (3, lambda: _cylinder(8.0), "cylinder with height = 8 diameters"),
    "torus2": (2, lambda: _torus(2), "periodic square (a flat torus: no boundary)"),
    "torus3": (3, lambda: _torus(3), "periodic cube (a flat 3-torus: no boundary)"),
}

#: Names of the rectangle and box shapes (matched by the sorted aspect of the sides).
_BOXES = ("square", "rect2", "rect4", "cube", "box114", "box133")

#: Shapes of the shipped tables, per dimension.
SHIPPED = {2: ["square", "rect2", "rect4", "disk", "triangle", "cross", "holed", "torus2"],
           3: ["cube", "box114", "box133", "cyl1", "cyl8", "torus3"]}


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
    _, evecs = np.linalg.eigh(np.cov(v.T))
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


def _torus(d: int, sides=None):
    from .periodic import PeriodicBox

    s = np.ones(d) if sides is None else np.asarray(sides, float)
    s = s / np.prod(s) ** (1.0 / d)
    return PeriodicBox(*(-s / 2), *(s / 2))


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
    if getattr(window, "periodic", False):
        sides = np.sort(np.asarray(window.sides, float))
        rounded = np.round(sides / sides[0], 6)
        if np.all(rounded == 1.0):
            return f"torus{window.dim}", _torus(window.dim)
        return "torus-" + "x".join(f"{v:g}" for v in rounded), _torus(window.dim, sides)
    if isinstance(window, W.PolygonWindow):
        sides = _polygon_rectangle(window)
        if sides is not None:
            return _rectangle_shape(sides)
        name = _known_polygon(window)
        if name is not None:
            return name, shape_window(name)
    if isinstance(window, W.ConvexPolytope):
        sides = _polytope_box(window)
        if sides is not None:
            return _rectangle_shape(sides)
        rep, key = _hull_normalise(window)
        return f"hull-{hashlib.sha1(repr(key).encode()).hexdigest()[:10]}", rep
    if isinstance(window, W.Rectangle):       # also Box
        return _rectangle_shape(window.hi - window.lo)
    if isinstance(window, W.Disk):
        return "disk", shape_window("disk")
    if isinstance(window, W.Ball):
        return "ball", W.Ball(0.0, 0.0, 0.0, (3.0 / (4.0 * math.pi)) ** (1.0 / 3.0))
    if isinstance(window, W.Cylinder):
        aspect = round(window.height / (2.0 * window.r), 6)
        for name, (d, make, _) in SHAPES.items():
            rep = make()
            if d == 3 and isinstance(rep, W.Cylinder) \
                    and abs(rep.height / (2.0 * rep.r) - aspect) <= 1e-6 * aspect:
                return name, rep
        return f"cylinder-{aspect:g}", _cylinder(aspect)
    if isinstance(window, W.VoxelWindow):
        m = _voxel_canonical(window.mask)
        digest = hashlib.sha1(repr(m.shape).encode() + np.packbits(m).tobytes()).hexdigest()[:10]
        vox = (1.0 / np.count_nonzero(m)) ** (1.0 / 3.0)
        return f"voxels-{digest}", W.VoxelWindow(m, vox, -np.array(m.shape) * vox / 2)
    if isinstance(window, W.PolygonWindow):
        rep, key = _poly_normalise(window)
        digest = hashlib.sha1(repr(key).encode()).hexdigest()[:10]
        return f"polygon-{digest}", rep
    raise WindowError(f"no table can be built for a window of kind '{window.kind}'")


def _rectangle_shape(sides) -> tuple[str, W.Window]:
    """Name and unit-content representative of a rectangle or box of these sides."""
    sides = np.sort(np.asarray(sides, float))
    sides = sides / np.prod(sides) ** (1.0 / len(sides))
    rounded = np.round(sides / sides[0], 6)
    for name, (d, make, _) in SHAPES.items():
        if d == len(sides) and name in _BOXES:
            rep = make()
            rs = np.sort(rep.hi - rep.lo)
            if np.allclose(rs / rs[0], rounded, rtol=1e-6):
                return name, rep
    tag = "x".join(f"{v:g}" for v in rounded)
    return f"{'rect' if len(sides) == 2 else 'box'}-{tag}", _box(sides)


def _polygon_rectangle(w: W.PolygonWindow, rtol: float = 1e-9):
    """Side lengths if the polygon is a rectangle in any pose, else None.

    Vertices on a straight edge (to ``rtol`` of the edge lengths) are
    dropped; four vertices remain for a rectangle, with right angles and
    equal opposite sides to ``rtol``.
    """
    g = w.geometry
    if g.geom_type != "Polygon" or len(g.interiors):
        return None
    v = np.asarray(g.exterior.coords, float)[:-1]
    v = v - v.mean(axis=0)
    scale = float(np.abs(v).max())
    changed = True
    while changed and len(v) > 4:
        changed = False
        a = v - np.roll(v, 1, axis=0)            # edge into each vertex
        b = np.roll(v, -1, axis=0) - v           # edge out of it
        la, lb = np.linalg.norm(a, axis=1), np.linalg.norm(b, axis=1)
        cross = np.abs(a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0])
        straight = (la <= rtol * scale) | ((cross <= rtol * la * lb)
                                           & (np.sum(a * b, axis=1) > 0))
        if straight.any():
            v = v[~straight]
            changed = True
    if len(v) != 4:
        return None
    e = np.roll(v, -1, axis=0) - v
    le = np.linalg.norm(e, axis=1)
    dots = np.abs(np.sum(e * np.roll(e, -1, axis=0), axis=1))
    if np.any(dots > rtol * le * np.roll(le, -1)) \
            or abs(le[0] - le[2]) > rtol * le[0] or abs(le[1] - le[3]) > rtol * le[1] \
            or abs(le[0] * le[1] - g.area) > rtol * g.area:
        return None
    return np.array([le[0], le[1]])


def _known_polygon(w: W.PolygonWindow):
    """Name of the polygon shape in :data:`SHAPES` that ``w`` is similar to, or None.

    After moving the centroid to the origin and scaling to unit area, the
    polygon is rotated (and reflected) so that one of its vertices farthest
    from the centroid falls on each such vertex of the named shape in turn;
    it is that shape if the symmetric difference has area below 1e-7.
    """
    import shapely
    from shapely import affinity

    for name, (d, make, _) in SHAPES.items():
        if d != 2 or name in _BOXES or name == "disk":
            continue
        ref = make()
        if abs(w.kappa - ref.kappa) > 1e-7 * ref.kappa or w.holes != ref.holes:
            continue
        g = w.geometry
        c = g.centroid
        g = affinity.translate(g, -c.x, -c.y)
        s = 1.0 / math.sqrt(g.area)
        g = affinity.scale(g, s, s, origin=(0, 0))
        for mirror in (1.0, -1.0):
            gm = affinity.scale(g, 1.0, mirror, origin=(0, 0))
            v = shapely.get_coordinates(gm)
            rad = np.hypot(v[:, 0], v[:, 1])
            u = v[np.argmax(rad)]
            rv = shapely.get_coordinates(ref.geometry)
            rrad = np.hypot(rv[:, 0], rv[:, 1])
            for q in rv[np.abs(rrad - rad.max()) <= 1e-6 * rad.max()]:
                ang = math.atan2(q[1], q[0]) - math.atan2(u[1], u[0])
                moved = affinity.rotate(gm, ang, origin=(0, 0), use_radians=True)
                if shapely.symmetric_difference(moved, ref.geometry).area < 1e-7:
                    return name
    return None


def _polytope_box(w: W.ConvexPolytope, rtol: float = 1e-9):
    """Side lengths if the convex polytope is a rectangular box in any pose, else None."""
    if len(w.vertices) != 8:
        return None
    normals, offsets = [], []
    for n, b in zip(w._eq[:, :3], w._eq[:, 3]):
        if not any(np.linalg.norm(n - m) <= 1e-7 for m in normals):
            normals.append(n)
            offsets.append(b)
    if len(normals) != 6:
        return None
    normals, offsets = np.array(normals), np.array(offsets)
    sides, axes = [], []
    used = set()
    for i in range(6):
        if i in used:
            continue
        j = int(np.argmin(np.linalg.norm(normals + normals[i], axis=1)))
        if j == i or np.linalg.norm(normals[j] + normals[i]) > 1e-7:
            return None
        used.update((i, j))
        sides.append(abs(offsets[i] + offsets[j]))
        axes.append(normals[i])
    axes = np.array(axes)
    if len(axes) != 3 or np.any(np.abs(axes @ axes.T - np.eye(3)) > 1e-7) \
            or abs(np.prod(sides) - w.measure) > 1e-7 * w.measure:
        return None
    return np.array(sides)


def _hull_normalise(w: W.ConvexPolytope):
    """Unit-volume, principal-axes, canonically reflected copy of a convex polytope."""
    v = np.asarray(w.vertices, float)
    v = (v - v.mean(axis=0)) / w.measure ** (1.0 / 3.0)
    _, evecs = np.linalg.eigh(np.cov(v.T))
    v = v @ evecs
    best = None
    for signs in np.array(np.meshgrid([1, -1], [1, -1], [1, -1])).T.reshape(-1, 3):
        vv = np.round(v * signs, 6) + 0.0
        key = tuple(map(tuple, vv[np.lexsort(vv.T[::-1])]))
        if best is None or key < best[0]:
            best = (key, signs)
    return W.ConvexPolytope(v * best[1]), best[0]


def _voxel_canonical(mask: np.ndarray) -> np.ndarray:
    """The mask cropped to its inside voxels, in the first of its 48 orientations."""
    idx = np.nonzero(mask)
    m = mask[tuple(slice(int(i.min()), int(i.max()) + 1) for i in idx)]
    best = None
    for perm in itertools.permutations(range(3)):
        t = np.transpose(m, perm)
        for flips in itertools.product((False, True), repeat=3):
            f = t[tuple(slice(None, None, -1) if fl else slice(None) for fl in flips)]
            key = (f.shape, np.packbits(f).tobytes())
            if best is None or key < best[0]:
                best = (key, f)
    return np.ascontiguousarray(best[1])
