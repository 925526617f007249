"""Figures of a test result: the persistence diagram, each tested curve
against the null bands of its route, the scalar statistics' z-scores, and
the batch summary.

Every function draws into a matplotlib ``Axes`` given by the caller, or
makes a ``Figure``; with a file path the figure is written there instead
(atomically) and the path is returned.  Writing a file never touches
pyplot's backend, so the functions are safe in a notebook.
"""
from __future__ import annotations

import os
import sys

import numpy as np

from .atomic import atomic_path, check_writable
from .errors import OptionError

__all__ = ["plot_result", "plot_diagram", "plot_curve", "plot_scalars", "plot_batch",
           "check_plot_path", "save_figure", "PLOT_FORMATS", "Z_LIMIT"]

PLOT_FORMATS = (".png", ".pdf", ".svg")
Z_LIMIT = 4.0          # scalar z-scores beyond +-Z_LIMIT are drawn clipped, with their value
_UNTRUSTED = "tab:orange"


def check_plot_path(path: str) -> None:
    """Raise OptionError unless ``path`` has a known suffix and an existing
    folder, and WriteError (naming ``path``) unless a file can be created there."""
    ext = os.path.splitext(path)[1].lower()
    if ext not in PLOT_FORMATS:
        raise OptionError(f"--plot file must end in {', '.join(PLOT_FORMATS)}, got '{path}'")
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise OptionError(f"--plot folder does not exist: {folder}")
    check_writable(path)


def save_figure(fig, path: str) -> str:
    """Write a matplotlib figure to ``path`` atomically (format from the suffix)
    and close it; a failed write raises WriteError naming ``path``."""
    try:
        with atomic_path(path) as tmp:
            fig.savefig(tmp, format=os.path.splitext(path)[1].lower().lstrip("."), dpi=110)
    finally:
        if "matplotlib.pyplot" in sys.modules:
            sys.modules["matplotlib.pyplot"].close(fig)
    return path


def new_figure(path: str | None, figsize: tuple):
    """A Figure: detached from pyplot when it goes to ``path`` (no backend
    is chosen or changed), a pyplot figure otherwise (shown by a notebook)."""
    if path is not None:
        check_plot_path(path)
        from matplotlib.figure import Figure
        return Figure(figsize=figsize)
    import matplotlib.pyplot as plt
    return plt.figure(figsize=figsize)


def _finish(fig, path: str | None):
    return fig if path is None else save_figure(fig, path)


def _axes(ax, figsize=(5.0, 4.0)):
    if ax is not None:
        return ax
    return new_figure(None, figsize).subplots()


def _legend_below(ax, handles=None, labels=None, ncol=2):
    """A legend under the axes, outside the data area."""
    if handles is None:
        handles, labels = ax.get_legend_handles_labels()
    if handles:
        ax.legend(handles, labels, fontsize=7, loc="upper center", bbox_to_anchor=(0.5, -0.2),
                  ncol=ncol, frameon=False)


def plot_diagram(diagram, ax=None):
    """Draw a persistence diagram (birth against death per homology degree).

    Parameters
    ----------
    diagram : Diagram
        ``CSRTestResult.diagram``.
    ax : matplotlib.axes.Axes, optional
        Axes to draw into; a new figure's axes by default.

    Returns
    -------
    matplotlib.axes.Axes
    """
    ax = _axes(ax)
    top = 0.0
    for q in range(diagram.dim if diagram is not None else 0):
        p = diagram.finite(q)
        if len(p):
            ax.scatter(p[:, 0], p[:, 1], s=6, alpha=0.6, label=f"H{q} ({len(p)})")
            top = max(top, p[:, 1].max())
    ax.plot([0, top * 1.05], [0, top * 1.05], color="grey", lw=0.8)
    ax.set_xlabel("birth (normalised radius)")
    ax.set_ylabel("death (normalised radius)")
    if top > 0:
        # death >= birth: the triangle below the diagonal holds no points
        ax.legend(fontsize=8, loc="lower right")
    ax.set_title("persistence diagram")
    return ax


