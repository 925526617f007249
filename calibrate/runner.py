"""Running the chunks of a calibration: simulation, checkpoints, parallelism.

Each chunk simulates its replicates with exactly the runtime code of
``lookup`` (``processes.csr.csr`` and ``statistics.compute`` with the fast engine)
and returns the summary vectors.  The parent process writes every finished
chunk to a checkpoint file (HDF5, written atomically) in a folder beside the
output; a killed run started again with the same arguments loads the
finished chunks and simulates only the rest.  Chunks run in this process
(``jobs=1``), on joblib's loky processes (``jobs>1``) or on a
``dask.distributed`` cluster through joblib's Dask backend; chunk results
are keyed by (cell, chunk index), so the order in which they finish does not
matter.
"""
from __future__ import annotations

import json
import os
import time

import numpy as np

from nullatlas.lookup.atomic import atomic_path, write_error
from nullatlas.lookup.errors import OptionError
from nullatlas.lookup.patterns.windows import parse_window
from nullatlas.lookup.summaries.statistics import resolve_stats

from .plan import CellPlan, chunk_seed

__all__ = ["simulate_chunk", "Checkpoints", "run_chunks"]


def simulate_chunk(spec: str, n: int, stat_names: list, root_seed: int, dimension: int,
                   shape: str, index: int, count: int, engine: str = "fast") -> dict:
    """Summary vectors of the ``count`` replicates of one chunk.

    Returns
    -------
    dict stat name -> float64 array of shape (count, k)
    """
    from nullatlas.lookup.inference.montecarlo import _chunk

    window = parse_window(spec)
    stats = resolve_stats(list(stat_names), dimension)
    seeds = chunk_seed(root_seed, dimension, shape, n, index).spawn(int(count))
    # the Monte Carlo route's replicate loop, so tables match the runtime exactly
    out = _chunk(window, n, stats, seeds, engine)
    return {k: np.asarray(v, float).reshape(int(count), -1) for k, v in out.items()}


class Checkpoints:
    """Folder of finished chunks of one run (``<output>.parts``)."""

    def __init__(self, folder: str, root_seed: int, stat_names: list):
        self.folder = folder
        self.root_seed = int(root_seed)
        self.stat_names = list(stat_names)

    def _path(self, cell: str, index: int) -> str:
        return os.path.join(self.folder, f"{cell}.c{int(index):06d}.h5")

    def save(self, plan: CellPlan, index: int, count: int, data: dict) -> None:
        import h5py

        try:
            os.makedirs(self.folder, exist_ok=True)
        except OSError as exc:
            raise write_error(self.folder, exc) from None
        with atomic_path(self._path(plan.name, index)) as tmp:
            with h5py.File(tmp, "w") as fh:
                fh.attrs["cell"] = plan.name
                fh.attrs["spec"] = plan.spec
                fh.attrs["index"] = int(index)
                fh.attrs["count"] = int(count)
                fh.attrs["root_seed"] = self.root_seed
                fh.attrs["stats"] = json.dumps(self.stat_names)
                for k, v in data.items():
                    fh.create_dataset(k, data=v)

    def load(self, plan: CellPlan, index: int, count: int):
        """The chunk's data, or None if it is not checkpointed.

        Raises OptionError if the file belongs to another run."""
        import h5py

        path = self._path(plan.name, index)
        if not os.path.exists(path):
            return None
        try:
            with h5py.File(path, "r") as fh:
                meta = (str(fh.attrs["spec"]), int(fh.attrs["count"]), int(fh.attrs["root_seed"]),
                        json.loads(fh.attrs["stats"]))
                if meta != (plan.spec, int(count), self.root_seed, self.stat_names):
                    raise OptionError(f"{path}: checkpoint of another run (other seed, window, "
                                      "replicates or statistics); remove the folder "
                                      f"{self.folder} or use the original options")
                return {k: np.asarray(fh[k][()], dtype=float) for k in self.stat_names}
        except OptionError:
            raise
        except (OSError, KeyError, ValueError):
            return None  # damaged checkpoint (e.g. a disk error): simulate again

    def remove(self) -> None:
        import shutil

        shutil.rmtree(self.folder, ignore_errors=True)


