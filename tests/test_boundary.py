"""Geometric covariates and trust measures of the finite-window model
(lookup.patterns.boundary): closed forms of the inner parallel sets.

Steiner's formula for the inner parallel set of a convex polygon (the
perimeter shrinks by 2 cot(angle/2) t per corner; 2 pi t for a disk) is
elementary integral geometry (e.g. Chiu, Stoyan, Kendall & Mecke,
Stochastic Geometry and its Applications, 3rd ed. 2013, ch. 1).
"""
import math

import numpy as np
import pytest
import shapely

from nullatlas.lookup.patterns.boundary import DEPTH, covariates, trust_measures
from nullatlas.lookup.patterns.windows import Ball, Box, Cylinder, Disk, PolygonWindow, Rectangle


@pytest.mark.parametrize("n", [100, 1000, 20000])
def test_square_covariates_closed_form(n):
    # normalised side sqrt(n): B1 = 4/sqrt(n); band shortfall 4 h^2 / n (four right angles)
    c = covariates(Rectangle(0, 0, 3, 3), n)
    assert c[0] == 1.0
    assert c[1] == pytest.approx(4 / math.sqrt(n), rel=1e-12)
    assert c[2] == pytest.approx(4 * DEPTH ** 2 / n, rel=1e-6, abs=1e-13)
    assert c[3] == pytest.approx(1 / n)


@pytest.mark.parametrize("n", [200, 5000])
def test_disk_and_annulus_band_shortfall(n):
    # disk: tau = 2 pi, B2 = pi h^2 / n; a concentric annulus: the hole's
    # band grows as much as the outer one shrinks, B2 = 0 (pilot lesson in DESIGN.md)
    c = covariates(Disk(1, 2, 5.0), n)
    assert c[1] == pytest.approx(2 * math.sqrt(math.pi) / math.sqrt(n), rel=1e-12)
    assert c[2] == pytest.approx(math.pi * DEPTH ** 2 / n, rel=1e-6)
    ring = PolygonWindow(shapely.Point(0, 0).buffer(1.0, quad_segs=256)
                         .difference(shapely.Point(0, 0).buffer(0.5, quad_segs=256)))
    assert abs(covariates(ring, n)[2]) < 0.02 / n


def test_triangle_corner_term():
    # equilateral triangle: tau = 3 * 2 cot(30 deg) = 6 sqrt(3)
    tri = PolygonWindow(shapely.Polygon([(0, 0), (10, 0), (5, 5 * math.sqrt(3))]))
    n = 3000
    assert covariates(tri, n)[2] == pytest.approx(3 * math.sqrt(3) * DEPTH ** 2 / n, rel=1e-5)


def test_box_3d_first_order_term():
    b = Box(0, 0, 0, 1, 2, 3)
    n = 5000
    area = 2 * (1 * 2 + 1 * 3 + 2 * 3)
    kappa = area / 6 ** (2 / 3)
    assert covariates(b, n)[1] == pytest.approx(kappa * n ** (-1 / 3), rel=1e-12)
    assert covariates(b, n)[2] > 0          # edges shrink the band
    assert covariates(b, n)[4] == 0.0       # no smooth curved surface


@pytest.mark.parametrize("n", [300, 5000])
def test_curvature_term_of_ball_and_cylinder(n):
    # integrated mean curvature (H = (k1 + k2) / 2) of a sphere of radius r:
    # 4 pi r; of a cylinder's mantle: pi h (Santalo 1976, ch. 13, from memory);
    # BC = C s / n with s = (n / |W|)^(1/3)
    b = Ball(0, 0, 0, 2.0)
    s = (n / (4 / 3 * math.pi * 8)) ** (1 / 3)
    assert covariates(b, n)[4] == pytest.approx(4 * math.pi * 2.0 * s / n, rel=1e-12)
    c = Cylinder(0, 0, 0, 5.0, 1.0)
    s = (n / (math.pi * 5.0)) ** (1 / 3)
    assert covariates(c, n)[4] == pytest.approx(math.pi * 5.0 * s / n, rel=1e-12)
    # similarity invariance: the term depends on the shape and n, not the size
    assert covariates(Ball(1, 1, 1, 7.0), n)[4] == pytest.approx(covariates(b, n)[4], rel=1e-12)


