"""Building, extending and refitting null tables (the work behind the CLI).

``build_table``: plan the cells (shape x n), simulate their chunks
(``calibrate.runner``), assemble each cell as soon as it is complete
(``calibrate.assemble``), then compute n_min (``calibrate.nmin``), fit the
finite-window model (``calibrate.model``) and write the table atomically
(``calibrate.tablewriter``).  Checkpoints live in ``<out>.parts`` and are
removed once the table is written.

``extend_table``: more replicates for existing cells (new chunk indices, so
new seeds) and/or new cells; moments are merged exactly, audits pooled.

``refit_table``: recompute n_min and the model (optionally holding out one
shape) from the stored cells without simulating.
"""
from __future__ import annotations

import contextlib
import json
import os
import time

import numpy as np

from nullatlas.lookup.atomic import check_writable
from nullatlas.lookup.errors import OptionError, WriteError
from nullatlas.lookup.inference.tablereader import load_cell, open_table
from nullatlas.lookup.limits import (
    MAX_N,
    MAX_POINTS_TOTAL,
    MAX_REPS,
    duration,
    pattern_bytes,
    pattern_seconds,
    refuse_beyond,
    size,
)
from nullatlas.lookup.summaries import grids
from nullatlas.lookup.summaries.statistics import STATISTICS, resolve_stats

from . import assemble as asm
from .csrlimits import csr_limit
from .model import (
    MODEL_TOL_SD,
    TRAIN_SHARE_MAX,
    cell_boundary_share,
    cell_covariates,
    cell_is_periodic,
    fit_extreme_quantiles_robust,
    fit_geomodel_robust,
    fit_model,
    holdout_errors,
    holdout_sd_errors,
    model_n_ok,
)
from .moments import Moments
from .nmin import n_min_table
from .plan import DEFAULT_STATS, CellPlan, chunk_seed, chunk_size_for
from .runner import Checkpoints, run_chunks
from .tablewriter import write_table

__all__ = ["DEFAULT_SEED", "build_table", "extend_table", "refit_table", "table_grids"]

#: Root seed of the shipped tables (any integer; stored in the table).
DEFAULT_SEED = 20_261_203
_AUDIT_INDEX = 1_000_000_000   # chunk index reserved for the audit's Gaussian vectors


def table_grids() -> dict:
    """The grids stored with every table (``lookup.summaries.grids``, audit levels)."""
    return {"rho": grids.RHO, "apf_age": grids.APF_AGE, "nn_rho": grids.NN_RHO,
            "l_rho": grids.L_RHO, "pbetti_pairs": grids.PBETTI_PAIRS,
            "silhouette_t": grids.SILHOUETTE_T, "quantile_levels": asm.QUANTILE_LEVELS,
            "alphas": asm.ALPHAS}


def _parts_dir(out: str) -> str:
    return os.fspath(out) + ".parts"


def _cell_record(plan: CellPlan, window_desc: dict, stats: dict, reps: int, chunks: int) -> dict:
    return {"name": plan.name, "shape": plan.shape, "n": plan.n, "replicates": int(reps),
            "kappa": plan.kappa, "geometry": window_desc, "spec": plan.spec,
            "chunk_size": plan.size, "chunks": int(chunks), "stats": stats}


def _assembled_stats(assembled: dict) -> dict:
    out = {}
    for name, cd in assembled.items():
        item = dict(cd)
        item["kind"] = STATISTICS[name].kind
        out[name] = item
    return out


def _stored_stats(raw: dict) -> dict:
    """Reader arrays of one cell -> writer items (Moments etc.)."""
    out = {}
    for name, d in raw.items():
        if name == "attrs":
            continue
        item = {"moments": Moments.from_arrays(d), "kind": d.get("attrs", {}).get("kind", ""),
                "nonfinite": int(d.get("attrs", {}).get("nonfinite", 0))}
        for key in ("values", "quantiles", "expected_count", "usable"):
            if key in d:
                item[key] = d[key]
        if "audit" in d:
            item["audit"] = {k: v for k, v in d["audit"].items() if k != "attrs"}
        out[name] = item
    return out


