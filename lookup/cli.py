"""The ``nullatlas`` command: test a point pattern for complete spatial randomness.

Every bad input ends with one line on standard error and exit status 2.
"""
from __future__ import annotations

import argparse
import contextlib
import json
import os
import sys
import warnings

from .errors import NullAtlasError, OptionError, WriteError
from .limits import MAX_SIMS

PROG = "nullatlas"


class _Parser(argparse.ArgumentParser):
    """Argument parser whose usage errors are one line and exit status 2."""

    def error(self, message):
        sys.stderr.write(f"{self.prog}: error: {message} (see {self.prog} --help)\n")
        sys.exit(2)


def _int(text):
    try:
        return int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not an integer") from None


def _float(text):
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a number") from None


FALLBACK_HELP = (
    "with --method auto: the longest the Monte Carlo fallback for untrusted statistics may "
    "take, estimated before it starts (one timed simulation; an estimate above a minute is "
    "printed on standard error). Beyond it the fallback is not run and those statistics keep "
    "their instant answer, flagged UNTRUSTED with the estimate in the reason (no p-value "
    "where there is none); 0 never runs it. Default: no budget, the fallback always runs")

#: What the "kappa" of the printed header means (``nullatlas test --help``).
KAPPA_HELP = (
    "kappa, printed with the window, is its boundary measure / content^((d-1)/d) in d "
    "dimensions (perimeter / sqrt(area) in 2D, surface / volume^(2/3) in 3D): a scale-free "
    "shape factor, 3.54 for a disk, 4 for a square, 6 for a cube; the larger it is, the more "
    "of the window lies near its boundary.")

#: Exit statuses of ``nullatlas batch`` (its --help and the README say the same).
BATCH_STATUS = (
    "Exit status: 0 every file was tested; 1 some files failed (each failed row carries its "
    "one-line error; the others are tested, adjusted and written); 2 nothing usable: every "
    "file failed, or the batch was refused before any work (bad options, a malformed "
    "--window, a named file or manifest entry that does not exist, a glob that matches "
    "nothing), or a results file could not be written; 130 interrupted (Ctrl-C), 143 "
    "terminated (SIGTERM).")


CURVE_TEST_HELP = ("global test of a curve: maxabs = the studentised maximum max |z| over the "
                   "usable grid points, the same test on the instant and the Monte Carlo route "
                   "(default); erl = the extreme rank length envelope, a different test, Monte "
                   "Carlo only")


def _progress_options(parser) -> None:
    """--progress / --no-progress, the same on every command that has a bar."""
    bar = parser.add_mutually_exclusive_group()
    bar.add_argument("--progress", dest="progress", action="store_true", default=None,
                     help="always show the progress bar (default: only on a terminal)")
    bar.add_argument("--no-progress", dest="progress", action="store_false",
                     help="never show the progress bar")


