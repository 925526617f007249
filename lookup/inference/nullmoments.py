"""Null moments of a statistic for any window and n, from the null tables.

Three routes, tried in this order (the result says which one was used):

``cell``
    The table has a cell of this window's shape (``lookup.patterns.shapes.normalise``)
    and this n: its moments as stored.
``interpolated``
    The shape is calibrated and n lies between two of its cells n1 < n < n2:
    linear interpolation in x = n^(-1/d) (the order of the boundary term of
    the finite-window model) of the mean and of the per-point covariance
    n Cov; extremes interpolate the two cells' quantile functions.
``model``
    Any other window (any polygon, with holes or not; masks; boxes, balls and
    cylinders of any aspect; periodic boxes), or n beyond the shape's
    largest cell: the geometric finite-window model (``calibrate.model``,
    covariates of ``lookup.patterns.boundary``: boundary measure, the shortfall of the
    boundary band, 1/n) for the mean and n Var, with the correlation matrix
    and usable grid points of the nearest calibrated cell (closest kappa,
    then closest n^(-1/d)).  Extremes: the quantile model of
    ``lookup.inference.extremequantiles`` (tables written before it: the
    exceedance model -log F(x) = n a(x) + n B1 b(x) + c(x), inverted),
    turned into a null sample.  Tables of schema version 1 have no geometric model: there
    the two-term model in kappa n^(-1/d) is used (convex windows) and
    extremes take the nearest shape's cells, marked approximate.  Whether a
    model answer is trusted is decided from the table's validation on
    held-out windows (``lookup.asymptotic.verdict``).

Tables are read lazily, one (cell, statistic) at a time, and cached in the
process, so that a lookup after the first costs microseconds.
"""
from __future__ import annotations

import functools
import json
import os
from dataclasses import dataclass, field

import numpy as np

from ..errors import TableError
from ..patterns.shapes import normalise
from ..summaries.statistics import STATISTICS
from .extremequantiles import extreme_design, quantile_sample
from .tablereader import check_stat_group, open_table_cached, read_m2, shipped_tables

__all__ = ["NullMoments", "TableSet", "null_moments", "null_moments_each", "default_tables"]


@dataclass
class NullMoments:
    """The null distribution of one statistic for one (window, n).

    Attributes
    ----------
    stat, kind : str
    mean : ndarray (k,)
    cov : ndarray (k, k)
    usable : ndarray of bool (k,) or None
        Grid points used by the global curve tests.
    values : ndarray or None
        Null values (extremes), sorted.
    route : {"cell", "interpolated", "model"}
    cells : list of str
        Cells the moments come from.
    shape : str or None
        Calibrated shape of the window (None: not calibrated).
    n_min : dict
        Test name -> n_min for this shape (for the model route: the largest
        over the calibrated shapes); None where no calibrated n suffices.
    kappa_range : (float, float)
        Range of kappa of the table's shapes.
    n_range : (int, int)
        Calibrated n of this shape (or of the table).
    expected_count : ndarray or None
        n E[beta(rho)] for Betti curves.
    replicates : int
        Replicates behind the moments (smallest over the cells used).
    table : str
    approximate : str
        Non-empty when the route is an approximation beyond the model
        (extremes of an uncalibrated shape).

    Examples
    --------
    >>> import nullatlas
    >>> from nullatlas.lookup.inference.nullmoments import default_tables, null_moments
    >>> nm = null_moments(default_tables(), nullatlas.Disk(0, 0, 150), 500, "euler")
    >>> nm.kind, nm.mean.shape, nm.cov.shape, nm.sd.shape
    ('curve', (60,), (60, 60), (60,))
    >>> bool(nm.usable.any()), nm.replicates >= 2000
    (True, True)
    """

    stat: str
    kind: str
    mean: np.ndarray
    cov: np.ndarray
    usable: np.ndarray | None
    values: np.ndarray | None
    route: str
    cells: list
    shape: str | None
    n_min: dict
    kappa_range: tuple
    n_range: tuple
    expected_count: np.ndarray | None = None
    replicates: int = 0
    table: str = ""
    approximate: str = ""
    extra: dict = field(default_factory=dict)

    @property
    def sd(self) -> np.ndarray:
        return np.sqrt(np.clip(np.diag(self.cov), 0, None))


