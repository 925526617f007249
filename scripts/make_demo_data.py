"""Generate the invented demo data shipped in examples/.

Scenarios (all made up; no real measurements):

* wafer_lot_random.csv    -- defect coordinates (mm) on a 300 mm wafer, CSR
* wafer_lot_clustered.csv -- defects concentrated in small clusters (Thomas process)
* wafer_lot_regular.csv   -- an unusually regular, lattice-like defect pattern
* pores_part.csv          -- pore centres (mm) in a 3D-printed block, 20 x 20 x 10 mm,
                             pores gathered in small clusters (Thomas process in 3D)
* wafer_notched.wkt       -- the usable area of a 300 mm wafer: 5 mm edge exclusion and
                             a V-shaped notch at the bottom (a non-convex window)
* wafer_notched_lot.csv   -- defects on that usable area, CSR

Windows: ``disk:0,0,150`` for the wafers, ``box:0,0,0,20,20,10`` for the part,
``examples/wafer_notched.wkt`` for the notched wafer.

Run ``python scripts/make_demo_data.py`` to regenerate (fixed seeds).
"""
from __future__ import annotations

import os
import sys

import numpy as np

from nullatlas.lookup.patterns.windows import Box, Disk, PolygonWindow
from nullatlas.lookup.processes.alternatives import perturbed_lattice, thomas
from nullatlas.lookup.processes.csr import csr

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "..", "examples")


def _write(name, pts, cols, note):
    path = os.path.join(OUT, name)
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(f"# {note}\n")
        fh.write(",".join(cols) + "\n")
        for row in pts:
            fh.write(",".join(f"{v:.4f}" for v in row) + "\n")
    print(f"{path}: {len(pts)} points")


def main() -> int:
    os.makedirs(OUT, exist_ok=True)
    wafer = Disk(0.0, 0.0, 150.0)
    rng = np.random.default_rng(424242)
    _write("wafer_lot_random.csv", csr(wafer, 400, rng), ["x_mm", "y_mm"],
           "invented demo: defects on a 300 mm wafer, complete spatial randomness; window disk:0,0,150")
    pts = thomas(wafer, kappa=40 / wafer.measure, mu=10.0, sigma=6.0, rng=np.random.default_rng(7))
    _write("wafer_lot_clustered.csv", pts, ["x_mm", "y_mm"],
           "invented demo: defects on a 300 mm wafer in small clusters; window disk:0,0,150")
    pts = perturbed_lattice(wafer, 400, jitter=0.35, rng=np.random.default_rng(11))
    _write("wafer_lot_regular.csv", pts, ["x_mm", "y_mm"],
           "invented demo: unusually regular defect pattern on a 300 mm wafer; window disk:0,0,150")
    part = Box(0, 0, 0, 20, 20, 10)
    pts = thomas(part, kappa=60 / part.measure, mu=8.0, sigma=0.5, rng=np.random.default_rng(3))
    _write("pores_part.csv", pts, ["x_mm", "y_mm", "z_mm"],
           "invented demo: pore centres in a 3D-printed block; window box:0,0,0,20,20,10")
    notched = notched_wafer()
    path = os.path.join(OUT, "wafer_notched.wkt")
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(notched.geometry.wkt + "\n")
    print(f"{path}: usable area {notched.measure:.1f} mm^2")
    _write("wafer_notched_lot.csv", csr(notched, 600, np.random.default_rng(2026)),
           ["x_mm", "y_mm"], "invented demo: defects on the usable area of a notched 300 mm "
           "wafer, CSR; window examples/wafer_notched.wkt")
    return 0


def notched_wafer() -> PolygonWindow:
    """Usable area of a 300 mm wafer: 5 mm edge exclusion, V-notch 8 mm wide and
    9 mm deep at the bottom of the edge (coordinates in mm, rounded to 1 um)."""
    import shapely

    usable = shapely.Point(0, 0).buffer(145.0, quad_segs=90)
    notch = shapely.Polygon([(-4.0, -151.0), (4.0, -151.0), (0.0, -136.0)])
    return PolygonWindow(shapely.set_precision(usable.difference(notch), 1e-3))


if __name__ == "__main__":
    sys.exit(main())
