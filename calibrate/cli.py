"""The ``nullatlas-calibrate`` command: build, extend and refit null tables.

    nullatlas-calibrate build (--shape NAME[,NAME...] | --window SPEC) --n LIST --reps R
                              --out FILE [--jobs N] [--dask-scheduler ADDR] [--seed S]
    nullatlas-calibrate extend FILE --reps R [--shape ... | --window ...] [--n LIST]
    nullatlas-calibrate fit FILE [--n-fit N] [--holdout SHAPE]

Every bad input ends with one line on standard error and exit status 2.
"""
from __future__ import annotations

import argparse
import json
import sys

from nullatlas.lookup.cli import _int, _Parser, guarded
from nullatlas.lookup.errors import OptionError
from nullatlas.lookup.limits import MAX_N, MAX_POINTS_TOTAL, MAX_REPS, MAX_SIMS
from nullatlas.lookup.processes.modelspec import models_help

PROG = "nullatlas-calibrate"


def _int_list(text):
    """The one parser of ``--n`` in every command (build, extend, check, power).

    Parameters
    ----------
    text : str
        Whole numbers separated by commas (or semicolons), spaces around them
        allowed: ``200``, ``200,500``, ``"200, 500"``; ``1e4`` is a whole number.

    Returns
    -------
    list of int

    Raises
    ------
    argparse.ArgumentTypeError
        A value that is not a whole number, or no value at all.
    """
    vals = []
    for v in (t.strip() for t in text.replace(";", ",").split(",")):
        if not v:
            continue
        try:
            x = float(v)
        except ValueError:
            x = float("nan")
        # a whole number (1e4 is fine; 50.5 is not, and is not rounded silently)
        if "_" in v or not (x == x and abs(x) < 1e18 and x == int(x)):
            raise argparse.ArgumentTypeError(f"'{v}' in '{text}' is not a whole number")
        vals.append(int(x))
    if not vals:
        raise argparse.ArgumentTypeError("empty list of n values")
    return vals


def _pct(text: str) -> str:
    """Escape ``%`` for an argparse help string."""
    return text.replace("%", "%%")