_RATES = ("lower", "upper", "two_sided", "point_lower", "point_upper", "maxabs", "mahalanobis")


def _merge_item(old: dict, new: dict, n: int) -> dict:
    m = old["moments"].merge(new["moments"])
    item = {"moments": m, "kind": new.get("kind", old.get("kind", "")),
            "nonfinite": int(old.get("nonfinite", 0)) + int(new.get("nonfinite", 0))}
    if "values" in old or "values" in new:
        item["values"] = np.sort(np.concatenate([old.get("values", []), new.get("values", [])])
                                 ).astype(np.float32)
    if "quantiles" in new:
        wo, wn = old["moments"].count, new["moments"].count
        # pooled quantile function (count-weighted average: an approximation)
        item["quantiles"] = (wo * np.asarray(old["quantiles"]) + wn * np.asarray(new["quantiles"])
                             ) / max(wo + wn, 1)
    if "expected_count" in new:
        item["expected_count"] = n * m.mean
    if "usable" in new:
        from nullatlas.lookup.inference.globaltests import usable_coordinates
        item["usable"] = usable_coordinates(m.mean, m.sd, m.skewness, n,
                                            "expected_count" in new).astype(np.int8)
    ao, an = old.get("audit", {}), new.get("audit", {})
    no, nn = int(ao.get("n", 0)), int(an.get("n", 0))
    audit = {"n": np.int64(no + nn)}
    for k in set(ao) | set(an):
        if k == "n":
            continue
        if k in _RATES and k in ao and k in an and no + nn > 0:
            audit[k] = (no * np.asarray(ao[k]) + nn * np.asarray(an[k])) / (no + nn)
        else:   # KS distances: those of the larger audit
            audit[k] = an[k] if (k in an and (nn >= no or k not in ao)) else ao[k]
    item["audit"] = audit
    return item


