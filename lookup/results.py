"""Result objects in the style of ``scipy.stats``: ``statistic``, ``pvalue`` and ours."""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["StatResult", "CSRTestResult", "group_causes", "format_pvalue", "SCHEMA", "RESULT_KEYS",
           "P_FLOOR"]


def group_causes(items) -> list:
    """Each cause once, with the statistics it affects.

    Parameters
    ----------
    items : iterable of (str, list of str)
        Statistic name and its reasons.

    Returns
    -------
    list of (str, list of str)
        (cause, statistic names), causes in the order they first appear.

    Examples
    --------
    >>> from nullatlas.lookup.results import group_causes
    >>> group_causes([("a", ["few replicates", "n small"]), ("b", ["few replicates"])])
    [('few replicates', ['a', 'b']), ('n small', ['a'])]
    """
    out: dict = {}
    for name, reasons in items:
        for cause in reasons:
            names = out.setdefault(cause, [])
            if name not in names:
                names.append(name)
    return list(out.items())


def _clean(v):
    if isinstance(v, np.ndarray):
        return [_clean(x) for x in v.tolist()]
    if isinstance(v, (list, tuple)):
        return [_clean(x) for x in v]
    if isinstance(v, (np.floating, float)):
        v = float(v)
        return v if np.isfinite(v) else None
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, dict):
        return {k: _clean(x) for k, x in v.items()}
    return v


@dataclass(repr=False)
class StatResult:
    """The test of one statistic.

    Attributes
    ----------
    name : str
        Statistic name (``--stat``).
    kind : {"curve", "scalar", "extreme"}
    statistic : float
        The test statistic: the value of a scalar or extreme statistic, or
        for a curve the studentised maximum max_k |z_k| over its usable grid
        points (the same definition on both routes).
    pvalue : float
        Never 0; see ``pvalue_is_bound``.
    null_mean, null_sd : float
        Null mean and sd of ``statistic`` (NaN for curves: their grid points
        are standardised one by one, see ``curve``).
    z : float
        (statistic - null_mean) / null_sd; for a curve, its studentised
        maximum (``statistic``).
    method : str
        How the p-value was obtained, precisely (``method_label`` says it in
        plain words), e.g. ``"asymptotic-normal"`` or ``"mc-maxabs"``.
    alternative : {"two-sided", "clustered", "regular"}
        The alternative asked for.
    tail : {"two-sided", "greater", "less"}
        The tail of ``statistic`` that was tested for it.
    trusted : bool
    reason : str
    primary : bool
    n_sims : int
        Simulated patterns (0 on the instant route).
    pvalue_is_bound : bool
        ``pvalue`` is an upper bound, not a value: the observed statistic lay
        beyond every simulated null value (the Monte Carlo floor 1/(m+1), or
        for a curve on the instant route an analytic tail bound), or the
        tail probability is below :data:`P_FLOOR`.
    curve : dict or None
        For curves: grid, observed curve, null mean and sd, pointwise and
        global 95% envelopes.
    details : dict or None
        Method-specific extras: for instant tests the table route and cells,
        n_min, and for curves the Mahalanobis variant's statistic and p-value.

    Examples
    --------
    ``csr_test`` makes these; ``as_dict`` gives their JSON form, with
    the attribute names as keys and non-finite numbers as ``None``:

    >>> import json
    >>> import numpy as np
    >>> from nullatlas import StatResult
    >>> r = StatResult(name="nnmean", kind="scalar", statistic=0.49, pvalue=0.03,
    ...                null_mean=0.51, null_sd=0.009, z=-2.2, method="mc-rank", n_sims=99)
    >>> r.as_dict()["pvalue"], r.as_dict()["method_label"]
    (0.03, 'simulation, 99 patterns, rank')
    >>> undefined = StatResult(name="total1", kind="scalar", statistic=np.nan, pvalue=np.nan,
    ...                        null_mean=0.1, null_sd=0.01, z=np.nan,
    ...                        method="untested", trusted=False, reason="undefined")
    >>> json.dumps(undefined.as_dict())[:58]
    '{"name": "total1", "kind": "scalar", "statistic": null, "p'
    """

    name: str
    kind: str
    statistic: float
    pvalue: float
    null_mean: float
    null_sd: float
    z: float
    method: str
    alternative: str = "two-sided"
    tail: str = "two-sided"
    trusted: bool = True
    reason: str = ""
    primary: bool = False
    n_sims: int = 0
    pvalue_is_bound: bool = False
    curve: dict | None = None
    details: dict | None = None

    def __repr__(self) -> str:
        return (f"StatResult({self.name}: statistic={self.statistic:.4g}, "
                f"pvalue={format_pvalue(self.pvalue, self.pvalue_is_bound, self.n_sims)}, "
                f"method={self.method!r}{'' if self.trusted else ', UNTRUSTED'})")

    @property
    def observed(self) -> float:
        """The same as ``statistic`` (its name in the JSON of schema 1)."""
        return self.statistic

    @property
    def method_label(self) -> str:
        """The method in plain words (``method`` keeps the precise label)."""
        return method_label(self.method, self.n_sims)

    def as_dict(self, curves: bool = True) -> dict:
        """The JSON form: the keys are the attribute names (:data:`RESULT_KEYS`)."""
        d = {k: getattr(self, k) for k in RESULT_KEYS}
        if self.details:
            d["details"] = self.details
        if curves and self.curve is not None:
            d["curve"] = self.curve
        return _clean(d)


