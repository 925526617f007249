"""Hostile environments (issue 13): a read-only folder or a full disk ends in
one line naming the file that could not be written and why, exit status 2,
no partial file, and the work already done kept (batch journal, calibration
checkpoints) so that the same command resumes."""
import errno
import json
import os
import tempfile

import numpy as np
import pytest

from nullatlas.calibrate import cli as ccli
from nullatlas.lookup import cli
from nullatlas.lookup.patterns import windows

EX = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "examples")
WAFER = os.path.join(EX, "wafer_lot_random.csv")
NOSPACE = os.strerror(errno.ENOSPC)


@pytest.fixture
def readonly(tmp_path, monkeypatch):
    """(folder, reason): a folder where no file can be created.  chmod 0o555
    where permissions hold; as root (who ignores them) a disk that refuses
    every new file in that folder with ENOSPC, so the test still runs."""
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    reason = os.strerror(errno.EACCES)
    if os.access(ro, os.W_OK):
        real = tempfile.mkstemp

        def full(*a, dir=None, **k):
            if dir is not None and os.path.realpath(dir) == os.path.realpath(ro):
                raise OSError(errno.ENOSPC, NOSPACE)
            return real(*a, dir=dir, **k)

        monkeypatch.setattr(tempfile, "mkstemp", full)
        reason = NOSPACE
    yield ro, reason
    ro.chmod(0o755)
    assert os.listdir(ro) == []                     # nothing, not even a temporary file


def _one_line(capsys, path, reason):
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err, err
    assert f"cannot write {path}: {reason}" in err, err
    return err


def _files(folder, k, n=120):
    w = windows.Rectangle(0, 0, 1, 1)
    rng = np.random.default_rng(1)
    os.makedirs(folder, exist_ok=True)
    for i in range(k):
        np.save(os.path.join(folder, f"p{i:04d}.npy"), w.sample(n, rng))


def test_readonly_folder_for_every_writer(tmp_path, readonly, capsys):
    ro, reason = readonly
    args = ["-w", "disk:0,0,150", "--method", "asymptotic", "--stat", "nnmean", "--seed", "1"]
    assert cli.main(["test", WAFER, *args, "--plot", str(ro / "x.png")]) == 2
    _one_line(capsys, ro / "x.png", reason)
    _files(tmp_path / "in", 2)
    batch = ["batch", str(tmp_path / "in"), "-w", "rect:0,0,1,1", "--stat", "total0",
             "--method", "asymptotic", "--no-progress"]
    assert cli.main([*batch, "--out", str(ro / "res.csv")]) == 2
    _one_line(capsys, ro / "res.csv", reason)
    assert cli.main([*batch, "--plot", str(ro / "b.png")]) == 2
    _one_line(capsys, ro / "b.png", reason)
    build = ["build", "--shape", "square,disk", "--n", "30,60", "--reps", "20", "--stat",
             "nnmean", "--n-fit", "10", "--no-progress", "--seed", "3"]
    assert ccli.main([*build, "--out", str(ro / "t.h5")]) == 2
    _one_line(capsys, ro / "t.h5", reason)
    table = tmp_path / "t.h5"
    assert ccli.main([*build, "--out", str(table)]) == 0
    capsys.readouterr()
    assert ccli.main(["fit", str(table), "--plot", str(ro / "fit.png")]) == 2
    _one_line(capsys, ro / "fit.png", reason)
    for sub in (["check", "--shape", "square", "--n", "50", "--reps", "20"],
                ["power", "--shape", "square", "--n", "50", "--alt", "thomas", "--reps", "20"]):
        assert ccli.main([*sub, "--table", str(table), "--plot", str(ro / "c.png")]) == 2
        _one_line(capsys, ro / "c.png", reason)


def test_full_disk_while_writing_a_figure_leaves_nothing(tmp_path, monkeypatch, capsys):
    """The disk fills up in the middle of the figure: the bytes written so far
    are removed, and the line names the figure, not a temporary file."""
    import matplotlib.figure

    def half_then_full(self, fname, *a, **k):
        with open(fname, "wb") as fh:
            fh.write(b"\x89PNG half a figure")
        raise OSError(errno.ENOSPC, NOSPACE)

    monkeypatch.setattr(matplotlib.figure.Figure, "savefig", half_then_full)
    fig = tmp_path / "x.png"
    assert cli.main(["test", WAFER, "-w", "disk:0,0,150", "--method", "asymptotic", "--stat",
                     "nnmean", "--plot", str(fig)]) == 2
    _one_line(capsys, fig, NOSPACE)
    assert os.listdir(tmp_path) == []


