"""``nullatlas-calibrate power``: which statistic detects which structure?

For a window, n and a list of alternatives, the empirical power at alpha =
0.05 of every statistic against a strength parameter s in [0, 1]: each
pattern has round(s n) points from the structured process (thinned at random
to exactly that count) and the rest CSR, so s = 0 is CSR (power = size) and
s = 1 is the pure alternative.

Alternatives (``--alt NAME[:key=value,...]``): the models of
``lookup.processes.registry`` (thomas, matern, hardcore, strauss, lattice, voids,
inhom:EXPR), with lengths in normalised units.

Statistics: the instant tests of ``nullatlas test`` (from the tables; an
untrusted instant answer is reported as such), and classical baselines:
``L-mc`` and ``G-mc`` (global extreme rank length envelope tests of Besag's
L and the nearest-neighbour G against ``--sims`` CSR patterns shared by all
replicates, as n is fixed), and ``clark-evans`` (2D: z-test of the mean
nearest-neighbour distance with Donnelly's edge-corrected mean and variance,
Donnelly 1978, from memory).  Power is the fraction of replicates with
p <= 0.05, with Wilson 95% intervals.
"""
from __future__ import annotations

import math

import numpy as np

from nullatlas.lookup.errors import OptionError
from nullatlas.lookup.inference import ranks
from nullatlas.lookup.inference.asymptotic import asymptotic_result, instant_moments
from nullatlas.lookup.inference.montecarlo import _alternative_for, simulate_null
from nullatlas.lookup.inference.nullmoments import TableSet, default_tables
from nullatlas.lookup.processes.csr import csr
from nullatlas.lookup.processes.registry import FAMILIES, parse_model, simulate
from nullatlas.lookup.summaries.statistics import STATISTICS, compute, resolve_stats

from .check import wilson

__all__ = ["FAMILIES", "parse_alternative", "structured", "power_study", "clark_evans_p",
           "POWER_SEED"]

#: Alternatives are the models of ``lookup.processes.registry`` (see there).
parse_alternative = parse_model
structured = simulate

POWER_SEED = 5_151_515
def clark_evans_p(points, window) -> float:
    """Two-sided p-value of the Clark–Evans z-test with Donnelly's (1978, from
    memory) edge-corrected mean 0.5 sqrt(A/n) + (0.0514 + 0.041/sqrt(n)) P/n
    and variance 0.0703 A/n^2 + 0.037 P sqrt(A/n^5) (2D only)."""
    from scipy.spatial import cKDTree
    from scipy.special import ndtr

    n = len(points)
    A, P = window.measure, window.boundary_measure
    nn = cKDTree(points).query(points, k=2)[0][:, 1].mean()
    mean = 0.5 * math.sqrt(A / n) + (0.0514 + 0.041 / math.sqrt(n)) * P / n
    var = 0.0703 * A / n ** 2 + 0.037 * P * math.sqrt(A / n ** 5)
    z = (nn - mean) / math.sqrt(var)
    return float(min(1.0, 2 * ndtr(-abs(z))))


def _replicate(window, n, name, params, s, stats, seed):
    rng = np.random.default_rng(seed)
    k = int(round(s * n))
    pts = np.concatenate([structured(window, name, params, k, rng, n),
                          csr(window, n - k, rng)])
    vals = compute(pts, window, stats)
    ce = clark_evans_p(pts, window) if window.dim == 2 else float("nan")
    return vals, ce


