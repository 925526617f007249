"""Point-process models with parameters in normalised units, conditioned on n.

A model specification ``NAME[:key=value,...]`` names a process of
``lookup.processes.alternatives`` (or ``lookup.processes.csr``) whose lengths
are multiples of the pattern's mean spacing unit (|W| / n)^(1/d), so that it
means the same at any n and window size:

* ``csr`` — complete spatial randomness (the default null);
* ``thomas:parents=0.05,sigma=0.25`` — Thomas clusters, parents per point
  and Gaussian spread;
* ``matern:parents=0.05,radius=0.5`` — Matérn clusters;
* ``hardcore:r=0.4`` — Matérn II hard core (proposal intensity solved so
  that about 1.3 n points are retained, which needs r below about 0.49);
* ``strauss:gamma=0.2,r=0.7`` — Strauss inhibition (birth–death MH);
* ``lattice:jitter=0.5`` — jittered triangular/cubic lattice;
* ``voids:fraction=0.3,radius=3`` — Poisson points outside random balls
  covering that fraction of the window;
* ``inhom:EXPR`` — inhomogeneous Poisson with intensity proportional to an
  expression in x, y (z).

:func:`simulate` draws exactly n points: the process is simulated with some
excess and thinned at random to n (retrying with more points if it fell
short), which conditions it on the count as the tests do.  These models are
the alternatives of ``nullatlas-calibrate power`` and the nulls that
``nullatlas test --null`` can simulate on the Monte Carlo route.
"""
from __future__ import annotations

import math
import re

import numpy as np

from ..errors import OptionError
from . import alternatives as alt
from .csr import csr
from .modelspec import FAMILIES, RANGES, SUMMARIES, alternatives, models_help

__all__ = ["FAMILIES", "RANGES", "SUMMARIES", "alternatives", "models_help", "parse_model",
           "simulate", "describe"]

# the model table lives in the numpy-free modelspec (for fast --help texts)

_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")


def parse_model(spec: str) -> tuple[str, dict]:
    """``NAME[:key=value,...]`` -> (name, parameters with defaults)."""
    name, _, rest = spec.partition(":")
    name = name.strip().lower()
    if name not in FAMILIES:
        raise OptionError(f"unknown model '{name}'; choose from {', '.join(FAMILIES)}")
    if name == "inhom":
        if not rest.strip():
            raise OptionError("inhom needs an intensity expression, e.g. inhom:exp(-x/50)")
        return name, {"expr": rest.strip()}
    params = dict(FAMILIES[name])
    for item in filter(None, (t.strip() for t in rest.split(","))):
        k, eq, v = item.partition("=")
        if not eq or k.strip() not in params:
            raise OptionError(f"model {name}: unknown parameter '{item}' "
                              f"(parameters: {', '.join(params)})")
        key = k.strip()
        if not _NUMBER.match(v.strip()):
            raise OptionError(f"model {name}: {key} = '{v.strip()}' is not a finite number")
        val = float(v)
        lo, hi, lo_in, hi_in = RANGES.get(key, (0.0, math.inf, True, True))
        if not ((val > lo or (lo_in and val == lo)) and (val < hi or (hi_in and val == hi))):
            raise OptionError(f"model {name}: {key} = {v.strip()} is outside "
                              f"{'[' if lo_in else '('}{lo:g}, {hi:g}{']' if hi_in else ')'}")
        params[key] = val
    return name, params


def _raw(window, name, p, n, rng, unit_n=None):
    """About 1.3 n points of the process; lengths in units of (|W| / unit_n)^(1/d)."""
    d = window.dim
    lam = n / window.measure
    unit = (window.measure / (unit_n or n)) ** (1.0 / d)
    if name == "thomas":
        return alt.thomas(window, p["parents"] * lam, 1.3 / p["parents"], p["sigma"] * unit, rng)
    if name == "matern":
        return alt.matern_cluster(window, p["parents"] * lam, 1.3 / p["parents"],
                                  p["radius"] * unit, rng)
    if name == "hardcore":
        r = p["r"] * unit
        v = alt.ball_volume(r, d)
        target = 1.3 * lam
        if target * v >= 0.99 and n * v / window.measure < 0.76:
            target = 0.99 / v          # as dense as Matérn II gets
        if target * v >= 0.99:
            raise OptionError(f"hardcore: r = {p['r']} is too large for a Matérn II pattern of "
                              "this intensity (needs lambda v < 1)")
        return alt.matern_hardcore(window, -math.log(1 - target * v) / v, r, rng)
    if name == "strauss":
        return alt.strauss(window, 1.5 * lam, p["gamma"], p["r"] * unit, rng)
    if name == "lattice":
        return alt.perturbed_lattice(window, int(1.3 * n) + 1, p["jitter"], rng)
    if name == "voids":
        if not 0 <= p["fraction"] < 0.95:
            raise OptionError("voids: fraction must lie in [0, 0.95)")
        R = p["radius"] * unit
        hole = -math.log(1 - p["fraction"]) / alt.ball_volume(R, d)
        return alt.voids(window, 1.3 * lam / (1 - p["fraction"]), hole, R, rng)
    f = alt.intensity_function(p["expr"], d)
    probe = f(window.sample(20_000, rng))
    top = float(np.max(probe))
    if not top > 0 or np.any(probe < 0):
        raise OptionError(f"inhom: the intensity '{p['expr']}' must be positive in the window")
    scale = 1.3 * n / (float(np.mean(probe)) * window.measure)
    return alt.inhomogeneous_poisson(window, lambda x: scale * f(x), 1.05 * scale * top, rng)


def simulate(window, name: str, params: dict, k: int, rng, n: int | None = None) -> np.ndarray:
    """Exactly k points of the model (thinned at random); lengths in units of
    the whole pattern's (|W| / n)^(1/d) (n defaults to k)."""
    if k == 0:
        return np.zeros((0, window.dim))
    if name == "csr":
        return csr(window, k, rng)
    for t in range(6):
        # ask for more points on every retry (inhibition lowers the count)
        x = _raw(window, name, params, int(math.ceil(k * 1.5 ** t)), rng, unit_n=n or k)
        if len(x) >= k:
            return x[rng.choice(len(x), k, replace=False)]
    raise OptionError(f"model {name} gave fewer than {k} points in six tries; "
                      "change its parameters")




def describe(name: str, params: dict) -> str:
    """The specification string of a model."""
    if name == "inhom":
        return f"inhom:{params['expr']}"
    if not params:
        return name
    return name + ":" + ",".join(f"{k}={v:g}" for k, v in params.items())
