"""Calibration engine: reproducibility (jobs, resume, Dask), the audit, n_min
and the finite-window model, including the Clark–Evans/Donnelly outside check."""
import json
import os

import numpy as np
import pytest

from nullatlas.calibrate import build, cli, runner, shapes
from nullatlas.calibrate.assemble import ALPHAS, audit_cell
from nullatlas.calibrate.model import design, fit_model, holdout_errors, wls
from nullatlas.calibrate.nmin import n_min_table
from nullatlas.calibrate.plan import CellPlan, chunk_seed
from nullatlas.lookup.inference.tablereader import load_cell, open_table

TINY_STATS = ["euler", "total1", "maxpers1", "nnmean"]


def _tiny(out, jobs=1, reps=40, scheduler=None):
    return build.build_table(str(out), [("square", shapes.shape_window("square")),
                                        ("disk", shapes.shape_window("disk"))],
                             [30, 60], reps, stats=TINY_STATS, root_seed=7, jobs=jobs,
                             scheduler=scheduler, progress=False, n_fit=10)


def test_jobs_do_not_change_the_table(tmp_path, same_tables):
    _tiny(tmp_path / "a.h5", jobs=1)
    _tiny(tmp_path / "b.h5", jobs=2)
    same_tables(tmp_path / "a.h5", tmp_path / "b.h5")
    info = open_table(tmp_path / "a.h5")
    assert [(c.shape, c.n, c.replicates) for c in info.cells] == \
        [("disk", 30, 40), ("disk", 60, 40), ("square", 30, 40), ("square", 60, 40)]
    assert not os.path.exists(str(tmp_path / "a.h5") + ".parts")   # checkpoints removed


def test_interrupted_build_resumes_to_the_same_table(tmp_path, monkeypatch, same_tables):
    _tiny(tmp_path / "ref.h5")
    real = runner.simulate_chunk
    calls = []

    def dying(*args, **kw):
        if len(calls) == 2:
            raise KeyboardInterrupt
        calls.append(args)
        return real(*args, **kw)

    monkeypatch.setattr(runner, "simulate_chunk", dying)
    out = tmp_path / "run.h5"
    with pytest.raises(KeyboardInterrupt):
        _tiny(out)
    assert not out.exists()                                    # nothing half-written
    parts = os.listdir(str(out) + ".parts")
    assert len(parts) == 2                                     # two chunks checkpointed
    calls.clear()
    monkeypatch.setattr(runner, "simulate_chunk", lambda *a, **k: (calls.append(a), real(*a, **k))[1])
    _tiny(out)
    assert len(calls) == 4 - 2                                 # only the missing chunks ran
    same_tables(tmp_path / "ref.h5", out)


def test_checkpoint_of_another_run_is_refused(tmp_path):
    out = tmp_path / "t.h5"
    ck = runner.Checkpoints(str(out) + ".parts", 99, TINY_STATS)   # other seed
    plan = CellPlan(2, "square", 30, shapes.shape_window("square").spec(), 4.0, 40)
    ck.save(plan, 0, 40, {s: np.zeros((40, 1)) for s in TINY_STATS})
    with pytest.raises(ValueError, match="checkpoint of another run"):
        _tiny(out)


def test_dask_cluster_gives_the_joblib_table(tmp_path, same_tables):
    distributed = pytest.importorskip("distributed")
    _tiny(tmp_path / "joblib.h5", jobs=2)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster:
        _tiny(tmp_path / "dask.h5", scheduler=cluster.scheduler_address)
    same_tables(tmp_path / "joblib.h5", tmp_path / "dask.h5")


def test_extend_merges_moments_exactly(tmp_path):
    """Extending by R2 replicates gives the moments of all R1 + R2 replicates,
    the new ones drawn from chunk indices never used before."""
    out = tmp_path / "t.h5"
    _tiny(out, reps=40)
    build.extend_table(str(out), 30, jobs=1, progress=False)
    info = open_table(out)
    assert {c.replicates for c in info.cells} == {70}
    cell = [c for c in info.cells if c.shape == "square" and c.n == 30][0]
    raw = load_cell(out, cell.name)
    p = CellPlan(2, "square", 30, shapes.shape_window("square").spec(), 4.0, 70)
    first = runner.simulate_chunk(p.spec, 30, TINY_STATS, 7, 2, "square", 0, 40)
    second = runner.simulate_chunk(p.spec, 30, TINY_STATS, 7, 2, "square", 1, 30)
    allv = np.concatenate([first["total1"], second["total1"]])[:, 0]
    assert int(raw["total1"]["count"]) == 70
    assert np.isclose(float(raw["total1"]["mean"][0]), allv.mean(), rtol=1e-12)
    assert np.isclose(float(raw["total1"]["m2"][0, 0]), np.sum((allv - allv.mean()) ** 2),
                      rtol=1e-10)
    ext = np.concatenate([first["maxpers1"], second["maxpers1"]])[:, 0]
    np.testing.assert_array_equal(raw["maxpers1"]["values"], np.sort(ext).astype(np.float32))


