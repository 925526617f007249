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

Replicates: see STEPS.  The disk is held out of a second copy of the
two-term 2D model (``--holdout disk``).  Last, the geometric model is
refitted and validated on the held-out windows (``nullatlas-calibrate
validate``; simulate them first with ``scripts/make_heldout.py``).  Run time
on 2 cores: see DEVELOPERS.md.
"""
from __future__ import annotations

import argparse
import json
import os
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
TABLES = os.path.join(os.path.dirname(HERE), "tables")

_FIRST = {2: ["square", "rect2", "rect4", "disk"], 3: ["cube", "box114"]}
_MORE = {2: ["triangle", "cross", "holed"], 3: ["box133", "cyl1", "cyl8"]}

#: (dimension, shapes, n values, replicates) per step, in order.  The first
#: shapes carry most replicates; the training shapes added for the
#: geometric model (corners, reflex corners, a hole; a flat box, a
#: cylinder) and the periodic cells fewer.
STEPS = [
    (2, _FIRST[2], [50, 100, 200, 500, 1000, 2000, 5000, 10000], 5000),
    (2, _FIRST[2], [20000], 2000),
    (2, _FIRST[2], [50000], 2000),
    (2, _FIRST[2], [100000], 2000),
    (2, _MORE[2], [50, 100, 200, 500, 1000, 2000, 5000], 2000),
    (2, _MORE[2], [20000], 1000),
    (2, ["torus2"], [100, 200, 500, 1000, 2000, 5000], 1000),
    (3, _FIRST[3], [50, 100, 200, 500, 1000, 2000, 5000], 2000),
    (3, _FIRST[3], [10000], 2000),
    (3, _FIRST[3], [20000], 2000),
    (3, _MORE[3], [50, 100, 200, 500, 1000, 2000, 5000], 1000),
    (3, ["torus3"], [200, 500, 1000, 2000], 500),
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
    ap.add_argument("--no-validate", action="store_true",
                    help="skip refitting the geometric model and the held-out validation")
    a = ap.parse_args(argv)
    dims = [2, 3] if a.dim == "all" else [int(a.dim)]
    log = []
    for dim, names, ns, reps in STEPS:
        if dim not in dims or (a.upto is not None and max(ns) > a.upto):
            continue
        path = os.path.join(a.out, f"null{dim}d.h5")
        targets = [(s, shapes.shape_window(s)) for s in names]
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
    if not a.no_validate:
        # the geometric model, then its validation on the held-out windows
        # (simulated by scripts/make_heldout.py into <out>/heldout.parts)
        from nullatlas.calibrate.cli import main as calibrate_main
        for dim in dims:
            path = os.path.join(a.out, f"null{dim}d.h5")
            if os.path.exists(path):
                t0 = time.time()
                calibrate_main(["validate", path, "--allow-shipped"] + (["--json"] if a.json else []))
                log.append({"dimension": dim, "validate_seconds": round(time.time() - t0, 1)})
    if a.json:
        json.dump(log, sys.stdout, indent=1)
        sys.stdout.write("\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
