"""Geometry of observation windows: content, boundary, kappa, parsing,
containment and boundary distance."""
import json
import math
import warnings

import numpy as np
import pytest
import shapely
import shapely.affinity
from scipy.spatial import ConvexHull

from nullatlas.lookup.errors import NullAtlasError, WindowError
from nullatlas.lookup.patterns.windows import (
    Ball,
    Box,
    ConvexPolytope,
    Disk,
    EstimatedWindowWarning,
    PolygonWindow,
    Rectangle,
    Window,
    parse_window,
)

# An outer 10 x 10 square with two rectangular holes.
OUTER = [(0, 0), (10, 0), (10, 10), (0, 10), (0, 0)]
HOLE1 = [(1, 1), (3, 1), (3, 3), (1, 3), (1, 1)]          # 2 x 2
HOLE2 = [(6, 6), (9, 6), (9, 8), (6, 8), (6, 6)]          # 3 x 2
HOLED_AREA = 100 - 4 - 6
HOLED_PERIMETER = 40 + 8 + 10

HOLED_WKT = ("POLYGON ((0 0, 10 0, 10 10, 0 10, 0 0), "
             "(1 1, 3 1, 3 3, 1 3, 1 1), (6 6, 9 6, 9 8, 6 8, 6 6))")
HOLED_GEOJSON = {"type": "Polygon",
                 "coordinates": [[list(p) for p in OUTER],
                                 [list(p) for p in HOLE1],
                                 [list(p) for p in HOLE2]]}


def _write(path, text):
    path.write_text(text, encoding="utf-8")
    return str(path)


def _estimated(spec, points):
    with pytest.warns(EstimatedWindowWarning):
        return parse_window(spec, points)


# --------------------------------------------------------------------------
# Known shapes
# --------------------------------------------------------------------------

def test_unit_square():
    w = Rectangle(0, 0, 1, 1)
    assert w.dim == 2
    assert w.measure == pytest.approx(1.0)
    assert w.boundary_measure == pytest.approx(4.0)
    assert w.kappa == pytest.approx(4.0)
    assert w.convex and w.holes == 0 and not w.estimated


@pytest.mark.parametrize("side", [1e-6, 0.3, 1.0, 7.5, 1e6])
def test_square_kappa_is_4_at_any_size(side):
    assert Rectangle(-side, 2 * side, 0, 3 * side).kappa == pytest.approx(4.0, rel=1e-12)


@pytest.mark.parametrize("aspect", [1, 2, 4, 10, 100])
def test_rectangle_kappa_depends_on_aspect_ratio(aspect):
    w = Rectangle(0, 0, aspect, 1)
    assert w.measure == pytest.approx(aspect)
    assert w.boundary_measure == pytest.approx(2 * (aspect + 1))
    assert w.kappa == pytest.approx(2 * (aspect + 1) / math.sqrt(aspect))
    # kappa only depends on the aspect ratio, not on orientation.
    assert Rectangle(0, 0, 1, aspect).kappa == pytest.approx(w.kappa)


def test_rectangle_kappa_grows_with_elongation():
    kappas = [Rectangle(0, 0, a, 1).kappa for a in (1, 2, 5, 20)]
    assert all(k1 < k2 for k1, k2 in zip(kappas, kappas[1:]))


@pytest.mark.parametrize("r", [0.01, 1.0, 3.0, 1e4])
def test_disk(r):
    w = Disk(1.5, -2.0, r)
    assert w.dim == 2
    assert w.measure == pytest.approx(math.pi * r ** 2)
    assert w.boundary_measure == pytest.approx(2 * math.pi * r)
    assert w.kappa == pytest.approx(2 * math.sqrt(math.pi))


def test_disk_has_smallest_kappa_in_2d():
    # Isoperimetric inequality: the disk minimises kappa among plane shapes.
    assert Disk(0, 0, 1).kappa < Rectangle(0, 0, 1, 1).kappa


