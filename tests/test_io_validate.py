"""Validation of a pattern against its window, and malformed windows.

Every bad input must raise a NullAtlasError (hence a ValueError) with a
message that names the problem."""
import json
import warnings

import numpy as np
import pytest

from nullatlas.lookup.errors import NullAtlasError, PointsError, WindowError
from nullatlas.lookup.patterns.validate import MIN_POINTS, ValidationReport, validate_pattern
from nullatlas.lookup.patterns.windows import EstimatedWindowWarning, parse_window

SQUARE = parse_window("rect:0,0,1,1")
CUBE = parse_window("box:0,0,0,1,1,1")
DISK = parse_window("disk:0,0,1")


def _bad(exc_type, call, *fragments):
    with pytest.raises(exc_type) as info:
        call()
    err = info.value
    assert isinstance(err, NullAtlasError) and isinstance(err, ValueError)
    msg = str(err)
    assert msg and "\n" not in msg.strip()
    for frag in fragments:
        assert frag.lower() in msg.lower(), f"{frag!r} not in {msg!r}"
    return msg


def _pts2(n=20, seed=0):
    return np.random.default_rng(seed).random((n, 2))


def _pts3(n=20, seed=0):
    return np.random.default_rng(seed).random((n, 3))


# --------------------------------------------------------------------------
# Valid patterns
# --------------------------------------------------------------------------

def test_valid_pattern_passes_unchanged():
    p = _pts2()
    out, rep = validate_pattern(p, SQUARE)
    np.testing.assert_array_equal(out, p)
    assert isinstance(rep, ValidationReport)
    assert rep.n_input == 20 and rep.n_duplicates == 0 and rep.duplicate_policy == "error"
    assert rep.as_dict() == {"n_input": 20, "n_duplicates": 0, "duplicate_policy": "error"}


def test_valid_3d_pattern():
    out, rep = validate_pattern(_pts3(), CUBE)
    assert out.shape == (20, 3) and rep.n_duplicates == 0


def test_list_input_accepted():
    out, _ = validate_pattern(_pts2().tolist(), SQUARE)
    assert isinstance(out, np.ndarray) and out.shape == (20, 2)


def test_points_on_window_boundary_are_inside():
    p = np.array([[0, 0], [1, 1], [0, 1], [1, 0], [0.5, 0.5]], float)
    validate_pattern(p, SQUARE)


@pytest.mark.parametrize("d, window", [(2, SQUARE), (3, CUBE)])
def test_exactly_min_points_ok(d, window):
    n = MIN_POINTS[d]
    p = np.random.default_rng(1).random((n, d))
    out, _ = validate_pattern(p, window)
    assert len(out) == n


# --------------------------------------------------------------------------
# Too few / degenerate
# --------------------------------------------------------------------------

@pytest.mark.parametrize("n", [0, 1, 2, 3])
def test_too_few_points_2d(n):
    p = np.random.default_rng(0).random((n, 2))
    _bad(PointsError, lambda: validate_pattern(p, SQUARE), "too few", f"{n}", "at least 4")


def test_too_few_points_3d():
    _bad(PointsError, lambda: validate_pattern(_pts3(4), CUBE), "too few", "at least 5")


def test_single_point():
    _bad(PointsError, lambda: validate_pattern(np.array([[0.5, 0.5]]), SQUARE), "too few")


def test_all_points_identical():
    p = np.full((10, 2), 0.25)
    _bad(PointsError, lambda: validate_pattern(p, SQUARE, "error"), "9 duplicate", "0.25")
    _bad(PointsError, lambda: validate_pattern(p, SQUARE, "drop"), "too few distinct", "1")


def test_all_points_identical_jitter_then_not_collinear():
    # jitter spreads 10 copies into 10 distinct points; they are not on a line.
    p = np.full((10, 2), 0.25)
    out, rep = validate_pattern(p, SQUARE, "jitter")
    assert len(np.unique(out, axis=0)) == 10 and rep.n_duplicates == 9


def test_collinear_2d():
    t = np.linspace(0.1, 0.9, 10)
    p = np.column_stack([t, 0.5 * t + 0.05])
    _bad(PointsError, lambda: validate_pattern(p, SQUARE), "line")


