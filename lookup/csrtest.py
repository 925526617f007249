"""The user-facing CSR test: validate, summarise, simulate, rank."""
from __future__ import annotations

import time
import warnings

import numpy as np

from .errors import OptionError
from .inference import montecarlo
from .limits import MAX_SIMS, duration, refuse_beyond
from .patterns.readers import read_points
from .patterns.validate import validate_pattern
from .patterns.windows import Window, as_window
from .persistence.diagram import ENGINES
from .processes.csr import replicate_seeds
from .results import CSRTestResult
from .summaries.statistics import PatternSummary, evaluate, resolve_stats

__all__ = ["csr_test", "METHODS", "ALTERNATIVES"]

METHODS = ("auto", "asymptotic", "mc")
#: Workers beyond this many times the cores only add start-up time and memory.
JOBS_PER_CORE = 4
ALTERNATIVES = ("two-sided", "clustered", "regular")


def _check_options(method, n_sims, jobs, alternative, alpha, engine="fast"):
    if engine not in ENGINES:
        raise OptionError(f"engine must be one of {', '.join(ENGINES)}, got '{engine}'")
    if method not in METHODS:
        raise OptionError(f"method must be one of {', '.join(METHODS)}, got '{method}'")
    if not isinstance(n_sims, (int, np.integer)) or n_sims < 1:
        raise OptionError(f"number of simulations must be a positive integer, got {n_sims}")
    refuse_beyond("--sims", int(n_sims), MAX_SIMS,
                  f"at even a millisecond each that is {duration(n_sims * 1e-3)}",
                  " (999 or 9,999 are the usual choices)")
    if not isinstance(jobs, (int, np.integer)) or jobs < 0:
        raise OptionError(f"jobs must be 0 (all cores) or a positive integer, got {jobs}")
    if alternative not in ALTERNATIVES:
        raise OptionError(f"alternative must be one of {', '.join(ALTERNATIVES)}, got '{alternative}'")
    if not 0 < alpha < 1:
        raise OptionError(f"alpha must lie in (0, 1), got {alpha}")


