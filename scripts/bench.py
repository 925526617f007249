"""Speed and memory of nullatlas's persistence engine against gudhi, side by side.

Timings, not tests: run by hand on an otherwise idle machine.  Everything is
measured in one run and reported as ratios:

1. persistence time, ours against gudhi's alpha complex (``precision='fast'``,
   build + ``compute_persistence``) on the same CSR points, alternating the
   two, several repeats, medians: 2D n = 1e4, 1e5, 1e6 (all of H0 and H1) and
   3D n = 1e4, 1e5 (H0, H2 and all Betti curves);
2. equality of our diagrams with gudhi's ``precision='exact'`` on larger
   inputs than the test suite uses (random, a 0.1-spaced grid, offset);
3. peak memory (max RSS) of each engine, and of the whole
   ``nullatlas test`` command on a ``.npy`` file of 1e6 points, each in a
   fresh process;
4. numba compile time, cold (empty cache) and cached, in fresh processes;
5. Monte Carlo throughput with 1 and 2 workers.

    python scripts/bench.py              # everything (about 10 minutes)
    python scripts/bench.py --quick      # smaller sizes, one repeat
"""
from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
EXAMPLES = os.path.join(HERE, "..", "examples")


# --------------------------------------------------------------------------------------
# the two engines, as the benchmark calls them
# --------------------------------------------------------------------------------------

def ours(points):
    if points.shape[1] == 2:
        from nullatlas.lookup.persistence.alpha2d import alpha_pairs_2d

        return alpha_pairs_2d(points, sort=False)
    from nullatlas.lookup.persistence.alpha3d import betti_euler_3d

    a = betti_euler_3d(points)
    return a.betti_curves(np.linspace(0.0, 0.2, 200))


def gudhi_path(points, precision="fast"):
    import gudhi

    st = gudhi.AlphaComplex(points=points, precision=precision).create_simplex_tree()
    st.compute_persistence(min_persistence=0)
    return st


def _median_pair(f, g, repeats):
    tf, tg = [], []
    for _ in range(repeats):                 # alternate, so drifts hit both alike
        t = time.perf_counter()
        f()
        tf.append(time.perf_counter() - t)
        t = time.perf_counter()
        g()
        tg.append(time.perf_counter() - t)
    return float(np.median(tf)), float(np.median(tg))


def bench_speed(sizes2, sizes3, repeats, rows):
    print("1. persistence time, ours vs gudhi AlphaComplex(precision='fast'), median of "
          f"{repeats} alternating runs")
    warm = np.random.default_rng(0).random((500, 3))
    ours(warm[:, :2])
    ours(warm)
    for d, sizes in ((2, sizes2), (3, sizes3)):
        for n in sizes:
            pts = np.random.default_rng(n + d).random((n, d))
            reps = repeats if n < 1_000_000 else max(1, min(repeats, 2))
            to, tg = _median_pair(lambda: ours(pts), lambda: gudhi_path(pts), reps)
            what = "H0+H1 pairs" if d == 2 else "H0+H2 pairs, Betti curves"
            print(f"   {d}D n={n:>9,}: ours {to:8.3f} s   gudhi {tg:8.3f} s   "
                  f"ratio ours/gudhi {to / tg:6.3f}  (x{tg / to:5.1f} faster; {what})")
            rows.append({"part": "speed", "dim": d, "n": n, "ours_s": to, "gudhi_s": tg,
                         "ratio": to / tg})
    if sizes2:
        from scipy.spatial import Delaunay

        from nullatlas.lookup.persistence.delaunay2d import delaunay_mesh

        n = max(sizes2)
        pts = np.random.default_rng(7).random((n, 2))
        delaunay_mesh(pts[:100])
        tt, tq = _median_pair(lambda: delaunay_mesh(pts), lambda: Delaunay(pts - 0.5), 1)
        print(f"   2D n={n:>9,}: our exact triangulation alone {tt:.3f} s, scipy Qhull {tq:.3f} s")
        rows.append({"part": "triangulation", "n": n, "ours_s": tt, "qhull_s": tq})


# --------------------------------------------------------------------------------------
# equality with gudhi's exact mode
# --------------------------------------------------------------------------------------

def _ref_pairs(points, dims):
    st = gudhi_path(points, "exact")
    out = []
    for q in dims:
        iv = np.sqrt(np.asarray(st.persistence_intervals_in_dimension(q)).reshape(-1, 2))
        iv = iv[iv[:, 1] > iv[:, 0]]
        out.append(iv[np.lexsort((iv[:, 1], iv[:, 0]))])
    return out