def build_parser() -> argparse.ArgumentParser:
    from .patterns.windowspec import SPEC_HELP

    p = _Parser(prog=PROG, description=(
        "Test whether a 2D or 3D point pattern is consistent with complete spatial "
        "randomness (CSR), judged by persistent homology and classical summaries."))
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True

    t = sub.add_parser("test", help="test one point pattern against CSR",
                       description="Test one point pattern against CSR (binomial null "
                       "conditional on the number of points).", epilog=KAPPA_HELP)
    t.add_argument("points", help="points file: CSV/TSV/whitespace text (header optional), "
                   ".npy, or FILE.h5:/dataset")
    t.add_argument("--window", "-w", required=True, metavar="SPEC",
                   help=f"observation window: {SPEC_HELP}. bbox/hull are estimated from the "
                   "data and bias the test (a warning is printed)")
    t.add_argument("--stat", action="append", metavar="NAME",
                   help="statistic to test (repeat or comma-separate); the first is the primary "
                   "test, the rest are secondary and unadjusted. Default: euler, then "
                   "total0,total1[,total2],maxpers1 (2D) or maxpers2 (3D),nnmean,lfunc. "
                   "See 'nullatlas stats'")
    t.add_argument("--method", default="auto", choices=["auto", "asymptotic", "mc"],
                   help="how p-values are computed: auto = instant test from the null tables "
                   "where it is trusted, Monte Carlo where it is not (default); asymptotic = "
                   "always the instant test, untrusted results flagged; mc = always Monte Carlo")
    t.add_argument("--fallback-budget", type=_float, default=None, metavar="SECONDS",
                   help=FALLBACK_HELP)
    t.add_argument("--curve-test", default="maxabs", choices=["maxabs", "erl"],
                   help=CURVE_TEST_HELP)
    t.add_argument("--null", default="csr", metavar="MODEL",
                   help="null model: csr (default), or a model such as "
                   "thomas:parents=0.05,sigma=0.3, matern, hardcore, strauss, lattice, voids, "
                   "inhom:EXPR (lengths in units of the mean spacing), simulated on the Monte "
                   "Carlo route; parameters are finite numbers in: parents (0, 1], sigma and "
                   "radius (0, 1000], r (0, 10], gamma [0, 1], jitter [0, 100], fraction "
                   "[0, 0.95)")
    t.add_argument("--table", action="append", metavar="FILE",
                   help="your own null table (nullatlas-calibrate build); takes precedence over "
                   "the shipped tables for its window (repeatable)")
    t.add_argument("--sims", type=_int, default=999, metavar="M",
                   help=f"number of null simulations of the Monte Carlo route (default: 999, at "
                   f"most {MAX_SIMS:,}: more are refused with the time they would take)")
    t.add_argument("--seed", type=_int, default=None, metavar="S",
                   help="root random seed (default: fresh; the seed used is reported)")
    t.add_argument("--jobs", "-j", type=_int, default=1, metavar="N",
                   help="worker processes, 0 = all cores (default: 1); results do not depend on it")
    t.add_argument("--alternative", default="two-sided",
                   choices=["two-sided", "clustered", "regular"],
                   help="alternative hypothesis for scalar statistics with a known direction "
                   "(default: two-sided)")
    t.add_argument("--alpha", type=_float, default=0.05,
                   help="level of the verdict and of the envelopes (default: 0.05, common practice)")
    t.add_argument("--columns", metavar="COLS",
                   help="coordinate columns by name (x,y,z) or 0-based index (0,1,2)")
    t.add_argument("--on-duplicates", default="error", choices=["error", "drop", "jitter"],
                   help="what to do with exactly repeated points (default: error)")
    t.add_argument("--plot", metavar="FILE",
                   help="write a figure (.png, .pdf or .svg): diagram, curves with null envelopes, "
                   "scalar z-scores")
    t.add_argument("--engine", default="fast", choices=["fast", "gudhi"],
                   help="persistence engine: our exact kernels (default) or gudhi's generic "
                        "path, the reference; both give the same diagram")
    t.add_argument("--tiled", action="store_true",
                   help="one 2D pattern too large for one process: compute euler, betti0, "
                   "betti1, total0, nnmean and gfunc tile by tile, exactly as one process "
                   "would, reading .npy (memory-mapped), file.h5:/dataset or .parquet in "
                   "chunks (POINTS may also be csr:N, N uniform points generated from --seed), "
                   "and test them instantly (no Monte Carlo fallback)")
    t.add_argument("--tile-points", type=_int, default=None, metavar="N",
                   help="with --tiled: about N points per tile (default 1,000,000; a worker "
                   "needs about 500 bytes per point of its tile and halo)")
    t.add_argument("--dask-scheduler", metavar="ADDR",
                   help="with --tiled: run the tiles on this dask.distributed scheduler "
                   "(workers must see the temporary folder), or 'local' for a local cluster "
                   "of --jobs workers")
    t.add_argument("--json", action="store_true", help="print one JSON object instead of a table")
    t.add_argument("--curves", action="store_true",
                   help="with --json, include the observed and null curves on their grids")
    _progress_options(t)

    b = sub.add_parser("batch", help="test many pattern files, with adjusted p-values",
                       description="Test many pattern files (files, folders, globs, or a "
                       "manifest CSV with a window per file) in parallel; the primary test's "
                       "p-values are adjusted over the files (Holm, Benjamini-Hochberg).",
                       epilog=BATCH_STATUS)
    b.add_argument("inputs", nargs="*", help="point files, folders or glob patterns")
    b.add_argument("--window", "-w", metavar="SPEC", help="window of every file")
    b.add_argument("--manifest", metavar="CSV",
                   help="CSV with columns file, window[, columns]; paths relative to it")
    b.add_argument("--allow-absolute", action="store_true",
                   help="let manifest paths leave the manifest's folder")
    b.add_argument("--out", metavar="FILE", help="results file (.csv or .json), written atomically")
    b.add_argument("--resume", action="store_true",
                   help="continue an interrupted batch with the same --out (its journal "
                   "FILE.journal.jsonl holds the finished files; a file changed since it was "
                   "tested, in size, time or content, is tested again)")
    b.add_argument("--stat", action="append", metavar="NAME", help="as for 'test'")
    b.add_argument("--method", default="auto", choices=["auto", "asymptotic", "mc"],
                   help="as for 'test': instant where trusted, else Monte Carlo (default: auto)")
    b.add_argument("--fallback-budget", type=_float, default=None, metavar="SECONDS",
                   help="as for 'test', per file")
    b.add_argument("--curve-test", default="maxabs", choices=["maxabs", "erl"],
                   help=CURVE_TEST_HELP)
    b.add_argument("--table", action="append", metavar="FILE",
                   help="as for 'test': your own null table(s), consulted first")
    b.add_argument("--sims", type=_int, default=999, metavar="M",
                   help="as for 'test': Monte Carlo simulations per file (default: 999)")
    b.add_argument("--seed", type=_int, default=None, metavar="S",
                   help="batch seed: file i uses its i-th child (default: fresh, reported)")
    b.add_argument("--jobs", "-j", type=_int, default=1, metavar="N",
                   help="worker processes, 0 = all cores; results do not depend on it")
    b.add_argument("--dask-scheduler", metavar="ADDR",
                   help="run the files on a dask.distributed cluster (e.g. tcp://host:8786); "
                   "the workers must see the files at the same paths")
    b.add_argument("--alternative", default="two-sided", choices=["two-sided", "clustered", "regular"],
                   help="as for 'test' (default: two-sided)")
    b.add_argument("--alpha", type=_float, default=0.05,
                   help="level of each file's test and false discovery rate of the summary line "
                   "(default: 0.05)")
    b.add_argument("--columns", metavar="COLS", help="as for 'test', for every file")
    b.add_argument("--on-duplicates", default="error", choices=["error", "drop", "jitter"],
                   help="as for 'test' (default: error)")
    b.add_argument("--engine", default="fast", choices=["fast", "gudhi"],
                   help="as for 'test' (default: fast)")
    b.add_argument("--plot", metavar="FILE", help="summary figure (.png, .pdf or .svg)")
    b.add_argument("--json", action="store_true", help="print the rows as JSON")
    _progress_options(b)

    tb = sub.add_parser("tables", help="list what the null tables cover",
                        description="List the cells of null tables (shape, n, replicates) and "
                        "n_min per statistic: the smallest calibrated n from which the "
                        "asymptotic test is trusted. Default: the shipped tables.")
    tb.add_argument("file", nargs="*", help="table files (default: the shipped tables)")
    tb.add_argument("--json", action="store_true", help="print one JSON object")

    lo = sub.add_parser("locate", help="find and place the significant clusters, loops and voids",
                        description="Per-feature significance with family-wise error control: a "
                        "feature (cluster, loop, or void in 3D) is significant when its death/birth "
                        "ratio beats the largest ratio of a CSR pattern of the same window and n "
                        "(shipped tables, or CSR simulations); prints where each one is.")
    lo.add_argument("points", help="points file, as for 'test'")
    lo.add_argument("--window", "-w", required=True, metavar="SPEC", help="window, as for 'test'")
    lo.add_argument("--alpha", type=_float, default=0.05, help="family-wise level (default 0.05)")
    lo.add_argument("--only", choices=["clusters", "holes", "loops", "voids"], default=None,
                    help="test one family: clusters, loops, voids (3D), or holes (loops in 2D, "
                    "voids in 3D); default all (2D: clusters and loops; 3D: clusters, loops "
                    "and voids), Bonferroni over them")
    lo.add_argument("--min-size", type=_int, default=10, metavar="K",
                    help="points a component needs to count as a cluster (default 10)")
    lo.add_argument("--method", default="auto", choices=["auto", "table", "mc"],
                    help="null of the largest loop/void: tables where trusted else simulations "
                    "(auto), tables only, or simulations only; clusters and 3D loops are always "
                    "simulated")
    lo.add_argument("--sims", type=_int, default=999, metavar="M",
                    help="CSR patterns per simulated null (default 999)")
    lo.add_argument("--seed", type=_int, default=0, metavar="S", help="seed of the simulations")
    lo.add_argument("--table", action="append", metavar="FILE", help="your own null table")
    lo.add_argument("--columns", metavar="COLS", help="as for 'test'")
    lo.add_argument("--on-duplicates", default="error", choices=["error", "drop", "jitter"],
                    help="as for 'test' (point labels refer to the points kept)")
    lo.add_argument("--json", action="store_true", help="print one JSON object")
    lo.add_argument("--geojson", metavar="FILE", help="write the significant features as GeoJSON")
    lo.add_argument("--labels", metavar="FILE", help="write a CSV: which feature each point belongs to")
    lo.add_argument("--plot", metavar="FILE", help="map and diagram (.png, .pdf or .svg)")
    _progress_options(lo)

    s = sub.add_parser("stats", help="list the available statistics",
                       description="List the statistics that --stat accepts.")
    s.add_argument("--json", action="store_true", help="print a JSON list")

    c = sub.add_parser("compile", help="compile the numeric kernels ahead of time",
                       description=COMPILE_HELP)
    c.add_argument("--json", action="store_true", help="print one JSON object")
    return p


