"""A grid of tiles over a 2D window, and the points of each tile on disk.

The window's bounding box is cut into ``kx x ky`` equal tiles so that a tile
holds about ``tile_points`` points.  One pass over the source writes each
point (its global index and coordinates) to its tile's spill file in a
folder; memory is one chunk.  A tile's worker then reads its own file and,
for its halo, the files of the neighbouring tiles, keeping the points within
the halo distance of its rectangle (:func:`load_tile`).
"""
from __future__ import annotations

import math
import os
from dataclasses import dataclass

import numpy as np

from ..errors import PointsError

__all__ = ["TileGrid", "window_bounds", "inner_geometry", "partition", "load_tile"]

_ROW = np.dtype([("i", "<i8"), ("x", "<f8"), ("y", "<f8")])


def window_bounds(window) -> tuple:
    """(xmin, ymin, xmax, ymax) of a 2D window."""
    if hasattr(window, "lo") and hasattr(window, "hi"):
        return (float(window.lo[0]), float(window.lo[1]), float(window.hi[0]),
                float(window.hi[1]))
    if hasattr(window, "centre") and hasattr(window, "r"):
        c, r = window.centre, float(window.r)
        return (float(c[0]) - r, float(c[1]) - r, float(c[0]) + r, float(c[1]) + r)
    if hasattr(window, "geometry"):
        return tuple(float(v) for v in window.geometry.bounds)
    raise PointsError(f"a tiled run needs a 2D window with known bounds, got {window.kind}")


@dataclass(frozen=True)
class TileGrid:
    """``kx x ky`` equal tiles over the box ``bounds``."""

    bounds: tuple
    kx: int
    ky: int

    @classmethod
    def for_points(cls, bounds, n: int, tile_points: int) -> "TileGrid":
        """About ``tile_points`` points per tile, tiles close to square."""
        x0, y0, x1, y1 = bounds
        tiles = max(1, math.ceil(n / max(int(tile_points), 1)))
        aspect = (x1 - x0) / max(y1 - y0, 1e-300)
        kx = max(1, round(math.sqrt(tiles * aspect)))
        ky = max(1, math.ceil(tiles / kx))
        return cls(tuple(float(v) for v in bounds), int(kx), int(ky))

    @property
    def count(self) -> int:
        return self.kx * self.ky

    @property
    def size(self) -> tuple:
        x0, y0, x1, y1 = self.bounds
        return (x1 - x0) / self.kx, (y1 - y0) / self.ky

    def rect(self, t: int) -> tuple:
        """(xmin, ymin, xmax, ymax) of tile ``t``."""
        x0, y0, _, _ = self.bounds
        w, h = self.size
        i, j = t % self.kx, t // self.kx
        return (x0 + i * w, y0 + j * h, x0 + (i + 1) * w, y0 + (j + 1) * h)

    def tile_of(self, xy: np.ndarray) -> np.ndarray:
        """Tile of each point (points on a shared edge go to the upper tile)."""
        x0, y0, _, _ = self.bounds
        w, h = self.size
        i = np.clip(np.floor((xy[:, 0] - x0) / w).astype(np.int64), 0, self.kx - 1)
        j = np.clip(np.floor((xy[:, 1] - y0) / h).astype(np.int64), 0, self.ky - 1)
        return j * self.kx + i

    def neighbours(self, t: int, halo: float) -> list:
        """Tiles (``t`` first) whose points may lie within ``halo`` of tile ``t``."""
        w, h = self.size
        ri, rj = math.ceil(halo / w), math.ceil(halo / h)
        i, j = t % self.kx, t // self.kx
        out = [t]
        for jj in range(max(0, j - rj), min(self.ky, j + rj + 1)):
            for ii in range(max(0, i - ri), min(self.kx, i + ri + 1)):
                if (ii, jj) != (i, j):
                    out.append(jj * self.kx + ii)
        return out


def _spill(folder: str, t: int) -> str:
    return os.path.join(folder, f"tile{t:06d}.bin")


