"""The user-facing CSR test: validate, summarise, simulate, rank."""
from __future__ import annotations

import time
import warnings
from dataclasses import dataclass

import numpy as np

from .errors import OptionError
from .inference import montecarlo
from .limits import MAX_SIMS, duration, pattern_seconds, refuse_beyond
from .patterns.readers import read_points
from .patterns.validate import validate_pattern
from .patterns.windows import Window, as_window
from .persistence.diagram import ENGINES
from .processes.csr import replicate_seeds
from .results import CSRTestResult
from .summaries.statistics import PatternSummary, evaluate, resolve_stats

__all__ = ["csr_test", "METHODS", "ALTERNATIVES", "FallbackPlan", "plan_fallback",
           "fallback_seconds"]

METHODS = ("auto", "asymptotic", "mc")
#: Workers beyond this many times the cores only add start-up time and memory.
JOBS_PER_CORE = 4
ALTERNATIVES = ("two-sided", "clustered", "regular")


#: Curve tests: the studentised maximum on both routes, or the Monte Carlo
#: route's extreme rank length envelope.
CURVE_TESTS = ("maxabs", "erl")


def _check_options(method, n_sims, jobs, alternative, alpha, engine="fast", curve_test="maxabs"):
    if curve_test not in CURVE_TESTS:
        raise OptionError(f"curve test must be one of {', '.join(CURVE_TESTS)}, got '{curve_test}'")
    if curve_test == "erl" and method == "asymptotic":
        raise OptionError("the rank envelope curve test (erl) needs simulations: use --method mc "
                          "or auto with it, or the default curve test maxabs")
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


#: A Monte Carlo fallback estimated to take longer than this (seconds) is
#: announced through ``notify`` before it starts.
FALLBACK_NOTE_SECONDS = 60.0


@dataclass
class FallbackPlan:
    """What ``method="auto"`` does about the statistics whose instant answer
    is not trusted.

    Attributes
    ----------
    seconds : float
        Estimated time of the Monte Carlo fallback (all its simulations).
    lower_bound : bool
        ``seconds`` is a lower bound from the per-point cost
        (``lookup.limits``), already beyond the budget: nothing was simulated.
    first : dict or None
        The first null replicate, simulated to time it (kept: the fallback
        simulates only the others).
    skip : bool
        The estimate exceeds the budget: the fallback is not run.
    budget : float or None
    sims, workers : int
    """

    seconds: float
    lower_bound: bool
    first: dict | None
    skip: bool
    budget: float | None
    sims: int
    workers: int

    def words(self) -> str:
        """The estimate in words, e.g. ``about 3.2 h``."""
        return f"{'at least' if self.lower_bound else 'about'} {duration(self.seconds)}"

    def messages(self, chosen, untrusted) -> list[str]:
        """The result's warnings about the untrusted statistics."""
        if self.skip:
            names = ", ".join(chosen[i].name for i in untrusted)
            return [f"Monte Carlo fallback for {names} not run: {self.sims} simulations, "
                    f"{self.words()}, beyond --fallback-budget {self.budget:g} s; their instant "
                    "answers are reported UNTRUSTED (no p-value where there is none)"]
        from .results import group_causes

        out = []
        for what, has in (("instant test not trusted", True), ("no instant test", False)):
            items = [(chosen[i].name, why) for i, (r, why) in untrusted.items()
                     if (r is not None) == has]
            out += [f"{what} for {', '.join(names)}: {cause}"
                    for cause, names in group_causes(items)]
        if untrusted:
            out.append("Monte Carlo used instead for "
                       + ", ".join(chosen[i].name for i in untrusted))
        return out


def fallback_seconds(window, n, stats, seeds, jobs, engine, model, budget):
    """Estimate the time of a Monte Carlo fallback before running it.

    Parameters
    ----------
    window : Window
    n : int
    stats : list of Statistic
        The statistics to simulate.
    seeds : list of SeedSequence
        One per replicate.
    jobs : int
        Worker processes.
    engine : str
    model : tuple or None
        A null model of ``lookup.processes.registry`` (None: CSR).
    budget : float or None
        Seconds allowed; when the per-point lower bound of ``lookup.limits``
        already exceeds it, nothing is simulated.

    Returns
    -------
    (seconds, lower_bound, first)
        The estimate, whether it is only the lower bound, and the first
        replicate's statistics (timed to make the estimate; None with the
        lower bound).
    """
    workers = max(1, min(int(jobs), len(seeds)))
    lower = len(seeds) * pattern_seconds(n, window.dim) / workers
    if budget is not None and lower > budget:
        return lower, True, None
    t = time.perf_counter()
    first = montecarlo._chunk(window, n, stats, seeds[:1], engine, model)
    return (time.perf_counter() - t) * len(seeds) / workers, False, first


