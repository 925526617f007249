#!/usr/bin/env python3
"""Size of the Monte Carlo test when the window is estimated from the data.

CSR patterns in the unit square are tested with the window ``hull``
estimated from each pattern, two ways: (a) as nullatlas does, the null
re-estimates the window from every simulated pattern (Ripley-Rasson hull);
(b) the null is simulated in the fixed hull of the observed points.  Prints
the rejection rate at 0.05 of each statistic for both.

    python scripts/estimated_window_size.py            # 300 patterns of 300 points, 39 sims
    python scripts/estimated_window_size.py --reps 100 --n 500
"""
from __future__ import annotations

import argparse
import sys
import warnings


def main(argv=None) -> int:
    import numpy as np
    import shapely

    from nullatlas.lookup import csr_test
    from nullatlas.lookup.patterns.windows import PolygonWindow, Rectangle, parse_window

    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--reps", type=int, default=300)
    ap.add_argument("--n", type=int, default=300)
    ap.add_argument("--sims", type=int, default=39)
    a = ap.parse_args(argv)
    stats = ["euler", "total0", "nnmean"]
    sq = Rectangle(0, 0, 1, 1)
    rej = {"re-estimated": dict.fromkeys(stats, 0), "fixed hull": dict.fromkeys(stats, 0)}
    for i in range(a.reps):
        pts = sq.sample(a.n, np.random.default_rng(1000 + i))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            windows = {"re-estimated": parse_window("hull", pts),
                       "fixed hull": PolygonWindow(shapely.MultiPoint(pts).convex_hull)}
        for how, w in windows.items():
            r = csr_test(pts, w, stats, method="mc", n_sims=a.sims, seed=i)
            for x in r.results:
                rej[how][x.name] += x.pvalue <= 0.05
    print(f"{a.reps} CSR patterns of {a.n} points, window 'hull', {a.sims} simulations; "
          "size at 0.05:")
    for how, per in rej.items():
        print(f"  {how:13s} " + "  ".join(f"{k} {v / a.reps:.3f}" for k, v in per.items()))
    return 0


if __name__ == "__main__":
    sys.exit(main())
