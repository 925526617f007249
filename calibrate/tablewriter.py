"""Writing null tables (HDF5, schema of ``lookup.tablereader``), atomically.

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
from nullatlas.lookup.tablereader import SCHEMA, SCHEMA_VERSION

from .moments import Moments

__all__ = ["software_versions", "write_table"]


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


def write_table(path, *, dimension: int, root_seed: int, grids: dict, cells: list) -> None:
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
        ``geometry`` (JSON-serialisable) and ``stats`` (name -> Moments).
    """
    import h5py

    with atomic_path(path) as tmp:
        with h5py.File(tmp, "w") as fh:
            fh.attrs["schema"] = SCHEMA
            fh.attrs["schema_version"] = SCHEMA_VERSION
            fh.attrs["created"] = datetime.now(timezone.utc).isoformat(timespec="seconds")
            fh.attrs["software"] = json.dumps(software_versions())
            fh.attrs["dimension"] = int(dimension)
            fh.attrs["root_seed"] = int(root_seed)
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
                for sname, m in c["stats"].items():
                    if not isinstance(m, Moments):
                        raise TypeError(f"statistic {sname}: expected Moments")
                    sg = g.create_group(sname)
                    for part, arr in m.as_arrays().items():
                        sg.create_dataset(part, data=arr)