#: ``nullatlas compile --help`` (the README says the same).
COMPILE_HELP = (
    "Compile the numeric kernels (Delaunay, alpha persistence, close pairs) into machine code "
    "for this installation, once, in the cache folder ($NULLATLAS_CACHE_DIR, default "
    "~/.cache/nullatlas): run it in an install script or a container image build. The "
    "first `nullatlas test` or `batch` does the same by itself (1-3 min, announced on "
    "standard error); afterwards a command needs only numpy and h5py to start. Without a C "
    "compiler the kernels run through numba's JIT instead (cached by numba). "
    "NULLATLAS_AOT=off uses the JIT only; NULLATLAS_AOT=use never compiles at a first run.")


def _fmt(v, width=10):
    import numpy as np

    if v is None or (isinstance(v, float) and not np.isfinite(v)):
        return "-".rjust(width)
    return (" " + f"{v:.4g}").rjust(width)


def _print_table(res, alpha, out=None):
    (out or sys.stdout).write(res.summary(alpha))


def _cmd_test_tiled(a):
    """``nullatlas test --tiled``: the points are read in chunks, never whole."""
    from .patterns.readers import parse_columns
    from .patterns.windows import parse_window
    from .tiled.instant import tiled_csr_test
    from .tiled.sources import GeneratedCSR

    for opt, bad in (("--plot", a.plot), ("--null", a.null != "csr"),
                     ("--method mc", a.method == "mc"), ("--curve-test erl", a.curve_test == "erl"),
                     ("--on-duplicates", a.on_duplicates != "error")):
        if bad:
            raise OptionError(f"{opt} does not go with --tiled (a tiled run tests instantly, "
                              "against CSR, points distinct)")
    window = parse_window(a.window, None)
    _kernels_ready()
    source = a.points
    if a.points.lower().startswith("csr:"):
        try:
            n = int(float(a.points[4:]))
        except ValueError:
            raise OptionError(f"csr:N needs a number of points, got '{a.points}'") from None
        if n < 3:
            raise OptionError(f"csr:N needs at least 3 points, got {n}")
        source = GeneratedCSR(window, n, seed=a.seed or 0)
    return tiled_csr_test(source, window, a.stat, tile_points=a.tile_points, jobs=a.jobs or 1,
                          scheduler=a.dask_scheduler, progress=a.progress, tables=a.table,
                          alternative=a.alternative, seed=a.seed,
                          columns=parse_columns(a.columns))


