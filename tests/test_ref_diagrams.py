"""Exact persistence diagrams of small point sets (outside check values).

Source of every expected value: /work/shared/REFERENCES.md, "Exact small
cases (elementary geometry, common knowledge)".  In the alpha/Čech
filtration by ball radius r an edge of length l is born at l/2 (when it is
Gabriel) and a triangle/tetrahedron that contains its circumcentre fills in
at its circumradius.  Radius units: ``alpha_diagram(points)`` without a
measure leaves radii unnormalised.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from nullatlas.lookup.persistence.diagram import alpha_diagram, intensity_scale

TOL = 1e-12  # elementary geometry is exact; only floating-point rounding remains

SQ3 = math.sqrt(3.0)


def _sorted_pairs(p):
    p = np.asarray(p, float).reshape(-1, 2)
    return p[np.lexsort((p[:, 1], p[:, 0]))]


def _h0_deaths(diag):
    return np.sort(diag.pairs[0][:, 1])


def _check_h0_births_zero(diag):
    assert np.all(diag.pairs[0][:, 0] == 0.0)
    # exactly one class of H0 never dies (a connected set)
    assert np.count_nonzero(np.isinf(diag.pairs[0][:, 1])) == 1


def equilateral_triangle():
    return np.array([[0.0, 0.0], [1.0, 0.0], [0.5, SQ3 / 2]])


def unit_square():
    return np.array([[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]])


def regular_hexagon():
    k = np.arange(6)
    return np.column_stack([np.cos(k * math.pi / 3), np.sin(k * math.pi / 3)])


def regular_tetrahedron():
    # alternate vertices of the cube [-1, 1]^3 have edge 2*sqrt(2): rescale to 1
    v = np.array([[1, 1, 1], [1, -1, -1], [-1, 1, -1], [-1, -1, 1]], float)
    return v / math.sqrt(8.0)


def test_equilateral_triangle():
    # REFERENCES.md, exact small cases: H0 deaths 0.5, 0.5 (+ one infinite);
    # H1 (0.5, 1/sqrt(3))
    d = alpha_diagram(equilateral_triangle())
    assert d.dim == 2 and d.n == 3 and d.max_dim == 1 and d.scale == 1.0
    _check_h0_births_zero(d)
    np.testing.assert_allclose(_h0_deaths(d)[:2], [0.5, 0.5], rtol=TOL, atol=TOL)
    np.testing.assert_allclose(d.pairs[1], [[0.5, 1 / SQ3]], rtol=TOL, atol=TOL)


def test_unit_square():
    # REFERENCES.md, exact small cases: H1 (0.5, sqrt(2)/2); H0 = three sides
    # of length 1 (MST), deaths 0.5.  Four cocircular points: degenerate
    # Delaunay triangulation, the two triangles share the circumradius.
    d = alpha_diagram(unit_square())
    _check_h0_births_zero(d)
    np.testing.assert_allclose(_h0_deaths(d)[:3], [0.5] * 3, rtol=TOL, atol=TOL)
    np.testing.assert_allclose(d.pairs[1], [[0.5, math.sqrt(2) / 2]], rtol=TOL, atol=TOL)


def test_regular_hexagon():
    # REFERENCES.md, exact small cases: regular hexagon side 1 -> H1 (0.5, 1.0)
    # (circumradius of the hexagon = side = 1); H0 deaths five times 0.5.
    d = alpha_diagram(regular_hexagon())
    _check_h0_births_zero(d)
    np.testing.assert_allclose(_h0_deaths(d)[:5], [0.5] * 5, rtol=TOL, atol=TOL)
    np.testing.assert_allclose(d.pairs[1], [[0.5, 1.0]], rtol=TOL, atol=TOL)


@pytest.mark.parametrize("name, pts, h0", [
    # REFERENCES.md, exact small cases: right or obtuse triangle -> no H1.
    # Right triangle 3-4-5: the circumcentre lies on the hypotenuse, which
    # enters together with the triangle (zero-length pair, not stored).
    ("right 3-4-5", [[0.0, 0.0], [3.0, 0.0], [0.0, 4.0]], [1.5, 2.0]),
    ("right isosceles", [[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]], [0.5, 0.5]),
    # Obtuse: the long side is not Gabriel; H0 deaths are half the two
    # shorter sides |(1, 0.5)| = sqrt(1.25) and |(3, -0.5)| = sqrt(9.25).
    ("obtuse", [[0.0, 0.0], [4.0, 0.0], [1.0, 0.5]], [math.sqrt(1.25) / 2, math.sqrt(9.25) / 2]),
])
def test_right_and_obtuse_triangles_have_no_h1(name, pts, h0):
    d = alpha_diagram(np.array(pts))
    _check_h0_births_zero(d)
    # No H1 at all: zero-length pairs (here the hypotenuse entering with the
    # triangle) are not stored (diagram.py docstring).
    assert d.pairs[1].shape == (0, 2), f"{name}: unexpected H1 {d.pairs[1]}"
    np.testing.assert_allclose(_h0_deaths(d)[:2], h0, rtol=TOL, atol=TOL)


@pytest.mark.parametrize("offset", [0.0, 0.3, 1.0e3])
def test_zero_length_pairs_are_not_stored(offset):
    # REFERENCES.md, exact small cases: right triangle -> no H1 at all.
    # Regression: with centred coordinates the hypotenuse got squared radius
    # 0.5 and the triangle 0.5000000000000001, which once left a stored H1
    # pair of length 0 (and made summaries.silhouette return NaN).
    d = alpha_diagram(np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]]) + offset)
    assert d.pairs[1].shape == (0, 2), d.pairs[1]


@pytest.mark.parametrize("shift, factor", [(0.0, 1.0), (0.1, 1.0), (0.0, 0.1)])
def test_square_lattice_has_one_loop_per_cell(shift, factor):
    # Elementary geometry (REFERENCES.md, unit square case, repeated): a
    # 10 x 10 square lattice of spacing s has 81 unit cells, each a loop
    # (s/2, s/sqrt(2)); no spurious extra pairs from rounding of the
    # cocircular quadruples.
    g = np.stack(np.meshgrid(np.arange(10.0), np.arange(10.0)), -1).reshape(-1, 2)
    d = alpha_diagram(g * factor + shift)
    assert d.pairs[1].shape == (81, 2)
    np.testing.assert_allclose(d.pairs[1], np.tile([0.5, math.sqrt(0.5)], (81, 1)) * factor,
                               rtol=1e-9)
    deaths = _h0_deaths(d)
    np.testing.assert_allclose(deaths[:-1], 0.5 * factor, rtol=1e-9)


def test_regular_tetrahedron():
    # REFERENCES.md, exact small cases: regular tetrahedron edge 1 ->
    # H1 three (0.5, 1/sqrt(3)); H2 (1/sqrt(3), sqrt(3/8)); H0 deaths 3 x 0.5.
    d = alpha_diagram(regular_tetrahedron())
    assert d.dim == 3 and d.max_dim == 2
    _check_h0_births_zero(d)
    np.testing.assert_allclose(_h0_deaths(d)[:3], [0.5] * 3, rtol=TOL, atol=TOL)
    np.testing.assert_allclose(_sorted_pairs(d.pairs[1]), [[0.5, 1 / SQ3]] * 3, rtol=TOL, atol=TOL)
    np.testing.assert_allclose(d.pairs[2], [[1 / SQ3, math.sqrt(3 / 8)]], rtol=TOL, atol=TOL)


def _rotation(d, seed):
    q, _ = np.linalg.qr(np.random.default_rng(seed).standard_normal((d, d)))
    return q


@pytest.mark.parametrize("make, expected", [
    (equilateral_triangle, {1: [[0.5, 1 / SQ3]]}),
    (unit_square, {1: [[0.5, math.sqrt(2) / 2]]}),
    (regular_tetrahedron, {1: [[0.5, 1 / SQ3]] * 3, 2: [[1 / SQ3, math.sqrt(3 / 8)]]}),
])
def test_exact_cases_are_invariant_under_rigid_motions(make, expected):
    # Same exact values (REFERENCES.md) after a rotation and a large
    # translation: the filtration depends only on distances.
    p = make()
    moved = p @ _rotation(p.shape[1], 3).T + 1.0e4
    d = alpha_diagram(moved)
    for q, pairs in expected.items():
        np.testing.assert_allclose(_sorted_pairs(d.pairs[q]), pairs, rtol=1e-9, atol=1e-9)


@pytest.mark.parametrize("dim, measure", [(2, 7.5), (2, 1.0), (3, 0.3)])
def test_normalised_scale(dim, measure):
    # DESIGN.md / REFERENCES.md: rho = r * (n / |W|)^(1/d).  With a measure
    # the pairs are the radius pairs times that factor, and radii() undoes it.
    rng = np.random.default_rng(11 + dim)
    pts = rng.random((60, dim))
    raw = alpha_diagram(pts)
    norm = alpha_diagram(pts, measure)
    factor = (60 / measure) ** (1.0 / dim)
    assert norm.scale == pytest.approx(factor, rel=1e-15)
    assert intensity_scale(60, measure, dim) == pytest.approx(factor, rel=1e-15)
    for q in range(dim):
        assert raw.pairs[q].shape == norm.pairs[q].shape
        np.testing.assert_allclose(norm.pairs[q], raw.pairs[q] * factor, rtol=1e-13)
        np.testing.assert_allclose(norm.radii(q), raw.pairs[q], rtol=1e-13)


def test_normalised_diagram_is_similarity_invariant():
    # Under rho = r (n/|W|)^(1/d), scaling the points by s and the window
    # measure by s^d leaves the normalised diagram unchanged (DESIGN.md).
    rng = np.random.default_rng(5)
    pts = rng.random((80, 2))
    s = 37.0
    a = alpha_diagram(pts, 1.0)
    b = alpha_diagram(pts @ _rotation(2, 9).T * s + 5.0, s ** 2)
    for q in range(2):
        np.testing.assert_allclose(np.sort(b.pairs[q], axis=0), np.sort(a.pairs[q], axis=0),
                                   rtol=1e-10, atol=1e-12)


def test_normalised_equilateral_triangle():
    # Exact case with a measure: triangle side 1 (REFERENCES.md) in a window
    # of area 3/4, so n/|W| = 4 and the factor (n/|W|)^(1/2) is exactly 2.
    d = alpha_diagram(equilateral_triangle(), 0.75)
    np.testing.assert_allclose(d.pairs[1], [[1.0, 2 / SQ3]], rtol=TOL)
    np.testing.assert_allclose(_h0_deaths(d)[:2], [1.0, 1.0], rtol=TOL)