#: Version of the JSON written by every command (``"schema"``); 2: the keys
#: of a result are its Python attribute names (:data:`RESULT_KEYS`).
SCHEMA = 2
#: Keys of a result in JSON, in order (``details`` and ``curve`` follow when present).
RESULT_KEYS = ("name", "kind", "statistic", "pvalue", "pvalue_is_bound", "null_mean", "null_sd",
               "z", "method", "method_label", "alternative", "tail", "trusted", "reason",
               "primary", "n_sims")
#: Smallest p-value reported as a value: 1 - p is not resolved below it in
#: double precision, and far in a tail the normal or Gumbel limit carries
#: no such precision either; smaller tail probabilities are reported as
#: this upper bound (``pvalue_is_bound``).  A p-value is never 0.
P_FLOOR = 1e-16

_PLAIN = {
    "asymptotic-normal": "instant, normal z",
    "asymptotic-maxabs": "instant, max |z| over the curve",
    "table-empirical-gumbel-tail": "instant, tabled null with Gumbel tail",
    "mc-rank": "simulation, {n}rank",
    "mc-maxabs": "simulation, {n}max |z| over the curve",
    "mc-erl-envelope": "simulation, {n}rank envelope (a different curve test)",
    "none": "no test",
    "untested": "no test",
}


def format_pvalue(p, is_bound: bool = False, n_sims: int = 0) -> str:
    """A p-value with the precision it has: two significant digits, and a
    bound written as one (``"< 3e-04"``; ``"<= 0.001"`` for the Monte Carlo
    floor 1/(m+1), which is itself a valid p-value).

    Examples
    --------
    >>> from nullatlas.lookup.results import format_pvalue
    >>> format_pvalue(0.95540), format_pvalue(0.0463), format_pvalue(3.17e-7)
    ('0.96', '0.046', '3.2e-07')
    >>> format_pvalue(1e-16, True), format_pvalue(0.001, True, 999)
    ('< 1e-16', '<= 0.001')
    """
    if p is None or not np.isfinite(p):
        return "-"
    text = f"{float(p):.2g}"
    if is_bound:
        return ("<= " if n_sims else "< ") + text
    return text


def method_label(method, n_sims=None) -> str:
    """Plain words for a method label, for the printed tables.

    Parameters
    ----------
    method : str or None
        The precise label kept in JSON and in ``StatResult.method``.
    n_sims : int, optional
        Simulated patterns behind a Monte Carlo answer, said when known.

    Returns
    -------
    str
        For example ``"instant, normal z"`` or ``"simulation, 999 patterns, rank"``;
        an unknown label is returned unchanged.

    Examples
    --------
    >>> from nullatlas.lookup.results import method_label
    >>> method_label("mc-rank", 999)
    'simulation, 999 patterns, rank'
    >>> method_label("asymptotic-maxabs")
    'instant, max |z| over the curve'
    """
    if method is None:
        return "-"
    text = _PLAIN.get(method, method)
    return text.format(n=f"{n_sims} patterns, " if n_sims else "")


_COLUMNS = RESULT_KEYS