def test_vertical_line_2d():
    p = np.column_stack([np.full(6, 0.3), np.linspace(0, 1, 6)])
    _bad(PointsError, lambda: validate_pattern(p, SQUARE), "line")


def test_coplanar_3d():
    xy = np.random.default_rng(2).random((20, 2))
    p = np.column_stack([xy, 0.2 + 0.3 * xy[:, 0] + 0.1 * xy[:, 1]])
    _bad(PointsError, lambda: validate_pattern(p, CUBE), "plane")


def test_collinear_after_drop():
    p = np.array([[0.1, 0.1], [0.2, 0.2], [0.3, 0.3], [0.4, 0.4], [0.4, 0.4], [0.5, 0.5]])
    _bad(PointsError, lambda: validate_pattern(p, SQUARE, "drop"), "line")


# --------------------------------------------------------------------------
# Outside the window
# --------------------------------------------------------------------------

def test_outside_window_reports_count_and_first():
    p = _pts2(10)
    p[3] = [1.5, 0.5]
    p[7] = [-0.25, 0.5]
    msg = _bad(PointsError, lambda: validate_pattern(p, SQUARE), "2 of 10", "outside", "point 3", "1.5")
    assert "0.5" in msg


def test_outside_disk():
    p = np.array([[0, 0], [0.5, 0], [0, 0.5], [0.8, 0.8], [-0.1, 0.2]])
    _bad(PointsError, lambda: validate_pattern(p, DISK), "1 of 5", "point 3", "0.8")


def test_outside_polygon_hole(tmp_path):
    path = tmp_path / "h.wkt"
    path.write_text("POLYGON ((0 0, 4 0, 4 4, 0 4, 0 0), (1 1, 3 1, 3 3, 1 3, 1 1))")
    w = parse_window(str(path))
    p = np.array([[0.5, 0.5], [3.5, 0.5], [0.5, 3.5], [3.5, 3.5], [2, 2]])
    _bad(PointsError, lambda: validate_pattern(p, w), "1 of 5", "point 4")


# --------------------------------------------------------------------------
# Duplicates
# --------------------------------------------------------------------------

def _with_dups():
    p = _pts2(12, seed=3)
    p[5] = p[1]
    p[9] = p[1]
    p[11] = p[4]
    return p   # 3 duplicates of 2 distinct locations


def test_duplicates_error():
    _bad(PointsError, lambda: validate_pattern(_with_dups(), SQUARE, "error"),
         "3 duplicate", "--on-duplicates")


def test_duplicates_default_policy_is_error():
    with pytest.raises(PointsError, match="duplicate"):
        validate_pattern(_with_dups(), SQUARE)


def test_duplicates_drop_keeps_first_occurrences_in_order():
    p = _with_dups()
    out, rep = validate_pattern(p, SQUARE, "drop")
    assert rep.n_duplicates == 3 and rep.duplicate_policy == "drop" and rep.n_input == 12
    keep = [i for i in range(12) if i not in (5, 9, 11)]
    np.testing.assert_array_equal(out, p[keep])


def test_signed_zero_counts_as_duplicate():
    p = np.array([[0.0, 0.5], [-0.0, 0.5], [0.3, 0.2], [0.7, 0.9], [0.9, 0.1]])
    _bad(PointsError, lambda: validate_pattern(p, SQUARE), "1 duplicate")


def test_duplicates_jitter():
    p = _with_dups()
    out, rep = validate_pattern(p, SQUARE, "jitter", rng=np.random.default_rng(5))
    assert rep.n_duplicates == 3 and rep.duplicate_policy == "jitter"
    assert out.shape == p.shape
    assert SQUARE.contains(out).all()
    assert len(np.unique(out, axis=0)) == len(out)
    # Only the extra copies move, and only by a tiny amount.
    moved = np.flatnonzero(np.any(out != p, axis=1))
    np.testing.assert_array_equal(moved, [5, 9, 11])
    assert np.abs(out - p).max() < 1e-4
    # The input is not modified in place.
    np.testing.assert_array_equal(p, _with_dups())


