"""The named point-process models: parameters, defaults, ranges, one-line descriptions.

Pure Python (no numpy), so that ``--help`` texts can be made from it without
loading the simulators; ``registry.py`` re-exports these names and is the
one place that parses and simulates the models.
"""
from __future__ import annotations

__all__ = ["FAMILIES", "RANGES", "SUMMARIES", "alternatives", "models_help"]

#: Every model and its parameters with their defaults (lengths in mean spacings).
FAMILIES = {
    "csr": {},
    "thomas": {"parents": 0.05, "sigma": 0.25},
    "matern": {"parents": 0.05, "radius": 0.5},
    "hardcore": {"r": 0.4},
    "strauss": {"gamma": 0.2, "r": 0.7},
    "lattice": {"jitter": 0.5},
    "voids": {"fraction": 0.3, "radius": 3.0},
    "inhom": {},
}

#: Accepted range (low, high, low inclusive, high inclusive) of every
#: parameter, in the normalised units of the model (lengths in mean
#: spacings; ``parents`` per point): a simulation outside them is empty,
#: degenerate or too large to make (a judgement, stated in --help).
RANGES = {
    "parents": (0.0, 1.0, False, True), "sigma": (0.0, 1000.0, False, True),
    "radius": (0.0, 1000.0, False, True), "r": (0.0, 10.0, False, True),
    "gamma": (0.0, 1.0, True, True), "jitter": (0.0, 100.0, True, True),
    "fraction": (0.0, 0.95, True, False),
}

#: What each model is, in a few words.
SUMMARIES = {
    "csr": "complete spatial randomness",
    "thomas": "Thomas clusters (parents per point, Gaussian spread sigma)",
    "matern": "Matern clusters (parents per point, cluster radius)",
    "hardcore": "Matern II hard core (no two points closer than r)",
    "strauss": "Strauss inhibition (pairs closer than r weighted by gamma)",
    "lattice": "jittered triangular/cubic lattice",
    "voids": "Poisson points outside random balls of that radius covering that fraction",
    "inhom": "inhomogeneous Poisson, intensity proportional to EXPR in x, y (z)",
}


def alternatives() -> list:
    """The models that can be alternatives to CSR (all but ``csr`` itself).

    Returns
    -------
    list of str
    """
    return [name for name in FAMILIES if name != "csr"]


def _range_text(key: str) -> str:
    lo, hi, lo_in, hi_in = RANGES[key]
    return f"{'[' if lo_in else '('}{lo:g}, {hi:g}{']' if hi_in else ')'}"


def _model_text(name: str) -> str:
    """``thomas:parents=0.05,sigma=0.25, Thomas clusters (...), parents in (0, 1], ...``."""
    params = FAMILIES[name]
    if name == "inhom":
        return f"inhom:EXPR, {SUMMARIES[name]}"
    if not params:
        return f"{name}, {SUMMARIES[name]}"
    spec = ",".join(f"{k}={v:g}" for k, v in params.items())
    ranges = ", ".join(f"{k} in {_range_text(k)}" for k in params)
    return f"{name}:{spec}, {SUMMARIES[name]}, {ranges}"


def models_help(names=None) -> str:
    """One help sentence listing models with their default parameters and ranges.

    Parameters
    ----------
    names : list of str, optional
        Models to list (default: :func:`alternatives`).

    Returns
    -------
    str
        For ``--help``: each model as ``NAME:key=default,...`` with what it is
        and the accepted range of each parameter.

    Examples
    --------
    >>> from nullatlas.lookup.processes.modelspec import models_help
    >>> models_help(["lattice"])
    'lattice:jitter=0.5, jittered triangular/cubic lattice, jitter in [0, 100]'
    """
    return "; ".join(_model_text(n) for n in (alternatives() if names is None else names))
