"""The Python API in a notebook: windows, data frames, result display (issue 14)."""
import sys

import numpy as np
import pytest
import shapely

import nullatlas
from nullatlas.lookup.errors import NullAtlasError


@pytest.fixture(scope="module")
def square_points():
    return nullatlas.Rectangle(0, 0, 1, 1).sample(200, np.random.default_rng(4))


@pytest.fixture(scope="module")
def result(square_points):
    return nullatlas.csr_test(square_points, nullatlas.Rectangle(0, 0, 1, 1),
                              stats=["total0", "nnmean", "betti1"], method="asymptotic", seed=3)


@pytest.mark.parametrize("geometry", [
    shapely.Polygon([(0, 0), (1, 0), (1, 1), (0, 1)]),
    shapely.MultiPolygon([shapely.box(0, 0, 1, 0.5), shapely.box(0, 0.5001, 1, 1)]),
])
def test_shapely_polygon_and_multipolygon_are_windows(geometry, square_points):
    pts = square_points[np.abs(square_points[:, 1] - 0.50005) > 0.001]
    res = nullatlas.csr_test(pts, geometry, stats=["nnmean"], method="mc", n_sims=9, seed=1)
    assert res.window["kind"] == "polygon" and 0 < res.pvalue <= 1


def test_polygon_window_from_a_list_of_vertices():
    w = nullatlas.PolygonWindow([(0, 0), (2, 0), (2, 1), (0, 1)])
    assert w.measure == pytest.approx(2.0)
    assert nullatlas.parse_window is not None
    from nullatlas.lookup.patterns.windows import as_window
    assert as_window([(0, 0), (1, 0), (0, 1)]).measure == pytest.approx(0.5)


@pytest.mark.parametrize("bad", [[1, 2, 3], [(0, 0), (1, 1)], [("a", "b"), (1, 2), (3, 4)],
                                 [(0, 0), (1, 1), (1, 0), (0, 1)], [[]]])
def test_bad_vertex_lists_raise_our_error(bad):
    with pytest.raises(NullAtlasError) as exc:
        nullatlas.PolygonWindow(bad)
    assert isinstance(exc.value, ValueError) and "\n" not in str(exc.value)


def test_data_frame_with_extra_columns(square_points):
    pd = pytest.importorskip("pandas")
    df = pd.DataFrame({"label": ["pore"] * len(square_points), "east": square_points[:, 0],
                       "north": square_points[:, 1], "size": np.arange(len(square_points))})
    res = nullatlas.csr_test(df, "rect:0,0,1,1", stats=["nnmean"], method="asymptotic",
                             columns=["east", "north"], seed=2)
    ref = nullatlas.csr_test(square_points, "rect:0,0,1,1", stats=["nnmean"], method="asymptotic", seed=2)
    assert res.n == len(square_points) and res.statistic == ref.statistic
    with pytest.raises(NullAtlasError, match="choose the coordinate columns"):
        nullatlas.read_points(df)
    with pytest.raises(NullAtlasError, match="no column named 'x'"):
        nullatlas.read_points(df, columns=["x", "north"])
    with pytest.raises(NullAtlasError, match="must hold numbers"):
        nullatlas.read_points(df, columns=["label", "north"])
    xy = pd.DataFrame({"id": [1, 2, 3], "x": [0.1, 0.2, 0.3], "y": [0.3, 0.2, 0.9]})
    assert nullatlas.read_points(xy).shape == (3, 2)


def test_repr_is_the_command_line_table(result):
    text = repr(result)
    assert text == result.summary()
    assert text.splitlines()[0].startswith("n = 200 points in 2D, window rect")
    assert "total0*" in text and "nnmean" in text and "Verdict:" in text
    assert len(text.splitlines()) < 15 and "array(" not in text
    assert repr(result["nnmean"]).startswith("StatResult(nnmean:")


def test_html_summary_for_notebooks(result):
    html = result._repr_html_()
    assert html.count("<tr>") == 1 + len(result.results) and "Verdict" in html


def test_to_dataframe_has_every_result(result):
    pytest.importorskip("pandas")
    df = result.to_dataframe()
    assert list(df["name"]) == ["total0", "nnmean", "betti1"]
    assert df["pvalue"].iloc[0] == pytest.approx(result.pvalue)
    assert bool(df["primary"].iloc[0]) and not df["primary"].iloc[1:].any()


def test_to_dataframe_without_pandas_says_so(result, monkeypatch):
    monkeypatch.setitem(sys.modules, "pandas", None)
    with pytest.raises(ImportError, match="needs pandas"):
        result.to_dataframe()


def test_plot_functions_are_exported_and_need_no_file(result):
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig = nullatlas.plot_result(result)
    assert isinstance(fig, matplotlib.figure.Figure)
    _, ax = plt.subplots()
    assert nullatlas.plot_scalars(result.results, ax=ax) is ax
    assert nullatlas.plot_diagram(result.diagram, ax=ax) is ax
    for name in ("plot_result", "plot_diagram", "plot_curve", "plot_scalars", "plot_batch"):
        assert name in nullatlas.__all__
    plt.close("all")


class _FakeNotebookBar:
    made = []

    def __init__(self, total, desc, unit, **kw):
        self.total, self.n = total, 0
        _FakeNotebookBar.made.append(self)

    def update(self, k):
        self.n += k

    def close(self):
        pass


def test_monte_carlo_in_a_notebook_shows_the_notebook_bar(monkeypatch, square_points):
    import inspect

    import tqdm.notebook

    from nullatlas.lookup import progressbar
    assert inspect.signature(nullatlas.csr_test).parameters["progress"].default is None
    monkeypatch.setattr(progressbar, "in_notebook", lambda: True)
    monkeypatch.setattr(tqdm.notebook, "tqdm", _FakeNotebookBar)
    _FakeNotebookBar.made.clear()
    nullatlas.csr_test(square_points, nullatlas.Rectangle(0, 0, 1, 1), stats=["nnmean"], method="mc",
                       n_sims=5, seed=1)
    assert [(b.total, b.n) for b in _FakeNotebookBar.made] == [(5, 5)]


def test_notebook_without_widgets_falls_back_to_the_text_bar(monkeypatch):
    import tqdm.notebook
    import tqdm.std

    from nullatlas.lookup import progressbar

    def no_widgets(*a, **k):
        raise ImportError("IProgress not found")

    monkeypatch.setattr(progressbar, "in_notebook", lambda: True)
    monkeypatch.setattr(tqdm.notebook, "tqdm", no_widgets)
    bar = progressbar.progress_bar(3, "null simulations", "sim", None)
    assert type(bar) is tqdm.std.tqdm and not bar.disable
    bar.close()
    monkeypatch.setattr(progressbar, "in_notebook", lambda: False)
    bar = progressbar.progress_bar(3, "null simulations", "sim", None)       # pytest: no terminal
    assert bar.disable
    assert not progressbar.progress_bar(3, "x", "y", True).disable
