"""Cells, chunks and seeds of a calibration run.

A cell is (dimension, shape, n).  Its R replicates are split into chunks of a
size that depends on n only (never on the number of workers), and chunk i of
a cell is seeded with the i-th ``SeedSequence.spawn`` child of the cell's
seed

    cell seed  = SeedSequence(root_seed, spawn_key=(d, crc32(shape), n))
    chunk i    = cell_seed.spawn(i + 1)[i]   (spawn_key + (i,))
    replicate j of a chunk = chunk.spawn(count)[j]

so every replicate's points are fixed by (root seed, shape, n, chunk, j)
alone: the table is bit-identical whatever ``--jobs`` or backend, and
``extend`` continues with chunk indices never used before.
"""
from __future__ import annotations

import zlib
from dataclasses import dataclass

import numpy as np

__all__ = ["CellPlan", "chunk_size_for", "cell_name", "cell_seed", "chunk_seed",
           "DEFAULT_STATS"]

#: Statistics stored in tables, per dimension.  3D leaves out statistics
#: that need the H1 pairs themselves (computed by gudhi, see
#: ``lookup.summaries.statistics.Statistic.needs_h1_pairs``): too slow to tabulate.
DEFAULT_STATS = {
    2: ["euler", "betti0", "betti1", "apf0", "apf1", "total0", "total1",
        "maxpers1", "maxratio1", "nnmean", "lfunc", "gfunc"],
    3: ["euler", "betti0", "betti1", "betti2", "apf0", "apf2", "total0", "total1",
        "total2", "maxpers2", "maxratio2", "nnmean", "lfunc", "gfunc"],
}

#: Points simulated per chunk (about a second of work per chunk in 2D).
POINTS_PER_CHUNK = 400_000


def chunk_size_for(n: int) -> int:
    """Replicates per chunk for patterns of n points (depends on n only)."""
    return int(np.clip(POINTS_PER_CHUNK // max(int(n), 1), 4, 250))


def cell_name(shape: str, n: int) -> str:
    """HDF5 group name of a cell, sortable by n within a shape."""
    return f"{shape}-n{int(n):08d}"


def cell_seed(root_seed: int, dimension: int, shape: str, n: int) -> np.random.SeedSequence:
    """Seed of a cell (see module docstring)."""
    return np.random.SeedSequence(int(root_seed),
                                  spawn_key=(int(dimension), zlib.crc32(shape.encode()), int(n)))


def chunk_seed(root_seed: int, dimension: int, shape: str, n: int, index: int) -> np.random.SeedSequence:
    """Seed of chunk ``index`` of a cell: the index-th ``spawn`` child."""
    ss = cell_seed(root_seed, dimension, shape, n)
    return np.random.SeedSequence(ss.entropy, spawn_key=ss.spawn_key + (int(index),))


@dataclass(frozen=True)
class CellPlan:
    """What to simulate for one cell.

    Attributes
    ----------
    dimension, shape, n : cell key
    spec : str
        Window specification of the unit-content representative.
    kappa : float
        Shape factor |dW| / |W|^((d-1)/d).
    reps : int
        Replicates to simulate in this run.
    first_chunk : int
        Index of the first chunk of this run (0 for a new cell; after the
        chunks already in the table for ``extend``).
    chunk_size : int
    """

    dimension: int
    shape: str
    n: int
    spec: str
    kappa: float
    reps: int
    first_chunk: int = 0
    chunk_size: int = 0

    @property
    def name(self) -> str:
        return cell_name(self.shape, self.n)

    @property
    def size(self) -> int:
        return self.chunk_size or chunk_size_for(self.n)

    def chunks(self) -> list[tuple[int, int]]:
        """(chunk index, replicates) of this run."""
        out, left, i = [], int(self.reps), int(self.first_chunk)
        while left > 0:
            c = min(self.size, left)
            out.append((i, c))
            left -= c
            i += 1
        return out