def test_chunk_seeds_are_spawn_children():
    ss = np.random.SeedSequence(5, spawn_key=(2, 1, 3))
    kids = ss.spawn(4)
    from nullatlas.calibrate import plan
    base = plan.cell_seed(5, 2, "x", 3)
    mine = chunk_seed(5, 2, "x", 3, 3)
    assert mine.spawn_key == base.spawn_key + (3,)
    assert base.spawn(4)[3].generate_state(4).tolist() == mine.generate_state(4).tolist()
    assert kids[0].spawn_key == (2, 1, 3, 0)


# ---------------------------------------------------------------- audit / n_min

def test_audit_of_normal_and_skewed_statistics():
    rng = np.random.default_rng(0)
    R = 6000
    a = audit_cell("scalar", rng.standard_normal((R, 1)) * 3 + 1, rng)
    # exactly normal: every rate within 4 binomial SE of nominal
    for kind, target in (("lower", ALPHAS / 2), ("upper", ALPHAS / 2), ("two_sided", ALPHAS)):
        se = np.sqrt(target * (1 - target) / R)
        assert np.all(np.abs(a[kind] - target) < 4 * se + 0.002), kind
    assert a["ks"] < 0.03
    b = audit_cell("scalar", rng.exponential(size=(R, 1)), rng)
    # skewed to the right: lower tail empty, upper tail too heavy at 0.01
    assert b["lower"][1] < 0.005 and b["upper"][0] > 0.015 and b["ks"] > 0.1
    g = audit_cell("extreme", rng.gumbel(size=(R, 1)), rng)
    assert abs(g["upper"][1] - 0.05) < 0.012 and g["ks_gumbel"] < 0.03


def test_audit_of_correlated_gaussian_curves():
    rng = np.random.default_rng(1)
    k, R = 30, 4000
    idx = np.arange(k)
    C = 0.9 ** np.abs(idx[:, None] - idx[None, :])
    x = rng.standard_normal((R, k)) @ np.linalg.cholesky(C).T * (1 + idx) + idx
    a = audit_cell("curve", x, rng)
    assert abs(a["maxabs"][1] - 0.05) < 0.015 and abs(a["mahalanobis"][1] - 0.05) < 0.015
    # skewed grid points (counts with small means) are not used by the global
    # tests: with all points skewed there is no global rate at all
    y = rng.poisson(2.0, size=(R, k)).astype(float)
    ay = audit_cell("curve", y, rng)
    assert "maxabs" not in ay and "point_upper" in ay
    # ... and a Betti-type curve needs an expected count n E >= 100 as well
    g = rng.standard_normal((R, k)) * 0.01 + 0.5
    assert "maxabs" not in audit_cell("curve", g, rng, n=100, count_based=True)
    assert "maxabs" in audit_cell("curve", g, rng, n=400, count_based=True)


def test_n_min_needs_every_larger_cell_to_pass():
    good = {"n": 5000, "lower": np.array([0, 0.025, 0]), "upper": np.array([0, 0.026, 0]),
            "two_sided": np.array([0, 0.051, 0])}
    # N = 5000: 2 SE of a tail is 0.0044, so 0.025 +- (0.005 + 0.0044) passes
    bad_low = dict(good, lower=np.array([0, 0.012, 0]))
    edge = dict(good, upper=np.array([0, 0.034, 0]))
    cells = [{"shape": "s", "n": n, "audit": {"t": a}}
             for n, a in ((50, good), (100, bad_low), (200, good), (400, edge))]
    tests, v = n_min_table(cells, {"t": "scalar"})["s"]["t"]
    d = dict(zip(tests, v.tolist()))
    assert d == {"lower": 200, "upper": 50, "two_sided": 50}
    cells[-1]["audit"]["t"] = dict(good, n=500, upper=np.array([0, 0.034, 0]))   # N small: noisy
    assert dict(zip(*n_min_table(cells, {"t": "scalar"})["s"]["t"]))["upper"] == 50
    cells[-1]["audit"]["t"] = dict(good, upper=np.array([0, 0.040, 0]))          # clearly off
    assert dict(zip(*n_min_table(cells, {"t": "scalar"})["s"]["t"]))["upper"] == -1
    cells[-1]["audit"]["t"] = bad_low
    assert dict(zip(*n_min_table(cells, {"t": "scalar"})["s"]["t"]))["lower"] == -1