def _finish(out, dimension, root_seed, stat_names, records, n_fit, holdout, extra_attrs,
            before_write=None):
    """n_min, model, holdout; write the table. Returns the summary dict.

    ``before_write(summary)``, when given, is called with the summary before
    anything is written: whatever it raises leaves the table untouched (the
    command line renders its report there, so a report that cannot be made
    never follows a rewritten table).  The summary's ``model_missing`` is
    None, or why no finite-window model could be fitted.
    """
    kinds = {s: STATISTICS[s].kind for s in stat_names}
    records = sorted(records, key=lambda r: (r["shape"], r["n"]))
    nmin = n_min_table([{"shape": r["shape"], "n": r["n"],
                         "audit": {s: it.get("audit", {}) for s, it in r["stats"].items()}}
                        for r in records], kinds)
    models, holdouts, model_summary = {}, {}, {}
    why_not = []

    def cellrows(stat, recs):
        rows = []
        for r in recs:
            m = r["stats"][stat]["moments"]
            if m.count > 2:
                use = r["stats"][stat].get("usable")
                rows.append({"name": r["name"], "n": r["n"], "kappa": r["kappa"],
                             "mean": m.mean, "var": np.diag(m.cov), "count": m.count,
                             "shape": r["shape"],
                             "usable": None if use is None else np.asarray(use) > 0})
        return rows

    for stat in stat_names:
        if kinds[stat] == "extreme":
            continue
        rows = cellrows(stat, records)
        try:
            models[stat] = fit_model(rows, dimension, n_fit)
        except ValueError as exc:
            why_not.append(str(exc))
            continue
        f = models[stat]
        model_summary[stat] = {"chi2_per_dof_median": float(np.nanmedian(f.mean_chi2 / max(f.dof, 1))),
                               "cells": len(f.cells)}
        if stat == "nnmean":
            model_summary[stat].update({"mu": float(f.mean_coef[0, 0]), "mu_se": float(f.mean_se[0, 0]),
                                        "c": float(f.mean_coef[0, 1]), "c_se": float(f.mean_se[0, 1]),
                                        "e": float(f.mean_coef[0, 2]), "e_se": float(f.mean_se[0, 2]),
                                        "chi2": float(f.mean_chi2[0]), "dof": f.dof})
        if holdout:
            keep = [r for r in rows if r["shape"] != holdout]
            held = [r for r in rows if r["shape"] == holdout and r["n"] >= n_fit]
            if held and len(keep) >= 4:
                try:
                    hf = fit_model(keep, dimension, n_fit)
                except ValueError:
                    continue
                err = holdout_errors(hf, held, dimension)
                err_sd = holdout_sd_errors(hf, held, dimension)
                n_model = model_n_ok([r["n"] for r in held], err_sd)
                holdouts.setdefault(holdout, {})[stat] = (hf, err, [r["name"] for r in held],
                                                          {"errors_sd": err_sd, "n_model": n_model,
                                                           "model_tolerance_sd": MODEL_TOL_SD})
                fin = err[np.isfinite(err)]
                fsd = err_sd[np.isfinite(err_sd)]
                model_summary[stat]["holdout_" + holdout] = {
                    "rms_se": float(np.sqrt(np.mean(fin ** 2))) if fin.size else None,
                    "max_abs_se": float(np.max(np.abs(fin))) if fin.size else None,
                    "max_abs_sd": float(np.max(np.abs(fsd))) if fsd.size else None,
                    "n_model": None if n_model < 0 else int(n_model),
                    "points": int(fin.size)}
    geomodels = fit_geomodels(records, stat_names, dimension)
    for stat, g in geomodels.items():
        if not isinstance(g, dict):
            model_summary.setdefault(stat, {})["geomodel_chi2_per_dof_median"] = float(
                np.nanmedian(g.mean_chi2 / max(len(g.cells) - g.mean_coef.shape[1], 1)))
    attrs = {"stats": json.dumps(list(stat_names)), "model_n_fit": int(n_fit),
             "holdout": str(holdout or ""), "geomodel_n_fit": int(GEO_N_FIT)}
    attrs.update(extra_attrs or {})
    nmin_summary = {shape: {s: dict(zip(t, (int(x) if x >= 0 else None for x in v)))
                            for s, (t, v) in per.items()} for shape, per in nmin.items()}
    summary = {"table": os.fspath(out), "dimension": dimension, "root_seed": int(root_seed),
               "cells": len(records), "replicates": int(sum(r["replicates"] for r in records)),
               "n_min": nmin_summary, "model": model_summary,
               "labels": {r["shape"]: r["geometry"]["label"] for r in records
                          if isinstance(r.get("geometry"), dict) and r["geometry"].get("label")},
               "model_missing": None if models else (why_not[0] if why_not else
                                                     "no statistic could be fitted"),
               "note": ("the model route of this table is not validated (never trusted) until "
                        f"'nullatlas-calibrate validate {os.fspath(out)}' has run")}
    if before_write is not None:
        before_write(summary)
    write_table(out, dimension=dimension, root_seed=root_seed, grids=table_grids(), cells=records,
                nmin=nmin, models=models, holdouts=holdouts, attrs=attrs, geomodels=geomodels)
    return summary


#: Smallest n of the cells the geometric model is fitted on.
GEO_N_FIT = 100


