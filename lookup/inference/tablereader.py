"""Reading null tables (HDF5): schema check, metadata and coverage.

Layout, schema version 2 (written by ``calibrate.tablewriter``; version 1,
the same without ``/geomodel``, ``/validation`` and ``/trust``, is still
read -- its model route is then never trusted, see ``lookup.asymptotic``):

    /                    attrs: schema = "nullatlas-null-table", schema_version,
                                created (ISO 8601 UTC), software (JSON: versions),
                                dimension, root_seed
    /grids/<name>        the summary grids (datasets)
    /cells/<cell>        one cell (d, shape, n); attrs: dimension, shape, n,
                         replicates, kappa, geometry (JSON, normalised to unit
                         area/volume)
    /cells/<cell>/<stat>/{mean, m2, m3}
                         streaming moments of the statistic (``calibrate.moments``);
                         attrs count, kind, nonfinite (replicates where it was not
                         finite), usable (curves)
    /cells/<cell>/<stat>/values          sorted null values (extreme statistics)
    /cells/<cell>/<stat>/quantiles       quantiles at /grids/quantile_levels (scalars)
    /cells/<cell>/<stat>/expected_count  n E[beta_q(rho)] (Betti curves)
    /cells/<cell>/<stat>/audit           cross-fitted audit (``calibrate.assemble``):
                                         small arrays as attributes, pointwise rates
                                         as datasets
    /nmin/<shape>/<stat>                 n_min per test (attrs tests: JSON list);
                                         -1: no calibrated n is large enough
    /model/<stat>/*                      finite-window model (``calibrate.model``)
    /holdout/<shape>/<stat>/*            the model refitted without that shape, with
                                         the held-out cells' prediction errors
    /geomodel/<stat>/*                   geometric finite-window model (``calibrate.model``,
                                         covariates of ``lookup.patterns.boundary``): mean_coef,
                                         var_coef (k, 4); extremes: x, coef (len(x), 3)
    /validation                          attrs rows: JSON list of the scores of the
                                         held-out windows (``calibrate.validate``)
    /trust/<stat>                        attrs per test: JSON {boundary_share_max,
                                         narrow_share_max, n_lo, n_hi, cells, passed}:
                                         where the model route was measured to hold

Only plain numeric datasets and string attributes are read: opening a table
never executes anything.  Anything else -- not HDF5, truncated, another
schema or version, the wrong dimension -- is a :class:`TableError` with one
line saying what is wrong.
"""
from __future__ import annotations

import json
import os
from dataclasses import dataclass, field

import numpy as np

from ..errors import TableError

__all__ = ["SCHEMA", "SCHEMA_VERSION", "READABLE_VERSIONS", "TableInfo", "CellInfo", "open_table",
           "open_table_cached", "check_stat_group", "load_cell", "load_model", "load_holdout",
           "shipped_tables", "read_m2", "unpack_symmetric"]

SCHEMA = "nullatlas-null-table"
SCHEMA_VERSION = 2
#: Schema versions this reader understands.
READABLE_VERSIONS = (1, 2)


@dataclass(frozen=True)
class CellInfo:
    """One calibrated cell: dimension, window shape, n, replicates, statistics."""

    name: str
    dimension: int
    shape: str
    n: int
    replicates: int
    kappa: float
    stats: tuple
    spec: str = ""
    chunk_size: int = 0
    chunks: int = 0
    label: str = ""     # readable name of a user's window (its file name), "" if none


def _label(g) -> str:
    """The readable name stored in a cell's geometry (``build --window FILE``)."""
    try:
        geo = json.loads(g.attrs.get("geometry", "{}"))
    except (TypeError, ValueError):
        return ""
    return str(geo.get("label", "")) if isinstance(geo, dict) else ""


