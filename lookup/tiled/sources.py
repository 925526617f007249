"""Point sources read in chunks, so that no process holds the whole pattern.

A source knows its number of points ``n`` and dimension, and yields
``(start, block)`` chunks in row order (row i of the pattern is point i
everywhere: it is the point's global index).

* ``.npy`` files are memory-mapped (``numpy.load(mmap_mode="r")``);
* HDF5 datasets (``file.h5:/dataset``) are read by row slices (h5py);
* Parquet files by row groups (pyarrow, optional: ``pip install pyarrow``),
  columns ``x``, ``y`` or the first two;
* an in-memory array (tests, notebooks);
* CSR generated on the fly (:class:`GeneratedCSR`): chunk k comes from the
  k-th child of one ``SeedSequence``, so the pattern is the same for any
  chunking and needs no file at all.
"""
from __future__ import annotations

import os

import numpy as np

from ..errors import OptionError, PointsError

__all__ = ["PointSource", "ArraySource", "NpySource", "HDF5Source", "ParquetSource",
           "GeneratedCSR", "open_source", "CHUNK"]

#: Rows per chunk (2D float64: 16 MB).
CHUNK = 1_000_000


class PointSource:
    """Rows of coordinates, read chunk by chunk."""

    n: int = 0
    dim: int = 2
    label: str = ""

    def chunks(self, size: int = CHUNK):
        """Yield ``(start, block)``: rows ``start .. start + len(block) - 1``."""
        for start in range(0, self.n, size):
            yield start, self.read(start, min(self.n, start + size))

    def read(self, start: int, stop: int) -> np.ndarray:
        """Rows ``start:stop`` as a float64 (k, dim) array."""
        raise NotImplementedError


def _check_block(block, where, start):
    block = np.ascontiguousarray(block, dtype=np.float64)
    bad = ~np.isfinite(block).all(axis=1)
    if bad.any():
        raise PointsError(f"{where}: row {start + int(np.flatnonzero(bad)[0])} has a non-finite "
                          "coordinate")
    return block + 0.0              # -0.0 -> 0.0, as the single-process reader


class ArraySource(PointSource):
    """An array already in memory."""

    def __init__(self, points, label: str = "array"):
        self.points = np.asarray(points)
        if self.points.ndim != 2 or self.points.shape[1] not in (2, 3):
            raise PointsError(f"{label}: points must have shape (n, 2) or (n, 3)")
        self.n, self.dim = self.points.shape
        self.label = label

    def read(self, start, stop):
        return _check_block(self.points[start:stop], self.label, start)


class NpySource(ArraySource):
    """A ``.npy`` file, memory-mapped: pages are read as chunks are asked for."""

    def __init__(self, path: str, columns=None):
        try:
            arr = np.load(path, mmap_mode="r", allow_pickle=False)
        except (OSError, ValueError) as exc:
            raise PointsError(f"{path}: not a readable .npy array ({exc})") from None
        if columns is not None:
            if any(not isinstance(c, int) for c in columns):
                raise PointsError(f"{path}: a .npy file has no column names; give indices")
            arr = arr[:, list(columns)] if arr.ndim == 2 else arr
        super().__init__(arr, path)


class HDF5Source(PointSource):
    """An HDF5 dataset of shape (n, 2 or 3), read by row slices."""

    def __init__(self, path: str, dataset: str, columns=None):
        import h5py

        self.path, self.dataset, self.label = path, dataset, f"{path}:{dataset}"
        try:
            with h5py.File(path, "r") as fh:
                shape = fh[dataset].shape
        except (OSError, KeyError) as exc:
            raise PointsError(f"{self.label}: cannot read the dataset ({exc})") from None
        self.columns = list(columns) if columns is not None else None
        k = len(self.columns) if self.columns else (shape[1] if len(shape) == 2 else 0)
        if len(shape) != 2 or k not in (2, 3):
            raise PointsError(f"{self.label}: dataset must have shape (n, 2) or (n, 3), "
                              f"got {shape}")
        self.n, self.dim = int(shape[0]), k

    def read(self, start, stop):
        import h5py

        with h5py.File(self.path, "r") as fh:
            block = fh[self.dataset][start:stop]
        if self.columns:
            block = block[:, self.columns]
        return _check_block(block, self.label, start)


