"""nullatlas-calibrate check and power."""
import json

import numpy as np
import pytest

from nullatlas.calibrate import check, cli, power
from nullatlas.calibrate.shapes import shape_window
from nullatlas.lookup.patterns import windows


def test_wilson_interval():
    # Wilson (1927): 5 of 100 -> about [0.0215, 0.1118] (common textbook value, from memory)
    assert check.wilson(200, 200)[1] == 1.0 and check.wilson(0, 200)[0] == 0.0
    lo, hi = check.wilson(5, 100)
    assert abs(lo - 0.0215) < 5e-4 and abs(hi - 0.1118) < 5e-4
    assert check.wilson(0, 50)[0] == 0.0


@pytest.mark.slow
def test_check_agrees_in_a_shipped_cell_and_not_far_below_n_min():
    w = windows.Rectangle(0, 0, 2, 2)          # the square shape at any size
    good = check.check_window(w, [1000], 600, stats=["total0", "nnmean"], jobs=2, progress=False)
    for r in good["results"]:
        assert r["trusted"] and r["holds_size"], r
        assert 0.3 < r["z_sd"] ** 2 * 3 < 3.3 and abs(r["z_mean"]) < 0.2
    bad = check.check_window(w, [12], 1500, stats=["euler", "maxpers1"], jobs=2, progress=False)
    by = {r["name"]: r for r in bad["results"]}
    # far below the validated n nothing is trusted, whether or not the model happens to fit there
    assert not any(r["trusted"] for r in bad["results"]), bad["results"]
    assert "outside the n where" in by["euler"]["reason"] or "below" in by["euler"]["reason"]
    # the largest loop at n = 12 is far from its n >= 50 null: the check must see the disagreement
    size = by["maxpers1"]["size"][1]
    assert by["maxpers1"]["holds_size"] is False and not 0.03 < size < 0.07, by["maxpers1"]


def test_check_cli_json_and_plot(tmp_path, capsys):
    fig = tmp_path / "check.png"
    rc = cli.main(["check", "--shape", "disk", "--n", "200,400", "--reps", "60", "--stat", "total0",
                   "--json", "--plot", str(fig), "--no-progress"])
    assert rc == 0
    d = json.loads(capsys.readouterr().out)
    assert [r["n"] for r in d["results"]] == [200, 400]
    r = d["results"][0]
    assert {"size", "size_ci", "tails", "ks", "z_mean", "z_sd", "holds_size", "trusted"} <= set(r)
    assert len(r["size"]) == 3 and fig.stat().st_size > 1000


@pytest.mark.slow
def test_power_is_the_size_at_strength_zero_and_grows_with_clustering(tmp_path):
    w = windows.Disk(0, 0, 150)
    res = power.power_study(w, 300, ["thomas"], [0.0, 0.1, 0.3], 160, stats=["total0", "nnmean"],
                            sims=39, jobs=2, progress=False)
    by = {(r["name"], r["strength"]): r for r in res["rows"]}
    for s in ("total0", "nnmean", "L-mc", "clark-evans"):
        p0 = by[(s, 0.0)]
        assert p0["ci"][0] <= 0.05 <= p0["ci"][1] or abs(p0["power"] - 0.05) < 0.04, p0
        assert by[(s, 0.3)]["power"] >= by[(s, 0.1)]["power"] >= p0["power"] - 0.03
        assert by[(s, 0.3)]["power"] > p0["power"] + 0.3
    power.plot_power(res, str(tmp_path / "power.png"))          # powers of 1 included
    assert (tmp_path / "power.png").stat().st_size > 1000


def test_structured_part_has_exactly_k_points():
    w = windows.Rectangle(0, 0, 10, 10)
    rng = np.random.default_rng(0)
    for spec in ("thomas", "matern", "hardcore", "strauss", "lattice", "voids", "inhom:1+x/10"):
        name, params = power.parse_alternative(spec)
        assert power.structured(w, name, params, 150, rng, 300).shape == (150, 2)


@pytest.mark.parametrize("argv,frag", [
    (["power", "--shape", "disk", "--n", "100", "--alt", "spiral"], "unknown model"),
    (["power", "--shape", "disk", "--n", "100", "--alt", "thomas:width=3"], "unknown parameter"),
    (["power", "--shape", "disk", "--n", "100", "--alt", "hardcore:r=0.9"], "too large"),
    (["power", "--shape", "disk", "--n", "100", "--alt", "thomas", "--strength", "0,2"], "[0, 1]"),
    (["power", "--shape", "disk", "--n", "100", "--alt", "inhom:__import__('os')"], "allowed"),
    (["check", "--shape", "disk", "--n", "100", "--reps", "10"], "at least 50"),
])
def test_bad_power_and_check_input(argv, frag, capsys):
    assert cli.main(argv + ["--no-progress"]) == 2
    err = capsys.readouterr().err
    assert frag in err and err.count("\n") == 1


def test_shape_window_is_unit_area():
    assert abs(shape_window("rect4").measure - 1) < 1e-12


def test_check_output_says_holds_size():
    """Issue 14: check's last column says whether the instant test holds its
    size (not 'agrees'), and the footer says what that means."""
    import io
    row = {"n": 400, "name": "total0", "size": [0.01, 0.08, 0.1],
           "size_ci": [[0, 0.02], [0.06, 0.1], [0.08, 0.12]], "ks": 0.03, "z_mean": 0.1,
           "z_sd": 1.0, "trusted": True, "holds_size": False}
    s = {"window": {"kind": "disk", "kappa": 3.5}, "reps": 1000, "seed": 1, "results": [row]}
    buf = io.StringIO()
    cli._print_check(s, buf)
    text = buf.getvalue()
    assert "holds size" in text.splitlines()[1] and text.splitlines()[2].endswith(" NO")
    assert "agree" not in text and "Holds size: the size at 0.05 is within 0.05 +- 0.01" in text
