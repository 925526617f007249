"""Figures of a test result: the persistence diagram and each tested curve
against its null band (pointwise and global envelopes), and scalar
statistics against their simulated null distribution."""
from __future__ import annotations

import os

import numpy as np

from .atomic import atomic_path, check_writable
from .errors import OptionError

__all__ = ["plot_result", "plot_batch", "check_plot_path", "save_figure", "PLOT_FORMATS"]

PLOT_FORMATS = (".png", ".pdf", ".svg")


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
    import matplotlib.pyplot as plt

    try:
        with atomic_path(path) as tmp:
            fig.savefig(tmp, format=os.path.splitext(path)[1].lower().lstrip("."), dpi=110)
    finally:
        plt.close(fig)
    return path


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
        # each curve standardised: z = (observed - null mean) / null sd, with
        # the pointwise (+-1.96) and global 95% bands in the same units
        c = r.curve
        g = np.asarray(c["grid"], float)
        def f(key):
            return np.asarray([np.nan if v is None else v for v in c[key]], float)
        mean, sd = f("null_mean"), f("null_sd")
        with np.errstate(invalid="ignore", divide="ignore"):
            z = np.where(sd > 0, (f("observed") - mean) / sd, np.nan)
            glo = np.where(sd > 0, (f("global_lo") - mean) / sd, np.nan)
            ghi = np.where(sd > 0, (f("global_hi") - mean) / sd, np.nan)
        used = np.isfinite(f("z")) if "z" in c else np.isfinite(z)
        ax.fill_between(g, glo, ghi, color="tab:blue", alpha=0.18, label="global 95% band")
        ax.fill_between(g, -1.96, 1.96, color="tab:blue", alpha=0.30, label="pointwise 95%")
        ax.axhline(0, color="tab:blue", lw=0.8)
        ax.plot(g, np.where(used, z, np.nan), color="black", lw=1.6, label="observed z")
        if (~used & np.isfinite(z)).any():
            ax.plot(g, np.where(~used, z, np.nan), color="grey", lw=1, ls=":",
                    label="not used by the test")
        tag = " (primary)" if r.primary else ""
        ax.set_title(f"{r.name}{tag}: p = {r.pvalue:.3g}" + ("" if r.trusted else " (untrusted)"))
        ax.set_xlabel("normalised radius" if r.name not in ("apf0", "apf1", "apf2")
                      else "mean age (normalised)")
        ax.set_ylabel("z (standardised)")
        ax.legend(fontsize=7)
    if scalars:
        # observed z of each scalar against the null density of z
        ax = axes[1 + len(curves)]
        xx = np.linspace(-4, 4, 200)
        ax.plot(xx, np.exp(-xx ** 2 / 2) / np.sqrt(2 * np.pi), color="tab:blue", lw=1,
                label="null density of z (normal limit)")
        ax.fill_between(xx, 0, np.exp(-xx ** 2 / 2) / np.sqrt(2 * np.pi),
                        where=np.abs(xx) >= 1.96, color="tab:blue", alpha=0.25,
                        label="two-sided 5% tails")
        for k, r in enumerate(scalars):
            if r.z is None or not np.isfinite(r.z):
                continue
            zc = float(np.clip(r.z, -4, 4))
            col = "tab:red" if (r.pvalue is not None and r.pvalue <= 0.05) else "black"
            ax.axvline(zc, color=col, lw=1.2)
            ax.annotate(f"{r.name}{'' if abs(r.z) <= 4 else ' (off scale)'}", (zc, 0.42 - 0.04 * (k % 8)),
                        fontsize=7, rotation=90, ha="right", va="top", color=col)
        ax.set_xlabel("observed z (red: p <= 0.05)")
        ax.set_ylim(0, 0.45)
        ax.set_title("scalar statistics")
        ax.legend(fontsize=7, loc="upper right")
    for ax in axes[npanel:]:
        ax.set_visible(False)
    w = result.window
    fig.suptitle(title or f"n = {result.n}, window {w['kind']} (kappa {w['kappa']:.3g})")
    fig.tight_layout()
    return save_figure(fig, path)


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
    return save_figure(fig, path)
