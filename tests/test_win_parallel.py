"""Parallel-set geometry of windows: inner_content, opened_content,
narrow_share, and known shapes in any pose.

The Monte Carlo checks draw 200,000 points with the window's own sampler
and compare the share farther than t from the boundary (the window's own
boundary_distance) with inner_content(t) / measure, within 4.5 binomial
standard errors; the same check is shown to reject wrong formulas.
"""
import math

import numpy as np
import pytest
import shapely
from shapely import affinity

from nullatlas.lookup.errors import WindowError
from nullatlas.lookup.patterns.shapes import SHAPES, SHIPPED, normalise, shape_window
from nullatlas.lookup.patterns.windows import (
    Ball,
    Box,
    ConvexPolytope,
    Cylinder,
    Disk,
    MaskWindow,
    PolygonWindow,
    Rectangle,
    VoxelWindow,
)

N_MC = 200_000
Z_MAX = 4.5

HOLED = shapely.Polygon([(0, 0), (10, 0), (10, 10), (0, 10)],
                        [[(1, 1), (3, 1), (3, 3), (1, 3)], [(6, 6), (9, 6), (9, 8), (6, 8)]])
L_SHAPE = shapely.Polygon([(0, 0), (4, 0), (4, 1.5), (1.5, 1.5), (1.5, 5), (0, 5)])
TWO_PARTS = shapely.MultiPolygon([shapely.box(0, 0, 2, 1), shapely.box(3, 0, 4, 4)])


def _blob2d():
    """An irregular pixel blob with a hole and a diagonal touch."""
    y, x = np.mgrid[0:60, 0:80]
    m = ((x - 40) / 34.0) ** 2 + ((y - 30) / 24.0) ** 2 + 0.15 * np.sin(x / 5.0) <= 1
    m &= ~(((x - 30) ** 2 + (y - 28) ** 2) <= 36)
    m[5:9, 70:75] = True
    return m


def _blob3d():
    """A voxel ball with a cavity and a cut-away lower half-quarter (reflex edges)."""
    n = 18
    g = np.indices((n, n, n)) - n / 2 + 0.5
    m = (g ** 2).sum(0) <= 8 ** 2
    m &= ((g[0] - 2) ** 2 + g[1] ** 2 + g[2] ** 2) > 2.5 ** 2
    m[:, :, :5] &= (g[0] < 0)[:, :, :5]
    return m


def _hull():
    rng = np.random.default_rng(11)
    return ConvexPolytope(rng.normal(size=(40, 3)) * [1.0, 2.0, 0.7])


WINDOWS = {
    "rect": lambda: Rectangle(1, 2, 4, 3.5),
    "box": lambda: Box(0, 0, 0, 1, 2, 3),
    "disk": lambda: Disk(1, -1, 2),
    "ball": lambda: Ball(0, 0, 0, 1.5),
    "cylinder": lambda: Cylinder(0.5, 0.5, -1, 2, 0.8),
    "polygon-holed": lambda: PolygonWindow(HOLED),
    "polygon-L": lambda: PolygonWindow(L_SHAPE),
    "multipolygon": lambda: PolygonWindow(TWO_PARTS),
    "hull": _hull,
    "mask": lambda: MaskWindow.from_array(_blob2d(), 0.1, (-3.0, 2.0)),
    "voxels": lambda: VoxelWindow(_blob3d(), 0.25, (1.0, -2.0, 0.5)),
}


def _mc_share(w, seed):
    rng = np.random.default_rng(seed)
    pts = w.sample(N_MC, rng)
    return w.boundary_distance(pts)


def _z_scores(w, d, ts, inner):
    z = []
    for t, v in zip(ts, inner):
        f = float(np.mean(d > t))
        se = math.sqrt(max(f * (1 - f), 1.0 / N_MC) / N_MC)
        z.append((f - v / w.measure) / se)
    return np.array(z)


@pytest.mark.parametrize("kind", sorted(WINDOWS))
def test_inner_content_against_monte_carlo(kind):
    w = WINDOWS[kind]()
    d = _mc_share(w, seed=sorted(WINDOWS).index(kind) + 100)
    ts = np.array([0.03, 0.12, 0.3, 0.6]) * float(d.max())
    inner = w.inner_content(ts)
    assert inner.shape == ts.shape
    z = _z_scores(w, d, ts, inner)
    assert np.all(np.abs(z) < Z_MAX), (kind, z)
    assert np.all(np.diff(inner) < 0) and inner[0] < w.measure
    assert w.inner_content(0.0) == pytest.approx(w.measure, rel=1e-12)


