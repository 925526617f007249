#!/usr/bin/env python3
"""Check the instant test far beyond the tables' cells: CSR patterns of 10^6+ points.

The trust verdict extends a model validated on held-out windows up to
n_hi (20,000 in 2D) to larger n while the bias its uncertain limit can cause
stays within 0.1 pattern sd (``lookup.inference.asymptotic.extrapolation_limit``);
statistics whose limit is exact (``calibrate.csrlimits``) are trusted up to
10^9.  This script measures what that argument predicts:

1. the exact limits against the freely fitted ones (their difference in
   fit SE, and the chi-square of the fit with the limit held fixed against
   the free fit), from the table's own cells;
2. CSR patterns of n points (default 10^6) in held-out windows that no
   model was fitted on, computed by the single-process code (equal bit for
   bit to the tiled path, ``tests/test_tiled.py``), stored in
   ``tables/largen.parts/`` (git-ignored; seeds as the held-out cells'),
   scored exactly as ``nullatlas-calibrate validate`` scores held-out cells:
   bias of the mean (pattern sd, with its SE 1/sqrt(m)), sd ratio, size of
   the two-sided test at 0.05 (curves: max |z|), with the runtime's verdict
   at that n and its bias bound.

    python scripts/check_large_n.py --n 1e6 --window wafer-notched,L --reps 100 --jobs 2
"""
from __future__ import annotations

import argparse
import json
import math
import os
import sys

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
FOLDER = os.path.join(os.path.dirname(HERE), "tables", "largen.parts")
TABLE = os.path.join(os.path.dirname(HERE), "tables", "null2d.h5")
STATS = ["euler", "nnmean", "gfunc", "lfunc", "total0", "betti0", "betti1", "total1", "apf0"]


def limit_check(table: str) -> list[dict]:
    """Exact limits against the free fit of the same cells."""
    from nullatlas.calibrate.build import _load_records, fit_geomodels
    from nullatlas.calibrate.csrlimits import LIMIT_SOURCES, csr_limit

    info, records, names = _load_records(table)
    names = [s for s in names if s in LIMIT_SOURCES]
    free = fit_geomodels(records, names, info.dimension, fixed_limits=False)
    fixed = fit_geomodels(records, names, info.dimension)
    out = []
    for s in names:
        exact = csr_limit(s, info.dimension)[0]
        f, g = free[s], fixed[s]
        se = f.mean_se[:, 0]
        ok = np.isfinite(se) & (se > 0)
        z = (f.mean_coef[ok, 0] - exact[ok]) / se[ok]
        dof = max(len(f.cells) - f.mean_coef.shape[1], 1)
        out.append({"statistic": s, "source": LIMIT_SOURCES[s], "grid_points": int(ok.sum()),
                    "max_abs_diff": float(np.max(np.abs(f.mean_coef[ok, 0] - exact[ok]))),
                    "rms_z": float(np.sqrt(np.mean(z ** 2))), "max_abs_z": float(np.max(np.abs(z))),
                    "chi2_dof_free": float(np.nanmedian(f.mean_chi2 / dof)),
                    "chi2_dof_fixed": float(np.nanmedian(g.mean_chi2 / (dof + 1)))})
    return out


def score(table: str, name: str, n: int, raw: dict) -> list[dict]:
    from nullatlas.calibrate.heldout import heldout_window
    from nullatlas.calibrate.validate import score_cell
    from nullatlas.lookup.inference.asymptotic import instant_moments
    from nullatlas.lookup.inference.nullmoments import TableSet
    from nullatlas.lookup.summaries.statistics import resolve_stats

    tset = TableSet([table], use_shipped=False)
    w = heldout_window(name)
    rows = score_cell(tset, w, n, raw, [s for s in STATS if s in raw])
    for r in rows:
        st = resolve_stats([r["statistic"]], w.dim)[0]
        nm, ok, why = instant_moments(tset, w, n, st, "two-sided")
        per = (nm.extra.get("trust") or {}).get("maxabs" if st.kind == "curve" else "two_sided")
        growth = nm.extra.get("limit_growth")
        bound = None
        if per and growth is not None and per.get("bias_hi") is not None:
            bound = per["bias_hi"] + growth * max(0.0, math.sqrt(n) - math.sqrt(per["n_hi"]))
        r.update({"window": name, "trusted": bool(ok), "reasons": why,
                  "bias_se": 1.0 / math.sqrt(r["m"]), "bound_sd": bound,
                  "n_extrapolation": nm.extra.get("n_extrapolation")})
    return rows


def main(argv=None) -> int:
    from nullatlas.calibrate.heldout import load_heldout, simulate_heldout

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", default="1e6", help="comma-separated n (default 1e6)")
    ap.add_argument("--window", default="wafer-notched,L", help="held-out 2D windows")
    ap.add_argument("--reps", type=int, default=100, help="patterns per window and n")
    ap.add_argument("--jobs", type=int, default=1)
    ap.add_argument("--table", default=TABLE)
    ap.add_argument("--folder", default=FOLDER)
    ap.add_argument("--json", metavar="FILE", help="also write the results as JSON")
    a = ap.parse_args(argv)
    ns = [int(float(x)) for x in a.n.split(",")]
    out = {"table": os.path.basename(a.table), "limits": limit_check(a.table), "cells": []}
    print("Exact limits against the free fit (shipped cells):")
    print("| statistic | limit | max |free - exact| | RMS z | max |z| | chi2/dof free | fixed |")
    print("|---|---|---|---|---|---|---|")
    for r in out["limits"]:
        print(f"| {r['statistic']} | {r['source']} | {r['max_abs_diff']:.2g} | {r['rms_z']:.2f} | "
              f"{r['max_abs_z']:.2f} | {r['chi2_dof_free']:.2f} | {r['chi2_dof_fixed']:.2f} |")
    for name in a.window.split(","):
        for n in ns:
            simulate_heldout(a.folder, name, n, a.reps, jobs=a.jobs, progress=True)
            raw = load_heldout(a.folder, name, n)
            out["cells"] += score(a.table, name, n, raw)
    print("\nCSR patterns in held-out windows (bias in pattern sd +- its SE; curves: RMS over "
          "the grid less its noise, and the largest pointwise; size at 0.05):")
    print("| window | n | statistic | patterns | bias (sd) | sd ratio | size | trusted | "
          "bias bound |")
    print("|---|---|---|---|---|---|---|---|---|")
    for r in out["cells"]:
        b = "-" if r["bound_sd"] is None else f"{r['bound_sd']:.3f}"
        se = math.sqrt(0.05 * 0.95 / r["m"])
        # curves: the RMS bias over the usable grid less its noise (>= 0)
        bias = (f"{r['mean_err_sd']:+.3f} +- {r['bias_se']:.3f}" if r["kind"] != "curve"
                else f"RMS {r['mean_err_sd']:.3f} (largest {r['max_err_sd']:+.2f})")
        print(f"| {r['window']} | {r['n']:,} | {r['statistic']} | {r['m']} | "
              f"{bias} | {r['sd_ratio']:.3f} | "
              f"{r['size']:.3f} +- {se:.3f} | {'yes' if r['trusted'] else 'no'} | {b} |")
    if a.json:
        with open(a.json, "w") as fh:
            json.dump(out, fh, indent=1, default=float)
    return 0


if __name__ == "__main__":
    sys.exit(main())