def _report_test(res, a, note: str = "") -> None:
    """Print a test result as the table or, with --json, one JSON object."""
    if a.json:
        d = res.as_dict(curves=a.curves)
        d["alpha"] = a.alpha
        d["points_file"] = a.points
        if a.plot:
            d["plot"] = a.plot
        json.dump(d, sys.stdout, indent=2, allow_nan=False)
        sys.stdout.write("\n")
        return
    _print_table(res, a.alpha)
    if note:
        sys.stdout.write(note + "\n")
    if a.plot:
        sys.stdout.write(f"figure written to {a.plot}\n")


def _cmd_test(a) -> int:
    if a.tiled:
        res = _cmd_test_tiled(a)
        tl = res.validation["tiling"]
        _report_test(res, a, f"tiled: {tl['tiles']} tiles ({tl['grid'][0]} x {tl['grid'][1]}), "
                             f"largest with its halo {tl['largest_tile_points']:,} points, "
                             f"{tl['seconds']:.1f} s")
        return 0
    from .csrtest import csr_test
    from .patterns.readers import parse_columns, read_points
    from .patterns.windows import parse_window
    from .plots import check_plot_path, plot_result

    for opt, given in (("--tile-points", a.tile_points), ("--dask-scheduler", a.dask_scheduler)):
        if given is not None:
            raise OptionError(f"{opt} goes with --tiled")
    if a.sims < 1:
        raise OptionError(f"--sims must be at least 1, got {a.sims}")
    if a.jobs < 0:
        raise OptionError(f"--jobs must be 0 (all cores) or positive, got {a.jobs}")
    if a.plot:
        check_plot_path(a.plot)
    pts = read_points(a.points, parse_columns(a.columns))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        window = parse_window(a.window, pts)
    _kernels_ready()
    res = csr_test(pts, window, a.stat, method=a.method, n_sims=a.sims, seed=a.seed,
                   jobs=a.jobs, alternative=a.alternative, on_duplicates=a.on_duplicates,
                   alpha=a.alpha, progress=a.progress, engine=a.engine, tables=a.table,
                   null=a.null, fallback_budget=a.fallback_budget, curve_test=a.curve_test,
                   notify=lambda msg: sys.stderr.write(f"{PROG}: note: {msg}\n"))
    res.warnings[:0] = [str(w.message) for w in caught]
    if a.plot:
        plot_result(res, a.plot)
    _report_test(res, a)
    return 0


