#!/usr/bin/env python3
"""Compare the two finite-window models on the same cells and held-out windows.

* kappa model: E[S] = mu + c kappa n^(-1/d) + e n^(-2/d) (the shipped model
  of table schema 1, ``calibrate.model.fit_model``);
* geometric model: E[S] = mu + c1 B1 + c2 B2 + c3 / n with the covariates of
  the window's inner parallel sets (``lookup.patterns.boundary``,
  ``calibrate.model.fit_geomodel``).

Both are fitted on the same training cells of a table (n >= 100, the shapes
the geometric model keeps for that statistic) and scored on (a) the
training cells: median chi-square per degree of freedom over the grid
points; (b) every held-out cell simulated by ``scripts/make_heldout.py``:
the largest |mean error| in units of one pattern's sd over the grid points
that the tests use, median and maximum over the held-out cells.

    python scripts/compare_models.py tables/null2d.h5
    python scripts/compare_models.py tables/null3d.h5 --json
"""
from __future__ import annotations

import argparse
import json
import os
import sys

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))


def main(argv=None) -> int:
    from nullatlas.calibrate.build import _load_records
    from nullatlas.calibrate.heldout import HELDOUT, heldout_ns, heldout_window, load_heldout
    from nullatlas.calibrate.model import cell_covariates, fit_geomodel, fit_model
    from nullatlas.lookup.inference.nullmoments import TableSet, null_moments
    from nullatlas.lookup.patterns.boundary import covariates, grid_depths
    from nullatlas.lookup.summaries.statistics import STATISTICS

    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("table")
    ap.add_argument("--heldout", default=os.path.join(os.path.dirname(HERE), "tables",
                                                       "heldout.parts"))
    ap.add_argument("--json", action="store_true")
    a = ap.parse_args(argv)
    info, records, stat_names = _load_records(a.table)
    d = info.dimension
    tset = TableSet([a.table], use_shipped=False)
    import h5py
    with h5py.File(a.table, "r") as fh:
        excluded = {s: json.loads(g.attrs.get("excluded_shapes", "[]"))
                    for s, g in fh.get("geomodel", {}).items()}
    held = {}
    for name, (dd, _, _) in HELDOUT.items():
        if dd != d or name.startswith("torus"):
            continue
        w = heldout_window(name)
        for n in heldout_ns(name):
            raw = load_heldout(a.heldout, name, n)
            if raw is not None:
                held[(name, n)] = (w, raw)
    out = []
    for stat in stat_names:
        st = STATISTICS[stat]
        if st.kind == "extreme":
            continue
        depth = grid_depths(st.grid, st.kind)
        rows = []
        for r in records:
            if r["shape"] in excluded.get(stat, []) or r["shape"].startswith("torus") \
                    or stat not in r["stats"] or r["n"] < 100:
                continue
            m = r["stats"][stat]["moments"]
            rows.append({"name": r["name"], "shape": r["shape"], "n": r["n"], "kappa": r["kappa"],
                         "cov": cell_covariates(r["spec"], r["n"], depth), "mean": m.mean,
                         "var": np.diag(m.cov), "count": m.count})
        try:
            kfit = fit_model(rows, d, 100)
            gfit = fit_geomodel(rows, d, 100)
        except ValueError:
            continue
        chi_k = float(np.nanmedian(kfit.mean_chi2 / max(len(kfit.cells) - 3, 1)))
        chi_g = float(np.nanmedian(gfit.mean_chi2 / max(len(gfit.cells) - 4, 1)))
        ek, eg = [], []
        for (name, n), (w, raw) in held.items():
            if stat not in raw:
                continue
            v = np.asarray(raw[stat], float).reshape(len(raw[stat]), -1)
            nm = null_moments(tset, w, n, stat)
            use = np.ones(v.shape[1], bool) if nm is None or nm.usable is None \
                else np.asarray(nm.usable, bool)
            ok = np.all(np.isfinite(v), axis=1)
            sd = v[ok].std(axis=0, ddof=1)
            use &= sd > 0
            if not use.any():
                continue
            mean = v[ok].mean(axis=0)
            xk = np.array([1.0, w.kappa * n ** (-1.0 / d), n ** (-2.0 / d)])
            pk = kfit.mean_coef @ xk
            cg = np.broadcast_to(covariates(w, n, depth), gfit.mean_coef.shape)
            pg = np.einsum("kc,kc->k", gfit.mean_coef, cg)
            m = int(ok.sum())

            def bias(pred):
                # RMS over the grid less the simulation noise of the means
                e2 = float(np.mean(((mean - pred) / sd)[use] ** 2))
                return float(np.sqrt(max(0.0, e2 - 1.0 / m)))

            ek.append(bias(pk))
            eg.append(bias(pg))
        out.append({"statistic": stat, "training_chi2_dof": {"kappa": chi_k, "geometric": chi_g},
                    "heldout_cells": len(ek),
                    "heldout_err_sd_median": {"kappa": float(np.median(ek)) if ek else None,
                                              "geometric": float(np.median(eg)) if eg else None},
                    "heldout_err_sd_max": {"kappa": float(np.max(ek)) if ek else None,
                                           "geometric": float(np.max(eg)) if eg else None},
                    "excluded_shapes": excluded.get(stat, [])})
    if a.json:
        json.dump(out, sys.stdout, indent=1)
        sys.stdout.write("\n")
        return 0
    print(f"{'statistic':10s} {'chi2/dof kappa':>14s} {'geometric':>10s}   "
          f"{'held-out |bias|/sd median kappa':>32s} {'geometric':>10s}   "
          f"{'max kappa':>9s} {'geometric':>10s}  cells")
    for r in out:
        hm, hx = r["heldout_err_sd_median"], r["heldout_err_sd_max"]
        def f(v):
            return f"{v:10.3f}" if v is not None else f"{'-':>10s}"
        print(f"{r['statistic']:10s} {r['training_chi2_dof']['kappa']:14.2f} "
              f"{r['training_chi2_dof']['geometric']:10.2f}   {f(hm['kappa']):>32s} "
              f"{f(hm['geometric'])}   {f(hx['kappa']):>9s} {f(hx['geometric'])}  "
              f"{r['heldout_cells']}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