def _ptext(r) -> str:
    """``p = 0.043``, or ``p < 1e-16`` / ``p <= 0.001`` for a bound."""
    from .results import format_pvalue

    text = format_pvalue(r.pvalue, r.pvalue_is_bound, r.n_sims)
    return f"p {text}" if r.pvalue_is_bound else f"p = {text}"


def _runs(mask: np.ndarray):
    """(start, stop) index pairs of the runs of True in ``mask``."""
    m = np.concatenate([[False], mask, [False]]).astype(int)
    d = np.diff(m)
    return list(zip(np.flatnonzero(d == 1), np.flatnonzero(d == -1)))


def _standardised(c: dict):
    def f(key):
        return np.asarray([np.nan if v is None else v for v in c.get(key, [])], float)
    mean, sd = f("null_mean"), f("null_sd")
    ok = sd > 0
    safe = np.where(ok, sd, 1.0)
    out = {k: np.where(ok, (f(k) - mean) / safe, np.nan)
           for k in ("observed", "global_lo", "global_hi", "pointwise_lo", "pointwise_hi")}
    zc = f("z")
    out["used"] = np.isfinite(zc) if len(zc) else np.isfinite(out["observed"])
    return out


def _zlimits(s: dict) -> tuple:
    """y limits from what the test uses (observed z and bands at tested
    points), at least +-3: untested points with a near-zero null sd would
    otherwise stretch the axis by orders of magnitude."""
    used = s["used"]
    vals = np.concatenate([s[k][used] for k in ("observed", "global_lo", "global_hi")] + [[-3.0, 3.0]])
    vals = vals[np.isfinite(vals)]
    lo, hi = float(vals.min()), float(vals.max())
    pad = 0.08 * (hi - lo)
    return lo - pad, hi + pad


def plot_curve(stat, ax=None, legend: bool = True):
    """Draw one tested curve, standardised, against the null bands of its route.

    z = (observed - null mean) / null sd on the curve's grid.  The global 95%
    band is the one the test uses; the pointwise 95% band is drawn from the
    null's own pointwise quantiles (Monte Carlo) or its normal limit (instant
    test).  Grid points the test does not use are shaded and labelled "not
    tested".  An untrusted result has an orange frame and says so in the title.

    Parameters
    ----------
    stat : StatResult
        A curve result (``stat.curve`` not None).
    ax : matplotlib.axes.Axes, optional
    legend : bool
        Put a legend below the axes.

    Returns
    -------
    matplotlib.axes.Axes
    """
    ax = _axes(ax)
    c = stat.curve
    g = np.asarray(c["grid"], float)
    s = _standardised(c)
    used, z = s["used"], s["observed"]
    mc = str(stat.method).startswith("mc")
    # bands only where the test looks: elsewhere they would claim a test that is not made
    def on(v):
        return np.where(used, v, np.nan)
    ax.fill_between(g, on(s["global_lo"]), on(s["global_hi"]), color="tab:blue", alpha=0.18,
                    label="global 95% band (the test)")
    ax.fill_between(g, on(s["pointwise_lo"]), on(s["pointwise_hi"]), color="tab:blue", alpha=0.30,
                    label="pointwise 95%, " + ("null quantiles" if mc else "normal limit"))
    ax.axhline(0, color="tab:blue", lw=0.8)
    ax.plot(g, on(z), color="black", lw=1.6, label="observed z")
    free = ~used
    if free.any():
        for k, (a, b) in enumerate(_runs(free)):
            lo = g[a] - (g[a] - g[a - 1]) / 2 if a > 0 else g[a]
            hi = g[b - 1] + (g[b] - g[b - 1]) / 2 if b < len(g) else g[b - 1]
            ax.axvspan(lo, hi, color="0.85", zorder=0, lw=0, label="not tested" if k == 0 else None)
        lo, hi = _zlimits(s)
        zf = np.where(free, z, np.nan)
        if np.isfinite(zf).any():
            with np.errstate(invalid="ignore"):
                clipped = bool(np.any((zf < lo) | (zf > hi)))
            ax.plot(g, np.clip(zf, lo, hi), color="grey", lw=1, ls=":",
                    label="observed z, not tested" + (" (clipped)" if clipped else ""))
        ax.set_ylim(lo, hi)
    tag = " (primary)" if stat.primary else ""
    p = stat.pvalue if stat.pvalue is not None else np.nan
    ptxt = _ptext(stat) if np.isfinite(p) else "no p-value"
    ax.set_title(f"{stat.name}{tag}: {ptxt}" + ("" if stat.trusted else "\nUNTRUSTED"),
                 color="black" if stat.trusted else _UNTRUSTED, fontsize=10)
    if not stat.trusted:
        for sp in ax.spines.values():
            sp.set_color(_UNTRUSTED)
            sp.set_linewidth(2)
    ax.set_xlabel("normalised radius" if stat.name not in ("apf0", "apf1", "apf2")
                  else "mean age (normalised)")
    ax.set_ylabel("z (standardised)")
    if legend:
        _legend_below(ax)
    return ax


