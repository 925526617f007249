#!/usr/bin/env python3
"""Benchmark of the instant (table) test against the Monte Carlo route.

Measured side by side in one run, on one CSR pattern in the unit square:

1. lookup + test after the summaries are computed, in process: the null
   moments from the tables, z-scores, p-values and trust verdicts of the
   default statistics (first call, then the median of repeated calls);
2. the whole test of one pattern of n = 10,000 (summaries included):
   instant vs Monte Carlo with 999 simulations (``--sims``), same process,
   same statistics, and their ratio;
3. start-up of ``nullatlas --help`` in a fresh process (median of 5).

    python scripts/bench_instant.py [--n 10000] [--sims 999] [--jobs 1] [--json]
"""
from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import time


def main(argv=None) -> int:
    import numpy as np

    from nullatlas.lookup import csr_test
    from nullatlas.lookup.inference.asymptotic import asymptotic_result, verdict
    from nullatlas.lookup.inference.montecarlo import _alternative_for
    from nullatlas.lookup.inference.nullmoments import default_tables, null_moments
    from nullatlas.lookup.patterns import windows
    from nullatlas.lookup.summaries.statistics import PatternSummary, default_stats, evaluate, resolve_stats

    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--n", type=int, default=10_000)
    ap.add_argument("--sims", type=int, default=999)
    ap.add_argument("--jobs", type=int, default=1)
    ap.add_argument("--json", action="store_true")
    a = ap.parse_args(argv)

    w = windows.Rectangle(0, 0, 1, 1)
    pts = w.sample(a.n, np.random.default_rng(1))
    stats = resolve_stats(default_stats(2), 2)
    obs = evaluate(PatternSummary(pts, w), stats)
    csr_test(pts, w, method="asymptotic", seed=1)        # warm up: compile, open tables

    def lookup_and_test():
        tabs = default_tables()
        out = []
        for s in stats:
            alt, _ = _alternative_for(s, "two-sided")
            nm = null_moments(tabs, w, a.n, s.name)
            ok, why = verdict(nm, s, a.n, w, alt)
            out.append(asymptotic_result(s, obs[s.name], nm, alt, a.n, ok, why))
        return out

    # first lookup at a new n (cold caches for this n), then repeated ones
    n2 = a.n + 1
    t = time.perf_counter()
    tabs = default_tables()
    for s in stats:
        nm = null_moments(tabs, w, n2, s.name)
        asymptotic_result(s, obs[s.name], nm, "two-sided", n2, True, [])
    first = time.perf_counter() - t
    reps = []
    for _ in range(30):
        t = time.perf_counter()
        lookup_and_test()
        reps.append(time.perf_counter() - t)
    warm = statistics.median(reps)

    t = time.perf_counter()
    inst = csr_test(pts, w, method="asymptotic", seed=1)
    t_inst = time.perf_counter() - t
    t = time.perf_counter()
    mc = csr_test(pts, w, method="mc", n_sims=a.sims, seed=1, jobs=a.jobs)
    t_mc = time.perf_counter() - t

    starts = []
    for _ in range(5):
        t = time.perf_counter()
        subprocess.run(["nullatlas", "--help"], stdout=subprocess.DEVNULL, check=True)
        starts.append(time.perf_counter() - t)

    res = {"n": a.n, "statistics": [s.name for s in stats],
           "lookup_and_test_first_s": first, "lookup_and_test_warm_s": warm,
           "instant_test_s": t_inst, "mc_test_s": t_mc, "mc_sims": a.sims, "jobs": a.jobs,
           "speedup_instant_vs_mc": t_mc / t_inst, "help_start_s": statistics.median(starts),
           "primary_p_instant": inst.pvalue, "primary_p_mc": mc.pvalue}
    if a.json:
        json.dump(res, sys.stdout, indent=1)
        sys.stdout.write("\n")
    else:
        print(f"lookup + test of {len(stats)} statistics after the summaries: first "
              f"{first * 1e3:.1f} ms, then {warm * 1e3:.2f} ms (median of 30)")
        print(f"whole test, n = {a.n}: instant {t_inst:.3f} s, Monte Carlo ({a.sims} sims, "
              f"{a.jobs} job) {t_mc:.1f} s: x{t_mc / t_inst:.0f}")
        print(f"nullatlas --help: {statistics.median(starts):.2f} s (median of 5 fresh processes)")
        print(f"primary p-value: instant {inst.pvalue:.4f}, Monte Carlo {mc.pvalue:.4f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
