"""Result objects of ``locate_features``: one ``Feature`` per located feature,
gathered in a scipy.stats-like ``FeatureMap``."""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["Feature", "FeatureMap", "KINDS"]

#: Homology dimension -> name of the feature.
KINDS = {0: "cluster", 1: "loop", 2: "void"}


def _num(x):
    x = float(x)
    return x if np.isfinite(x) else None


@dataclass
class Feature:
    """One feature of the diagram, with its place.

    Attributes
    ----------
    id : str
        ``C1``, ``L1``, ``V1``... (cluster, loop, void; 1 = strongest).
    dim : int
        Homology dimension (0 clusters, 1 loops, 2 voids).
    birth, death : float
        Radii in the data's units; ``birth_norm``, ``death_norm`` normalised,
        rho = r (n / |W|)^(1/d).
    ratio : float
        Strength death / birth.
    pvalue : float
        Family-wise p: P(largest strength of a CSR pattern >= ratio), times
        the number of families tested (Bonferroni over families).
    pvalue_family : float
        The same before the factor for the families.
    pvalue_universal : float
        Bonferroni-adjusted p of the universal law (features x families;
        loops/voids only, NaN for clusters).
    qvalue_bh : float
        Benjamini–Hochberg q of the universal per-feature p over the
        loops/voids: EXPLORATORY, no family-wise guarantee.
    significant : bool
        pvalue <= alpha.
    points : ndarray of int
        Rows of the (validated) pattern that make the feature: cluster
        members, points on the hole's outer boundary cycle (2D) or its
        enclosing surface (3D), all at ``scale_used``.
    scale_used : float
        The radius (data units) at which the feature is located: for a
        cluster sqrt(birth * death), the middle of its life on the log
        scale; for a hole (loop in 2D, void in 3D) the middle of the
        longest stretch of its life over which its region does not change
        (``lookup.features.regions.stable_radius``); for a 3D loop its birth
        (the cycle is taken just before it).
    centre : ndarray
    size : float
        Diameter in the data's units: of the circle/ball of the hole's area
        or volume; of the smallest ball about the centre holding a cluster.
    area : float
        Area (2D) or volume (3D) of the hole; of the convex hull of a cluster.
    polygon : list or None
        2D: exterior ring [[x, y], ...] of the hole at ``scale_used`` (or of
        the cluster's convex hull).
    bbox : list
        [min..., max...] of the feature's points.
    cycle : list of int or None
        3D loop: its representative cycle, rows of the points in order (the
        last joined to the first by the birth edge; ``points`` holds the
        same rows); ``size`` is then twice the largest distance of its
        points from ``centre`` (the length-weighted centroid of its edges)
        and ``area`` is NaN.
    cycle_length : float
        Length of that cycle (data units; NaN otherwise).
    core : list or None
        Hole (2D loop, 3D void): its largest empty disk/ball, [centre...,
        radius], the circumscribed disk/ball of its destroying simplex
        (radius = ``death``): the maximum-likelihood place of an empty disk
        among Poisson points (the largest disk free of points), beside
        ``polygon``, the hole's shape.
    """

    id: str
    dim: int
    birth: float
    death: float
    birth_norm: float
    death_norm: float
    ratio: float
    pvalue: float
    pvalue_family: float
    pvalue_universal: float
    qvalue_bh: float
    significant: bool
    points: np.ndarray
    centre: np.ndarray
    size: float
    area: float
    polygon: list | None = None
    bbox: list = field(default_factory=list)
    scale_used: float = float("nan")
    cycle: list | None = None
    cycle_length: float = float("nan")
    core: list | None = None

    @property
    def kind(self) -> str:
        return KINDS[self.dim]

    def as_dict(self, points: bool = True) -> dict:
        d = {"id": self.id, "kind": self.kind, "dim": self.dim,
             "birth": _num(self.birth), "death": _num(self.death),
             "birth_norm": _num(self.birth_norm), "death_norm": _num(self.death_norm),
             "ratio": _num(self.ratio), "pvalue": _num(self.pvalue),
             "pvalue_family": _num(self.pvalue_family),
             "pvalue_universal": _num(self.pvalue_universal),
             "qvalue_bh_exploratory": _num(self.qvalue_bh),
             "significant": bool(self.significant),
             "centre": [float(c) for c in self.centre], "size": _num(self.size),
             "area" if len(self.centre) == 2 else "volume": _num(self.area),
             "bbox": [float(b) for b in self.bbox], "n_points": int(len(self.points))}
        d["located_at_radius"] = _num(self.scale_used)
        if points:
            d["points"] = [int(i) for i in self.points]
        if self.polygon is not None:
            d["polygon"] = [[float(x), float(y)] for x, y in self.polygon]
        if self.core is not None:
            d["largest_empty_" + ("disk" if len(self.centre) == 2 else "ball")] = {
                "centre": [float(x) for x in self.core[:-1]], "radius": float(self.core[-1])}
        if self.cycle is not None:
            d["cycle"] = [int(i) for i in self.cycle]
            d["cycle_length"] = _num(self.cycle_length)
        return d


