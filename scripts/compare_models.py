#!/usr/bin/env python3
"""Compare the finite-window models on the same cells and held-out windows.

* kappa model: E[S] = mu + c kappa n^(-1/d) + e n^(-2/d) (the shipped model
  of table schema 1, ``calibrate.model.fit_model``);
* the geometric candidates of ``calibrate.model.CANDIDATES``: in 2D and 3D
  "geometric", E[S] = mu + c1 B1 + c2 B2 + c3 / n with the covariates of the
  window's inner parallel sets (``lookup.patterns.boundary``); in 3D also
  "curved", the same plus c4 BC, the smooth-curvature term.

All are fitted on the training cells of the shipped fit (n >= 100, share of
the window within one mean spacing of its boundary at most
``calibrate.model.TRAIN_SHARE_MAX``, no periodic cells, the shapes the
geometric model keeps for that statistic) and scored on (a) the training
cells: median chi-square per degree of freedom over the grid points; (b)
every held-out cell simulated by ``scripts/make_heldout.py``: the
systematic bias in units of one pattern's sd (RMS over the grid points that
the tests use, less the simulation noise of the means), median and maximum
over the held-out cells.

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
    from nullatlas.calibrate.model import (
        CANDIDATES,
        TRAIN_SHARE_MAX,
        cell_boundary_share,
        cell_covariates,
        cell_is_periodic,
        fit_geomodel,
        fit_model,
    )
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
    models = ["kappa"] + [m for m in CANDIDATES[d] if m != "boundary-only"]
    out = []
    for stat in stat_names:
        st = STATISTICS[stat]
        if st.kind == "extreme":
            continue
        depth = grid_depths(st.grid, st.kind)
        rows = []
        for r in records:
            if r["shape"] in excluded.get(stat, []) or stat not in r["stats"] or r["n"] < 100 \
                    or cell_is_periodic(r["spec"]) \
                    or cell_boundary_share(r["spec"], r["n"]) > TRAIN_SHARE_MAX:
                continue
            m = r["stats"][stat]["moments"]
            rows.append({"name": r["name"], "shape": r["shape"], "n": r["n"], "kappa": r["kappa"],
                         "cov": cell_covariates(r["spec"], r["n"], depth), "mean": m.mean,
                         "var": np.diag(m.cov), "count": m.count})
        try:
            fits = {"kappa": fit_model(rows, d, 100)}
            for mname in models[1:]:
                fits[mname] = fit_geomodel(rows, d, 100, CANDIDATES[d][mname])
        except ValueError:
            continue
        chi = {}
        for mname, f in fits.items():
            p = 3 if mname == "kappa" else len(CANDIDATES[d][mname])
            chi[mname] = float(np.nanmedian(f.mean_chi2 / max(len(f.cells) - p, 1)))
        errs = {mname: [] for mname in models}
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
            m = int(ok.sum())
            for mname, f in fits.items():
                if mname == "kappa":
                    pred = f.mean_coef @ np.array([1.0, w.kappa * n ** (-1.0 / d), n ** (-2.0 / d)])
                else:
                    cg = np.broadcast_to(covariates(w, n, depth), f.mean_coef.shape)
                    pred = np.einsum("kc,kc->k", np.nan_to_num(f.mean_coef), cg)
                # RMS over the grid less the simulation noise of the means
                e2 = float(np.mean(((mean[use] - pred[use]) / sd[use]) ** 2))
                errs[mname].append(float(np.sqrt(max(0.0, e2 - 1.0 / m))))
        out.append({"statistic": stat, "training_chi2_dof": chi,
                    "heldout_cells": len(errs["kappa"]),
                    "heldout_err_sd_median": {k: float(np.median(v)) if v else None
                                              for k, v in errs.items()},
                    "heldout_err_sd_max": {k: float(np.max(v)) if v else None
                                           for k, v in errs.items()},
                    "excluded_shapes": excluded.get(stat, [])})
    if a.json:
        json.dump(out, sys.stdout, indent=1)
        sys.stdout.write("\n")
        return 0
    print(f"models: {', '.join(models)}; held-out bias in pattern sd, median (max)")
    print(f"{'statistic':10s} {'training chi2/dof':>24s}   {'held-out bias':>40s}  cells")
    for r in out:
        chi = " / ".join(f"{r['training_chi2_dof'][k]:.2f}" for k in models)
        hm, hx = r["heldout_err_sd_median"], r["heldout_err_sd_max"]
        bias = " / ".join("-" if hm[k] is None else f"{hm[k]:.3f} ({hx[k]:.2f})" for k in models)
        print(f"{r['statistic']:10s} {chi:>24s}   {bias:>40s}  {r['heldout_cells']}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