def test_jitter_reproducible():
    p = _with_dups()
    a, _ = validate_pattern(p, SQUARE, "jitter", rng=np.random.default_rng(42))
    b, _ = validate_pattern(p, SQUARE, "jitter", rng=np.random.default_rng(42))
    c, _ = validate_pattern(p, SQUARE, "jitter", rng=np.random.default_rng(43))
    np.testing.assert_array_equal(a, b)
    assert not np.array_equal(a, c)
    # Without an rng the default seed makes it reproducible too.
    d, _ = validate_pattern(p, SQUARE, "jitter")
    e, _ = validate_pattern(p, SQUARE, "jitter")
    np.testing.assert_array_equal(d, e)


def test_jitter_at_corner_stays_inside():
    p = np.array([[0.0, 0.0]] * 6 + [[1.0, 1.0]] * 3 + [[0.5, 0.2], [0.3, 0.8]])
    out, _ = validate_pattern(p, SQUARE, "jitter", rng=np.random.default_rng(0))
    assert SQUARE.contains(out).all()
    assert len(np.unique(out, axis=0)) == len(out)


def test_jitter_on_disk_boundary_stays_inside():
    p = np.array([[1.0, 0.0]] * 5 + [[0.0, 0.0], [0.2, 0.3], [-0.5, 0.1]])
    out, _ = validate_pattern(p, DISK, "jitter", rng=np.random.default_rng(0))
    assert DISK.contains(out).all()
    assert len(np.unique(out, axis=0)) == len(out)


def test_jitter_3d():
    p = _pts3(10)
    p[4] = p[0]
    out, _ = validate_pattern(p, CUBE, "jitter", rng=np.random.default_rng(1))
    assert len(np.unique(out, axis=0)) == 10 and CUBE.contains(out).all()


def test_jitter_far_from_origin_makes_points_distinct():
    # Regression: the jitter offset must exceed the float spacing of the
    # coordinates, or the copies stay identical.
    b = 1e10
    w = parse_window(f"rect:{b!r},{b!r},{b + 1!r},{b + 1!r}")
    p = np.array([[b + .5, b + .5], [b + .5, b + .5], [b + .2, b + .5], [b + .7, b + .3], [b + .5, b + .1]])
    out, _ = validate_pattern(p, w, "jitter", rng=np.random.default_rng(0))
    assert len(np.unique(out, axis=0)) == len(out)
    assert w.contains(out).all()
    assert np.abs(out - p).max() < 1e-3


def test_unknown_duplicate_policy():
    _bad(PointsError, lambda: validate_pattern(_pts2(), SQUARE, "ignore"), "--on-duplicates", "ignore")


# --------------------------------------------------------------------------
# Dimensions and non-finite values
# --------------------------------------------------------------------------

def test_2d_points_3d_window():
    _bad(WindowError, lambda: validate_pattern(_pts2(), CUBE), "2D", "3D")


def test_3d_points_2d_window():
    _bad(WindowError, lambda: validate_pattern(_pts3(), SQUARE), "3D", "2D")


@pytest.mark.parametrize("shape", [(10,), (10, 1), (10, 4), (2, 3, 2)])
def test_wrong_shape(shape):
    _bad(PointsError, lambda: validate_pattern(np.full(shape, 0.5), SQUARE), "shape")


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_non_finite(bad):
    p = _pts2(8)
    p[2, 1] = bad
    _bad(PointsError, lambda: validate_pattern(p, SQUARE), "point 2", "nan or infinite")


# --------------------------------------------------------------------------
# Malformed windows
# --------------------------------------------------------------------------

