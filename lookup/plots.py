"""Figures of a test result: the persistence diagram and each tested curve
against its null band (pointwise and global envelopes), and scalar
statistics against their simulated null distribution."""
from __future__ import annotations

import os

import numpy as np

from .atomic import atomic_path
from .errors import OptionError

__all__ = ["plot_result", "plot_batch", "check_plot_path", "PLOT_FORMATS"]

PLOT_FORMATS = (".png", ".pdf", ".svg")


def check_plot_path(path: str) -> None:
    """Raise OptionError unless ``path`` has a known suffix and a writable folder."""
    ext = os.path.splitext(path)[1].lower()
    if ext not in PLOT_FORMATS:
        raise OptionError(f"--plot file must end in {', '.join(PLOT_FORMATS)}, got '{path}'")
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise OptionError(f"--plot folder does not exist: {folder}")


def plot_result(result, path: str, title: str | None = None) -> str:
    """Draw ``result`` (a CSRTestResult) to ``path`` (.png/.pdf/.svg), atomically."""
    check_plot_path(path)
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    curves = [r for r in result.results if r.curve is not None and np.ndim(r.curve["grid"][0]) == 0]
    scalars = [r for r in result.results if r.curve is None]
    npanel = 1 + len(curves) + (1 if scalars else 0)
    ncol = min(3, npanel)
    nrow = int(np.ceil(npanel / ncol))
    fig, axes = plt.subplots(nrow, ncol, figsize=(4.6 * ncol, 3.9 * nrow), squeeze=False)
    axes = axes.ravel()
    ax = axes[0]
    diag = result.diagram
    if diag is not None:
        top = 0.0
        for q in range(diag.dim):
            p = diag.finite(q)
            if len(p):
                ax.scatter(p[:, 0], p[:, 1], s=6, alpha=0.6, label=f"H{q} ({len(p)})")
                top = max(top, p[:, 1].max())
        ax.plot([0, top * 1.05], [0, top * 1.05], color="grey", lw=0.8)
        ax.set_xlabel("birth (normalised radius)")
        ax.set_ylabel("death (normalised radius)")
        ax.legend(fontsize=8)
    ax.set_title("persistence diagram")
    for ax, r in zip(axes[1:], curves):
        c = r.curve
        g = np.asarray(c["grid"], float)
        mean = np.asarray(c["null_mean"], float)
        f = lambda key: np.asarray([np.nan if v is None else v for v in c[key]], float)
        ax.fill_between(g, f("global_lo"), f("global_hi"), color="tab:blue", alpha=0.18,
                        label="global 95% envelope")
        ax.fill_between(g, f("pointwise_lo"), f("pointwise_hi"), color="tab:blue", alpha=0.35,
                        label="pointwise 95%")
        ax.plot(g, mean, color="tab:blue", lw=1, label="null mean")
        ax.plot(g, f("observed"), color="black", lw=1.6, label="observed")
        tag = " (primary)" if r.primary else ""
        ax.set_title(f"{r.name}{tag}: p = {r.pvalue:.3g}")
        ax.set_xlabel("normalised radius")
        ax.legend(fontsize=7)
    if scalars:
        ax = axes[1 + len(curves)]
        zs = [r.z for r in scalars]
        colors = ["tab:red" if r.pvalue <= 0.05 else "tab:grey" for r in scalars]
        ax.barh([r.name for r in scalars], zs, color=colors)
        ax.axvline(0, color="black", lw=0.8)
        for v in (-1.96, 1.96):
            ax.axvline(v, color="grey", ls="--", lw=0.8)
        ax.set_xlabel("z against the simulated null (red: p <= 0.05)")
        ax.set_title("scalar statistics")
    for ax in axes[npanel:]:
        ax.set_visible(False)
    w = result.window
    fig.suptitle(title or f"n = {result.n}, window {w['kind']} (kappa {w['kappa']:.3g})")
    fig.tight_layout()
    ext = os.path.splitext(path)[1]
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format=ext[1:], dpi=110)
    plt.close(fig)
    return path


def plot_batch(res, path: str, alpha: float = 0.05) -> str:
    """Summary figure of a batch: histogram of the primary p-values, and the
    sorted p-values against the Benjamini–Hochberg line alpha i / m."""
    check_plot_path(path)
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    p = res.pvalue
    p = p[np.isfinite(p)]
    fig, axes = plt.subplots(1, 2, figsize=(10, 3.9))
    ax = axes[0]
    ax.hist(p, bins=np.linspace(0, 1, 21), color="0.55", edgecolor="white")
    if len(p):
        ax.axhline(len(p) / 20, color="k", ls=":", lw=1, label="expected under CSR")
        ax.legend(fontsize=8)
    ax.set_xlabel("p-value of the primary test")
    ax.set_ylabel("files")
    ax.set_title(f"{len(p)} files ({len(res.rows) - len(p)} without a p-value)")
    ax = axes[1]
    m = len(p)
    if m:
        ps = np.sort(p)
        i = np.arange(1, m + 1)
        bh = benjamini_hochberg_line = alpha * i / m
        rej = ps <= bh
        ax.plot(i, ps, "o", ms=3, color="C0", label="sorted p-values")
        ax.plot(i, benjamini_hochberg_line, "k-", lw=1, label=f"BH line {alpha:g} i/m")
        ax.plot(i[rej], ps[rej], "o", ms=4, color="C3", label="below the line")
        ax.set_yscale("log")
        ax.legend(fontsize=8)
    ax.set_xlabel("rank i")
    ax.set_ylabel("p-value")
    ax.set_title("Benjamini-Hochberg")
    fig.tight_layout()
    ext = os.path.splitext(path)[1].lower().lstrip(".")
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format=ext, dpi=110)
    plt.close(fig)
    return path
