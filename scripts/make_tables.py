#!/usr/bin/env python3
"""Regenerate the shipped null tables in tables/ (null2d.h5, null3d.h5).

Each table is built in steps (cells of a range of n); a step whose cells are
already in the table is skipped, so the script can be stopped and run again
and it continues where it stopped (within a step, chunk checkpoints in
``tables/null?d.h5.parts`` do the same).

    python scripts/make_tables.py                  # everything, 2 workers
    python scripts/make_tables.py --dim 2 --jobs 2
    python scripts/make_tables.py --upto 20000     # only cells with n <= 20000
    python scripts/make_tables.py --json           # summaries as JSON

Replicates: R = 5,000 per cell for n <= 10,000 in 2D, R = 2,000 elsewhere
(the issue's minimum).  The disk is held out of a second copy of the 2D
model (``--holdout disk``) to check the finite-window model on a shape it
never saw.  Run time on 2 cores: see DEVELOPERS.md.
"""
from __future__ import annotations

import argparse
import json
import os
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
TABLES = os.path.join(os.path.dirname(HERE), "tables")

#: (dimension, n values, replicates) per step, in order.
STEPS = [
    (2, [50, 100, 200, 500, 1000, 2000, 5000, 10000], 5000),
    (2, [20000], 2000),
    (2, [50000], 2000),
    (2, [100000], 2000),
    (3, [50, 100, 200, 500, 1000, 2000, 5000], 2000),
    (3, [10000], 2000),
    (3, [20000], 2000),
]
HOLDOUT = {2: "disk", 3: None}


def main(argv=None) -> int:
    from nullatlas.calibrate import build, shapes
    from nullatlas.lookup.inference.tablereader import open_table

    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--dim", choices=["2", "3", "all"], default="all")
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--upto", type=int, default=None, help="only steps with every n <= this")
    ap.add_argument("--keep-parts", action="store_true", help="keep chunk checkpoints")
    ap.add_argument("--out", default=TABLES, help="folder of the tables (default: tables/)")
    ap.add_argument("--json", action="store_true")
    a = ap.parse_args(argv)
    dims = [2, 3] if a.dim == "all" else [int(a.dim)]
    log = []
    for dim, ns, reps in STEPS:
        if dim not in dims or (a.upto is not None and max(ns) > a.upto):
            continue
        path = os.path.join(a.out, f"null{dim}d.h5")
        targets = [(s, shapes.shape_window(s)) for s in shapes.SHIPPED[dim]]
        have = set()
        if os.path.exists(path):
            have = {(c.shape, c.n) for c in open_table(path).cells}
        if all((s, n) in have for s, _ in targets for n in ns):
            continue
        t0 = time.time()
        if not os.path.exists(path):
            summ = build.build_table(path, targets, ns, reps, jobs=a.jobs, progress=None,
                                     holdout=HOLDOUT[dim], keep_parts=a.keep_parts)
        else:
            missing = sorted({n for s, _ in targets for n in ns if (s, n) not in have})
            summ = build.extend_table(path, reps, targets=targets, ns=missing, jobs=a.jobs,
                                      progress=None, holdout=HOLDOUT[dim], keep_parts=a.keep_parts)
        step = {"dimension": dim, "n": ns, "replicates": reps, "seconds": round(time.time() - t0, 1),
                "table": path, "cells": summ["cells"], "model_nnmean": summ["model"].get("nnmean")}
        log.append(step)
        if not a.json:
            print(f"{dim}D n={ns} R={reps}: {step['seconds']} s, table now has {summ['cells']} cells",
                  flush=True)
    if a.json:
        json.dump(log, sys.stdout, indent=1)
        sys.stdout.write("\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