def _compare(a, b):
    if a.shape != b.shape:
        return f"COUNT DIFFERS {len(a)} vs {len(b)}"
    fin = np.isfinite(b)
    if not np.array_equal(np.isfinite(a), fin):
        return "INFINITE CLASSES DIFFER"
    if not fin.any():
        return "equal (empty)"
    rel = float(np.max(np.abs(a[fin] - b[fin]) / np.maximum(np.abs(b[fin]), 1e-300)))
    return "identical" if rel == 0 else f"max rel diff {rel:.2e}"


def bench_equality(n2, n3, rows):
    from nullatlas.lookup.persistence.alpha2d import alpha_pairs_2d, sort_rows
    from nullatlas.lookup.persistence.alpha3d import betti_euler_3d

    print("2. equality with gudhi AlphaComplex(precision='exact') (counts and values)")
    rng = np.random.default_rng(3)
    g = np.arange(60) * 0.1
    grid = np.array(np.meshgrid(g, g)).reshape(2, -1).T
    cases2 = {f"random n={n2}": rng.random((n2, 2)),
              "0.1-spaced 60x60 grid": grid,
              f"random n={n2 // 4} offset by 1e6": rng.random((n2 // 4, 2)) + 1e6}
    for name, P in cases2.items():
        mine = [sort_rows(p) for p in alpha_pairs_2d(P)]
        ref = _ref_pairs(P, (0, 1))
        res = [_compare(a, b) for a, b in zip(mine, ref)]
        print(f"   2D {name:<32} H0: {res[0]:<22} H1: {res[1]}  ({len(ref[1])} H1 pairs)")
        rows.append({"part": "equality", "dim": 2, "case": name, "h0": res[0], "h1": res[1]})
    P = rng.random((n3, 3))
    a = betti_euler_3d(P)
    ref = _ref_pairs(P, (0, 1, 2))
    r = np.linspace(0, 0.3, 301)
    b1 = (ref[1][:, 0][:, None] <= r) & (ref[1][:, 1][:, None] > r)
    same_b1 = bool(np.array_equal(a.betti1(r), b1.sum(0)))
    tot = float(np.sum(ref[1][:, 1] - ref[1][:, 0]))
    res = [_compare(a.h0, ref[0]), _compare(a.h2, ref[2])]
    print(f"   3D random n={n3:<25} H0: {res[0]:<22} H2: {res[1]}; Betti-1 curve "
          f"{'identical' if same_b1 else 'DIFFERS'}; total H1 rel diff "
          f"{abs(a.total_h1 - tot) / tot:.1e}")
    rows.append({"part": "equality", "dim": 3, "n": n3, "h0": res[0], "h2": res[1],
                 "betti1_identical": same_b1})


# --------------------------------------------------------------------------------------
# fresh processes: memory, compile time, end to end
# --------------------------------------------------------------------------------------

# Peak memory is read from /proc/self/status (VmHWM, the high-water mark of
# this process's own address space): ru_maxrss would include the RSS of the
# parent at fork time, which Linux carries across execve.
_CHILD = r"""
import sys, time, numpy as np
sys.path.insert(0, {here!r})
from bench import ours, gudhi_path
pts = np.load({path!r})
t = time.perf_counter()
{call}(pts)
el = time.perf_counter() - t
hwm = [l for l in open("/proc/self/status") if l.startswith("VmHWM")][0].split()[1]
print(el, int(hwm) / 1024)
"""


def _fresh(code, env=None):
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         env=env, check=True).stdout.split()
    return float(out[-2]), float(out[-1])


def _peak_of_command(cmd):
    """Wall time and peak RSS (MiB) of a command run as the only child of a
    small fresh Python process (RUSAGE_CHILDREN then holds the command's own
    peak: the small launcher's RSS is all it inherits)."""
    code = ("import resource, subprocess, sys, time; t = time.perf_counter(); "
            f"subprocess.run({cmd!r}, check=True, stdout=subprocess.DEVNULL); "
            "print(time.perf_counter() - t, "
            "resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024)")
    return _fresh(code)


def bench_memory(n, rows):
    print(f"3. peak memory (max RSS of a fresh process), 2D CSR n={n:,}")
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "points.npy")
        np.save(path, np.random.default_rng(11).random((n, 2)) * 1000.0)
        small = os.path.join(tmp, "small.npy")
        np.save(small, np.random.default_rng(12).random((1000, 2)))
        _fresh(_CHILD.format(here=HERE, path=small, call="ours"))   # numba cache warm
        to, mo = _fresh(_CHILD.format(here=HERE, path=path, call="ours"))
        tg, mg = _fresh(_CHILD.format(here=HERE, path=path, call="gudhi_path"))
        print(f"   ours  {mo:8.0f} MiB  ({to:.2f} s)")
        print(f"   gudhi {mg:8.0f} MiB  ({tg:.2f} s)   memory ratio ours/gudhi {mo / mg:.3f}")
        exe = os.path.join(os.path.dirname(sys.executable), "nullatlas")
        cmd = [exe if os.path.exists(exe) else "nullatlas", "test", path,
               "--window", "rect:0,0,1000,1000", "--stat", "euler", "--sims", "1",
               "--seed", "1", "--no-progress", "--json"]
        te, me = _peak_of_command(cmd)
        print(f"   `nullatlas test` end to end ({' '.join(cmd[2:])}): {me:.0f} MiB, {te:.2f} s "
              f"= {te / tg:.3f} x gudhi's time for one diagram")
        print("     (the Monte Carlo route computes 2 diagrams here: the observed one and "
              "one null pattern)")
        rows.append({"part": "memory", "n": n, "ours_mib": mo, "gudhi_mib": mg,
                     "cli_mib": me, "cli_s": te, "gudhi_s": tg, "cli_ratio": te / tg})


def bench_compile(rows):
    print("4. numba compile time in a fresh process (first diagram of 500 points, 2D + 3D)")
    code = ("import time; t = time.perf_counter(); import numpy as np; "
            "from nullatlas.lookup.persistence.diagram import alpha_diagram; "
            "p = np.random.default_rng(0).random((500, 3)); "
            "alpha_diagram(p[:, :2]); alpha_diagram(p).betti_counts(1, np.r_[0.1]); "
            "print(time.perf_counter() - t, 0)")
    with tempfile.TemporaryDirectory() as cache:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache)
        cold, _ = _fresh(code, env)
        warm, _ = _fresh(code, env)
    print(f"   cold (empty cache) {cold:.1f} s, cached {warm:.2f} s")
    rows.append({"part": "compile", "cold_s": cold, "cached_s": warm})


