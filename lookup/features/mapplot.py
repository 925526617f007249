"""The map of a ``FeatureMap``: the pattern in its window with the significant
features drawn and labelled, beside the persistence diagram of the tested
families with each family's significance threshold.

The threshold of a family is the line death = c * birth, c the death/birth
ratio whose family-wise p equals alpha: a feature above its family's line
is significant, and no other is (p decreases as the ratio grows).  3D
patterns are drawn projected on the x-y plane; a void is outlined by the
convex hull of the projection of its bounding points, a loop by the
projection of its representative cycle.
"""
from __future__ import annotations

import numpy as np

from .results import KINDS

__all__ = ["plot_feature_map"]

_COLOURS = ["#d62728", "#1f77b4", "#2ca02c", "#9467bd", "#ff7f0e", "#8c564b", "#e377c2",
            "#17becf", "#bcbd22", "#7f7f7f"]
#: At most this many features are labelled on the map.
MAX_LABELS = 12


def _new_figure(path, figsize):
    """Detached from pyplot when it goes to a file; a pyplot figure otherwise."""
    if path is not None:
        from matplotlib.figure import Figure
        return Figure(figsize=figsize)
    import matplotlib.pyplot as plt
    return plt.figure(figsize=figsize)


def _save(fig, path: str) -> str:
    """Write the figure atomically (format from the suffix)."""
    import os

    from ..atomic import atomic_path
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format=os.path.splitext(path)[1].lower().lstrip("."), dpi=110)
    return path


def _outline(ax, window):
    """Draw the window's outline (x-y projection in 3D)."""
    import matplotlib.patches as mp

    kind = getattr(window, "kind", "")
    if hasattr(window, "centre") and hasattr(window, "r") and window.dim == 2:
        ax.add_patch(mp.Circle(tuple(window.centre), window.r, fill=False, lw=1.0, color="0.3"))
    elif hasattr(window, "lo") and hasattr(window, "hi"):
        lo, hi = window.lo[:2], window.hi[:2]
        ax.add_patch(mp.Rectangle(tuple(lo), *(hi - lo), fill=False, lw=1.0, color="0.3"))
    elif hasattr(window, "geometry") and window.dim == 2:
        g = window.geometry
        for part in getattr(g, "geoms", [g]):
            for ring in [part.exterior, *part.interiors]:
                x, y = ring.xy
                ax.plot(x, y, color="0.3", lw=1.0)
    else:
        return f"window outline of kind '{kind}' not drawn"
    return ""


def _hull(xy):
    from scipy.spatial import ConvexHull
    try:
        h = ConvexHull(xy)
    except Exception:
        return None
    v = xy[h.vertices]
    return np.vstack([v, v[:1]])