class _Table:
    """One open table: metadata plus a cache of (cell, stat) arrays."""

    def __init__(self, path: str):
        self.path = os.fspath(path)
        self.info = open_table_cached(self.path)
        self.d = self.info.dimension
        self.by_shape = {}
        for c in self.info.cells:
            self.by_shape.setdefault(c.shape, []).append(c)
        for v in self.by_shape.values():
            v.sort(key=lambda c: c.n)
        self.kappas = {s: cs[0].kappa for s, cs in self.by_shape.items()}
        self._model = None
        self._geo = None

    def geomodel(self, stat: str):
        """The geometric model of ``stat`` (dict of arrays) or None."""
        if self._geo is None:
            import h5py

            self._geo = {}
            with h5py.File(self.path, "r") as fh:
                for s, g in fh.get("geomodel", {}).items():
                    kind = g.attrs.get("kind", "additive")
                    kind = kind.decode() if isinstance(kind, bytes) else kind
                    keys = ("x", "coef", "p", "qcoef", "depth") if kind == "extreme" else (
                        "mean_coef", "mean_se", "mean_chi2", "var_coef", "depth")
                    self._geo[s] = {k: np.asarray(g[k][()], float) for k in keys if k in g}
                    if "dof" in g.attrs:
                        self._geo[s]["dof"] = float(g.attrs["dof"])
                    self._geo[s]["kind"] = kind
                    lim = g.attrs.get("limit", "")
                    self._geo[s]["limit"] = lim.decode() if isinstance(lim, bytes) else str(lim)
                    if "columns" in g.attrs:
                        self._geo[s]["columns"] = tuple(json.loads(g.attrs["columns"]))
        return self._geo.get(stat)

    @functools.lru_cache(maxsize=4096)
    def stat(self, cell: str, stat: str) -> dict:
        import h5py

        try:
            with h5py.File(self.path, "r") as fh:
                g = fh[f"cells/{cell}/{stat}"]
                check_stat_group(g, f"{self.path}: cell {cell}", stat)
                out = {"mean": np.asarray(g["mean"][()]), "m2": read_m2(g["m2"])}
                out["count"] = g.attrs["count"] if "count" in g.attrs else g["count"][()]
                for k in ("values", "usable", "expected_count"):
                    if k in g:
                        out[k] = np.asarray(g[k][()])
                    elif k in g.attrs:
                        out[k] = np.asarray(g.attrs[k])
        except (OSError, KeyError) as exc:
            raise TableError(f"{self.path}: cannot read {cell}/{stat} ({exc})") from None
        cnt = int(out["count"])
        out["count"] = cnt
        out["mean"] = out["mean"].astype(float)
        out["cov"] = out["m2"].astype(float) / max(cnt - 1, 1)
        return out

    @functools.lru_cache(maxsize=256)
    def n_model(self, stat: str):
        """Smallest n from which the model predicted a held-out shape within
        tolerance (``calibrate.model.model_n_ok``); None if never or not checked."""
        import h5py

        with h5py.File(self.path, "r") as fh:
            vals = [int(g[stat].attrs.get("n_model", -1)) for g in fh.get("holdout", {}).values()
                    if stat in g]
        if not vals or min(vals) < 0:
            return None
        return max(vals)

    def model(self, stat: str):
        if self._model is None:
            import h5py

            self._model = {}
            with h5py.File(self.path, "r") as fh:
                for s, g in fh.get("model", {}).items():
                    self._model[s] = {k: np.asarray(g[k][()]) for k in
                                      ("mean_coef", "var_coef")}
        return self._model.get(stat)


