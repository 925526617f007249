"""Figures of the calibration stage (issue 14): readable, and true to the data."""
import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402

from nullatlas.calibrate import power  # noqa: E402

ALTS = ["thomas", "matern", "hardcore", "strauss", "lattice", "voids", "inhom"]
STATS = ["euler", "total0", "total1", "maxpers1", "nnmean", "L-mc", "clark-evans"]


def fake_power():
    rows = []
    for a in ALTS:
        for s in STATS:
            for x in (0.0, 0.1, 0.2, 0.4):
                p = min(1.0, 0.05 + 4 * x)            # power 1 at 0.4 for every statistic
                rows.append({"alternative": a, "strength": x, "name": s, "power": p,
                             "ci": [max(0.0, p - 0.03), min(1.0, p + 0.03)], "reps": 200,
                             "instant": not s.endswith("-mc") and s != "clark-evans", "trusted": True})
    return {"window": {"kind": "disk"}, "n": 300, "reps": 200, "sims": 99, "seed": 1, "alpha": 0.05,
            "rows": rows}


def test_power_figure_is_a_grid_with_one_legend_outside_and_separable_lines(tmp_path):
    fig = power.plot_power(fake_power())
    fig.canvas.draw()
    visible = [ax for ax in fig.axes if ax.get_visible() and ax.axison]
    assert len(visible) == 7
    assert fig.get_size_inches()[0] <= 3 * 4.6                       # at most 3 panels per row
    assert len({round(ax.get_position().y0, 3) for ax in visible}) == 3
    legends = list(fig.legends) + [ax.get_legend() for ax in fig.axes
                                   if not ax.axison and ax.get_legend() is not None]
    assert all(ax.get_legend() is None for ax in visible) and len(legends) == 1
    lb = legends[0].get_window_extent()
    assert not any(lb.overlaps(ax.get_window_extent()) for ax in visible)
    ax = visible[0]
    at_one = [ln for ln in ax.lines if ln.get_marker() not in ("None", "", None, "_")]
    xs = [np.asarray(ln.get_xdata())[-1] for ln in at_one]              # each line's point at power 1
    assert len(at_one) == len(STATS) and len(set(np.round(xs, 6))) == len(STATS)
    assert len({ln.get_marker() for ln in at_one}) == len(STATS)
    out = tmp_path / "power.png"
    assert power.plot_power(fake_power(), str(out)) == str(out) and out.stat().st_size > 1000


def test_fit_figure_draws_the_full_model_counts_overflow_and_names_the_shapes():
    from nullatlas.calibrate.modelplot import RESID_LIMIT, plot_model
    from nullatlas.lookup.inference.tablereader import load_cell, load_model, open_table, shipped_tables

    table = shipped_tables()[2]
    info = open_table(table)
    model = load_model(table)
    fig = plot_model(table)
    left, _, right = [ax for ax in fig.axes]
    marks = [ln for ln in left.lines if ln.get_gid() == "model-nnmean-0"][0]
    obs = np.array([float(load_cell(table, c.name)["nnmean"]["mean"][0]) for c in info.cells])
    pred = np.asarray(marks.get_ydata(), float)
    coef = np.asarray(model["nnmean"]["mean_coef"])[0]
    full = np.array([coef @ [1, c.kappa * c.n ** -0.5, c.n ** -1.0] for c in info.cells])
    assert np.allclose(pred, full)
    assert (obs < pred).any() and (obs > pred).any()          # cells on both sides of the fit
    res = np.concatenate([np.ravel(v["mean_resid"]) for v in model.values()
                          if isinstance(v, dict) and "mean_resid" in v])
    res = res[np.isfinite(res)]
    text = right.get_legend().get_texts()[0].get_text()
    assert f"{int((res < -RESID_LIMIT).sum())} below" in text
    assert f"{int((res > RESID_LIMIT).sum())} above" in text
    names = {t.get_text() for leg in fig.legends for t in leg.get_texts()}
    assert set(info.shapes()) <= names
