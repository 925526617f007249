"""Issue 14, one vocabulary: plain words in printed tables, help texts, shared option syntax."""
import json
import os

import pytest

from nullatlas.lookup.cli import main
from nullatlas.lookup.results import method_label

EX = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "examples")
WAFER = "disk:0,0,150"
JARGON = ("asymptotic-", "table-empirical", "mc-rank", "mc-erl")


def _last_column_ok(text):
    """No jargon label anywhere in a printed table."""
    assert not any(j in text for j in JARGON), text


def test_printed_table_says_plain_words_json_keeps_labels(capsys):
    path = os.path.join(EX, "wafer_lot_clustered.csv")
    assert main(["test", path, "--window", WAFER, "--method", "asymptotic", "--no-progress"]) in (0, 1)
    text = capsys.readouterr().out
    _last_column_ok(text)
    assert "instant, max |z| over the curve" in text
    assert main(["test", path, "--window", WAFER, "--method", "asymptotic", "--no-progress",
                 "--json"]) in (0, 1)
    methods = {r["method"] for r in json.loads(capsys.readouterr().out)["results"]}
    assert "asymptotic-maxabs" in methods


def test_printed_table_monte_carlo_says_patterns(capsys):
    path = os.path.join(EX, "wafer_lot_random.csv")
    assert main(["test", path, "--window", WAFER, "--method", "mc", "--sims", "19", "--seed", "3",
                 "--stat", "nnmean", "--no-progress"]) in (0, 1)
    text = capsys.readouterr().out
    _last_column_ok(text)
    assert "simulation, 19 patterns, rank" in text


def test_batch_table_says_plain_words(capsys):
    files = [os.path.join(EX, f) for f in ("wafer_lot_random.csv", "wafer_lot_regular.csv")]
    assert main(["batch", *files, "--window", WAFER, "--method", "asymptotic",
                 "--no-progress"]) in (0, 1)
    text = capsys.readouterr().out
    _last_column_ok(text)
    assert "instant, max |z| over the curve" in text


@pytest.mark.parametrize("label,n,words", [
    ("asymptotic-normal", 0, "instant, normal z"),
    ("table-empirical-gumbel-tail", 0, "instant, tabled null with Gumbel tail"),
    ("mc-erl-envelope", 999, "simulation, 999 patterns, rank envelope (a different curve test)"),
    ("mc-maxabs", 99, "simulation, 99 patterns, max |z| over the curve"),
    ("something-new", 0, "something-new")])
def test_method_label_words(label, n, words):
    assert method_label(label, n) == words


def test_test_help_explains_kappa(capsys):
    with pytest.raises(SystemExit):
        main(["test", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "kappa" in text and "scale-free shape factor" in text
    assert "3.54 for a disk, 4 for a square, 6 for a cube" in text


def test_readme_explains_kappa_at_first_mention():
    readme = open(os.path.join(os.path.dirname(EX), "README.md"), encoding="utf-8").read()
    first = readme.lower().index("kappa")
    assert "scale-free shape factor" in " ".join(readme[first:first + 300].split())


# --n in nullatlas-calibrate: one parser, one syntax in every command
CAL_ARGS = {"build": ["build", "--out", "t.h5", "--shape", "square", "--reps", "100"],
            "extend": ["extend", "t.h5", "--shape", "square", "--reps", "100"],
            "check": ["check", "--shape", "square"],
            "power": ["power", "--shape", "square", "--alt", "thomas"]}


def _subparsers(parser):
    import argparse

    act = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    return act.choices


def test_every_n_option_uses_the_one_list_parser():
    from nullatlas.calibrate import cli as cal

    subs = _subparsers(cal.build_parser())
    users = [name for name, sp in subs.items()
             for a in sp._actions if "--n" in a.option_strings]
    assert set(users) >= set(CAL_ARGS)
    for name in users:
        n_opt = next(a for a in subs[name]._actions if "--n" in a.option_strings)
        assert n_opt.type is cal._int_list, name


@pytest.mark.parametrize("command", sorted(CAL_ARGS))
@pytest.mark.parametrize("text,ns", [("200", [200]), ("200,500", [200, 500]),
                                     ("200, 500", [200, 500])])
def test_n_list_syntax_in_every_command(command, text, ns):
    from nullatlas.calibrate import cli as cal

    assert cal.build_parser().parse_args(CAL_ARGS[command] + ["--n", text]).n == ns


def test_power_runs_one_study_per_n(capsys, tmp_path):
    from nullatlas.calibrate import cli as cal

    fig = tmp_path / "power.png"
    assert cal.main(["power", "--shape", "square", "--n", "30,40", "--alt", "thomas",
                     "--strength", "0", "--reps", "20", "--sims", "19", "--stat", "nnmean",
                     "--plot", str(fig)]) == 0
    text = capsys.readouterr().out
    assert "n = 30," in text and "n = 40," in text
    assert fig.stat().st_size > 1000
    assert cal.main(["power", "--shape", "square", "--n", "30,40", "--alt", "thomas",
                     "--strength", "0", "--reps", "20", "--sims", "19", "--stat", "nnmean",
                     "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["n"] == [30, 40] and {r["n"] for r in d["rows"]} == {30, 40}


def test_power_help_lists_every_registered_alternative(capsys):
    from nullatlas.calibrate import cli as cal
    from nullatlas.lookup.processes import registry

    with pytest.raises(SystemExit):
        cal.main(["power", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert registry.alternatives()
    for name in registry.alternatives():
        assert f"{name}:" in text, name
        for key in registry.FAMILIES[name]:
            assert f"{key}=" in text and f"{key} in " in text, (name, key)


def _quick_start():
    readme = open(os.path.join(os.path.dirname(EX), "README.md"), encoding="utf-8").read()
    block = readme.split("## Quick start", 1)[1].split("```bash", 1)[1].split("```", 1)[0]
    return [line for line in block.strip().splitlines() if line.strip()]


def test_readme_quick_start_is_two_minimal_true_commands(capsys, monkeypatch):
    import shlex

    lines = _quick_start()
    assert len(lines) == 2 and lines[1].endswith("python -m pytest")
    install, _, run = lines[0].partition(" && ")
    assert install == "pip install ." and "--sims" not in run and "--seed" not in run
    argv = shlex.split(run)
    assert argv[0] == "nullatlas"
    monkeypatch.chdir(os.path.dirname(EX))
    assert main(argv[1:] + ["--no-progress"]) in (0, 1)
    out = capsys.readouterr().out
    assert "Verdict:" in out and "simulation" not in out       # the answer is instant


def test_shipped_wafer_manifest_has_no_error_row(capsys):
    manifest = os.path.join(EX, "wafers.manifest")
    assert main(["batch", "--manifest", manifest, "--no-progress", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert len(d["rows"]) == 4 and not d["failed"]
    assert all(not r["error"] and r["pvalue"] is not None for r in d["rows"])


def test_readme_shows_the_wafer_manifest():
    readme = open(os.path.join(os.path.dirname(EX), "README.md"), encoding="utf-8").read()
    assert "nullatlas batch --manifest examples/wafers.manifest" in readme