def inner_geometry(window, delta: float):
    """A shapely region containing every point of the window farther than
    ``delta`` from its boundary (the window eroded by ``delta``, enlarged
    slightly where it is curved), or None when there is no geometry."""
    import shapely

    if hasattr(window, "geometry"):
        return window.geometry.buffer(-delta)
    if hasattr(window, "centre") and hasattr(window, "r"):
        k = 64                          # circumscribed 4k-gon of the eroded disk
        r = (float(window.r) - delta) / math.cos(math.pi / (4 * k))
        return shapely.Point(*window.centre).buffer(max(r, 0.0), quad_segs=k)
    if hasattr(window, "lo"):
        x0, y0, x1, y1 = window_bounds(window)
        return shapely.box(x0 + delta, y0 + delta, x1 - delta, y1 - delta)
    return None


def partition(source, window, grid: TileGrid, folder: str, progress=None,
              rim: float = 0.0) -> np.ndarray:
    """Write every point of ``source`` to its tile's file in ``folder``, and
    the points within ``rim`` of the window's boundary to the rim file too.

    Checks each chunk as the single-process reader and validator do (finite,
    inside the window).  Returns the number of points per tile.
    """
    counts = np.zeros(grid.count, dtype=np.int64)
    handles = {}
    rim_fh = open(os.path.join(folder, "rim.bin"), "wb") if rim > 0 else None
    try:
        for start, block in source.chunks():
            inside = window.contains(block)
            if not inside.all():
                k = int(np.flatnonzero(~inside)[0])
                raise PointsError(f"{source.label}: point {start + k} {tuple(block[k])} lies "
                                  f"outside the window")
            tiles = grid.tile_of(block)
            order = np.argsort(tiles, kind="stable")
            rows = np.empty(len(block), dtype=_ROW)
            rows["i"] = np.arange(start, start + len(block))
            rows["x"], rows["y"] = block[:, 0], block[:, 1]
            if rim_fh is not None:
                rows[window.boundary_distance(block) <= rim].tofile(rim_fh)
            rows = rows[order]
            ts = tiles[order]
            cut = np.flatnonzero(np.diff(ts)) + 1
            for part in np.split(np.arange(len(ts)), cut):
                if not len(part):
                    continue
                t = int(ts[part[0]])
                fh = handles.get(t)
                if fh is None:
                    fh = handles[t] = open(_spill(folder, t), "ab")
                rows[part].tofile(fh)
                counts[t] += len(part)
            if progress is not None:
                progress(len(block))
    finally:
        for fh in handles.values():
            fh.close()
        if rim_fh is not None:
            rim_fh.close()
    return counts


def load_tile(folder: str, grid: TileGrid, t: int, halo: float, rim: bool = False):
    """(global indices, points, number of own points): tile ``t``'s own points
    first, then every point within ``halo`` of its rectangle (its halo), and
    with ``rim`` the rim points (near the window's boundary) not among them."""
    x0, y0, x1, y1 = grid.rect(t)
    idx, pts, own = [], [], 0
    for k, u in enumerate(grid.neighbours(t, halo)):
        path = _spill(folder, u)
        if not os.path.exists(path):
            continue
        rows = np.fromfile(path, dtype=_ROW)
        if k:
            keep = ((rows["x"] >= x0 - halo) & (rows["x"] <= x1 + halo)
                    & (rows["y"] >= y0 - halo) & (rows["y"] <= y1 + halo))
            rows = rows[keep]
        else:
            own = len(rows)
        idx.append(rows["i"])
        pts.append(np.column_stack([rows["x"], rows["y"]]))
    if not idx:
        return np.empty(0, np.int64), np.empty((0, 2)), 0
    gidx, P = np.concatenate(idx), np.vstack(pts)
    if rim and os.path.exists(os.path.join(folder, "rim.bin")):
        rows = np.fromfile(os.path.join(folder, "rim.bin"), dtype=_ROW)
        rows = rows[~np.isin(rows["i"], gidx)]
        gidx = np.concatenate([gidx, rows["i"]])
        P = np.vstack([P, np.column_stack([rows["x"], rows["y"]])])
    return gidx, np.ascontiguousarray(P), own