def _fmt(v, width=10) -> str:
    if v is None or (isinstance(v, float) and not np.isfinite(v)):
        return "-".rjust(width)
    return (" " + f"{v:.4g}").rjust(width)


def _verdict(res, alpha: float) -> str:
    p = res.primary
    null = "CSR" if res.null == "csr" else f"the null model {res.null}"
    if not np.isfinite(p.pvalue):
        return f"no p-value for the primary test {p.name} ({p.reason})"
    pv = format_pvalue(p.pvalue, p.pvalue_is_bound, p.n_sims)
    tail = f"(p {pv if p.pvalue_is_bound else '= ' + pv}{'' if p.trusted else ', UNTRUSTED'})"
    if p.pvalue <= alpha:
        return f"{null} rejected at alpha = {alpha:g} by the primary test {p.name} {tail}"
    return f"no evidence against {null} at alpha = {alpha:g} from the primary test {p.name} {tail}"


def summary_text(res, alpha: float = 0.05) -> str:
    """The table of a :class:`CSRTestResult` that the ``nullatlas test`` command prints."""
    w = res.window
    size = w.get("area", w.get("volume"))
    lines = [f"n = {res.n} points in {res.dimension}D, window {w['kind']} "
             f"({'area' if res.dimension == 2 else 'volume'} {size:.6g}, kappa {w['kappa']:.4g}), "
             f"seed {res.seed if res.seed is not None else '-'}"]
    lines += [f"warning: {msg}" for msg in res.warnings]
    head = f"{'name':<12}{'kind':<9}{'statistic':>10}{'null_mean':>11}{'null_sd':>10}" \
           f"{'z':>8}{'pvalue':>10}  method"
    lines += [head, "-" * len(head)]
    for r in res.results:
        name = r.name + ("*" if r.primary else "")
        flag = "" if r.trusted else "  UNTRUSTED"
        pv = format_pvalue(r.pvalue, r.pvalue_is_bound, r.n_sims)
        lines.append(f"{name:<12}{r.kind:<9}{_fmt(r.statistic)}{_fmt(r.null_mean, 11)}"
                     f"{_fmt(r.null_sd)}{_fmt(r.z, 8)}{pv:>10}  {r.method_label}{flag}")
    lines.append("* primary test; the others are secondary, p-values unadjusted. "
                 "Curves: statistic = max |z| over the usable grid points.")
    # each cause once, with the statistics it affects
    lines += [f"untrusted {', '.join(names)}: {cause}"
              for cause, names in group_causes((r.name, (r.details or {}).get("reasons") or [r.reason])
                                               for r in res.results if not r.trusted)]
    if res.null != "csr":
        lines.append(f"null model: {res.null} (conditioned on n, Monte Carlo)")
    lines.append(f"Verdict: {_verdict(res, alpha)}.")
    return "\n".join(lines) + "\n"


def _html_cell(v) -> str:
    import html

    if isinstance(v, (float, np.floating)):
        return "-" if not np.isfinite(v) else f"{v:.4g}"
    return html.escape(str(v))


def summary_html(res, alpha: float = 0.05) -> str:
    """The same summary as an HTML table, for notebooks."""
    import html

    w = res.window
    cols = ("name", "kind", "statistic", "null_mean", "null_sd", "z", "pvalue", "method", "trusted")
    rows = []
    for r in res.results:
        d = {"name": r.name + ("*" if r.primary else ""), "kind": r.kind, "statistic": r.statistic,
             "null_mean": r.null_mean, "null_sd": r.null_sd, "z": r.z,
             "pvalue": format_pvalue(r.pvalue, r.pvalue_is_bound, r.n_sims),
             "method": r.method_label, "trusted": "yes" if r.trusted else "UNTRUSTED"}
        rows.append("<tr>" + "".join(f"<td>{_html_cell(d[c])}</td>" for c in cols) + "</tr>")
    notes = "".join(f"<li>{html.escape(m)}</li>" for m in res.warnings) + "".join(
        f"<li>untrusted {html.escape(r.name)}: {html.escape(r.reason)}</li>"
        for r in res.results if not r.trusted)
    return (f"<div><p>n = {res.n} points in {res.dimension}D, window {html.escape(str(w['kind']))} "
            f"(kappa {w['kappa']:.4g}), seed {res.seed}</p>"
            "<table><thead><tr>" + "".join(f"<th>{c}</th>" for c in cols) + "</tr></thead><tbody>"
            + "".join(rows) + "</tbody></table>"
            "<p>* primary test; the others are secondary, p-values unadjusted.</p>"
            + (f"<ul>{notes}</ul>" if notes else "")
            + f"<p><b>Verdict:</b> {html.escape(_verdict(res, alpha))}.</p></div>")