def test_unit_cube():
    w = Box(0, 0, 0, 1, 1, 1)
    assert w.dim == 3
    assert w.measure == pytest.approx(1.0)
    assert w.boundary_measure == pytest.approx(6.0)
    assert w.kappa == pytest.approx(6.0)


@pytest.mark.parametrize("abc", [(1, 1, 1), (2, 1, 1), (1, 2, 3), (10, 0.5, 0.1)])
def test_box(abc):
    a, b, c = abc
    w = Box(-1, -1, -1, -1 + a, -1 + b, -1 + c)
    assert w.measure == pytest.approx(a * b * c)
    assert w.boundary_measure == pytest.approx(2 * (a * b + b * c + a * c))
    assert w.kappa == pytest.approx(2 * (a * b + b * c + a * c) / (a * b * c) ** (2 / 3))


@pytest.mark.parametrize("r", [0.1, 1.0, 5.0])
def test_ball(r):
    w = Ball(0, 1, 2, r)
    assert w.dim == 3
    assert w.measure == pytest.approx(4 / 3 * math.pi * r ** 3)
    assert w.boundary_measure == pytest.approx(4 * math.pi * r ** 2)
    assert w.kappa == pytest.approx((36 * math.pi) ** (1 / 3))
    assert w.kappa == pytest.approx(6 ** (2 / 3) * math.pi ** (1 / 3))
    assert w.kappa < Box(0, 0, 0, 1, 1, 1).kappa


def test_length_scale():
    assert Rectangle(0, 0, 2, 8).length_scale == pytest.approx(4.0)
    assert Box(0, 0, 0, 2, 4, 8).length_scale == pytest.approx(4.0)


# --------------------------------------------------------------------------
# Similarity invariance of kappa
# --------------------------------------------------------------------------

def _polygon_window(geom):
    return PolygonWindow(geom)


SIMILARITY_CASES = {
    "rect": lambda s, t: Rectangle(t[0], t[1], t[0] + 3 * s, t[1] + 1 * s),
    "disk": lambda s, t: Disk(t[0], t[1], 2 * s),
    "box": lambda s, t: Box(t[0], t[1], t[2], t[0] + s, t[1] + 2 * s, t[2] + 5 * s),
    "ball": lambda s, t: Ball(t[0], t[1], t[2], 0.7 * s),
    "holed-polygon": lambda s, t: PolygonWindow(shapely.affinity.translate(
        shapely.affinity.scale(shapely.from_wkt(HOLED_WKT), s, s, origin=(0, 0)), t[0], t[1])),
    "rotated-L": lambda s, t: PolygonWindow(shapely.affinity.translate(
        shapely.affinity.rotate(shapely.affinity.scale(
            shapely.Polygon([(0, 0), (2, 0), (2, 1), (1, 1), (1, 3), (0, 3)]), s, s, origin=(0, 0)),
            37.0, origin=(0, 0)), t[0], t[1])),
    "hull3d": lambda s, t: ConvexPolytope(
        np.array([[0, 0, 0], [1, 0, 0], [0, 2, 0], [0, 0, 3], [1, 1, 1]]) * s + np.asarray(t)),
}


@pytest.mark.parametrize("name", sorted(SIMILARITY_CASES))
@pytest.mark.parametrize("scale", [1e-3, 0.5, 3.0, 250.0])
def test_kappa_is_similarity_invariant(name, scale):
    make = SIMILARITY_CASES[name]
    base = make(1.0, (0.0, 0.0, 0.0))
    other = make(scale, (12.5, -7.0, 3.25))
    d = base.dim
    assert other.kappa == pytest.approx(base.kappa, rel=1e-9)
    assert other.measure == pytest.approx(base.measure * scale ** d, rel=1e-9)
    assert other.boundary_measure == pytest.approx(base.boundary_measure * scale ** (d - 1), rel=1e-9)


# --------------------------------------------------------------------------
# Polygons with holes from files
# --------------------------------------------------------------------------