def _progress(total, enabled, desc):
    from tqdm.auto import tqdm

    return tqdm(total=total, desc=desc, unit="pattern", smoothing=0.05,
                disable=None if enabled is None else not enabled, leave=False)


def run_chunks(plans: list[CellPlan], stat_names: list, root_seed: int, *, jobs: int = 1,
               scheduler: str | None = None, checkpoints: Checkpoints | None = None,
               progress: bool | None = None, on_cell=None, engine: str = "fast") -> dict:
    """Simulate every chunk of ``plans``; return or hand over per-cell data.

    Parameters
    ----------
    plans : list of CellPlan
    stat_names : list of str
    root_seed : int
    jobs : int
        Worker processes (1: in this process).  Ignored with ``scheduler``.
    scheduler : str, optional
        Address of a ``dask.distributed`` scheduler; the chunks then run on
        its workers through joblib's Dask backend.
    checkpoints : Checkpoints, optional
        Load finished chunks from, and save new ones to, this folder.
    progress : bool or None
        Progress bar (None: only on a terminal), in simulated points, with
        an estimate of the time left.
    on_cell : callable(plan, data), optional
        Called as soon as all chunks of a cell are there, with
        ``data[stat]`` of shape (reps, k) in replicate order; the cell's data
        are then dropped (memory stays bounded by a few cells).  Without it,
        the data of all cells are returned.

    Returns
    -------
    dict cell name -> data (only without ``on_cell``), and timing in
    ``result["_seconds"]``.
    """
    if jobs < 1:
        raise OptionError(f"--jobs must be at least 1, got {jobs}")
    t0 = time.perf_counter()
    dim = plans[0].dimension if plans else 2
    pending = {}     # cell -> {index: data}
    need = {p.name: p.chunks() for p in plans}
    out = {}
    todo = []
    for p in plans:
        pending[p.name] = {}
        for idx, cnt in need[p.name]:
            d = checkpoints.load(p, idx, cnt) if checkpoints else None
            if d is None:
                todo.append((p, idx, cnt))
            else:
                pending[p.name][idx] = d
    bar = _progress(sum(cnt for _, _, cnt in todo), progress, f"calibration {dim}D")

    def complete(p):
        """Hand over a cell whose chunks are all there."""
        parts = pending.pop(p.name)
        data = {s: np.concatenate([parts[i][s] for i, _ in need[p.name]]) for s in stat_names}
        if on_cell is not None:
            on_cell(p, data)
        else:
            out[p.name] = data

    def finished(p, idx, cnt, d):
        if checkpoints is not None:
            checkpoints.save(p, idx, cnt, d)
        pending[p.name][idx] = d
        if len(pending[p.name]) == len(need[p.name]):
            complete(p)

    # cells whose chunks were all checkpointed are complete already
    for p in plans:
        if p.name in pending and len(pending[p.name]) == len(need[p.name]):
            complete(p)
    try:
        args = [(p.spec, p.n, list(stat_names), int(root_seed), p.dimension, p.shape, idx, cnt,
                 engine) for p, idx, cnt in todo]
        if scheduler is None and jobs == 1:
            for (p, idx, cnt), a in zip(todo, args):
                finished(p, idx, cnt, simulate_chunk(*a))
                bar.update(cnt)
        else:
            from joblib import Parallel, delayed

            def tagged(i, a):
                return i, simulate_chunk(*a)

            from nullatlas.lookup.parallel import backend

            with backend(scheduler) as cluster_jobs:
                par = Parallel(n_jobs=jobs if cluster_jobs is None else cluster_jobs,
                               return_as="generator_unordered")
                for i, d in par(delayed(tagged)(i, a) for i, a in enumerate(args)):
                    p, idx, cnt = todo[i]
                    finished(p, idx, cnt, d)
                    bar.update(cnt)
    finally:
        bar.close()
    out["_seconds"] = time.perf_counter() - t0
    return out
