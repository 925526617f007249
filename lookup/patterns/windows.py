"""Observation windows: the region W in which a point pattern was observed.

Every window knows its dimension ``dim``, its content ``measure`` (area in 2D,
volume in 3D), the content of its boundary ``boundary_measure`` (perimeter or
surface area), the shape factor

    kappa = |dW| / |W|^((d-1)/d)

(square 4, disk 2*sqrt(pi), cube 6, ball 6**(2/3)*pi**(1/3)), whether it
contains given points, the distance of points to its boundary (for border
edge corrections), and how to draw n i.i.d. uniform points inside itself
(the binomial null process).  Sampling is vectorised: closed form for
rectangles, disks, boxes and balls; area-weighted constrained Delaunay
triangles for polygons (exact, no rejection); vectorised rejection from the
bounding box for convex polyhedra.
"""
from __future__ import annotations

import json
import math
import os
import warnings

import numpy as np

from ..errors import WindowError

__all__ = [
    "Window", "Rectangle", "Disk", "PolygonWindow", "Box", "Ball",
    "ConvexPolytope", "parse_window", "EstimatedWindowWarning",
]


class EstimatedWindowWarning(UserWarning):
    """The window was estimated from the data, which biases the test."""


class _Checked(type):
    """Metaclass that validates the size of every window after construction."""

    def __call__(cls, *args, **kwargs):
        return _check_size(super().__call__(*args, **kwargs))


class Window(metaclass=_Checked):
    """Base class of observation windows.

    Attributes
    ----------
    dim : int
        Dimension of the ambient space (2 or 3).
    kind : str
        Short name of the window type (``"rect"``, ``"disk"``, ...).
    estimated : bool
        True when the window was derived from the data (``bbox``/``hull``).

    Examples
    --------
    Every window answers the same questions; here a disk of radius 2:

    >>> import numpy as np
    >>> from nullatlas import Disk
    >>> w = Disk(0, 0, 2)
    >>> w.dim, round(float(w.measure), 4), round(float(w.boundary_measure), 4)
    (2, 12.5664, 12.5664)
    >>> round(float(w.kappa), 4)          # 2 sqrt(pi) for every disk
    3.5449
    >>> w.contains(np.array([[0.0, 1.9], [2.0, 1.0]]))
    array([ True, False])
    >>> w.boundary_distance(np.array([[0.5, 0.0]]))
    array([1.5])
    >>> w.sample(1000, np.random.default_rng(0)).shape
    (1000, 2)
    >>> w.spec()
    'disk:0,0,2'
    """

    dim: int = 0
    kind: str = "window"
    estimated: bool = False
    convex: bool = True
    holes: int = 0

    @property
    def measure(self) -> float:
        """Area (2D) or volume (3D)."""
        raise NotImplementedError

    @property
    def boundary_measure(self) -> float:
        """Perimeter (2D) or surface area (3D)."""
        raise NotImplementedError

    @property
    def kappa(self) -> float:
        """Shape factor |dW| / |W|^((d-1)/d), invariant under similarity."""
        return self.boundary_measure / self.measure ** ((self.dim - 1) / self.dim)

    @property
    def length_scale(self) -> float:
        """|W|^(1/d): the side of a cube of the same content."""
        return self.measure ** (1.0 / self.dim)

    def contains(self, points: np.ndarray) -> np.ndarray:
        """Boolean mask of points inside the closed window."""
        raise NotImplementedError

    def boundary_distance(self, points: np.ndarray) -> np.ndarray:
        """Euclidean distance of each (interior) point to the boundary."""
        raise NotImplementedError

    def sample(self, n: int, rng: np.random.Generator) -> np.ndarray:
        """Draw ``n`` i.i.d. uniform points in the window, shape (n, dim)."""
        raise NotImplementedError

    def describe(self) -> dict:
        """JSON-ready description: kind, content, boundary, kappa, flags."""
        key = "area" if self.dim == 2 else "volume"
        bkey = "perimeter" if self.dim == 2 else "surface_area"
        return {
            "kind": self.kind,
            "dimension": self.dim,
            key: float(self.measure),
            bkey: float(self.boundary_measure),
            "kappa": float(self.kappa),
            "convex": bool(self.convex),
            "holes": int(self.holes),
            "estimated": bool(self.estimated),
            "spec": self.spec(),
        }

    def spec(self) -> str:
        """A string from which :func:`parse_window` rebuilds the window."""
        raise NotImplementedError

    def __repr__(self) -> str:  # pragma: no cover - cosmetic
        return f"<{type(self).__name__} {self.spec()} kappa={self.kappa:.4g}>"


