"""The nullatlas command end to end: demo files, JSON layout, bad input."""
import json
import os
import subprocess
import sys

import numpy as np
import pytest

from nullatlas.lookup.cli import main

EX = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "examples")
WAFER = "disk:0,0,150"
PART = "box:0,0,0,20,20,10"


def run_json(capsys, *args):
    rc = main(["test", *args, "--json", "--no-progress", "--method", "mc"])
    out = capsys.readouterr().out
    assert rc == 0
    return json.loads(out)


@pytest.mark.parametrize("name,window", [
    ("wafer_lot_random.csv", WAFER), ("wafer_lot_clustered.csv", WAFER),
    ("wafer_lot_regular.csv", WAFER), ("pores_part.csv", PART)])
def test_demo_files_plain_and_json(capsys, name, window):
    path = os.path.join(EX, name)
    assert main(["test", path, "--window", window, "--sims", "39", "--seed", "5", "--no-progress",
                 "--method", "mc"]) == 0
    text = capsys.readouterr().out
    assert "Verdict:" in text and "p-value" in text
    d = run_json(capsys, path, "--window", window, "--sims", "39", "--seed", "5")
    for key in ("n", "dimension", "window", "results"):
        assert key in d
    assert d["dimension"] == (3 if window == PART else 2)
    assert d["window"]["kind"] == window.split(":")[0]
    assert d["window"]["kappa"] == pytest.approx(2 * np.sqrt(np.pi) if window == WAFER else
                                                 (2 * (400 + 200 + 200)) / 4000 ** (2 / 3))
    first = d["results"][0]
    assert first["name"] == "euler" and first["primary"] is True
    assert all(not r["primary"] for r in d["results"][1:])
    for r in d["results"]:
        for key in ("name", "statistic", "pvalue", "pvalue_is_bound", "null_mean", "null_sd",
                    "z", "method", "method_label", "alternative", "tail", "trusted", "reason"):
            assert key in r
        # Monte Carlo p-values live on the grid {1/(m+1), ..., 1}, 2x for two-sided.
        assert 1 / 40 - 1e-12 <= r["pvalue"] <= 1


def test_clustered_lot_rejected_random_lot_not(capsys):
    # Seeded: the verdict of the primary test (Euler curve) at alpha = 0.05.
    clus = run_json(capsys, os.path.join(EX, "wafer_lot_clustered.csv"), "-w", WAFER,
                    "--sims", "199", "--seed", "11")
    rand = run_json(capsys, os.path.join(EX, "wafer_lot_random.csv"), "-w", WAFER,
                    "--sims", "199", "--seed", "11")
    assert clus["results"][0]["pvalue"] <= 0.05
    assert rand["results"][0]["pvalue"] > 0.05
    # the clustered lot has much shorter nearest-neighbour distances
    nn = {r["name"]: r for r in clus["results"]}["nnmean"]
    assert nn["z"] < -5


def test_regular_lot_one_sided(capsys):
    d = run_json(capsys, os.path.join(EX, "wafer_lot_regular.csv"), "-w", WAFER, "--sims", "99",
                 "--seed", "3", "--stat", "nnmean,total1", "--alternative", "regular")
    nn, t1 = d["results"]
    assert nn["alternative"] == "regular" and nn["tail"] == "greater"
    assert nn["pvalue"] == pytest.approx(1 / 100) and nn["pvalue_is_bound"]      # the floor
    assert t1["tail"] == "two-sided" and "no known direction" in t1["reason"]


def test_same_seed_same_json_any_jobs(capsys):
    args = [os.path.join(EX, "wafer_lot_random.csv"), "-w", WAFER, "--sims", "30", "--seed", "9"]
    a = run_json(capsys, *args, "--jobs", "1")
    b = run_json(capsys, *args, "--jobs", "2")
    def strip(d):
        return [{k: v for k, v in r.items()} for r in d["results"]]
    assert strip(a) == strip(b)


def test_plot_written(tmp_path, capsys):
    fig = tmp_path / "fig.png"
    rc = main(["test", os.path.join(EX, "wafer_lot_clustered.csv"), "-w", WAFER, "--method", "mc",
               "--sims", "19", "--seed", "1", "--plot", str(fig), "--no-progress"])
    assert rc == 0 and fig.stat().st_size > 10_000
    assert fig.read_bytes()[:4] == b"\x89PNG"
    assert not [p for p in os.listdir(tmp_path) if p != "fig.png"]  # no temp files left