def test_trust_measures_flag_narrow_parts():
    # a dumbbell: two squares joined by a neck 0.1 wide
    g = shapely.box(0, 0, 1, 1).union(shapely.box(1, 0.45, 2, 0.55)).union(shapely.box(2, 0, 3, 1))
    w = PolygonWindow(g)
    n = 500           # mean spacing sqrt(2.1/500) = 0.065: the neck is 1.5 spacings wide
    m = trust_measures(w, n)
    r = 1.5 * math.sqrt(w.measure / n)          # opening radius: half of 3 mean spacings
    # the opening removes the neck and the tips of the 8 convex corners
    lost = (0.1 + 8 * (1 - math.pi / 4) * r * r) / w.measure
    assert m["narrow_share"] == pytest.approx(lost, rel=0.03)
    assert trust_measures(w, 20000)["narrow_share"] < 0.01
    sq = trust_measures(Rectangle(0, 0, 1, 1), n)
    r1 = 1.5 / math.sqrt(n)
    assert sq["narrow_share"] == pytest.approx(4 * (1 - math.pi / 4) * r1 * r1, rel=0.03)
    assert 0 < sq["boundary_share"] < m["boundary_share"]
    # share within one mean spacing of a square's boundary: 1 - (1 - 2/sqrt(n))^2
    assert sq["boundary_share"] == pytest.approx(1 - (1 - 2 / math.sqrt(n)) ** 2, rel=1e-9)
    assert sq["second_order"] == pytest.approx(4 / math.sqrt(n), rel=1e-6)


def test_periodic_window_has_no_boundary_terms():
    from nullatlas.lookup.patterns.periodic import PeriodicBox

    w = PeriodicBox(0, 0, 2, 1)
    assert np.allclose(covariates(w, 500), [1, 0, 0, 1 / 500, 0])
    assert trust_measures(w, 500)["boundary_share"] == 0.0


def test_periodic_measure_grows_outside_the_periodic_cells():
    # 1 where the table's periodic cells bracket n, the factor outside them beyond
    from nullatlas.lookup.patterns.periodic import PeriodicBox

    w = PeriodicBox(0, 0, 1, 4)
    assert trust_measures(w, 700, periodic_n_range=(100, 5000))["periodic"] == 1.0
    assert trust_measures(w, 20000, periodic_n_range=(100, 5000))["periodic"] == pytest.approx(4.0)
    assert trust_measures(w, 50, periodic_n_range=(100, 5000))["periodic"] == pytest.approx(2.0)
    assert trust_measures(w, 700)["periodic"] == 1.0
    assert trust_measures(Rectangle(0, 0, 1, 4), 700, periodic_n_range=(100, 5000))["periodic"] == 0.0


def test_periodic_box_of_any_aspect_uses_the_periodic_cells():
    # no boundary anywhere: a 1:4 periodic rectangle at n = 700 takes the
    # periodic square's cells at 500 and 1000 (not the bounded shapes' model)
    from nullatlas.lookup.inference.nullmoments import default_tables, null_moments
    from nullatlas.lookup.patterns.periodic import PeriodicBox

    w = PeriodicBox(0, 0, 1, 4)
    nm = null_moments(default_tables(), w, 700, "total0")
    assert nm.route == "model"
    assert nm.cells and all(c.startswith("torus2-") for c in nm.cells), nm.cells
    sq = null_moments(default_tables(), PeriodicBox(0, 0, 2, 2), 700, "total0")
    assert sq.route == "interpolated"
    np.testing.assert_allclose(nm.mean, sq.mean, rtol=1e-12)
    assert nm.extra["periodic_n_range"][0] <= 700 <= nm.extra["periodic_n_range"][1]
