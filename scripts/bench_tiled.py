"""One large 2D pattern tile by tile: time, memory and equality with one process.

Runs, side by side in one run, on a local Dask cluster of ``--workers``
worker processes (started once):

1. ``--single`` n (default 10^7) uniform points in the unit square: the
   single-process ``compute`` (in a child process of its own, so that its
   memory is measured apart) against the tiled run on the Dask cluster of
   the same points; time ratio and bit-for-bit equality of every tiled
   statistic (``lookup.tiled.merge.TILED_STATISTICS``, H1 pairs included).
2. each n of ``--sizes`` (default 10^6, 10^7) generated on the fly (no file)
   on the cluster: wall time, peak memory of each worker (``ru_maxrss``,
   workers restarted before each run) and of the calling process (each run
   driven from a child process of its own); the scaling exponent of time in n (slope of log time on
   log n), drawn with ``--plot FILE``.

Every run prints the machine's load average beside its figures.  Usage::

    python scripts/bench_tiled.py [--single 1e7] [--sizes 1e6,1e7[,1e8]]
        [--workers 2] [--tile-points 1000000] [--plot FILE] [--json]
"""
from __future__ import annotations

import argparse
import json
import os
import resource
import sys
import time

import numpy as np

import nullatlas
from nullatlas.lookup.summaries.statistics import compute, resolve_stats
from nullatlas.lookup.tiled.merge import TILED_STATISTICS
from nullatlas.lookup.tiled.run import tiled_statistics
from nullatlas.lookup.tiled.sources import GeneratedCSR


def _rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _worker_rss_mb() -> float:        # runs on a Dask worker
    import resource as r

    return r.getrusage(r.RUSAGE_SELF).ru_maxrss / 1024.0


def _single(n: int, stats: list) -> tuple:      # runs in a child process
    w = nullatlas.Rectangle(0, 0, 1, 1)
    pts = np.vstack([b for _, b in GeneratedCSR(w, n, seed=1).chunks()])
    t0 = time.perf_counter()
    one = compute(pts, w, resolve_stats(stats, 2))
    return one, time.perf_counter() - t0, _rss_mb()