class ParquetSource(PointSource):
    """A Parquet file (pyarrow), read one row group at a time."""

    def __init__(self, path: str, columns=None):
        try:
            import pyarrow.parquet as pq
        except ImportError:
            raise OptionError("reading Parquet needs pyarrow: pip install 'nullatlas[parquet]'") \
                from None
        self.path, self.label = path, path
        try:
            self._file = pq.ParquetFile(path)
        except Exception as exc:       # pyarrow raises its own error types
            raise PointsError(f"{path}: not a readable Parquet file ({exc})") from None
        names = self._file.schema_arrow.names
        if columns:
            cols = [names[c] if isinstance(c, int) else c for c in columns]
        else:
            cols = [c for c in ("x", "y", "z") if c in names] or names[:2]
            if len(cols) == 1:
                cols = names[:2]
        missing = [c for c in cols if c not in names]
        if missing or len(cols) not in (2, 3):
            raise PointsError(f"{path}: columns {cols} not found among {names}")
        self.cols = cols
        self.n, self.dim = int(self._file.metadata.num_rows), len(cols)
        self._starts = np.cumsum([0] + [self._file.metadata.row_group(i).num_rows
                                        for i in range(self._file.num_row_groups)])

    def chunks(self, size: int = CHUNK):
        for g in range(self._file.num_row_groups):
            t = self._file.read_row_group(g, columns=self.cols)
            block = np.column_stack([t.column(c).to_numpy() for c in self.cols])
            yield int(self._starts[g]), _check_block(block, self.label, int(self._starts[g]))

    def read(self, start, stop):
        parts = [b[max(0, start - s):stop - s] for s, b in self.chunks()
                 if s < stop and s + len(b) > start]
        return np.vstack(parts) if parts else np.empty((0, self.dim))


class GeneratedCSR(PointSource):
    """``n`` uniform points in a window, generated chunk by chunk.

    Chunk k (rows k*block ..) is drawn from the k-th child of
    ``SeedSequence(seed)``; the points depend on ``block`` but not on how
    they are read.
    """

    def __init__(self, window, n: int, seed: int = 0, block: int = CHUNK):
        self.window, self.n, self.dim = window, int(n), window.dim
        self.seed, self.block = int(seed), int(block)
        self.label = f"csr:{n}@seed{seed}"
        self._seeds = np.random.SeedSequence(self.seed).spawn((self.n + block - 1) // block)

    def _block(self, k):
        m = min(self.block, self.n - k * self.block)
        return self.window.sample(m, np.random.default_rng(self._seeds[k]))

    def read(self, start, stop):
        ks = range(start // self.block, (stop - 1) // self.block + 1) if stop > start else []
        parts = [self._block(k) for k in ks]
        if not parts:
            return np.empty((0, self.dim))
        allb = np.vstack(parts)
        off = start - ks[0] * self.block
        return allb[off:off + (stop - start)]

    def chunks(self, size: int = CHUNK):
        for k in range((self.n + self.block - 1) // self.block):
            yield k * self.block, self._block(k)


def open_source(spec, columns=None) -> PointSource:
    """A :class:`PointSource` for a file name (``.npy``, ``.h5:/dataset``,
    ``.parquet``), an array, or a source already made."""
    if isinstance(spec, PointSource):
        return spec
    if not isinstance(spec, (str, os.PathLike)):
        return ArraySource(spec)
    spec = str(spec)
    low = spec.lower()
    if low.endswith(".npy"):
        return NpySource(spec, columns)
    if low.endswith((".parquet", ".pq")):
        return ParquetSource(spec, columns)
    for ext in (".h5:", ".hdf5:", ".hdf:"):
        i = low.find(ext)
        if i >= 0:
            return HDF5Source(spec[:i + len(ext) - 1], spec[i + len(ext):], columns)
    raise PointsError(f"{spec}: a tiled run reads .npy, HDF5 (file.h5:/dataset) or Parquet "
                      "files in chunks; convert text files to .npy first")