def test_monte_carlo_check_rejects_wrong_formulas():
    # one-sided erosion of a rectangle, holes that do not grow, and the
    # digital count of voxel centres are all caught by the same check
    r = Rectangle(1, 2, 4, 3.5)
    d = _mc_share(r, 1)
    ts = np.array([0.05, 0.2, 0.4])
    wrong = np.prod(np.maximum((r.hi - r.lo)[None] - ts[:, None], 0), axis=1)
    assert np.max(np.abs(_z_scores(r, d, ts, wrong))) > 10

    p = PolygonWindow(HOLED)
    d = _mc_share(p, 2)
    ts = np.array([0.1, 0.3, 0.6])
    holes = sum(shapely.Polygon(h).area for h in HOLED.interiors)
    wrong = np.array([shapely.Polygon(HOLED.exterior).buffer(-t).area - holes for t in ts])
    assert np.max(np.abs(_z_scores(p, d, ts, wrong))) > 10

    v = VoxelWindow(_blob3d(), 0.25)
    d = _mc_share(v, 3)
    ts = np.array([0.05, 0.2, 0.5])
    centre = v._centre_edt()[v.mask] - 0.5
    wrong = np.array([np.count_nonzero(centre * 0.25 > t) * 0.25 ** 3 for t in ts])
    assert np.max(np.abs(_z_scores(v, d, ts, wrong))) > 10


@pytest.mark.parametrize("w,exact", [
    (Rectangle(0, 0, 2, 3), lambda t: (2 - 2 * t) * (3 - 2 * t)),
    (Box(0, 0, 0, 1, 2, 3), lambda t: (1 - 2 * t) * (2 - 2 * t) * (3 - 2 * t)),
    (Disk(0, 0, 2), lambda t: math.pi * (2 - t) ** 2),
    (Ball(1, 1, 1, 2), lambda t: 4 / 3 * math.pi * (2 - t) ** 3),
    (Cylinder(0, 0, 0, 3, 1), lambda t: math.pi * (1 - t) ** 2 * (3 - 2 * t)),
    # an L: two arms plus the square at the reflex corner outside the disk
    (PolygonWindow(shapely.Polygon([(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)])),
     lambda t: 2 * (2 - 2 * t) * (1 - 2 * t) - (1 - 2 * t) ** 2 + t * t * (1 - math.pi / 4)),
])
def test_inner_content_closed_forms(w, exact):
    for t in (0.05, 0.2, 0.3, 0.45):
        assert w.inner_content(t) == pytest.approx(exact(t), rel=1e-4)
    assert w.inner_content(50.0) == 0.0


def test_hull_inner_content_matches_box_and_handles_arrays():
    corners = np.array([[x, y, z] for x in (0, 1) for y in (0, 2) for z in (0, 3)], float)
    h, b = ConvexPolytope(corners), Box(0, 0, 0, 1, 2, 3)
    ts = np.array([[0.0, 0.1], [0.3, 0.6]])
    np.testing.assert_allclose(h.inner_content(ts), b.inner_content(ts), rtol=1e-9, atol=1e-12)
    assert h.inner_content(ts).shape == (2, 2)


@pytest.mark.parametrize("w", [
    Rectangle(0, 0, 2, 3), Box(0, 0, 0, 1, 2, 3), Disk(0, 0, 2), Ball(0, 0, 0, 1.5),
    Cylinder(1, 2, 0, 3, 0.7), PolygonWindow(HOLED), PolygonWindow(L_SHAPE),
    PolygonWindow(TWO_PARTS), _hull(),
    MaskWindow.from_array(_blob2d(), 0.1), VoxelWindow(_blob3d(), 0.25),
], ids=lambda w: w.kind)
def test_steiner_derivative_is_boundary_measure(w):
    # -d/dt |W_t| at t = 0 is the perimeter / surface area
    h = 1e-6 * w.length_scale
    slope = (w.measure - w.inner_content(h)) / h
    assert slope == pytest.approx(w.boundary_measure, rel=1e-3)


@pytest.mark.parametrize("bad", [-0.1, float("nan"), [0.1, float("inf")], "a"])
def test_bad_distances_are_window_errors(bad):
    with pytest.raises(WindowError):
        Rectangle(0, 0, 1, 1).inner_content(bad)
    with pytest.raises(WindowError):
        Disk(0, 0, 1).opened_content(bad)


# --------------------------------------------------------------------------
# Opening by a ball
# --------------------------------------------------------------------------

C = 1 - math.pi / 4      # share of r^2 that a 90-degree convex corner loses

# Two 4 x 4 squares joined by a neck 1 wide and 2 long, flush with the bottom:
# six convex corners and two reflex ones.
DUMBBELL = shapely.Polygon([(0, 0), (10, 0), (10, 4), (6, 4), (6, 1), (4, 1), (4, 4), (0, 4)])