@dataclass(repr=False)
class CSRTestResult:
    """All results of one run on one pattern; ``statistic``/``pvalue`` are the primary test's.

    Attributes
    ----------
    statistic, pvalue : float
        Of the primary test (``results[0]``).
    results : list of StatResult
        Primary first, then secondary tests (unadjusted p-values).
    n : int
    dimension : int
    window : dict
    seed : int
        Entropy of the root seed: rerunning with it reproduces the result.
    validation : dict
    diagram : Diagram or None
    warnings : list of str
    elapsed_s : float
    engine : str
        Persistence engine used ("fast" or "gudhi").
    method : str
        Method requested: "auto", "asymptotic" or "mc" (each result's
        ``method`` says how its p-value was obtained).
    null : str
        The null model ("csr", or a model of ``lookup.processes.registry``).

    Examples
    --------
    >>> import json
    >>> import numpy as np
    >>> import nullatlas
    >>> w = nullatlas.Rectangle(0, 0, 1, 1)
    >>> pts = w.sample(200, np.random.default_rng(2))
    >>> res = nullatlas.csr_test(pts, w, stats=["nnmean", "total1"], method="asymptotic", seed=5)
    >>> res.n, res.dimension, res.window["kind"], res.seed
    (200, 2, 'rect', 5)
    >>> res.statistic == res.primary.statistic == res.results[0].statistic
    True
    >>> res["total1"].method, res.primary.reason
    ('asymptotic-normal', 'instant test from the null table null2d.h5 (cell: square-n00000200)')
    >>> sorted(json.loads(json.dumps(res.as_dict())))
    ['dimension', 'elapsed_s', 'engine', 'method', 'n', 'null', 'results', 'schema', 'seed',
     'validation', 'warnings', 'window']
    """

    results: list
    n: int
    dimension: int
    window: dict
    seed: int | None = None
    validation: dict = field(default_factory=dict)
    diagram: object = None
    warnings: list = field(default_factory=list)
    elapsed_s: float = 0.0
    engine: str = "fast"
    method: str = "mc"
    null: str = "csr"

    @property
    def primary(self) -> StatResult:
        return self.results[0]

    @property
    def statistic(self) -> float:
        return self.primary.statistic

    @property
    def pvalue(self) -> float:
        return self.primary.pvalue

    def __getitem__(self, name: str) -> StatResult:
        for r in self.results:
            if r.name == name:
                return r
        raise KeyError(name)

    def summary(self, alpha: float = 0.05) -> str:
        """The table that ``nullatlas test`` prints, with the verdict at ``alpha``."""
        return summary_text(self, alpha)

    def __repr__(self) -> str:
        return self.summary()

    def _repr_html_(self) -> str:
        return summary_html(self)

    def to_dataframe(self):
        """All results as a pandas DataFrame, one row per statistic (primary first).

        Returns
        -------
        pandas.DataFrame
            Columns :data:`RESULT_KEYS` (``name, kind, statistic, pvalue,
            pvalue_is_bound, null_mean, null_sd, z, method, method_label,
            alternative, tail, trusted, reason, primary, n_sims``).

        Raises
        ------
        ImportError
            When pandas is not installed (it is optional).
        """
        try:
            import pandas as pd
        except ImportError:
            raise ImportError("CSRTestResult.to_dataframe needs pandas, which is not installed: "
                              "pip install pandas (or use as_dict())") from None
        rows = [r.as_dict(curves=False) for r in self.results]
        return pd.DataFrame([{c: row.get(c) for c in _COLUMNS} for row in rows], columns=list(_COLUMNS))

    def as_dict(self, curves: bool = True) -> dict:
        return _clean({
            "schema": SCHEMA, "n": self.n, "dimension": self.dimension, "window": self.window,
            "seed": self.seed, "validation": self.validation, "warnings": list(self.warnings),
            "elapsed_s": round(self.elapsed_s, 4), "engine": self.engine, "method": self.method,
            "null": self.null,
            "results": [r.as_dict(curves) for r in self.results],
        })