def fit_geomodels(records: list, stat_names, dimension: int, n_fit: int = GEO_N_FIT,
                  fixed_limits: bool = True) -> dict:
    """The geometric finite-window model of every statistic (``calibrate.model``):
    additive statistics by :func:`fit_geomodel_robust`, extremes by
    :func:`fit_extreme_geomodel_robust`; statistics that cannot be fitted are left out.
    Where a statistic's CSR limit is known exactly (``calibrate.csrlimits``)
    it is held fixed, unless ``fixed_limits`` is False (for checking)."""
    from nullatlas.lookup.patterns.boundary import grid_depths

    out = {}
    for stat in stat_names:
        st = STATISTICS[stat]
        depth = grid_depths(st.grid, st.kind)
        covs = {}
        for r in records:
            if r.get("spec") and r["spec"] != "hull" and stat in r["stats"]:
                try:
                    if cell_boundary_share(r["spec"], r["n"]) > TRAIN_SHARE_MAX:
                        continue        # almost no interior: not fitted (calibrate.model)
                    if cell_is_periodic(r["spec"]):
                        continue        # periodic cells have their own route (nullmoments)
                    covs[r["name"]] = cell_covariates(r["spec"], r["n"], depth)
                except ValueError:      # a window this version cannot parse
                    continue
        rows = []
        for r in records:
            it = r["stats"].get(stat)
            if it is None or r["name"] not in covs:
                continue
            m = it["moments"]
            if m.count <= 2:
                continue
            rows.append({"name": r["name"], "shape": r["shape"], "n": r["n"],
                         "cov": covs[r["name"]], "mean": m.mean,
                         "var": np.diag(m.cov), "count": m.count, "values": it.get("values")})
        try:
            if STATISTICS[stat].kind == "extreme":
                out[stat] = fit_extreme_quantiles_robust(rows, dimension, n_fit)
                out[stat]["depth"] = depth
            else:
                known = csr_limit(stat, dimension) if fixed_limits else None
                out[stat], excl = fit_geomodel_robust(
                    rows, dimension, n_fit, limit=None if known is None else known[0],
                    limit_source="" if known is None else known[1])
                out[stat].excluded = list(excl)
                out[stat].depth = depth
        except ValueError:
            continue
    return out


def _plans(targets, ns, reps, dimension, first=None):
    plans = []
    for name, window in targets:
        if window.dim != dimension:
            raise OptionError(f"shape {name} is {window.dim}D, the table is {dimension}D")
        for n in ns:
            if n < 10:
                raise OptionError(f"--n values must be at least 10, got {n}")
            refuse_beyond("--n", int(n), MAX_N,
                          f"one pattern of {int(n):,} points needs about "
                          f"{size(pattern_bytes(n, dimension))} of memory and at least "
                          f"{duration(pattern_seconds(n, dimension))}")
            f = (first or {}).get((name, n), (0, chunk_size_for(n)))
            plans.append(CellPlan(dimension, name, int(n), window.spec(), float(window.kappa),
                                  int(reps), first_chunk=f[0], chunk_size=f[1]))
    return plans


def refuse_endless(plans: list[CellPlan], reps: int) -> None:
    """Refuse, before any work, a run that cannot finish (``lookup.limits``).

    Parameters
    ----------
    plans : list of CellPlan
        The cells of the run (their n are checked by ``_plans``).
    reps : int
        Replicates per cell asked for.

    Raises
    ------
    OptionError
        ``--reps`` beyond ``MAX_REPS``, or more than ``MAX_POINTS_TOTAL``
        points simulated in all, with the time it would take at least.
    """
    if not plans:
        return
    dim = plans[0].dimension
    secs = sum(p.reps * pattern_seconds(p.n, dim) for p in plans)
    refuse_beyond("--reps", int(reps), MAX_REPS,
                  f"{len(plans)} cell(s) of {int(reps):,} patterns take at least "
                  f"{duration(secs)} of one core")
    points = sum(p.reps * p.n for p in plans)
    refuse_beyond("--reps x --n (points simulated)", int(points), MAX_POINTS_TOTAL,
                  f"at least {duration(secs)} of one core")


@contextlib.contextmanager
def _chunks_kept(out):
    """A write that fails mid-run (a full disk) says that the finished chunks
    are kept and the same command resumes from them."""
    try:
        yield
    except WriteError as exc:
        raise WriteError(f"{exc}; the chunks simulated so far are kept in {_parts_dir(out)}: run "
                         "the same command again once it can be written") from None


def _simulate(out, plans, stat_names, root_seed, jobs, scheduler, progress, on_done):
    dim = plans[0].dimension
    ck = Checkpoints(_parts_dir(out), root_seed, stat_names)

    def on_cell(plan, data):
        rng = np.random.default_rng(chunk_seed(root_seed, dim, plan.shape, plan.n,
                                               _AUDIT_INDEX + plan.first_chunk))
        on_done(plan, asm.assemble_cell(plan.n, data, rng))

    res = run_chunks(plans, stat_names, root_seed, jobs=jobs, scheduler=scheduler,
                     checkpoints=ck, progress=progress, on_cell=on_cell)
    return ck, res["_seconds"]