def plot_scalars(results, ax=None):
    """Draw the z-scores of scalar statistics, one row each.

    z-scores beyond +-``Z_LIMIT`` are drawn as a triangle on the edge with
    their value written beside it.  Red: p <= 0.05; hollow orange marker and
    "untrusted" in the label: a result not to be trusted.

    Parameters
    ----------
    results : list of StatResult
        Scalar results (others are skipped).
    ax : matplotlib.axes.Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
    """
    rows = [r for r in results if r.curve is None]
    ax = _axes(ax, (5.0, 1.2 + 0.35 * len(rows)))
    lim = Z_LIMIT
    ax.axvspan(-lim - 0.8, -1.96, color="tab:blue", alpha=0.12, lw=0)
    ax.axvspan(1.96, lim + 0.8, color="tab:blue", alpha=0.12, lw=0, label="|z| > 1.96")
    ax.axvline(0, color="tab:blue", lw=0.8)
    labels = []
    for k, r in enumerate(rows):
        y = len(rows) - 1 - k
        p = r.pvalue if r.pvalue is not None else np.nan
        labels.append(f"{r.name}  {_ptext(r)}" + ("" if r.trusted else " (untrusted)"))
        if r.z is None or not np.isfinite(r.z):
            ax.text(0, y, "z undefined", ha="center", va="center", fontsize=7, color="grey")
            continue
        col = "tab:red" if np.isfinite(p) and p <= 0.05 else "black"
        face = col if r.trusted else "none"
        edge = col if r.trusted else _UNTRUSTED
        z = float(r.z)
        if abs(z) <= lim:
            ax.plot([z], [y], "o", ms=6, mfc=face, mec=edge, mew=1.5)
        else:
            side = np.sign(z)
            ax.plot([side * lim], [y], ">" if side > 0 else "<", ms=8, mfc=face, mec=edge, mew=1.5)
            ax.text(side * (lim - 0.3), y, f"z = {z:.3g}", ha="right" if side > 0 else "left",
                    va="center", fontsize=7, color=col)
    ax.set_yticks(range(len(rows)))
    ax.set_yticklabels(labels[::-1], fontsize=7)
    for t, r in zip(ax.get_yticklabels(), rows[::-1]):
        if not r.trusted:
            t.set_color(_UNTRUSTED)
    ax.set_ylim(-0.7, len(rows) - 0.3)
    ax.set_xlim(-lim - 0.6, lim + 0.6)
    ax.set_xlabel(f"observed z (red: p <= 0.05; triangles: |z| > {lim:g}, value written)")
    ax.set_title("scalar statistics", fontsize=10)
    return ax


