"""``nullatlas-calibrate check``: do the instant answers hold for this window and n?

For a window and one or more n, simulate fresh CSR patterns (seeded
independently of the tables' seeds), compute their summaries with the
runtime code, standardise them with the tables (or the finite-window model)
exactly as ``nullatlas test`` does, and report per statistic:

* KS distance of the standardised values to N(0, 1) (scalars) or of the
  p-values to U(0, 1) (curves, extremes);
* empirical size at alpha = 0.01, 0.05, 0.10 with Wilson 95% intervals
  (Wilson, J. Amer. Statist. Assoc. 22, 1927), and for scalars each tail at
  alpha / 2;
* mean and sd of z;
* the runtime's trust verdict for this (window, n), and whether the instant
  test holds its size (``holds_size``): the size at 0.05 within 0.05 +- 0.01 and, for scalars, each tail
  within 0.025 +- 0.005, allowing two binomial standard errors of this check
  (the rule of ``calibrate.nmin``).
"""
from __future__ import annotations

import math

import numpy as np
from scipy import stats as _st

from nullatlas.lookup.errors import OptionError
from nullatlas.lookup.inference.asymptotic import asymptotic_result, instant_moments
from nullatlas.lookup.inference.montecarlo import _alternative_for, simulate_null
from nullatlas.lookup.inference.nullmoments import TableSet, default_tables
from nullatlas.lookup.summaries.statistics import resolve_stats

__all__ = ["ALPHAS", "wilson", "check_window", "CHECK_SEED"]

ALPHAS = (0.01, 0.05, 0.10)
#: Default seed of the fresh patterns (not the tables' root seed).
CHECK_SEED = 4_242_424


def wilson(k: int, m: int, z: float = 1.959964) -> tuple[float, float]:
    """Wilson score interval of a binomial proportion k / m."""
    if m == 0:
        return (float("nan"), float("nan"))
    p = k / m
    den = 1 + z * z / m
    c = (p + z * z / (2 * m)) / den
    h = z * math.sqrt(p * (1 - p) / m + z * z / (4 * m * m)) / den
    lo, hi = max(0.0, c - h), min(1.0, c + h)
    return (0.0 if k == 0 else lo, 1.0 if k == m else hi)


def _holds_size(kind, sizes, tails, m):
    def ok(rate, target, tol):
        return abs(rate - target) <= tol + 2 * math.sqrt(target * (1 - target) / m)
    good = ok(sizes[1], 0.05, 0.01)
    if kind == "scalar":
        good = good and ok(tails["lower"][1], 0.025, 0.005) and ok(tails["upper"][1], 0.025, 0.005)
    return bool(good)


def check_window(window, ns, reps: int, *, stats=None, tables=None, seed: int = CHECK_SEED,
                 jobs: int = 1, progress=None) -> dict:
    """Run the check (see module doc); returns a JSON-ready dict with one
    entry per (n, statistic) and the standardised values for QQ plots."""
    if reps < 50:
        raise OptionError(f"--reps must be at least 50 for a size check, got {reps}")
    tset = TableSet(tables) if tables else default_tables()
    chosen = resolve_stats(stats, window.dim)
    out = {"window": window.describe(), "reps": int(reps), "seed": int(seed), "results": []}
    root = np.random.SeedSequence(int(seed))
    for n, ss in zip(ns, root.spawn(len(ns))):
        # the Monte Carlo route's own seeded simulation (jobs-independent)
        vals = simulate_null(window, n, chosen, ss.spawn(reps), jobs=jobs, progress=progress)
        for st in chosen:
            alt, _ = _alternative_for(st, "two-sided")
            nm, trusted, why = instant_moments(tset, window, n, st, alt)
            row = {"n": int(n), "name": st.name, "kind": st.kind,
                   "trusted": trusted, "reason": "; ".join(why)}
            if nm is None:
                row.update({"holds_size": None})
                out["results"].append(row)
                continue
            res = [asymptotic_result(st, v, nm, alt, n, True, []) for v in vals[st.name]]
            p = np.array([r.pvalue for r in res], float)
            z = np.array([r.z for r in res], float)
            ok = np.isfinite(p)
            m = int(ok.sum())
            sizes = [float(np.mean(p[ok] <= a)) for a in ALPHAS]
            row.update({"route": nm.route, "replicates_table": nm.replicates, "m": m,
                        "size": sizes,
                        "size_ci": [wilson(int(round(s * m)), m) for s in sizes]})
            if st.kind == "scalar":
                zz = z[np.isfinite(z)]
                c = _st.norm.isf(np.array(ALPHAS) / 2)
                tails = {"lower": [float(np.mean(zz < -ci)) for ci in c],
                         "upper": [float(np.mean(zz > ci)) for ci in c]}
                row.update({"ks": float(_st.kstest(zz, "norm").statistic), "tails": tails,
                            "z_mean": float(zz.mean()), "z_sd": float(zz.std(ddof=1)),
                            "qq": np.sort(zz).tolist()})
            else:
                tails = {}
                row.update({"ks_pvalues": float(_st.kstest(p[ok], "uniform").statistic),
                            "qq": np.sort(p[ok]).tolist()})
                if st.kind == "extreme":
                    zz = z[np.isfinite(z)]
                    row.update({"z_mean": float(zz.mean()), "z_sd": float(zz.std(ddof=1))})
            row["holds_size"] = _holds_size(st.kind, sizes, tails, m)
            out["results"].append(row)
    return out