def _driver(size: int, stats: list, tile_points: int, address: str, seed: int) -> tuple:
    """One tiled run from a child process of its own (its peak memory is the
    calling process's of that run alone)."""
    w = nullatlas.Rectangle(0, 0, 1, 1)
    t0 = time.perf_counter()
    vals, info = tiled_statistics(GeneratedCSR(w, size, seed=seed), w, stats,
                                  tile_points=tile_points, scheduler=address, progress=False)
    return vals, info, time.perf_counter() - t0, _rss_mb()


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--single", type=float, default=1e7)
    ap.add_argument("--sizes", default="1e6,1e7")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--tile-points", type=int, default=1_000_000)
    ap.add_argument("--plot", metavar="FILE", help="log-log figure of time against n")
    ap.add_argument("--json", action="store_true")
    a = ap.parse_args(argv)
    stats = list(TILED_STATISTICS)
    out = {"load_before": os.getloadavg()[0]}

    import multiprocessing as mp
    from concurrent.futures import ProcessPoolExecutor

    from dask.distributed import Client, LocalCluster

    n = int(a.single)
    with ProcessPoolExecutor(1, mp_context=mp.get_context("spawn")) as ex:
        one, t_one, rss_one = ex.submit(_single, n, stats).result()
    runs = []
    ctx = mp.get_context("spawn")
    with LocalCluster(n_workers=a.workers, threads_per_worker=1, processes=True,
                      dashboard_address=None, memory_limit="6GB") as cluster, \
            Client(cluster) as client, ProcessPoolExecutor(1, mp_context=ctx, max_tasks_per_child=1) as ex:
        def run(size, which, seed):     # a fresh child per run (max_tasks_per_child)
            client.restart()            # fresh workers: their peak memory is this run's
            vals, info, dt, rss = ex.submit(_driver, size, which, a.tile_points,
                                            cluster.scheduler_address, seed).result()
            return vals, info, dt, rss, max(client.run(_worker_rss_mb).values())

        tiled, info, t_tiled, rss_drv, rss_w = run(n, stats, 1)
        equal = {k: bool(np.array_equal(tiled[k], one[k])) for k in stats}
        out["single"] = {"n": n, "single_s": round(t_one, 2), "single_peak_mb": round(rss_one),
                         "tiled_s": round(t_tiled, 2), "ratio": round(t_tiled / t_one, 2),
                         "tiles": info["tiles"], "workers": a.workers,
                         "worker_peak_mb": round(rss_w), "driver_peak_mb": round(rss_drv),
                         "equal": equal, "load": os.getloadavg()[0]}
        del one, tiled
        for size in (int(float(x)) for x in a.sizes.split(",")):
            _, info, dt, rss_drv, rss_w = run(size, ["euler", "total0", "nnmean"], 2)
            runs.append({"n": size, "seconds": round(dt, 1), "tiles": info["tiles"],
                         "worker_peak_mb": round(rss_w), "driver_peak_mb": round(rss_drv),
                         "largest_tile_points": info["largest_tile_points"],
                         "load": os.getloadavg()[0]})
    out["scaling"] = runs
    if len(runs) >= 2:
        x = np.log([r["n"] for r in runs])
        y = np.log([r["seconds"] for r in runs])
        out["slope"] = round(float(np.polyfit(x, y, 1)[0]), 2)
    if a.plot and len(runs) >= 2:
        out["plot"] = _plot(runs, out, a.plot)
    if a.json:
        json.dump(out, sys.stdout, indent=1)
        sys.stdout.write("\n")
        return 0
    s = out["single"]
    print(f"{s['n']:,} points, unit square: single process {s['single_s']} s "
          f"(peak {s['single_peak_mb'] / 1024:.2f} GB), tiled on Dask ({s['tiles']} tiles, "
          f"{s['workers']} workers, peak {s['worker_peak_mb'] / 1024:.2f} GB per worker, "
          f"{s['driver_peak_mb'] / 1024:.2f} GB in the calling process) "
          f"{s['tiled_s']} s, ratio {s['ratio']}; equal bit for bit: "
          f"{all(s['equal'].values())} {s['equal']} (load {s['load']:.1f})")
    for r in runs:
        print(f"{r['n']:>13,} points generated on the fly, Dask {a.workers} workers: "
              f"{r['seconds']} s, {r['tiles']} tiles, peak memory per worker "
              f"{r['worker_peak_mb'] / 1024:.2f} GB, calling process {r['driver_peak_mb'] / 1024:.2f} GB "
              f"(load {r['load']:.1f})")
    if "slope" in out:
        print(f"time ~ n^{out['slope']} (log-log slope over {len(runs)} sizes)")
    if "plot" in out:
        print(f"figure: {out['plot']}")
    return 0


def _plot(runs: list, out: dict, path: str) -> str:
    """Time against n on log-log axes, with the fitted slope and the
    single-process time of ``--single`` for comparison."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from nullatlas.lookup.atomic import atomic_path

    ns = np.array([r["n"] for r in runs], float)
    ts = np.array([r["seconds"] for r in runs], float)
    b, c = np.polyfit(np.log(ns), np.log(ts), 1)
    fig, ax = plt.subplots(figsize=(5.6, 4.2), layout="constrained")
    grid = np.geomspace(ns.min(), ns.max(), 50)
    ax.plot(grid, np.exp(c) * grid ** b, color="0.6", lw=1, zorder=1,
            label=f"fit: time ~ n^{b:.2f}")
    s = out["single"]
    ax.plot(ns, ts, "o", color="C0", zorder=2,
            label=f"tiled on Dask ({s['workers']} workers): euler, total0, nnmean")
    ax.plot([s["n"]], [s["single_s"]], "s", color="C3", zorder=3,
            label=f"one process, same n ({len(s['equal'])} statistics)")
    ax.plot([s["n"]], [s["tiled_s"]], "D", mfc="none", color="C3", zorder=3,
            label=f"tiled, same {len(s['equal'])} statistics")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("points n (CSR, unit square)")
    ax.set_ylabel("wall time (s)")
    ax.set_title("One pattern tile by tile: time against n", fontsize=10)
    ax.legend(fontsize=8, loc="upper left")
    with atomic_path(path) as tmp:
        fig.savefig(tmp, dpi=120, format="png")
    plt.close(fig)
    return path


if __name__ == "__main__":
    sys.exit(main())
