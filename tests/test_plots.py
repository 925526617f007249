"""Figures: what they draw must be true for the test that was run (issue 14)."""
import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pytest  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

import nullatlas  # noqa: E402
from nullatlas.lookup.batch import BatchResult  # noqa: E402
from nullatlas.lookup.results import CSRTestResult, StatResult  # noqa: E402


def _scalar(name, z, p=0.01, trusted=True):
    return StatResult(name=name, kind="scalar", statistic=z, pvalue=p, null_mean=0.0,
                      null_sd=1.0, z=z, method="mc-rank", trusted=trusted)


def _curve(method="mc-erl-envelope", trusted=True, used=None):
    g = np.linspace(0.1, 1.0, 10)
    mean, sd = np.full(10, 5.0), np.full(10, 2.0)
    obs = mean + sd * np.array([0.5, 1, 9, 0, -1, 0, 30, 1, 0, 0.2])
    used = np.ones(10, bool) if used is None else used
    z = np.where(used, (obs - mean) / sd, np.nan)
    c = {"grid": g.tolist(), "observed": obs, "null_mean": mean, "null_sd": sd, "z": z,
         # the null's own pointwise quantiles: narrower than +-1.96 sd
         "pointwise_lo": mean - 1.2 * sd, "pointwise_hi": mean + 1.3 * sd,
         "global_lo": mean - 2.5 * sd, "global_hi": mean + 2.5 * sd}
    return StatResult(name="euler", kind="curve", statistic=9.0, pvalue=0.01,
                      null_mean=np.nan, null_sd=np.nan, z=9.0, method=method, trusted=trusted,
                      primary=True, curve=c)


def _result(results):
    return CSRTestResult(results=results, n=100, dimension=2,
                         window={"kind": "rect", "kappa": 4.0})


def _fig():
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    fig = Figure()
    FigureCanvasAgg(fig)
    return fig


def _boxes(fig, artists):
    r = fig.canvas.get_renderer()
    return [a.get_window_extent(r) for a in artists]


def test_scalar_z_beyond_the_axis_get_separate_readable_labels():
    fig = _fig()
    ax = nullatlas.plot_scalars([_scalar("total0", -22.4), _scalar("total1", -14.7),
                                 _scalar("nnmean", -15.7), _scalar("maxpers1", 6.9),
                                 _scalar("maxratio1", 0.3, p=0.8)], ax=fig.subplots())
    fig.canvas.draw()
    texts = [t for t in ax.texts if t.get_text().startswith("z =")]
    assert sorted(t.get_text() for t in texts) == ["z = -14.7", "z = -15.7", "z = -22.4", "z = 6.9"]
    boxes = _boxes(fig, texts)
    for i in range(len(boxes)):
        for j in range(i + 1, len(boxes)):
            assert not boxes[i].overlaps(boxes[j])
    axbox = ax.get_window_extent()
    assert all(axbox.x0 <= b.x0 and b.x1 <= axbox.x1 for b in boxes)      # labels inside the panel


def test_curve_legends_do_not_cover_any_panel():
    fig = nullatlas.plot_result(_result([_curve(), _scalar("nnmean", 1.0)]))
    assert isinstance(fig, Figure)
    fig.canvas.draw()
    data_axes = [a for a in fig.axes if a.get_visible() and a.axison]
    assert all(a.get_legend() is None for a in data_axes if a.get_title().startswith("euler"))
    legends = [leg for a in fig.axes for leg in ([a.get_legend()] if a.get_legend() else [])
               if not a.axison] + list(fig.legends)
    assert legends
    for leg in legends:
        lb = leg.get_window_extent()
        for a in data_axes:
            if a.get_title() != "persistence diagram":
                assert not lb.overlaps(a.get_window_extent())


@pytest.mark.parametrize("method, lo, hi", [("mc-erl-envelope", -1.2, 1.3),
                                            ("asymptotic-maxabs", -1.2, 1.3)])
def test_pointwise_band_is_the_null_band_of_the_route(method, lo, hi):
    ax = nullatlas.plot_curve(_curve(method), ax=Figure().subplots())
    band = [c for c in ax.collections if c.get_label().startswith("pointwise")]
    assert len(band) == 1
    y = band[0].get_paths()[0].vertices[:, 1]
    assert np.isclose(y.min(), lo) and np.isclose(y.max(), hi)     # not a flat +-1.96
    glob = [c for c in ax.collections if c.get_label().startswith("global")][0]
    assert glob.get_paths()[0].vertices[:, 1].max() >= y.max()


def test_untested_grid_points_are_shaded_and_their_excursions_not_drawn_as_tested():
    used = np.ones(10, bool)
    used[5:8] = False                             # the z = 30 excursion is at an untested point
    ax = nullatlas.plot_curve(_curve(used=used), ax=Figure().subplots())
    labels = [p.get_label() for p in ax.patches]
    assert "not tested" in labels
    shade = [p for p in ax.patches if p.get_label() == "not tested"][0]
    assert shade.get_x() < 0.7 < shade.get_x() + shade.get_width()  # grid point 0.7 is shaded
    black = [ln for ln in ax.lines if ln.get_label() == "observed z"][0]
    assert np.isnan(black.get_ydata()[5:8]).all()
    assert ax.get_ylim()[1] < 30                 # the untested excursion does not set the scale


def test_untrusted_results_are_marked():
    ax = nullatlas.plot_curve(_curve(trusted=False), ax=Figure().subplots())
    assert "UNTRUSTED" in ax.get_title()
    ax = nullatlas.plot_scalars([_scalar("total1", 1.0, trusted=False)], ax=Figure().subplots())
    assert "untrusted" in ax.get_yticklabels()[0].get_text()


def test_plot_result_writes_a_file_when_given_a_path(tmp_path):
    out = tmp_path / "r.png"
    assert nullatlas.plot_result(_result([_curve(), _scalar("nnmean", 8.0)]), str(out)) == str(out)
    assert out.stat().st_size > 1000


def _batch(pvalues):
    return BatchResult([{"pvalue": p, "statistic": None, "error": "" if p is not None else "bad"}
                        for p in pvalues])


def test_batch_figure_counts_every_file_and_has_integer_ticks():
    fig = nullatlas.plot_batch(_batch([0.2, 0.5, 0.01, None]))
    fig.canvas.draw()
    hist, ranks = fig.axes
    assert hist.get_title() == "4 files (1 without a p-value)"
    for ticks in (hist.get_yticks(), ranks.get_xticks()):
        assert np.allclose(ticks, np.round(ticks))