# ---------------------------------------------------------------- model

def test_model_recovers_known_coefficients():
    rng = np.random.default_rng(2)
    mu, c, e = np.array([0.3, -1.0]), np.array([0.07, 0.2]), np.array([-0.4, 1.5])
    cells = []
    for kappa in (4.0, 3.5449, 5.0):
        for n in (100, 200, 500, 1000, 5000, 20000):
            sd = np.array([0.01, 0.05]) / np.sqrt(n) * 5
            R = 3000
            true = mu + c * kappa / np.sqrt(n) + e / n
            cells.append({"name": f"{kappa}-{n}", "n": n, "kappa": kappa, "count": R,
                          "mean": true + rng.standard_normal(2) * sd / np.sqrt(R),
                          "var": sd ** 2 * (1 + rng.standard_normal(2) * np.sqrt(2 / R))})
    f = fit_model(cells, 2, n_fit=100)
    for j in range(2):
        for i, truth in enumerate((mu[j], c[j], e[j])):
            assert abs(f.mean_coef[j, i] - truth) < 4 * f.mean_se[j, i], (j, i)
    assert np.all(f.mean_chi2 / f.dof < 2.5)
    err = holdout_errors(f, cells[:3], 2)
    assert np.all(np.abs(err) < 4)
    # a wrong model (no boundary term) is rejected by its chi-square
    X = design([cl["n"] for cl in cells], [cl["kappa"] for cl in cells], 2)[:, [0, 2]]
    y = np.array([cl["mean"] for cl in cells])
    se = np.sqrt(np.array([cl["var"] for cl in cells]) / 3000)
    chi2 = wls(X, y, se)[3]
    assert np.all(chi2 / (len(cells) - 2) > 10)


def test_mean_nn_distance_recovers_clark_evans_and_donnelly(tmp_path):
    """Outside check of the finite-window model on real simulations.

    Clark & Evans (Ecology 35, 1954): mean nearest-neighbour distance
    0.5 / sqrt(lambda), i.e. mu = 0.5 in normalised units.  Donnelly (1978,
    in *Simulation Methods in Archaeology*; from memory, hence 4 SE):
    boundary coefficient c = 0.0514 of kappa n^(-1/2)."""
    targets = [(s, shapes.shape_window(s)) for s in ("square", "rect4", "disk")]
    s = build.build_table(str(tmp_path / "nn.h5"), targets, [100, 200, 400, 800, 1600], 600,
                          stats=["nnmean"], root_seed=3, jobs=2, progress=False, n_fit=100)
    m = s["model"]["nnmean"]
    assert abs(m["mu"] - 0.5) < 4 * m["mu_se"] + 1e-4
    assert abs(m["c"] - 0.0514) < 4 * m["c_se"]
    assert m["c_se"] < 0.01 and m["chi2"] / m["dof"] < 3


# ---------------------------------------------------------------- CLI

def test_cli_build_fit_and_tables(tmp_path, capsys):
    out = tmp_path / "c.h5"
    rc = cli.main(["build", "--shape", "square,rect4", "--n", "30,60,120,240", "--reps", "30",
                   "--out", str(out), "--stat", "nnmean,total0", "--no-progress", "--json",
                   "--n-fit", "30", "--seed", "4"])
    assert rc == 0
    s = json.loads(capsys.readouterr().out)
    assert s["cells"] == 8 and s["replicates"] == 240 and "nnmean" in s["model"]
    assert set(s["n_min"]) == {"square", "rect4"}
    rc = cli.main(["fit", str(out), "--holdout", "rect4", "--json"])
    s2 = json.loads(capsys.readouterr().out)
    assert rc == 0 and "holdout_rect4" in s2["model"]["nnmean"]
    from nullatlas.lookup import cli as lcli
    assert lcli.main(["tables", str(out), "--json"]) == 0
    t = json.loads(capsys.readouterr().out)["tables"][0]
    assert t["dimension"] == 2 and [c["n"] for c in t["shapes"]["square"]["cells"]] == [30, 60, 120, 240]
    assert "two_sided" in t["shapes"]["rect4"]["n_min"]["nnmean"]


