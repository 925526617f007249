"""Null laws of the largest feature, and the universal death/birth law.

Family-wise error control by the largest feature
    A feature of the observed pattern with strength x (death/birth ratio of a
    loop, void or cluster) gets ``p = P(M >= x)``, M the largest strength of
    the same family in a CSR pattern of the same window and n.  Under CSR
    the chance that *any* feature gets p <= alpha is P(M_obs >= c_alpha) <=
    alpha, c_alpha the upper alpha point of M: the family-wise error is
    controlled by construction, with no assumption on how the features
    depend on each other.  The law of M comes from the shipped tables (the
    extremes ``maxratio1`` in 2D, ``maxratio2`` in 3D, through the same
    trusted lookup as the instant test: empirical null with a Gumbel tail,
    ``lookup.inference.extremes``) or, where no table is trusted and always
    for clusters and 3D loops (no table holds their strength), from CSR
    simulations (rank p-value (1 + #{M_i >= x}) / (m + 1), Davison & Hinkley
    1997; beyond the largest simulated value a Gumbel tail, ``FamilyNull``).

The universal law (second method)
    Bobrowski & Skraba (2023), "Random persistence diagrams are universal"
    (values below recalled *from memory*, not looked up): for the features
    of one diagram with pi = death / birth,
    l = A log log pi + B, B = -lambda - A * mean(log log pi) over the
    diagram's features, lambda = 0.5772 (Euler–Mascheroni), and under the
    null l follows the left-skewed Gumbel law, P(l >= x) = exp(-exp(x)).
    Each feature's p is that tail; family-wise control over the K features
    is by Bonferroni.  The constant A: the issue recalled A = 1 for
    Čech/alpha complexes; measured on CSR alpha diagrams (2D H1 and 3D H2,
    n = 2,000, unit square/cube) A = 1 makes the sd of l about 2.45 where
    the law has pi / sqrt(6) = 1.28, and 18-19% of the features get
    p <= 0.01; A = 1/2 gives sd 1.22 (2D) and 1.28 (3D), and in 3D 1.2% of
    features at p <= 0.01, 5.1% at 0.05.  We recall (also from memory)
    that the paper has A = 1/2 for Čech and A = 1 for Rips complexes, which
    agrees: ``UNIVERSAL_A = 0.5``.
"""
from __future__ import annotations

import numpy as np

__all__ = ["EULER_GAMMA", "UNIVERSAL_A", "FamilyNull", "table_null", "simulated_null",
           "universal_pvalues"]

#: Euler–Mascheroni constant (from memory, 0.5772...; numpy has it exactly).
EULER_GAMMA = float(np.euler_gamma)
#: A of the universal law for Čech/alpha complexes (Bobrowski & Skraba 2023; from memory,
#: and checked against CSR simulations: see the module doc).
UNIVERSAL_A = 0.5

_CACHE: dict = {}


class FamilyNull:
    """The null law of the largest feature strength of one family.

    Parameters
    ----------
    values : ndarray
        Null values of the largest strength.
    route : {"table", "mc"}
        ``table``: empirical law with a Gumbel tail beyond the 10th largest
        value (``lookup.inference.extremes``); ``mc``: rank p-values of
        simulated values, (k + 1) / (m + 1) with k = #{v_i >= x}, and beyond
        the largest of them (k = 0, where the rank p would stay at its floor
        1 / (m + 1)) a Gumbel tail fitted to all m values by maximum
        likelihood: p = S_G(x) / S_G(v_max) / (m + 1), S_G(x) = 1 -
        exp(-exp(-(x - loc) / scale)) the Gumbel (maximum) survival
        function.  Every p >= 1 / (m + 1) is the exact rank p, so the test's
        size at any level >= 1 / (m + 1) is that of the rank test; below, p
        is a model estimate (the extreme-value limit of maxima; Gumbel
        because the strengths' maxima have light tails, as the tables'
        extremes do).
    source : str
        Where the values come from (table and cells, or the simulations).
    trusted : bool
    reasons : list of str
    """

    def __init__(self, values, route: str, source: str, trusted: bool = True, reasons=()):
        self.values = np.sort(np.asarray(values, float))
        self.route = route
        self.source = source
        self.trusted = trusted
        self.reasons = list(reasons)
        self._tail = None
        self._gumbel = None
        if route == "table":
            from ..inference.extremes import GumbelTail
            self._tail = GumbelTail(self.values)
        elif self.m >= 20 and np.ptp(self.values) > 0:
            from ..inference.extremes import GumbelTail
            g = GumbelTail(self.values)           # its maximum-likelihood Gumbel fit
            loc, scale = g.loc, g.scale
            self._gumbel = (loc, scale, self._gumbel_sf(self.values[-1], loc, scale))

    @staticmethod
    def _gumbel_sf(x, loc, scale):
        return -np.expm1(-np.exp(-(np.asarray(x, float) - loc) / scale))

    @property
    def m(self) -> int:
        return len(self.values)

    def pvalue(self, x) -> np.ndarray:
        """P(largest null strength >= x), elementwise."""
        x = np.asarray(x, float)
        if self._tail is not None:
            return np.minimum(1.0, self._tail.pvalue(x))
        k = self.m - np.searchsorted(self.values, x, side="left")
        p = (k + 1.0) / (self.m + 1.0)
        if self._gumbel is not None and np.any(k == 0):
            loc, scale, s_max = self._gumbel
            with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
                beyond = np.where(s_max > 0, self._gumbel_sf(x, loc, scale) / s_max, 0.0)
            p = np.where(k == 0, np.minimum(1.0, beyond) / (self.m + 1.0), p)
        return p

    def threshold(self, level: float) -> float:
        """The smallest strength x with p(x) <= level (inf if none)."""
        v = self.values
        hi = float(v[-1])
        if float(self.pvalue(hi)) > level:
            if self._tail is None and self._gumbel is None:
                return float("inf")
            span = hi - float(v[0]) + 1.0
            while float(self.pvalue(hi)) > level and hi < v[-1] + 1e3 * span:
                hi += span
            if float(self.pvalue(hi)) > level:
                return float("inf")
        lo = float(v[0])
        if float(self.pvalue(lo)) <= level:
            return lo
        for _ in range(80):
            mid = 0.5 * (lo + hi)
            if float(self.pvalue(mid)) <= level:
                hi = mid
            else:
                lo = mid
        return hi

    def describe(self) -> dict:
        tail = ("Gumbel beyond the 10th largest" if self._tail is not None else
                "Gumbel beyond the largest" if self._gumbel is not None else "none")
        return {"route": self.route, "source": self.source, "null_values": self.m,
                "tail": tail, "trusted": self.trusted, "reasons": self.reasons}


