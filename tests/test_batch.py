"""Batch mode: adjusted p-values against references, bounded memory, bad files,
determinism, manifests; and the figures of instant tests and batches."""
import json
import os
import tracemalloc

import numpy as np
import pytest
from scipy import stats as st

from nullatlas.lookup import cli, csr_test
from nullatlas.lookup.batch import collect_inputs, read_manifest, run_batch
from nullatlas.lookup.errors import OptionError
from nullatlas.lookup.inference.adjust import benjamini_hochberg, holm
from nullatlas.lookup.patterns import windows


def test_bh_matches_scipy_and_holm_matches_its_definition():
    rng = np.random.default_rng(0)
    for m in (1, 2, 7, 50):
        p = rng.random(m) ** 3
        # Benjamini & Hochberg (1995): scipy.stats.false_discovery_control
        np.testing.assert_allclose(benjamini_hochberg(p), st.false_discovery_control(p, method="bh"))
        # Holm (1979), from the definition: max_{j<=i} (m - j + 1) p_(j), capped at 1
        o = np.argsort(p)
        ref = np.empty(m)
        run = 0.0
        for i, k in enumerate(o):
            run = max(run, min(1.0, (m - i) * p[k]))
            ref[k] = run
        np.testing.assert_allclose(holm(p), ref)
    q = np.array([0.01, np.nan, 0.04])
    assert np.isnan(holm(q)[1]) and holm(q)[0] == pytest.approx(0.02)
    with pytest.raises(ValueError):
        holm([1.5])


def _files(folder, k, n=120, bad=False):
    w = windows.Rectangle(0, 0, 1, 1)
    rng = np.random.default_rng(1)
    os.makedirs(folder, exist_ok=True)
    for i in range(k):
        np.save(os.path.join(folder, f"p{i:04d}.npy"), w.sample(n, rng))
    if bad:
        with open(os.path.join(folder, "p0002.csv"), "w") as fh:
            fh.write("x,y\n0.1,0.2\n0.5,abc\n")


def test_batch_reports_a_bad_file_and_processes_the_rest(tmp_path):
    _files(tmp_path / "in", 6, bad=True)
    items = collect_inputs([str(tmp_path / "in")], "rect:0,0,1,1")
    res = run_batch(items, stats=["total0"], method="asymptotic", seed=3, progress=False)
    assert len(res.rows) == 7 and len(res.failed) == 1
    badrow = res.failed[0]
    assert badrow["file"].endswith("p0002.csv") and "abc" in badrow["error"]
    ok = [r for r in res.rows if not r["error"]]
    assert all(0 < r["pvalue"] <= 1 and r["pvalue_holm"] >= r["pvalue"] for r in ok)
    p = np.array([r["pvalue"] for r in ok])
    np.testing.assert_allclose([r["pvalue_bh"] for r in ok], st.false_discovery_control(p))


def test_batch_is_the_same_for_any_number_of_workers(tmp_path):
    _files(tmp_path / "in", 5)
    items = collect_inputs([str(tmp_path / "in" / "*.npy")], "rect:0,0,1,1")
    kw = dict(stats=["nnmean"], method="mc", n_sims=19, seed=11, progress=False)
    a = run_batch(items, jobs=1, **kw)
    b = run_batch(items, jobs=2, **kw)
    assert [r["pvalue"] for r in a.rows] == [r["pvalue"] for r in b.rows]
    assert len({r["seed"] for r in a.rows}) == 5          # a distinct seed per file


@pytest.mark.slow
def test_batch_memory_is_bounded_by_one_pattern(tmp_path):
    """200 small files: the peak of traced allocations does not grow with the
    number of files (50 vs 200), since each file is read, tested and dropped."""
    _files(tmp_path / "in", 200, n=80)
    items = collect_inputs([str(tmp_path / "in")], "rect:0,0,1,1")
    peaks = []
    for k in (50, 200):
        run_batch(items[:5], stats=["total0"], method="asymptotic", seed=1, progress=False)
        tracemalloc.start()
        res = run_batch(items[:k], stats=["total0"], method="asymptotic", seed=1, progress=False)
        peaks.append(tracemalloc.get_traced_memory()[1])
        tracemalloc.stop()
        assert len(res.rows) == k and not res.failed
    assert peaks[1] < peaks[0] + 2_000_000, peaks      # rows are small; patterns are not kept


