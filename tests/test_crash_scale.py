"""Crash safety and scale-out: a calibration killed with SIGKILL resumes to the
same table; a build on a dask.distributed cluster of separate processes
survives a killed worker and gives the joblib table."""
import os
import shutil
import signal
import socket
import subprocess
import sys
import time

import numpy as np
import pytest

from nullatlas.lookup.inference.tablereader import open_table

# 6 chunks: n = 10,000 in chunks of 40 replicates, n = 20,000 in chunks of 20
BUILD = ["--shape", "square", "--n", "10000,20000", "--reps", "80", "--stat", "euler,nnmean",
         "--seed", "31", "--n-fit", "10", "--no-progress", "--json"]
CHUNKS = 2 + 4


def _cal(*args, **kw):
    return subprocess.Popen([sys.executable, "-c",
                             "import sys; from nullatlas.calibrate.cli import main; "
                             "sys.exit(main(sys.argv[1:]))", *args],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, **kw)


@pytest.mark.slow
def test_sigkill_mid_calibration_then_resume_gives_the_same_table(tmp_path, same_tables):
    ref = tmp_path / "ref.h5"
    p = _cal("build", *BUILD, "--out", str(ref))
    assert p.wait(300) == 0, p.stderr.read()
    out = tmp_path / "run.h5"
    parts = str(out) + ".parts"
    p = _cal("build", *BUILD, "--out", str(out))
    t0 = time.time()
    while time.time() - t0 < 240:
        if os.path.isdir(parts) and len([f for f in os.listdir(parts) if f.endswith(".h5")]) >= 2:
            break
        time.sleep(0.05)
    os.kill(p.pid, signal.SIGKILL)
    p.wait(30)
    assert not out.exists()                               # nothing half-written
    done = sorted(f for f in os.listdir(parts) if f.endswith(".h5"))
    assert 2 <= len(done) < CHUNKS                        # interrupted mid-run
    p = _cal("build", *BUILD, "--out", str(out))
    assert p.wait(300) == 0, p.stderr.read()
    same_tables(ref, out)                                 # no chunk lost or counted twice
    info = open_table(out)
    assert [c.replicates for c in info.cells] == [80, 80]
    assert not os.path.exists(parts)


def _free_port():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.mark.slow
def test_dask_cluster_of_processes_survives_a_killed_worker(tmp_path, same_tables):
    pytest.importorskip("distributed")
    if shutil.which("dask") is None:
        pytest.skip("the dask command is not installed")
    ref = tmp_path / "joblib.h5"
    p = _cal("build", *BUILD, "--out", str(ref), "--jobs", "2")
    assert p.wait(300) == 0, p.stderr.read()
    port = _free_port()
    addr = f"tcp://127.0.0.1:{port}"
    env = dict(os.environ, DASK_DISTRIBUTED__WORKER__DAEMON="False")
    procs = [subprocess.Popen(["dask", "scheduler", "--host", "127.0.0.1", "--port", str(port),
                               "--no-dashboard"], stdout=subprocess.DEVNULL,
                              stderr=subprocess.DEVNULL, env=env)]
    try:
        time.sleep(2)
        for _ in range(2):
            procs.append(subprocess.Popen(["dask", "worker", addr, "--nthreads", "1", "--nworkers",
                                           "1", "--no-dashboard"], stdout=subprocess.DEVNULL,
                                          stderr=subprocess.DEVNULL, env=env))
        out = tmp_path / "dask.h5"
        parts = str(out) + ".parts"
        b = _cal("build", *BUILD, "--out", str(out), "--dask-scheduler", addr)
        t0 = time.time()
        while time.time() - t0 < 240:
            if os.path.isdir(parts) and len(os.listdir(parts)) >= 2:
                break
            time.sleep(0.05)
        assert len(os.listdir(parts)) < CHUNKS
        os.kill(procs[1].pid, signal.SIGKILL)             # a worker dies mid-run
        assert b.wait(300) == 0, b.stderr.read()
        same_tables(ref, out)
        # nullatlas batch on the same cluster (one worker left) equals a local run
        folder = tmp_path / "files"
        folder.mkdir()
        rng = np.random.default_rng(3)
        for i in range(6):
            np.save(folder / f"p{i}.npy", rng.random((120, 2)))
        from nullatlas.lookup.batch import collect_inputs, run_batch
        items = collect_inputs([str(folder)], "rect:0,0,1,1")
        kw = dict(stats=["nnmean"], method="mc", n_sims=19, seed=5, progress=False)
        local = run_batch(items, jobs=2, **kw)
        remote = run_batch(items, scheduler=addr, **kw)
        assert [r["p_value"] for r in local.rows] == [r["p_value"] for r in remote.rows]
    finally:
        for q in procs:
            q.kill()
            q.wait(10)