@dataclass
class TableInfo:
    """Metadata and coverage of a null table."""

    path: str
    schema_version: int
    created: str
    dimension: int
    root_seed: int
    software: dict
    grids: dict
    cells: list = field(default_factory=list)
    nmin: dict = field(default_factory=dict)
    attrs: dict = field(default_factory=dict)
    models: tuple = ()
    geomodels: tuple = ()
    trust: dict = field(default_factory=dict)

    def coverage(self) -> list[dict]:
        """One dict per cell (for listings and ``--json``)."""
        return [{"cell": c.name, "dimension": c.dimension, "shape": c.shape, "n": c.n,
                 "replicates": c.replicates, "kappa": c.kappa, "statistics": list(c.stats)}
                for c in self.cells]

    def shapes(self) -> list[str]:
        """Calibrated shapes, in order of appearance."""
        return list(dict.fromkeys(c.shape for c in self.cells))

    def n_min(self, shape: str, stat: str) -> dict:
        """Test name -> n_min (None: no calibrated n is large enough)."""
        per = self.nmin.get(shape, {}).get(stat)
        if per is None:
            return {}
        return {k: (None if v < 0 else int(v)) for k, v in per.items()}


def _attr(obj, name, where):
    if name not in obj.attrs:
        raise TableError(f"{where} lacks the attribute '{name}'")
    v = obj.attrs[name]
    return v.decode() if isinstance(v, bytes) else v


def open_table(path, dimension: int | None = None, check_stats: bool = True) -> TableInfo:
    """Open and check a null table; read its metadata and coverage.

    Parameters
    ----------
    path : str
    dimension : int, optional
        Refuse the table unless it is for this dimension.
    check_stats : bool
        Check that every statistic of every cell has its moments (count,
        mean, m2, m3).  The runtime passes False and checks the one
        statistic of a cell when it reads it (:func:`check_stat_group`):
        opening a table then reads only attributes, not the ~1,000 groups.

    Raises
    ------
    TableError
        Missing or unreadable file, not HDF5, truncated, unknown schema or
        version, inconsistent contents, or another dimension.
    """
    import h5py

    path = os.fspath(path)
    if not os.path.exists(path):
        raise TableError(f"{path}: no such table file")
    try:
        fh = h5py.File(path, "r")
    except OSError as exc:
        raise TableError(f"{path}: not a readable HDF5 file ({str(exc).split(';')[0]})") from None
    try:
        with fh:
            schema = fh.attrs.get("schema")
            schema = schema.decode() if isinstance(schema, bytes) else schema
            if schema != SCHEMA:
                raise TableError(f"{path}: not a nullatlas null table (schema {schema!r})")
            version = int(_attr(fh, "schema_version", path))
            if version not in READABLE_VERSIONS:
                raise TableError(f"{path}: table schema version {version} is not supported "
                                 f"(this nullatlas reads versions "
                                 f"{', '.join(map(str, READABLE_VERSIONS))})")
            dim = int(_attr(fh, "dimension", path))
            if dimension is not None and dim != dimension:
                raise TableError(f"{path}: the table is for {dim}D patterns, the data are {dimension}D")
            info = TableInfo(path=path, schema_version=version,
                             created=str(_attr(fh, "created", path)), dimension=dim,
                             root_seed=int(_attr(fh, "root_seed", path)),
                             software=json.loads(_attr(fh, "software", path)),
                             grids={k: np.asarray(v[()], dtype=float)
                                    for k, v in fh.get("grids", {}).items()})
            for name, g in fh.get("cells", {}).items():
                where = f"{path}: cell {name}"
                stats = tuple(sorted(g.keys()))
                if check_stats:
                    for s in stats:
                        check_stat_group(g[s], where, s)
                info.cells.append(CellInfo(
                    name=name, dimension=int(_attr(g, "dimension", where)),
                    shape=str(_attr(g, "shape", where)), n=int(_attr(g, "n", where)),
                    replicates=int(_attr(g, "replicates", where)),
                    kappa=float(_attr(g, "kappa", where)), stats=stats,
                    spec=str(g.attrs.get("spec", "")), chunk_size=int(g.attrs.get("chunk_size", 0)),
                    chunks=int(g.attrs.get("chunks", 0)), label=_label(g)))
            for shape, sg in fh.get("nmin", {}).items():
                info.nmin[shape] = {}
                for sname, ds in sg.items():
                    tests = json.loads(_attr(ds, "tests", f"{path}: nmin/{shape}/{sname}"))
                    vals = np.asarray(ds[()], dtype=np.int64)
                    if len(vals) != len(tests):
                        raise TableError(f"{path}: nmin/{shape}/{sname} does not match its tests")
                    info.nmin[shape][sname] = dict(zip(tests, vals.tolist()))
            info.models = tuple(sorted(fh.get("model", {}).keys()))
            info.geomodels = tuple(sorted(fh.get("geomodel", {}).keys()))
            for sname, tg in fh.get("trust", {}).items():
                info.trust[sname] = {k: json.loads(v.decode() if isinstance(v, bytes) else v)
                                     for k, v in tg.attrs.items()}
            info.attrs = {k: (v.decode() if isinstance(v, bytes) else v) for k, v in fh.attrs.items()
                          if k not in ("schema", "software")}
    except TableError:
        raise
    except (OSError, KeyError, ValueError, TypeError) as exc:
        raise TableError(f"{path}: damaged table ({type(exc).__name__}: {exc})") from None
    return info