@pytest.mark.parametrize("r", [0.1, 0.3, 0.45])
def test_dumbbell_keeps_its_neck_below_half_its_width(r):
    w = PolygonWindow(DUMBBELL)
    assert w.opened_content(r) == pytest.approx(34 - 6 * C * r * r, rel=1e-4)


@pytest.mark.parametrize("r", [1.0, 1.2, 1.9])
def test_dumbbell_loses_exactly_its_neck(r):
    # no ball of radius >= 1 enters the neck; the squares become two rounded squares
    w = PolygonWindow(DUMBBELL)
    assert w.opened_content(r) == pytest.approx(32 - 8 * C * r * r, rel=1e-4)
    assert w.narrow_share(2 * r) == pytest.approx(1 - (32 - 8 * C * r * r) / 34, abs=1e-4)
    # the same from a raster of the dumbbell (pixels of 1/4)
    m = np.zeros((16, 40), bool)
    m[:, :16] = m[:, 24:] = True
    m[12:, 16:24] = True                       # rows 12..15 are the bottom (y in [0, 1])
    mw = MaskWindow.from_array(m, 0.25)
    assert mw.measure == pytest.approx(34) and mw.geometry.equals(DUMBBELL)
    assert mw.opened_content(r) == pytest.approx(32 - 8 * C * r * r, rel=1e-4)


def test_opened_closed_forms_and_polygon_agree():
    rect, poly = Rectangle(0, 0, 2, 3), PolygonWindow(shapely.box(0, 0, 2, 3))
    for r in (0.0, 0.2, 0.5, 0.99):
        assert rect.opened_content(r) == pytest.approx(6 - (4 - math.pi) * r * r, rel=1e-12)
        assert poly.opened_content(r) == pytest.approx(rect.opened_content(r), rel=1e-4)
    assert rect.opened_content(1.0) == 0.0 and poly.opened_content(1.01) == pytest.approx(0.0)
    corners = np.array([[x, y, z] for x in (0, 1) for y in (0, 2) for z in (0, 3)], float)
    hull, box = ConvexPolytope(corners), Box(0, 0, 0, 1, 2, 3)
    np.testing.assert_allclose(hull.opened_content([0, 0.1, 0.3, 0.49]),
                               box.opened_content([0, 0.1, 0.3, 0.49]), rtol=1e-9)
    assert Disk(0, 0, 1).opened_content([0.5, 1.5]).tolist() == [math.pi, 0.0]
    assert Ball(0, 0, 0, 1).narrow_share(1.9) == 0.0 and Ball(0, 0, 0, 1).narrow_share(2.1) == 1.0


def _dist_to_box(p, lo, hi):
    return np.linalg.norm(np.maximum(np.maximum(lo - p, p - hi), 0), axis=1)


@pytest.mark.parametrize("r", [0.2, 0.45])
def test_opened_box_and_cylinder_against_monte_carlo(r):
    # a point is in the opening iff it lies within r of the eroded set
    rng = np.random.default_rng(5)
    box = Box(0, 0, 0, 1, 2, 3)
    p = box.sample(N_MC, rng)
    f = np.mean(_dist_to_box(p, box.lo + r, box.hi - r) <= r)
    se = math.sqrt(f * (1 - f) / N_MC)
    assert abs(f - box.opened_content(r) / box.measure) < Z_MAX * se
    cyl = Cylinder(0, 0, 0, 3, 1)
    p = cyl.sample(N_MC, rng)
    rad = np.maximum(np.hypot(p[:, 0], p[:, 1]) - (1 - r), 0)
    ax = np.maximum(np.abs(p[:, 2] - 1.5) - (1.5 - r), 0)
    f = np.mean(np.hypot(rad, ax) <= r)
    se = math.sqrt(f * (1 - f) / N_MC)
    assert abs(f - cyl.opened_content(r) / cyl.measure) < Z_MAX * se
    # the same formula without the rounded rims is rejected by the same check
    a = 1 - r
    no_rims = cyl.opened_content(r) - (math.pi ** 2 * a * r * r + 4 / 3 * math.pi * r ** 3)
    assert abs(f - no_rims / cyl.measure) > 10 * se


def test_voxel_opening_is_exact_along_faces_and_close_elsewhere():
    v, b = VoxelWindow(np.ones((40, 40, 20), bool), 0.5), Box(0, 0, 0, 20, 20, 10)
    for r in (0.5, 1.0, 2.0, 3.5):
        # only the rounded edges and corners are digitised: error well under one voxel layer
        assert abs(v.opened_content(r) - b.opened_content(r)) < 0.5 * 4 * (20 + 20 + 10) * r
    assert v.opened_content(0.0) == v.measure and v.opened_content(5.1) == 0.0
    # a voxel dumbbell (two 5-voxel cubes, a neck of 2 voxels in a row)
    # keeps its neck for small r and loses it for r above half its width
    m = np.zeros((12, 5, 5), bool)
    m[:5], m[7:], m[5:7, 2, 2] = True, True, True
    dv = VoxelWindow(m, 0.5)
    assert dv.opened_content(0.1) == dv.measure
    assert 0.5 * dv.measure < dv.opened_content(1.0) <= dv.measure - 2 * 0.125