def build_table(out, targets: list, ns: list, reps: int, *, stats=None,
                root_seed: int = DEFAULT_SEED, jobs: int = 1, scheduler: str | None = None,
                progress=None, n_fit: int = 200, holdout: str | None = None,
                keep_parts: bool = False, before_write=None, labels: dict | None = None) -> dict:
    """Simulate a new table.

    Parameters
    ----------
    out : str
        Output HDF5 file (written atomically; must not exist).
    targets : list of (shape name, unit-content window)
        From ``calibrate.shapes``.
    ns : list of int
    reps : int
        Replicates per cell.
    stats : list of str, optional
        Default ``plan.DEFAULT_STATS[d]``.
    holdout : str, optional
        Also fit the model without this shape and store its prediction errors.
    keep_parts : bool
        Keep the chunk checkpoints (``<out>.parts``) after writing the table.
    before_write : callable, optional
        Called with the summary before the table is written (see ``_finish``);
        if it raises, no table is written and the checkpoints are kept.
    labels : dict, optional
        Shape name -> readable name (e.g. the window file's name), stored in
        the cells' geometry and shown by ``nullatlas tables``.

    Returns
    -------
    dict summary (see the CLI's ``--json``).
    """
    if not targets:
        raise OptionError("give at least one --shape or --window")
    dims = {w.dim for _, w in targets}
    if len(dims) != 1:
        raise OptionError("all shapes of one table must have the same dimension")
    dim = dims.pop()
    if reps < 20:
        raise OptionError(f"--reps must be at least 20, got {reps}")
    if os.path.exists(out):
        raise OptionError(f"{out} exists; use 'nullatlas-calibrate extend' to add replicates "
                          "or remove it")
    folder = os.path.dirname(os.path.abspath(out))
    if not os.path.isdir(folder):
        raise OptionError(f"{out}: the folder {folder} does not exist")
    check_writable(out)
    stat_names = [s.name for s in resolve_stats(stats or DEFAULT_STATS[dim], dim)]
    plans = _plans(targets, sorted(set(int(n) for n in ns)), reps, dim)
    refuse_endless(plans, reps)
    desc = _descriptions(targets, labels)
    records = []
    t0 = time.perf_counter()

    def done(plan, assembled):
        records.append(_cell_record(plan, desc[plan.shape], _assembled_stats(assembled), plan.reps,
                                    len(plan.chunks())))

    with _chunks_kept(out):
        ck, secs = _simulate(out, plans, stat_names, root_seed, jobs, scheduler, progress, done)
        summary = _finish(out, dim, root_seed, stat_names, records, n_fit, holdout,
                          {"simulation_seconds": float(secs)}, before_write)
    if not keep_parts:
        ck.remove()
    summary["seconds"] = time.perf_counter() - t0
    summary["simulation_seconds"] = secs
    return summary


def _descriptions(targets, labels=None) -> dict:
    """Shape name -> stored geometry, with the readable label where given."""
    desc = {name: w.describe() for name, w in targets}
    for name, label in (labels or {}).items():
        if name in desc and label:
            desc[name]["label"] = str(label)
    return desc


def _load_records(path):
    info = open_table(path)
    records = []
    for c in info.cells:
        raw = load_cell(path, c.name)
        a = raw.get("attrs", {})
        records.append({"name": c.name, "shape": c.shape, "n": c.n, "replicates": c.replicates,
                        "kappa": c.kappa, "geometry": json.loads(a.get("geometry", "{}")),
                        "spec": c.spec, "chunk_size": c.chunk_size, "chunks": c.chunks,
                        "stats": _stored_stats(raw)})
    stats = json.loads(info.attrs.get("stats", "[]")) or \
        sorted({s for c in info.cells for s in c.stats})
    return info, records, stats


