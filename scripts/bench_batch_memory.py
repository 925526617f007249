#!/usr/bin/env python3
"""Peak memory of ``nullatlas batch`` against the batch size.

Writes K small CSR patterns (n = 60 points, .npy) for each K in --sizes,
runs ``nullatlas batch`` on them in a fresh process (instant test, one
worker, results to a CSV file) and prints the process's peak resident memory
(VmHWM) and run time for each K side by side, with their ratio.

    python scripts/bench_batch_memory.py [--sizes 1000,10000] [--json]
"""
from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time

CHILD = r"""
import sys
from nullatlas.lookup.cli import main
rc = main(sys.argv[1:])
with open("/proc/self/status") as fh:
    hwm = [l for l in fh if l.startswith("VmHWM")][0].split()[1]
sys.stderr.write(f"VMHWM_KB={hwm}\n")
sys.exit(rc)
"""


def run(k: int, folder: str, n: int = 60) -> dict:
    import numpy as np

    sub = os.path.join(folder, f"b{k}")
    os.makedirs(sub, exist_ok=True)
    rng = np.random.default_rng(k)
    for i in range(k):
        np.save(os.path.join(sub, f"p{i:06d}.npy"), rng.random((n, 2)))
    out = os.path.join(folder, f"res{k}.csv")
    t = time.perf_counter()
    p = subprocess.run([sys.executable, "-c", CHILD, "batch", sub, "-w", "rect:0,0,1,1",
                        "--stat", "total0", "--method", "asymptotic", "--seed", "1",
                        "--out", out, "--no-progress"], capture_output=True, text=True)
    dt = time.perf_counter() - t
    if p.returncode != 0:
        raise SystemExit(p.stderr)
    kb = int([ln for ln in p.stderr.splitlines() if ln.startswith("VMHWM_KB=")][0].split("=")[1])
    rows = sum(1 for _ in open(out)) - 1
    return {"files": k, "rows": rows, "peak_mib": kb / 1024, "seconds": dt}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--sizes", default="1000,10000")
    ap.add_argument("--json", action="store_true")
    a = ap.parse_args(argv)
    sizes = [int(x) for x in a.sizes.split(",")]
    with tempfile.TemporaryDirectory() as tmp:
        res = [run(k, tmp) for k in sizes]
    if a.json:
        json.dump(res, sys.stdout, indent=1)
        sys.stdout.write("\n")
    else:
        for r in res:
            print(f"{r['files']:>7} files: peak {r['peak_mib']:.0f} MiB, {r['seconds']:.1f} s "
                  f"({r['rows']} result rows)")
        print(f"peak ratio {res[-1]['peak_mib'] / res[0]['peak_mib']:.2f} for "
              f"{res[-1]['files'] / res[0]['files']:.0f}x the files")
    return 0


if __name__ == "__main__":
    sys.exit(main())
