"""The instant test of a pattern whose summaries were computed tile by tile.

The observed values come from :func:`~nullatlas.lookup.tiled.run.tiled_statistics`
(equal to one process's); the null moments and the trust verdict are those of
``csr_test(method="asymptotic")``.  No Monte Carlo fallback is run at this
size: an answer that is not trusted is reported with its reason.
"""
from __future__ import annotations

import time

from ..errors import OptionError

__all__ = ["tiled_csr_test"]


def tiled_csr_test(source, window, stats=None, *, tile_points=None, jobs=1, scheduler=None,
                   progress=None, tables=None, use_shipped=True, alternative="two-sided",
                   seed=None, columns=None, workdir=None):
    """Test one large 2D pattern for CSR with summaries computed tile by tile.

    Parameters
    ----------
    source : str, ndarray or PointSource
        See :func:`~nullatlas.lookup.tiled.run.tiled_statistics`.
    window : Window or str
    stats : list of str, optional
        Default ``euler, total0, nnmean`` (the tiled statistics).
    tile_points, jobs, scheduler, progress, workdir, columns
        As for :func:`~nullatlas.lookup.tiled.run.tiled_statistics`.
    tables, use_shipped, alternative
        As for :func:`~nullatlas.lookup.csr_test`.
    seed : int, optional
        Reported only (the instant test draws nothing that depends on it).

    Returns
    -------
    CSRTestResult
        ``method`` is ``"asymptotic"``; ``validation`` holds the tiling facts.
    """
    from ..csrtest import ALTERNATIVES
    from ..inference.asymptotic import asymptotic_result, instant_moments
    from ..inference.montecarlo import _alternative_for, untested_result
    from ..inference.nullmoments import TableSet, default_tables
    from ..patterns.windows import Window, as_window
    from ..results import CSRTestResult
    from ..summaries.statistics import resolve_stats
    from .run import TILE_POINTS, tiled_statistics

    t0 = time.perf_counter()
    if alternative not in ALTERNATIVES:
        raise OptionError(f"alternative must be one of {', '.join(ALTERNATIVES)}, got "
                          f"'{alternative}'")
    if not isinstance(window, Window):
        window = as_window(window, None)
    names = stats or ["euler", "total0", "nnmean"]
    values, info = tiled_statistics(source, window, names, tile_points or TILE_POINTS, jobs,
                                    scheduler, progress, workdir, columns)
    chosen = resolve_stats(names, 2)
    n = int(info["n"])
    tset = TableSet(tables or (), use_shipped) if (tables or not use_shipped) else default_tables()
    results = []
    for i, st in enumerate(chosen):
        tail, note = _alternative_for(st, alternative)
        nm, ok, why = instant_moments(tset, window, n, st, tail)
        if nm is None:
            results.append(untested_result(st, why, i == 0))
            continue
        if not ok:
            why = why + ["no Monte Carlo fallback for a tiled pattern (each simulation would be "
                         f"another pattern of {n:,} points)"]
        results.append(asymptotic_result(st, values[st.name], nm, tail, n, ok, why,
                                         primary=(i == 0), note=note, asked=alternative))
    return CSRTestResult(results=results, n=n, dimension=2, window=window.describe(),
                         seed=seed, validation={"n_input": n, "tiling": info}, diagram=None,
                         warnings=[], elapsed_s=time.perf_counter() - t0, engine="tiled",
                         method="asymptotic", null="csr")
