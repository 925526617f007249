"""The finite-window model of the null moments, fitted over the cells of a table.

For an additive summary S (a per-point density, S/n in DESIGN.md's
notation), at every grid point,

    E[S]      = mu + c * kappa * n^(-1/d) + e * n^(-2/d)
    n Var[S]  = the same form with its own coefficients,

kappa = |dW| / |W|^((d-1)/d) the window's shape factor (DESIGN.md, "The
calibration stage").  The boundary term c * kappa * n^(-1/d) is the
Miles/Donnelly edge effect; for the mean nearest-neighbour distance in 2D
Donnelly (1978) gives mu = 0.5 (Clark & Evans 1954) and c = 0.0514.

Fit: weighted least squares per grid point over the cells with n >= n_fit,
weights 1 / SE^2 where SE is the standard error of the cell mean
(sd / sqrt(R)) or, for n Var, of the sample variance under normality
(n Var * sqrt(2 / (R - 1)); an approximation, stated).  Stored: the
coefficients, their standard errors, chi-square and degrees of freedom per
grid point, and the standardised residuals per cell.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["design", "wls", "Fit", "fit_model", "predict", "holdout_errors",
           "holdout_sd_errors", "model_n_ok", "MODEL_TOL_SD"]

#: Largest model error in a held-out shape, in units of one pattern's null sd,
#: from which the model route is trusted: a bias of 0.1 sd moves the size of a
#: two-sided test at 0.05 by about 0.001 (to 0.0510).
MODEL_TOL_SD = 0.1


def design(n, kappa, d: int) -> np.ndarray:
    """Design matrix [1, kappa n^(-1/d), n^(-2/d)] (one row per cell)."""
    n = np.asarray(n, float)
    kappa = np.asarray(kappa, float)
    return np.column_stack([np.ones_like(n), kappa * n ** (-1.0 / d), n ** (-2.0 / d)])


def wls(X: np.ndarray, y: np.ndarray, se: np.ndarray):
    """Weighted least squares of every column of ``y`` (cells x k) on ``X``.

    Returns
    -------
    coef (k, p), coef_se (k, p), coef_cov (k, p, p), chi2 (k,), resid (cells, k)
        ``resid`` are the standardised residuals (y - X b) / se.
    """
    y = np.atleast_2d(np.asarray(y, float).T).T
    se = np.atleast_2d(np.asarray(se, float).T).T
    ncell, k = y.shape
    p = X.shape[1]
    coef = np.full((k, p), np.nan)
    cov = np.full((k, p, p), np.nan)
    chi2 = np.full(k, np.nan)
    resid = np.full((ncell, k), np.nan)
    for j in range(k):
        s = se[:, j]
        # cells where the value did not vary at all (e.g. no loops at that radius)
        # carry no usable weight
        ok = np.isfinite(y[:, j]) & np.isfinite(s) & (s > 1e-12 * (1.0 + np.abs(y[:, j])))
        if ok.sum() < p:
            continue
        Xw = X[ok] / s[ok, None]
        yw = y[ok, j] / s[ok]
        b, *_ = np.linalg.lstsq(Xw, yw, rcond=None)
        coef[j] = b
        cov[j] = np.linalg.pinv(Xw.T @ Xw)
        with np.errstate(divide="ignore", invalid="ignore"):
            r = (y[:, j] - X @ b) / s
        resid[:, j] = np.where(ok, r, np.nan)
        chi2[j] = float(np.sum(r[ok] ** 2))
    se_coef = np.sqrt(np.clip(np.diagonal(cov, axis1=1, axis2=2), 0, None))
    return coef, se_coef, cov, chi2, resid


@dataclass
class Fit:
    """Fitted finite-window model of one statistic (mean and n Var)."""

    dimension: int
    cells: list
    mean_coef: np.ndarray
    mean_se: np.ndarray
    mean_cov: np.ndarray
    mean_chi2: np.ndarray
    var_coef: np.ndarray
    var_se: np.ndarray
    var_cov: np.ndarray
    var_chi2: np.ndarray
    mean_resid: np.ndarray
    var_resid: np.ndarray
    n_fit: int
    excluded: list = field(default_factory=list)
    model: str = ""
    loso: dict = field(default_factory=dict)
    #: The published source of a limit held fixed in the fit ("" if fitted).
    limit_source: str = ""

    @property
    def dof(self) -> int:
        return len(self.cells) - self.mean_coef.shape[1]


def fit_model(cells: list[dict], d: int, n_fit: int = 200) -> Fit:
    """Fit one statistic's model.

    Parameters
    ----------
    cells : list of dict
        Each with ``name``, ``n``, ``kappa``, ``mean`` (k,), ``var`` (k,),
        ``count`` (replicates).
    d : int
    n_fit : int
        Cells with smaller n are left out (higher-order boundary terms).
    """
    use = [c for c in cells if c["n"] >= n_fit and c["count"] > 2]
    if len(use) < 4:
        raise ValueError(f"the model needs at least 4 cells with n >= {n_fit}, got {len(use)}")
    n = np.array([c["n"] for c in use], float)
    X = design(n, [c["kappa"] for c in use], d)
    R = np.array([c["count"] for c in use], float)
    mean = np.array([c["mean"] for c in use])
    var = np.array([c["var"] for c in use])
    sem = np.sqrt(var / R[:, None])
    nvar = n[:, None] * var
    nvar_se = nvar * np.sqrt(2.0 / (R[:, None] - 1.0))
    mc, ms, mcov, mchi, mres = wls(X, mean, sem)
    vc, vs, vcov, vchi, vres = wls(X, nvar, nvar_se)
    return Fit(d, [c["name"] for c in use], mc, ms, mcov, mchi, vc, vs, vcov, vchi, mres, vres,
               int(n_fit))


def predict(fit_coef: np.ndarray, fit_cov: np.ndarray, n, kappa, d: int):
    """Model value and its standard error at (n, kappa): arrays (k,)."""
    x = design([n], [kappa], d)[0]
    val = fit_coef @ x
    se = np.sqrt(np.clip(np.einsum("i,kij,j->k", x, fit_cov, x), 0, None))
    return val, se


def holdout_errors(fit: Fit, cells: list[dict], d: int) -> np.ndarray:
    """Prediction errors of held-out cells in standard errors:
    (mean - model) / sqrt(sem^2 + se_model^2), shape (cells, k)."""
    out = []
    for c in cells:
        val, se = predict(fit.mean_coef, fit.mean_cov, c["n"], c["kappa"], d)
        sem2 = np.asarray(c["var"], float) / c["count"]
        mean = np.asarray(c["mean"], float)
        with np.errstate(divide="ignore", invalid="ignore"):
            e = (mean - val) / np.sqrt(sem2 + se ** 2)
        # grid points where the held-out cell did not vary carry no information
        out.append(np.where(sem2 > 1e-24 * (1.0 + mean ** 2), e, np.nan))
    return np.array(out)


def holdout_sd_errors(fit: Fit, cells: list[dict], d: int) -> np.ndarray:
    """Prediction errors of held-out cells in units of one pattern's null sd:
    (mean - model) / sd, shape (cells, k) -- what a z-test feels.  Only at
    the grid points a test uses (``usable`` of a curve cell, when given)."""
    out = []
    for c in cells:
        val, _ = predict(fit.mean_coef, fit.mean_cov, c["n"], c["kappa"], d)
        sd = np.sqrt(np.asarray(c["var"], float))
        use = c.get("usable")
        ok = sd > 0 if use is None else (sd > 0) & np.asarray(use, bool)
        with np.errstate(divide="ignore", invalid="ignore"):
            out.append(np.where(ok, (np.asarray(c["mean"]) - val) / sd, np.nan))
    return np.array(out)


def model_n_ok(ns, err_sd: np.ndarray, tol: float = MODEL_TOL_SD) -> int:
    """Smallest held-out n from which every larger held-out cell has all its
    model errors within ``tol`` pattern sd (-1: none)."""
    order = np.argsort(ns)[::-1]
    best = -1
    for i in order:
        e = err_sd[i]
        e = e[np.isfinite(e)]
        if e.size and np.max(np.abs(e)) <= tol:
            best = int(ns[i])
        else:
            break
    return best


# --------------------------------------------------------------------------
# The geometric model: covariates from the window's inner parallel sets
# --------------------------------------------------------------------------

def cell_covariates(spec: str, n: int, depth=1.0) -> np.ndarray:
    """Covariates [1, B1, B2, B3] (``lookup.patterns.boundary``) of a table cell,
    from its window specification and n, at the band depth(s) ``depth``."""
    from nullatlas.lookup.patterns.boundary import covariates

    return covariates(_window_of(spec), int(n), depth)


#: Training cells with more than this share of the window within one mean
#: spacing of its boundary are not fitted: they have almost no interior, the
#: local model's expansion in boundary terms does not hold there (a long
#: thin cylinder at n = 100 is all boundary), and one such shape pulls the
#: fit for all the others.  Whether the model may be trusted there is for
#: the held-out validation to say, as everywhere.
TRAIN_SHARE_MAX = 0.8


def cell_boundary_share(spec: str, n: int) -> float:
    """Share of a cell's window within one mean spacing of its boundary
    (``lookup.patterns.boundary.trust_measures``)."""
    from nullatlas.lookup.patterns.boundary import trust_measures

    return float(trust_measures(_window_of(spec), int(n))["boundary_share"])


def cell_is_periodic(spec: str) -> bool:
    """Whether a cell's window is periodic (fitted by its own route,
    ``lookup.inference.nullmoments._periodic_moments``, not by the
    geometric model)."""
    return bool(getattr(_window_of(spec), "periodic", False))


_WINDOWS: dict = {}


def _window_of(spec: str):
    from nullatlas.lookup.patterns.windows import parse_window

    w = _WINDOWS.get(spec)
    if w is None:
        w = _WINDOWS[spec] = parse_window(spec)
    return w


def fit_geomodel(cells: list[dict], d: int, n_fit: int = 100, columns=None,
                 limit=None) -> Fit:
    """Fit E[S] = mu + c1 B1 + c2 B2 + c3 B3 and the same form for n Var[S]
    per grid point (weighted least squares as :func:`fit_model`), over the
    cells with n >= ``n_fit``.  Each cell dict needs ``cov`` (the covariates
    of ``lookup.patterns.boundary.covariates``) besides the keys of :func:`fit_model`.

    ``limit`` (k,), optional: the exact n -> infinity mean
    (``calibrate.csrlimits``), held fixed: the boundary coefficients are
    fitted to E[S] - limit, and mu = limit with standard error 0."""
    use = [c for c in cells if c["n"] >= n_fit and c["count"] > 2]
    if len(use) < 6:
        raise ValueError(f"the geometric model needs at least 6 cells with n >= {n_fit}, "
                         f"got {len(use)}")
    n = np.array([c["n"] for c in use], float)
    X = np.array([np.atleast_2d(c["cov"]) for c in use], float)      # cells x (1 or k) x 4
    if columns is None:              # the widest candidate of the dimension
        columns = sorted({j for cols in CANDIDATES[d].values() for j in cols})
    # a sub-model: the other coefficients are 0
    X[:, :, [j for j in range(X.shape[2]) if j not in columns]] = 0.0
    R = np.array([c["count"] for c in use], float)
    mean = np.array([np.atleast_1d(c["mean"]) for c in use])
    fixed = None
    if limit is not None:
        fixed = np.broadcast_to(np.asarray(limit, float), mean.shape[1:])
        mean = mean - fixed
        Xm = X.copy()
        Xm[:, :, 0] = 0.0       # mu is not fitted (its coefficient comes out 0, SE 0)
    else:
        Xm = X
    var = np.array([np.atleast_1d(c["var"]) for c in use])
    sem = np.sqrt(var / R[:, None])
    nvar = n[:, None] * var
    nvar_se = nvar * np.sqrt(2.0 / (R[:, None] - 1.0))
    k = mean.shape[1]
    parts = []
    for j in range(k):
        Xj = X[:, min(j, X.shape[1] - 1), :]     # the design of grid point j
        Xmj = Xm[:, min(j, Xm.shape[1] - 1), :]
        parts.append((wls(Xmj, mean[:, j:j + 1], sem[:, j:j + 1]),
                      wls(Xj, nvar[:, j:j + 1], nvar_se[:, j:j + 1])))

    def stack(which, i):
        a = [p[which][i] for p in parts]
        return np.concatenate(a, axis=1 if i == 4 else 0)

    mc, ms, mcov, mchi, mres = (stack(0, i) for i in range(5))
    vc, vs, vcov, vchi, vres = (stack(1, i) for i in range(5))
    if fixed is not None:
        mc[:, 0] = fixed
    return Fit(d, [c["name"] for c in use], mc, ms, mcov, mchi, vc, vs, vcov, vchi, mres, vres,
               int(n_fit))


#: A shape is left out of a statistic's geometric model when its mean squared
#: standardised residual exceeds this many times the median of the others'
#: and the fit's median chi-square per degree of freedom exceeds EXCLUDE_CHI2.
EXCLUDE_FACTOR = 4.0
EXCLUDE_CHI2 = 3.0


#: Candidate models per dimension: the covariates they use
#: (``lookup.patterns.boundary.COVARIATES``): the geometric model, the
#: boundary term with a 1/n term only (the two-term kappa model's form,
#: c2 = 0) and, in 3D, the geometric model with the smooth-curvature term BC
#: (cylinders and balls against boxes' edges).  In 2D a disk's curvature
#: term 2 pi / n is of the order of B3 and is not fitted.
CANDIDATES = {2: {"geometric": (0, 1, 2, 3), "boundary-only": (0, 1, 3)},
              3: {"geometric": (0, 1, 2, 3), "boundary-only": (0, 1, 3),
                  "curved": (0, 1, 2, 3, 4)}}


def comparable_shapes(cells: list[dict], n_fit: int, columns) -> list:
    """The shapes that every covariate in ``columns`` can be predicted for
    when the shape is left out: a shape is dropped from the comparison when
    one of its covariates is non-zero but zero in all the other shapes (the
    only curved shape, say: without it no model can learn the curvature
    term, and holding that against the model with the term would compare
    the candidates on a question none of them can answer)."""
    use = [c for c in cells if c["n"] >= n_fit]
    shapes = sorted({c["shape"] for c in use})
    nz = {sh: np.zeros(len(columns), bool) for sh in shapes}
    for c in use:
        x = np.atleast_2d(np.asarray(c["cov"], float))[:, list(columns)]
        nz[c["shape"]] |= np.any(np.abs(x) > 0, axis=0)
    out = []
    for sh in shapes:
        others = np.zeros(len(columns), bool)
        for o in shapes:
            if o != sh:
                others |= nz[o]
        if not np.any(nz[sh] & ~others):
            out.append(sh)
    return out


def loso_error(cells: list[dict], d: int, n_fit: int, columns, shapes=None,
               limit=None) -> float:
    """Leave-one-shape-out prediction error of a (sub-)model: for each shape
    (of ``shapes``, default all), fit on the others and predict its cells;
    the RMS over those cells and grid points of (mean - prediction) / sd of
    one pattern."""
    if shapes is None:
        shapes = sorted({c["shape"] for c in cells if c["n"] >= n_fit})
    errs = []
    for sh in shapes:
        train = [c for c in cells if c["shape"] != sh]
        test = [c for c in cells if c["shape"] == sh and c["n"] >= n_fit]
        try:
            fit = fit_geomodel(train, d, n_fit, columns, limit)
        except ValueError:
            continue
        for c in test:
            x = np.broadcast_to(np.atleast_2d(c["cov"]), fit.mean_coef.shape)
            pred = np.einsum("kc,kc->k", np.nan_to_num(fit.mean_coef), x)
            sd = np.sqrt(np.asarray(c["var"], float))
            ok = sd > 1e-6 * max(float(sd.max()), 1e-300)     # grid points that vary
            errs.append(((np.asarray(c["mean"], float)[ok] - pred[ok]) / sd[ok]) ** 2)
    if not errs:
        return float("inf")
    return float(np.sqrt(np.mean(np.concatenate(errs))))


def fit_geomodel_robust(cells: list[dict], d: int, n_fit: int = 100, min_shapes: int = 4,
                        limit=None, limit_source: str = ""):
    """:func:`fit_geomodel`, leaving out whole shapes for which the local
    (additive) model does not hold for this statistic -- for example a
    window with a hole for loop statistics: the hole itself is a loop of the
    union of balls whose lifetime grows like sqrt(n), no local boundary
    term.  Shapes are dropped one at a time, worst first, while the fit's
    median chi2/dof exceeds EXCLUDE_CHI2 and the worst shape's mean squared
    standardised residual exceeds EXCLUDE_FACTOR times the median of the
    other shapes'.  Then the candidate model (:data:`CANDIDATES`) with the
    smaller leave-one-shape-out error (:func:`loso_error`) is chosen: a
    second-order term that fits the training cells better but predicts a
    left-out shape worse is not used.  Returns (fit, excluded shapes); the
    fit carries ``model`` (the candidate's name) and ``loso`` (errors).
    ``limit``: an exact limit held fixed in every fit (:func:`fit_geomodel`),
    whose source the fit carries as ``limit_source``."""
    excluded = []
    while True:
        use = [c for c in cells if c.get("shape") not in excluded]
        fit = fit_geomodel(use, d, n_fit, limit=limit)
        dof = max(len(fit.cells) - fit.mean_coef.shape[1], 1)
        if np.nanmedian(fit.mean_chi2 / dof) <= EXCLUDE_CHI2:
            break
        shape_of = {c["name"]: c.get("shape") for c in use}
        shapes = sorted({shape_of[nm] for nm in fit.cells})
        if len(shapes) <= min_shapes:
            break
        msr = {}
        for sh in shapes:
            rows = [i for i, nm in enumerate(fit.cells) if shape_of[nm] == sh]
            msr[sh] = float(np.nanmean(fit.mean_resid[rows] ** 2))
        worst = max(msr, key=msr.get)
        others = [v for k, v in msr.items() if k != worst]
        if msr[worst] <= EXCLUDE_FACTOR * float(np.median(others)):
            break
        excluded.append(worst)
    use = [c for c in cells if c.get("shape") not in excluded]
    widest = sorted({j for cols in CANDIDATES[d].values() for j in cols})
    shapes = comparable_shapes(use, n_fit, widest)
    loso = {name: loso_error(use, d, n_fit, cols, shapes, limit)
            for name, cols in CANDIDATES[d].items()}
    best = min(loso, key=loso.get)
    fit = fit_geomodel(use, d, n_fit, CANDIDATES[d][best], limit)
    fit.model = best
    fit.loso = loso
    fit.limit_source = limit_source if limit is not None else ""
    return fit, excluded


#: Points of the x grid on which the extremes' exceedance model is fitted.
EXTREME_GRID = 160


def fit_extreme_geomodel(cells: list[dict], n_fit: int = 100) -> dict:
    """Exceedance model of an extreme statistic (largest lifetime or ratio).

    The largest of many weakly dependent local features has
    P(max <= x) ~ exp(-E[number of features above x]), and that expected
    number is additive over the window like any sum of local contributions:

        -log F_{W,n}(x) = n a(x) + n B1 b(x) + c(x),

    a(x) per point of the interior, b(x) the boundary's excess per unit of
    normalised boundary measure (n B1 = |dW| s^(d-1)), c(x) a fixed-n term.
    Fitted per x by weighted least squares over the cells (empirical F from
    the tabled null values; var(-log F_hat) ~ (1 - F) / (R F), the delta
    method), on a grid of x covering the pooled values.

    Parameters
    ----------
    cells : list of dict
        With ``n``, ``cov`` (covariates), ``values`` (sorted null values).

    Returns
    -------
    dict with ``x`` (grid) and ``coef`` (len(x), 3).
    """
    use = [c for c in cells if c["n"] >= n_fit and c.get("values") is not None
           and len(c["values"]) >= 100]
    if len(use) < 6:
        raise ValueError(f"the extreme model needs at least 6 cells with n >= {n_fit}")
    pooled = np.concatenate([np.asarray(c["values"], float) for c in use])
    pooled = pooled[np.isfinite(pooled)]
    x = np.quantile(pooled, np.linspace(0.0005, 0.9995, EXTREME_GRID))
    x = np.unique(x)
    coef = np.full((len(x), 3), np.nan)
    resid = np.full((len(use), len(x)), np.nan)
    n = np.array([c["n"] for c in use], float)
    nb1 = n * np.array([np.atleast_2d(c["cov"])[0, 1] for c in use], float)
    X = np.column_stack([n, nb1, np.ones_like(n)])
    for j, xj in enumerate(x):
        y, w, rows = [], [], []
        for i, c in enumerate(use):
            v = np.asarray(c["values"], float)
            v = v[np.isfinite(v)]
            R = len(v)
            F = np.searchsorted(v, xj, side="right") / R
            if 5 <= F * R <= R - 5:
                y.append(-np.log(F))
                w.append(1.0 / np.sqrt((1 - F) / (R * F)))
                rows.append(i)
        if len(rows) >= 4:
            Xw = X[rows] * np.asarray(w)[:, None]
            b, *_ = np.linalg.lstsq(Xw, np.asarray(y) * np.asarray(w), rcond=None)
            coef[j] = b
            resid[rows, j] = (np.asarray(y) - X[rows] @ b) * np.asarray(w)
    return {"x": x, "coef": coef, "resid": resid, "cells": [c.get("shape") for c in use]}


def fit_extreme_quantiles(cells: list[dict], d: int, n_fit: int = 100) -> dict:
    """Quantile model of an extreme statistic (largest lifetime or ratio;
    ``lookup.inference.extremequantiles``): per level p of ``QUANTILE_P``,
    Q(p) = sum_j beta_j(p) x_j with x = [1, log n, B1, B2(, BC in 3D)],
    fitted by weighted least squares over the cells with n >= ``n_fit``
    (each cell's empirical quantiles from its tabled null values; standard
    error of a sample quantile sqrt(p (1 - p) / R) / f(Q(p)), the density
    from the slope dQ/dp of the cell's own quantiles; Serfling 1980,
    sec. 2.3, from memory).

    Returns
    -------
    dict with ``p``, ``qcoef`` (len(p), k), ``columns`` (names of x),
    ``resid`` (cells x len(p), standardised) and ``cells`` (their shapes).
    """
    from nullatlas.lookup.inference.extremequantiles import (
        EXTREME_COLUMNS,
        QUANTILE_P,
        extreme_design,
    )

    use = [c for c in cells if c["n"] >= n_fit and c.get("values") is not None
           and np.isfinite(np.asarray(c["values"], float)).sum() >= 100]
    if len(use) < 6:
        raise ValueError(f"the extreme model needs at least 6 cells with n >= {n_fit}")
    cols = EXTREME_COLUMNS[d]
    P = QUANTILE_P
    X = np.array([extreme_design(c["cov"], c["n"], cols) for c in use])
    Q, SE = [], []
    for c in use:
        v = np.asarray(c["values"], float)
        v = np.sort(v[np.isfinite(v)])
        q = np.quantile(v, P)
        slope = np.gradient(q, P)
        Q.append(q)
        SE.append(np.maximum(slope, 1e-12) * np.sqrt(P * (1 - P) / len(v)))
    Q, SE = np.array(Q), np.array(SE)
    coef, _, _, chi2, resid = wls(X, Q, SE)
    return {"p": P, "qcoef": coef, "columns": list(cols), "resid": resid,
            "chi2": chi2, "cells": [c.get("shape") for c in use], "model": "quantile"}


def _exclude_shapes(fit_fn, cells: list[dict], min_shapes: int) -> dict:
    """Refit ``fit_fn(cells)`` (a dict with standardised ``resid``, cells x
    levels, and the ``cells``' shapes), leaving out whole shapes one at a time
    by the rule of :func:`fit_geomodel_robust`; the fit carries ``excluded``."""
    excluded = []
    while True:
        fit = fit_fn([c for c in cells if c.get("shape") not in excluded])
        r2 = fit["resid"] ** 2
        shapes = sorted(set(fit["cells"]))
        msr = {sh: float(np.nanmean(r2[[i for i, s in enumerate(fit["cells"]) if s == sh]]))
               for sh in shapes}
        fit["excluded"] = list(excluded)
        if np.nanmedian(r2) <= EXCLUDE_CHI2 or len(shapes) <= min_shapes:
            return fit
        worst = max(msr, key=msr.get)
        others = [v for k, v in msr.items() if k != worst]
        if msr[worst] <= EXCLUDE_FACTOR * float(np.median(others)):
            return fit
        excluded.append(worst)


def fit_extreme_quantiles_robust(cells: list[dict], d: int, n_fit: int = 100,
                                 min_shapes: int = 4) -> dict:
    """:func:`fit_extreme_quantiles` leaving out shapes for which the model
    does not hold (a window's own hole is the largest loop of every pattern
    in it), by the rule of :func:`fit_geomodel_robust`.  Returns the fit dict
    with ``excluded`` (list of shapes)."""
    return _exclude_shapes(lambda cs: fit_extreme_quantiles(cs, d, n_fit), cells, min_shapes)


def fit_extreme_geomodel_robust(cells: list[dict], n_fit: int = 100, min_shapes: int = 4):
    """:func:`fit_extreme_geomodel` (the exceedance model of earlier tables)
    leaving out shapes for which it does not hold, by the rule of
    :func:`fit_geomodel_robust`.  Returns the fit dict with ``excluded``."""
    return _exclude_shapes(lambda cs: fit_extreme_geomodel(cs, n_fit), cells, min_shapes)
