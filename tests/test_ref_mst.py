"""H0 of the alpha (Čech) filtration equals the Euclidean minimum spanning tree.

Source: /work/shared/REFERENCES.md, "H0 equals the Euclidean minimum spanning
tree (exact)": the H0 death radii are half the Euclidean MST edge lengths.
Reference implementation outside the project:
``scipy.sparse.csgraph.minimum_spanning_tree`` on the edges of
``scipy.spatial.Delaunay`` (the Euclidean MST is a subgraph of the Delaunay
graph).  Must agree to floating-point precision.
"""
from __future__ import annotations

import itertools

import numpy as np
import pytest
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components, minimum_spanning_tree
from scipy.spatial import Delaunay

from nullatlas.lookup.persistence.diagram import alpha_diagram
from nullatlas.lookup.summaries import topological

RTOL = 1e-12  # REFERENCES.md: "must agree to floating-point precision"


def mst_edge_lengths(points: np.ndarray) -> np.ndarray:
    """Sorted Euclidean MST edge lengths (scipy Delaunay + csgraph)."""
    n, d = points.shape
    simp = Delaunay(points).simplices
    edges = np.concatenate([simp[:, [i, j]] for i, j in itertools.combinations(range(d + 1), 2)])
    edges = np.unique(np.sort(edges, axis=1), axis=0)
    w = np.linalg.norm(points[edges[:, 0]] - points[edges[:, 1]], axis=1)
    graph = coo_matrix((w, (edges[:, 0], edges[:, 1])), shape=(n, n)).tocsr()
    mst = minimum_spanning_tree(graph)
    assert mst.nnz == n - 1
    assert connected_components(mst, directed=False)[0] == 1
    return np.sort(mst.data)


def _h0_finite_deaths(diag):
    h0 = diag.pairs[0]
    assert np.all(h0[:, 0] == 0.0)                    # every H0 class is born at 0
    assert np.count_nonzero(np.isinf(h0[:, 1])) == 1  # one component survives
    return np.sort(h0[np.isfinite(h0[:, 1]), 1])


def _pattern(d, seed, n=200):
    return np.random.default_rng(seed).random((n, d))


@pytest.mark.parametrize("d", [2, 3])
@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_h0_deaths_are_half_mst_edges(d, seed):
    # REFERENCES.md: H0 deaths = MST edge lengths / 2 (exact)
    pts = _pattern(d, seed)
    ref = mst_edge_lengths(pts) / 2
    deaths = _h0_finite_deaths(alpha_diagram(pts))
    assert len(deaths) == len(pts) - 1
    np.testing.assert_allclose(deaths, ref, rtol=RTOL, atol=0)


@pytest.mark.parametrize("d, box", [(2, (1000.0, 3.0)), (3, (250.0, 0.01))])
def test_h0_mst_offset_and_anisotropic_window(d, box):
    # Same exact identity (REFERENCES.md) for a pattern far from the origin
    # and on an elongated window: the filtration depends on distances only.
    rng = np.random.default_rng(40 + d)
    sides = np.array([box[0], box[1], box[1]][:d])
    pts = 5.0e3 + rng.random((200, d)) * sides
    ref = mst_edge_lengths(pts) / 2
    deaths = _h0_finite_deaths(alpha_diagram(pts))
    np.testing.assert_allclose(deaths, ref, rtol=1e-10, atol=0)


@pytest.mark.parametrize("d", [2, 3])
def test_h0_normalised_and_total_persistence(d):
    # With a window measure the deaths are (MST/2) * (n/|W|)^(1/d)
    # (DESIGN.md normalisation), and total H0 persistence per point is
    # (1/n) * sum of those deaths = half the MST length, normalised, per point.
    n, measure = 200, 2.5
    pts = _pattern(d, 77 + d)
    scale = (n / measure) ** (1.0 / d)
    mst = mst_edge_lengths(pts)
    diag = alpha_diagram(pts, measure)
    np.testing.assert_allclose(_h0_finite_deaths(diag), mst / 2 * scale, rtol=RTOL, atol=0)
    assert topological.total_persistence(diag, 0) == pytest.approx(mst.sum() / 2 * scale / n, rel=1e-12)