def plan_fallback(window, n, stats, seeds, jobs, engine, model, budget, notify=None):
    """Decide whether the Monte Carlo fallback of ``method="auto"`` runs.

    It runs unless its estimate (:func:`fallback_seconds`) exceeds
    ``budget`` seconds (None: no budget, it always runs).  A run estimated
    beyond ``FALLBACK_NOTE_SECONDS`` is announced through ``notify`` first.

    Returns
    -------
    FallbackPlan
    """
    seconds, lower, first = fallback_seconds(window, n, stats, seeds, jobs, engine, model, budget)
    workers = max(1, min(int(jobs), len(seeds)))
    plan = FallbackPlan(seconds=float(seconds), lower_bound=lower, first=first,
                        skip=budget is not None and seconds > budget, budget=budget,
                        sims=len(seeds), workers=workers)
    if notify is not None and not plan.skip and seconds > FALLBACK_NOTE_SECONDS:
        notify(f"the instant test of {', '.join(s.name for s in stats)} is not trusted: Monte "
               f"Carlo fallback of {plan.sims} simulations, {plan.words()} on {workers} "
               "worker(s); --fallback-budget SECONDS caps it (the instant answers are then "
               "kept, flagged UNTRUSTED), --jobs shortens it")
    return plan


def _keep_instant(results, chosen, untrusted, plan):
    """The fallback was not run: the untrusted instant answers stay, flagged,
    with the reason; statistics without one get no p-value."""
    why_not = (f"Monte Carlo fallback not run: {plan.sims} simulations, {plan.words()}, beyond "
               f"--fallback-budget {plan.budget:g} s")
    for i, (r, why) in untrusted.items():
        if r is None:
            r = montecarlo.untested_result(chosen[i], why, i == 0)
            r.reason = "; ".join(why)
        r.trusted = False
        r.reason = f"{r.reason}; {why_not}" if r.reason else why_not
        results[i] = r


def _simulate(window, n, stats, seeds, first, jobs, progress, engine, model):
    """The null statistics of every replicate; ``first`` (replicate 0, already
    simulated to time the fallback) is not simulated again."""
    rest = seeds if first is None else seeds[1:]
    sims = montecarlo.simulate_null(window, n, stats, rest, jobs=jobs, progress=progress,
                                    engine=engine, model=model) if rest else None
    if first is None:
        return sims
    if sims is None:
        return first
    return {k: np.concatenate([first[k], sims[k]]) for k in first}


def check_budget(budget) -> None:
    """Raise OptionError unless ``budget`` is None or a finite number of seconds >= 0."""
    if budget is not None and not (isinstance(budget, (int, float, np.number))
                                   and 0 <= float(budget) < float("inf")):
        raise OptionError(f"--fallback-budget must be a finite number of seconds >= 0, got {budget}")


