#!/usr/bin/env python3
"""Report the held-out validation stored in a null table (markdown).

Reads ``/validation`` and ``/trust`` of a table written by
``nullatlas-calibrate validate`` and prints:

1. per held-out window and n, for the default statistics: the size of the
   instant test at 0.05 (two-sided; curves: the global max |z| test;
   extremes: the upper tail at 0.05), marked ``*`` where the cell failed
   (|bias| > 0.1 sd, size outside 0.05 +- 0.01, or a tail outside
   0.025 +- 0.007, each allowing one binomial SE) and ``+`` where it lies
   inside the validated range (trusted);
2. the range of sizes, tails and biases over every trusted result, and the
   ratio of simulated to predicted sd over every model-route cell;
3. leave-one-window-out: the validated range recomputed without each
   window, and how many of that window's cells it would trust and how many
   of those failed -- an out-of-sample check of the trust rule itself.

    python scripts/validation_report.py tables/null2d.h5
"""
from __future__ import annotations

import argparse
import json
import sys

import numpy as np


def _inside(row, rng):
    from nullatlas.lookup.patterns.boundary import MEASURES

    if not rng or not (rng["n_lo"] <= row["n"] <= rng["n_hi"]):
        return False
    return all(row[k] <= rng[f"{k}_max"] + 1e-12 for k in MEASURES)


def _test_of(row):
    return next(iter(row["tests"])) if row["kind"] != "scalar" else "two_sided"


def main(argv=None) -> int:
    import h5py

    from nullatlas.calibrate.plan import DEFAULT_STATS
    from nullatlas.calibrate.validate import validated_range
    from nullatlas.lookup.summaries.statistics import default_stats

    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("table")
    ap.add_argument("--all-stats", action="store_true", help="every tabled statistic")
    a = ap.parse_args(argv)
    with h5py.File(a.table, "r") as fh:
        d = int(fh.attrs["dimension"])
        rows = json.loads(fh["validation"].attrs["rows"])
        trust = {s: {k: json.loads(v) for k, v in g.attrs.items()} for s, g in fh["trust"].items()}
    stats = DEFAULT_STATS[d] if a.all_stats else default_stats(d)
    rows = [r for r in rows if r["route"] == "model" and r["statistic"] in stats]
    windows = list(dict.fromkeys(r["window"] for r in rows))
    print(f"| window | n | {' | '.join(stats)} |")
    print("|---|---|" + "---|" * len(stats))
    for w in windows:
        for n in sorted({r["n"] for r in rows if r["window"] == w}):
            cells = []
            for s in stats:
                r = next((x for x in rows if x["window"] == w and x["n"] == n
                          and x["statistic"] == s), None)
                if r is None:
                    cells.append("–")
                    continue
                size = r.get("upper_05", r["size"]) if r["kind"] == "extreme" else r["size"]
                test = _test_of(r)
                mark = ("+" if _inside(r, trust.get(s, {}).get(test)) else "") + \
                    ("" if r["tests"].get(test, False) else "*")
                cells.append(f"{size:.3f}{mark}")
            print(f"| {w} | {n:,} | {' | '.join(cells)} |")
    trusted = [r for r in rows if _inside(r, trust.get(r["statistic"], {}).get(_test_of(r)))]
    print()
    if trusted:
        sz = [r.get("upper_05", r["size"]) if r["kind"] == "extreme" else r["size"]
              for r in trusted]
        tails = [r[k] for r in trusted if r["kind"] == "scalar" for k in ("lower", "upper")]
        bias = [abs(r["mean_err_sd"]) for r in trusted]
        imp = [r[k] for r in trusted if r["kind"] == "scalar"
               for k in ("implied_lower", "implied_upper") if k in r]
        if imp:
            print(f"trusted scalars, tails at 0.025 implied by the measured bias and sd ratio: "
                  f"{min(imp):.3f}-{max(imp):.3f}")
        print(f"trusted results: {len(trusted)} of {len(rows)} held-out cells x statistics; "
              f"sizes at 0.05 {min(sz):.3f}-{max(sz):.3f}"
              + (f"; tails at 0.025 {min(tails):.3f}-{max(tails):.3f}" if tails else "")
              + f"; |bias| <= {max(bias):.3f} sd")
    ratios = np.array([r["sd_ratio"] for r in rows if r.get("route") == "model"
                       and r["kind"] != "extreme" and np.isfinite(r.get("sd_ratio", np.nan))])
    if ratios.size:
        lo, med, hi = np.quantile(ratios, [0.05, 0.5, 0.95])
        print(f"predicted sds (model route, scalars and curves): simulated / predicted median "
              f"{med:.3f}, 90% of {ratios.size} cells within {lo:.2f}-{hi:.2f}")
    # leave one window out
    print()
    print("| left-out window | cells trusted by the range fitted without it | of which failed |")
    print("|---|---|---|")
    tot_in = tot_bad = 0
    for w in windows:
        k_in = k_bad = 0
        for s in stats:
            mine = [r for r in rows if r["statistic"] == s]
            for test in sorted({_test_of(r) for r in mine}):
                rng = validated_range([r for r in mine if r["window"] != w], test)
                for r in mine:
                    if r["window"] == w and _test_of(r) == test and _inside(r, rng):
                        k_in += 1
                        k_bad += not r["tests"].get(test, False)
        tot_in += k_in
        tot_bad += k_bad
        print(f"| {w} | {k_in} | {k_bad} |")
    print(f"| all | {tot_in} | {tot_bad} ({tot_bad / max(tot_in, 1):.0%}) |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