def _cmd_locate(a) -> int:
    from .atomic import check_writable
    from .features.locate import locate_features
    from .patterns.readers import parse_columns, read_points
    from .patterns.windows import parse_window
    from .plots import check_plot_path

    if a.plot:
        check_plot_path(a.plot)
    for opt, path in (("--geojson", a.geojson), ("--labels", a.labels)):
        if path:
            if not os.path.isdir(os.path.dirname(os.path.abspath(path))):
                raise OptionError(f"{opt} folder does not exist: {os.path.dirname(os.path.abspath(path))}")
            check_writable(path)
    pts = read_points(a.points, parse_columns(a.columns))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        window = parse_window(a.window, pts)
    _kernels_ready()
    fam = None
    if a.only:
        fam = [{"clusters": 0, "loops": 1, "voids": 2, "holes": window.dim - 1}[a.only]]
    res = locate_features(pts, window, alpha=a.alpha, families=fam, min_size=a.min_size,
                          method=a.method, n_sims=a.sims, seed=a.seed,
                          on_duplicates=a.on_duplicates, progress=a.progress, tables=a.table)
    res.warnings[:0] = [str(w.message) for w in caught]
    from .features import export
    written = []
    if a.geojson:
        written.append(export.write_geojson(res, a.geojson))
    if a.labels:
        written.append(export.write_labels(res, a.labels))
    if a.plot:
        from .features.mapplot import plot_feature_map
        written.append(plot_feature_map(res, a.plot))
    if a.json:
        d = res.as_dict()
        d["points_file"] = a.points
        d["written"] = written
        json.dump(d, sys.stdout, indent=2, allow_nan=False)
        sys.stdout.write("\n")
    else:
        sys.stdout.write(res.summary())
        for w in written:
            sys.stdout.write(f"written: {w}\n")
    return 0


def _cmd_stats(a) -> int:
    from .summaries.statistics import STATISTICS

    rows = [{"name": s.name, "kind": s.kind, "dimensions": list(s.dims),
             "under_clustering": {1: "larger", -1: "smaller", None: "unknown"}[s.clustered],
             "description": s.description} for s in STATISTICS.values()]
    if a.json:
        json.dump(rows, sys.stdout, indent=2)
        sys.stdout.write("\n")
    else:
        for r in rows:
            dims = "/".join(f"{d}D" for d in r["dimensions"])
            sys.stdout.write(f"{r['name']:<13}{r['kind']:<8}{dims:<7}clustering: "
                             f"{r['under_clustering']:<8} {r['description']}\n")
    return 0


def _cmd_batch(a) -> int:
    from .batch import collect_inputs, run_batch, write_results

    if a.sims < 1:
        raise OptionError(f"--sims must be at least 1, got {a.sims}")
    if a.jobs < 0:
        raise OptionError(f"--jobs must be 0 (all cores) or positive, got {a.jobs}")
    if a.out and os.path.splitext(a.out)[1].lower() not in (".csv", ".json"):
        raise OptionError(f"--out must end in .csv or .json, got '{a.out}'")
    if a.out and not os.path.isdir(os.path.dirname(os.path.abspath(a.out))):
        raise OptionError(f"--out folder does not exist: {os.path.dirname(os.path.abspath(a.out))}")
    if a.out:
        from .atomic import check_writable
        check_writable(a.out)
    if a.plot:
        from .plots import check_plot_path
        check_plot_path(a.plot)
    if a.resume and not a.out:
        raise OptionError("--resume needs the --out of the interrupted batch")
    items = collect_inputs(a.inputs, a.window, a.columns, a.manifest, a.allow_absolute)
    journal = a.out + ".journal.jsonl" if a.out else None
    if a.resume and not os.path.exists(journal):
        sys.stderr.write(f"{PROG}: note: --resume: {_no_journal(a.out, journal)}; every file "
                         "is tested again\n")
    _kernels_ready()
    res = run_batch(items, stats=a.stat, method=a.method, n_sims=a.sims, seed=a.seed,
                    jobs=a.jobs, alternative=a.alternative, on_duplicates=a.on_duplicates,
                    alpha=a.alpha, engine=a.engine, tables=a.table, progress=a.progress,
                    journal=journal, resume=a.resume, scheduler=a.dask_scheduler,
                    fallback_budget=a.fallback_budget, curve_test=a.curve_test,
                    notify=lambda msg: sys.stderr.write(f"{PROG}: note: {msg}\n"))
    if a.out:
        try:
            write_results(res, a.out)
        except WriteError as exc:
            raise WriteError(f"{exc}; the results of the {len(res.rows)} file(s) are kept in "
                             f"{journal}: run the same command with --resume once it can be "
                             "written") from None
        os.unlink(journal)
    _print_batch(res, a)
    if a.plot:                     # last: a figure that cannot be written loses no result
        from .plots import plot_batch
        plot_batch(res, a.plot, alpha=a.alpha)
    return _batch_status(res)


