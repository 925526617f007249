"""Alternative point processes (clustered, regular, inhomogeneous) in any window.

All simulators take a window (2D or 3D), their parameters and a numpy
Generator, are vectorised (or compiled), and return the points inside the
window.  They serve as alternatives in power studies and as nulls of the
Monte Carlo route.

* Thomas cluster process (Thomas 1949; Diggle 2013): Poisson parents of
  intensity ``kappa`` and a Poisson(``mu``) number of offspring per parent,
  displaced by N(0, sigma^2 I); parents are simulated in the window's
  bounding box dilated by 4 sigma so that clusters centred outside W still
  contribute.  K(r) = pi r^2 + (1 - exp(-r^2 / (4 sigma^2))) / kappa in 2D.
* Matérn cluster process (Matérn 1960; Illian, Penttinen, Stoyan & Stoyan,
  *Statistical Analysis and Modelling of Spatial Point Patterns*, 2008):
  Poisson parents of intensity kappa, Poisson(mu) offspring uniform in the
  ball of radius R around each parent.  Parents live in the window's
  bounding box dilated by R, so that clusters centred outside W contribute.
* Matérn hard-core process of type II (Illian et al. 2008): a Poisson
  process of proposals with intensity lambda_p and uniform marks; a
  proposal is kept if no other proposal within distance r has a smaller
  mark.  Proposals are simulated in the bounding box dilated by r (edge
  handling).  Retained intensity lambda_p (1 - exp(-lambda_p v)) /
  (lambda_p v), v the volume of the ball of radius r.
* Strauss process (Strauss 1975; Kelly & Ripley 1976): density proportional
  to beta^n gamma^s(x), s the number of pairs closer than r; simulated by a
  birth–death Metropolis–Hastings chain (Geyer & Møller, Scand. J. Statist.
  21, 1994) started from a binomial pattern, ``steps`` proposals (default
  200 per expected point); gamma = 1 is a Poisson process.
* Perturbed lattice (a regular alternative): a triangular (2D) or cubic
  (3D) lattice of the window's intensity, randomly shifted, each site moved
  by a uniform offset of relative size ``jitter``.
* Poisson points with Poisson voids ("Swiss cheese"): a Poisson process of
  intensity lambda restricted to the complement of a Boolean model of balls
  of radius R whose centres have intensity lambda_h (centres in the window
  dilated by R); the vacant fraction is exp(-lambda_h v) (Chiu, Stoyan,
  Kendall & Mecke 2013), v the ball volume.  Holes make long-lived H1/H2
  features.
* Inhomogeneous Poisson process with intensity lambda(x) <= lambda_max:
  thinning of a homogeneous process of intensity lambda_max (Lewis & Shedler
  1979).  From the command line the intensity is an arithmetic expression in
  x, y (and z), evaluated by :func:`intensity_function` without ``eval``.
"""
from __future__ import annotations

import ast
import math
import operator

import numpy as np

from ..errors import OptionError
from ..persistence.jit import njit
from .csr import _bounds

__all__ = ["matern_cluster", "matern_hardcore", "strauss", "inhomogeneous_poisson", "voids",
           "intensity_function", "ball_volume", "thomas", "perturbed_lattice"]


def ball_volume(r: float, d: int) -> float:
    """Volume of the d-ball of radius r (d = 2: area)."""
    return math.pi * r * r if d == 2 else 4.0 / 3.0 * math.pi * r ** 3


def _uniform_ball(k: int, d: int, rng) -> np.ndarray:
    g = rng.standard_normal((k, d))
    g /= np.linalg.norm(g, axis=1, keepdims=True)
    return g * rng.random((k, 1)) ** (1.0 / d)


def thomas(window, kappa: float, mu: float, sigma: float, rng: np.random.Generator) -> np.ndarray:
    """A Thomas cluster process observed in ``window``.

    Parameters
    ----------
    kappa : float
        Parent intensity (parents per unit area/volume).
    mu : float
        Mean number of offspring per parent.
    sigma : float
        Standard deviation of the Gaussian displacement, per coordinate.
    """
    if kappa <= 0 or mu <= 0 or sigma <= 0:
        raise OptionError("Thomas process needs positive kappa, mu and sigma")
    lo, hi = _bounds(window)
    lo, hi = lo - 4 * sigma, hi + 4 * sigma
    vol = float(np.prod(hi - lo))
    npar = rng.poisson(kappa * vol)
    parents = lo + (hi - lo) * rng.random((npar, window.dim))
    counts = rng.poisson(mu, npar)
    kids = np.repeat(parents, counts, axis=0) + sigma * rng.standard_normal((counts.sum(), window.dim))
    return kids[window.contains(kids)] if len(kids) else kids


