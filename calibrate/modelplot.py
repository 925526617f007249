"""Figure of a table's finite-window model (``nullatlas-calibrate fit --plot``).

Panels: (1) cell means of the mean nearest-neighbour distance against
kappa n^(-1/d), with the full fitted model's prediction at every cell and
the first-order Clark–Evans/Donnelly line (2D); (2) the Euler curve's
per-point mean at a few radii, cell means and the model's prediction per
cell; (3) the standardised model residuals of all cells and grid points
against N(0, 1), and the held-out shapes' prediction errors if stored, with
the values beyond the axis counted.  One legend below the panels names the
shapes (colours) and the markers.
"""
from __future__ import annotations

import numpy as np

from nullatlas.lookup.inference.tablereader import load_cell, load_holdout, load_model, open_table
from nullatlas.lookup.plots import new_figure, save_figure

from .model import design

__all__ = ["plot_model", "RESID_LIMIT"]

RESID_LIMIT = 5.0       # residual histograms span +-RESID_LIMIT; values beyond are counted


def _prediction(coef: np.ndarray, c, d: int) -> np.ndarray:
    """The fitted model [1, kappa n^(-1/d), n^(-2/d)] at cell ``c``, every grid point."""
    x = design([c.n], [c.kappa], d)[0]
    return np.atleast_2d(coef)[:, :len(x)] @ x


def _cells_and_model(ax, cells, coef, stat: str, j: int, d: int, colours) -> None:
    """Cell means (dots, coloured by shape) and the model at each cell (black bars)."""
    xs, obs, pred = [], [], []
    for c, raw in cells.values():
        xs.append(c.kappa * c.n ** (-1.0 / d))
        obs.append(float(raw[stat]["mean"][j]))
        pred.append(float(_prediction(coef, c, d)[j]))
        ax.plot(xs[-1], obs[-1], "o", ms=4, color=colours[c.shape])
    ax.plot(xs, pred, "_", ms=9, mew=1.6, color="black", ls="none", gid=f"model-{stat}-{j}")
    return np.asarray(xs)


def _nn_panel(ax, cells, model, d, colours) -> None:
    if "nnmean" not in model:
        return
    xs = _cells_and_model(ax, cells, np.asarray(model["nnmean"]["mean_coef"]), "nnmean", 0, d, colours)
    if d == 2:
        xx = np.linspace(0, xs.max(), 50)
        ax.plot(xx, 0.5 + 0.0514 * xx, "k:", lw=1)
    ax.set_xlabel(f"kappa n^(-1/{d})")
    ax.set_ylabel("mean nearest-neighbour distance (normalised)")
    ax.set_title("mean NN distance: cells and the fitted model", fontsize=10)


def _euler_panel(ax, cells, model, info, d, colours) -> None:
    grid = info.grids.get("rho")
    if "euler" in model and grid is not None:
        coef = np.asarray(model["euler"]["mean_coef"])
        for j in (7, 19, 39):
            if j >= len(grid):
                continue
            xs = _cells_and_model(ax, cells, coef, "euler", j, d, colours)
            last = list(cells.values())[int(np.argmax(xs))][0]
            # the radius is written beside the axes, level with its model at the largest x
            ax.annotate(f"rho = {grid[j]:g}", (1.0, float(_prediction(coef, last, d)[j])),
                        xycoords=("axes fraction", "data"), xytext=(4, 0), textcoords="offset points",
                        fontsize=7, ha="left", va="center")
        ax.set_xlabel(f"kappa n^(-1/{d})")
        ax.set_ylabel("Euler characteristic per point")
    ax.set_title("Euler curve at three radii: cells and model", fontsize=10)


def _beyond(v: np.ndarray, lim: float) -> str:
    lo, hi = int((v < -lim).sum()), int((v > lim).sum())
    return f"{len(v)} values; {lo} below -{lim:g}, {hi} above {lim:g} (not drawn)"


def _residual_panel(ax, model, path) -> None:
    from scipy import stats as st

    lim = RESID_LIMIT
    res = np.concatenate([np.ravel(v["mean_resid"]) for v in model.values()
                          if isinstance(v, dict) and "mean_resid" in v])
    res = res[np.isfinite(res)]
    bins = np.linspace(-lim, lim, 41)
    ax.hist(res[np.abs(res) <= lim], bins=bins, weights=np.full((np.abs(res) <= lim).sum(), 1 / len(res))
            / (bins[1] - bins[0]), alpha=0.5, label=f"fit residuals: {_beyond(res, lim)}")
    try:
        hold = load_holdout(path)
    except ValueError:
        hold = {}
    for shape, per in hold.items():
        if shape == "attrs":
            continue
        err = np.concatenate([np.ravel(v["errors"]) for v in per.values()
                              if isinstance(v, dict) and "errors" in v])
        err = err[np.isfinite(err)]
        if len(err):
            inside = np.abs(err) <= lim
            ax.hist(err[inside], bins=bins, weights=np.full(inside.sum(), 1 / len(err)) / (bins[1] - bins[0]),
                    histtype="step", lw=1.5, label=f"held-out {shape}: {_beyond(err, lim)}")
    xx = np.linspace(-lim, lim, 200)
    ax.plot(xx, st.norm.pdf(xx), "k-", lw=1, label="N(0, 1)")
    ax.set_xlim(-lim, lim)
    ax.set_xlabel("standard errors")
    ax.set_ylabel("density (share of all values)")
    ax.set_title("model residuals (all statistics, grid points)", fontsize=10)
    ax.legend(fontsize=7, loc="upper center", bbox_to_anchor=(0.5, -0.16), frameon=False)


def plot_model(path, out: str | None = None):
    """Draw the model figure of table ``path``.

    Parameters
    ----------
    path : str
        A null table (HDF5).
    out : str, optional
        Write the figure here (.png/.pdf/.svg) and return the path; without
        it, return the Figure.

    Returns
    -------
    str or matplotlib.figure.Figure
    """
    from matplotlib.lines import Line2D

    info = open_table(path)
    d = info.dimension
    model = load_model(path)
    cells = {c.name: (c, load_cell(path, c.name)) for c in info.cells}
    colours = {s: f"C{i % 10}" for i, s in enumerate(info.shapes())}
    fig = new_figure(out, (15, 5.6))
    axes = fig.subplots(1, 3)
    _nn_panel(axes[0], cells, model, d, colours)
    _euler_panel(axes[1], cells, model, info, d, colours)
    _residual_panel(axes[2], model, path)
    handles = [Line2D([], [], ls="none", marker="o", color=col, label=s) for s, col in colours.items()]
    handles.append(Line2D([], [], ls="none", marker="_", ms=9, mew=1.6, color="black",
                          label="fitted model at each cell (all 3 terms)"))
    if d == 2 and "nnmean" in model:
        handles.append(Line2D([], [], ls=":", color="black",
                              label="Clark-Evans + Donnelly, first order: 0.5 + 0.0514 x"))
    fig.suptitle(f"kappa finite-window model (terms 1, kappa n^(-1/d), n^(-2/d)) of {info.path} ({d}D, "
                 f"{len(info.cells)} cells); the runtime uses the geometric model, see "
                 "'nullatlas-calibrate validate --plot'", fontsize=10)
    fig.tight_layout(rect=(0, 0.1, 1, 1))
    fig.legend(handles=handles, loc="lower left", bbox_to_anchor=(0.04, 0.0), ncol=4, fontsize=8,
               title="shape (colour) and model", title_fontsize=8, frameon=False)
    return fig if out is None else save_figure(fig, out)
