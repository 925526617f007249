"""``locate_features``: which features of a pattern are significant, and where.

The test of a feature is "its death/birth ratio is larger than the largest
ratio of a CSR pattern of the same window and n" (``lookup.features.nulls``):
family-wise error control over all features of a family by construction,
and over the families tested (clusters and loops in 2D; clusters, loops and
voids in 3D) by Bonferroni.  The universal law of Bobrowski & Skraba (2023), with
Bonferroni over features, is reported beside it as a second method, and a
Benjamini–Hochberg list over its per-feature p-values as exploratory.
"""
from __future__ import annotations

import time
import warnings

import numpy as np

from ..errors import OptionError
from .results import KINDS, Feature, FeatureMap

__all__ = ["locate_features", "METHODS"]

#: Routes of the null of the largest feature.
METHODS = ("auto", "table", "mc")


def _filtration(pts: np.ndarray):
    """(face values, face tops, top values, tops, face vertices, points of the
    filtration mapped to rows of ``pts``) of the exact alpha filtration."""
    from scipy.spatial import cKDTree

    d = pts.shape[1]
    if d == 2:
        from ..persistence.alpha2d import alpha_filtration_2d
        F = alpha_filtration_2d(pts)
        fv, ft, tv, tops, fverts = (F.edge_values, F.edge_tris, F.triangle_values,
                                    F.triangles, F.edges)
    else:
        from ..persistence.alpha3d import alpha_filtration_3d
        F = alpha_filtration_3d(pts)
        fv, ft, tv, tops, fverts = (F.triangle_values, F.triangle_tets, F.tet_values, F.tets,
                                    F.triangles)
    _, rows = cKDTree(pts).query(F.points)
    return fv, ft, tv, rows[tops], rows[fverts]


def _family_null(window, n, q, method, n_sims, seed, min_size, progress, tables):
    """The null of the largest strength of family q: tables hold it only for
    the top dimension (``maxratio1`` in 2D, ``maxratio2`` in 3D); clusters and
    3D loops are always simulated."""
    reasons = []
    if q == window.dim - 1 and method in ("auto", "table"):
        from .nulls import table_null
        fam, reasons = table_null(window, n, q, tables)
        if fam is not None:
            return fam, []
        if method == "table":
            raise OptionError(f"no trusted null table for the largest {KINDS[q]} here: "
                              f"{'; '.join(reasons)} (use method 'auto' or 'mc')")
    from .nulls import simulated_null
    fam = simulated_null(window, n, q, n_sims, seed, min_size, progress)
    note = [] if q == 0 else [f"largest {KINDS[q]}: no trusted table ({'; '.join(reasons)}); "
                              f"{n_sims} CSR simulations used"] if reasons else []
    return fam, note


def _loop_place(pts, k, dp, adj, tops, fverts, r):
    """(points, centre, size, area, polygon) of the hole of dual pair k at
    radius r (``lookup.features.regions.stable_radius``)."""
    from .regions import hole_region

    region, bfaces = hole_region(dp, k, adj, radius=r)
    simp = tops[region]
    bpts = np.unique(fverts[bfaces])
    d = pts.shape[1]
    if d == 2:
        from shapely.geometry import Polygon
        from shapely.ops import unary_union

        poly = unary_union([Polygon(pts[s]) for s in simp])
        if poly.geom_type != "Polygon":          # touching at a vertex: the largest part
            poly = max(poly.geoms, key=lambda g: g.area)
        from shapely.geometry.polygon import orient
        poly = orient(poly, 1.0)                  # exterior counter-clockwise (RFC 7946)
        area = float(poly.area)
        c = np.array(poly.centroid.coords[0])
        ring = [list(xy) for xy in poly.exterior.coords]
        # the points on the hole's outer cycle (not those of islands inside it)
        outer = {tuple(xy) for xy in poly.exterior.coords}
        on = np.array([tuple(pts[i]) in outer for i in bpts], bool)
        bpts = bpts[on] if on.any() else bpts
        return bpts, c, 2.0 * np.sqrt(area / np.pi), area, ring
    P = pts[simp]                                 # (k, 4, 3)
    vol = np.abs(np.einsum("ij,ij->i", P[:, 1] - P[:, 0],
                           np.cross(P[:, 2] - P[:, 0], P[:, 3] - P[:, 0]))) / 6.0
    area = float(vol.sum())
    c = (vol[:, None] * P.mean(axis=1)).sum(axis=0) / area if area > 0 else P.mean(axis=(0, 1))
    return bpts, c, (6.0 * area / np.pi) ** (1.0 / 3.0), area, None