@pytest.mark.parametrize("argv,frag", [
    (["build", "--shape", "hexagon", "--n", "50", "--reps", "30", "--out", "X.h5"], "unknown shape"),
    (["build", "--shape", "square,cube", "--n", "50", "--reps", "30", "--out", "X.h5"],
     "same dimension"),
    (["build", "--shape", "square", "--n", "50", "--reps", "5", "--out", "X.h5"], "at least 20"),
    (["build", "--shape", "square", "--n", "5", "--reps", "30", "--out", "X.h5"], "at least 10"),
    (["build", "--shape", "square", "--n", "50", "--reps", "30", "--out", "X.h5", "--jobs", "-1"],
     "--jobs"),
    (["build", "--window", "bbox", "--n", "50", "--reps", "30", "--out", "X.h5"], "window"),
    (["build", "--shape", "square", "--n", "50", "--reps", "30", "--out", "nofolder/X.h5"],
     "does not exist"),
    (["extend", "missing.h5", "--reps", "30"], "no such table"),
    (["fit", "missing.h5"], "no such table"),
    (["build", "--shape", "square", "--n", "5x", "--reps", "30", "--out", "X.h5"], "whole number"),
    (["build", "--shape", "square", "--n", "50.5", "--reps", "30", "--out", "X.h5"],
     "whole number"),
    (["build", "--shape", "square", "--n", "50", "--reps", "30", "--out", "x.csv"], "HDF5"),
    (["power", "--shape", "square", "--n", "3", "--alt", "thomas", "--reps", "20"], "at least 4"),
])
def test_cli_bad_input_is_one_line(tmp_path, monkeypatch, capsys, argv, frag):
    monkeypatch.chdir(tmp_path)
    with pytest.raises(SystemExit) if frag == "whole number" else _noraise():
        rc = cli.main(argv)
        assert rc == 2
    err = capsys.readouterr().err
    assert frag in err and err.count("\n") == 1 and "Traceback" not in err
    assert os.listdir(tmp_path) == []


class _noraise:
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


def test_cli_build_refuses_existing_output(tmp_path, capsys):
    out = tmp_path / "t.h5"
    out.write_bytes(b"keep me")
    rc = cli.main(["build", "--shape", "square", "--n", "50", "--reps", "30", "--out", str(out)])
    assert rc == 2 and "exists" in capsys.readouterr().err
    assert out.read_bytes() == b"keep me"


def test_user_window_normalisation_is_invariant():
    from nullatlas.lookup.patterns.windows import parse_window
    a = shapes.normalise(parse_window("polygon:POLYGON((0 0, 4 0, 5 2, 1 3, 0 0))"))
    b = shapes.normalise(parse_window("polygon:POLYGON((10 10, 10 18, 6 20, 4 12, 10 10))"))
    assert a[0] == b[0] and abs(a[1].measure - 1) < 1e-9          # rotated and scaled copy
    assert shapes.normalise(parse_window("rect:3,4,5,12"))[0] == "rect4"
    assert shapes.normalise(parse_window("disk:100,7,3"))[0] == "disk"
    assert shapes.normalise(parse_window("box:0,0,0,2,2,8"))[0] == "box114"
    name, w = shapes.normalise(parse_window("rect:0,0,3,1"))
    assert name == "rect-1x3" and abs(w.measure - 1) < 1e-12