def table_null(window, n: int, q: int, tables=None, use_shipped: bool = True):
    """The tabled null of ``maxratio{q}`` for this window and n, or None.

    Returns
    -------
    (FamilyNull or None, list of str)
        The null when a table gives a trusted answer, else None and why not.
    """
    from ..inference.asymptotic import instant_moments
    from ..inference.nullmoments import TableSet, default_tables
    from ..summaries.statistics import resolve_stats

    st = resolve_stats([f"maxratio{q}"], window.dim)[0]
    tset = TableSet(tables or (), use_shipped) if (tables or not use_shipped) else default_tables()
    nm, ok, why = instant_moments(tset, window, n, st, "greater")
    if nm is None or not ok or nm.values is None:
        return None, list(why) or [f"no table holds maxratio{q} for this window"]
    src = f"{nm.table}: {nm.route} ({', '.join(nm.cells)})"
    return FamilyNull(nm.values, "table", src), []


def _largest(window, n: int, q: int, min_size: int, rng) -> float:
    pts = window.sample(n, rng)
    if q == 0:
        from .pairs import max_cluster_ratio
        return max_cluster_ratio(pts, min_size)
    from ..persistence.diagram import alpha_diagram
    from ..summaries.topological import max_ratio
    # 3D loops: the fast engine takes its H1 pairs from gudhi anyway, so
    # gudhi alone (the same pairs, ``tests/test_features.py``) saves the rest
    engine = "gudhi" if (q == 1 and pts.shape[1] == 3) else "fast"
    return max_ratio(alpha_diagram(pts, engine=engine), q)


def simulated_null(window, n: int, q: int, n_sims: int = 199, seed: int = 0,
                   min_size: int = 5, progress=None) -> FamilyNull:
    """The law of the largest strength of family ``q`` (0: clusters of at least
    ``min_size`` points) from ``n_sims`` CSR patterns of n points in ``window``.

    Seeded by ``SeedSequence(seed).spawn``: the same seed gives the same values.
    Cached for the life of the process.
    """
    from ..progressbar import progress_bar

    key = (window.spec() if hasattr(window, "spec") else repr(window), n, q, n_sims, seed,
           min_size if q == 0 else 0)
    hit = _CACHE.get(key)
    if hit is not None:
        return hit
    kids = np.random.SeedSequence([int(seed), int(q), 17]).spawn(int(n_sims))
    vals = np.empty(len(kids))
    what = "clusters" if q == 0 else f"H{q} features"
    with progress_bar(len(kids), f"CSR nulls ({what})", "pattern", progress) as bar:
        for i, s in enumerate(kids):
            vals[i] = _largest(window, n, q, min_size, np.random.default_rng(s))
            bar.update(1)
    out = FamilyNull(vals, "mc", f"{n_sims} CSR simulations (seed {seed})")
    if len(_CACHE) > 64:
        _CACHE.clear()
    _CACHE[key] = out
    return out


def universal_pvalues(ratios, a: float = UNIVERSAL_A) -> np.ndarray:
    """Per-feature p-values of the universal law (module doc; from memory).

    Parameters
    ----------
    ratios : array_like
        death/birth ratios pi > 1 of all finite features of one dimension.

    Returns
    -------
    ndarray
        exp(-exp(l)) with l = A log log pi + B; NaN if fewer than two features.
    """
    pi = np.asarray(ratios, float)
    if len(pi) < 2:
        return np.full(len(pi), np.nan)
    ll = np.log(np.log(pi))
    b = -EULER_GAMMA - a * np.mean(ll)
    ell = a * ll + b
    return np.exp(-np.exp(ell))