def _check_size(w: "Window") -> "Window":
    """Reject windows whose content or boundary over/underflows a float."""
    with np.errstate(all="ignore"):
        try:
            m, b = float(w.measure), float(w.boundary_measure)
            k = float(w.kappa)
        except (OverflowError, ZeroDivisionError):
            m, b, k = float("inf"), float("inf"), float("nan")
    if not (np.isfinite(m) and m > 0 and np.isfinite(b) and b > 0 and np.isfinite(k) and k > 0
            and np.isfinite(m ** (1.0 / w.dim)) and m ** (1.0 / w.dim) > 1e-100):
        raise WindowError(f"window {w.kind}: its size is out of floating-point range "
                          f"(content {m:.3g}, boundary {b:.3g}); rescale the coordinates")
    return w


def _finite(values, what):
    vals = [float(v) for v in values]
    if not all(math.isfinite(v) for v in vals):
        raise WindowError(f"{what}: coordinates must be finite numbers, got {values}")
    return vals


class Rectangle(Window):
    """Axis-aligned rectangle [xmin, xmax] x [ymin, ymax].

    Examples
    --------
    >>> from nullatlas import Rectangle
    >>> r = Rectangle(0, 0, 4, 2)
    >>> r.measure, r.boundary_measure, round(r.kappa, 4)
    (8.0, 12.0, 4.2426)
    >>> Rectangle(10, 10, 11, 11).kappa   # every square: 4
    4.0
    >>> r.describe()["spec"]
    'rect:0,0,4,2'
    """

    dim = 2
    kind = "rect"

    def __init__(self, xmin, ymin, xmax, ymax):
        self.lo = np.array(_finite([xmin, ymin], "rect"))
        self.hi = np.array(_finite([xmax, ymax], "rect"))
        if np.any(self.hi <= self.lo):
            raise WindowError(
                f"rect:{xmin},{ymin},{xmax},{ymax} has zero or negative area "
                "(need xmin < xmax and ymin < ymax)")

    @property
    def measure(self):
        return float(np.prod(self.hi - self.lo))

    @property
    def boundary_measure(self):
        return float(2 * np.sum(self.hi - self.lo))

    def contains(self, points):
        p = np.asarray(points, float)
        return np.all((p >= self.lo) & (p <= self.hi), axis=1)

    def boundary_distance(self, points):
        p = np.asarray(points, float)
        return np.minimum(p - self.lo, self.hi - p).min(axis=1)

    def sample(self, n, rng):
        return self.lo + (self.hi - self.lo) * rng.random((n, self.dim))

    def spec(self):
        return "rect:" + ",".join(f"{v:.17g}" for v in (*self.lo, *self.hi))


class Box(Rectangle):
    """Axis-aligned box in 3D.

    Examples
    --------
    >>> from nullatlas import Box
    >>> cube = Box(0, 0, 0, 1, 1, 1)
    >>> cube.dim, cube.measure, cube.boundary_measure, cube.kappa
    (3, 1.0, 6.0, 6.0)
    >>> round(Box(0, 0, 0, 1, 1, 4).kappa, 4)
    7.1433
    """

    dim = 3
    kind = "box"

    def __init__(self, xmin, ymin, zmin, xmax, ymax, zmax):
        self.lo = np.array(_finite([xmin, ymin, zmin], "box"))
        self.hi = np.array(_finite([xmax, ymax, zmax], "box"))
        if np.any(self.hi <= self.lo):
            raise WindowError(
                f"box:{xmin},{ymin},{zmin},{xmax},{ymax},{zmax} has zero or negative "
                "volume (need min < max on every axis)")

    @property
    def boundary_measure(self):
        a, b, c = self.hi - self.lo
        return float(2 * (a * b + b * c + a * c))

    def spec(self):
        return "box:" + ",".join(f"{v:.17g}" for v in (*self.lo, *self.hi))


