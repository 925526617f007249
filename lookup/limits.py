"""Requests that cannot finish: the caps, the cost estimates, one refusal helper.

Every command that takes a count of simulations, replicates or points checks
it with :func:`refuse_beyond` before any work starts, so that an absurd value
(a typo of a few zeros) ends in one line that says roughly how much time or
memory it would need, instead of a run that never ends or a machine that
runs out of memory hours later.

The per-point costs are lower bounds of one simulated pattern with the
calibration statistics (CSR points, exact alpha filtration, every summary),
measured with ``python scripts/cost_per_point.py``; the estimates built on
them say "at least".
"""
from __future__ import annotations

from .errors import OptionError

__all__ = ["MAX_SIMS", "MAX_REPS", "MAX_N", "MAX_POINTS_TOTAL", "duration", "size",
           "pattern_seconds", "pattern_bytes", "refuse_beyond"]

#: Largest number of null simulations of one test (about 3 h at a millisecond
#: each on one core; the rank p-value's resolution 1/(m+1) is then 1e-7).
MAX_SIMS = 10_000_000
#: Largest number of replicates per calibration cell (the same reasoning).
MAX_REPS = MAX_SIMS
#: Largest number of points of one simulated calibration pattern.
MAX_N = 10_000_000
#: Largest number of points simulated by one calibration run (replicates
#: times the sum of n over the cells): at least 3 years of one core.
MAX_POINTS_TOTAL = 10 ** 14

#: Lower bounds of the time (seconds) and memory (bytes) per point of one
#: simulated pattern, per dimension (``scripts/cost_per_point.py``).
SECONDS_PER_POINT = {2: 1e-6, 3: 1e-5}
BYTES_PER_POINT = {2: 300, 3: 3000}
#: Lower bound of the time of one pattern, however small.
SECONDS_PER_PATTERN = 1e-4

_YEAR = 365.25 * 86400


def duration(seconds: float) -> str:
    """A duration in words a person can judge at a glance.

    Parameters
    ----------
    seconds : float

    Returns
    -------
    str
        Seconds, minutes, hours, days or years, with 2-3 significant digits.

    Examples
    --------
    >>> from nullatlas.lookup.limits import duration
    >>> duration(0.4), duration(42), duration(5400), duration(3 * 86400), duration(1e11)
    ('0.4 s', '42 s', '90 min', '3.0 days', '3.17e+03 years')
    """
    s = float(seconds)
    if s < 10:
        return f"{s:.2g} s"
    if s < 120:
        return f"{s:.0f} s"
    if s < 2 * 3600:
        return f"{s / 60:.0f} min"
    if s < 2 * 86400:
        return f"{s / 3600:.1f} h"
    if s < _YEAR:
        return f"{s / 86400:.1f} days"
    return f"{s / _YEAR:.3g} years"


def size(nbytes: float) -> str:
    """A number of bytes in decimal units (kB, MB, GB, TB, PB).

    Examples
    --------
    >>> from nullatlas.lookup.limits import size
    >>> size(3e10), size(512)
    ('30 GB', '512 B')
    """
    x = float(nbytes)
    for unit in ("B", "kB", "MB", "GB", "TB"):
        if x < 1000:
            return f"{x:.3g} {unit}"
        x /= 1000
    return f"{x:.3g} PB"


def pattern_seconds(n: int, dim: int) -> float:
    """Lower bound of the time of one simulated pattern of ``n`` points."""
    return max(SECONDS_PER_PATTERN, float(n) * SECONDS_PER_POINT.get(dim, SECONDS_PER_POINT[3]))


def pattern_bytes(n: int, dim: int) -> float:
    """Rough memory of one simulated pattern of ``n`` points."""
    return float(n) * BYTES_PER_POINT.get(dim, BYTES_PER_POINT[3])


def refuse_beyond(what: str, value: int, cap: int, need: str, advice: str = "") -> None:
    """Refuse ``value`` above ``cap`` before any work, in one line.

    Parameters
    ----------
    what : str
        The option as the user typed it (e.g. ``"--sims"``).
    value, cap : int
    need : str
        What the request would take (from :func:`duration`, :func:`size`).
    advice : str
        Appended to the line (e.g. the usual choices).

    Raises
    ------
    OptionError
        ``"{what} {value} cannot finish: {need}; use at most {cap}{advice}"``.

    Examples
    --------
    >>> from nullatlas.lookup.limits import refuse_beyond
    >>> refuse_beyond("--reps", 10 ** 12, 10 ** 7, "at least 32 years")
    Traceback (most recent call last):
    ...
    nullatlas.lookup.errors.OptionError: --reps 1,000,000,000,000 cannot finish: at least 32 years; ...
    """
    if value > cap:
        raise OptionError(f"{what} {value:,} cannot finish: {need}; use at most {cap:,}{advice}")