def extend_table(path, reps: int, *, targets: list | None = None, ns: list | None = None,
                 jobs: int = 1, scheduler: str | None = None, progress=None,
                 n_fit: int | None = None, holdout: str | None = None,
                 keep_parts: bool = False, before_write=None, labels: dict | None = None) -> dict:
    """Add ``reps`` replicates to every cell (or to the cells of ``targets`` x
    ``ns``, creating missing ones) and rewrite the table atomically
    (``before_write`` as in :func:`build_table`)."""
    if reps < 20:
        raise OptionError(f"--reps must be at least 20, got {reps}")
    info, records, stat_names = _load_records(path)
    dim = info.dimension
    by = {(r["shape"], r["n"]): r for r in records}
    if targets is None:
        from nullatlas.lookup.patterns.windows import parse_window
        groups = {}
        for r in records:
            groups.setdefault(r["shape"], (parse_window(r["spec"]), []))[1].append(r["n"])
        plans = []
        for shape, (w, nlist) in groups.items():
            first = {(shape, n): (by[(shape, n)]["chunks"], by[(shape, n)]["chunk_size"]) for n in nlist}
            plans += _plans([(shape, w)], nlist, reps, dim, first)
    else:
        ns = ns or sorted({r["n"] for r in records})
        first = {k: (r["chunks"], r["chunk_size"]) for k, r in by.items()}
        plans = _plans(targets, sorted(set(int(n) for n in ns)), reps, dim, first)
    refuse_endless(plans, reps)
    desc = _descriptions(targets, labels) if targets else {}
    t0 = time.perf_counter()

    def done(plan, assembled):
        new = _assembled_stats(assembled)
        key = (plan.shape, plan.n)
        if key in by:
            r = by[key]
            r["stats"] = {s: _merge_item(r["stats"][s], new[s], plan.n) if s in r["stats"] else new[s]
                          for s in new}
            r["replicates"] += plan.reps
            r["chunks"] = plan.first_chunk + len(plan.chunks())
        else:
            rec = _cell_record(plan, desc.get(plan.shape, {}), new, plan.reps, len(plan.chunks()))
            records.append(rec)
            by[key] = rec

    with _chunks_kept(path):
        ck, secs = _simulate(path, plans, stat_names, info.root_seed, jobs, scheduler, progress,
                             done)
        summary = _finish(path, dim, info.root_seed, stat_names, records,
                          n_fit if n_fit is not None else int(info.attrs.get("model_n_fit", 200)),
                          holdout if holdout is not None else (info.attrs.get("holdout") or None),
                          {"simulation_seconds": float(info.attrs.get("simulation_seconds", 0.0))
                           + secs}, before_write)
    if not keep_parts:
        ck.remove()
    summary["seconds"] = time.perf_counter() - t0
    summary["simulation_seconds"] = secs
    return summary


def refit_table(path, *, n_fit: int | None = None, holdout: str | None = None,
                before_write=None) -> dict:
    """Recompute n_min and the finite-window model of a table (no simulation).

    Raises
    ------
    OptionError
        No finite-window model can be fitted (the reason, e.g. too few
        cells); the table is left untouched.
    """
    info, records, stat_names = _load_records(path)
    if holdout and holdout not in {r["shape"] for r in records}:
        raise OptionError(f"--holdout {holdout}: the table has no such shape "
                          f"(it has {', '.join(info.shapes())})")
    extra = {k: info.attrs[k] for k in ("simulation_seconds",) if k in info.attrs}

    def check(summary):
        if summary["model_missing"]:
            raise OptionError(f"{path}: no finite-window model can be fitted: "
                              f"{summary['model_missing']} (nothing was changed)")
        if before_write is not None:
            before_write(summary)

    return _finish(path, info.dimension, info.root_seed, stat_names, records,
                   n_fit if n_fit is not None else int(info.attrs.get("model_n_fit", 200)),
                   holdout if holdout is not None else (info.attrs.get("holdout") or None), extra,
                   check)


def refit_geomodel(path) -> dict:
    """Refit the geometric model of a table from its stored cells (no
    simulation) and rewrite the table atomically; returns the fits."""
    from .tablewriter import update_table

    info, records, stat_names = _load_records(path)
    geo = fit_geomodels(records, stat_names, info.dimension)
    update_table(path, geomodels=geo)
    return geo
