"""Figure of a table's finite-window model (``nullatlas-calibrate fit --plot``).

Panels: (1) cell means of the mean nearest-neighbour distance against
kappa n^(-1/d), with the fitted line and the Clark–Evans/Donnelly line
(2D); (2) the Euler curve's per-point mean at a few radii, cell means and
model; (3) the standardised model residuals of all cells and grid points
against N(0, 1), and the held-out shape's prediction errors if stored.
"""
from __future__ import annotations

import numpy as np

from nullatlas.lookup.inference.tablereader import load_cell, load_holdout, load_model, open_table
from nullatlas.lookup.plots import check_plot_path, save_figure

__all__ = ["plot_model"]


def plot_model(path, out: str) -> str:
    """Draw the model figure of table ``path`` to ``out`` (.png/.pdf/.svg)."""
    check_plot_path(out)
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from scipy import stats as st

    info = open_table(path)
    d = info.dimension
    model = load_model(path)
    cells = {c.name: (c, load_cell(path, c.name)) for c in info.cells}
    fig, axes = plt.subplots(1, 3, figsize=(14, 4.2))
    colours = {s: f"C{i}" for i, s in enumerate(info.shapes())}

    ax = axes[0]
    if "nnmean" in model:
        coef = np.asarray(model["nnmean"]["mean_coef"])[0]
        xs = []
        for c, raw in cells.values():
            x = c.kappa * c.n ** (-1.0 / d)
            ax.plot(x, float(raw["nnmean"]["mean"][0]), "o", ms=4, color=colours[c.shape])
            xs.append(x)
        xx = np.linspace(0, max(xs), 50)
        ax.plot(xx, coef[0] + coef[1] * xx, "k-", lw=1, label=f"fit: {coef[0]:.4f} + {coef[1]:.4f} x")
        if d == 2:
            ax.plot(xx, 0.5 + 0.0514 * xx, "k:", lw=1, label="Clark-Evans + Donnelly: 0.5 + 0.0514 x")
        for s, col in colours.items():
            ax.plot([], [], "o", color=col, label=s)
        ax.set_xlabel(f"kappa n^(-1/{d})")
        ax.set_ylabel("mean nearest-neighbour distance (normalised)")
        ax.legend(fontsize=7, loc="lower right")
    ax.set_title("boundary term of the mean NN distance")

    ax = axes[1]
    if "euler" in model:
        grid = info.grids.get("rho")
        coef = np.asarray(model["euler"]["mean_coef"])
        for j in (7, 19, 39):
            if grid is None or j >= len(grid):
                continue
            xs = []
            for c, raw in cells.values():
                x = c.kappa * c.n ** (-1.0 / d)
                ax.plot(x, float(raw["euler"]["mean"][j]), ".", color=colours[c.shape])
                xs.append(x)
            xx = np.linspace(0, max(xs), 50)
            ax.plot(xx, coef[j, 0] + coef[j, 1] * xx, "k-", lw=0.8)
            ax.annotate(f"rho={grid[j]:g}", (xx[-1], coef[j, 0] + coef[j, 1] * xx[-1]), fontsize=7)
        ax.set_xlabel(f"kappa n^(-1/{d})")
        ax.set_ylabel("Euler characteristic per point")
    ax.set_title("Euler curve: cell means and model")

    ax = axes[2]
    res = np.concatenate([np.ravel(v["mean_resid"]) for v in model.values()
                          if isinstance(v, dict) and "mean_resid" in v])
    res = res[np.isfinite(res)]
    bins = np.linspace(-5, 5, 41)
    ax.hist(np.clip(res, -5, 5), bins=bins, density=True, alpha=0.5, label="fit residuals")
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
        ax.hist(np.clip(err, -5, 5), bins=bins, density=True, histtype="step", lw=1.5,
                label=f"held-out {shape}: prediction errors")
    xx = np.linspace(-5, 5, 200)
    ax.plot(xx, st.norm.pdf(xx), "k-", lw=1, label="N(0, 1)")
    ax.set_xlabel("standard errors")
    ax.set_title("model residuals (all statistics, grid points)")
    ax.legend(fontsize=7)
    fig.suptitle(f"two-term finite-window model (kappa n^(-1/d)) of {info.path} ({d}D, "
                 f"{len(info.cells)} cells); the runtime uses the geometric model, see "
                 "'nullatlas-calibrate validate --plot'", fontsize=10)
    fig.tight_layout()
    return save_figure(fig, out)
