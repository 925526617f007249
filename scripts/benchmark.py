"""Benchmark of the Monte Carlo route, measured side by side in one run.

Prints, for the demo wafer (n ~ 400, disk window), the wall time of
``csr_test`` with the default statistics at 999 simulations with 1 worker
and with all cores, their ratio, and the per-pattern cost split between the
alpha-complex diagram and the summaries.  Timings, not tests: run it by hand.

    python scripts/benchmark.py [--sims 999]
"""
from __future__ import annotations

import argparse
import os
import time

import numpy as np

from nullatlas.lookup import Disk, csr_test, read_points
from nullatlas.lookup.diagram import alpha_diagram
from nullatlas.lookup.statistics import compute, resolve_stats

HERE = os.path.dirname(os.path.abspath(__file__))


def _time(f, repeat=1):
    best = np.inf
    for _ in range(repeat):
        t = time.perf_counter()
        f()
        best = min(best, time.perf_counter() - t)
    return best


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sims", type=int, default=999)
    a = ap.parse_args()
    pts = read_points(os.path.join(HERE, "..", "examples", "wafer_lot_clustered.csv"))
    w = Disk(0, 0, 150)
    cores = os.cpu_count() or 1
    t1 = _time(lambda: csr_test(pts, w, n_sims=a.sims, seed=1, jobs=1))
    tn = _time(lambda: csr_test(pts, w, n_sims=a.sims, seed=1, jobs=cores))
    print(f"csr_test, n={len(pts)}, {a.sims} sims: jobs=1 {t1:.2f} s, jobs={cores} {tn:.2f} s, "
          f"speed-up x{t1 / tn:.2f}")
    stats = resolve_stats(None, 2)
    sample = w.sample(len(pts), np.random.default_rng(0))
    td = _time(lambda: alpha_diagram(sample, w.measure), repeat=20)
    ts = _time(lambda: compute(sample, w, stats), repeat=20)
    print(f"per pattern: diagram {td * 1e3:.2f} ms, diagram + all default summaries {ts * 1e3:.2f} ms "
          f"(diagram share {td / ts:.0%})")
    for n in (10_000, 100_000):
        big = w.sample(n, np.random.default_rng(1))
        tb = _time(lambda: alpha_diagram(big, w.measure))
        print(f"diagram of {n} CSR points: {tb:.2f} s")


if __name__ == "__main__":
    main()