def _no_journal(out, journal) -> str:
    """Why ``--resume`` finds nothing to resume from."""
    if os.path.exists(out):
        return (f"there is no journal {journal}: the batch that wrote {out} had finished (the "
                "journal is removed once the results are written), so nothing was interrupted")
    return f"there is no journal {journal}: no batch with --out {out} was interrupted"


def _batch_status(res) -> int:
    """0: every file tested; 1: some failed; 2: all failed (``BATCH_STATUS``),
    with one line on standard error when not 0."""
    failed, total = len(res.failed), len(res.rows)
    if not failed:
        return 0
    first = res.failed[0]
    if failed == total:
        sys.stderr.write(f"{PROG}: error: every file failed ({total}); the first, "
                         f"{first['file']}: {first['error']}\n")
        return 2
    sys.stderr.write(f"{PROG}: {failed} of {total} files failed (their rows say why); "
                     "exit status 1\n")
    return 1


def _print_batch(res, a) -> None:
    from .results import format_pvalue, method_label

    if a.json:
        from .batch import results_document
        json.dump(results_document(res), sys.stdout, indent=1, allow_nan=False)
        sys.stdout.write("\n")
        return
    w = sys.stdout.write
    w(f"{len(res.rows)} files, {len(res.failed)} failed, seed {res.seed}\n")
    w(f"{'file':<36}{'n':>8}  {'name':<10}{'pvalue':>10}{'holm':>10}{'bh':>10}  method\n")
    for r in res.rows:
        name = os.path.basename(r["file"])[:35]
        if r["error"]:
            w(f"{name:<36}{'-':>8}  error: {r['error']}\n")
            continue
        flag = "" if r["trusted"] else "  UNTRUSTED"
        # an adjusted bound is a bound too
        pv, ph, pb = (format_pvalue(r[k], r.get("pvalue_is_bound"), r.get("n_sims") or 0)
                      for k in ("pvalue", "pvalue_holm", "pvalue_bh"))
        w(f"{name:<36}{r['n']:>8}  {r['name']:<10}{pv:>10}{ph:>10}{pb:>10}  "
          f"{method_label(r['method'], r.get('n_sims'))}{flag}\n")
    rej = sum(1 for r in res.rows if r["pvalue_bh"] is not None and r["pvalue_bh"] <= a.alpha)
    w(f"{rej} file(s) with CSR rejected at a false discovery rate of {a.alpha:g} "
      "(Benjamini-Hochberg over the primary test)\n")
    if a.out:
        w(f"results written to {a.out}\n")


def _table_summary(path) -> dict:
    from .inference.tablereader import open_table

    info = open_table(path)
    shapes = {}
    for c in info.cells:
        sh = shapes.setdefault(c.shape, {"kappa": c.kappa, "cells": []})
        if c.label:
            sh["label"] = c.label
        sh["cells"].append({"n": c.n, "replicates": c.replicates})
    for shape, sh in shapes.items():
        sh["n_min"] = {stat: {t: (None if v < 0 else v) for t, v in tests.items()}
                       for stat, tests in info.nmin.get(shape, {}).items()}
    return {"path": info.path, "dimension": info.dimension, "schema_version": info.schema_version,
            "created": info.created, "root_seed": info.root_seed,
            "statistics": sorted({s for c in info.cells for s in c.stats}),
            "model": list(info.models), "geometric_model": list(info.geomodels),
            "validated_model_route": info.trust, "shapes": shapes}


#: Readable names of the audited tests (the keys of n_min).
TEST_LABELS = {"two_sided": "two-sided", "lower": "lower tail", "upper": "upper tail",
               "maxabs": "max |z|", "mahalanobis": "Mahalanobis"}


def nmin_text(tests: dict) -> str:
    """n_min of one statistic, each test named: ``two-sided 200, upper tail -``."""
    return ", ".join(f"{TEST_LABELS.get(k, k)} {'-' if v is None else v}" for k, v in tests.items())