@dataclass
class FeatureMap:
    """Where the structure is: the result of ``locate_features``.

    Attributes
    ----------
    statistic : float
        Strength (death/birth) of the feature with the smallest family-wise p.
    pvalue : float
        The smallest family-wise p over all features (1 if there are none):
        the p-value of "some feature is larger than any of a CSR pattern".
    features : list of Feature
        The located features: every significant one and the strongest of
        each family, strongest first within a family.
    alpha : float
    n, dim : int
    window : dict
    families : dict
        Per homology dimension: null route, source, threshold of the ratio
        at level alpha (family-wise), all features' (birth, death) in
        normalised units, their ratios and p-values.
    points : ndarray
        The validated pattern (rows referred to by ``Feature.points``).
    warnings : list of str
    """

    statistic: float
    pvalue: float
    features: list
    alpha: float
    n: int
    dim: int
    window: dict
    families: dict
    points: np.ndarray
    seed: int
    warnings: list = field(default_factory=list)
    elapsed_s: float = 0.0

    @property
    def significant(self) -> list:
        """The features with family-wise p <= alpha."""
        return [f for f in self.features if f.significant]

    def labels(self) -> list:
        """Per point, the ids of the significant features it belongs to."""
        out = [[] for _ in range(len(self.points))]
        for f in self.significant:
            for i in f.points:
                out[int(i)].append(f.id)
        return out

    def to_dataframe(self):
        """A pandas DataFrame, one row per located feature (no point lists)."""
        import pandas as pd

        rows = []
        for f in self.features:
            d = f.as_dict(points=False)
            d.pop("polygon", None)
            d.pop("cycle", None)
            for k in ("largest_empty_disk", "largest_empty_ball"):
                e = d.pop(k, None)
                if e is not None:
                    d["core_radius"] = e["radius"]
            c = d.pop("centre")
            for k, x in zip("xyz", c):
                d[f"centre_{k}"] = x
            d.pop("bbox")
            rows.append(d)
        return pd.DataFrame(rows)

    def as_dict(self, points: bool = True) -> dict:
        fam = {}
        for q, f in self.families.items():
            g = {k: (_num(v) if isinstance(v, float) else v) for k, v in f.items()
                 if k not in ("pairs_norm", "ratios", "pvalues")}
            g["features"] = int(len(f["ratios"]))
            fam[KINDS[q]] = g
        from ..results import SCHEMA

        return {"schema": SCHEMA, "statistic": _num(self.statistic), "pvalue": _num(self.pvalue),
                "alpha": self.alpha, "n": self.n, "dimension": self.dim, "window": self.window,
                "seed": self.seed, "n_significant": len(self.significant),
                "fwer_control": ("a feature is significant when its death/birth ratio beats the "
                                 "upper alpha point of the largest ratio of a CSR pattern of the "
                                 "same window and n (Bonferroni over the families); the BH q-values "
                                 "are exploratory"),
                "families": fam, "features": [f.as_dict(points) for f in self.features],
                "warnings": list(self.warnings), "elapsed_s": round(self.elapsed_s, 3)}

    def summary(self) -> str:
        """Plain text: one line per located feature."""
        from ..results import format_pvalue

        lines = [f"n = {self.n}, {self.dim}D, window {self.window.get('kind')}: "
                 f"{len(self.significant)} significant feature(s) at family-wise "
                 f"alpha = {self.alpha:g}; smallest family-wise p = {format_pvalue(self.pvalue)}"]
        for q, f in self.families.items():
            lines.append(f"  {KINDS[q]}s: {len(f['ratios'])} features, null {f['route']} "
                         f"({f['source']}), significant above ratio {f['threshold_ratio']:.4g}")
        for f in self.features:
            c = ", ".join(f"{x:.4g}" for x in f.centre)
            lines.append(f"  {f.id:>4} {f.kind:<7} p = {format_pvalue(f.pvalue):<9} ratio {f.ratio:7.3f}  "
                         f"birth {f.birth:.4g} death {f.death:.4g}  centre ({c})  size {f.size:.4g}"
                         f"  {len(f.points)} points{'  *' if f.significant else ''}")
        for w in self.warnings:
            lines.append(f"  note: {w}")
        return "\n".join(lines) + "\n"
