#!/usr/bin/env python3
"""Simulate the held-out validation windows (``calibrate.heldout``).

Fresh CSR patterns in windows that no model is fitted on; their raw
statistics go to ``tables/heldout.parts/`` (git-ignored, one HDF5 file per
(window, n)), from which ``nullatlas-calibrate validate`` scores any table.
Resumable: finished cells are skipped, and a cell with fewer patterns than
--reps is extended (pattern i always has the same seed).

    python scripts/make_heldout.py                    # every window, n, 2,000 patterns
    python scripts/make_heldout.py --window L,star --n 100,500 --jobs 2
"""
from __future__ import annotations

import argparse
import os
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
FOLDER = os.path.join(os.path.dirname(HERE), "tables", "heldout.parts")


def main(argv=None) -> int:
    from nullatlas.calibrate.heldout import HELDOUT, heldout_ns, simulate_heldout

    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--window", default=None, help="comma-separated names (default: all)")
    ap.add_argument("--dim", type=int, default=None)
    ap.add_argument("--n", default=None, help="comma-separated n (default: per dimension)")
    ap.add_argument("--reps", type=int, default=2000)
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--folder", default=FOLDER)
    a = ap.parse_args(argv)
    names = a.window.split(",") if a.window else list(HELDOUT)
    for name in names:
        d = HELDOUT[name][0]
        if a.dim and d != a.dim:
            continue
        ns = [int(x) for x in a.n.split(",")] if a.n else heldout_ns(name)
        for n in ns:
            t0 = time.time()
            simulate_heldout(a.folder, name, n, a.reps, jobs=a.jobs, progress=False)
            print(f"{name} n={n}: {time.time() - t0:.1f} s", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