def _place_labels(ax, fig, items, force: bool = True):
    """Put each label (text, x, y, colour) at the first of eight offsets (at
    two distances) whose box overlaps no label placed before it; when none is
    free, the last offset (``force``) or no label at all."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    if fig.canvas is None or not hasattr(fig.canvas, "get_renderer"):
        FigureCanvasAgg(fig)
    # draw once so that the axes have their final limits (an equal aspect
    # adjusts the data limits only at draw time) before boxes are compared
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    boxes = []
    offs = [(8, 8), (8, -14), (-40, 8), (-40, -14), (14, 22), (-50, 22), (14, -28), (-50, -28)]
    for text, x, y, col in items:
        for k, (dx, dy) in enumerate(offs * 2):
            extra = 12 * (k // len(offs))
            t = ax.annotate(text, (x, y), xytext=(dx + np.sign(dx) * extra, dy + np.sign(dy) * extra),
                            textcoords="offset points", fontsize=7.5, color=col, zorder=6,
                            bbox=dict(boxstyle="round,pad=0.15", fc="white", ec=col, lw=0.6,
                                      alpha=0.9),
                            arrowprops=dict(arrowstyle="-", color=col, lw=0.6))
            bb = t.get_window_extent(renderer).expanded(1.05, 1.1)
            if not any(bb.overlaps(o) for o in boxes) or (force and k == 2 * len(offs) - 1):
                boxes.append(bb)
                break
            t.remove()


def plot_feature_map(res, path: str | None = None, window=None, title: str | None = None):
    """Map of the significant features and the persistence diagram.

    Parameters
    ----------
    res : FeatureMap
    path : str, optional
        Write the figure there (.png, .pdf, .svg), atomically; else return it.
    window : Window, optional
        The window (default: parsed again from ``res.window['spec']``).
    title : str, optional

    Returns
    -------
    str or matplotlib.figure.Figure
    """
    from ..patterns.windows import parse_window

    if window is None:
        window = parse_window(res.window["spec"])
    fig = _new_figure(path, (12.0, 5.6))
    axm, axd = fig.subplots(1, 2, gridspec_kw={"width_ratios": [1.15, 1.0]})
    P = res.points[:, :2]
    axm.scatter(P[:, 0], P[:, 1], s=4, color="0.6", lw=0, zorder=1)
    note = _outline(axm, window)
    sig = res.significant
    labels = []
    for j, f in enumerate(sig):
        col = _COLOURS[j % len(_COLOURS)]
        xy = res.points[f.points][:, :2]
        if f.dim == 1 and f.polygon is not None:
            ring = np.asarray(f.polygon)
            axm.fill(ring[:, 0], ring[:, 1], color=col, alpha=0.18, lw=0, zorder=2)
            axm.plot(ring[:, 0], ring[:, 1], color=col, lw=1.2, zorder=3)
            if getattr(f, "core", None) is not None and res.dim == 2:
                # its largest empty disk (radius = death), dashed
                cx, cy, cr = (float(v) for v in f.core[:3])
                t = np.linspace(0.0, 2.0 * np.pi, 181)
                axm.plot(cx + cr * np.cos(t), cy + cr * np.sin(t), color=col, lw=0.9, ls="--",
                         zorder=3)
        elif f.cycle is not None:
            ring = res.points[[*f.cycle, f.cycle[0]]][:, :2]
            axm.plot(ring[:, 0], ring[:, 1], color=col, lw=1.2, zorder=3)
        else:
            h = _hull(xy) if len(xy) >= 3 else None
            if h is not None:
                axm.plot(h[:, 0], h[:, 1], color=col, lw=1.0, ls="--" if f.dim == 2 else "-",
                         zorder=3)
        axm.scatter(xy[:, 0], xy[:, 1], s=10, color=col, lw=0, zorder=4)
        if j < MAX_LABELS:
            labels.append((f"{f.id}  p = {f.pvalue:.2g}", f.centre[0], f.centre[1], col))
    axm.set_aspect("equal", adjustable="datalim")
    axm.autoscale_view()
    more = f"; {len(sig) - MAX_LABELS} more not labelled" if len(sig) > MAX_LABELS else ""
    proj = ("\nprojected on x-y (voids: outline of their bounding points; loops: their cycle)"
            if res.dim == 3 else
            "\nholes: most persistent shape (filled), largest empty disk (dashed)"
            if any(f.dim == 1 for f in sig) else "")
    axm.set_title(f"{len(sig)} significant feature(s), family-wise alpha = {res.alpha:g}{more}{proj}",
                  fontsize=9)
    axm.set_xlabel("x")
    axm.set_ylabel("y")
    if note:
        axm.text(0.01, 0.01, note, transform=axm.transAxes, fontsize=7)

    # the diagram, log-log: lines of constant death/birth ratio are parallel
    markers = {0: "o", 1: "^", 2: "s"}
    fam_col = {0: "#1f77b4", 1: "#d62728", 2: "#9467bd"}
    lo_all, hi_all = [], []
    for q, fam in res.families.items():
        pr = fam["pairs_norm"]
        if len(pr) == 0:
            continue
        lo_all.append(pr.min())
        hi_all.append(pr.max())
        axd.scatter(pr[:, 0], pr[:, 1], s=9, marker=markers[q], color=fam_col[q], alpha=0.45,
                    lw=0, label=f"{KINDS[q]}s ({len(pr)})")
    if lo_all:
        lo, hi = min(lo_all) / 1.5, max(hi_all) * 1.5
        grid = np.array([lo, hi])
        axd.plot(grid, grid, color="0.5", lw=0.8)
        for q, fam in res.families.items():
            c = fam["threshold_ratio"]
            if np.isfinite(c):
                axd.plot(grid, c * grid, color=fam_col[q], lw=1.2, ls="--" if q == 0 else "-",
                         label=f"{KINDS[q]}s significant above: death = {c:.3g} x birth")
            else:
                axd.plot([], [], " ", label=f"{KINDS[q]}s: no ratio reaches alpha with this null")
        for f in sig:
            axd.scatter([f.birth_norm], [f.death_norm], s=22, facecolor="none",
                        edgecolor="k", lw=0.7)
        axd.set_xscale("log")
        axd.set_yscale("log")
        axd.set_xlim(lo, hi)
        axd.set_ylim(lo, hi * 3)
    axd.set_xlabel("birth (normalised radius)")
    axd.set_ylabel("death (normalised radius)")
    axd.set_title("persistence diagram; lines: family-wise threshold at alpha = "
                  f"{res.alpha:g}", fontsize=9)
    axd.legend(fontsize=7, loc="upper left")
    w = res.window
    fig.suptitle(title or f"where the structure is: n = {res.n}, window {w.get('spec', w.get('kind'))}",
                 fontsize=10)
    fig.tight_layout()
    # labels last, on the final layout: their overlap test uses display boxes
    _place_labels(axm, fig, labels)
    if lo_all and sig:
        # a crowded diagram leaves a point unlabelled rather than overlap labels
        _place_labels(axd, fig, [(f.id, f.birth_norm, f.death_norm, "k")
                                 for f in sig[:MAX_LABELS]], force=False)
    return fig if path is None else _save(fig, path)