def plot_result(result, path: str | None = None, title: str | None = None):
    """Draw a test result: diagram, every tested curve, the scalar z-scores.

    Parameters
    ----------
    result : CSRTestResult
    path : str, optional
        Write the figure here (.png/.pdf/.svg, atomically) and return the path;
        without it, return the Figure.
    title : str, optional

    Returns
    -------
    str or matplotlib.figure.Figure
    """
    curves = [r for r in result.results if r.curve is not None and np.ndim(r.curve["grid"][0]) == 0]
    scalars = [r for r in result.results if r.curve is None]
    npanel = 1 + len(curves) + (1 if scalars else 0)
    ncol = min(3, npanel)
    nrow = int(np.ceil(npanel / ncol))
    fig = new_figure(path, (4.8 * ncol, 4.0 * nrow + 0.9))
    axes = fig.subplots(nrow, ncol, squeeze=False).ravel()
    plot_diagram(result.diagram, axes[0])
    handles = {}
    for ax, r in zip(axes[1:], curves):
        plot_curve(r, ax, legend=False)
        for h, lab in zip(*ax.get_legend_handles_labels()):
            handles.setdefault(lab, h)
    if "observed z, not tested (clipped)" in handles:      # one entry for the untested line
        handles.pop("observed z, not tested", None)
    if scalars:
        plot_scalars(scalars, axes[1 + len(curves)])
    for ax in axes[npanel:]:
        ax.set_visible(False)
    w = result.window
    fig.suptitle(title or f"n = {result.n}, window {w['kind']} (kappa {w['kappa']:.3g})")
    spare = npanel < len(axes)         # the legend goes into an empty panel, else below all panels
    bottom = 0.9 / (4.0 * nrow + 0.9) if handles and not spare else 0.0
    fig.tight_layout(rect=(0, bottom, 1, 1))
    if handles and spare:
        axes[npanel].set_visible(True)
        axes[npanel].set_axis_off()
        axes[npanel].legend(list(handles.values()), list(handles), loc="center", fontsize=9,
                            title="curve panels", frameon=False)
    elif handles:
        fig.legend(list(handles.values()), list(handles), loc="lower center", ncol=min(5, len(handles)),
                   fontsize=8, frameon=False)
    return _finish(fig, path)


def plot_batch(res, path: str | None = None, alpha: float = 0.05):
    """Summary figure of a batch: histogram of the primary p-values, and the
    sorted p-values against the Benjamini–Hochberg line alpha i / m.

    Parameters
    ----------
    res : BatchResult
    path : str, optional
        Write the figure here and return the path; without it, return the Figure.
    alpha : float

    Returns
    -------
    str or matplotlib.figure.Figure
    """
    from matplotlib.ticker import MaxNLocator

    p = res.pvalue
    p = p[np.isfinite(p)]
    total = len(res.rows)
    fig = new_figure(path, (10, 3.9))
    axes = fig.subplots(1, 2)
    ax = axes[0]
    ax.hist(p, bins=np.linspace(0, 1, 21), color="0.55", edgecolor="white")
    if len(p):
        ax.axhline(len(p) / 20, color="k", ls=":", lw=1, label="expected under CSR")
        ax.legend(fontsize=8)
    ax.yaxis.set_major_locator(MaxNLocator(integer=True))
    ax.set_xlabel("p-value of the primary test")
    ax.set_ylabel("files")
    missing = total - len(p)
    ax.set_title(f"{total} file{'s' if total != 1 else ''}"
                 + (f" ({missing} without a p-value)" if missing else ""))
    ax = axes[1]
    m = len(p)
    if m:
        ps = np.sort(p)
        i = np.arange(1, m + 1)
        bh_line = alpha * i / m
        rej = ps <= bh_line
        ax.plot(i, ps, "o", ms=3, color="C0", label="sorted p-values")
        ax.plot(i, bh_line, "k-", lw=1, label=f"BH line {alpha:g} i/m")
        ax.plot(i[rej], ps[rej], "o", ms=4, color="C3", label="below the line")
        ax.set_yscale("log")
        ax.legend(fontsize=8)
    ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    ax.set_xlabel("rank i")
    ax.set_ylabel("p-value")
    ax.set_title("Benjamini-Hochberg")
    fig.tight_layout()
    return _finish(fig, path)