def test_stats_listing(capsys):
    assert main(["stats", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    names = {r["name"] for r in rows}
    assert {"euler", "betti1", "apf1", "total0", "maxpers1", "silhouette1", "lfunc", "gfunc",
            "nnmean", "pbetti1", "betti2"} <= names


def test_console_script_help():
    out = subprocess.run([sys.executable, "-m", "nullatlas.lookup", "test", "--help"],
                         capture_output=True, text=True)
    assert out.returncode == 0
    for opt in ("--window", "--stat", "--method", "--sims", "--seed", "--jobs", "--json",
                "--on-duplicates", "--columns", "--plot", "--alternative"):
        assert opt in out.stdout


# ---------------------------------------------------------------- bad input

def _csv(tmp_path, text, name="p.csv"):
    p = tmp_path / name
    p.write_text(text)
    return str(p)


def _square_csv(tmp_path, n=30, seed=0, name="ok.csv"):
    pts = np.random.default_rng(seed).random((n, 2))
    return _csv(tmp_path, "x,y\n" + "\n".join(f"{a},{b}" for a, b in pts) + "\n", name)


BAD = {
    "nan": ("x,y\n0.1,0.2\nnan,0.5\n0.3,0.3\n0.7,0.1\n0.9,0.9\n", "rect:0,0,1,1", "NaN"),
    "inf": ("x,y\n0.1,0.2\n0.4,inf\n0.3,0.3\n0.7,0.1\n0.9,0.9\n", "rect:0,0,1,1", "inf"),
    "text": ("x,y\n0.1,0.2\n0.4,abc\n0.3,0.3\n0.7,0.1\n", "rect:0,0,1,1", "not a number"),
    "ragged": ("0.1,0.2\n0.4,0.5,0.6\n0.3,0.3\n", "rect:0,0,1,1", "columns"),
    "empty": ("", "rect:0,0,1,1", "empty"),
    "header_only": ("x,y\n", "rect:0,0,1,1", "header only"),
    "single": ("x,y\n0.5,0.5\n", "rect:0,0,1,1", "too few"),
    "identical": ("x,y\n" + "0.5,0.5\n" * 10, "rect:0,0,1,1", "duplicate"),
    "outside": ("x,y\n0.1,0.2\n0.4,0.5\n0.3,0.3\n1.7,0.1\n0.9,0.9\n", "rect:0,0,1,1",
                "1 of 5 points lie outside"),
    "duplicates": ("x,y\n0.1,0.2\n0.4,0.5\n0.3,0.3\n0.7,0.1\n0.4,0.5\n", "rect:0,0,1,1",
                   "duplicate"),
    "collinear": ("x,y\n0.1,0.1\n0.2,0.2\n0.3,0.3\n0.4,0.4\n0.5,0.5\n", "rect:0,0,1,1", "line"),
    "2d_in_3d": ("x,y\n0.1,0.2\n0.4,0.5\n0.3,0.3\n0.7,0.1\n0.9,0.9\n", "box:0,0,0,1,1,1", "2D"),
    "3d_in_2d": ("x,y,z\n0.1,0.2,0.1\n0.4,0.5,0.3\n0.3,0.3,0.9\n0.7,0.1,0.5\n0.9,0.9,0.2\n",
                 "rect:0,0,1,1", "3D"),
    "zero_area": (None, "rect:0,0,0,1", "zero"),
    "unknown_spec": (None, "circle:0,0,1", "unknown window"),
    "bad_numbers": (None, "disk:0,zero,1", "numbers"),
    "neg_radius": (None, "disk:0,0,-1", "positive"),
    "missing_window_file": (None, "nowhere.geojson", "cannot read"),
}


@pytest.mark.parametrize("case", sorted(BAD))
def test_bad_input_one_line_exit_2(tmp_path, capsys, case):
    text, window, needle = BAD[case]
    path = _csv(tmp_path, text) if text is not None else _square_csv(tmp_path)
    fig = tmp_path / "never.png"
    rc = main(["test", path, "--window", window, "--method", "mc", "--sims", "5", "--seed", "1",
               "--no-progress", "--plot", str(fig)])
    err = capsys.readouterr().err
    assert rc == 2
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1, err
    assert lines[0].startswith("nullatlas: error:")
    assert needle.lower() in lines[0].lower(), lines[0]
    assert not fig.exists()


def test_self_intersecting_and_non_polygon_windows(tmp_path, capsys):
    path = _square_csv(tmp_path)
    bow = tmp_path / "bow.wkt"
    bow.write_text("POLYGON ((0 0, 1 1, 1 0, 0 1, 0 0))")
    line = tmp_path / "line.geojson"
    line.write_text(json.dumps({"type": "LineString", "coordinates": [[0, 0], [1, 1]]}))
    for w, needle in ((bow, "invalid polygon"), (line, "expected a polygon")):
        rc = main(["test", path, "--window", str(w), "--sims", "5"])
        err = capsys.readouterr().err.strip()
        assert rc == 2 and "\n" not in err and needle in err.lower(), err


@pytest.mark.parametrize("extra,needle", [
    (["--sims", "0"], "--sims"), (["--jobs", "-1"], "--jobs"),
    (["--stat", "nosuch"], "unknown statistic"), (["--stat", "betti2"], "not defined in 2d"),
    (["--plot", "fig.gif"], "--plot"), (["--sims", "ten"], "not an integer"),
    (["--on-duplicates", "ignore"], "invalid choice")])
def test_bad_options(tmp_path, capsys, extra, needle):
    rc = main_rc(["test", _square_csv(tmp_path), "-w", "rect:0,0,1,1", "--no-progress", *extra])
    err = capsys.readouterr().err.strip()
    assert rc == 2 and "\n" not in err and needle in err.lower(), err


def main_rc(argv):
    try:
        return main(argv)
    except SystemExit as exc:  # argparse usage errors
        return exc.code


def test_missing_points_file_subprocess(tmp_path):
    # A real process: one line on stderr, exit status 2, no traceback.
    out = subprocess.run([sys.executable, "-m", "nullatlas.lookup", "test", str(tmp_path / "no.csv"),
                          "-w", "rect:0,0,1,1"], capture_output=True, text=True)
    assert out.returncode == 2
    assert out.stderr.strip().count("\n") == 0 and "not found" in out.stderr
    assert "Traceback" not in out.stderr and out.stdout == ""


@pytest.mark.parametrize("policy", ["drop", "jitter"])
def test_duplicate_policies_run(tmp_path, capsys, policy):
    pts = np.random.default_rng(1).random((40, 2))
    pts[5] = pts[6]
    path = _csv(tmp_path, "x,y\n" + "\n".join(f"{a:.17g},{b:.17g}" for a, b in pts) + "\n")
    d = run_json(capsys, path, "-w", "rect:0,0,1,1", "--sims", "9", "--seed", "1",
                 "--on-duplicates", policy, "--stat", "nnmean")
    assert d["validation"]["n_duplicates"] == 1
    assert d["n"] == (39 if policy == "drop" else 40)
    assert any("duplicate" in w for w in d["warnings"])


def _table_cases(tmp_path):
    """Bad --table files: truncated, foreign HDF5, unknown schema version, 3D table."""
    import h5py

    from nullatlas.calibrate import build, shapes
    good = tmp_path / "good3d.h5"
    build.build_table(str(good), [("cube", shapes.shape_window("cube"))], [40, 80], 40,
                      stats=["nnmean"], root_seed=1, progress=False, n_fit=10)
    data = good.read_bytes()
    cut = tmp_path / "cut.h5"
    cut.write_bytes(data[: len(data) // 3])
    foreign = tmp_path / "foreign.h5"
    with h5py.File(foreign, "w") as fh:
        fh["x"] = [1, 2, 3]
    future = tmp_path / "future.h5"
    future.write_bytes(data)
    with h5py.File(future, "a") as fh:
        fh.attrs["schema_version"] = 7
    return {"truncated": (cut, "not a readable HDF5"), "foreign": (foreign, "not a nullatlas"),
            "version": (future, "schema version 7"), "dimension": (good, "3D patterns")}


def test_bad_tables_on_the_command_line(tmp_path, capsys):
    path = _square_csv(tmp_path, n=80)
    for name, (table, needle) in _table_cases(tmp_path).items():
        fig = tmp_path / f"{name}.png"
        rc = main(["test", path, "-w", "rect:0,0,1,1", "--table", str(table), "--plot", str(fig)])
        err = capsys.readouterr().err
        assert rc == 2 and err.count("\n") == 1 and needle in err and "Traceback" not in err, (name, err)
        assert not fig.exists()