class Disk(Window):
    """Disk of centre (cx, cy) and radius r.

    Examples
    --------
    >>> import numpy as np
    >>> from nullatlas import Disk
    >>> wafer = Disk(0, 0, 150)
    >>> pts = wafer.sample(500, np.random.default_rng(1))
    >>> bool(wafer.contains(pts).all()), bool(np.hypot(*pts.T).max() <= 150)
    (True, True)
    """

    dim = 2
    kind = "disk"

    def __init__(self, cx, cy, r):
        cx, cy, r = _finite([cx, cy, r], "disk")
        if r <= 0:
            raise WindowError(f"disk radius must be positive, got {r}")
        self.centre = np.array([cx, cy])
        self.r = r

    @property
    def measure(self):
        return math.pi * np.float64(self.r) ** 2

    @property
    def boundary_measure(self):
        return 2 * math.pi * self.r

    def contains(self, points):
        d = np.linalg.norm(np.asarray(points, float) - self.centre, axis=1)
        # tolerance: relative rounding of r plus the float spacing at the centre
        return d <= self.r * (1 + 1e-12) + 4 * np.spacing(np.abs(self.centre).max())

    def boundary_distance(self, points):
        return self.r - np.linalg.norm(np.asarray(points, float) - self.centre, axis=1)

    def sample(self, n, rng):
        # Inverse-CDF in the radius: P(R <= s) = (s / r)^2.
        u = rng.random((n, 2))
        rad = self.r * np.sqrt(u[:, 0])
        ang = 2 * math.pi * u[:, 1]
        return self.centre + np.column_stack([rad * np.cos(ang), rad * np.sin(ang)])

    def spec(self):
        return "disk:" + ",".join(f"{v:.17g}" for v in (*self.centre, self.r))


class Ball(Window):
    """Ball of centre (cx, cy, cz) and radius r.

    Examples
    --------
    >>> import numpy as np
    >>> from nullatlas import Ball
    >>> b = Ball(0, 0, 0, 1)
    >>> round(float(b.measure), 4), round(float(b.kappa), 4)   # 4 pi / 3, 6^(2/3) pi^(1/3)
    (4.1888, 4.836)
    >>> b.sample(3, np.random.default_rng(0)).shape
    (3, 3)
    """

    dim = 3
    kind = "ball"

    def __init__(self, cx, cy, cz, r):
        cx, cy, cz, r = _finite([cx, cy, cz, r], "ball")
        if r <= 0:
            raise WindowError(f"ball radius must be positive, got {r}")
        self.centre = np.array([cx, cy, cz])
        self.r = r

    @property
    def measure(self):
        return 4.0 / 3.0 * math.pi * np.float64(self.r) ** 3

    @property
    def boundary_measure(self):
        return 4 * math.pi * np.float64(self.r) ** 2

    def contains(self, points):
        d = np.linalg.norm(np.asarray(points, float) - self.centre, axis=1)
        # tolerance: relative rounding of r plus the float spacing at the centre
        return d <= self.r * (1 + 1e-12) + 4 * np.spacing(np.abs(self.centre).max())

    def boundary_distance(self, points):
        return self.r - np.linalg.norm(np.asarray(points, float) - self.centre, axis=1)

    def sample(self, n, rng):
        # Direction uniform on the sphere (normalised Gaussian), radius r U^(1/3).
        g = rng.standard_normal((n, 3))
        g /= np.linalg.norm(g, axis=1, keepdims=True)
        rad = self.r * np.cbrt(rng.random(n))
        return self.centre + g * rad[:, None]

    def spec(self):
        return "ball:" + ",".join(f"{v:.17g}" for v in (*self.centre, self.r))


