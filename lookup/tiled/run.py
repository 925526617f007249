"""Exact summaries of one 2D pattern too large for one process, tile by tile.

:func:`tiled_statistics` streams the points once into per-tile files
(``lookup.tiled.tiling``), computes each tile's part on a worker
(``lookup.tiled.local``; joblib processes, or a dask.distributed cluster),
doubling a tile's halo until its part is certified, and merges the parts
(``lookup.tiled.merge``).  The values equal those of ``compute`` on the
whole pattern in one process, bit for bit.  Memory per worker is about one
tile with its halo; ``tile_points`` sets it (about 500 bytes per point).
"""
from __future__ import annotations

import os
import shutil
import tempfile

import numpy as np

from ..errors import OptionError
from .merge import H1_STATISTICS, TILED_STATISTICS, TiledDiagram, TiledSummary, merge_h1, merge_parts
from .sources import open_source
from .tiling import TileGrid, inner_geometry, load_tile, partition, window_bounds

__all__ = ["tiled_statistics", "TILE_POINTS", "BYTES_PER_POINT"]

#: Default points per tile (a worker then needs about 0.5 GB).
TILE_POINTS = 1_000_000
#: Measured peak memory of a tile's work per point (scripts/bench_tiled.py).
BYTES_PER_POINT = 500
#: First halo, in mean spacings (|W|/n)^(1/2); doubled until certified.
HALO_SPACINGS = 6.0
#: Width of the rim (points near the window's boundary) that a tile adds on
#: its second try, in mean spacings.
RIM_SPACINGS = 4.0


def _tile_job(folder, grid, t, halo0, box, scale, rho, r_pairs, window, want_nn, want_bdist,
              rim, inner, want_h1=False):
    from .local import tile_part

    halo, tries = halo0, 0
    while True:
        # first try: the halo alone; then with the rim (the triangles along
        # the hull have wide, flat circumdisks that only the rim can clear),
        # doubling the halo
        x0, y0, x1, y1 = grid.rect(t)
        rect = (x0 - halo, y0 - halo, x1 + halo, y1 + halo)
        with_rim = rim > 0 and (tries > 0 or _near_boundary(rect, inner))
        gidx, P, own = load_tile(folder, grid, t, halo, with_rim)
        if own == 0:
            return None
        part = tile_part(gidx, P, own, rect, box, scale, rho, r_pairs, window, want_nn,
                         want_bdist, rim if with_rim else 0.0, inner, want_h1)
        if part is not None:
            part["halo"], part["tries"], part["local_points"] = halo, tries + 1, len(P)
            return part
        if tries > 0:
            halo *= 2
        tries += 1


def _near_boundary(rect, inner) -> bool:
    """Whether the rectangle reaches the window's rim (not inside ``inner``)."""
    if inner is None:
        return True
    import shapely

    return not inner.contains(shapely.box(*rect))