@pytest.mark.parametrize("spec, frag", [
    ("rect:0,0,0,1", "zero or negative area"),
    ("rect:0,0,1,0", "zero or negative area"),
    ("rect:1,0,0,1", "zero or negative area"),
    ("box:0,0,0,1,1,0", "zero or negative volume"),
    ("disk:0,0,0", "radius must be positive"),
    ("disk:0,0,-1", "radius must be positive"),
    ("ball:0,0,0,-2", "radius must be positive"),
    ("rect:0,0,1", "needs 4 numbers, got 3"),
    ("rect:0,0,1,1,1", "needs 4 numbers, got 5"),
    ("disk:0,0", "needs 3 numbers"),
    ("box:0,0,0,1,1", "needs 6 numbers"),
    ("ball:0,0,0", "needs 4 numbers"),
    ("rect:0,0,a,1", "not all"),
    ("disk:0,0,one", "not all"),
    ("rect:0,,1,1", "not all"),
    ("rect:0,0,nan,1", "finite"),
    ("disk:0,0,inf", "finite"),
    ("ball:0,0,0,nan", "finite"),
    ("circle:0,0,1", "unknown window"),
    ("square", "unknown window"),
    ("rect:", "unknown window"),
    ("bbox:0,0,1,1", "unknown window"),
    ("points.shp", "unknown window"),
    ("polygon:POLYGON((0 0, 1 1, 1 0, 0 1, 0 0))", "invalid polygon"),
    ("polygon:POINT (0 0)", "expected a polygon"),
    ("polygon:not wkt", "cannot parse wkt"),
    ("polygon:POLYGON EMPTY", "zero area"),
])
def test_bad_window_spec(spec, frag):
    _bad(WindowError, lambda: parse_window(spec), frag)


@pytest.mark.parametrize("spec", ["", "   ", None, 5])
def test_empty_window_spec(spec):
    _bad(WindowError, lambda: parse_window(spec), "empty window specification")


def test_unknown_spec_message_lists_forms():
    _bad(WindowError, lambda: parse_window("triangle:0,0,1"), "rect:", "disk:", "hull")


def test_self_intersecting_polygon_wkt(tmp_path):
    path = tmp_path / "bowtie.wkt"
    path.write_text("POLYGON ((0 0, 2 2, 2 0, 0 2, 0 0))")
    _bad(WindowError, lambda: parse_window(str(path)), "bowtie.wkt", "invalid polygon", "self-intersection")


def test_self_intersecting_polygon_geojson(tmp_path):
    path = tmp_path / "bowtie.geojson"
    path.write_text(json.dumps({"type": "Polygon",
                                "coordinates": [[[0, 0], [2, 2], [2, 0], [0, 2], [0, 0]]]}))
    _bad(WindowError, lambda: parse_window(str(path)), "invalid polygon")


def test_hole_outside_shell(tmp_path):
    path = tmp_path / "h.wkt"
    path.write_text("POLYGON ((0 0, 1 0, 1 1, 0 1, 0 0), (2 2, 3 2, 3 3, 2 3, 2 2))")
    _bad(WindowError, lambda: parse_window(str(path)), "invalid polygon")


@pytest.mark.parametrize("geom, kind", [
    ({"type": "LineString", "coordinates": [[0, 0], [1, 1]]}, "LineString"),
    ({"type": "Point", "coordinates": [0, 0]}, "Point"),
    ({"type": "MultiPoint", "coordinates": [[0, 0], [1, 1]]}, "MultiPoint"),
])
def test_geojson_not_a_polygon(tmp_path, geom, kind):
    path = tmp_path / "g.geojson"
    path.write_text(json.dumps({"type": "Feature", "properties": {}, "geometry": geom}))
    _bad(WindowError, lambda: parse_window(str(path)), kind, "expected a polygon")


def test_wkt_linestring(tmp_path):
    path = tmp_path / "l.wkt"
    path.write_text("LINESTRING (0 0, 1 1, 2 0)")
    _bad(WindowError, lambda: parse_window(str(path)), "LineString")


@pytest.mark.parametrize("text, frag", [
    ("{not json", "cannot parse"),
    ("[1, 2, 3]", "not a geojson geometry"),
    ("null", "not a geojson geometry"),
    ('{"type": "Feature", "geometry": null}', "not a geojson geometry"),
    ('{"type": "FeatureCollection", "features": []}', "exactly one feature, has 0"),
    ('{"type": "Polygon"}', "cannot parse"),
    ('{"type": "Polygon", "coordinates": [[[0, 0], [1, 0]]]}', "cannot parse"),
    ('{"type": "Polygon", "coordinates": []}', "empty"),
])
def test_bad_geojson(tmp_path, text, frag):
    path = tmp_path / "bad.geojson"
    path.write_text(text)
    _bad(WindowError, lambda: parse_window(str(path)), "bad.geojson", frag)