class PolygonWindow(Window):
    """Polygon (possibly with holes, possibly several parts) in the plane.

    Parameters
    ----------
    geometry : shapely Polygon or MultiPolygon
        A valid polygonal geometry of positive area.
    source : str, optional
        Where the geometry came from (a file path), for ``spec``.

    Examples
    --------
    A square plate with a square hole:

    >>> import numpy as np
    >>> import shapely
    >>> from nullatlas import PolygonWindow
    >>> plate = shapely.Polygon([(0, 0), (4, 0), (4, 4), (0, 4)],
    ...                         holes=[[(1, 1), (2, 1), (2, 2), (1, 2)]])
    >>> w = PolygonWindow(plate)
    >>> w.measure, w.boundary_measure, w.holes, w.convex
    (15.0, 20.0, 1, False)
    >>> w.contains(np.array([[1.5, 1.5], [3.0, 3.0]]))
    array([False,  True])
    """

    dim = 2
    kind = "polygon"

    def __init__(self, geometry, source: str | None = None):
        import shapely

        if geometry.geom_type not in ("Polygon", "MultiPolygon"):
            raise WindowError(
                f"{source or 'window'}: geometry is a {geometry.geom_type}, "
                "expected a Polygon or MultiPolygon")
        if not shapely.is_valid(geometry):
            raise WindowError(
                f"{source or 'window'}: invalid polygon ({shapely.is_valid_reason(geometry)})")
        if not geometry.area > 0:
            raise WindowError(f"{source or 'window'}: polygon has zero area")
        self.geometry = geometry
        self.source = source
        shapely.prepare(geometry)
        parts = list(getattr(geometry, "geoms", [geometry]))
        self.holes = int(sum(len(p.interiors) for p in parts))
        hull_area = geometry.convex_hull.area
        self.convex = bool(len(parts) == 1 and self.holes == 0
                           and abs(hull_area - geometry.area) <= 1e-9 * hull_area)
        self._boundary = geometry.boundary
        shapely.prepare(self._boundary)
        self._triangles = None

    @property
    def measure(self):
        return float(self.geometry.area)

    @property
    def boundary_measure(self):
        return float(self.geometry.length)

    def contains(self, points):
        import shapely

        p = np.asarray(points, float)
        inside = shapely.intersects_xy(self.geometry, p[:, 0], p[:, 1])
        if not inside.all():
            # Points within rounding distance of the boundary count as inside.
            tol = 1e-9 * self.length_scale
            out = ~inside
            d = shapely.distance(self._boundary, shapely.points(p[out]))
            inside[out] = d <= tol
        return inside

    def boundary_distance(self, points):
        import shapely

        p = np.asarray(points, float)
        return shapely.distance(self._boundary, shapely.points(p))

    def _triangulation(self):
        """Triangle vertices (k, 3, 2) and cumulative area weights."""
        if self._triangles is None:
            import shapely

            tris = shapely.constrained_delaunay_triangles(self.geometry)
            parts = shapely.get_parts(tris)
            coords = shapely.get_coordinates(parts).reshape(len(parts), 4, 2)[:, :3]
            a, b, c = coords[:, 0], coords[:, 1], coords[:, 2]
            areas = 0.5 * np.abs((b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1])
                                 - (b[:, 1] - a[:, 1]) * (c[:, 0] - a[:, 0]))
            keep = areas > 0
            coords, areas = coords[keep], areas[keep]
            self._triangles = (coords, np.cumsum(areas) / areas.sum(), float(areas.sum()))
        return self._triangles

    def sample(self, n, rng):
        coords, cum, _ = self._triangulation()
        k = np.searchsorted(cum, rng.random(n) * cum[-1], side="right")
        k = np.minimum(k, len(cum) - 1)
        u = rng.random((n, 2))
        flip = u.sum(axis=1) > 1
        u[flip] = 1 - u[flip]
        a = coords[k, 0]
        return a + u[:, :1] * (coords[k, 1] - a) + u[:, 1:] * (coords[k, 2] - a)

    def spec(self):
        return self.source if self.source else "polygon:" + self.geometry.wkt


