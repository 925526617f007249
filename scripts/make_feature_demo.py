"""Write the invented demo wafer with an edge ring (issue 17): 120 uniform
defects on a 300 mm wafer plus 200 in a ring 128-140 mm from the centre.

    python scripts/make_feature_demo.py      # rewrites examples/wafer_edge_ring.csv (fixed seed)
"""
import os

import numpy as np

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def main():
    rng = np.random.default_rng(20261204)
    r = 150 * np.sqrt(rng.random(120))
    t = rng.uniform(0, 2 * np.pi, 120)
    bg = np.c_[r * np.cos(t), r * np.sin(t)]
    r = np.sqrt(rng.uniform(128 ** 2, 140 ** 2, 200))
    t = rng.uniform(0, 2 * np.pi, 200)
    ring = np.c_[r * np.cos(t), r * np.sin(t)]
    pts = np.vstack([bg, ring])
    path = os.path.join(ROOT, "examples", "wafer_edge_ring.csv")
    with open(path, "w") as fh:
        fh.write("# invented demo: defects on a 300 mm wafer with an edge ring; window disk:0,0,150\n")
        fh.write("x_mm,y_mm\n")
        for x, y in pts:
            fh.write(f"{x:.4f},{y:.4f}\n")
    print(path)


if __name__ == "__main__":
    main()