def _check_holed(w):
    assert isinstance(w, PolygonWindow)
    assert w.dim == 2
    assert w.measure == pytest.approx(HOLED_AREA)
    assert w.boundary_measure == pytest.approx(HOLED_PERIMETER)
    assert w.kappa == pytest.approx(HOLED_PERIMETER / math.sqrt(HOLED_AREA))
    assert w.holes == 2
    assert w.convex is False
    assert w.describe()["holes"] == 2


def test_holed_polygon_from_geojson(tmp_path):
    path = _write(tmp_path / "win.geojson", json.dumps(HOLED_GEOJSON))
    w = parse_window(path)
    _check_holed(w)
    assert w.spec() == path


def test_holed_polygon_from_wkt(tmp_path):
    path = _write(tmp_path / "win.wkt", HOLED_WKT + "\n")
    _check_holed(parse_window(path))


def test_holed_polygon_from_json_suffix_and_uppercase(tmp_path):
    _check_holed(parse_window(_write(tmp_path / "win.json", json.dumps(HOLED_GEOJSON))))
    _check_holed(parse_window(_write(tmp_path / "WIN.WKT", HOLED_WKT)))


def test_geojson_feature(tmp_path):
    feat = {"type": "Feature", "properties": {"name": "site"}, "geometry": HOLED_GEOJSON}
    _check_holed(parse_window(_write(tmp_path / "f.geojson", json.dumps(feat))))


def test_geojson_feature_collection_of_one(tmp_path):
    fc = {"type": "FeatureCollection",
          "features": [{"type": "Feature", "properties": {}, "geometry": HOLED_GEOJSON}]}
    _check_holed(parse_window(_write(tmp_path / "fc.geojson", json.dumps(fc))))


def test_geojson_feature_collection_of_two_is_rejected(tmp_path):
    feat = {"type": "Feature", "properties": {}, "geometry": HOLED_GEOJSON}
    fc = {"type": "FeatureCollection", "features": [feat, feat]}
    with pytest.raises(WindowError, match="exactly one feature"):
        parse_window(_write(tmp_path / "fc2.geojson", json.dumps(fc)))


def test_multipolygon_window(tmp_path):
    wkt = ("MULTIPOLYGON (((0 0, 1 0, 1 1, 0 1, 0 0)), "
           "((3 0, 5 0, 5 2, 3 2, 3 0), (3.5 0.5, 4 0.5, 4 1, 3.5 1, 3.5 0.5)))")
    w = parse_window(_write(tmp_path / "m.wkt", wkt))
    assert w.measure == pytest.approx(1 + 4 - 0.25)
    assert w.boundary_measure == pytest.approx(4 + 8 + 2)
    assert w.holes == 1
    assert w.convex is False


def test_nonconvex_polygon_without_holes():
    w = PolygonWindow(shapely.Polygon([(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)]))
    assert w.measure == pytest.approx(3.0)
    assert w.boundary_measure == pytest.approx(8.0)
    assert w.holes == 0
    assert w.convex is False


def test_convex_polygon_is_convex():
    w = PolygonWindow(shapely.Polygon([(0, 0), (4, 0), (0, 3)]))
    assert w.measure == pytest.approx(6.0)
    assert w.boundary_measure == pytest.approx(12.0)
    assert w.convex is True and w.holes == 0


def test_polygon_square_matches_rectangle_kappa():
    assert PolygonWindow(shapely.box(2, 3, 5, 6)).kappa == pytest.approx(4.0)


# --------------------------------------------------------------------------
# parse_window for every spec
# --------------------------------------------------------------------------