class ConvexPolytope(Window):
    """Convex polyhedron in 3D given by the convex hull of some points.

    Examples
    --------
    >>> import numpy as np
    >>> from nullatlas import ConvexPolytope
    >>> corners = np.array([[x, y, z] for x in (0, 1) for y in (0, 1) for z in (0, 1)])
    >>> w = ConvexPolytope(corners)
    >>> round(w.measure, 12), round(w.boundary_measure, 12)
    (1.0, 6.0)
    >>> w.contains(np.array([[0.5, 0.5, 0.5], [1.5, 0.0, 0.0]]))
    array([ True, False])
    """

    dim = 3
    kind = "hull"

    def __init__(self, vertices):
        from scipy.spatial import ConvexHull, QhullError

        v = np.asarray(vertices, float)
        try:
            self._hull = ConvexHull(v)
        except (QhullError, ValueError) as exc:
            raise WindowError("cannot build a 3D convex hull: points are flat or too few "
                              f"({exc.__class__.__name__})") from None
        # Facet equations n.x + b <= 0 inside, |n| = 1.
        self._eq = self._hull.equations
        self.vertices = v[self._hull.vertices]
        self.lo = self.vertices.min(axis=0)
        self.hi = self.vertices.max(axis=0)

    @property
    def measure(self):
        return float(self._hull.volume)

    @property
    def boundary_measure(self):
        return float(self._hull.area)

    def contains(self, points):
        p = np.asarray(points, float)
        tol = 1e-9 * self.length_scale
        return np.all(p @ self._eq[:, :3].T + self._eq[:, 3] <= tol, axis=1)

    def boundary_distance(self, points):
        p = np.asarray(points, float)
        return np.min(-(p @ self._eq[:, :3].T + self._eq[:, 3]), axis=1)

    def sample(self, n, rng):
        out = np.empty((0, 3))
        frac = self.measure / float(np.prod(self.hi - self.lo))
        while len(out) < n:
            need = n - len(out)
            m = int(need / frac * 1.2) + 16
            cand = self.lo + (self.hi - self.lo) * rng.random((m, 3))
            out = np.vstack([out, cand[self.contains(cand)]])
        return out[:n]

    def spec(self):
        return "hull"


# --------------------------------------------------------------------------
# Parsing of window specifications
# --------------------------------------------------------------------------

_NUMERIC = {"rect": (Rectangle, 4), "disk": (Disk, 3), "box": (Box, 6), "ball": (Ball, 4)}

from .windowspec import SPEC_HELP  # noqa: E402  (re-exported)


def _load_polygon_file(path: str) -> PolygonWindow:
    import shapely
    import shapely.geometry
    import shapely.wkt

    try:
        with open(path, "r", encoding="utf-8") as fh:
            text = fh.read()
    except (OSError, UnicodeDecodeError, ValueError) as exc:
        raise WindowError(f"cannot read window file {path!r}: {exc}") from None
    lower = path.lower()
    try:
        if lower.endswith((".geojson", ".json")):
            obj = json.loads(text)
            if isinstance(obj, dict) and obj.get("type") == "FeatureCollection":
                feats = obj.get("features") or []
                if len(feats) != 1:
                    raise WindowError(
                        f"{path}: FeatureCollection must hold exactly one feature, has {len(feats)}")
                obj = feats[0]
            if isinstance(obj, dict) and obj.get("type") == "Feature":
                obj = obj.get("geometry")
            if not isinstance(obj, dict) or "type" not in obj:
                raise WindowError(f"{path}: not a GeoJSON geometry")
            geom = shapely.geometry.shape(obj)
        else:
            geom = shapely.wkt.loads(text.strip())
    except WindowError:
        raise
    except Exception as exc:  # shapely/json raise many types on junk
        msg = str(exc).splitlines()[0] if str(exc) else exc.__class__.__name__
        raise WindowError(f"{path}: cannot parse window geometry ({msg})") from None
    if geom.is_empty:
        raise WindowError(f"{path}: window geometry is empty")
    return PolygonWindow(geom, source=path)