def bench_throughput(sims, rows):
    from nullatlas.lookup import Disk, read_points
    from nullatlas.lookup.inference.montecarlo import simulate_null
    from nullatlas.lookup.processes.csr import replicate_seeds
    from nullatlas.lookup.summaries.statistics import resolve_stats

    print(f"5. Monte Carlo throughput, demo wafer window, {sims} null patterns, default statistics")
    n = len(read_points(os.path.join(EXAMPLES, "wafer_lot_clustered.csv")))
    w = Disk(0.0, 0.0, 150.0)
    stats = resolve_stats(None, 2)
    seeds = replicate_seeds(np.random.SeedSequence(1), sims)
    simulate_null(w, n, stats, seeds[:20], jobs=2)          # start the worker pool
    t = time.perf_counter()
    a = simulate_null(w, n, stats, seeds, jobs=1)
    t1 = time.perf_counter() - t
    t = time.perf_counter()
    b = simulate_null(w, n, stats, seeds, jobs=2)
    t2 = time.perf_counter() - t
    same = all(np.array_equal(a[k], b[k]) for k in a)
    print(f"   n={n}: 1 worker {sims / t1:7.1f} patterns/s, 2 workers {sims / t2:7.1f} patterns/s,"
          f" throughput ratio x{t1 / t2:.2f}; results identical: {same}")
    rows.append({"part": "throughput", "n": n, "sims": sims, "jobs1_per_s": sims / t1,
                 "jobs2_per_s": sims / t2, "ratio": t1 / t2, "identical": same})


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small sizes, one repeat")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--only", choices=["speed", "equality", "memory", "compile", "throughput"],
                    action="append", help="run only these parts (repeatable)")
    ap.add_argument("--json", metavar="FILE", help="also write the measurements as JSON")
    a = ap.parse_args()
    parts = a.only or ["speed", "equality", "memory", "compile", "throughput"]
    rows = []
    if a.quick:
        sizes2, sizes3, reps, mem_n, eq2, eq3, sims = [10_000, 100_000], [10_000], 1, 100_000, 5000, 1000, 400
    else:
        sizes2, sizes3, reps, mem_n, eq2, eq3, sims = ([10_000, 100_000, 1_000_000], [10_000, 100_000],
                                                       a.repeats, 1_000_000, 20_000, 5_000, 2000)
    print(f"machine: {os.cpu_count()} cores; python {sys.version.split()[0]}")
    if "speed" in parts:
        bench_speed(sizes2, sizes3, reps, rows)
    if "equality" in parts:
        bench_equality(eq2, eq3, rows)
    if "memory" in parts:
        bench_memory(mem_n, rows)
    if "compile" in parts:
        bench_compile(rows)
    if "throughput" in parts:
        bench_throughput(sims, rows)
    if a.json:
        with open(a.json, "w") as fh:
            json.dump(rows, fh, indent=1)


if __name__ == "__main__":
    main()
