"""Held-out validation windows and their fresh CSR simulations.

The finite-window correction (``calibrate.model``) is fitted on the cells of
the training shapes only (``lookup.shapes.SHAPES``).  The windows here are
never used in any fit: each (window, n) is simulated afresh (seeds of their
own, independent of the tables' seeds) and the raw statistics are stored, so
that any version of the model can be scored on them without simulating
again (``calibrate.validate``).

The windows are the ones users have and the model finds hardest: non-convex
polygons (an L, a five-pointed star, a crescent with thin horns), an annulus
with an off-centre hole, a wafer with edge exclusion and a notch, a plate
with several holes, a long thin rectangle (kappa 8.5, beyond the calibrated
2D shapes), a raster mask of an irregular blob; in 3D boxes of aspects 1:2:3
and 1:1:0.5, a ball and a long cylinder; periodic square and cube.
"""
from __future__ import annotations

import os

import numpy as np

from nullatlas.lookup.atomic import atomic_path
from nullatlas.lookup.summaries.statistics import resolve_stats

__all__ = ["HELDOUT", "heldout_window", "HELDOUT_SEED", "HELDOUT_N", "HELDOUT_N_PERIODIC",
           "heldout_ns", "simulate_heldout",
           "load_heldout"]

#: Root seed of the held-out simulations (not the tables' seed).
HELDOUT_SEED = 7_160_016

#: n simulated per dimension (periodic windows: see HELDOUT_N_PERIODIC).
HELDOUT_N = {2: [100, 500, 1000, 2000, 5000, 20000], 3: [100, 300, 500, 1000, 2000, 5000]}
#: Periodic windows: exact periodic persistence costs more than the bounded
#: windows' (the 3D torus needs about 200 points to fold into a complex).
HELDOUT_N_PERIODIC = {2: [100, 500, 1000, 2000, 5000, 20000], 3: [300, 500, 1000, 2000, 5000]}


#: Windows with n lists of their own: periodic boxes of other aspects need
#: more points before their shortest period holds a periodic complex.
HELDOUT_N_WINDOW = {"torus2r": [500, 1000, 2000, 5000, 20000], "torus3b": [500, 1000, 2000, 5000]}


def heldout_ns(name: str) -> list:
    """The n simulated for held-out window ``name``."""
    d = HELDOUT[name][0]
    if name in HELDOUT_N_WINDOW:
        return HELDOUT_N_WINDOW[name]
    return HELDOUT_N_PERIODIC[d] if name.startswith("torus") else HELDOUT_N[d]


def _poly(geom):
    from nullatlas.lookup.patterns.windows import PolygonWindow

    return PolygonWindow(geom)


def _L():
    import shapely
    return _poly(shapely.Polygon([(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)]))


def _star():
    import shapely
    ang = np.pi / 2 + np.arange(10) * np.pi / 5
    rad = np.where(np.arange(10) % 2 == 0, 1.0, 0.45)
    return _poly(shapely.Polygon(np.column_stack([rad * np.cos(ang), rad * np.sin(ang)])))


def _crescent():
    import shapely
    outer = shapely.Point(0, 0).buffer(1.0, quad_segs=64)
    inner = shapely.Point(0.45, 0).buffer(0.8, quad_segs=64)
    return _poly(outer.difference(inner))


def _annulus():
    import shapely
    outer = shapely.Point(0, 0).buffer(1.0, quad_segs=64)
    hole = shapely.Point(0.2, 0.1).buffer(0.35, quad_segs=64)
    return _poly(outer.difference(hole))


def _wafer_notched():
    """A 300 mm wafer: 3 mm edge exclusion and a notch (a 6 mm disk cut at the
    bottom of the edge)."""
    import shapely
    usable = shapely.Point(0, 0).buffer(147.0, quad_segs=128)
    notch = shapely.Point(0, -150.0).buffer(9.0, quad_segs=32)
    return _poly(usable.difference(notch))


def _plate_holes():
    import shapely
    plate = shapely.box(0, 0, 10, 6)
    holes = [((2.0, 2.0), 0.9), ((5.0, 4.0), 1.2), ((7.5, 1.8), 0.7), ((8.3, 4.4), 0.6),
             ((3.4, 4.6), 0.5)]
    for (x, y), r in holes:
        plate = plate.difference(shapely.Point(x, y).buffer(r, quad_segs=48))
    return _poly(plate)


def _rect16():
    from nullatlas.lookup.patterns.windows import Rectangle
    return Rectangle(0, 0, 16, 1)


def blob_mask(size: int = 96) -> np.ndarray:
    """A deterministic irregular blob: a smoothed random field thresholded,
    its largest connected component (boolean image, row 0 at the top)."""
    from scipy import ndimage

    rng = np.random.default_rng(2024)
    f = ndimage.gaussian_filter(rng.standard_normal((size, size)), 7.0, mode="constant")
    yy, xx = np.mgrid[:size, :size]
    r2 = ((yy - size / 2) ** 2 + (xx - size / 2) ** 2) / (size / 2.6) ** 2
    m = (f / f.std() + 1.6 * (1 - r2)) > 0.4
    lab, k = ndimage.label(m)
    sizes = ndimage.sum(m, lab, range(1, k + 1))
    m = lab == (1 + int(np.argmax(sizes)))
    return m