def csr_test(points, window, stats=None, *, method="auto", n_sims=999, seed=None, jobs=1,
             alternative="two-sided", on_duplicates="error", alpha=0.05, columns=None,
             progress=None, engine="fast", tables=None, use_shipped=True,
             null="csr", fallback_budget=None, notify=None,
             curve_test="maxabs") -> CSRTestResult:
    """Test a point pattern for complete spatial randomness.

    Parameters
    ----------
    points : ndarray of shape (n, d), DataFrame or path
        Coordinates, a pandas DataFrame (``columns`` picks the coordinates),
        or a file readable by :func:`read_points`.
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
        Coordinate columns when ``points`` is a file or a pandas DataFrame.
    progress : bool or None
        Progress bar of the Monte Carlo simulations.  None (default): in a
        Jupyter notebook (tqdm's notebook bar where ipywidgets is installed,
        else its text bar) or when standard error is a terminal; True:
        always; False: never.
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
    fallback_budget : float, optional
        With ``method="auto"``: the longest the Monte Carlo fallback for the
        untrusted statistics may take, in seconds, estimated before it
        starts (one timed simulation, or already the per-point lower bound).
        Beyond it the fallback is not run: those statistics keep their
        instant answer, ``trusted=False``, with the estimate in ``reason``
        (no p-value where there is no instant answer).  Default None: no
        budget, the fallback always runs (never a silently untrusted answer).
        0 never runs it.
    notify : callable(str), optional
        Told before a fallback estimated at more than a minute starts (the
        command line prints it on standard error).
    curve_test : {"maxabs", "erl"}
        The global test of a curve.  ``"maxabs"`` (default): the studentised
        maximum max_k |z_k| over the usable grid points, the same test on
        both routes (the instant route standardises by the table's moments
        and refers to their Gaussian limit; the Monte Carlo route
        standardises by the simulations' moments and ranks the observed
        maximum among theirs, ``lookup.inference.ranks.maxabs_test``), so
        the two routes answer the same question.  ``"erl"``: the extreme
        rank length envelope test, Monte Carlo only (a different test; with
        ``method="auto"`` the curves are simulated).

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
    _check_options(method, n_sims, jobs, alternative, alpha, engine, curve_test)
    check_budget(fallback_budget)
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
    untrusted = {}          # auto: index -> (untrusted instant answer or None, reasons)
    usable = {}             # curve -> the table's usable grid points, for the Monte Carlo route
    if method in ("auto", "asymptotic") or (model[0] == "csr" and curve_test == "maxabs"
                                            and any(st.is_curve for st in chosen)):
        from .inference.asymptotic import asymptotic_result, instant_moments
        from .inference.nullmoments import TableSet, default_tables

        if tables:
            from .inference.tablereader import open_table
            for tp in tables:              # a table given explicitly must fit the data
                open_table(tp, dimension=pts.shape[1])
        tset = TableSet(tables or (), use_shipped) if (tables or not use_shipped) \
            else default_tables()
        for i, st in enumerate(chosen):
            if method == "mc" and not st.is_curve:
                continue
            alt, note = montecarlo._alternative_for(st, alternative)
            nm, ok, why = instant_moments(tset, window, n, st, alt, report.n_duplicates,
                                          n_input=report.n_input)
            if st.is_curve and nm is not None and nm.usable is not None:
                usable[st.name] = np.asarray(nm.usable, bool)
            if method == "mc":
                continue
            if st.is_curve and curve_test == "erl":        # auto: the envelope is simulated
                untrusted[i] = (None, ["the rank envelope curve test needs simulations"])
                continue
            if nm is None:
                if method == "auto":
                    untrusted[i] = (None, why)
                else:
                    results[i] = montecarlo.untested_result(st, why, i == 0)
                continue
            r = asymptotic_result(st, observed[st.name], nm, alt, n, ok, why, primary=(i == 0),
                                  note=note, asked=alternative)
            results[i] = r if (ok or method == "asymptotic") else None
            if not ok and method == "auto":
                untrusted[i] = (r, why)
    todo = [i for i, r in enumerate(results) if r is None]
    if todo:
        seeds = replicate_seeds(sim_seed, int(n_sims))
        stats_todo = [chosen[i] for i in todo]
        mdl = None if model[0] == "csr" else model
        first = None
        if untrusted:                 # auto: the Monte Carlo fallback, if affordable
            plan = plan_fallback(window, n, stats_todo, seeds, int(jobs), engine, mdl,
                                 fallback_budget, notify)
            caught.extend(plan.messages(chosen, untrusted))
            if plan.skip:
                _keep_instant(results, chosen, untrusted, plan)
                todo = []
            first = plan.first
    if todo:
        sims = _simulate(window, n, stats_todo, seeds, first, int(jobs), progress, engine, mdl)
        mc = montecarlo.mc_results(observed, sims, stats_todo, alternative=alternative, alpha=alpha,
                                   curve_test=curve_test, usable=usable, n=n)
        for i, r in zip(todo, mc):
            results[i] = r
            r.primary = (i == 0)
    if report.n_duplicates:
        caught.append(f"{report.n_duplicates} duplicate point(s) were handled by '{on_duplicates}'")
    diag = summary.diagram if any(s.needs_diagram for s in chosen) else None
    return CSRTestResult(results=results, n=n, dimension=pts.shape[1], window=window.describe(),
                         seed=int(seed), validation=report.as_dict(), diagram=diag,
                         warnings=caught, elapsed_s=time.perf_counter() - t0, engine=engine,
                         method=method, null=describe(*model))