def power_study(window, n: int, alternatives: list[str], strengths, reps: int, *, stats=None,
                tables=None, sims: int = 199, seed: int = POWER_SEED, jobs: int = 1,
                progress=None, alpha: float = 0.05) -> dict:
    """Empirical power of every statistic (see module doc); JSON-ready dict."""
    from joblib import Parallel, delayed
    from tqdm.auto import tqdm

    if reps < 20:
        raise OptionError(f"--reps must be at least 20, got {reps}")
    strengths = [float(x) for x in strengths]
    if any(not 0 <= x <= 1 for x in strengths):
        raise OptionError("strengths must lie in [0, 1]")
    alts = [parse_alternative(a) for a in alternatives]
    for name, params in alts:      # bad parameters: one clear error before any work
        structured(window, name, params, n, np.random.default_rng(0), n)
    tset = TableSet(tables) if tables else default_tables()
    chosen = resolve_stats(stats, window.dim)
    base = [STATISTICS["lfunc"], STATISTICS["gfunc"]]
    allstats = chosen + [b for b in base if b not in chosen]
    answers = {st.name: instant_moments(tset, window, n, st, _alternative_for(st, "two-sided")[0])
               for st in chosen}
    nms = {k: v[0] for k, v in answers.items()}
    trust = {k: v[1:] for k, v in answers.items()}
    root = np.random.SeedSequence(int(seed))
    null_ss, rep_ss = root.spawn(2)
    null = simulate_null(window, n, base, null_ss.spawn(sims), jobs=jobs)
    tasks = []
    kids = rep_ss.spawn(len(alts) * len(strengths))
    for ai, (name, params) in enumerate(alts):
        for si, s in enumerate(strengths):
            for q in kids[ai * len(strengths) + si].spawn(reps):
                tasks.append((ai, si, q))
    bar = tqdm(total=len(tasks), desc="power", unit="pattern",
               disable=None if progress is None else not progress, leave=False)
    out = [None] * len(tasks)
    try:
        gen = (Parallel(n_jobs=jobs, return_as="generator")(
            delayed(_replicate)(window, n, alts[ai][0], alts[ai][1], strengths[si], allstats, q)
            for ai, si, q in tasks) if jobs > 1 else
            (_replicate(window, n, alts[ai][0], alts[ai][1], strengths[si], allstats, q)
             for ai, si, q in tasks))
        for i, r in enumerate(gen):
            out[i] = r
            bar.update(1)
    finally:
        bar.close()
    rej = {}
    for (ai, si, _), (vals, ce) in zip(tasks, out):
        key = (ai, si)
        d = rej.setdefault(key, {})
        for st in chosen:
            nm = nms[st.name]
            if nm is None:
                continue
            p = asymptotic_result(st, vals[st.name], nm, _alternative_for(st, "two-sided")[0], n,
                                  True, []).pvalue
            d.setdefault(st.name, []).append(p <= alpha)
        for b in base:
            p = ranks.erl_test(np.atleast_1d(vals[b.name]), null[b.name], alpha=alpha)["pvalue"]
            d.setdefault({"lfunc": "L-mc", "gfunc": "G-mc"}[b.name], []).append(p <= alpha)
        if window.dim == 2:
            d.setdefault("clark-evans", []).append(ce <= alpha)
    rows = []
    for (ai, si), d in sorted(rej.items()):
        for stat, hits in d.items():
            k, m = int(np.sum(hits)), len(hits)
            tr = trust.get(stat)
            rows.append({"alternative": alternatives[ai], "strength": strengths[si],
                         "name": stat, "power": k / m, "ci": wilson(k, m), "reps": m,
                         "instant": stat in trust,
                         "trusted": None if tr is None else bool(tr[0])})
    return {"window": window.describe(), "n": int(n), "reps": int(reps), "sims": int(sims),
            "seed": int(seed), "alpha": alpha, "rows": rows}


def merge_studies(studies: list) -> dict:
    """One result from the studies of several n (one study is returned unchanged).

    Parameters
    ----------
    studies : list of dict
        Results of :func:`power_study` on the same window and alternatives.

    Returns
    -------
    dict
        With several studies: ``n`` is the list of n and every row carries
        its ``n``; the other keys are the first study's.
    """
    if len(studies) == 1:
        return studies[0]
    rows = [dict(r, n=s["n"]) for s in studies for r in s["rows"]]
    return dict(studies[0], n=[s["n"] for s in studies], rows=rows)


def _ns_text(n) -> str:
    """``200`` or ``200, 500``."""
    return ", ".join(str(x) for x in n) if isinstance(n, list) else str(n)


def _rows_for_plot(res: dict) -> dict:
    """A merged study with one panel per alternative and n."""
    if not isinstance(res["n"], list):
        return res
    rows = [dict(r, alternative=f"{r['alternative']}, n = {r['n']}") for r in res["rows"]]
    return dict(res, rows=rows)


_MARKERS = "osD^v<>PXh*p"


def _dodge(strengths: list, k: int) -> float:
    """Horizontal offset between neighbouring statistics: 2.5% of the
    strength range, so that lines on top of each other (power 1) stay apart."""
    span = (max(strengths) - min(strengths)) if len(strengths) > 1 else 1.0
    return 0.025 * span if k > 1 else 0.0


