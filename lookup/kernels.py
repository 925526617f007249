"""Ahead-of-time compilation of the numeric kernels (``nullatlas compile``).

The mechanism -- lazy kernels, the extension module made by ``numba.pycc``,
the cache folder, the first-run line -- is :mod:`lookup.persistence.jit`;
this module holds what the build runs under the JIT to learn the argument
types to export (:func:`workload`): the instant route's computations on
small 2D, 3D and periodic patterns, every statistic, the window kinds of the
calibrated shapes.  It lives at the top of ``lookup/`` because it uses the
windows, the validation and the statistics, which the kernels' layer may
not import.
"""
from __future__ import annotations

from .persistence import jit

__all__ = ["workload", "build", "ensure_built"]


def workload() -> None:
    """Run the instant route's computations on small patterns (see module doc)."""
    import numpy as np

    from .patterns import windows
    from .patterns.periodic import PeriodicBox
    from .patterns.validate import validate_pattern
    from .summaries.statistics import STATISTICS, PatternSummary, evaluate, resolve_stats

    rng = np.random.default_rng(20260)
    wins = [windows.Rectangle(0, 0, 1, 1), windows.Disk(0, 0, 1),
            windows.Box(0, 0, 0, 1, 1, 1), windows.Ball(0, 0, 0, 1),
            PeriodicBox(0, 0, 1, 1), PeriodicBox(0, 0, 0, 1, 1, 1)]
    for w in wins:
        stats = resolve_stats([s for s in STATISTICS if w.dim in STATISTICS[s].dims], w.dim)
        for n in ((1000, 3000) if isinstance(w, PeriodicBox) else (60, 400)):
            pts, _ = validate_pattern(w.sample(n, rng), w)
            evaluate(PatternSummary(pts, w), stats)


def build(verbose: bool = False) -> dict:
    """Compile the kernels ahead of time for this installation (:func:`lookup.persistence.jit.build`).

    Parameters
    ----------
    verbose : bool
        Progress on standard error.

    Returns
    -------
    dict
        Where the build is and what it holds (``folder``, ``kernels``,
        ``signatures``, ``seconds``, ``rebuilt``, ``mode``).

    Raises
    ------
    CompileError
        No C compiler, or a cache folder that cannot be written.
    """
    return jit.build(workload, verbose)


def ensure_built() -> None:
    """At a command's first run: compile unless built, after one line on
    standard error (:func:`lookup.persistence.jit.ensure_built`)."""
    jit.ensure_built(workload)