@pytest.mark.parametrize("spec, cls, measure, boundary", [
    ("rect:0,0,2,3", Rectangle, 6.0, 10.0),
    ("rect:-1.5,-2.5,1.5,2.5", Rectangle, 15.0, 16.0),
    ("RECT: 0 , 0 , 1 , 1 ", Rectangle, 1.0, 4.0),
    ("  rect:0,0,1e-3,1e-3  ", Rectangle, 1e-6, 4e-3),
    ("disk:0,0,1", Disk, math.pi, 2 * math.pi),
    ("disk:10,-3,2.5", Disk, math.pi * 6.25, 5 * math.pi),
    ("box:0,0,0,1,2,3", Box, 6.0, 22.0),
    ("ball:0,0,0,2", Ball, 32 / 3 * math.pi, 16 * math.pi),
])
def test_parse_numeric_specs(spec, cls, measure, boundary):
    w = parse_window(spec)
    assert type(w) is cls
    assert isinstance(w, Window)
    assert w.measure == pytest.approx(measure)
    assert w.boundary_measure == pytest.approx(boundary)
    assert not w.estimated


def test_parse_numeric_spec_values():
    w = parse_window("rect:1,2,3,5")
    np.testing.assert_allclose(w.lo, [1, 2])
    np.testing.assert_allclose(w.hi, [3, 5])
    d = parse_window("disk:1,2,3")
    np.testing.assert_allclose(d.centre, [1, 2])
    assert d.r == 3
    b = parse_window("ball:1,2,3,4")
    np.testing.assert_allclose(b.centre, [1, 2, 3])
    assert b.r == 4


@pytest.mark.parametrize("spec", ["rect:0.1,0.2,0.7,1.3", "disk:0.3,-1,0.25",
                                  "box:0,0,0,1,2,3", "ball:1,1,1,0.125"])
def test_spec_round_trip(spec):
    w = parse_window(spec)
    w2 = parse_window(w.spec())
    assert type(w2) is type(w)
    assert w2.measure == pytest.approx(w.measure, rel=1e-15)
    assert w2.boundary_measure == pytest.approx(w.boundary_measure, rel=1e-15)


def test_inline_polygon_spec_round_trip():
    w = PolygonWindow(shapely.from_wkt(HOLED_WKT))
    assert w.spec().startswith("polygon:")
    _check_holed(parse_window(w.spec()))


def test_describe_is_json_ready():
    d = parse_window("disk:0,0,1").describe()
    json.dumps(d)
    assert d["kind"] == "disk" and d["dimension"] == 2
    assert d["area"] == pytest.approx(math.pi)
    assert d["perimeter"] == pytest.approx(2 * math.pi)
    assert d["kappa"] == pytest.approx(2 * math.sqrt(math.pi))
    d3 = parse_window("box:0,0,0,1,1,1").describe()
    assert d3["volume"] == pytest.approx(1.0)
    assert d3["surface_area"] == pytest.approx(6.0)


def test_bbox_2d():
    rng = np.random.default_rng(1)
    pts = rng.random((50, 2)) * [3, 2] + [1, -1]
    w = _estimated("bbox", pts)
    assert isinstance(w, Rectangle) and w.dim == 2
    assert w.estimated is True
    # ends of a uniform range: min - R/(n-1), max + R/(n-1) (unbiased)
    pad = (pts.max(axis=0) - pts.min(axis=0)) / (len(pts) - 1)
    np.testing.assert_allclose(w.lo, pts.min(axis=0) - pad)
    np.testing.assert_allclose(w.hi, pts.max(axis=0) + pad)
    assert w.contains(pts).all()


def test_bbox_3d():
    rng = np.random.default_rng(2)
    pts = rng.random((40, 3))
    w = _estimated("bbox", pts)
    assert isinstance(w, Box) and w.dim == 3 and w.estimated
    r = pts.max(axis=0) - pts.min(axis=0)
    assert w.measure == pytest.approx(np.prod(r * (1 + 2 / (len(pts) - 1))))
    assert w.contains(pts).all()