def test_cli_builds_a_users_polygon_and_extends_it(tmp_path, capsys):
    """A user's own window: an L-shaped polygon, normalised, built, extended."""
    poly = tmp_path / "lshape.wkt"
    poly.write_text("POLYGON((0 0, 30 0, 30 10, 10 10, 10 30, 0 30, 0 0))")
    out = tmp_path / "mine.h5"
    assert cli.main(["build", "--window", str(poly), "--n", "40,80", "--reps", "24",
                     "--out", str(out), "--stat", "euler,nnmean", "--json", "--n-fit", "10"]) == 0
    s = json.loads(capsys.readouterr().out)
    info = open_table(out)
    shape = info.cells[0].shape
    assert shape.startswith("polygon-") and s["cells"] == 2
    from nullatlas.lookup.patterns.windows import parse_window
    w = parse_window(info.cells[0].spec)
    assert abs(w.measure - 1.0) < 1e-9 and abs(w.kappa - parse_window(str(poly)).kappa) < 1e-9
    assert cli.main(["extend", str(out), "--reps", "20", "--window", str(poly), "--n", "40",
                     "--json"]) == 0
    capsys.readouterr()
    reps = {c.n: c.replicates for c in open_table(out).cells}
    assert reps == {40: 44, 80: 24}


def test_shipped_tables_are_read_only_and_fit_refuses_an_empty_model(tmp_path, capsys):
    """Issue 13: extend/fit/validate refuse the installed tables (one line,
    status 2, file untouched); fit --n-fit beyond every cell says so before
    writing anything."""
    import hashlib
    import shutil

    from nullatlas.lookup.inference.tablereader import shipped_tables

    path = shipped_tables()[2]
    digest = hashlib.sha1(open(path, "rb").read()).hexdigest()
    for argv in (["extend", path, "--reps", "20"], ["fit", path], ["validate", path]):
        assert cli.main(argv) == 2
        err = capsys.readouterr().err
        assert "shipped with nullatlas" in err and err.count("\n") == 1
    assert hashlib.sha1(open(path, "rb").read()).hexdigest() == digest
    copy = tmp_path / "copy.h5"
    shutil.copyfile(path, copy)
    before = copy.read_bytes()
    assert cli.main(["fit", str(copy), "--n-fit", "1000000"]) == 2
    assert "leaves 0 cell(s)" in capsys.readouterr().err
    assert copy.read_bytes() == before



def test_runs_that_cannot_finish_are_refused_before_any_work(tmp_path, monkeypatch, capsys):
    """Issue 13: --reps 1e14 or --n 1e11 end in one line saying what they
    would take (time, memory), status 2, before a single chunk is simulated
    or a file written; the caps themselves are accepted and in --help."""
    from nullatlas.lookup.limits import MAX_N, MAX_REPS

    monkeypatch.chdir(tmp_path)

    def never(*a, **k):
        raise AssertionError("simulated despite the refusal")

    monkeypatch.setattr(runner, "simulate_chunk", never)
    sq = ["--shape", "square"]
    cases = [
        (["build", *sq, "--n", "50", "--reps", "100000000000000", "--out", "t.h5"], "years"),
        (["build", *sq, "--n", "100000000000", "--reps", "30", "--out", "t.h5"], "30 TB of memory"),
        (["build", *sq, "--n", "5000000,9000000", "--reps", "10000000", "--out", "t.h5"],
         "points simulated"),
        (["check", *sq, "--n", "100", "--reps", "1000000000000"], "--reps"),
        (["power", *sq, "--n", "100000000000", "--alt", "thomas"], "of memory"),
    ]
    for argv, frag in cases:
        assert cli.main(argv) == 2, argv
        err = capsys.readouterr().err
        assert frag in err and "cannot finish" in err and err.count("\n") == 1, err
    assert os.listdir(tmp_path) == []
    w = shapes.shape_window("square")
    plans = build._plans([("square", w)], [MAX_N], MAX_REPS, 2)     # the caps themselves pass
    build.refuse_endless(plans, MAX_REPS)
    with pytest.raises(ValueError, match="--n 10,000,001"):
        build._plans([("square", w)], [MAX_N + 1], 20, 2)
    with pytest.raises(SystemExit):
        cli.main(["build", "--help"])
    assert f"{MAX_REPS:,}" in capsys.readouterr().out


def test_report_of_a_holdout_without_usable_grid_points_is_true(capsys):
    """Issue 14: a held-out curve with no grid point the test uses (its error
    in pattern sd is None) is reported in words, not with a traceback."""
    s = {"table": "t.h5", "dimension": 2, "cells": 6, "replicates": 600, "root_seed": 1,
         "model": {"betti1": {"holdout_disk": {"rms_se": 0.93, "max_abs_se": 3.04,
                                               "max_abs_sd": None, "n_model": None,
                                               "points": 114}}},
         "n_min": {}, "model_missing": None}
    import io
    buf = io.StringIO()
    cli._print_summary(s, buf)
    text = buf.getvalue()
    assert "no grid point that the test uses" in text and "None" not in text
    assert "not shown within 0.1 pattern sd at any held-out n" in text