def _cmd_tables(a) -> int:
    from .inference.tablereader import shipped_tables

    files = a.file or list(shipped_tables().values())
    if not files:
        raise OptionError("no shipped tables are installed; give a table file")
    out = [_table_summary(f) for f in files]
    if a.json:
        from .results import SCHEMA
        json.dump({"schema": SCHEMA, "tables": out}, sys.stdout, indent=2)
        sys.stdout.write("\n")
        return 0
    w = sys.stdout.write
    for t in out:
        w(f"{t['path']}\n  {t['dimension']}D, schema {t['schema_version']}, created {t['created']}, "
          f"root seed {t['root_seed']}\n  statistics: {', '.join(t['statistics'])}\n")
        for shape, sh in t["shapes"].items():
            ns = [c["n"] for c in sh["cells"]]
            reps = sorted({c["replicates"] for c in sh["cells"]})
            name = f"{sh['label']} (shape {shape}, " if sh.get("label") else f"{shape} ("
            w(f"  {name}kappa {sh['kappa']:.4g}): {len(ns)} cells, n = {min(ns)}..{max(ns)}, "
              f"R = {'/'.join(map(str, reps))}\n")
            if sh["n_min"]:
                w("    n_min by statistic and test (smallest calibrated n from which it holds):\n")
            for stat, tests in sh["n_min"].items():
                w(f"      {stat:<10} {nmin_text(tests)}\n")
        if t["validated_model_route"]:
            w("  model route (any other window) validated on held-out windows: trusted for n in "
              "this range and window measures up to these:\n")
            for stat, per in t["validated_model_route"].items():
                for test, r in per.items():
                    if r.get("passed", 0) <= 0:
                        w(f"      {stat:<10} {test:<11} never (no held-out window passed)\n")
                        continue
                    w(f"      {stat:<10} {test:<11} n {r['n_lo']}..{r['n_hi']}; boundary "
                      f"{r['boundary_share_max']:.0%}, narrow {r['narrow_share_max']:.1%}, holes "
                      f"{max(int(r['holes_max']), 0)}, 2nd order {r['second_order_max']:.2g}, "
                      f"curved {max(r.get('curved_share_max', 0), 0):.0%}\n")
        elif t["geometric_model"] or t["model"]:
            w("  model route: not validated on held-out windows (never trusted); run "
              "'nullatlas-calibrate validate FILE'\n")
    w("n_min: smallest calibrated n from which the audited size of the asymptotic test stays "
      "within tolerance ('-': none). Model route: see README, 'Windows of any shape'.\n")
    return 0


def _os_error_line(exc: OSError) -> str:
    """One line for an operating-system error no command turned into its own."""
    where = exc.filename if exc.filename is not None else ""
    why = exc.strerror or (str(exc).strip().splitlines() or [type(exc).__name__])[0]
    return f"{where}: {why}" if where else why


class Terminated(KeyboardInterrupt):
    """SIGTERM, raised in the main thread so that it takes the Ctrl-C path:
    joblib aborts its pool and ends the worker processes, temporary files
    are removed, journals and checkpoints stay consistent."""