def test_hull_2d_is_the_ripley_rasson_dilation_of_scipys_hull():
    rng = np.random.default_rng(3)
    pts = rng.random((60, 2))
    w = _estimated("hull", pts)
    assert isinstance(w, PolygonWindow)
    assert w.dim == 2 and w.estimated and w.convex and w.holes == 0
    assert w.kind == "hull" and w.spec() == "hull"
    ch = ConvexHull(pts)
    # Ripley & Rasson (1977): the hull dilated by 1/sqrt(1 - m/n), m vertices
    f2 = 1.0 / (1.0 - len(ch.vertices) / len(pts))
    assert w.measure == pytest.approx(ch.volume * f2, rel=1e-12)   # 2D "volume" is area
    assert w.boundary_measure == pytest.approx(ch.area * math.sqrt(f2), rel=1e-12)
    assert w.contains(pts).all()


def test_hull_3d_is_convex_polytope_matching_scipy():
    rng = np.random.default_rng(4)
    pts = rng.random((80, 3))
    w = _estimated("hull", pts)
    assert isinstance(w, ConvexPolytope)
    assert w.dim == 3 and w.estimated
    ch = ConvexHull(pts)
    assert w.measure == pytest.approx(ch.volume, rel=1e-12)
    assert w.boundary_measure == pytest.approx(ch.area, rel=1e-12)
    assert w.contains(pts).all()


def test_hull_of_cube_vertices_is_the_cube():
    corners = np.array([[x, y, z] for x in (0, 2) for y in (0, 2) for z in (0, 2)], float)
    w = _estimated("hull", corners)
    assert w.measure == pytest.approx(8.0)
    assert w.boundary_measure == pytest.approx(24.0)
    assert w.kappa == pytest.approx(6.0)


@pytest.mark.parametrize("spec", ["bbox", "hull"])
def test_estimated_windows_need_points(spec):
    with pytest.raises(WindowError, match="estimated"):
        parse_window(spec)
    with pytest.raises(WindowError):
        parse_window(spec, np.empty((0, 2)))


@pytest.mark.parametrize("spec, pts", [
    ("hull", np.array([[0, 0], [1, 1], [2, 2], [3, 3.0]])),     # collinear: hull has no area
    ("hull", np.array([[0, 0], [1, 0.0]])),                     # two points
    ("hull", np.array([[0.5, 0.5]] * 5)),                       # one location
    ("bbox", np.array([[0, 1], [1, 1], [2, 1], [3, 1.0]])),     # horizontal line: zero height
    ("bbox", np.array([[0.5, 0.5]] * 5)),
    ("bbox", np.array([[0.5, 0.5, 0.5]] * 5)),
])
def test_degenerate_estimated_windows_rejected(spec, pts):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", EstimatedWindowWarning)
        with pytest.raises(WindowError):
            parse_window(spec, pts)


def test_degenerate_3d_hull_rejected():
    flat = np.column_stack([np.random.default_rng(0).random((20, 2)), np.zeros(20)])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", EstimatedWindowWarning)
        with pytest.raises(WindowError, match="hull"):
            parse_window("hull", flat)


# --------------------------------------------------------------------------
# contains / boundary_distance
# --------------------------------------------------------------------------

def test_rectangle_contains_and_distance():
    w = Rectangle(0, 0, 2, 1)
    pts = np.array([[1, 0.5], [0, 0], [2, 1], [0.5, 1], [2.0001, 0.5], [-1e-9, 0.5], [1, 1.5]])
    np.testing.assert_array_equal(w.contains(pts), [True, True, True, True, False, False, False])
    inner = np.array([[1, 0.5], [0.25, 0.5], [1.9, 0.9], [0, 0.3]])
    np.testing.assert_allclose(w.boundary_distance(inner), [0.5, 0.25, 0.1, 0.0])


def test_box_contains_and_distance():
    w = Box(0, 0, 0, 1, 2, 3)
    pts = np.array([[0.5, 1, 1.5], [1, 2, 3], [0.5, 2.1, 1], [-0.1, 1, 1]])
    np.testing.assert_array_equal(w.contains(pts), [True, True, False, False])
    np.testing.assert_allclose(w.boundary_distance(pts[:2]), [0.5, 0.0])
    np.testing.assert_allclose(w.boundary_distance([[0.9, 1, 1.5]]), [0.1])