#: Version of the metadata kept by :func:`open_table_cached` (bump when TableInfo changes).
_META_VERSION = 1


def _native(v):
    if isinstance(v, np.generic):
        return v.item()
    if isinstance(v, np.ndarray):
        return v.tolist()
    return v


def open_table_cached(path) -> TableInfo:
    """:func:`open_table` (``check_stats=False``) for the runtime, with the
    metadata kept as JSON in the cache folder under the file's identity
    (real path, size, modification time, inode): a later process reads one
    small file instead of some 500 HDF5 attributes.  Any change of the file
    changes the key; a cache that cannot be read or written is skipped."""
    import hashlib

    from ..persistence.jit import cache_root

    path = os.fspath(path)
    try:
        st = os.stat(path)
    except OSError:
        return open_table(path, check_stats=False)    # its one-line TableError
    ident = f"{os.path.realpath(path)}|{st.st_size}|{st.st_mtime_ns}|{st.st_ino}|{_META_VERSION}"
    cpath = os.path.join(cache_root(), "tables", hashlib.sha256(ident.encode()).hexdigest()[:32]
                         + ".json")
    try:
        with open(cpath) as fh:
            d = json.load(fh)
        info = TableInfo(path=path, schema_version=d["schema_version"], created=d["created"],
                         dimension=d["dimension"], root_seed=d["root_seed"], software=d["software"],
                         grids={k: np.asarray(v, dtype=float) for k, v in d["grids"].items()},
                         cells=[CellInfo(**{**c, "stats": tuple(c["stats"])}) for c in d["cells"]],
                         nmin=d["nmin"], attrs=d["attrs"], models=tuple(d["models"]),
                         geomodels=tuple(d["geomodels"]), trust=d["trust"])
        return info
    except (OSError, ValueError, KeyError, TypeError):
        pass
    info = open_table(path, check_stats=False)
    d = {"schema_version": info.schema_version, "created": info.created,
         "dimension": info.dimension, "root_seed": info.root_seed, "software": info.software,
         "grids": {k: v.tolist() for k, v in info.grids.items()},
         "cells": [dict(vars(c), stats=list(c.stats)) for c in info.cells], "nmin": info.nmin,
         "attrs": {k: _native(v) for k, v in info.attrs.items()}, "models": list(info.models),
         "geomodels": list(info.geomodels), "trust": info.trust}
    try:                      # best effort, atomic: never a half-written file
        os.makedirs(os.path.dirname(cpath), exist_ok=True)
        tmp = f"{cpath}.{os.getpid()}.tmp"
        with open(tmp, "w") as fh:
            json.dump(d, fh)
        os.replace(tmp, cpath)
    except (OSError, TypeError, ValueError):
        pass
    return info