@pytest.mark.parametrize("text", ["", "POLYGON ((0 0, 1 0", "hello", "POLYGON ((0 0, 1 0, 0 0))"])
def test_bad_wkt_file(tmp_path, text):
    path = tmp_path / "bad.wkt"
    path.write_text(text)
    _bad(WindowError, lambda: parse_window(str(path)), "bad.wkt")


def test_missing_window_file(tmp_path):
    _bad(WindowError, lambda: parse_window(str(tmp_path / "nope.geojson")), "cannot read", "nope.geojson")


def test_window_file_is_directory(tmp_path):
    d = tmp_path / "dir.wkt"
    d.mkdir()
    _bad(WindowError, lambda: parse_window(str(d)), "cannot read")


def test_window_file_not_utf8(tmp_path):
    path = tmp_path / "bin.wkt"
    path.write_bytes(b"\xff\xfe\x00\x01POLYGON")
    _bad(WindowError, lambda: parse_window(str(path)), "cannot read")


def test_window_from_collinear_points():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", EstimatedWindowWarning)
        _bad(WindowError, lambda: parse_window("hull", np.array([[0, 0], [1, 1], [2, 2.0]])), "collinear")


# --------------------------------------------------------------------------
# Regressions for bugs found by these tests (fixed in lookup/patterns/windows.py)
# --------------------------------------------------------------------------

@pytest.mark.parametrize("spec", ["\x00.wkt", "a\x00b.geojson"])
def test_window_path_with_nul_byte(spec):
    # open() raises a bare ValueError('embedded null byte') for such a path.
    _bad(WindowError, lambda: parse_window(spec))


@pytest.mark.parametrize("bad", [np.nan, np.inf])
def test_hull_2d_of_non_finite_points(bad):
    # shapely's convex hull raised GEOSException (not a ValueError) here.
    pts = np.array([[0, 0], [0, 1], [1, bad], [1, 1.0]])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", EstimatedWindowWarning)
        _bad(WindowError, lambda: parse_window("hull", pts), "finite")


def test_bbox_and_3d_hull_of_non_finite_points():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", EstimatedWindowWarning)
        _bad(WindowError, lambda: parse_window("bbox", np.array([[0, 0], [np.nan, 1], [1, 1.0]])), "finite")
        pts3 = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1], [np.nan, 1, 1.0]])
        _bad(WindowError, lambda: parse_window("hull", pts3), "hull")


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@pytest.mark.parametrize("spec", ["rect:-1e308,0,1e308,1", "rect:0,0,1e200,1e200",
                                  "box:0,0,0,1e120,1e120,1e120", "disk:0,0,1e200",
                                  "ball:0,0,0,1e150", "disk:0,0,1e-170", "rect:0,0,1e-200,1e-200",
                                  "ball:0,0,0,1e-110",
                                  "polygon:POLYGON ((0 0, 1e308 0, 1e308 1e308, 0 1e308, 0 0))"])
def test_window_with_overflowing_measure_rejected(spec):
    # Area/volume overflowing to inf or underflowing to 0 gave kappa nan/0,
    # ZeroDivisionError or OverflowError.
    _bad(WindowError, lambda: parse_window(spec))


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
def test_overflowing_window_file_rejected(tmp_path):
    path = tmp_path / "huge.wkt"
    path.write_text("POLYGON ((0 0, 1e308 0, 1e308 1e308, 0 1e308, 0 0))")
    _bad(WindowError, lambda: parse_window(str(path)))


# --------------------------------------------------------------------------
# Regression tests for bugs found and fixed
# --------------------------------------------------------------------------

@pytest.mark.parametrize("spec", ["disk:-140737488355329,0,1", "ball:1e14,0,0,1"])
def test_far_disk_samples_pass_contains(spec):
    w = parse_window(spec)
    p = w.sample(2000, np.random.default_rng(0))
    assert w.contains(p).all()


@pytest.mark.parametrize("points", [[[0, 0], [1]], [["a", "b"]] * 5, "abc"])
def test_unconvertible_points_raise_points_error(points):
    with pytest.raises(PointsError):
        validate_pattern(points, SQUARE)
