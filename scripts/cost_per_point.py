"""Time and peak memory per point of one simulated calibration pattern.

The lower bounds in ``lookup/limits.py`` (``SECONDS_PER_POINT``,
``BYTES_PER_POINT``) are set below what this prints, so that the refusals of
requests that cannot finish say "at least" truthfully::

    python scripts/cost_per_point.py            # 2D n = 1,000,000 and 3D n = 200,000
    python scripts/cost_per_point.py --dim 2 --n 300000

Each size runs in a fresh process, so that the peak memory is its own.
"""
from __future__ import annotations

import argparse
import json
import subprocess
import sys

CHILD = r"""
import json, resource, sys, time
from nullatlas.calibrate.plan import DEFAULT_STATS
from nullatlas.calibrate.runner import simulate_chunk
d, n = int(sys.argv[1]), int(sys.argv[2])
spec = "rect:0,0,1,1" if d == 2 else "box:0,0,0,1,1,1"
simulate_chunk(spec, 1000, DEFAULT_STATS[d], 1, d, "square", 0, 1)      # compile / load kernels
before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
t = time.perf_counter()
simulate_chunk(spec, n, DEFAULT_STATS[d], 1, d, "square", 0, 1)
dt = time.perf_counter() - t
after = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps({"dim": d, "n": n, "seconds": dt, "extra_peak_bytes": (after - before) * 1024}))
"""


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--dim", type=int, choices=[2, 3])
    ap.add_argument("--n", type=int)
    a = ap.parse_args()
    runs = [(a.dim, a.n)] if a.dim and a.n else [(2, 1_000_000), (3, 200_000)]
    for d, n in runs:
        out = subprocess.run([sys.executable, "-c", CHILD, str(d), str(n)], check=True,
                             capture_output=True, text=True).stdout
        r = json.loads(out)
        print(f"{d}D n = {n:,}: {r['seconds']:.2f} s, {r['seconds'] / n * 1e6:.2f} us per point; "
              f"peak memory +{r['extra_peak_bytes'] / 2**20:.0f} MiB, "
              f"{r['extra_peak_bytes'] / n:.0f} bytes per point")


if __name__ == "__main__":
    main()