class TableSet:
    """The tables consulted by the runtime: user tables first, then the shipped ones.

    Parameters
    ----------
    paths : sequence of str
        Your own tables (``nullatlas-calibrate build``), consulted first.
    use_shipped : bool
        Also consult the shipped tables (after ``paths``).

    Examples
    --------
    >>> import os
    >>> from nullatlas.lookup.inference.nullmoments import TableSet
    >>> tables = TableSet()
    >>> [os.path.basename(t.path) for t in tables.tables]
    ['null2d.h5', 'null3d.h5']
    >>> [os.path.basename(t.path) for t in tables.for_dimension(3)]
    ['null3d.h5']
    >>> TableSet(use_shipped=False).tables
    []
    """

    def __init__(self, paths=(), use_shipped: bool = True):
        self._given = [_Table(p) for p in paths]
        self._shipped = []        # [dimension, path, _Table or None]: opened on first use
        if use_shipped:
            have = {os.path.realpath(t.path) for t in self._given}
            for d, p in sorted(shipped_tables().items()):
                if os.path.realpath(p) not in have:
                    self._shipped.append([d, p, None])

    def _open(self, entry) -> _Table:
        if entry[2] is None:
            entry[2] = _Table(entry[1])
        return entry[2]

    @property
    def tables(self) -> list:
        """Every table, in the order consulted (opens the shipped ones not yet open)."""
        return self._given + [self._open(e) for e in self._shipped]

    def for_dimension(self, d: int) -> list:
        """The tables of dimension ``d``; a shipped table of another dimension is not opened."""
        return [t for t in self._given + [self._open(e) for e in self._shipped if e[0] == d]
                if t.d == d]


class _OneTable:
    """A view of one table of a :class:`TableSet` (``null_moments_each``)."""

    def __init__(self, table: _Table):
        self.tables = [table]

    def for_dimension(self, d: int) -> list:
        return [t for t in self.tables if t.d == d]


@functools.lru_cache(maxsize=1)
def default_tables() -> TableSet:
    """The shipped tables (opened once per process).

    Examples
    --------
    >>> from nullatlas.lookup.inference.nullmoments import default_tables
    >>> default_tables() is default_tables()
    True
    """
    return TableSet()


@functools.lru_cache(maxsize=256)
def _shape_by_spec(spec: str):
    from ..patterns.windows import parse_window

    return normalise(parse_window(spec))[0]


def _shape_name(window) -> str | None:
    """Calibrated-shape name of a window (None: no shape); rectangles, disks,
    boxes and balls are cached by their specification."""
    try:
        if window.kind in ("rect", "disk", "box", "ball") and not window.estimated:
            return _shape_by_spec(window.spec())
        return normalise(window, allow_estimated=True)[0]
    except ValueError:
        return None


def _nmin(table: _Table, shape: str | None, stat: str) -> dict:
    if shape is not None:
        return table.info.n_min(shape, stat)
    # uncalibrated shape: the most demanding calibrated shape
    out = {}
    for s in table.by_shape:
        for k, v in table.info.n_min(s, stat).items():
            if k not in out:
                out[k] = v
            elif out[k] is not None:
                out[k] = None if v is None else max(out[k], v)
    return out


def _interp_values(a: np.ndarray, b: np.ndarray, w: float) -> np.ndarray:
    m = min(len(a), len(b))
    q = (np.arange(m) + 0.5) / m
    return np.sort(w * np.quantile(a, q) + (1 - w) * np.quantile(b, q))


def _from_cells(t: _Table, stat: str, cells: list, n: int, d: int) -> dict:
    """Moments at n from one cell (exact) or two bracketing cells (interpolated)."""
    if len(cells) == 1:
        s = t.stat(cells[0].name, stat)
        return {"mean": s["mean"], "cov": s["cov"], "usable": s.get("usable"),
                "values": s.get("values"), "replicates": s["count"]}
    c1, c2 = cells
    s1, s2 = t.stat(c1.name, stat), t.stat(c2.name, stat)
    x, x1, x2 = n ** (-1.0 / d), c1.n ** (-1.0 / d), c2.n ** (-1.0 / d)
    w = (x - x2) / (x1 - x2)
    mean = w * s1["mean"] + (1 - w) * s2["mean"]
    cov = (w * c1.n * s1["cov"] + (1 - w) * c2.n * s2["cov"]) / n
    use = None
    if s1.get("usable") is not None:
        use = (s1["usable"] > 0) & (s2["usable"] > 0)
    vals = None
    if s1.get("values") is not None:
        vals = _interp_values(s1["values"], s2["values"], w)
    return {"mean": mean, "cov": cov, "usable": use, "values": vals,
            "replicates": min(s1["count"], s2["count"])}