def perturbed_lattice(window, n_target: int, jitter: float, rng: np.random.Generator) -> np.ndarray:
    """A randomly shifted, jittered lattice of about ``n_target`` points in W."""
    d = window.dim
    lam = n_target / window.measure
    lo, hi = _bounds(window)
    if d == 2:
        a = np.sqrt(2.0 / (np.sqrt(3.0) * lam))  # triangular lattice spacing
        basis = np.array([[a, 0.0], [a / 2, a * np.sqrt(3) / 2]])
    else:
        a = lam ** (-1.0 / 3.0)
        basis = np.eye(3) * a
    span = (hi - lo).max() * 2
    k = int(np.ceil(span / a)) + 2
    idx = np.stack(np.meshgrid(*[np.arange(-k, k + 1)] * d, indexing="ij"), -1).reshape(-1, d)
    pts = idx @ basis + (lo + hi) / 2 + rng.random(d) @ basis
    pts = pts + jitter * a * (rng.random(pts.shape) - 0.5)
    return pts[window.contains(pts)]


def matern_cluster(window, kappa: float, mu: float, radius: float, rng) -> np.ndarray:
    """Matérn cluster process in ``window`` (see module doc)."""
    if kappa <= 0 or mu <= 0 or radius <= 0:
        raise OptionError("the Matérn cluster process needs positive kappa, mu and radius")
    lo, hi = _bounds(window)
    lo, hi = lo - radius, hi + radius
    npar = rng.poisson(kappa * float(np.prod(hi - lo)))
    parents = lo + (hi - lo) * rng.random((npar, window.dim))
    counts = rng.poisson(mu, npar)
    kids = np.repeat(parents, counts, axis=0) + radius * _uniform_ball(int(counts.sum()),
                                                                       window.dim, rng)
    return kids[window.contains(kids)] if len(kids) else kids


def matern_hardcore(window, lambda_p: float, r: float, rng) -> np.ndarray:
    """Matérn hard-core process of type II in ``window`` (see module doc)."""
    from scipy.spatial import cKDTree

    if lambda_p <= 0 or r <= 0:
        raise OptionError("the Matérn hard-core process needs positive lambda_p and r")
    lo, hi = _bounds(window)
    lo, hi = lo - r, hi + r
    m = rng.poisson(lambda_p * float(np.prod(hi - lo)))
    prop = lo + (hi - lo) * rng.random((m, window.dim))
    marks = rng.random(m)
    keep = np.ones(m, bool)
    if m > 1:
        pairs = cKDTree(prop).query_pairs(r, output_type="ndarray")
        if len(pairs):
            i, j = pairs[:, 0], pairs[:, 1]
            loser = np.where(marks[i] > marks[j], i, j)   # the later mark loses
            keep[loser] = False
    pts = prop[keep]
    return pts[window.contains(pts)]


@njit(cache=True)
def _close_count(x, n, p, skip, r2):  # pragma: no cover - compiled
    """Number of the first n points of x (but index ``skip``) closer than
    sqrt(r2) to p."""
    s = 0
    for k in range(n):
        if k == skip:
            continue
        dd = 0.0
        for a in range(x.shape[1]):
            diff = x[k, a] - p[a]
            dd += diff * diff
        if dd < r2:
            s += 1
    return s


@njit(cache=True)
def _strauss_chain(x0, n0, beta_vol, gamma, r2, steps, u_kind, u_acc, cand,
                   pick):  # pragma: no cover - compiled
    d = x0.shape[1]
    cap = x0.shape[0]
    x = x0.copy()
    n = n0
    for t in range(steps):
        if u_kind[t] < 0.5:
            # birth of a uniform point of the window
            if n >= cap:
                continue
            s = _close_count(x, n, cand[t], -1, r2)
            ratio = beta_vol * gamma ** s / (n + 1)
            if u_acc[t] < ratio:
                for a in range(d):
                    x[n, a] = cand[t, a]
                n += 1
        else:
            if n == 0:
                continue
            i = int(pick[t] * n)
            s = _close_count(x, n, x[i], i, r2)
            w = beta_vol * gamma ** s
            # removing a point that violates a hard core (gamma = 0) is always accepted
            if w == 0.0 or u_acc[t] < n / w:
                for a in range(d):
                    x[i, a] = x[n - 1, a]
                n -= 1
    return x[:n].copy()


def strauss(window, beta: float, gamma: float, r: float, rng, steps: int | None = None
            ) -> np.ndarray:
    """Strauss process in ``window`` by birth–death Metropolis–Hastings.

    Parameters
    ----------
    beta : float
        Intensity parameter (the Poisson intensity when gamma = 1).
    gamma : float
        Interaction, 0 <= gamma <= 1 (0: hard core, 1: Poisson).
    r : float
        Interaction distance.
    steps : int, optional
        Proposals of the chain; default 200 times the expected count beta |W|
        (at least 10,000).
    """
    if beta <= 0 or r <= 0 or not 0 <= gamma <= 1:
        raise OptionError("the Strauss process needs beta > 0, r > 0 and 0 <= gamma <= 1")
    vol = float(window.measure)
    steps = int(steps if steps is not None else max(10_000, 200 * beta * vol))
    if steps < 1:
        raise OptionError("the Strauss chain needs at least one step")
    d = window.dim
    n0 = int(rng.poisson(beta * vol))
    cap = max(16, int(4 * beta * vol + 50))
    x0 = np.zeros((cap, d))
    x0[:n0] = window.sample(n0, rng)
    # births are proposed uniformly in W: candidates drawn by the window's
    # own exact sampler
    cand = window.sample(steps, rng)
    return _strauss_chain(x0, n0, beta * vol, float(gamma), r * r, steps, rng.random(steps),
                          rng.random(steps), cand, rng.random(steps))