def test_manifest_windows_and_escape(tmp_path):
    _files(tmp_path / "m", 2)
    man = tmp_path / "m" / "list.csv"
    man.write_text("file,window\np0000.npy,rect:0,0,1,1\np0001.npy,\"rect:0,0,1,1\"\n")
    items = read_manifest(str(man))
    assert [os.path.basename(i.path) for i in items] == ["p0000.npy", "p0001.npy"]
    evil = tmp_path / "m" / "evil.csv"
    evil.write_text("file,window\n../../etc/passwd,rect:0,0,1,1\n")
    with pytest.raises(OptionError, match="outside the manifest's folder"):
        read_manifest(str(evil))
    with pytest.raises(OptionError, match="columns 'file' and 'window'"):
        (tmp_path / "m" / "nohead.csv").write_text("a,b\n1,2\n")
        read_manifest(str(tmp_path / "m" / "nohead.csv"))


def test_batch_cli_writes_csv_json_and_figure(tmp_path, capsys):
    _files(tmp_path / "in", 4)
    out, fig = tmp_path / "res.json", tmp_path / "batch.png"
    rc = cli.main(["batch", str(tmp_path / "in"), "-w", "rect:0,0,1,1", "--stat", "total0",
                   "--method", "asymptotic", "--seed", "2", "--out", str(out), "--plot", str(fig),
                   "--json", "--no-progress"])
    assert rc == 0
    d = json.loads(capsys.readouterr().out)
    assert d["files"] == 4 and d["failed"] == 0 and json.loads(out.read_text())["rows"]
    assert fig.stat().st_size > 1000
    rc = cli.main(["batch", str(tmp_path / "in"), "-w", "rect:0,0,1,1", "--out", str(tmp_path / "x.txt")])
    assert rc == 2 and "--out must end" in capsys.readouterr().err


def test_figures_have_the_expected_panels(tmp_path):
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from nullatlas.lookup.plots import plot_result
    w = windows.Disk(0, 0, 1)
    pts = w.sample(1500, np.random.default_rng(3))
    r = csr_test(pts, w, ["euler", "total0", "nnmean"], method="asymptotic", seed=1)
    seen = {}
    real = plt.Figure.savefig

    def spy(self, *a, **k):
        seen["titles"] = [ax.get_title() for ax in self.axes]
        seen["xlabels"] = [ax.get_xlabel() for ax in self.axes]
        return real(self, *a, **k)

    plt.Figure.savefig = spy
    try:
        plot_result(r, str(tmp_path / "r.png"))
    finally:
        plt.Figure.savefig = real
    assert any("persistence diagram" in t for t in seen["titles"])
    assert any(t.startswith("euler") for t in seen["titles"])
    assert any("z" in x for x in seen["xlabels"])
    assert (tmp_path / "r.png").stat().st_size > 1000


def test_interrupted_batch_resumes_without_recomputing(tmp_path, monkeypatch, capsys):
    """A batch killed after 3 files and resumed with --resume tests only the
    others, and its results equal an uninterrupted run's."""
    from nullatlas.lookup import batch as B
    _files(tmp_path / "in", 6)
    args = ["batch", str(tmp_path / "in"), "-w", "rect:0,0,1,1", "--stat", "nnmean", "--method",
            "mc", "--sims", "9", "--seed", "4", "--no-progress", "--json"]
    assert cli.main(args + ["--out", str(tmp_path / "ref.json")]) == 0
    ref = json.loads((tmp_path / "ref.json").read_text())["rows"]
    real, calls = B._one, []

    def dying(item, opts, seed):
        if len(calls) == 3:
            raise KeyboardInterrupt
        calls.append(item.path)
        return real(item, opts, seed)

    monkeypatch.setattr(B, "_one", dying)
    out = tmp_path / "run.json"
    assert cli.main(args + ["--out", str(out)]) == 130
    assert not out.exists() and (tmp_path / "run.json.journal.jsonl").exists()
    calls.clear()
    monkeypatch.setattr(B, "_one", lambda it, o, s: (calls.append(it.path), real(it, o, s))[1])
    capsys.readouterr()
    assert cli.main(args + ["--out", str(out), "--resume"]) == 0
    assert len(calls) == 3                                   # only the unfinished files
    assert json.loads(out.read_text())["rows"] == ref
    assert not (tmp_path / "run.json.journal.jsonl").exists()
    # a journal of other options is refused
    (tmp_path / "x.json.journal.jsonl").write_text(json.dumps({"journal": "nullatlas-batch"}) + "\n")
    assert cli.main(args[:-1] + ["--out", str(tmp_path / "x.json"), "--resume"]) == 2