def _blob():
    from nullatlas.lookup.patterns import windows as W
    maker = getattr(W, "mask_window", None)
    if maker is None:
        maker = W.MaskWindow.from_array
    return maker(blob_mask(), 1.0, (0.0, 0.0))


def _box(a, b, c):
    from nullatlas.lookup.patterns.windows import Box
    return Box(0, 0, 0, a, b, c)


def _ball():
    from nullatlas.lookup.patterns.windows import Ball
    return Ball(0, 0, 0, 1.0)


def _cylinder_long():
    from nullatlas.lookup.patterns.windows import Cylinder
    return Cylinder(0.0, 0.0, 0.0, 6.0, 0.5)


def _torus(d):
    from nullatlas.lookup.patterns.periodic import PeriodicBox
    return PeriodicBox(*([0.0] * d + [1.0] * d))


def _torus_box(*sides):
    from nullatlas.lookup.patterns.periodic import PeriodicBox
    return PeriodicBox(*([0.0] * len(sides) + list(sides)))


#: name -> (dimension, factory, description)
HELDOUT = {
    "L": (2, _L, "L-shaped hexagon (three unit squares)"),
    "star": (2, _star, "five-pointed star (inner/outer radius 0.45)"),
    "crescent": (2, _crescent, "crescent: unit disk minus a disk of radius 0.8 offset by 0.45"),
    "annulus": (2, _annulus, "disk with an off-centre hole (radius 0.35)"),
    "wafer-notched": (2, _wafer_notched, "300 mm wafer, 3 mm edge exclusion, notch"),
    "plate-holes": (2, _plate_holes, "10 x 6 plate with five round holes"),
    "rect16": (2, _rect16, "rectangle of aspect 16 (kappa 8.5)"),
    "blob-mask": (2, _blob, "raster mask of an irregular blob (96 x 96 pixels)"),
    "torus2": (2, lambda: _torus(2), "periodic unit square"),
    "box123": (3, lambda: _box(1, 2, 3), "box 1:2:3"),
    "box11h": (3, lambda: _box(1, 1, 0.5), "box 1:1:0.5 (the demo part's shape)"),
    "ball": (3, _ball, "ball"),
    "cylinder6": (3, _cylinder_long, "cylinder, height 6 diameters"),
    "torus3": (3, lambda: _torus(3), "periodic unit cube"),
    # appended (the seed of a window is its index here: earlier windows keep theirs)
    "torus2r": (2, lambda: _torus_box(1.0, 4.0), "periodic rectangle 1:4"),
    "torus3b": (3, lambda: _torus_box(1.0, 1.0, 2.0), "periodic box 1:1:2"),
}


def heldout_window(name: str):
    """The held-out window ``name`` (see :data:`HELDOUT`)."""
    return HELDOUT[name][1]()


def _cell_path(folder: str, name: str, n: int) -> str:
    return os.path.join(folder, f"{name}_n{n}.h5")


def simulate_heldout(folder: str, name: str, n: int, reps: int, jobs: int = 1,
                     progress=None, stats=None) -> str:
    """Simulate ``reps`` CSR patterns of ``n`` points in held-out window
    ``name`` and store their statistics in ``folder`` (one HDF5 file per
    cell, written atomically; an existing file with at least ``reps``
    patterns is kept).  Seeds: child (window index, n) of HELDOUT_SEED."""
    import h5py

    from nullatlas.calibrate.plan import DEFAULT_STATS
    from nullatlas.lookup.inference.montecarlo import simulate_null

    os.makedirs(folder, exist_ok=True)
    path = _cell_path(folder, name, n)
    d, make, desc = HELDOUT[name]
    names = stats or DEFAULT_STATS[d]
    chosen = resolve_stats(names, d)
    have = {}
    if os.path.exists(path):
        with h5py.File(path, "r") as fh:
            done = int(fh.attrs.get("reps", 0))
            if done >= reps:
                return path
            if {st.name for st in chosen} <= set(fh):
                have = {st.name: fh[st.name][()] for st in chosen}
    w = make()
    idx = list(HELDOUT).index(name)
    ss = np.random.SeedSequence([HELDOUT_SEED, idx, int(n)])
    # pattern i has seed child i whatever the number of patterns asked for,
    # so a cell is extended by simulating only the patterns it lacks
    start = len(next(iter(have.values()))) if have else 0
    vals = simulate_null(w, n, chosen, ss.spawn(reps)[start:], jobs=jobs, progress=progress)
    if start:
        vals = {k: np.concatenate([have[k], np.asarray(v)], axis=0) for k, v in vals.items()}
    with atomic_path(path) as tmp:
        with h5py.File(tmp, "w") as fh:
            fh.attrs.update({"window": name, "n": int(n), "reps": int(reps),
                             "spec": w.spec(), "description": desc,
                             "seed": f"{HELDOUT_SEED},{idx},{n}"})
            for k, v in vals.items():
                fh.create_dataset(k, data=np.asarray(v, np.float64), compression="gzip")
    return path


def load_heldout(folder: str, name: str, n: int) -> dict | None:
    """Stored statistics of one held-out cell (name -> array), or None."""
    import h5py

    path = _cell_path(folder, name, n)
    if not os.path.exists(path):
        return None
    with h5py.File(path, "r") as fh:
        out = {k: fh[k][()] for k in fh}
        out["_reps"] = int(fh.attrs["reps"])
    return out

