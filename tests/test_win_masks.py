"""Raster masks (2D), voxel masks (3D), cylinders, and the Python ways of
passing a window: conventions, exact geometry, files, and bad input."""
import math

import numpy as np
import pytest
import shapely
from PIL import Image
from scipy import stats

from nullatlas.lookup.cli import main
from nullatlas.lookup.csrtest import csr_test
from nullatlas.lookup.errors import NullAtlasError, WindowError
from nullatlas.lookup.patterns.windows import (
    Box,
    Cylinder,
    MaskWindow,
    PolygonWindow,
    Rectangle,
    VoxelWindow,
    as_window,
    mask_window,
    parse_window,
)


def _block():
    m = np.zeros((30, 40), bool)
    m[5:15, 3:23] = True            # 10 rows x 20 columns
    return m


# --------------------------------------------------------------------------
# 2D masks
# --------------------------------------------------------------------------

def test_pixel_block_is_exactly_the_rectangle():
    w = MaskWindow.from_array(_block(), 0.5, (1.0, 2.0))
    # rows 5..14 of 30 (row 0 at the top) cover y from 2 + 15 * 0.5 to 2 + 25 * 0.5
    r = Rectangle(1 + 3 * 0.5, 2 + 15 * 0.5, 1 + 23 * 0.5, 2 + 25 * 0.5)
    assert w.geometry.equals(shapely.box(*r.lo, *r.hi))
    assert len(shapely.get_coordinates(w.geometry)) == 5      # collinear vertices dropped
    assert w.measure == pytest.approx(r.measure) and w.boundary_measure == pytest.approx(30.0)
    ts = [0.0, 0.3, 1.0, 2.4, 2.6]
    np.testing.assert_allclose(w.inner_content(ts), r.inner_content(ts), rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(w.opened_content([0.5, 2.0]), r.opened_content([0.5, 2.0]), rtol=1e-4)
    assert w.kind == "mask" and isinstance(w, PolygonWindow) and w.convex


def test_mask_parallel_sets_agree_with_polygon_buffers():
    # masks use the pixel grid; the same outline as a plain polygon uses
    # negative buffers: two independent routes to the same numbers
    y, x = np.mgrid[0:60, 0:80]
    m = ((x - 40) / 34.0) ** 2 + ((y - 30) / 24.0) ** 2 + 0.15 * np.sin(x / 5.0) <= 1
    m &= ~(((x - 30) ** 2 + (y - 28) ** 2) <= 36)
    w = MaskWindow.from_array(m, 0.1, (2.0, -1.0))
    poly = PolygonWindow(w.geometry)
    assert w._grid.measure == pytest.approx(w.measure, rel=1e-12)
    assert w._grid.boundary_measure == pytest.approx(w.boundary_measure, rel=1e-12)
    ts = np.array([0.0, 0.02, 0.1, 0.35, 1.0])
    np.testing.assert_allclose(w.inner_content(ts), poly.inner_content(ts), rtol=3e-4)


def test_row_zero_is_the_top():
    m = np.zeros((4, 3), bool)
    m[0, 1] = True
    w = mask_window(m, 2.0, (10.0, 20.0))
    assert w.geometry.bounds == (12.0, 26.0, 14.0, 28.0)


def test_holes_and_corner_touching_pixels():
    m = np.ones((5, 5), bool)
    m[2, 2] = False                       # a one-pixel hole
    w = MaskWindow.from_array(m, 1.0)
    assert w.holes == 1 and w.measure == 24 and w.boundary_measure == 24
    d = np.array([[1, 0], [0, 1]], bool)  # two pixels touching at a corner
    w = MaskWindow.from_array(d, 1.0)
    assert w.measure == 2 and w.boundary_measure == 8 and not w.convex
    pts = w.sample(1000, np.random.default_rng(1))
    assert w.contains(pts).all()


@pytest.mark.parametrize("ext", [".npy", ".png", ".tif", ".tiff"])
def test_mask_files(tmp_path, ext):
    m = _block()
    path = tmp_path / f"m{ext}"
    if ext == ".npy":
        np.save(path, m.astype(np.uint8))
    else:
        Image.fromarray((m * 255).astype(np.uint8)).save(path)
    w = parse_window(f"mask:{path},0.5,1,2")
    assert w.geometry.equals(MaskWindow.from_array(m, 0.5, (1, 2)).geometry)
    assert w.spec() == f"mask:{path},0.5,1,2"
    assert parse_window(w.spec()).geometry.equals(w.geometry)
    w0 = parse_window(f"mask:{path},2")
    assert w0.geometry.bounds == (6.0, 30.0, 46.0, 50.0)


def test_colour_image_uses_grey_levels(tmp_path):
    rgb = np.zeros((6, 8, 3), np.uint8)
    rgb[1:3, 2:7] = (200, 30, 10)
    Image.fromarray(rgb).save(tmp_path / "c.png")
    w = parse_window(f"mask:{tmp_path / 'c.png'},1")
    assert w.measure == 10


def _bad_masks(tmp_path):
    np.save(tmp_path / "zeros.npy", np.zeros((4, 4)))
    np.save(tmp_path / "nan.npy", np.array([[1.0, np.nan]]))
    np.save(tmp_path / "empty.npy", np.zeros((0, 3)))
    np.save(tmp_path / "vol.npy", np.ones((2, 2, 2)))
    np.save(tmp_path / "text.npy", np.array([["a", "b"]]))
    (tmp_path / "junk.png").write_bytes(b"not an image at all")
    (tmp_path / "m.bmp").write_bytes(b"")
    np.save(tmp_path / "ok.npy", np.ones((2, 2)))
    return {
        "all zero": (f"mask:{tmp_path / 'zeros.npy'},1", "no inside pixel"),
        "nan": (f"mask:{tmp_path / 'nan.npy'},1", "nan"),
        "empty": (f"mask:{tmp_path / 'empty.npy'},1", "empty"),
        "3d": (f"mask:{tmp_path / 'vol.npy'},1", "2d mask"),
        "strings": (f"mask:{tmp_path / 'text.npy'},1", "booleans or numbers"),
        "unreadable": (f"mask:{tmp_path / 'junk.png'},1", "cannot read"),
        "missing": (f"mask:{tmp_path / 'none.npy'},1", "cannot read"),
        "format": (f"mask:{tmp_path / 'm.bmp'},1", "expected .npy"),
        "pixel": (f"mask:{tmp_path / 'ok.npy'},-2", "positive"),
        "numbers": (f"mask:{tmp_path / 'ok.npy'},1,2", "expected mask:file"),
        "no pixel": (f"mask:{tmp_path / 'ok.npy'}", "expected mask:file"),
        "voxels 2d": (f"voxels:{tmp_path / 'ok.npy'},1", "3d mask"),
        "voxels png": (f"voxels:{tmp_path / 'junk.png'},1", ".npy"),
    }


def test_bad_masks_raise_one_line_window_errors(tmp_path):
    for case, (spec, needle) in _bad_masks(tmp_path).items():
        with pytest.raises(WindowError) as info:
            parse_window(spec)
        msg = str(info.value)
        assert "\n" not in msg and needle in msg.lower(), (case, msg)
    for bad in (np.zeros((3, 3)), np.ones(4), [[1, float("nan")]], np.ones((2, 2), object)):
        with pytest.raises(WindowError):
            mask_window(bad, 1.0)
    with pytest.raises(WindowError):
        MaskWindow.from_array(np.ones((2, 2)), 1.0, origin=(0, float("inf")))


def test_bad_masks_on_the_command_line(tmp_path, capsys):
    pts = tmp_path / "p.csv"
    pts.write_text("x,y\n" + "\n".join(f"{x},{y}" for x, y in
                                       np.random.default_rng(2).random((30, 2)) * 0.9))
    for case, (spec, needle) in _bad_masks(tmp_path).items():
        rc = main(["test", str(pts), "--window", spec, "--no-progress"])
        err = capsys.readouterr().err
        lines = [ln for ln in err.splitlines() if ln.strip()]
        assert rc == 2 and len(lines) == 1, (case, err)
        assert lines[0].startswith("nullatlas: error:") and needle in lines[0].lower(), lines[0]


def test_mask_window_runs_in_csr_test(tmp_path):
    m = np.zeros((40, 40), bool)
    m[4:36, 4:36] = True
    m[15:25, 15:25] = False
    w = MaskWindow.from_array(m, 0.025)
    pts = w.sample(300, np.random.default_rng(3))
    np.save(tmp_path / "m.npy", m)
    r = csr_test(pts, f"mask:{tmp_path / 'm.npy'},0.025", ["nnmean"], method="mc",
                 n_sims=19, seed=1)
    assert r.window["kind"] == "mask" and r.window["holes"] == 1
    assert 0 < r.primary.pvalue <= 1


# --------------------------------------------------------------------------
# Voxel masks
# --------------------------------------------------------------------------

def test_voxel_block_is_exactly_the_box():
    m = np.zeros((12, 22, 7), bool)
    m[1:11, 1:21, 1:6] = True
    v = VoxelWindow(m, 0.5, (1, 2, 3))
    b = Box(1.5, 2.5, 3.5, 6.5, 12.5, 6.0)
    assert v.measure == b.measure and v.boundary_measure == b.boundary_measure
    assert v.holes == 0 and not v.convex and v.dim == 3
    ts = [0.0, 0.1, 0.25, 0.77, 1.2, 2.0]
    np.testing.assert_allclose(v.inner_content(ts), b.inner_content(ts), rtol=1e-12, atol=1e-12)
    rng = np.random.default_rng(4)
    p = v.sample(20000, rng)
    assert v.contains(p).all()
    np.testing.assert_allclose(v.boundary_distance(p), b.boundary_distance(p), atol=1e-12)
    q = rng.uniform(0, 15, (5000, 3))
    assert (v.contains(q) == b.contains(q)).all()
    # corners and faces of the box are inside (closed window)
    assert v.contains(np.array([b.lo, b.hi, [1.5, 5.0, 4.0]])).all()


def test_voxel_faces_distances_and_cavities():
    m = np.ones((5, 5, 5), bool)
    m[2, 2, 2] = False                                     # a cavity of one voxel
    v = VoxelWindow(m, 2.0)
    assert v.holes == 1 and v.measure == 124 * 8 and v.boundary_measure == (150 + 6) * 4
    # a point next to the cavity: distance to the cavity's cube, exactly
    p = np.array([[5.0, 5.0, 3.0], [5.0, 3.0, 3.0], [1.0, 5.0, 5.0]])
    np.testing.assert_allclose(v.boundary_distance(p), [1.0, math.sqrt(2.0), 1.0])
    # outside points measure to the union of inside cubes
    assert v.boundary_distance(np.array([[-3.0, 5.0, 5.0], [13.0, 13.0, 10.0]])) == \
        pytest.approx([3.0, math.sqrt(18.0)])
    # staircase: two voxels sharing an edge only have 12 exposed faces
    e = np.zeros((2, 2, 1), bool)
    e[0, 0, 0] = e[1, 1, 0] = True
    assert VoxelWindow(e, 1.0).boundary_measure == 12


def test_voxel_sampling_is_uniform():
    m = np.zeros((6, 4, 3), bool)
    m[:3] = True
    m[3:, :2, :1] = True                    # an uneven L: 36 + 6 voxels
    v = VoxelWindow(m, 1.0)
    p = v.sample(42000, np.random.default_rng(5))
    idx = np.floor(p).astype(int)
    counts = np.zeros(m.shape)
    np.add.at(counts, tuple(idx.T), 1)
    assert stats.chisquare(counts[m]).pvalue > 1e-4
    assert stats.kstest((p - idx).ravel(), "uniform").pvalue > 1e-4


def test_voxel_files_and_bad_volumes(tmp_path):
    m = np.zeros((4, 5, 6), np.uint8)
    m[1:3, 1:4, 2:5] = 1
    np.save(tmp_path / "v.npy", m)
    v = parse_window(f"voxels:{tmp_path / 'v.npy'},0.5,1,2,3")
    assert v.measure == pytest.approx(18 * 0.125) and v.spec().startswith("voxels:")
    assert parse_window(v.spec()).measure == v.measure
    assert tuple(v.origin) == (1, 2, 3) and v.voxel == 0.5
    assert mask_window(m, 0.5).measure == v.measure
    for bad in (np.zeros((2, 2, 2)), np.ones((2, 2)), np.full((2, 2, 2), np.nan)):
        with pytest.raises(WindowError):
            VoxelWindow(bad, 1.0)
    with pytest.raises(WindowError):
        VoxelWindow(m, 1.0, (0, 0))
    with pytest.raises(WindowError):
        VoxelWindow(m, 0.0)


# --------------------------------------------------------------------------
# Cylinders
# --------------------------------------------------------------------------

def test_cylinder_geometry():
    c = parse_window("cylinder:1,2,-1,3,0.5")
    assert isinstance(c, Cylinder) and c.dim == 3
    assert c.measure == pytest.approx(math.pi * 0.25 * 4)
    assert c.boundary_measure == pytest.approx(2 * math.pi * 0.5 * 4 + 2 * math.pi * 0.25)
    assert parse_window(c.spec()).measure == c.measure
    p = np.array([[1, 2, 1], [1.3, 2, 1], [1, 2, 2.9], [1, 2.5, 3], [1, 2.6, 1], [1, 2, 3.1]])
    assert c.contains(p).tolist() == [True, True, True, True, False, False]
    np.testing.assert_allclose(c.boundary_distance(p[:3]), [0.5, 0.2, 0.1])
    for bad in ("cylinder:0,0,1,1,1", "cylinder:0,0,0,1,-1", "cylinder:0,0,0,1", "cylinder:0,0,0,nan,1"):
        with pytest.raises(WindowError):
            parse_window(bad)


def test_cylinder_sampling_is_uniform():
    c = Cylinder(1, 2, -1, 3, 0.5)
    p = c.sample(50000, np.random.default_rng(6))
    assert c.contains(p).all()
    rho2 = ((p[:, 0] - 1) ** 2 + (p[:, 1] - 2) ** 2) / 0.25      # uniform on [0, 1]
    ang = np.arctan2(p[:, 1] - 2, p[:, 0] - 1)
    z = (p[:, 2] + 1) / 4
    for u in (rho2, (ang + math.pi) / (2 * math.pi), z):
        assert stats.kstest(u, "uniform").pvalue > 1e-4


# --------------------------------------------------------------------------
# Windows from Python objects
# --------------------------------------------------------------------------

def test_shapely_geometries_are_windows():
    sq = shapely.box(0, 0, 1, 1)
    w = as_window(sq)
    assert isinstance(w, PolygonWindow) and w.measure == 1.0
    assert as_window(w) is w and as_window("disk:0,0,1").kind == "disk"
    mp = shapely.MultiPolygon([shapely.box(0, 0, 1, 1), shapely.box(2, 0, 3, 1)])
    assert as_window(mp).measure == 2.0
    pts = w.sample(200, np.random.default_rng(7))
    r = csr_test(pts, sq, ["nnmean"], method="mc", n_sims=19, seed=2)
    assert r.window["kind"] == "polygon"


@pytest.mark.parametrize("bad", [[(0, 0), (1, 0)], 3, None, shapely.Point(0, 0),
                                 shapely.LineString([(0, 0), (1, 1)])])
def test_non_windows_give_window_errors(bad):
    # a list of 3 or more vertices is a polygon (tests/test_api.py); 2 vertices are not
    with pytest.raises(WindowError) as info:
        as_window(bad)
    assert "\n" not in str(info.value)
    if not isinstance(bad, shapely.Geometry) and bad is not None:
        with pytest.raises(NullAtlasError, match="shapely Polygon"):
            PolygonWindow(bad)
