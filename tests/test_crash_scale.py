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
        assert [r["pvalue"] for r in local.rows] == [r["pvalue"] for r in remote.rows]
    finally:
        for q in procs:
            q.kill()
            q.wait(10)


def _children(pid):
    """Every descendant process of ``pid`` as (pid, command line): psutil, or
    /proc scanned by parent pid where psutil is missing."""
    try:
        import psutil
    except ImportError:
        psutil = None
    if psutil is not None:
        try:
            return [(k.pid, " ".join(k.cmdline())) for k in psutil.Process(pid).children(True)]
        except psutil.Error:
            return []
    parent = {}
    for d in os.listdir("/proc"):
        if d.isdigit():
            try:
                with open(f"/proc/{d}/stat") as fh:
                    parent[int(d)] = int(fh.read().rsplit(")", 1)[1].split()[1])
            except (OSError, IndexError, ValueError):
                continue
    out, todo = [], [pid]
    while todo:
        p = todo.pop()
        for k, pp in parent.items():
            if pp == p:
                todo.append(k)
                try:
                    with open(f"/proc/{k}/cmdline", "rb") as fh:
                        out.append((k, fh.read().replace(b"\0", b" ").decode(errors="replace")))
                except OSError:
                    out.append((k, ""))
    return out


def _running(pid):
    """True while ``pid`` is a live process (not a zombie waiting to be reaped)."""
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return False


def test_sigterm_ends_the_worker_processes_too(tmp_path):
    """Issue 13: SIGTERM to 'nullatlas test --jobs 2' in the middle of a long
    Monte Carlo run takes the Ctrl-C path: the command ends promptly with
    status 143 and one line, and none of its worker processes is left
    running (they were left orphaned, computing on, before)."""
    err = open(tmp_path / "stderr.txt", "w+")
    p = subprocess.Popen([sys.executable, "-m", "nullatlas.lookup", "test",
                          os.path.join(os.path.dirname(os.path.dirname(__file__)), "examples",
                                       "wafer_lot_random.csv"),
                          "-w", "disk:0,0,150", "--method", "mc", "--sims", "200000", "--jobs",
                          "2", "--seed", "1", "--no-progress"],
                         stdout=subprocess.DEVNULL, stderr=err, cwd=tmp_path)
    kids = []
    try:
        t0 = time.time()
        while time.time() - t0 < 120 and p.poll() is None:
            kids = _children(p.pid)
            if sum("loky" in cmd and "resource_tracker" not in cmd for _, cmd in kids) >= 2:
                break
            time.sleep(0.1)
        assert sum("resource_tracker" not in cmd for _, cmd in kids) >= 2, kids   # workers run
        time.sleep(1.0)                                   # simulations under way
        kids = _children(p.pid)
        p.send_signal(signal.SIGTERM)
        assert p.wait(60) == 143
        err.seek(0)
        assert err.read().strip() == "nullatlas: terminated"
        t1 = time.time()                                  # helpers (resource trackers) see
        while time.time() - t1 < 10 and any(_running(k) for k, _ in kids):   # the parent gone
            time.sleep(0.1)
        assert [k for k, _ in kids if _running(k)] == []
    finally:                                              # never leave a process behind
        left = [k for k, _ in _children(p.pid) + kids if _running(k)] if p.poll() is None \
            else [k for k, _ in kids if _running(k)]
        if p.poll() is None:
            p.kill()
            p.wait(30)
        for k in left:
            try:
                os.kill(k, signal.SIGKILL)
            except OSError:
                pass
        err.close()