def _float_list(text):
    try:
        vals = [float(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a comma-separated list of numbers") \
            from None
    if not vals:
        raise argparse.ArgumentTypeError("empty list")
    return vals


def _add_run_options(p, what="the table", dask=True):
    """--jobs (and, for the commands that build tables, --dask-scheduler),
    the progress bar and --json; ``what`` names what --jobs does not change."""
    p.add_argument("--jobs", "-j", type=_int, default=1, metavar="N",
                   help=f"worker processes, 0 = all cores (default: 1); {what} does not "
                   "depend on it")
    if dask:
        p.add_argument("--dask-scheduler", metavar="ADDR",
                       help="run the chunks on a dask.distributed cluster (e.g. "
                       "tcp://host:8786) through joblib's Dask backend; the table is the same "
                       "as with --jobs")
    bar = p.add_mutually_exclusive_group()
    bar.add_argument("--progress", dest="progress", action="store_true", default=None,
                     help="always show the progress bar (default: only on a terminal)")
    bar.add_argument("--no-progress", dest="progress", action="store_false",
                     help="never show the progress bar")
    p.add_argument("--json", action="store_true", help="print a JSON summary")


def _add_target_options(p, required):
    g = p.add_mutually_exclusive_group(required=required)
    g.add_argument("--shape", metavar="NAME[,NAME...]",
                   help="named shapes: square, rect2, rect4, disk (2D); cube, box114 (3D)")
    g.add_argument("--window", metavar="SPEC",
                   help="your own window (rect:..., disk:..., box:..., ball:..., polygon file "
                   "or polygon:WKT); normalised to unit area/volume")
    p.add_argument("--n", type=_int_list, required=required, metavar="LIST",
                   help=f"point counts of the cells, e.g. 50,100,200,500 (10 to {MAX_N:,} each; "
                   f"--reps times the sum of n at most {MAX_POINTS_TOTAL:.0e} points: larger runs "
                   "are refused before any work, with the time and memory they would need)")


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog=PROG, description=(
        "Offline stage of nullatlas: simulate CSR nulls over window shapes and point counts "
        "and store moments of normalised summaries, a finite-window model and an audit of "
        "the asymptotic tests in an HDF5 null table."))
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True

    b = sub.add_parser("build", help="simulate a new null table",
                       description="Simulate a new null table (checkpointed; run the same "
                       "command again after an interruption to resume).")
    _add_target_options(b, True)
    b.add_argument("--reps", type=_int, required=True, metavar="R",
                   help=f"replicates per cell (20 to {MAX_REPS:,})")
    b.add_argument("--out", required=True, metavar="FILE", help="output HDF5 table")
    b.add_argument("--seed", type=_int, default=None, metavar="S",
                   help="root seed (default: the shipped tables' seed)")
    b.add_argument("--stat", action="append", metavar="NAME",
                   help="statistics to tabulate (default: all that the runtime uses)")
    b.add_argument("--holdout", metavar="SHAPE",
                   help="also fit the model without this shape and store its prediction errors")
    b.add_argument("--n-fit", type=_int, default=200, metavar="N",
                   help="smallest n used in the model fit (default: 200)")
    _add_run_options(b)

    e = sub.add_parser("extend", help="add replicates (or cells) to a table",
                       description="Add replicates to every cell of a table, or to the cells "
                       "given by --shape/--window and --n (creating missing cells).")
    e.add_argument("table", help="HDF5 table to extend (rewritten atomically)")
    e.add_argument("--reps", type=_int, required=True, metavar="R",
                   help=f"replicates to add per cell (20 to {MAX_REPS:,})")
    g = e.add_mutually_exclusive_group()
    g.add_argument("--shape", metavar="NAME[,NAME...]",
                   help="only the cells of these named shapes (with --n: create missing ones)")
    g.add_argument("--window", metavar="SPEC",
                   help="only the cells of this window (as given to build --window)")
    e.add_argument("--n", type=_int_list, metavar="LIST",
                   help=f"point counts of the cells to extend or create (10 to {MAX_N:,} each)")
    e.add_argument("--allow-shipped", action="store_true",
                   help="allow rewriting a table shipped with nullatlas (for regenerating them)")
    _add_run_options(e)

    c = sub.add_parser("check", help="check the instant test on fresh CSR patterns",
                       description="Simulate fresh CSR patterns in a window, standardise them "
                       "with the tables as 'nullatlas test' does, and report per statistic the "
                       "KS distance, the size at 0.01/0.05/0.10 with Wilson intervals, the "
                       "tails, mean and sd of z, and whether the instant test holds.")
    g = c.add_mutually_exclusive_group(required=True)
    g.add_argument("--window", metavar="SPEC", help="the window (any spec)")
    g.add_argument("--shape", metavar="NAME", help="a calibrated shape (unit area/volume)")
    c.add_argument("--n", type=_int_list, required=True, metavar="LIST",
                   help=f"point counts (at most {MAX_N:,} each)")
    c.add_argument("--reps", type=_int, default=1000, metavar="R",
                   help=f"fresh CSR patterns per n (default: 1000, at most {MAX_REPS:,})")
    c.add_argument("--stat", action="append", metavar="NAME",
                   help="statistics (default: those of 'nullatlas test')")
    c.add_argument("--table", action="append", metavar="FILE",
                   help="your own table(s), consulted before the shipped ones")
    c.add_argument("--seed", type=_int, default=None, metavar="S",
                   help="seed of the fresh patterns (default: fixed, not the tables' seed)")
    c.add_argument("--pattern", metavar="FILE",
                   help="also compare instant and Monte Carlo p-values on this pattern")
    c.add_argument("--sims", type=_int, default=999, metavar="M",
                   help=f"Monte Carlo simulations for --pattern (default: 999, at most {MAX_SIMS:,})")
    c.add_argument("--plot", metavar="FILE", help="QQ plots and size against n")
    _add_run_options(c, "the check's result (every pattern has its own seed)", dask=False)

    pw = sub.add_parser("power", help="power of every statistic against alternatives",
                        description="Empirical power at alpha = 0.05 of every statistic "
                        "(instant topological and classical tests, and the Monte Carlo L and G "
                        "envelope tests and the Clark-Evans z-test as baselines) against "
                        "alternatives, as a function of their strength (share of structured "
                        "points; 0 = CSR).")
    g = pw.add_mutually_exclusive_group(required=True)
    g.add_argument("--window", metavar="SPEC", help="the window (any spec)")
    g.add_argument("--shape", metavar="NAME", help="a calibrated shape (unit area/volume)")
    pw.add_argument("--n", type=_int_list, required=True, metavar="LIST",
                    help=f"points per pattern, e.g. 200 or 200,500 (4 to {MAX_N:,} each; "
                    "one study per value)")
    pw.add_argument("--alt", action="append", required=True, metavar="NAME[:k=v,...]",
                    help="alternative (repeatable), given as NAME or NAME:key=value,...; lengths "
                    f"in mean spacings, defaults shown: {_pct(models_help())}")
    pw.add_argument("--strength", type=_float_list, default=[0.0, 0.25, 0.5, 0.75, 1.0],
                    metavar="LIST", help="strengths in [0, 1] (default: 0,0.25,0.5,0.75,1)")
    pw.add_argument("--reps", type=_int, default=200, metavar="R",
                    help=f"patterns per alternative and strength (default: 200, at most {MAX_REPS:,})")
    pw.add_argument("--sims", type=_int, default=199, metavar="M",
                    help=f"CSR simulations of the Monte Carlo baselines (default: 199, at most "
                    f"{MAX_SIMS:,})")
    pw.add_argument("--stat", action="append", metavar="NAME",
                    help="statistics (default: those of 'nullatlas test'; repeatable)")
    pw.add_argument("--table", action="append", metavar="FILE",
                    help="your own table(s), consulted before the shipped ones")
    pw.add_argument("--seed", type=_int, default=None, metavar="S",
                    help="seed of the patterns (default: fixed)")
    pw.add_argument("--plot", metavar="FILE", help="power against strength")
    _add_run_options(pw, "the power", dask=False)

    f = sub.add_parser("fit", help="refit the finite-window model and n_min",
                       description="Recompute n_min and the finite-window model of a table "
                       "from its stored moments and audits (no simulation).")
    f.add_argument("table", help="HDF5 table to refit (rewritten atomically)")
    f.add_argument("--n-fit", type=_int, default=None, metavar="N",
                   help="smallest n used in the fit (default: as stored)")
    f.add_argument("--holdout", metavar="SHAPE",
                   help="refit without this shape and report how well the model predicts it")
    f.add_argument("--plot", metavar="FILE",
                   help="figure: cell means against the model for the mean nearest-neighbour "
                   "distance and the Euler curve")
    f.add_argument("--json", action="store_true", help="print a JSON summary")
    f.add_argument("--allow-shipped", action="store_true",
                   help="allow rewriting a table shipped with nullatlas (for regenerating them)")

    v = sub.add_parser("validate", help="score the model route on held-out windows and store "
                       "where it holds",
                       description="Score the instant answers of a table on the held-out "
                       "validation windows (fresh CSR patterns that no model was fitted on, "
                       "simulated with --simulate or by scripts/make_heldout.py), refit the "
                       "geometric model first unless --no-refit, and store the scores and the "
                       "validated range (where the model route is trusted) in the table.")
    v.add_argument("table", help="HDF5 table (rewritten atomically)")
    v.add_argument("--heldout", metavar="FOLDER", default=None,
                   help="folder of the held-out simulations (default: tables/heldout.parts "
                   "beside the package's tables)")
    v.add_argument("--simulate", type=_int, default=0, metavar="R",
                   help="first simulate missing held-out cells with R patterns each")
    v.add_argument("--window", metavar="NAME[,NAME...]", default=None,
                   help="only these held-out windows (default: all of the table's dimension)")
    v.add_argument("--no-refit", action="store_true",
                   help="keep the stored geometric model (default: refit it first)")
    v.add_argument("--allow-shipped", action="store_true",
                   help="allow rewriting a table shipped with nullatlas (for regenerating them)")
    v.add_argument("--plot", metavar="FILE",
                   help="figure: size at 0.05 against n on every held-out window, trusted or not, "
                   "for the default statistics")
    _add_run_options(v, "the validation", dask=False)
    return p


def _targets(a):
    from nullatlas.lookup.patterns.windows import parse_window

    from . import shapes

    if getattr(a, "shape", None):
        names = [s.strip() for s in a.shape.split(",") if s.strip()]
        return [(s, shapes.shape_window(s)) for s in names]
    if getattr(a, "window", None):
        return [shapes.normalise(parse_window(a.window))]
    return None


#: Workers beyond this many times the cores only add start-up time and memory.
JOBS_PER_CORE = 4


def _jobs(j):
    import os

    if j < 0:
        raise OptionError(f"--jobs must be 0 (all cores) or positive, got {j}")
    cores = os.cpu_count() or 1
    if j > JOBS_PER_CORE * cores:
        sys.stderr.write(f"warning: --jobs {j} on {cores} cores; using {JOBS_PER_CORE * cores}\n")
        return JOBS_PER_CORE * cores
    return j or cores


def _labels(a, targets):
    """A readable name for a window given as a file: the file's name without
    its extension (``lshape.wkt`` -> ``lshape``); none for other specs."""
    import os

    spec = getattr(a, "window", None)
    if not spec or not targets or not os.path.isfile(spec):
        return None
    return {targets[0][0]: os.path.splitext(os.path.basename(spec))[0]}


def _refuse_endless(ns, reps, dim, sims=None):
    """``check``/``power``: counts that cannot finish are refused before any
    work (``lookup.limits``, as ``build`` and ``nullatlas test --sims``)."""
    from nullatlas.lookup.limits import duration, pattern_bytes, pattern_seconds, refuse_beyond, size

    for n in ns:
        refuse_beyond("--n", int(n), MAX_N,
                      f"one pattern of {int(n):,} points needs about {size(pattern_bytes(n, dim))} "
                      f"of memory and at least {duration(pattern_seconds(n, dim))}")
    secs = sum(reps * pattern_seconds(n, dim) for n in ns)
    refuse_beyond("--reps", int(reps), MAX_REPS, f"at least {duration(secs)} of one core")
    if sims is not None:
        refuse_beyond("--sims", int(sims), MAX_SIMS,
                      f"at least {duration(sims * pattern_seconds(max(ns), dim))} of one core")


def _check_table_out(path):
    if not str(path).lower().endswith((".h5", ".hdf5")):
        raise OptionError(f"--out {path}: a null table is an HDF5 file; name it *.h5")


def _check_writable_table(path, allow=False):
    """Shipped tables are read-only to the tool: extend or refit a copy
    (``--allow-shipped`` for the project's own regeneration); a table in a
    folder where nothing can be written is refused before any work."""
    import os

    if not allow:
        _refuse_shipped(path)
    if os.path.isfile(path):
        from nullatlas.lookup.atomic import check_writable
        check_writable(path)            # the table is rewritten beside itself


def _refuse_shipped(path):
    import os

    from nullatlas.lookup.inference.tablereader import shipped_tables

    real = os.path.realpath(path)
    if any(os.path.realpath(p) == real for p in shipped_tables().values()):
        raise OptionError(f"{path} is a table shipped with nullatlas (read-only to the tool); "
                          "copy it and extend or refit the copy, then use it with --table "
                          "(or --allow-shipped to regenerate the shipped tables)")


def _num(v, fmt):
    """``v`` formatted, or None when it is missing."""
    return None if v is None else format(v, fmt)


def _holdout_line(shape, stat, v):
    """One line on how well the model fitted without ``shape`` predicts it.

    The error in pattern sd is measured only at the grid points the test
    uses; a curve whose held-out cells have none says so instead of a number.
    """
    sd = _num(v.get("max_abs_sd"), ".3f")
    sd = (f" = {sd} pattern sd" if sd is not None
          else "; no grid point that the test uses, so no error in pattern sd")
    nm = v.get("n_model")
    within = (f"within 0.1 pattern sd from n = {nm}" if nm is not None
              else "not shown within 0.1 pattern sd at any held-out n")
    return (f"held-out {shape}: {stat} predicted with RMS error {v['rms_se']:.2f} SE "
            f"(max {_num(v.get('max_abs_se'), '.2f')} SE{sd}) over {v['points']} cell grid "
            f"points; {within}")


def _print_summary(s, out=None):
    out = out or sys.stdout
    out.write(f"table {s['table']}: {s['dimension']}D, {s['cells']} cells, "
              f"{s['replicates']} replicates, root seed {s['root_seed']}\n")
    if "simulation_seconds" in s:
        out.write(f"simulation: {s['simulation_seconds']:.1f} s\n")
    nn = s["model"].get("nnmean")
    if nn and "c" in nn and s["dimension"] == 2:
        out.write(f"model check, mean nearest-neighbour distance: mu = {nn['mu']:.4f} +- "
                  f"{nn['mu_se']:.4f} (Clark-Evans 0.5), c = {nn['c']:.4f} +- {nn['c_se']:.4f} "
                  f"(Donnelly 0.0514), chi2/dof = {nn['chi2']:.1f}/{nn['dof']}\n")
    elif nn and "c" in nn:
        out.write(f"model check, mean nearest-neighbour distance: mu = {nn['mu']:.4f} +- "
                  f"{nn['mu_se']:.4f} (CSR limit Gamma(4/3) (4 pi/3)^(-1/3) = 0.5540), boundary "
                  f"c = {nn['c']:.4f} +- {nn['c_se']:.4f}, chi2/dof = {nn['chi2']:.1f}/{nn['dof']}\n")
    if s.get("model_missing"):
        out.write(f"finite-window model: none ({s['model_missing']})\n")
    for stat, m in s["model"].items():
        for k, v in m.items():
            if k.startswith("holdout_") and v.get("rms_se") is not None:
                out.write(_holdout_line(k[8:], stat, v) + "\n")
    from nullatlas.lookup.cli import nmin_text

    out.write("n_min (smallest calibrated n from which the asymptotic test holds; - = none):\n")
    labels = s.get("labels") or {}
    for shape, per in s["n_min"].items():
        name = f"{labels[shape]} ({shape})" if shape in labels else shape
        out.write(f"  {name}: " + "; ".join(f"{stat} ({nmin_text(tests)})"
                                             for stat, tests in per.items()) + "\n")
    if s.get("note"):
        out.write(f"note: {s['note']}\n")


def _rendered_first(a):
    """A ``before_write`` hook for the table commands: render the report the
    command will print (text or ``--json``) before the table is written, so
    that a report that cannot be made fails the command with nothing written."""
    import io

    def render(summary):
        if a.json:
            json.dumps(_clean(summary), allow_nan=False)
        else:
            _print_summary(summary, io.StringIO())
    return render


def _cmd_build(a):
    from . import build

    if a.n_fit < 10:
        raise OptionError(f"--n-fit must be at least 10, got {a.n_fit}")
    _check_table_out(a.out)
    seed = build.DEFAULT_SEED if a.seed is None else a.seed
    targets = _targets(a)
    return build.build_table(a.out, targets, a.n, a.reps, stats=a.stat, root_seed=seed,
                             labels=_labels(a, targets),
                             jobs=_jobs(a.jobs), scheduler=a.dask_scheduler, progress=a.progress,
                             n_fit=a.n_fit, holdout=a.holdout, before_write=_rendered_first(a))


def _cmd_extend(a):
    from . import build

    _check_writable_table(a.table, a.allow_shipped)
    targets = _targets(a)
    if a.n and targets is None:
        raise OptionError("--n needs --shape or --window")
    return build.extend_table(a.table, a.reps, targets=targets, ns=a.n, jobs=_jobs(a.jobs),
                              scheduler=a.dask_scheduler, progress=a.progress,
                              labels=_labels(a, targets), before_write=_rendered_first(a))


def _cmd_check(a):
    from nullatlas.lookup.patterns.windows import parse_window

    from . import check, shapes

    if a.plot:
        from nullatlas.lookup.plots import check_plot_path
        check_plot_path(a.plot)
    w = shapes.shape_window(a.shape) if a.shape else parse_window(a.window)
    _refuse_endless(a.n, a.reps, w.dim, a.sims if a.pattern else None)
    res = check.check_window(w, a.n, a.reps, stats=a.stat, tables=a.table,
                             seed=check.CHECK_SEED if a.seed is None else a.seed,
                             jobs=_jobs(a.jobs), progress=a.progress)
    if a.pattern:
        from nullatlas.lookup import csr_test
        kw = dict(stats=a.stat, seed=check.CHECK_SEED if a.seed is None else a.seed,
                  tables=a.table)
        inst = csr_test(a.pattern, w, method="asymptotic", **kw)
        mc = csr_test(a.pattern, w, method="mc", n_sims=a.sims, jobs=_jobs(a.jobs), **kw)
        res["pattern"] = {"file": a.pattern, "n": inst.n, "rows": [
            {"name": r.name, "instant_pvalue": r.pvalue, "instant_trusted": r.trusted,
             "mc_pvalue": q.pvalue, "mc_sims": q.n_sims} for r, q in zip(inst.results, mc.results)]}
    if a.plot:
        check.plot_check(res, a.plot)
        res["plot"] = a.plot
    for r in res["results"]:
        r.pop("qq", None)
    res["_kind"] = "check"
    return res


def _print_check(s, out=None):
    from nullatlas.lookup.results import format_pvalue

    out = out or sys.stdout
    w = s["window"]
    out.write(f"check of the instant test: window {w['kind']} (kappa {w['kappa']:.4g}), "
              f"{s['reps']} fresh CSR patterns per n, seed {s['seed']}\n")
    out.write(f"{'n':>7}  {'name':<10}{'size@.05':>9} {'95% CI':<15}{'tails@.025':<14}"
              f"{'KS':>7}{'z mean':>8}{'z sd':>7}  {'trusted':<8}holds size\n")
    for r in s["results"]:
        if "size" not in r:
            out.write(f"{r['n']:>7}  {r['name']:<10}no table: {r['reason']}\n")
            continue
        ci = "[%.3f, %.3f]" % tuple(r["size_ci"][1])
        tails = ("%.3f/%.3f" % (r["tails"]["lower"][1], r["tails"]["upper"][1])) if "tails" in r else "-"
        ks = r.get("ks", r.get("ks_pvalues"))
        zm = r.get("z_mean")
        zs = r.get("z_sd")
        out.write(f"{r['n']:>7}  {r['name']:<10}{r['size'][1]:>9.3f} {ci:<15}{tails:<14}"
                  f"{ks:>7.3f}{'' if zm is None else format(zm, '8.3f'):>8}"
                  f"{'' if zs is None else format(zs, '7.3f'):>7}  {str(r['trusted']):<8}"
                  f"{'yes' if r['holds_size'] else 'NO'}\n")
    if "pattern" in s:
        pt = s["pattern"]
        out.write(f"pattern {pt['file']} (n = {pt['n']}): instant vs Monte Carlo p-values\n")
        for r in pt["rows"]:
            out.write(f"  {r['name']:<10} instant {format_pvalue(r['instant_pvalue'])}"
                      f"{'' if r['instant_trusted'] else ' (untrusted)'}   Monte Carlo "
                      f"{format_pvalue(r['mc_pvalue'])} ({r['mc_sims']} sims)\n")
    out.write("KS: to N(0,1) for scalars, of the p-values to U(0,1) for curves and extremes. "
              "Tails: lower/upper at 0.025 (scalars). Holds size: the size at 0.05 is within "
              "0.05 +- 0.01 and, for scalars, each tail within 0.025 +- 0.005, allowing two "
              "binomial standard errors of this check.\n")


def _cmd_power(a):
    from nullatlas.lookup.patterns.windows import parse_window

    from . import power, shapes

    if a.plot:
        from nullatlas.lookup.plots import check_plot_path
        check_plot_path(a.plot)
    if a.sims < 19:
        raise OptionError(f"--sims must be at least 19, got {a.sims}")
    small = [n for n in a.n if n < 4]
    if small:
        raise OptionError(f"--n must be at least 4 points (as for nullatlas test), got {small[0]}")
    w = shapes.shape_window(a.shape) if a.shape else parse_window(a.window)
    _refuse_endless(a.n, a.reps, w.dim, a.sims)
    studies = [power.power_study(w, n, a.alt, a.strength, a.reps, stats=a.stat, tables=a.table,
                                 sims=a.sims, seed=power.POWER_SEED if a.seed is None else a.seed,
                                 jobs=_jobs(a.jobs), progress=a.progress)
               for n in dict.fromkeys(a.n)]
    res = power.merge_studies(studies)
    if a.plot:
        power.plot_power(res, a.plot)
        res["plot"] = a.plot
    res["_kind"] = "power"
    return res


def _print_power(s, out=None):
    """Print a power study, one block per n when it has several."""
    out = out or sys.stdout
    if isinstance(s["n"], list):
        for n in s["n"]:
            _print_power(dict(s, n=n, rows=[r for r in s["rows"] if r["n"] == n]), out)
        return
    out.write(f"power at alpha = {s['alpha']:g}: n = {s['n']}, window {s['window']['kind']}, "
              f"{s['reps']} patterns per cell, seed {s['seed']}\n")
    alts = list(dict.fromkeys(r["alternative"] for r in s["rows"]))
    stats = list(dict.fromkeys(r["name"] for r in s["rows"]))
    for a in alts:
        strengths = sorted({r["strength"] for r in s["rows"] if r["alternative"] == a})
        out.write(f"{a}\n  {'name':<13}" + "".join(f"{'s=' + format(x, 'g'):>9}" for x in strengths)
                  + "\n")
        for st in stats:
            rs = {r["strength"]: r for r in s["rows"] if r["alternative"] == a and r["name"] == st}
            mark = "" if not rs or list(rs.values())[0]["trusted"] in (True, None) else " (untrusted)"
            out.write(f"  {st + mark:<13}" + "".join(f"{rs[x]['power']:>9.3f}" if x in rs else f"{'-':>9}"
                                                     for x in strengths) + "\n")
    out.write("Power = share of patterns with p <= alpha; 95% Wilson intervals in --json. "
              "s = 0 is CSR: the power there is the size.\n")


def _cmd_fit(a):
    from . import build

    _check_writable_table(a.table, a.allow_shipped)
    if a.plot:
        from nullatlas.lookup.plots import check_plot_path
        check_plot_path(a.plot)
    if a.n_fit is not None:
        from nullatlas.lookup.inference.tablereader import open_table

        k = sum(c.n >= a.n_fit for c in open_table(a.table).cells)
        if k < 4:
            raise OptionError(f"--n-fit {a.n_fit} leaves {k} cell(s) with n >= {a.n_fit}; the "
                              "model needs at least 4 (nothing was changed)")
    s = build.refit_table(a.table, n_fit=a.n_fit, holdout=a.holdout,
                          before_write=_rendered_first(a))
    if a.plot:
        from .modelplot import plot_model
        plot_model(a.table, a.plot)
        s["plot"] = a.plot
    return s


def _cmd_validate(a):
    import os

    from nullatlas.lookup.inference.nullmoments import TableSet
    from nullatlas.lookup.inference.tablereader import open_table

    from . import build
    from .heldout import HELDOUT, heldout_ns, simulate_heldout
    from .tablewriter import update_table
    from .validate import validate_tables

    _check_writable_table(a.table, a.allow_shipped)
    info = open_table(a.table)
    if a.plot:
        from nullatlas.lookup.plots import check_plot_path
        check_plot_path(a.plot)
    folder = a.heldout or os.path.join(os.path.dirname(os.path.abspath(a.table)),
                                       "heldout.parts")
    names = None
    if a.window:
        names = [x.strip() for x in a.window.split(",") if x.strip()]
        bad = [x for x in names if x not in HELDOUT]
        if bad:
            raise OptionError(f"unknown held-out window '{bad[0]}'; choose from "
                              f"{', '.join(HELDOUT)}")
    if a.simulate:
        if a.simulate < 100:
            raise OptionError(f"--simulate must be at least 100 patterns, got {a.simulate}")
        for name, (d, _, _) in HELDOUT.items():
            if d == info.dimension and (names is None or name in names):
                for n in heldout_ns(name):
                    simulate_heldout(folder, name, n, a.simulate, jobs=_jobs(a.jobs),
                                     progress=a.progress)
    if not a.no_refit:
        build.refit_geomodel(a.table)
    res = validate_tables(TableSet([a.table], use_shipped=False), folder, info.dimension, names)
    if not res["rows"]:
        raise OptionError(f"no held-out simulations of {info.dimension}D windows in {folder}; "
                          "run with --simulate R or scripts/make_heldout.py")
    update_table(a.table, validation=res)
    out = {"_kind": "validate", "table": a.table, "heldout": folder, "rows": res["rows"],
           "trust": res["trust"]}
    if a.plot:
        from nullatlas.lookup.summaries.statistics import default_stats

        from .validate import plot_validation
        out["plot"] = plot_validation(res["rows"], res["trust"], default_stats(info.dimension),
                                      a.plot, f"instant test on held-out {info.dimension}D windows "
                                      "(band: 0.05 +- 0.01; a cell also fails when its mean is "
                                      "off by more than 0.1 sd)")
    return out


def _print_validate(s, out=None):
    out = out or sys.stdout
    out.write(f"held-out validation of {s['table']} ({len(s['rows'])} scores)\n")
    out.write(f"{'window':14s} {'n':>6s} {'statistic':10s} {'route':6s} {'bias/sd':>8s} "
              f"{'size':>6s} {'lower':>6s} {'upper':>6s}  holds\n")
    for r in s["rows"]:
        def f(k):
            v = r.get(k)
            return f"{v:6.3f}" if isinstance(v, float) else f"{'':6s}"
        out.write(f"{r['window']:14s} {r['n']:6d} {r['statistic']:10s} {r['route']:6s} "
                  f"{r['mean_err_sd']:+8.3f} {f('size')} {f('lower')} {f('upper')}  "
                  f"{'yes' if r['passed'] else 'NO'}\n")
    out.write("validated range of the model route (trusted inside): upper bounds on the share "
              "within one spacing of the boundary, the second-order term, the share in narrow "
              "parts, the number of holes, the hull deficit, the kappa excess, the curved share "
              "and periodic\n")
    for stat, per in s["trust"].items():
        for test, r in per.items():
            b = ", ".join(f"{r[k + '_max']:.3g}" for k in
                          ("boundary_share", "second_order", "narrow_share", "holes",
                           "hull_deficit", "kappa_excess", "curved_share", "periodic"))
            out.write(f"  {stat:10s} {test:10s} {b}; n {r['n_lo']}..{r['n_hi']} "
                      f"({r['passed']} of {r['cells']} held-out cells inside)\n")


def _clean(v):
    """JSON-ready copy: numpy scalars to Python, NaN/inf to None."""
    import math

    if isinstance(v, dict):
        return {str(k): _clean(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_clean(x) for x in v]
    if hasattr(v, "item") and not isinstance(v, (str, bytes)):
        v = v.item()
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def main(argv=None) -> int:
    """Entry point of ``nullatlas-calibrate``."""
    a = build_parser().parse_args(argv)

    def run():
        s = {"build": _cmd_build, "extend": _cmd_extend, "fit": _cmd_fit,
             "check": _cmd_check, "power": _cmd_power, "validate": _cmd_validate}[a.command](a)
        kind = s.pop("_kind", "table")
        if a.json:
            from nullatlas.lookup.results import SCHEMA
            json.dump(_clean({"schema": SCHEMA, **s}), sys.stdout, indent=2, allow_nan=False)
            sys.stdout.write("\n")
        elif kind == "check":
            _print_check(s)
        elif kind == "power":
            _print_power(s)
        elif kind == "validate":
            _print_validate(s)
        else:
            _print_summary(s)
        return 0

    return guarded(PROG, run, "; run the same command again to resume")


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