def _core(pts, simplex):
    """(centre, radius) of the circumscribed circle/sphere of ``pts[simplex]``
    (d + 1 points in d dimensions): c solves 2 (p_i - p_0) . (c - p_0) =
    |p_i - p_0|^2, i = 1..d (the perpendicular bisectors).  For a hole's
    destroyer it is the hole's largest empty disk/ball: the destroyer is the
    last simplex of the hole to enter (its oldest), a Delaunay simplex whose
    circumscribed ball holds no point, and its radius is the death."""
    P = pts[np.asarray(simplex)]
    A = P[1:] - P[0]
    x = np.linalg.solve(2.0 * A, np.einsum("ij,ij->i", A, A))
    return P[0] + x, float(np.linalg.norm(x))


def _cycle_place(pts, cycle):
    """(centre, size, length) of a closed polyline through ``pts[cycle]``:
    the length-weighted centroid of its edges, twice the largest distance of
    its points from it, and its length."""
    P = pts[cycle]
    Q = np.roll(P, -1, axis=0)
    seg = np.linalg.norm(Q - P, axis=1)
    length = float(seg.sum())
    c = (seg[:, None] * (P + Q) / 2.0).sum(axis=0) / length
    return c, 2.0 * float(np.max(np.linalg.norm(P - c, axis=1))), length


def _cluster_place(pts, members):
    c = pts[members].mean(axis=0)
    size = 2.0 * float(np.max(np.linalg.norm(pts[members] - c, axis=1)))
    area, ring = 0.0, None
    if len(members) > pts.shape[1]:
        try:
            from scipy.spatial import ConvexHull
            h = ConvexHull(pts[members])
            area = float(h.volume)
            if pts.shape[1] == 2:
                ring = [list(xy) for xy in pts[members][h.vertices]]
                ring.append(ring[0])
        except Exception:          # flat cluster: no hull
            pass
    return c, size, area, ring