def test_full_disk_in_a_batch_keeps_the_results_and_resumes(tmp_path, monkeypatch, capsys):
    """A full disk while appending to the journal (after 2 files) or while
    writing --out: status 2, one line naming the file and where the finished
    rows are; the same command with --resume then finishes without testing
    a file twice, and gives the uninterrupted results."""
    from nullatlas.lookup import batch as B

    _files(tmp_path / "in", 4)
    args = ["batch", str(tmp_path / "in"), "-w", "rect:0,0,1,1", "--stat", "nnmean", "--method",
            "mc", "--sims", "9", "--seed", "4", "--no-progress", "--json"]
    assert cli.main(args + ["--out", str(tmp_path / "ref.json")]) == 0
    ref = json.loads((tmp_path / "ref.json").read_text())["rows"]
    out = tmp_path / "run.json"
    journal = tmp_path / "run.json.journal.jsonl"
    real_fsync, synced = os.fsync, []

    def fills_up(fd):
        if len(synced) == 2:
            raise OSError(errno.ENOSPC, NOSPACE)
        synced.append(fd)
        return real_fsync(fd)

    monkeypatch.setattr(B.os, "fsync", fills_up)
    capsys.readouterr()
    assert cli.main(args + ["--out", str(out)]) == 2
    err = _one_line(capsys, journal, NOSPACE)
    assert "2 file(s) finished before are kept" in err and "--resume" in err
    monkeypatch.setattr(B.os, "fsync", real_fsync)
    real_one, calls = B._one, []
    monkeypatch.setattr(B, "_one", lambda it, o, s: (calls.append(it.path), real_one(it, o, s))[1])

    monkeypatch.setattr(B, "write_results", lambda res, path: _atomic_full(path))
    assert cli.main(args + ["--out", str(out), "--resume"]) == 2
    err = _one_line(capsys, out, NOSPACE)
    assert f"kept in {journal}" in err and journal.exists() and not out.exists()
    assert sorted(os.listdir(tmp_path)) == ["in", "ref.json", journal.name]   # no temporary file
    assert 1 <= len(calls) <= 2            # the rest was tested (a row written before its sync failed counts)
    calls.clear()
    monkeypatch.undo()
    monkeypatch.setattr(B, "_one", lambda it, o, s: (calls.append(it.path), real_one(it, o, s))[1])
    assert cli.main(args + ["--out", str(out), "--resume"]) == 0
    assert calls == []                                       # nothing tested twice
    assert json.loads(out.read_text())["rows"] == ref
    assert not journal.exists()


def test_results_file_write_failure_is_atomic(tmp_path, monkeypatch):
    """write_results on a disk that fills up after the header: no results
    file, no temporary file, one WriteError naming the results file."""
    from nullatlas.lookup import batch as B
    from nullatlas.lookup.errors import WriteError

    class Full:
        def __init__(self, fh):
            self.fh, self.rows = fh, 0

        def writerow(self, row):
            self.rows += 1
            if self.rows > 1:
                raise OSError(errno.ENOSPC, NOSPACE)
            self.fh.write(",".join(map(str, row)) + "\n")

    monkeypatch.setattr(B.csv, "writer", Full)
    res = B.BatchResult([{"file": "a", "secondary": {}, "pvalue": 0.5}])
    with pytest.raises(WriteError, match=f"cannot write .*res.csv: {NOSPACE}$"):
        B.write_results(res, str(tmp_path / "res.csv"))
    assert os.listdir(tmp_path) == []


def test_full_disk_at_the_end_of_a_build_keeps_the_chunks(tmp_path, monkeypatch, capsys):
    from nullatlas.calibrate import build, runner

    real_write = build.write_table
    argv = ["build", "--shape", "square,disk", "--n", "30,60", "--reps", "20", "--stat",
            "nnmean", "--n-fit", "10", "--no-progress", "--seed", "3", "--out",
            str(tmp_path / "t.h5")]
    monkeypatch.setattr(build, "write_table", lambda path, **kw: _atomic_full(path))
    assert ccli.main(argv) == 2
    err = _one_line(capsys, tmp_path / "t.h5", NOSPACE)
    assert "chunks simulated so far are kept" in err
    assert len(os.listdir(tmp_path / "t.h5.parts")) == 4 and not (tmp_path / "t.h5").exists()
    monkeypatch.setattr(build, "write_table", real_write)
    calls = []
    real_chunk = runner.simulate_chunk
    monkeypatch.setattr(runner, "simulate_chunk", lambda *a, **k: (calls.append(a),
                                                                  real_chunk(*a, **k))[1])
    assert ccli.main(argv) == 0 and calls == []               # resumed from the checkpoints
    assert (tmp_path / "t.h5").exists()


def _atomic_full(path):
    """A write that runs out of space half-way, through atomic_path."""
    from nullatlas.lookup.atomic import atomic_path

    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            fh.write(b"\x89HDF half a table")
        raise OSError(errno.ENOSPC, NOSPACE)
