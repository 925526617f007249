"""Summaries against direct (slow, obviously correct) computations."""
import gudhi
import numpy as np
import pytest

from nullatlas.lookup.persistence.diagram import Diagram, alpha_diagram
from nullatlas.lookup.summaries import grids, topological


def random_diagram(seed, n=60, d=2):
    pts = np.random.default_rng(seed).random((n, d))
    return pts, alpha_diagram(pts, 1.0)


@pytest.mark.parametrize("d", [2, 3])
def test_euler_curve_equals_signed_simplex_count(d):
    # Euler–Poincaré: chi(K_r) = sum over simplices with value <= r^2 of (-1)^dim,
    # counted directly on gudhi's simplex tree (independent of the diagram).
    pts = np.random.default_rng(d).random((80, d))
    dg = alpha_diagram(pts, 1.0)
    st = gudhi.AlphaComplex(points=pts - pts.mean(axis=0)).create_simplex_tree()
    filt = np.array([f for _, f in st.get_filtration()])
    dims = np.array([len(s) - 1 for s, _ in st.get_filtration()])
    r2 = (grids.RHO / dg.scale) ** 2
    direct = np.array([np.sum((-1.0) ** dims[filt <= v]) for v in r2]) / len(pts)
    # a grid point may sit exactly at a filtration value; compare away from ties
    np.testing.assert_allclose(topological.euler_curve(dg), direct, atol=1e-12)


def test_betti_and_persistent_betti_by_counting():
    _, dg = random_diagram(1)
    for q in (0, 1):
        p = dg.pairs[q]
        brute = [np.sum((p[:, 0] <= x) & (x < p[:, 1])) / dg.n for x in grids.RHO]
        np.testing.assert_allclose(topological.betti_curve(dg, q), brute)
        pb = [np.sum((p[:, 0] <= s) & (p[:, 1] > t)) / dg.n for s, t in grids.PBETTI_PAIRS]
        np.testing.assert_allclose(topological.persistent_betti(dg, q), pb)
    # beta_0 at rho -> 0+ is n/n (every point its own component)
    assert topological.betti_curve(dg, 0, np.array([1e-9]))[0] == 1.0


def test_apf_total_max_silhouette_by_loops():
    _, dg = random_diagram(2)
    p = dg.finite(1)
    life = p[:, 1] - p[:, 0]
    age = p.mean(axis=1)
    apf = [life[age <= m].sum() / dg.n for m in grids.APF_AGE]
    np.testing.assert_allclose(topological.apf(dg, 1), apf)
    # APF tends to total persistence (Biscio & Møller 2019: APF(inf) = total)
    assert topological.apf(dg, 1, np.array([1e9]))[0] == pytest.approx(topological.total_persistence(dg, 1))
    assert topological.total_persistence(dg, 1) == pytest.approx(life.sum() / dg.n)
    assert topological.total_persistence(dg, 1, alpha=2) == pytest.approx((life ** 2).sum() / dg.n)
    assert topological.max_lifetime(dg, 1) == pytest.approx(life.max())
    assert topological.max_ratio(dg, 1) == pytest.approx((p[:, 1] / p[:, 0]).max())
    sil = []
    for t in grids.SILHOUETTE_T:
        tent = np.maximum(0, np.minimum(t - p[:, 0], p[:, 1] - t))
        sil.append((life * tent).sum() / life.sum())
    np.testing.assert_allclose(topological.silhouette(dg, 1), sil)


def test_h0_total_persistence_is_half_mst_length():
    # H0 deaths are half the MST edges (REFERENCES.md), so total0 = MST length / (2n)
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import minimum_spanning_tree
    from scipy.spatial import Delaunay

    pts = np.random.default_rng(3).random((100, 2))
    tri = Delaunay(pts).simplices
    e = np.unique(np.sort(np.vstack([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [0, 2]]]), axis=1), axis=0)
    w = np.linalg.norm(pts[e[:, 0]] - pts[e[:, 1]], axis=1)
    mst = minimum_spanning_tree(coo_matrix((w, (e[:, 0], e[:, 1])), shape=(100, 100)))
    dg = alpha_diagram(pts, 1.0)
    assert topological.total_persistence(dg, 0) == pytest.approx(mst.sum() / 2 * dg.scale / 100, rel=1e-12)


def test_empty_dimensions():
    dg = Diagram(pairs=[np.array([[0, 0.5], [0, np.inf]]), np.empty((0, 2))], n=2, dim=2)
    assert topological.total_persistence(dg, 1) == 0
    assert topological.max_lifetime(dg, 1) == 0
    assert topological.max_ratio(dg, 1) == 1
    assert not topological.apf(dg, 1).any() and not topological.silhouette(dg, 1).any()
    np.testing.assert_allclose(topological.euler_curve(dg, np.array([0.1, 1.0])), [1.0, 0.5])


def test_silhouette_and_persistent_betti_over_many_blocks():
    """More pairs than one block of the silhouette's tents (65,536): the
    blocks add up to the brute-force sums, and the persistent Betti counts
    of a large diagram (ties and an infinite class included) are exact."""
    from nullatlas.lookup.persistence.diagram import Diagram

    rng = np.random.default_rng(4)
    b = np.round(rng.uniform(0, 1.0, 150_000), 2)          # many ties
    d = b + np.round(rng.exponential(0.3, 150_000), 2)
    h1 = np.column_stack([b, d])
    h0 = np.vstack([np.column_stack([np.zeros(5), rng.uniform(0, 1, 5)]), [[0.0, np.inf]]])
    dg = Diagram(pairs=[h0, h1], n=200_000, dim=2)
    keep = d > b
    life = (d - b)[keep]
    sil = [(life * np.maximum(0, np.minimum(t - b[keep], d[keep] - t))).sum() / life.sum()
           for t in grids.SILHOUETTE_T]
    np.testing.assert_allclose(topological.silhouette(dg, 1), sil, rtol=1e-12)
    for q, p in ((0, h0), (1, h1)):
        pb = [np.sum((p[:, 0] <= s) & (p[:, 1] > t)) / dg.n for s, t in grids.PBETTI_PAIRS]
        np.testing.assert_array_equal(topological.persistent_betti(dg, q), pb)