def tiled_statistics(source, window, stats=None, tile_points: int = TILE_POINTS,
                     jobs: int = 1, scheduler: str | None = None, progress=None,
                     workdir: str | None = None, columns=None) -> tuple:
    """Values of 2D statistics of one large pattern, computed tile by tile.

    Parameters
    ----------
    source : str, ndarray or PointSource
        ``.npy`` (memory-mapped), ``file.h5:/dataset``, ``.parquet``, an
        array, or a :class:`~nullatlas.lookup.tiled.sources.PointSource`
        such as :class:`~nullatlas.lookup.tiled.sources.GeneratedCSR`.
    window : Window
        A 2D window (rectangle, disk, polygon, mask).
    stats : list of str, optional
        Among :data:`~nullatlas.lookup.tiled.merge.TILED_STATISTICS`;
        default ``euler, total0, nnmean``.
    tile_points : int
        About this many points per tile.
    jobs : int
        Worker processes on this machine (ignored with ``scheduler``).
    scheduler : str, optional
        Address of a dask.distributed scheduler, or ``"local"`` to start a
        local cluster of ``jobs`` workers for the run; the workers must see
        ``workdir`` (a shared file system).
    progress : bool or None
        Progress bars over the points read and the tiles done.
    workdir : str, optional
        Folder for the per-tile files (default: a temporary folder, removed
        afterwards).

    Returns
    -------
    (dict, dict)
        Statistic name -> value, and facts of the run (``n``, ``tiles``,
        ``halo`` range, ``local_points`` largest, tries, seconds).

    Examples
    --------
    >>> import numpy as np
    >>> import nullatlas
    >>> from nullatlas.lookup.summaries.statistics import compute, resolve_stats
    >>> from nullatlas.lookup.tiled.run import tiled_statistics
    >>> w = nullatlas.Rectangle(0, 0, 1, 1)
    >>> pts = w.sample(4000, np.random.default_rng(1))
    >>> vals, info = tiled_statistics(pts, w, ["euler", "total0"], tile_points=500)
    >>> one = compute(pts, w, resolve_stats(["euler", "total0"], 2))
    >>> info["tiles"] > 4, all(np.array_equal(vals[k], one[k]) for k in one)
    (True, True)
    """
    import time

    from ..progressbar import progress_bar
    from ..summaries import grids
    from ..summaries.statistics import resolve_stats

    t0 = time.perf_counter()
    names = stats or ["euler", "total0", "nnmean"]
    chosen = resolve_stats(names, 2)
    bad = [s.name for s in chosen if s.name not in TILED_STATISTICS]
    if bad:
        raise OptionError(f"{', '.join(bad)} cannot be computed tile by tile (the L function "
                          f"needs every close pair); a tiled run computes "
                          f"{', '.join(TILED_STATISTICS)}")
    if window.dim != 2:
        raise OptionError("tiled runs are 2D only")
    if getattr(window, "periodic", False):
        raise OptionError("tiled runs do not take periodic windows")
    if int(tile_points) < 100:
        raise OptionError(f"--tile-points must be at least 100, got {tile_points}")
    src = open_source(source, columns)
    if src.dim != 2:
        raise OptionError(f"{src.label}: a tiled run needs 2D points, got {src.dim} columns")
    n = src.n
    if n < 3:
        raise OptionError("a tiled run needs at least 3 points")
    box = window_bounds(window)
    grid = TileGrid.for_points(box, n, tile_points)
    scale = float((n / window.measure) ** 0.5)
    rho = grids.RHO
    r_pairs = grids.L_RHO[-1] / scale
    want_nn = any(s.name in ("nnmean", "gfunc") for s in chosen)
    want_bdist = any(s.name == "gfunc" for s in chosen)
    want_h1 = any(s.name in H1_STATISTICS for s in chosen)
    halo0 = max(HALO_SPACINGS / scale, 2.0 * r_pairs)
    own_dir = workdir is None
    folder = tempfile.mkdtemp(prefix="nullatlas-tiles-") if own_dir else workdir
    try:
        if not own_dir:
            os.makedirs(folder, exist_ok=True)
            for f in os.listdir(folder):
                if f.startswith("tile") and f.endswith(".bin"):
                    os.unlink(os.path.join(folder, f))
        rim = RIM_SPACINGS / scale
        bar = progress_bar(n, "reading points", "pt", progress, leave=False)
        try:
            counts = partition(src, window, grid, folder, bar.update, rim=rim)
        finally:
            bar.close()
        todo = [int(t) for t in np.flatnonzero(counts)]
        args = (halo0, box, scale, rho, r_pairs, window, want_nn, want_bdist, rim,
                inner_geometry(window, rim), want_h1)
        parts = _run_tiles(folder, grid, todo, args, jobs, scheduler, progress)
    finally:
        if own_dir:
            shutil.rmtree(folder, ignore_errors=True)
    parts = [p for p in parts if p is not None]
    h1 = merge_h1(parts, scale) if want_h1 else None
    deaths, chi, nn, bdist = merge_parts(parts, n, rho, scale)
    ps = TiledSummary(TiledDiagram(deaths, chi, rho, n, scale, h1), nn, bdist, window, scale)
    values = {s.name: np.asarray(s.func(ps), dtype=float) for s in chosen}
    halos = [p["halo"] * scale for p in parts]
    info = {"n": n, "tiles": len(parts), "grid": [grid.kx, grid.ky],
            "halo_spacings": [float(min(halos)), float(max(halos))],
            "retried_tiles": int(sum(p["tries"] > 1 for p in parts)),
            "largest_tile_points": int(max(p["local_points"] for p in parts)),
            "edges": int(sum(p["edges"] for p in parts)),
            "triangles": int(sum(p["triangles"] for p in parts)),
            "seconds": round(time.perf_counter() - t0, 3)}
    return values, info


def _run_tiles(folder, grid, todo, args, jobs, scheduler, progress):
    from ..progressbar import progress_bar

    bar = progress_bar(len(todo), "tiles", "tile", progress, leave=False)
    out = []
    try:
        if scheduler:
            out = _run_dask(folder, grid, todo, args, jobs, scheduler, bar)
        elif jobs <= 1:
            for t in todo:
                out.append(_tile_job(folder, grid, t, *args))
                bar.update(1)
        else:
            from joblib import Parallel, delayed

            gen = Parallel(n_jobs=jobs, return_as="generator")(
                delayed(_tile_job)(folder, grid, t, *args) for t in todo)
            for part in gen:
                out.append(part)
                bar.update(1)
    finally:
        bar.close()
    return out


def _run_dask(folder, grid, todo, args, jobs, scheduler, bar):
    from dask.distributed import Client, LocalCluster, as_completed

    cluster = None
    if scheduler == "local":
        cluster = LocalCluster(n_workers=max(jobs, 1), threads_per_worker=1,
                               processes=True, dashboard_address=None)
        client = Client(cluster)
    else:
        client = Client(scheduler)
    try:
        futs = [client.submit(_tile_job, folder, grid, t, *args, pure=False) for t in todo]
        index = {f.key: k for k, f in enumerate(futs)}
        out = [None] * len(futs)
        for f in as_completed(futs):
            out[index[f.key]] = f.result()
            bar.update(1)
            f.release()
        return out
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
