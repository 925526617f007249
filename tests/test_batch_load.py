"""Load: the peak memory of `nullatlas batch` does not grow with the batch size
(1,000 vs 10,000 small patterns in fresh processes)."""
import os
import subprocess
import sys

import numpy as np
import pytest

CHILD = r"""
import sys
from nullatlas.lookup.cli import main
rc = main(sys.argv[1:])
with open("/proc/self/status") as fh:
    hwm = [l for l in fh if l.startswith("VmHWM")][0].split()[1]
sys.stderr.write(f"VMHWM_KB={hwm}\n")
sys.exit(rc)
"""


def _peak_kib(folder, k, rng):
    sub = folder / f"b{k}"
    sub.mkdir()
    for i in range(k):
        np.save(sub / f"p{i:06d}.npy", rng.random((60, 2)))
    out = folder / f"res{k}.csv"
    p = subprocess.run([sys.executable, "-c", CHILD, "batch", str(sub), "-w", "rect:0,0,1,1",
                        "--stat", "total0", "--method", "asymptotic", "--seed", "1", "--out",
                        str(out), "--no-progress"], capture_output=True, text=True)
    assert p.returncode == 0, p.stderr
    assert sum(1 for _ in open(out)) == k + 1
    return int([ln for ln in p.stderr.splitlines() if ln.startswith("VMHWM_KB=")][0].split("=")[1])


@pytest.mark.slow
@pytest.mark.skipif(not os.path.exists("/proc/self/status"), reason="needs /proc")
def test_batch_peak_memory_is_independent_of_batch_size(tmp_path):
    rng = np.random.default_rng(0)
    small = _peak_kib(tmp_path, 1_000, rng)
    large = _peak_kib(tmp_path, 10_000, rng)
    # 10x the files: rows are a few hundred bytes each, patterns are dropped
    assert large < small * 1.10 + 10_000, (small, large)