def parse_window(spec: str, points: np.ndarray | None = None) -> Window:
    """Build a window from a command-line specification.

    Parameters
    ----------
    spec : str
        One of ``rect:xmin,ymin,xmax,ymax``, ``disk:cx,cy,r``,
        ``box:xmin,ymin,zmin,xmax,ymax,zmax``, ``ball:cx,cy,cz,r``, a path to
        a ``.geojson``/``.json``/``.wkt`` file holding a (multi)polygon,
        ``bbox`` or ``hull``.  The last two are estimated from ``points`` and
        emit an :class:`EstimatedWindowWarning`.
    points : ndarray, optional
        Required for ``bbox`` and ``hull``.

    Returns
    -------
    Window

    Raises
    ------
    WindowError
        On any malformed specification.

    Examples
    --------
    >>> import warnings
    >>> import numpy as np
    >>> from nullatlas import parse_window
    >>> parse_window("disk:0,0,150").kind
    'disk'
    >>> parse_window("rect:0,0,10,5").measure
    50.0
    >>> parse_window("polygon:POLYGON ((0 0, 3 0, 0 4, 0 0))").measure
    6.0
    >>> parse_window("ball:0,0,0,1").dim
    3

    A window estimated from the points warns that it biases the test:

    >>> pts = np.array([[0.0, 0.0], [2.0, 1.0], [1.0, 3.0]])
    >>> with warnings.catch_warnings(record=True) as caught:
    ...     warnings.simplefilter("always")
    ...     w = parse_window("bbox", pts)
    >>> w.spec(), w.estimated, caught[0].category.__name__
    ('rect:0,0,2,3', True, 'EstimatedWindowWarning')
    """
    if not isinstance(spec, str) or not spec.strip():
        raise WindowError(f"empty window specification; expected {SPEC_HELP}")
    spec = spec.strip()
    head, _, rest = spec.partition(":")
    key = head.lower()
    if key in _NUMERIC and rest:
        cls, k = _NUMERIC[key]
        parts = [s for s in rest.split(",")]
        if len(parts) != k:
            raise WindowError(f"window '{spec}': {key} needs {k} numbers, got {len(parts)}")
        try:
            vals = [float(s) for s in parts]
        except ValueError:
            raise WindowError(f"window '{spec}': not all of {rest!r} are numbers") from None
        return cls(*vals)
    if key == "polygon" and rest:
        import shapely.wkt
        try:
            geom = shapely.wkt.loads(rest)
        except Exception:
            raise WindowError(f"window '{spec[:60]}': cannot parse WKT") from None
        return PolygonWindow(geom)
    if key in ("bbox", "hull") and not rest:
        if points is None or len(points) == 0:
            raise WindowError(f"window '{key}' is estimated from the points, but there are none")
        p = np.asarray(points, float)
        if p.ndim != 2 or p.shape[1] not in (2, 3) or not np.all(np.isfinite(p)):
            raise WindowError(f"window '{key}' needs finite 2D or 3D points to be estimated from")
        warnings.warn(
            f"window '{key}' is estimated from the data; an estimated window biases the "
            "test towards regularity near the boundary -- give the true window if known",
            EstimatedWindowWarning, stacklevel=2)
        if key == "bbox":
            lo, hi = p.min(axis=0), p.max(axis=0)
            w = (Rectangle if p.shape[1] == 2 else Box)(*lo, *hi)
        elif p.shape[1] == 2:
            import shapely
            hull = shapely.MultiPoint(p).convex_hull
            if hull.geom_type != "Polygon":
                raise WindowError("window 'hull': the points are collinear, their hull has no area")
            w = PolygonWindow(hull)
            w.kind = "hull"
            w.spec = lambda: "hull"
        else:
            w = ConvexPolytope(p)
        w.estimated = True
        return w
    if os.path.splitext(spec)[1].lower() in (".geojson", ".json", ".wkt"):
        return _load_polygon_file(spec)
    raise WindowError(f"unknown window specification '{spec}'; expected {SPEC_HELP}")