def _bracket(cells: list, n: int):
    ns = [c.n for c in cells]
    if n in ns:
        return [cells[ns.index(n)]]
    if n < ns[0] or n > ns[-1]:
        return None
    j = int(np.searchsorted(ns, n))
    return [cells[j - 1], cells[j]]


def _scaled_cov(base_cov: np.ndarray, nvar: np.ndarray, n: int) -> np.ndarray:
    """Covariance with the correlation of ``base_cov`` and the variances
    ``nvar / n`` (model variances of the per-point statistic)."""
    sd_b = np.sqrt(np.clip(np.diag(base_cov), 0, None))
    with np.errstate(divide="ignore", invalid="ignore"):
        corr = base_cov / np.outer(sd_b, sd_b)
    corr = np.where(np.isfinite(corr), corr, 0.0)
    sd = np.sqrt(np.clip(nvar / n, 0, None))
    cov = corr * np.outer(sd, sd)
    np.fill_diagonal(cov, sd ** 2)
    return cov


def _model_moments(t: _Table, stat: str, n: int, kappa: float, d: int, near: list):
    """Model mean and covariance at (n, kappa); correlation of the nearest cell."""
    m = t.model(stat)
    if m is None:
        return None
    x = np.array([1.0, kappa * n ** (-1.0 / d), n ** (-2.0 / d)])
    mean = np.asarray(m["mean_coef"], float) @ x
    nvar = np.asarray(m["var_coef"], float) @ x
    base = _from_cells(t, stat, near, n, d)
    return {"mean": mean, "cov": _scaled_cov(base["cov"], nvar, n), "usable": base["usable"],
            "values": base["values"], "replicates": base["replicates"]}


#: Size of the null sample drawn from the extremes' exceedance model.
EXTREME_SAMPLE = 4000


