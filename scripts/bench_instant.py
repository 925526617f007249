#!/usr/bin/env python3
"""Benchmark of the instant (table) test against the Monte Carlo route.

Measured side by side in one run, on one CSR pattern in the unit square:

1. lookup + test after the summaries are computed, in process: the null
   moments from the tables, z-scores, p-values and trust verdicts of the
   default statistics (first call, then the median of repeated calls);
2. the whole test of one pattern of n = 10,000 (summaries included):
   instant vs Monte Carlo with 999 simulations (``--sims``), same process,
   same statistics, and their ratio;
3. start-up of ``nullatlas --help`` in a fresh process (median of 5);
4. whole processes (issue 15), after one warm-up run (kernels compiled, Gumbel
   fits kept): ``nullatlas test FILE -w rect:0,0,1,1 --method asymptotic`` on
   the n = 10,000 pattern next to ``python -c "import numpy"``, alternating,
   medians of ``--reps``; the same command with ``--method mc --sims 199``
   (``--proc-sims``) and the ratio Monte Carlo / instant;
5. ``nullatlas batch`` of ``--batch-files`` (1,000) instant tests of 1,000-point
   patterns: patterns per second, against that many whole ``nullatlas test``
   processes of one such pattern.

The machine's load average is printed with the figures: measure on a quiet
machine.  ``--only process`` runs sections 4 and 5 alone.

    python scripts/bench_instant.py [--n 10000] [--sims 999] [--jobs 1] [--json]
                                    [--only {all,process}] [--reps 7] [--proc-sims 199]
                                    [--batch-files 1000] [--batch-jobs 1]
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time


def _run_s(cmd, env=None) -> float:
    """Wall-clock seconds of one whole process (output discarded, must succeed)."""
    t = time.perf_counter()
    subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True, env=env)
    return time.perf_counter() - t


def whole_process(a, tmp: str) -> dict:
    """Sections 4 and 5 of the module doc: whole processes, timed side by side."""
    import compileall

    import numpy as np

    import nullatlas
    import nullatlas.lookup

    # bytecode of the package, as `pip install` writes it (an editable install
    # under PYTHONDONTWRITEBYTECODE=1 would otherwise compile every module in
    # every process)
    for mod in (nullatlas, nullatlas.lookup):
        compileall.compile_dir(os.path.dirname(mod.__file__), quiet=1)
    nul = os.environ.get("NULLATLAS_CLI") or "nullatlas"
    py = sys.executable
    pattern = os.path.join(tmp, "csr10k.csv")
    np.savetxt(pattern, np.random.default_rng(1).random((a.n, 2)), delimiter=",")
    inst = [nul, "test", pattern, "-w", "rect:0,0,1,1", "--method", "asymptotic", "--seed", "1"]
    mc = [nul, "test", pattern, "-w", "rect:0,0,1,1", "--method", "mc", "--sims",
          str(a.proc_sims), "--seed", "1", "--jobs", str(a.jobs), "--no-progress"]
    warm = _run_s(inst)          # first run: may compile the kernels and fit the Gumbel tails
    t_np, t_in = [], []
    for _ in range(a.reps):      # alternating, so that a load change hits both
        t_np.append(_run_s([py, "-c", "import numpy"]))
        t_in.append(_run_s(inst))
    t_mc = _run_s(mc)
    out = {"load_before": os.getloadavg(), "n": a.n, "warmup_s": warm,
           "import_numpy_s": statistics.median(t_np), "instant_process_s": statistics.median(t_in),
           "instant_process_all_s": t_in, "mc_sims": a.proc_sims, "mc_process_s": t_mc}
    out["mc_over_instant"] = t_mc / out["instant_process_s"]

    folder = os.path.join(tmp, "batch")
    os.makedirs(folder)
    rng = np.random.default_rng(2)
    for i in range(a.batch_files):
        np.savetxt(os.path.join(folder, f"p{i:05d}.csv"), rng.random((1000, 2)), delimiter=",")
    one = [nul, "test", os.path.join(folder, "p00000.csv"), "-w", "rect:0,0,1,1", "--method",
           "asymptotic", "--seed", "1"]
    _run_s(one)                  # warm-up at n = 1,000 (its Gumbel fits)
    t_one = statistics.median(_run_s(one) for _ in range(a.reps))
    batch = [nul, "batch", folder, "-w", "rect:0,0,1,1", "--method", "asymptotic", "--seed", "1",
             "--jobs", str(a.batch_jobs), "--no-progress", "--out", os.path.join(tmp, "b.csv")]
    t_batch = _run_s(batch)
    out.update(batch_files=a.batch_files, batch_jobs=a.batch_jobs, batch_s=t_batch,
               batch_patterns_per_s=a.batch_files / t_batch, single_1000_process_s=t_one,
               batch_over_single=t_batch / t_one, load_after=os.getloadavg())
    return out


def print_process(r) -> None:
    print(f"load average before {r['load_before'][0]:.2f}, after {r['load_after'][0]:.2f}")
    print(f"whole process, n = {r['n']}: `nullatlas test --method asymptotic` "
          f"{r['instant_process_s']:.3f} s against `python -c \"import numpy\"` "
          f"{r['import_numpy_s']:.3f} s (medians, alternating; first run {r['warmup_s']:.2f} s)")
    print(f"whole process, Monte Carlo ({r['mc_sims']} sims) {r['mc_process_s']:.2f} s: "
          f"x{r['mc_over_instant']:.1f} the instant command")
    print(f"nullatlas batch of {r['batch_files']} instant tests of 1,000 points "
          f"(--jobs {r['batch_jobs']}): {r['batch_s']:.1f} s, "
          f"{r['batch_patterns_per_s']:.0f} patterns/s; one such test as a whole process "
          f"{r['single_1000_process_s']:.3f} s, so the batch costs as much as "
          f"{r['batch_over_single']:.0f} of them")


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
    ap.add_argument("--only", choices=("all", "process"), default="all")
    ap.add_argument("--reps", type=int, default=7, help="whole-process repetitions (medians)")
    ap.add_argument("--proc-sims", type=int, default=199, help="Monte Carlo sims, whole process")
    ap.add_argument("--batch-files", type=int, default=1000)
    ap.add_argument("--batch-jobs", type=int, default=1)
    a = ap.parse_args(argv)

    with tempfile.TemporaryDirectory() as tmp:
        proc = whole_process(a, tmp)
    if a.only == "process":
        if a.json:
            json.dump(proc, sys.stdout, indent=1)
            sys.stdout.write("\n")
        else:
            print_process(proc)
        return 0

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
           "primary_p_instant": inst.pvalue, "primary_p_mc": mc.pvalue, "process": proc}
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
        print_process(proc)
    return 0


if __name__ == "__main__":
    sys.exit(main())