def check_stat_group(g, where: str, stat: str) -> None:
    """Raise a :class:`TableError` unless the h5py group ``g`` of ``stat`` has its moments."""
    for part in ("count", "mean", "m2", "m3"):
        if part not in g and part not in g.attrs:
            raise TableError(f"{where}: statistic {stat} lacks '{part}'")


def unpack_symmetric(packed, k: int) -> np.ndarray:
    """Symmetric (k, k) matrix from its row-major upper triangle."""
    out = np.zeros((k, k))
    iu = np.triu_indices(k)
    out[iu] = np.asarray(packed, dtype=float)
    out.T[iu] = out[iu]
    return out


def read_m2(ds) -> np.ndarray:
    """The scatter matrix of an h5py dataset ``m2`` (packed or full)."""
    v = np.asarray(ds[()])
    k = ds.attrs.get("packed_upper")
    return unpack_symmetric(v, int(k)) if k is not None else v.astype(float)


def shipped_tables() -> dict:
    """Paths of the tables shipped with nullatlas: dimension -> path (those present).

    The environment variable ``NULLATLAS_TABLES`` names a folder holding
    ``null2d.h5``/``null3d.h5`` to use instead (e.g. a site's extended tables)."""
    from importlib import resources

    out = {}
    folder = os.environ.get("NULLATLAS_TABLES")
    if folder:
        for d in (2, 3):
            p = os.path.join(folder, f"null{d}d.h5")
            if os.path.isfile(p):
                out[d] = p
        return out
    try:
        base = resources.files("nullatlas.tables")
    except ModuleNotFoundError:  # pragma: no cover - broken install
        return out
    for d in (2, 3):
        p = base / f"null{d}d.h5"
        if p.is_file():
            out[d] = os.fspath(p)
    return out


def _read_group(g) -> dict:
    import h5py

    out = {}
    for k, v in g.items():
        if isinstance(v, h5py.Group):
            out[k] = _read_group(v)
        elif k == "m2":
            out[k] = read_m2(v)
        else:
            out[k] = np.asarray(v[()])
    for k, v in g.attrs.items():
        out.setdefault("attrs", {})[k] = v.decode() if isinstance(v, bytes) else v
    return out


def _read(path, where: str) -> dict:
    import h5py

    try:
        with h5py.File(os.fspath(path), "r") as fh:
            if where not in fh:
                raise TableError(f"{path}: the table has no '{where}'")
            return _read_group(fh[where])
    except TableError:
        raise
    except (OSError, KeyError, ValueError, TypeError) as exc:
        raise TableError(f"{path}: damaged table ({type(exc).__name__}: {exc})") from None


def load_cell(path, name: str) -> dict:
    """All stored arrays of one cell: ``{stat: {count, mean, m2, m3, ..., audit: {...},
    attrs: {...}}, "attrs": {...}}`` (plain numpy arrays; call :func:`open_table` first)."""
    raw = _read(path, f"cells/{name}")
    for s, d in raw.items():
        if s == "attrs" or not isinstance(d, dict):
            continue
        a = d.get("attrs", {})
        for k in ("count", "usable"):
            if k not in d and k in a:
                d[k] = np.asarray(a[k])
        if isinstance(d.get("audit"), dict):
            au = d["audit"]
            for k, v in au.pop("attrs", {}).items():
                au.setdefault(k, np.asarray(v))
    return raw


def load_model(path) -> dict:
    """The finite-window model: ``{stat: {mean_coef, mean_se, ..., attrs}}``."""
    return _read(path, "model")


def load_holdout(path) -> dict:
    """The held-out refits: ``{shape: {stat: {..., errors, attrs}}}``."""
    return _read(path, "holdout")