def voids(window, lam: float, hole_intensity: float, radius: float, rng) -> np.ndarray:
    """Poisson points outside Poisson balls (see module doc)."""
    from scipy.spatial import cKDTree

    if lam <= 0 or hole_intensity < 0 or radius <= 0:
        raise OptionError("voids need lam > 0, hole_intensity >= 0 and radius > 0")
    pts = window.sample(rng.poisson(lam * float(window.measure)), rng)
    lo, hi = _bounds(window)
    lo, hi = lo - radius, hi + radius
    h = rng.poisson(hole_intensity * float(np.prod(hi - lo)))
    if h == 0 or len(pts) == 0:
        return pts
    centres = lo + (hi - lo) * rng.random((h, window.dim))
    d, _ = cKDTree(centres).query(pts, k=1)
    return pts[d > radius]


def inhomogeneous_poisson(window, intensity, lambda_max: float, rng) -> np.ndarray:
    """Inhomogeneous Poisson process by thinning (see module doc).

    ``intensity``: a vectorised callable of an (m, d) array returning
    intensities in [0, lambda_max], or an expression string for
    :func:`intensity_function`."""
    if isinstance(intensity, str):
        intensity = intensity_function(intensity, window.dim)
    if not lambda_max > 0:
        raise OptionError("lambda_max must be positive")
    m = rng.poisson(lambda_max * float(window.measure))
    pts = window.sample(m, rng)
    lam = np.asarray(intensity(pts), float).reshape(-1)
    if lam.shape != (m,) or not np.all(np.isfinite(lam)):
        raise OptionError("the intensity function must return one finite value per point")
    if np.any(lam < 0) or np.any(lam > lambda_max * (1 + 1e-9)):
        raise OptionError(f"the intensity must lie in [0, lambda_max = {lambda_max:g}]")
    return pts[rng.random(m) * lambda_max < lam]


_BIN = {ast.Add: operator.add, ast.Sub: operator.sub, ast.Mult: operator.mul,
        ast.Div: operator.truediv, ast.Pow: operator.pow}
_FUN = {"exp": np.exp, "log": np.log, "sqrt": np.sqrt, "sin": np.sin, "cos": np.cos,
        "abs": np.abs, "tanh": np.tanh}


def intensity_function(expr: str, d: int):
    """A vectorised intensity from an arithmetic expression in x, y (z).

    Allowed: numbers, the coordinates, + - * / **, unary minus, and
    exp, log, sqrt, sin, cos, abs, tanh.  Anything else is an OptionError
    (the expression is parsed, never executed as code)."""
    try:
        tree = ast.parse(expr, mode="eval")
    except SyntaxError:
        raise OptionError(f"intensity '{expr}' is not an arithmetic expression") from None
    names = ("x", "y", "z")[:d]

    def ev(node, cols):
        if isinstance(node, ast.Expression):
            return ev(node.body, cols)
        if (isinstance(node, ast.Constant) and isinstance(node.value, (int, float))
                and not isinstance(node.value, bool)):
            return np.float64(node.value)        # numpy arithmetic: 1/0 is inf, not an error
        if isinstance(node, ast.Name) and node.id in names:
            return cols[names.index(node.id)]
        if isinstance(node, ast.BinOp) and type(node.op) in _BIN:
            return _BIN[type(node.op)](ev(node.left, cols), ev(node.right, cols))
        if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
            v = ev(node.operand, cols)
            return -v if isinstance(node.op, ast.USub) else v
        if (isinstance(node, ast.Call) and isinstance(node.func, ast.Name)
                and node.func.id in _FUN and len(node.args) == 1 and not node.keywords):
            return _FUN[node.func.id](ev(node.args[0], cols))
        raise OptionError(f"intensity '{expr}': only numbers, {', '.join(names)}, + - * / ** "
                          f"and {', '.join(_FUN)} are allowed")

    def run(cols):
        try:
            with np.errstate(all="ignore"):
                return ev(tree, cols)
        except OptionError:
            raise
        except (ArithmeticError, ValueError, TypeError) as exc:
            raise OptionError(f"intensity '{expr}' cannot be evaluated ({exc})") from None

    run([np.zeros(1)] * d)          # validate once

    def f(pts):
        p = np.asarray(pts, float)
        v = run([p[:, i] for i in range(d)])
        return np.broadcast_to(np.asarray(v, float), (len(p),)).copy()

    return f