def test_batch_exit_status(tmp_path, monkeypatch, capsys):
    """Issue 13: 2 for what is wrong for every file (a malformed --window, a
    bad shared option, a missing named file), refused before any file is
    tested; 2 when every file fails; 1 when some fail; 0 when none does."""
    from nullatlas.lookup import batch as B

    _files(tmp_path / "in", 3)
    folder = str(tmp_path / "in")
    opts = ["--stat", "total0", "--method", "asymptotic", "--seed", "1", "--no-progress"]
    real, calls = B._one, []
    monkeypatch.setattr(B, "_one", lambda it, o, s: (calls.append(it.path), real(it, o, s))[1])
    refused = [
        (["batch", folder, "-w", "rect:0,0,1", *opts], "rect needs 4 numbers"),
        (["batch", folder, "-w", "rect:0,0,1,1", "--alpha", "1.5", *opts], "alpha"),
        (["batch", folder, "-w", "rect:0,0,1,1", "--stat", "nosuch", *opts], "unknown statistic"),
        (["batch", folder, "-w", "rect:0,0,1,1", "--columns", "x,,y", *opts], "--columns"),
        (["batch", folder, str(tmp_path / "gone.csv"), "-w", "rect:0,0,1,1", *opts],
         "gone.csv: no such points file"),
    ]
    for argv, frag in refused:
        assert cli.main(argv) == 2, argv
        err = capsys.readouterr().err
        assert frag in err and err.count("\n") == 1, err
    assert calls == []                                            # before any work
    # every file fails (no point inside the window): 2, rows still printed as JSON
    assert cli.main(["batch", folder, "-w", "rect:5,5,6,6", *opts, "--json"]) == 2
    out = capsys.readouterr()
    assert json.loads(out.out)["failed"] == 3 and "every file failed" in out.err
    # some fail: 1, with the others tested and adjusted
    with open(tmp_path / "in" / "p9999.csv", "w") as fh:
        fh.write("x,y\n0.1,abc\n")
    assert cli.main(["batch", folder, "-w", "rect:0,0,1,1", *opts, "--json"]) == 1
    out = capsys.readouterr()
    d = json.loads(out.out)
    assert d["failed"] == 1 and all(r["pvalue_holm"] is not None for r in d["rows"][:3])
    assert "1 of 4 files failed" in out.err and out.err.count("\n") == 1
    os.unlink(tmp_path / "in" / "p9999.csv")
    assert cli.main(["batch", folder, "-w", "rect:0,0,1,1", *opts]) == 0
    capsys.readouterr()
    with pytest.raises(SystemExit):
        cli.main(["batch", "--help"])
    assert "1 some files failed" in " ".join(capsys.readouterr().out.split())


def test_manifest_window_files_are_resolved_and_confined(tmp_path, monkeypatch):
    """Issue 13: a window file named in a manifest (polygon, raster mask) is
    found in the manifest's folder whatever the current folder, and one
    outside it (absolute or ../) is refused unless allow_absolute, as for
    points files; a missing points file of a manifest is refused up front."""
    m = tmp_path / "m"
    _files(m, 2)
    (m / "sq.wkt").write_text("POLYGON((0 0, 1 0, 1 1, 0 1, 0 0))")
    np.save(m / "mask.npy", np.ones((4, 4)))
    (m / "list.csv").write_text("file,window\np0000.npy,sq.wkt\n"
                                "p0001.npy,\"mask:mask.npy,0.25\"\n")
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)                                   # not the manifest's folder
    items = read_manifest(str(m / "list.csv"))
    assert items[0].window == str(m / "sq.wkt")
    assert items[1].window == f"mask:{m / 'mask.npy'},0.25"
    res = run_batch(items, stats=["total0"], method="asymptotic", seed=1, progress=False)
    assert not res.failed and all(0 < r["pvalue"] <= 1 for r in res.rows)
    outside = tmp_path / "outside.wkt"
    outside.write_text("POLYGON((0 0, 1 0, 1 1, 0 1, 0 0))")
    for win in (str(outside), "../outside.wkt", f"mask:{m / 'mask.npy'},0.25"):
        (m / "bad.csv").write_text(f"file,window\np0000.npy,\"{win}\"\n")
        with pytest.raises(OptionError, match="outside the manifest's folder"):
            read_manifest(str(m / "bad.csv"))
        assert read_manifest(str(m / "bad.csv"), allow_absolute=True)[0].window.endswith(
            win.split("/")[-1])
    (m / "gone.csv").write_text("file,window\nnothere.npy,rect:0,0,1,1\n")
    with pytest.raises(OptionError, match="row 2: no such points file 'nothere.npy'"):
        read_manifest(str(m / "gone.csv"))