def plot_check(res: dict, path: str) -> str:
    """QQ plots (z against N(0, 1), or p against U(0, 1)) and, with several n,
    the size at 0.05 against n with Wilson intervals."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from nullatlas.lookup.plots import check_plot_path, save_figure

    check_plot_path(path)
    rows = [r for r in res["results"] if "qq" in r]
    names = list(dict.fromkeys(r["name"] for r in rows))
    ns = sorted({r["n"] for r in rows})
    nplot = len(names) + (1 if len(ns) > 1 else 0)
    ncol = min(3, max(nplot, 1))
    nrow = int(math.ceil(max(nplot, 1) / ncol))
    fig, axes = plt.subplots(nrow, ncol, figsize=(4.4 * ncol, 3.8 * nrow), squeeze=False)
    axes = axes.ravel()
    for ax, name in zip(axes, names):
        for r in (x for x in rows if x["name"] == name):
            q = np.asarray(r["qq"])
            m = len(q)
            pp = (np.arange(1, m + 1) - 0.5) / m
            if r["kind"] == "scalar":
                ax.plot(_st.norm.ppf(pp), q, ".", ms=2, label=f"n = {r['n']}")
                ax.set_xlabel("N(0, 1) quantile")
                ax.set_ylabel("standardised statistic z")
            else:
                ax.plot(pp, q, ".", ms=2, label=f"n = {r['n']}")
                ax.set_xlabel("U(0, 1) quantile")
                ax.set_ylabel("p-value")
        lim = ax.get_xlim()
        ax.plot(lim, lim, "k-", lw=0.8)
        ax.set_title(f"{name}: QQ plot under CSR")
        ax.legend(fontsize=7)
    if len(ns) > 1:
        ax = axes[len(names)]
        for name in names:
            rs = sorted((x for x in rows if x["name"] == name), key=lambda r: r["n"])
            s = [r["size"][1] for r in rs]
            lo = [max(0.0, r["size"][1] - r["size_ci"][1][0]) for r in rs]
            hi = [max(0.0, r["size_ci"][1][1] - r["size"][1]) for r in rs]
            ax.errorbar([r["n"] for r in rs], s, yerr=[lo, hi], marker="o", ms=3, capsize=2,
                        label=name)
        ax.axhspan(0.04, 0.06, color="0.85")
        ax.axhline(0.05, color="k", lw=0.8)
        ax.set_xscale("log")
        ax.set_xlabel("n")
        ax.set_ylabel("size at 0.05")
        ax.set_title("size against n (band: 0.05 +- 0.01)")
        ax.legend(fontsize=7)
    for ax in axes[nplot:]:
        ax.set_visible(False)
    fig.suptitle(f"instant test check, window {res['window']['kind']}, {res['reps']} CSR patterns "
                 "per n", fontsize=10)
    fig.tight_layout()
    return save_figure(fig, path)
