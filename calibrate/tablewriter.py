"""Writing null tables (HDF5, schema of ``lookup.inference.tablereader``), atomically.

The file is written under a temporary name in the target folder and renamed
over the target only when complete (``lookup.atomic.atomic_path``): a killed
run never leaves a half-written table.  Only numeric datasets and string
attributes are stored -- no pickles.
"""
from __future__ import annotations

import json
from datetime import datetime, timezone

import numpy as np

from nullatlas.lookup.atomic import atomic_path
from nullatlas.lookup.inference.tablereader import SCHEMA, SCHEMA_VERSION

from .moments import Moments

__all__ = ["software_versions", "write_table", "write_geomodels", "write_validation",
           "update_table"]


def software_versions() -> dict:
    """Versions of nullatlas and the libraries a table's numbers depend on."""
    from importlib.metadata import PackageNotFoundError, version

    out = {}
    for name in ("nullatlas", "numpy", "scipy", "numba", "gudhi", "h5py"):
        try:
            out[name] = version(name)
        except PackageNotFoundError:
            out[name] = "unknown"
    return out


def _put(group, name, arr, compress=False):
    arr = np.asarray(arr)
    if compress and arr.size > 16:
        group.create_dataset(name, data=arr, compression="gzip", compression_opts=6, shuffle=True)
    else:
        group.create_dataset(name, data=arr)


def _write_stat(g, sname, item):
    sg = g.create_group(sname)
    if isinstance(item, Moments):
        item = {"moments": item}
    m = item.get("moments") if isinstance(item, dict) else None
    if not isinstance(m, Moments):
        raise TypeError(f"statistic {sname}: expected Moments")
    arrays = m.as_arrays()
    sg.attrs["count"] = np.int64(arrays["count"])
    for part in ("mean", "m2", "m3"):
        arr = arrays[part]
        if part == "m2" and np.ndim(arr) == 2 and arr.shape[0] > 1:
            # scatter matrices of curves: the upper triangle (row-major, see
            # lookup.inference.tablereader.unpack_symmetric) in float32 -- ample for a
            # covariance and a quarter of the full float64 matrix
            k = arr.shape[0]
            _put(sg, part, np.asarray(arr[np.triu_indices(k)], dtype=np.float32), compress=True)
            sg[part].attrs["packed_upper"] = np.int64(k)
        else:
            _put(sg, part, arr)
    if "kind" in item:
        sg.attrs["kind"] = str(item["kind"])
    sg.attrs["nonfinite"] = int(item.get("nonfinite", 0))
    for key in ("values", "quantiles", "expected_count"):
        if key in item:
            _put(sg, key, item[key], compress=True)
    if "usable" in item:
        sg.attrs["usable"] = np.asarray(item["usable"], dtype=np.int8)
    if "audit" in item:
        # small audit arrays are attributes of the audit group (an HDF5
        # dataset costs about a kilobyte of headers); pointwise rates are
        # datasets
        ag = sg.create_group("audit")
        for k, v in item["audit"].items():
            v = np.asarray(v)
            if v.size <= 8:
                ag.attrs[k] = v
            else:
                _put(ag, k, v.astype(np.float32), compress=True)


def _write_fit(g, fit, extra=None):
    for k in ("mean_coef", "mean_se", "mean_cov", "mean_chi2", "var_coef", "var_se", "var_cov",
              "var_chi2", "mean_resid", "var_resid"):
        _put(g, k, getattr(fit, k), compress=True)
    g.attrs["cells"] = json.dumps(list(fit.cells))
    g.attrs["n_fit"] = int(fit.n_fit)
    g.attrs["dof"] = int(fit.dof)
    for k, v in (extra or {}).items():
        if isinstance(v, (str, int, float, np.integer, np.floating)):
            g.attrs[k] = v
        else:
            _put(g, k, v)


def write_geomodels(fh, geomodels: dict) -> None:
    """The ``/geomodel`` group of an open table (replaced if present)."""
    if "geomodel" in fh:
        del fh["geomodel"]
    gg = fh.create_group("geomodel")
    for sname, fit in geomodels.items():
        g = gg.create_group(sname)
        if isinstance(fit, dict) and "qcoef" in fit:
            _put(g, "p", np.asarray(fit["p"], float))
            _put(g, "qcoef", np.asarray(fit["qcoef"], float))
            _put(g, "depth", np.asarray(fit.get("depth", [2.0]), float))
            g.attrs["kind"] = "extreme"
            g.attrs["model"] = "quantile"
            g.attrs["columns"] = json.dumps(list(fit["columns"]))
            g.attrs["excluded_shapes"] = json.dumps(list(fit.get("excluded", [])))
        elif isinstance(fit, dict):
            _put(g, "x", np.asarray(fit["x"], float))
            _put(g, "coef", np.asarray(fit["coef"], float))
            g.attrs["kind"] = "extreme"
            g.attrs["excluded_shapes"] = json.dumps(list(fit.get("excluded", [])))
        else:
            _write_fit(g, fit)
            g.attrs["kind"] = "additive"
            g.attrs["excluded_shapes"] = json.dumps(list(getattr(fit, "excluded", [])))
            g.attrs["model"] = str(getattr(fit, "model", ""))
            g.attrs["loso_error_sd"] = json.dumps(getattr(fit, "loso", {}))
            # the published source of a limit held fixed in the fit ("" = fitted)
            g.attrs["limit"] = str(getattr(fit, "limit_source", ""))
            if getattr(fit, "depth", None) is not None:
                _put(g, "depth", np.asarray(fit.depth, float))