def locate_features(points, window, *, alpha: float = 0.05, families=None, min_size: int = 10,
                    method: str = "auto", n_sims: int = 999, seed: int = 0,
                    on_duplicates: str = "error", columns=None, progress=None, tables=None,
                    max_located: int = 100) -> FeatureMap:
    """Significant clusters, loops and voids of a point pattern, located.

    Parameters
    ----------
    points : ndarray (n, d), DataFrame or path
        As for :func:`~nullatlas.lookup.csrtest.csr_test`.
    window : Window, shapely polygon or str
        The observation window (``parse_window`` specifications accepted).
    alpha : float
        Family-wise level.
    families : sequence of int, optional
        Homology dimensions to test: 0 (clusters), 1 (loops) and, in 3D,
        2 (voids).  Default: all of them.  The family-wise p is multiplied
        by the number of families (Bonferroni).
    min_size : int
        Points a component needs to be a cluster (``lookup.features.pairs``).
    method : {"auto", "table", "mc"}
        Null of the largest loop (2D) or void (3D): the shipped tables where
        trusted, else simulations (``auto``); tables only (``table``; an
        error where none is trusted); simulations only (``mc``).  Clusters
        and 3D loops are always simulated (no table holds their strength;
        a 3D loop null costs some 20 ms per simulated pattern of 500
        points, gudhi's alpha complex).
    n_sims : int
        CSR patterns per simulated null (p-values >= 1 / (n_sims + 1)).  The
        rank test is exact averaged over seeds; for one seed its size at the
        Bonferroni level a = alpha / F is itself random: the null tail
        share beyond the a (m + 1)-th largest of m = n_sims null values
        follows Beta(a (m + 1), (1 - a)(m + 1)), sd sqrt(a (1 - a) / (m + 2))
        (order statistics of uniforms): 0.011 at a = 0.025 with 199
        simulations, 0.005 with the default 999.
    seed : int
        Seed of the simulations.
    on_duplicates, columns
        As for ``csr_test``.
    progress : bool or None
        Progress bar of the simulations.
    tables : list of str, optional
        Your own null tables, before the shipped ones.
    max_located : int
        At most this many significant features per family are located.

    Returns
    -------
    FeatureMap
        ``statistic``, ``pvalue`` (smallest family-wise p), ``features``,
        ``to_dataframe()``, ``as_dict()``.

    Raises
    ------
    NullAtlasError
        On bad input (a ``ValueError`` subclass).

    Examples
    --------
    A tight cluster of 25 defects on a wafer of 300 uniform ones:

    >>> import numpy as np
    >>> import nullatlas
    >>> rng = np.random.default_rng(7)
    >>> wafer = nullatlas.Disk(0, 0, 150)
    >>> spot = nullatlas.Disk(60, 20, 6)
    >>> pts = np.vstack([wafer.sample(300, rng), spot.sample(25, rng)])
    >>> res = nullatlas.locate_features(pts, wafer, n_sims=99, seed=1, progress=False)
    >>> best = res.significant[0]
    >>> best.kind, res.pvalue <= 0.05, bool(np.hypot(*(best.centre - [60, 20])) < 6)
    ('cluster', True, True)
    """
    from ..patterns.readers import read_points
    from ..patterns.validate import validate_pattern
    from ..patterns.windows import Window, as_window
    from ..persistence.diagram import intensity_scale
    from .nulls import universal_pvalues
    from .pairs import cluster_pairs, dual_pairs, loop_pairs_3d
    from .regions import _adjacency, cluster_members, loop_cycle, stable_radius

    t0 = time.perf_counter()
    if method not in METHODS:
        raise OptionError(f"method must be one of {', '.join(METHODS)}, got '{method}'")
    if not (0 < float(alpha) < 1):
        raise OptionError(f"alpha must be between 0 and 1, got {alpha}")
    if int(min_size) < 2:
        raise OptionError(f"min_size must be at least 2, got {min_size}")
    if int(n_sims) < 19:
        raise OptionError(f"n_sims must be at least 19, got {n_sims}")
    from ..limits import MAX_SIMS
    if int(n_sims) > MAX_SIMS:
        raise OptionError(f"n_sims must be at most {MAX_SIMS}, got {n_sims}")
    pts = points if isinstance(points, np.ndarray) else read_points(points, columns)
    caught = []
    if not isinstance(window, Window):
        with warnings.catch_warnings(record=True) as w:
            warnings.simplefilter("always")
            window = as_window(window, pts)
        caught = [str(x.message) for x in w]
    pts, report = validate_pattern(pts, window, on_duplicates,
                                   np.random.default_rng(np.random.SeedSequence(int(seed))))
    n, d = pts.shape
    fams = sorted(set(families)) if families is not None else list(range(d))
    if not fams or any(q not in range(d) for q in fams):
        names = ", ".join(f"{q} ({KINDS[q]}s)" for q in range(d))
        raise OptionError(f"families must be among {names} in {d}D, got {list(families)}")
    scale = intensity_scale(n, window.measure, d)
    F = len(fams)
    families_out, feats = {}, []
    best_p, best_stat = 1.0, float("nan")
    for q in fams:
        fam, notes = _family_null(window, n, q, method, int(n_sims), int(seed), int(min_size),
                                  progress, tables)
        caught += notes
        if q == 0:
            cp = cluster_pairs(pts, int(min_size))
            birth, death = cp.birth, cp.death
        elif q < d - 1:
            lp = loop_pairs_3d(pts)
            birth, death = lp.birth, lp.death
        else:
            fv, ft, tv, tops, fverts = _filtration(pts)
            dp = dual_pairs(fv, ft, tv)
            birth, death = dp.birth, dp.death
        ratio = death / birth if len(birth) else np.empty(0)
        p_fam = fam.pvalue(ratio) if len(ratio) else np.empty(0)
        p_fw = np.minimum(1.0, F * p_fam)
        if q == 0:
            p_uni = np.full(len(ratio), np.nan)
            q_bh = np.full(len(ratio), np.nan)
        else:
            from ..inference.adjust import benjamini_hochberg
            pu = universal_pvalues(ratio)
            p_uni = np.minimum(1.0, pu * len(ratio) * F)
            q_bh = benjamini_hochberg(pu) if len(pu) and np.all(np.isfinite(pu)) else \
                np.full(len(ratio), np.nan)
        thr = fam.threshold(alpha / F)
        families_out[q] = dict(fam.describe(), threshold_ratio=thr,
                               pairs_norm=np.stack([birth, death], axis=1) * scale
                               if len(birth) else np.empty((0, 2)),
                               ratios=ratio, pvalues=p_fw,
                               universal_threshold_reached=int(np.sum(p_uni <= alpha)))
        if len(ratio) and float(p_fw.min()) < best_p:
            best_p = float(p_fw.min())
            best_stat = float(ratio[int(np.argmin(p_fw))])
        if not len(ratio):
            continue
        order = np.argsort(-ratio, kind="stable")
        sig = [int(i) for i in order if p_fw[i] <= alpha][: int(max_located)]
        chosen = sig if sig else [int(order[0])]
        adj = None if q < d - 1 else _adjacency(dp.face_tops, len(dp.top_values))
        for rank, i in enumerate(chosen, start=1):
            b, dth = float(birth[i]), float(death[i])
            cycle, length, core = None, float("nan"), None
            if q == 0:
                used = float(np.sqrt(b * dth))
                members = cluster_members(n, cp.edges, int(cp.seed[i]), used)
                c, size, area, ring = _cluster_place(pts, members)
            elif q < d - 1:               # a loop in 3D: its representative cycle
                used = b
                members = loop_cycle(pts, lp, i)
                c, size, length = _cycle_place(pts, members)
                area, ring, cycle = float("nan"), None, [int(x) for x in members]
            else:
                used = stable_radius(dp, i, adj)[0]
                members, c, size, area, ring = _loop_place(pts, i, dp, adj, tops, fverts, used)
                core = _core(pts, tops[dp.destroyer[i]])
            P = pts[members]
            feats.append(Feature(
                id=f"{KINDS[q][0].upper()}{rank}", dim=q, birth=b, death=dth,
                birth_norm=b * scale, death_norm=dth * scale, ratio=float(ratio[i]),
                pvalue=float(p_fw[i]), pvalue_family=float(p_fam[i]),
                pvalue_universal=float(p_uni[i]), qvalue_bh=float(q_bh[i]),
                significant=bool(p_fw[i] <= alpha), points=members, centre=np.asarray(c, float),
                size=float(size), area=float(area), polygon=ring,
                bbox=list(P.min(axis=0)) + list(P.max(axis=0)), scale_used=used,
                cycle=cycle, cycle_length=length,
                core=None if core is None else [*map(float, core[0]), core[1]]))
    if report.n_duplicates:
        caught.append(f"{report.n_duplicates} duplicate point(s) were handled by '{on_duplicates}'")
    return FeatureMap(statistic=best_stat, pvalue=best_p, features=feats, alpha=float(alpha),
                      n=n, dim=d, window=window.describe(), families=families_out, points=pts,
                      seed=int(seed), warnings=caught, elapsed_s=time.perf_counter() - t0)
