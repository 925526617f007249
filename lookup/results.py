"""Result objects in the style of ``scipy.stats``: ``statistic``, ``pvalue`` and ours."""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["StatResult", "CSRTestResult", "group_causes"]


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
    statistic : float
        The test statistic: the value of a scalar statistic, or for a curve
        the largest standardised deviation max_k |z_k| over its grid.
    pvalue : float
    name : str
        Statistic name (``--stat``).
    kind : {"curve", "scalar", "extreme"}
    observed, null_mean, null_sd : float
        Observed value of ``statistic`` and its null mean and sd.
    z : float
        (observed - null_mean) / null_sd.
    method : str
        How the p-value was obtained, e.g. ``"mc-rank"`` or ``"mc-erl-envelope"``.
    alternative : str
    trusted : bool
    reason : str
    primary : bool
    n_sims : int
    curve : dict or None
        For curves: grid, observed curve, null mean and sd, pointwise and
        global 95% envelopes.
    details : dict or None
        Method-specific extras: for instant tests the table route and cells,
        n_min, and for curves the Mahalanobis variant's statistic and p-value.

    Examples
    --------
    ``csr_test`` makes these; ``as_dict`` gives their JSON form, with
    non-finite numbers as ``None``:

    >>> import json
    >>> import numpy as np
    >>> from nullatlas import StatResult
    >>> r = StatResult(name="nnmean", kind="scalar", statistic=0.49, pvalue=0.03,
    ...                observed=0.49, null_mean=0.51, null_sd=0.009, z=-2.2,
    ...                method="mc-rank", n_sims=99)
    >>> r.as_dict()["p_value"], r.as_dict()["method"]
    (0.03, 'mc-rank')
    >>> undefined = StatResult(name="total1", kind="scalar", statistic=np.nan, pvalue=np.nan,
    ...                        observed=np.nan, null_mean=0.1, null_sd=0.01, z=np.nan,
    ...                        method="untested", trusted=False, reason="undefined")
    >>> json.dumps(undefined.as_dict())[:60]
    '{"statistic": "total1", "kind": "scalar", "observed": null, '
    """

    name: str
    kind: str
    statistic: float
    pvalue: float
    observed: float
    null_mean: float
    null_sd: float
    z: float
    method: str
    alternative: str = "two-sided"
    trusted: bool = True
    reason: str = ""
    primary: bool = False
    n_sims: int = 0
    curve: dict | None = None
    details: dict | None = None

    def __repr__(self) -> str:
        return (f"StatResult({self.name}: statistic={self.statistic:.4g}, pvalue={self.pvalue:.4g}, "
                f"method={self.method!r}{'' if self.trusted else ', UNTRUSTED'})")

    @property
    def method_label(self) -> str:
        """The method in plain words (``method`` keeps the precise label)."""
        return method_label(self.method, self.n_sims)

    def as_dict(self, curves: bool = True) -> dict:
        d = {"statistic": self.name, "kind": self.kind, "observed": self.observed,
             "null_mean": self.null_mean, "null_sd": self.null_sd, "z": self.z,
             "p_value": self.pvalue, "method": self.method, "alternative": self.alternative,
             "trusted": self.trusted, "reason": self.reason, "primary": self.primary,
             "n_sims": self.n_sims}
        if self.details:
            d["details"] = self.details
        if curves and self.curve is not None:
            d["curve"] = self.curve
        return _clean(d)


_PLAIN = {
    "asymptotic-normal": "instant, normal z",
    "asymptotic-maxabs": "instant, max |z| over the curve",
    "table-empirical-gumbel-tail": "instant, tabled null with Gumbel tail",
    "mc-rank": "simulation, {n}rank",
    "mc-erl-envelope": "simulation, {n}envelope",
    "none": "no test",
    "untested": "no test",
}


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


_COLUMNS = ("statistic", "kind", "observed", "null_mean", "null_sd", "z", "p_value", "method",
            "alternative", "trusted", "reason", "primary", "n_sims")


def _fmt(v, width=10) -> str:
    if v is None or (isinstance(v, float) and not np.isfinite(v)):
        return "-".rjust(width)
    return (" " + f"{v:.4g}").rjust(width)


def _verdict(res, alpha: float) -> str:
    p = res.primary
    null = "CSR" if res.null == "csr" else f"the null model {res.null}"
    if not np.isfinite(p.pvalue):
        return f"no p-value for the primary test {p.name} ({p.reason})"
    tail = f"(p = {p.pvalue:.3g}{'' if p.trusted else ', UNTRUSTED'})"
    if p.pvalue <= alpha:
        return f"{null} rejected at alpha = {alpha:g} by the primary test {p.name} {tail}"
    return f"no evidence against {null} at alpha = {alpha:g} from the primary test {p.name} {tail}"


def summary_text(res, alpha: float = 0.05) -> str:
    """The table of a :class:`CSRTestResult` that the ``nullatlas test`` command prints."""
    w = res.window
    size = w.get("area", w.get("volume"))
    lines = [f"n = {res.n} points in {res.dimension}D, window {w['kind']} "
             f"({'area' if res.dimension == 2 else 'volume'} {size:.6g}, kappa {w['kappa']:.4g}), "
             f"seed {res.seed}"]
    lines += [f"warning: {msg}" for msg in res.warnings]
    head = f"{'statistic':<12}{'kind':<9}{'observed':>10}{'null mean':>11}{'null sd':>10}" \
           f"{'z':>8}{'p-value':>10}  method"
    lines += [head, "-" * len(head)]
    for r in res.results:
        name = r.name + ("*" if r.primary else "")
        flag = "" if r.trusted else "  UNTRUSTED"
        lines.append(f"{name:<12}{r.kind:<9}{_fmt(r.observed)}{_fmt(r.null_mean, 11)}"
                     f"{_fmt(r.null_sd)}{_fmt(r.z, 8)}{_fmt(r.pvalue)}  {r.method_label}{flag}")
    lines.append("* primary test; the others are secondary, p-values unadjusted. "
                 "Curves: observed = max |z| over the grid.")
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
    cols = ("statistic", "kind", "observed", "null_mean", "null_sd", "z", "p_value", "method", "trusted")
    rows = []
    for r in res.results:
        d = {"statistic": r.name + ("*" if r.primary else ""), "kind": r.kind, "observed": r.observed,
             "null_mean": r.null_mean, "null_sd": r.null_sd, "z": r.z, "p_value": r.pvalue,
             "method": r.method, "trusted": "yes" if r.trusted else "UNTRUSTED"}
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
    ['dimension', 'elapsed_s', 'engine', 'method', 'n', 'null', 'results', 'seed',
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
            Columns ``statistic, kind, observed, null_mean, null_sd, z, p_value,
            method, alternative, trusted, reason, primary, n_sims``.

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
            "n": self.n, "dimension": self.dimension, "window": self.window,
            "seed": self.seed, "validation": self.validation, "warnings": list(self.warnings),
            "elapsed_s": round(self.elapsed_s, 4), "engine": self.engine, "method": self.method,
            "null": self.null,
            "results": [r.as_dict(curves) for r in self.results],
        })