def _power_panel(ax, res: dict, alt: str, stats: list, dx: float) -> None:
    """One alternative: power against strength, one dodged line per statistic."""
    for j, s in enumerate(stats):
        rs = sorted((r for r in res["rows"] if r["alternative"] == alt and r["name"] == s),
                    key=lambda r: r["strength"])
        off = (j - (len(stats) - 1) / 2) * dx
        x = [r["strength"] + off for r in rs]
        y = [r["power"] for r in rs]
        lo = [max(0.0, r["power"] - r["ci"][0]) for r in rs]
        hi = [max(0.0, r["ci"][1] - r["power"]) for r in rs]
        ls = "-" if rs and rs[0]["instant"] else "--"
        ax.errorbar(x, y, yerr=[lo, hi], ls=ls, marker=_MARKERS[j % len(_MARKERS)], ms=4, capsize=2,
                    lw=1.1, label=s + ("" if not rs or rs[0]["instant"] else " (baseline)"),
                    color=f"C{j % 10}", mfc="none" if j % 2 else f"C{j % 10}")
    ax.axhline(res["alpha"], color="k", lw=0.8, ls=":")
    ax.set_ylim(-0.03, 1.05)
    ax.set_title(alt, fontsize=9)


def plot_power(res: dict, path: str | None = None):
    """Power against strength: a grid of panels (3 per row), one per
    alternative, one line per statistic, one legend below all panels.

    Lines of different statistics are told apart by colour, marker and (Monte
    Carlo baselines) dashes, and are dodged sideways by a small offset so that
    lines lying on each other (e.g. at power 1) all stay visible.

    Parameters
    ----------
    res : dict
        The result of :func:`power_study`.
    path : str, optional
        Write the figure here (.png/.pdf/.svg) and return the path; without
        it, return the Figure.

    Returns
    -------
    str or matplotlib.figure.Figure
    """
    from nullatlas.lookup.plots import new_figure, save_figure

    res = _rows_for_plot(res)
    alts = list(dict.fromkeys(r["alternative"] for r in res["rows"]))
    stats = list(dict.fromkeys(r["name"] for r in res["rows"]))
    strengths = sorted({r["strength"] for r in res["rows"]})
    ncol = min(3, len(alts))
    nrow = -(-len(alts) // ncol)
    spare = nrow * ncol > len(alts)          # the legend goes into an empty slot, else below
    legend_h = 0.0 if spare else 0.3 * -(-len(stats) // 3) + 0.3
    fig = new_figure(path, (4.4 * ncol, 3.3 * nrow + legend_h + 0.4))
    axes = fig.subplots(nrow, ncol, squeeze=False, sharex=True, sharey=True)
    dx = _dodge(strengths, len(stats))
    for ax, a in zip(axes.ravel(), alts):
        _power_panel(ax, res, a, stats, dx)
    for ax in axes.ravel()[len(alts):]:
        ax.set_visible(False)
    for ax in axes[:, 0]:
        ax.set_ylabel(f"power at alpha = {res['alpha']:g}")
    for k, ax in enumerate(axes.ravel()[:len(alts)]):
        if k + ncol >= len(alts):                    # lowest panel of its column
            ax.set_xlabel("strength (share of structured points)")
            ax.xaxis.set_tick_params(labelbottom=True)
    fig.suptitle(f"power, n = {_ns_text(res['n'])}, window {res['window']['kind']}, "
                 f"{res['reps']} patterns per "
                 f"point, 95% Wilson intervals\nsolid: instant tests, dashed: baselines; dotted: alpha; "
                 f"points dodged sideways by {dx:.3g} per statistic for legibility", fontsize=9)
    fig.tight_layout(rect=(0, legend_h / (3.3 * nrow + legend_h + 0.4), 1, 1))
    handles, labels = axes[0][0].get_legend_handles_labels()
    if spare:
        slot = fig.add_axes(axes.ravel()[len(alts)].get_position())
        slot.set_axis_off()
        slot.legend(handles, labels, loc="center", fontsize=8, frameon=False, title="statistic",
                    ncol=2 if len(alts) % ncol == 1 and len(labels) > 6 else 1)
    else:
        fig.legend(handles, labels, loc="lower center", ncol=3, fontsize=8, frameon=False)
    return fig if path is None else save_figure(fig, path)