def csr_test(points, window, stats=None, *, method="auto", n_sims=999, seed=None, jobs=1,
             alternative="two-sided", on_duplicates="error", alpha=0.05, columns=None,
             progress=False, engine="fast", tables=None, use_shipped=True,
             null="csr") -> CSRTestResult:
    """Test a point pattern for complete spatial randomness.

    Parameters
    ----------
    points : ndarray of shape (n, d) or path
        Coordinates, or a file readable by :func:`read_points`.
    window : Window, shapely Polygon/MultiPolygon, or str
        The observation window, a polygon, or a specification (see
        :func:`~nullatlas.lookup.patterns.windows.parse_window`).
    stats : list of str, optional
        Statistic names; the first is the primary test.  Default: the Euler
        characteristic curve, then total H0/H1(/H2) persistence, max H1
        lifetime, Clark–Evans mean NN distance and Besag's L as secondary.
    method : {"auto", "asymptotic", "mc"}
        ``"auto"`` (default): the instant test from the null tables where it
        is trusted, Monte Carlo for the statistics where it is not (each
        result says which was used and why); ``"asymptotic"``: always the
        instant test, untrusted results flagged (``trusted``, ``reason``);
        ``"mc"``: always Monte Carlo, ``n_sims`` CSR patterns conditional on n.
    n_sims : int
        Number of null simulations m (p-values are multiples of 1/(m+1)).
    seed : int, optional
        Root seed; when omitted a fresh one is drawn and reported in
        ``result.seed`` so the run can be repeated.
    jobs : int
        Worker processes; 0 uses every core.  Results do not depend on it.
    alternative : {"two-sided", "clustered", "regular"}
        One-sided alternatives apply to scalar statistics with a known
        direction under clustering; others stay two-sided (said in ``reason``).
    on_duplicates : {"error", "drop", "jitter"}
    alpha : float
        Level of the envelopes and of the plain-text verdict.
    columns : list, optional
        Coordinate columns when ``points`` is a file.
    progress : bool or None
        Progress bar on standard error (None: only on a terminal).
    engine : {"fast", "gudhi"}
        Persistence engine: our exact kernels (default) or gudhi's generic
        path, the reference (see :func:`lookup.persistence.diagram.alpha_diagram`).
    tables : list of str, optional
        Your own null tables (``nullatlas-calibrate build``); they take
        precedence over the shipped ones for their windows.
    use_shipped : bool
        Also consult the shipped tables (default True).
    null : str
        The null model: ``"csr"`` (default), or a model of ``lookup.processes.registry``
        (e.g. ``"thomas:parents=0.05,sigma=0.3"``) conditioned on n, simulated
        on the Monte Carlo route (the tables are for CSR only).

    Returns
    -------
    CSRTestResult
        ``statistic`` and ``pvalue`` of the primary test; every test in
        ``results``.

    Raises
    ------
    NullAtlasError
        On any bad input (a ``ValueError`` subclass).

    Examples
    --------
    A wafer with a cluster of defects on top of uniform ones, tested with the
    instant tests (null moments from the shipped tables):

    >>> import numpy as np
    >>> import nullatlas
    >>> rng = np.random.default_rng(4)
    >>> wafer = nullatlas.Disk(0, 0, 150)
    >>> spot = nullatlas.Disk(40, -30, 25)
    >>> pts = np.vstack([wafer.sample(300, rng), spot.sample(100, rng)])
    >>> res = nullatlas.csr_test(pts, wafer, method="asymptotic", seed=1)
    >>> [r.name for r in res.results]
    ['euler', 'total0', 'total1', 'maxpers1', 'nnmean', 'lfunc']
    >>> res.primary.method, res.pvalue < 0.001
    ('asymptotic-maxabs', True)

    The same pattern by Monte Carlo, one statistic, a one-sided alternative
    and 19 simulations (p-values are multiples of 1/20); the window can also
    be given by its specification:

    >>> res = nullatlas.csr_test(pts, "disk:0,0,150", stats=["nnmean"], method="mc",
    ...                          n_sims=19, seed=3, alternative="clustered")
    >>> res.primary.method, res.primary.n_sims, res.pvalue
    ('mc-rank', 19, 0.05)

    Uniform points in the same window are not rejected:

    >>> uniform = wafer.sample(400, np.random.default_rng(1))
    >>> res = nullatlas.csr_test(uniform, wafer, method="asymptotic", seed=1)
    >>> res.pvalue > 0.05
    True
    """
    t0 = time.perf_counter()
    _check_options(method, n_sims, jobs, alternative, alpha, engine)
    from .processes.registry import describe, parse_model
    model = parse_model(null)
    if model[0] != "csr":
        if method == "asymptotic":
            raise OptionError("the null tables are for CSR only: use --method mc (or auto) "
                              f"with --null {null}")
        method = "mc"
    import os
    cores = os.cpu_count() or 1
    jobs_note = ""
    if jobs == 0:
        jobs = cores
    elif jobs > JOBS_PER_CORE * cores:
        jobs_note = f"--jobs {jobs} on {cores} cores: using {JOBS_PER_CORE * cores} workers"
        jobs = JOBS_PER_CORE * cores
    pts = points if isinstance(points, np.ndarray) else read_points(points, columns)
    caught = [jobs_note] if jobs_note else []
    if not isinstance(window, Window):
        with warnings.catch_warnings(record=True) as w:
            warnings.simplefilter("always")
            window = as_window(window, pts)
        caught = [str(x.message) for x in w]
    if seed is None:
        seed = int(np.random.SeedSequence().entropy % (2 ** 63))
    elif not isinstance(seed, (int, np.integer)) or seed < 0:
        raise OptionError(f"seed must be a non-negative integer, got {seed}")
    root = np.random.SeedSequence(int(seed))
    jitter_seed, sim_seed = root.spawn(2)
    pts, report = validate_pattern(pts, window, on_duplicates, np.random.default_rng(jitter_seed))
    chosen = resolve_stats(stats, pts.shape[1])
    n = len(pts)
    summary = PatternSummary(pts, window, engine)
    observed = evaluate(summary, chosen)
    results = [None] * len(chosen)
    if method in ("auto", "asymptotic"):
        from .inference.asymptotic import asymptotic_result, verdict
        from .inference.nullmoments import TableSet, default_tables, null_moments

        if tables:
            from .inference.tablereader import open_table
            for tp in tables:              # a table given explicitly must fit the data
                open_table(tp, dimension=pts.shape[1])
        tset = TableSet(tables or (), use_shipped) if (tables or not use_shipped) \
            else default_tables()
        for i, st in enumerate(chosen):
            alt, note = montecarlo._alternative_for(st, alternative)
            nm = null_moments(tset, window, n, st.name)
            ok, why = verdict(nm, st, n, window, alt, report.n_duplicates,
                              n_input=report.n_input)
            if nm is None:
                results[i] = None if method == "auto" else montecarlo.untested_result(st, why, i == 0)
                continue
            r = asymptotic_result(st, observed[st.name], nm, alt, n, ok, why, primary=(i == 0),
                                  note=note)
            results[i] = r if (ok or method == "asymptotic") else None
            if not ok and method == "auto":
                caught.append(f"{st.name}: instant test not trusted ({'; '.join(why)}); "
                              "Monte Carlo used instead")
    todo = [st for st, r in zip(chosen, results) if r is None]
    if todo:
        seeds = replicate_seeds(sim_seed, int(n_sims))
        sims = montecarlo.simulate_null(window, n, todo, seeds, jobs=int(jobs), progress=progress,
                                        engine=engine, model=None if model[0] == "csr" else model)
        mc = montecarlo.mc_results(observed, sims, todo, alternative=alternative, alpha=alpha)
        it = iter(mc)
        for i, r in enumerate(results):
            if r is None:
                results[i] = next(it)
                results[i].primary = (i == 0)
    if report.n_duplicates:
        caught.append(f"{report.n_duplicates} duplicate point(s) were handled by '{on_duplicates}'")
    diag = summary.diagram if any(s.needs_diagram for s in chosen) else None
    return CSRTestResult(results=results, n=n, dimension=pts.shape[1], window=window.describe(),
                         seed=int(seed), validation=report.as_dict(), diagram=diag,
                         warnings=caught, elapsed_s=time.perf_counter() - t0, engine=engine,
                         method=method, null=describe(*model))