def test_a_report_that_cannot_be_made_writes_no_table(tmp_path):
    """Issue 14: the report is rendered before the table is written; when it
    fails, no table exists and the checkpoints are kept for a rerun."""
    out = tmp_path / "t.h5"

    def fail(summary):
        assert summary["cells"] == 2
        raise RuntimeError("report failed")

    with pytest.raises(RuntimeError):
        build.build_table(str(out), [("square", shapes.shape_window("square"))], [30, 60], 20,
                          stats=["nnmean"], root_seed=7, progress=False, n_fit=10,
                          before_write=fail)
    assert not out.exists() and os.path.isdir(str(out) + ".parts")


def test_fit_that_cannot_make_a_model_says_why_before_writing(tmp_path, capsys):
    """Issue 14: a table of one's own window with two cells has no
    finite-window model; build says so, and fit (with or without --plot)
    refuses with the reason, leaving table and figure unwritten."""
    poly = tmp_path / "lshape.wkt"
    poly.write_text("POLYGON((0 0, 30 0, 30 10, 10 10, 10 30, 0 30, 0 0))")
    out = tmp_path / "mine.h5"
    assert cli.main(["build", "--window", str(poly), "--n", "40,80", "--reps", "20",
                     "--out", str(out), "--stat", "nnmean", "--no-progress"]) == 0
    assert "finite-window model: none (the model needs at least 4 cells" in capsys.readouterr().out
    before = out.read_bytes()
    for extra in ([], ["--plot", str(tmp_path / "fig.png")]):
        assert cli.main(["fit", str(out)] + extra) == 2
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and "no finite-window model can be fitted" in err
        assert "at least 4 cells" in err and "nothing was changed" in err
    assert out.read_bytes() == before and not (tmp_path / "fig.png").exists()


def test_every_option_has_a_help_line_and_jobs_says_what_it_keeps():
    """Issue 14: every option of every subcommand of both commands has a
    help line; check/power/validate do not claim a table for --jobs and have
    no --dask-scheduler that they would ignore."""
    import argparse

    from nullatlas.lookup import cli as lcli
    missing = []
    subs = {}
    for mod in (lcli, cli):
        for act in mod.build_parser()._actions:
            if isinstance(act, argparse._SubParsersAction):
                for name, sp in act.choices.items():
                    subs[(mod.PROG, name)] = sp
                    missing += [(mod.PROG, name, x.dest) for x in sp._actions if not x.help]
    assert missing == []
    for name in ("check", "power", "validate"):
        sp = subs[("nullatlas-calibrate", name)]
        jobs = next(x for x in sp._actions if x.dest == "jobs")
        assert "table" not in jobs.help
        assert all(x.dest != "dask_scheduler" for x in sp._actions)


def test_build_counts_patterns_and_names_a_users_window_by_its_file(tmp_path, monkeypatch, capsys):
    """Issue 14: the build progress bar counts patterns; a window given as a
    file is named after it in the build summary and in 'nullatlas tables',
    whose n_min lines name their tests."""
    bars = []
    real = runner._progress

    def spy(total, enabled, desc):
        bars.append(real(total, enabled, desc))
        return bars[-1]

    monkeypatch.setattr(runner, "_progress", spy)
    poly = tmp_path / "lshape.wkt"
    poly.write_text("POLYGON((0 0, 30 0, 30 10, 10 10, 10 30, 0 30, 0 0))")
    out = tmp_path / "mine.h5"
    assert cli.main(["build", "--window", str(poly), "--n", "40,80", "--reps", "24",
                     "--out", str(out), "--stat", "euler,nnmean", "--n-fit", "10",
                     "--progress"]) == 0
    assert bars[0].unit == "pattern" and bars[0].total == 48 and bars[0].n == 48
    text = capsys.readouterr().out
    assert "  lshape (polygon-" in text and "nnmean (lower tail " in text and "two-sided " in text
    from nullatlas.lookup import cli as lcli
    assert lcli.main(["tables", str(out)]) == 0
    text = capsys.readouterr().out
    assert "  lshape (shape polygon-" in text
    assert "euler      max |z| " in text and "Mahalanobis" in text