def test_disk_contains_and_distance():
    w = Disk(1, 1, 2)
    pts = np.array([[1, 1], [3, 1], [1, -1], [1 + 2 / math.sqrt(2), 1 + 2 / math.sqrt(2)],
                    [3.01, 1], [2.5, 2.5]])
    np.testing.assert_array_equal(w.contains(pts), [True, True, True, True, False, False])
    np.testing.assert_allclose(w.boundary_distance([[1, 1], [2, 1], [1, 2.5]]), [2, 1, 0.5])


def test_ball_contains_and_distance():
    w = Ball(0, 0, 0, 1)
    pts = np.array([[0, 0, 0], [0, 0, 1], [0.6, 0.6, 0.6], [0.5, 0.5, 0.5]])
    np.testing.assert_array_equal(w.contains(pts), [True, True, False, True])
    np.testing.assert_allclose(w.boundary_distance([[0, 0, 0], [0.3, 0, 0.4]]), [1.0, 0.5])


def test_polygon_with_holes_contains_and_distance():
    w = PolygonWindow(shapely.from_wkt(HOLED_WKT))
    pts = np.array([
        [5, 5],      # inside
        [2, 2],      # centre of hole 1
        [7.5, 7],    # centre of hole 2
        [1, 2],      # on hole 1's boundary (closed window)
        [0, 0],      # outer corner
        [10, 5],     # outer edge
        [11, 5],     # outside
        [-0.5, -0.5],
    ])
    np.testing.assert_array_equal(w.contains(pts),
                                  [True, False, False, True, True, True, False, False])
    inner = np.array([[5, 5], [0.5, 5], [2, 3.5], [4, 2], [9.5, 9.5]])
    np.testing.assert_allclose(w.boundary_distance(inner), [math.sqrt(2), 0.5, 0.5, 1.0, 0.5])


def test_polygon_contains_tolerates_rounding_on_boundary():
    w = PolygonWindow(shapely.Polygon([(0, 0), (3, 0), (0, 3)]))
    on_hyp = np.array([[1.0, 2.0], [2.0, 1.0], [0.1 * 3, 0.9 * 3]])
    assert w.contains(on_hyp).all()
    assert not w.contains(np.array([[1.01, 2.01]])).any()


def test_convex_polytope_contains_and_distance():
    corners = np.array([[x, y, z] for x in (0, 1) for y in (0, 1) for z in (0, 1)], float)
    w = ConvexPolytope(corners)
    pts = np.array([[0.5, 0.5, 0.5], [1, 1, 1], [0.2, 0.9, 0.1], [1.1, 0.5, 0.5], [0.5, -0.01, 0.5]])
    np.testing.assert_array_equal(w.contains(pts), [True, True, True, False, False])
    np.testing.assert_allclose(w.boundary_distance([[0.5, 0.5, 0.5], [0.2, 0.5, 0.6]]),
                               [0.5, 0.2], atol=1e-12)


def test_boundary_distance_agrees_across_representations():
    """A square as Rectangle, as polygon and as hull give the same distances."""
    rng = np.random.default_rng(5)
    pts = rng.random((200, 2))
    a = Rectangle(0, 0, 1, 1).boundary_distance(pts)
    b = PolygonWindow(shapely.box(0, 0, 1, 1)).boundary_distance(pts)
    np.testing.assert_allclose(a, b, atol=1e-12)
    corners = np.array([[x, y, z] for x in (0, 1) for y in (0, 1) for z in (0, 1)], float)
    pts3 = rng.random((200, 3))
    np.testing.assert_allclose(Box(0, 0, 0, 1, 1, 1).boundary_distance(pts3),
                               ConvexPolytope(corners).boundary_distance(pts3), atol=1e-12)


def test_window_errors_are_value_errors():
    assert issubclass(WindowError, NullAtlasError)
    assert issubclass(WindowError, ValueError)