@contextlib.contextmanager
def _sigterm_as_interrupt():
    """While a command runs, SIGTERM raises :class:`Terminated` (once: a second
    SIGTERM kills at once, as by default); outside the main thread (where no
    handler can be set) nothing changes.  Whatever else escapes after a
    SIGTERM (clean-up code it interrupted, e.g. a worker pool half started)
    is reported as the termination it comes from."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        yield
        return
    state = {"terminated": False}

    def handler(signum, frame):
        signal.signal(signal.SIGTERM, signal.SIG_DFL)
        state["terminated"] = True
        raise Terminated()

    old = signal.signal(signal.SIGTERM, handler)
    try:
        yield
    except BaseException:
        if state["terminated"]:
            raise Terminated() from None
        raise
    finally:
        signal.signal(signal.SIGTERM, old)


# After Ctrl-C or SIGTERM the aborted worker pool may leave a semaphore for
# joblib's resource tracker to clean up; the tracker (a helper process started
# with this interpreter's -W options) then warns about it on our standard
# error, after our one line.  The clean-up is what we want; the warning is noise.
_TRACKER_QUIET = ("ignore::UserWarning:joblib.externals.loky.backend.resource_tracker",
                  "ignore::UserWarning:multiprocessing.resource_tracker")


def _quiet_resource_tracker() -> None:
    """Pass warning filters to the resource trackers (joblib's and the standard
    library's), which are started with :data:`sys.warnoptions`
    (``subprocess._args_from_interpreter_flags``)."""
    for option in _TRACKER_QUIET:
        if option not in sys.warnoptions:
            sys.warnoptions.append(option)


def guarded(prog: str, run, hint: str = "") -> int:
    """Run ``run()`` the way every nullatlas command ends: an input error is one
    line on standard error and status 2; a closed output pipe (``| head``) is
    not an error; Ctrl-C is status 130, SIGTERM status 143 (worker processes
    ended with the command in both cases); ``hint`` follows those two messages."""
    _quiet_resource_tracker()
    try:
        with _sigterm_as_interrupt():
            rc = run()
            sys.stdout.flush()
        return rc
    except NullAtlasError as exc:
        sys.stderr.write(f"{prog}: error: {exc}\n")
        return 2
    except BrokenPipeError:
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
    except OSError as exc:       # the environment (a file or folder that cannot be used)
        sys.stderr.write(f"{prog}: error: {_os_error_line(exc)}\n")
        return 2
    except Terminated:
        sys.stderr.write(f"{prog}: terminated{hint}\n")
        return 143
    except KeyboardInterrupt:
        sys.stderr.write(f"{prog}: interrupted{hint}\n")
        return 130


def _cmd_compile(a) -> int:
    from .errors import CompileError
    from .kernels import build

    try:
        st = build(verbose=not a.json)
    except CompileError as exc:
        raise CompileError(f"{exc}; the kernels still run through numba's JIT") from None
    if a.json:
        json.dump(st, sys.stdout, indent=2)
        sys.stdout.write("\n")
    elif st["rebuilt"]:
        sys.stdout.write(f"compiled {st['signatures']} signatures of {st['kernels']} kernels into "
                         f"{st['folder']} in {st['seconds']:.0f} s\n")
    else:
        sys.stdout.write(f"already compiled: {st['folder']} ({st['signatures']} signatures of "
                         f"{st['kernels']} kernels)\n")
    if st["mode"] == "off":
        sys.stdout.write("note: NULLATLAS_AOT=off, so the compiled kernels are not used\n")
    return 0


def _kernels_ready() -> None:
    """Before the first kernel of a command runs: compile them ahead of time at
    the first run (one line on standard error; ``persistence.jit.ensure_built``)."""
    from .kernels import ensure_built

    ensure_built()


def main(argv=None) -> int:
    """Entry point of the ``nullatlas`` command."""
    a = build_parser().parse_args(argv)
    cmds = {"test": _cmd_test, "stats": _cmd_stats, "tables": _cmd_tables, "batch": _cmd_batch,
            "compile": _cmd_compile, "locate": _cmd_locate}
    return guarded(PROG, lambda: cmds[a.command](a))


#: Modules whose presence means worker processes or figures may still need the
#: interpreter's orderly exit (their atexit handlers): then :func:`run` exits normally.
_ORDERLY_EXIT = ("joblib", "multiprocessing", "concurrent.futures", "dask", "distributed",
                 "matplotlib", "numba")


#: Thread-count settings of the BLAS libraries numpy may use.
_BLAS_THREADS = ("OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "OMP_NUM_THREADS")


def _one_blas_thread() -> None:
    """Run BLAS/LAPACK on one thread in this command (and its worker processes),
    unless the user set a thread count: the command's matrices are small (the
    curve tests' correlation matrices have at most a few hundred rows), and
    on a busy 2-core machine OpenBLAS's threads made one eigendecomposition of
    a 60 x 60 matrix take some 30 ms instead of well under one.  Set before
    numpy is imported (the console script imports it later)."""
    if "numpy" not in sys.modules and not any(v in os.environ for v in _BLAS_THREADS):
        os.environ["OPENBLAS_NUM_THREADS"] = "1"
        os.environ["MKL_NUM_THREADS"] = "1"


def run() -> None:
    """The ``nullatlas`` console script: :func:`main`, then the exit.

    When the command started no worker processes and drew no figure (none of
    :data:`_ORDERLY_EXIT` was imported, as on the instant route), every file
    is closed and the output is flushed here, so the process ends with
    ``os._exit``: the interpreter's teardown of numpy, h5py and the rest has
    nothing left to do and would add some 30-50 ms to a half-second command.
    """
    _one_blas_thread()
    rc = main()
    try:
        sys.stdout.flush()
        sys.stderr.flush()
    except (BrokenPipeError, OSError):
        sys.exit(rc)
    if not any(m in sys.modules for m in _ORDERLY_EXIT):
        os._exit(rc or 0)
    sys.exit(rc)


if __name__ == "__main__":  # pragma: no cover
    run()