def extreme_sample(x: np.ndarray, coef: np.ndarray, n: int, b1: float,
                   m: int = EXTREME_SAMPLE) -> np.ndarray:
    """A null sample (sorted, m values) of an extreme statistic from its
    exceedance model: F(x) = exp(-(n a(x) + n B1 b(x) + c(x)))
    (``calibrate.model.fit_extreme_geomodel``), inverted at the levels
    (i + 1/2)/m; beyond the fitted grid the upper tail continues with
    log(-log F) linear in x (a Gumbel tail fitted to the last grid points)."""
    ok = np.all(np.isfinite(coef), axis=1)
    x, coef = np.asarray(x, float)[ok], np.asarray(coef, float)[ok]
    lam = coef[:, 0] * n + coef[:, 1] * n * b1 + coef[:, 2]
    lam = np.minimum.accumulate(np.maximum(lam, 1e-300))      # -log F decreases in x
    F = np.exp(-lam)
    levels = (np.arange(m) + 0.5) / m
    keep = np.concatenate([[True], np.diff(F) > 0])
    xs, Fs = x[keep], F[keep]
    out = np.interp(levels, Fs, xs)
    tail = (lam > 1e-6) & (F > 0.5)
    if tail.sum() >= 3:
        tx = x[tail][-max(3, int(tail.sum()) // 3):]
        tl = np.log(lam[tail][-len(tx):])
        b, a = np.polyfit(tx, tl, 1)
        hi = levels > Fs[-1]
        if b < 0 and hi.any():
            out[hi] = np.maximum((np.log(-np.log(levels[hi])) - a) / b, xs[-1])
    return np.sort(out)


def _geo_moments(t: _Table, stat: str, n: int, window, d: int, near: list):
    """Geometric-model moments at (window, n); correlation and usable grid
    points of the nearest calibrated cell(s) ``near``."""
    from ..patterns.boundary import covariates

    g = t.geomodel(stat)
    if g is None:
        return None
    # the depth of B2 that the model was fitted with (extremes of the
    # quantile model: 2 spacings, as scalars; ``boundary.grid_depths``)
    default = np.array([2.0 if "qcoef" in g else 1.0])
    cov = covariates(window, n, g.get("depth", default))      # (k or 1, 5)
    if "mean_coef" in g:
        # a table fitted with fewer covariates uses the first ones
        cov = cov[:, :g["mean_coef"].shape[1]]
    base = _from_cells(t, stat, near, n if len(near) == 2 else near[0].n, d)
    if g["kind"] == "extreme":
        if "qcoef" in g:        # the quantile model (lookup.inference.extremequantiles)
            x = extreme_design(cov, n, g["columns"])
            vals = quantile_sample(g["p"], g["qcoef"], x, EXTREME_SAMPLE)
        else:                   # the exceedance model of earlier tables
            vals = extreme_sample(g["x"], g["coef"], n, float(cov[0, 1]))
        if len(np.unique(vals)) < len(vals) // 4:
            # the exceedance model puts most of the null below its fitted
            # grid (far outside the training windows): no valid null here
            return None
        return {"mean": np.array([vals.mean()]), "cov": np.atleast_2d(np.var(vals, ddof=1)),
                "usable": None, "values": vals, "replicates": base["replicates"],
                "covariates": cov}
    mean = np.einsum("kc,kc->k", g["mean_coef"], np.broadcast_to(cov, g["mean_coef"].shape))
    nvar = np.einsum("kc,kc->k", g["var_coef"], np.broadcast_to(cov, g["var_coef"].shape))
    return {"mean": mean, "cov": _scaled_cov(base["cov"], nvar, n), "usable": base["usable"], "values": None,
            "replicates": base["replicates"], "covariates": cov,
            "limit_growth": limit_growth(g, base["usable"]), "limit": g.get("limit", "")}


def limit_growth(g: dict, usable=None) -> float | None:
    """How fast the model's uncertain limit biases a z-test as n grows.

    With the mean modelled as mu + (terms that vanish as n grows) and
    n Var[S] -> sigma_1^2, an error e of mu biases z by e sqrt(n) / sigma_1.
    Returned: 2 SE(mu) / sigma_1 (the largest over the usable grid points),
    so that the bias stays below ``growth * sqrt(n)`` with about 97.5%
    confidence; 0 where the limit is exact and held fixed
    (``calibrate.csrlimits``); None for a table without the standard errors.
    Where the model misfits its cells (chi2 / dof > 1), SE(mu) is scaled by
    sqrt(chi2 / dof) (the Birge ratio; common practice): total H0
    persistence (chi2 / dof 4.8) then predicts a bias of 0.25 sd for a
    held-out window at n = 10^6, where 100 patterns measured 0.24 +- 0.10
    (``scripts/check_large_n.py``).
    """
    if "mean_se" not in g or "var_coef" not in g:
        return None
    se0 = np.asarray(g["mean_se"], float)[:, 0]
    if "mean_chi2" in g and g.get("dof", 0) > 0:
        se0 = se0 * np.sqrt(np.maximum(1.0, np.asarray(g["mean_chi2"], float) / g["dof"]))
    v0 = np.asarray(g["var_coef"], float)[:, 0]
    ok = np.isfinite(se0) & (v0 > 0)
    if usable is not None and len(usable) == len(se0):
        ok &= np.asarray(usable) > 0
    if not ok.any():
        return None
    return float(np.max(2.0 * se0[ok] / np.sqrt(v0[ok])))


def _periodic_moments(t: _Table, stat: str, n: int, cells: list, kind: str):
    """Moments of a periodic window beyond its shape's cells.  A torus has no
    boundary, so the mean per point is mu + b/n and n Var = v + w/n exactly
    to that order (DESIGN.md, "Periodic windows"): both are fitted by weighted
    least squares over the periodic cells with n >= 500 (all if fewer than
    two), the correlation is the largest cell's.  Extremes: the two largest
    cells' quantile functions extrapolated linearly in log n (the location
    of a largest lifetime grows like a power of log n; Bobrowski, Kahle &
    Skraba 2017)."""
    use = [c for c in cells if c.n >= 500]
    use = use if len(use) >= 2 else cells[-2:]
    stats = [t.stat(c.name, stat) for c in use]
    last = stats[-1]
    if kind == "extreme":
        c1, c2 = use[-2], use[-1]
        w = (np.log(n) - np.log(c2.n)) / (np.log(c1.n) - np.log(c2.n))
        vals = _interp_values(stats[-2]["values"], last["values"], w)
        return {"mean": np.array([vals.mean()]), "cov": np.atleast_2d(np.var(vals, ddof=1)),
                "usable": None, "values": vals, "replicates": min(s["count"] for s in stats)}
    ns = np.array([c.n for c in use], float)
    X = np.column_stack([np.ones_like(ns), 1.0 / ns])
    mean = np.empty_like(last["mean"])
    nvar = np.empty_like(last["mean"])
    for j in range(len(mean)):
        m = np.array([s["mean"][j] for s in stats])
        v = np.array([s["cov"][j, j] for s in stats])
        R = np.array([s["count"] for s in stats], float)
        wts = np.sqrt(R / np.maximum(v, 1e-300))
        mean[j] = np.linalg.lstsq(X * wts[:, None], m * wts, rcond=None)[0] @ [1.0, 1.0 / n] \
            if np.all(v > 0) else m[-1]
        nv = ns * v
        nvar[j] = np.linalg.lstsq(X, nv, rcond=None)[0] @ [1.0, 1.0 / n]
    return {"mean": mean, "cov": _scaled_cov(last["cov"], nvar, n), "usable": last.get("usable"),
            "values": None, "replicates": min(s["count"] for s in stats)}


def _nearest_cells(t: _Table, stat: str, kap: float, n: int, prefer: str | None = None):
    """Cells of the calibrated shape closest in kappa (or ``prefer``) that
    bracket n, clamped to the shape's range."""
    if prefer in t.by_shape:
        near_shape = prefer
    else:
        near_shape = min(t.by_shape, key=lambda s: abs(t.kappas[s] - kap))
    cells = [c for c in t.by_shape[near_shape] if stat in c.stats]
    if not cells:
        return near_shape, []
    br = _bracket(cells, n)
    if br is None:
        br = [cells[0]] if n < cells[0].n else [cells[-1]]
    return near_shape, br


def null_moments_each(tables: TableSet, window, n: int, stat: str):
    """The answer of every table that has one, in the order of ``tables``.

    :func:`null_moments` takes the first of these; the caller that weighs
    trust (``asymptotic.instant_moments``) may prefer a later table (the
    shipped one) when the first cannot give a trusted answer.

    Yields
    ------
    NullMoments
        One per table of the window's dimension that can answer.
    """
    for t in tables.for_dimension(window.dim):
        nm = null_moments(_OneTable(t), window, n, stat)
        if nm is not None:
            yield nm


def null_moments(tables: TableSet, window, n: int, stat: str) -> NullMoments | None:
    """Null moments of ``stat`` for ``n`` points in ``window``.

    Parameters
    ----------
    tables : TableSet
        The tables to consult, in order (e.g. :func:`default_tables`).
    window : Window
        The observation window; its shape decides the route (module doc).
    n : int
        Number of points.
    stat : str
        A statistic name of ``lookup.summaries.statistics.STATISTICS``.

    Returns
    -------
    NullMoments or None
        None when no table of the window's dimension has the statistic.

    Raises
    ------
    TableError
        Only for damaged tables.

    Examples
    --------
    A calibrated shape (every disk) at a tabulated n reads one cell; between
    two cells the moments are interpolated in n^(-1/d):

    >>> import numpy as np
    >>> import nullatlas
    >>> from nullatlas.lookup.inference.nullmoments import default_tables, null_moments
    >>> wafer = nullatlas.Disk(0, 0, 150)
    >>> nm = null_moments(default_tables(), wafer, 500, "nnmean")
    >>> nm.route, nm.shape, nm.cells
    ('cell', 'disk', ['disk-n00000500'])
    >>> np.round(nm.mean, 2), np.round(nm.sd, 2)
    (array([0.51]), array([0.01]))
    >>> nm = null_moments(default_tables(), wafer, 700, "nnmean")
    >>> nm.route, nm.cells
    ('interpolated', ['disk-n00000500', 'disk-n00001000'])

    A rectangle of aspect 3 is not a calibrated shape: the finite-window
    model in (n, kappa) gives the moments:

    >>> nm = null_moments(default_tables(), nullatlas.Rectangle(0, 0, 3, 1), 700, "nnmean")
    >>> nm.route, nm.shape
    ('model', None)
    """
    st = STATISTICS[stat]
    d = window.dim
    periodic = bool(getattr(window, "periodic", False))
    for t in tables.for_dimension(d):
        if not any(stat in c.stats for c in t.info.cells):
            continue
        shape = _shape_name(window)
        kap = float(window.kappa)
        kaps = [k for k in t.kappas.values() if k > 0]         # periodic shapes: no boundary
        krange = (min(kaps), max(kaps)) if kaps else (0.0, 0.0)
        approx = ""
        route = None
        if shape in t.by_shape:
            cells = [c for c in t.by_shape[shape] if stat in c.stats]
            ns = (cells[0].n, cells[-1].n)
            br = _bracket(cells, n)
            if br is not None:
                mom = _from_cells(t, stat, br, n, d)
                route = "cell" if len(br) == 1 else "interpolated"
                used = [c.name for c in br]
        if route is None:
            # any other window, or n outside the shape's cells: the model
            prefer = shape if shape in t.by_shape else ("torus2" if d == 2 else "torus3") \
                if periodic else None
            near_shape, br = _nearest_cells(t, stat, kap, n, prefer)
            if not br:
                continue
            pshape = ("torus2" if d == 2 else "torus3") if periodic else None
            pcells = [c for c in t.by_shape.get(pshape, []) if stat in c.stats]
            pbr = _bracket(pcells, n) if pcells else None
            if pbr is not None:
                # a periodic box of another aspect: no boundary anywhere, so
                # (for sides of many mean spacings) the periodic cube's cells
                # at this n; validated on held-out periodic boxes of other
                # aspects like any model answer
                br = pbr
                mom = _from_cells(t, stat, br, n, d)
            elif len(pcells) >= 2 and n > pcells[-1].n:
                mom = _periodic_moments(t, stat, n, pcells, st.kind)
            else:
                mom = _geo_moments(t, stat, n, window, d, br)
            route = "model"
            if mom is None:
                # schema 1: the two-term kappa model; extremes from the nearest shape
                if st.kind == "extreme":
                    nn = n if len(br) == 2 else br[0].n
                    mom = _from_cells(t, stat, br, nn, d)
                    if near_shape == shape:
                        approx = (f"n = {n} is outside the table's cells of this window's "
                                  f"shape (n {ns[0]}..{ns[1]}) and the table has no valid "
                                  f"finite-window model for the extreme '{stat}': null of its "
                                  f"cell at n = {br[0].n}, not of n = {n}")
                    else:
                        approx = (f"no valid finite-window model for the extreme '{stat}' here: "
                                  "null of the calibrated shape with the nearest kappa "
                                  f"({near_shape})")
                    route = "nearest-shape"
                else:
                    mom = _model_moments(t, stat, n, kap, d, br)
                    route = "kappa-model"
                    if mom is None:
                        continue
            used = [c.name for c in br]
            ns = (min(c.n for c in t.info.cells), max(c.n for c in t.info.cells))
        calibrated = shape if shape in t.by_shape else None
        nmin = _nmin(t, calibrated, stat)
        if route == "kappa-model":
            nmin["model"] = t.n_model(stat)
        res = NullMoments(stat, st.kind, mom["mean"], mom["cov"],
                          None if mom["usable"] is None else np.asarray(mom["usable"]) > 0,
                          mom["values"], route, used, calibrated, nmin, krange, ns,
                          replicates=int(mom["replicates"]), table=t.path, approximate=approx)
        if route in ("model", "kappa-model", "nearest-shape"):
            res.extra["nearest_shape"] = near_shape
            res.extra["trust"] = t.info.trust.get(stat)
            res.extra["schema_version"] = t.info.schema_version
            if periodic and pcells:
                res.extra["periodic_n_range"] = (int(pcells[0].n), int(pcells[-1].n))
            if "covariates" in mom:
                res.extra["covariates"] = np.asarray(mom["covariates"])[0].tolist()
            if mom.get("limit_growth") is not None:
                res.extra["limit_growth"] = mom["limit_growth"]
                res.extra["limit"] = mom.get("limit", "")
        if stat.startswith("betti"):
            res.expected_count = n * res.mean
            if res.usable is not None:
                from .globaltests import MIN_COUNT
                res.usable = res.usable & (res.expected_count >= MIN_COUNT)
        return res
    return None