# --------------------------------------------------------------------------
# Known shapes in any pose
# --------------------------------------------------------------------------

@pytest.mark.parametrize("angle", [0.0, 12.5, 45.0, 90.0, 137.0])
def test_rotated_square_and_rectangles_are_their_shapes(angle):
    sq = affinity.translate(affinity.rotate(shapely.box(3, 4, 5, 6), angle), -1e3, 7)
    assert normalise(PolygonWindow(sq))[0] == "square"
    r4 = affinity.scale(affinity.rotate(shapely.box(0, 0, 1, 4), angle), 30, 30)
    assert normalise(PolygonWindow(r4))[0] == "rect4"
    # extra vertices along the edges change nothing
    r2 = shapely.Polygon([(0, 0), (0.5, 0), (1, 0), (1, 1), (1, 2), (0, 2)])
    assert normalise(PolygonWindow(affinity.rotate(r2, angle)))[0] == "rect2"


def test_near_rectangles_are_not_rectangles():
    off = shapely.Polygon([(0, 0), (1, 0), (1, 1.001), (0, 1)])
    rhombus = shapely.Polygon([(0, 0), (1, 0), (1.5, math.sqrt(0.75)), (0.5, math.sqrt(0.75))])
    for g in (off, rhombus):
        assert normalise(PolygonWindow(g))[0].startswith("polygon-")


def test_pixel_block_is_rect2_and_named_polygons_in_any_pose():
    m = np.zeros((30, 40), bool)
    m[5:15, 3:23] = True
    assert normalise(MaskWindow.from_array(m, 0.3, (7, -2)))[0] == "rect2"
    for name in ("triangle", "cross", "holed"):
        g = shape_window(name).geometry
        moved = affinity.translate(affinity.scale(affinity.rotate(g, 17.3), 3, -3), 100, 5)
        assert normalise(PolygonWindow(moved))[0] == name


def test_boxes_cylinders_and_voxels_are_named():
    # the 1:1:0.5 box is held out of the training shapes: named by its aspect
    assert normalise(Box(0, 0, 0, 20, 20, 10))[0] == "box-1x2x2"
    assert normalise(Box(0, 0, 0, 30, 10, 30))[0] == "box133"
    q = np.linalg.qr(np.random.default_rng(2).standard_normal((3, 3)))[0]
    corners = np.array([[x, y, z] for x in (0, 1) for y in (0, 3) for z in (0, 3)], float)
    assert normalise(ConvexPolytope(corners @ q.T + 5))[0] == "box133"
    assert normalise(Cylinder(0, 0, 0, 2, 1))[0] == "cyl1"
    name, rep = normalise(Cylinder(3, 3, 1, 4, 1))
    assert name == "cylinder-1.5" and rep.measure == pytest.approx(1.0)
    m = np.zeros((5, 6, 7), bool)
    m[1:3, 1:5, 2:6] = True
    m[1, 1, 2] = False
    a = normalise(VoxelWindow(m, 0.1))
    b = normalise(VoxelWindow(np.transpose(m, (2, 0, 1))[::-1], 7.0, (1, 2, 3)))
    m2 = m.copy()
    m2[2, 4, 5] = False
    c = normalise(VoxelWindow(m2, 0.1))
    assert a[0] == b[0] != c[0] and a[0].startswith("voxels-")
    assert a[1].measure == pytest.approx(1.0)


def test_training_shapes_are_shipped():
    assert SHIPPED == {2: ["square", "rect2", "rect4", "disk", "triangle", "cross", "holed",
                           "torus2"],
                       3: ["cube", "box114", "box133", "cyl1", "cyl8", "torus3"]}
    kappa = {"triangle": 6 / 3 ** 0.25, "cross": 12 / math.sqrt(5), "holed": 12 / math.sqrt(3),
             "box133": 30 / 9 ** (2 / 3), "cyl1": 6 * math.pi / (2 * math.pi) ** (2 / 3),
             "cyl8": 34 * math.pi / (16 * math.pi) ** (2 / 3)}
    for name, k in kappa.items():
        w = shape_window(name)
        assert w.measure == pytest.approx(1.0, rel=1e-12)
        assert w.kappa == pytest.approx(k, rel=1e-12)
        assert normalise(w)[0] == name
    assert not shape_window("cross").convex and shape_window("holed").holes == 1
    assert set(SHAPES) >= {"triangle", "cross", "holed", "box133", "cyl1", "cyl8"}