def test_resume_retests_files_changed_after_the_kill(tmp_path, monkeypatch, capsys):
    """Issue 13: the journal records each file's size, time and SHA-256; on
    --resume a file changed since it was tested -- even with its size and
    modification time put back -- is tested again, the others are not; rows
    of an old journal without identities are all tested again (said once)."""
    from nullatlas.lookup import batch as B

    folder = tmp_path / "in"
    _files(folder, 4)
    args = ["batch", str(folder), "-w", "rect:0,0,1,1", "--stat", "nnmean", "--method",
            "asymptotic", "--seed", "4", "--no-progress", "--json"]
    out, journal = tmp_path / "run.json", tmp_path / "run.json.journal.jsonl"
    real, calls = B._one, []

    def dying(item, opts, seed):
        if len(calls) == 3:
            raise KeyboardInterrupt
        calls.append(item.path)
        return real(item, opts, seed)

    monkeypatch.setattr(B, "_one", dying)
    assert cli.main(args + ["--out", str(out)]) == 130
    # after the kill: p0000 gets other points; p0001 other bytes of the same
    # size, with its modification time put back
    np.save(folder / "p0000.npy", windows.Rectangle(0, 0, 1, 1).sample(150, np.random.default_rng(9)))
    p1 = folder / "p0001.npy"
    st = p1.stat()
    pts = np.load(p1)
    pts[0] = [0.123456, 0.654321]
    np.save(p1, pts)
    os.utime(p1, ns=(st.st_atime_ns, st.st_mtime_ns))
    assert p1.stat().st_size == st.st_size and p1.stat().st_mtime_ns == st.st_mtime_ns
    calls.clear()
    monkeypatch.setattr(B, "_one", lambda it, o, s: (calls.append(it.path), real(it, o, s))[1])
    capsys.readouterr()
    assert cli.main(args + ["--out", str(out), "--resume"]) == 0
    err = capsys.readouterr().err
    assert "2 file(s) changed" in err and "p0000.npy, p0001.npy" in err
    assert sorted(os.path.basename(c) for c in calls) == ["p0000.npy", "p0001.npy", "p0003.npy"]
    assert cli.main(args + ["--out", str(tmp_path / "ref.json")]) == 0   # uninterrupted, new files
    assert json.loads(out.read_text())["rows"] == json.loads((tmp_path / "ref.json").read_text())["rows"]
    # a version-1 journal (no identities): every row is tested again, said once
    monkeypatch.setattr(B, "_one", dying)
    calls.clear()
    assert cli.main(args + ["--out", str(out)]) == 130
    lines = [json.loads(ln) for ln in journal.read_text().splitlines()]
    lines[0]["version"] = 1
    for r in lines[1:]:
        r.pop("_input")
    journal.write_text("".join(json.dumps(r) + "\n" for r in lines))
    calls.clear()
    monkeypatch.setattr(B, "_one", lambda it, o, s: (calls.append(it.path), real(it, o, s))[1])
    capsys.readouterr()
    assert cli.main(args + ["--out", str(out), "--resume"]) == 0
    err = capsys.readouterr().err
    assert err.count("older nullatlas") == 1 and "3 row(s)" in err
    assert len(calls) == 4
    assert json.loads(out.read_text())["rows"] == json.loads((tmp_path / "ref.json").read_text())["rows"]


def test_resume_of_a_finished_batch_says_why_it_retests(tmp_path, capsys):
    """Issue 14: --resume on a batch that finished (its journal removed) says
    so instead of silently recomputing; --out JSON has the keys of --json."""
    _files(tmp_path / "in", 2)
    out = tmp_path / "run.json"
    args = ["batch", str(tmp_path / "in"), "-w", "rect:0,0,1,1", "--stat", "nnmean", "--method",
            "mc", "--sims", "9", "--seed", "4", "--no-progress", "--json", "--out", str(out)]
    assert cli.main(args) == 0
    printed = json.loads(capsys.readouterr().out)
    written = json.loads(out.read_text())
    assert set(written) == set(printed) and written == printed
    assert cli.main(args + ["--resume"]) == 0
    err = capsys.readouterr().err
    assert "had finished" in err and "every file is tested again" in err
    assert cli.main(args[:-1] + [str(tmp_path / "new.json"), "--resume"]) == 0
    assert "was interrupted" in capsys.readouterr().err