def write_validation(fh, validation: dict) -> None:
    """The ``/validation`` and ``/trust`` groups of an open table (replaced)."""
    for name in ("validation", "trust"):
        if name in fh:
            del fh[name]
    vg = fh.create_group("validation")
    vg.attrs["rows"] = json.dumps(validation.get("rows", []))
    for k, v in validation.get("attrs", {}).items():
        vg.attrs[k] = v
    tg = fh.create_group("trust")
    for sname, per in validation.get("trust", {}).items():
        g = tg.create_group(sname)
        for test, rng in per.items():
            g.attrs[test] = json.dumps(rng)


def update_table(path, geomodels: dict | None = None, validation: dict | None = None) -> None:
    """Replace the geometric model and/or validation groups of a table,
    atomically (a copy is changed and renamed over the original); the schema
    version becomes the current one."""
    import h5py

    with atomic_path(path) as tmp:
        # copy object by object into a fresh file (HDF5 does not reclaim the
        # space of deleted groups), replacing the groups being updated
        replace = ({"geomodel"} if geomodels is not None else set()) | \
            ({"validation", "trust"} if validation is not None else set())
        with h5py.File(path, "r") as src, h5py.File(tmp, "w", libver=("v110", "latest")) as fh:
            for k, v in src.attrs.items():
                fh.attrs[k] = v
            for name in src:
                if name not in replace:
                    src.copy(src[name], fh, name)
            fh.attrs["schema_version"] = SCHEMA_VERSION
            if geomodels is not None:
                write_geomodels(fh, geomodels)
            if validation is not None:
                write_validation(fh, validation)


def write_table(path, *, dimension: int, root_seed: int, grids: dict, cells: list,
                nmin: dict | None = None, models: dict | None = None,
                holdouts: dict | None = None, attrs: dict | None = None,
                geomodels: dict | None = None, validation: dict | None = None) -> None:
    """Write a null table.

    Parameters
    ----------
    path : str
    dimension : int
    root_seed : int
        Entropy of the root ``SeedSequence`` of the simulations.
    grids : dict name -> 1D or 2D array
    cells : list of dict
        Each with ``name``, ``shape``, ``n``, ``replicates``, ``kappa``,
        ``geometry`` (JSON-serialisable), optionally ``spec``, ``chunk_size``
        and ``chunks``, and ``stats``: name -> Moments, or a dict with
        ``moments`` and optionally ``kind``, ``nonfinite``, ``values``,
        ``quantiles``, ``expected_count`` and ``audit`` (dict of arrays).
    nmin : dict shape -> stat -> (tests list, int array), optional
    models : dict stat -> calibrate.model.Fit, optional
    holdouts : dict shape -> stat -> (Fit, errors array, held-out cell names)
    attrs : dict, optional
        Extra root attributes (strings or numbers).
    geomodels : dict stat -> Fit (additive statistics) or dict with ``x`` and
        ``coef`` (extremes), optional
        The geometric finite-window model (``calibrate.model.fit_geomodel``).
    validation : dict, optional
        ``{"rows": [...], "trust": {stat: {test: {...}}}}`` from
        ``calibrate.validate`` (scores on held-out windows, validated ranges).
    """
    import h5py

    with atomic_path(path) as tmp:
        with h5py.File(tmp, "w", libver=("v110", "latest")) as fh:
            fh.attrs["schema"] = SCHEMA
            fh.attrs["schema_version"] = SCHEMA_VERSION
            fh.attrs["created"] = datetime.now(timezone.utc).isoformat(timespec="seconds")
            fh.attrs["software"] = json.dumps(software_versions())
            fh.attrs["dimension"] = int(dimension)
            fh.attrs["root_seed"] = int(root_seed)
            for k, v in (attrs or {}).items():
                fh.attrs[k] = v
            gg = fh.create_group("grids")
            for k, v in grids.items():
                gg.create_dataset(k, data=np.asarray(v, dtype=float))
            cg = fh.create_group("cells")
            for c in cells:
                g = cg.create_group(c["name"])
                g.attrs["dimension"] = int(dimension)
                g.attrs["shape"] = str(c["shape"])
                g.attrs["n"] = int(c["n"])
                g.attrs["replicates"] = int(c["replicates"])
                g.attrs["kappa"] = float(c["kappa"])
                g.attrs["geometry"] = json.dumps(c.get("geometry", {}))
                for key in ("spec",):
                    if key in c:
                        g.attrs[key] = str(c[key])
                for key in ("chunk_size", "chunks"):
                    if key in c:
                        g.attrs[key] = int(c[key])
                for sname, item in c["stats"].items():
                    _write_stat(g, sname, item)
            if nmin:
                ng = fh.create_group("nmin")
                for shape, per in nmin.items():
                    sg = ng.create_group(shape)
                    for sname, (tests, vals) in per.items():
                        ds = sg.create_dataset(sname, data=np.asarray(vals, dtype=np.int64))
                        ds.attrs["tests"] = json.dumps(list(tests))
            if models:
                mg = fh.create_group("model")
                for sname, fit in models.items():
                    _write_fit(mg.create_group(sname), fit)
            if geomodels:
                write_geomodels(fh, geomodels)
            if validation:
                write_validation(fh, validation)
            if holdouts:
                hg = fh.create_group("holdout")
                for shape, per in holdouts.items():
                    sg = hg.create_group(shape)
                    for sname, (fit, errors, names, *more) in per.items():
                        extra = {"errors": errors, "heldout_cells": json.dumps(list(names))}
                        for k, v in (more[0] if more else {}).items():
                            extra[k] = v
                        _write_fit(sg.create_group(sname), fit, extra)
