"""Mean Euler characteristic curve of CSR versus the Miles formulae.

Source: /work/shared/REFERENCES.md, "Euler characteristic of the union of
balls (Miles formulae)": by the nerve theorem the Čech complex at radius r
has the Euler characteristic of the union of balls (a Boolean model).  With
unit intensity and eta = volume of one ball,

    d = 2:  chi per point = exp(-eta) (1 - eta),                     eta = pi rho^2
    d = 3:  chi per point = exp(-eta) (1 - 3 eta + (3 pi^2/32) eta^2), eta = 4/3 pi rho^3

(Chiu, Stoyan, Kendall & Mecke, Stochastic Geometry and its Applications,
3rd ed., 2013, Boolean model chapter; Mecke & Wagner, J. Stat. Phys. 64,
1991 -- the latter from memory per REFERENCES.md).

A finite window biases chi/n by a boundary term of order n^(-1/d).  Two
unbiased routes are used (both suggested in REFERENCES.md):

* minus-sampling: each simplex of the alpha complex at radius r is shared
  equally among its vertices, and only vertices farther than 2r from the
  boundary are averaged.  Whether a simplex is in the alpha complex at r
  depends only on the points within 2r of any of its vertices, so those
  vertices see the same complex as in an infinite pattern.  This is checked
  against ``topological.euler_curve`` through the exact Euler--Poincaré
  identity (same simplices, same normalisation) on the same patterns.
* large n with the finite-window model of DESIGN.md,
  E[chi/n] = mu + a n^(-1/d) + b n^(-2/d): from patterns of n and
  2^d n points, 2 S(2^d n) - S(n) = mu + O(n^(-2/d)) (Richardson
  extrapolation), with an allowance for the remaining term stated below.

Every test also checks that plausible mistakes (sign error, missing pi,
diameter instead of radius, the 2D formula in 3D, no exp factor) would be
rejected by its tolerance, so the tolerances are demonstrably tight.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from nullatlas.lookup.patterns import windows
from nullatlas.lookup.persistence.diagram import alpha_diagram, intensity_scale
from nullatlas.lookup.summaries import grids, topological

RHO = grids.RHO


def miles(rho, d):
    """Chi per point of the Boolean model of unit intensity (REFERENCES.md)."""
    rho = np.asarray(rho, float)
    if d == 2:
        eta = math.pi * rho ** 2
        return np.exp(-eta) * (1 - eta)
    eta = 4.0 / 3.0 * math.pi * rho ** 3
    return np.exp(-eta) * (1 - 3 * eta + 3 * math.pi ** 2 / 32 * eta ** 2)


def wrong_formulas(d):
    """Plausible mistakes that the tolerances must reject."""
    out = {
        "diameter instead of radius": lambda r: miles(2 * r, d),
        "radius read as diameter": lambda r: miles(r / 2, d),
        "squared radius not rooted": lambda r: miles(r ** 2, d),
    }
    if d == 2:
        out.update({
            "sign of eta": lambda r: np.exp(-math.pi * r ** 2) * (1 + math.pi * r ** 2),
            "missing pi": lambda r: np.exp(-r ** 2) * (1 - r ** 2),
            "no exp factor (clipped)": lambda r: np.clip(1 - math.pi * r ** 2, -1, 1),
        })
    else:
        eta = lambda r: 4.0 / 3.0 * math.pi * r ** 3  # noqa: E731
        out.update({
            "sign of 3 eta": lambda r: np.exp(-eta(r)) * (1 + 3 * eta(r)
                                                          + 3 * math.pi ** 2 / 32 * eta(r) ** 2),
            "coefficient pi^2/32": lambda r: np.exp(-eta(r)) * (1 - 3 * eta(r)
                                                                + math.pi ** 2 / 32 * eta(r) ** 2),
            "2D formula": lambda r: np.exp(-eta(r)) * (1 - eta(r)),
            "missing 4/3 in eta": lambda r: miles(r * 0.75 ** (1 / 3), 3),
        })
    return out


def assert_rejects_wrong(estimate, tol, d):
    """Each wrong formula must miss the estimate by more than 2 * ``tol`` somewhere."""
    for name, f in wrong_formulas(d).items():
        dev = np.abs(estimate - f(RHO)).max()
        assert dev > 2 * tol, f"tolerance {tol} too loose to reject '{name}' (off by {dev:.3g})"


# ---------------------------------------------------------------------------
# Simplex counts of the alpha complex (gudhi), shared among vertices
# ---------------------------------------------------------------------------

def vertex_euler_shares(points, scale, grid=RHO):
    """c[i, g] = sum over simplices s containing vertex i with alpha radius
    <= grid[g] / scale of (-1)^dim(s) / (dim(s) + 1).

    Summing c over all vertices gives the Euler characteristic of the alpha
    complex (Euler--Poincaré: alternating count of simplices).
    """
    import gudhi

    n = len(points)
    st = gudhi.AlphaComplex(points=np.asarray(points, float)).create_simplex_tree()
    diff = np.zeros((n, len(grid) + 1))
    by_dim = {}
    for simplex, filt in st.get_filtration():
        by_dim.setdefault(len(simplex) - 1, ([], []))
        by_dim[len(simplex) - 1][0].append(simplex)
        by_dim[len(simplex) - 1][1].append(filt)
    for k, (verts, filt) in by_dim.items():
        verts = np.asarray(verts, dtype=np.int64).reshape(-1, k + 1)
        rho = np.sqrt(np.maximum(np.asarray(filt), 0.0)) * scale   # gudhi: squared radii
        g = np.searchsorted(grid, rho, side="left")   # first grid point with grid >= rho
        w = (-1) ** k / (k + 1)
        for j in range(k + 1):
            np.add.at(diff, (verts[:, j], g), w)
    return np.cumsum(diff, axis=1)[:, :-1]


def minus_sampled_chi(points, window, grid=RHO):
    """Per-point chi(rho), averaged over vertices farther than 2r from dW."""
    n, d = points.shape
    scale = intensity_scale(n, window.measure, d)
    c = vertex_euler_shares(points, scale, grid)
    b = window.boundary_distance(points) * scale         # normalised distance to dW
    inner = b[:, None] > 2 * grid[None, :]
    return (c * inner).sum(axis=0) / inner.sum(axis=0), c


# ---------------------------------------------------------------------------
# Exact identity: euler_curve == alternating simplex count
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("window", [windows.Rectangle(0, 0, 2, 1), windows.Box(0, 0, 0, 1, 1, 1)],
                         ids=["2d", "3d"])
def test_euler_curve_equals_alternating_simplex_count(window):
    # Euler--Poincaré formula (Edelsbrunner & Harer, Computational Topology,
    # 2010, as cited in DESIGN.md): sum_q (-1)^q beta_q = sum_k (-1)^k #k-simplices.
    # Exact integer identity; also pins down the radius convention
    # (sqrt of gudhi's squared radius, times (n/|W|)^(1/d)).
    rng = np.random.default_rng(2024 + window.dim)
    for n in (50, 400):
        pts = window.sample(n, rng)
        scale = intensity_scale(n, window.measure, window.dim)
        chi = vertex_euler_shares(pts, scale).sum(axis=0) / n
        got = topological.euler_curve(alpha_diagram(pts, window.measure))
        np.testing.assert_allclose(got, chi, rtol=0, atol=1e-12)


# ---------------------------------------------------------------------------
# Miles formulae by minus-sampling (no boundary bias)
# ---------------------------------------------------------------------------

def test_miles_2d_minus_sampling():
    # REFERENCES.md Miles formula, d = 2.  16 CSR patterns of 5000 points in
    # the unit square; the standard error of the mean is below 0.002 at
    # every rho (pilot run; asserted below).  Tolerance 0.01 absolute: about
    # 5 standard errors (60 correlated grid points) plus the O(1/n)
    # binomial-vs-Poisson difference (< 1e-3).  Wrong formulas miss by > 0.1.
    W = windows.Rectangle(0, 0, 1, 1)
    rng = np.random.default_rng(7)
    est = []
    for _ in range(16):
        pts = W.sample(5000, rng)
        e, c = minus_sampled_chi(pts, W)
        # the same simplices give exactly the library's curve on the full window
        np.testing.assert_allclose(c.sum(axis=0) / len(pts),
                                   topological.euler_curve(alpha_diagram(pts, W.measure)), atol=1e-12)
        est.append(e)
    est = np.array(est)
    mean = est.mean(axis=0)
    se = est.std(axis=0, ddof=1) / np.sqrt(len(est))
    tol = 0.01
    assert se.max() < tol / 4
    np.testing.assert_allclose(mean, miles(RHO, 2), rtol=0, atol=tol)
    assert_rejects_wrong(mean, tol, 2)


def test_miles_3d_minus_sampling():
    # REFERENCES.md Miles formula, d = 3.  8 CSR patterns of 4000 points in
    # the unit cube (normalised side 15.9; at rho = 1.5 the inner cube keeps
    # a quarter of the points).  Standard error of the mean below 0.0075
    # everywhere (pilot run; asserted below); tolerance 0.03 absolute (4 SE
    # plus O(1/n)).  Wrong formulas miss by > 0.25.
    W = windows.Box(0, 0, 0, 1, 1, 1)
    rng = np.random.default_rng(8)
    est = np.array([minus_sampled_chi(W.sample(4000, rng), W)[0] for _ in range(8)])
    mean = est.mean(axis=0)
    se = est.std(axis=0, ddof=1) / np.sqrt(len(est))
    tol = 0.03
    assert se.max() < tol / 3.5
    np.testing.assert_allclose(mean, miles(RHO, 3), rtol=0, atol=tol)
    assert_rejects_wrong(mean, tol, 3)


# ---------------------------------------------------------------------------
# Miles formulae through topological.euler_curve on the full window
# ---------------------------------------------------------------------------

def _mean_euler_curve(window, n, reps, seed):
    rng = np.random.default_rng(seed)
    cs = np.array([topological.euler_curve(alpha_diagram(window.sample(n, rng), window.measure))
                   for _ in range(reps)])
    return cs.mean(axis=0), cs.var(axis=0, ddof=1) / reps


def test_miles_2d_euler_curve_extrapolated():
    # REFERENCES.md Miles formula, d = 2, with the library's euler_curve on
    # the full unit square.  Raw means at n = 1000 are off by up to
    # 0.76/sqrt(n) = 0.024 (the boundary term); the extrapolation
    # 2 S(4000) - S(1000) removes it, leaving O(1/n) < 0.002.  Standard
    # error about 0.003; tolerance 0.015 absolute (4 SE + 0.002 + margin).
    W = windows.Rectangle(0, 0, 1, 1)
    m1, v1 = _mean_euler_curve(W, 1000, 100, 11)
    m2, v2 = _mean_euler_curve(W, 4000, 25, 12)
    rich = 2 * m2 - m1
    se = np.sqrt(4 * v2 + v1)
    tol = 0.015
    assert se.max() < 0.004
    np.testing.assert_allclose(rich, miles(RHO, 2), rtol=0, atol=tol)
    assert_rejects_wrong(rich, tol, 2)
    # The boundary term is real: the raw n = 1000 mean is biased upwards by
    # more than the tolerance somewhere (so the window effect is not ignored).
    assert np.max(m1 - miles(RHO, 2)) > tol


def test_miles_3d_euler_curve_extrapolated():
    # REFERENCES.md Miles formula, d = 3, with the library's euler_curve on
    # the full unit cube.  The boundary bias is of order n^(-1/3) (up to
    # 1.1/n^(1/3) = 0.14 at n = 500); the extrapolation 2 S(4000) - S(500)
    # leaves an O(n^(-2/3)) term, measured below 0.015 in a pilot run.
    # Standard error about 0.01; tolerance 0.06 absolute (4 SE + 0.015 +
    # margin) -- still far tighter than any wrong formula (>= 0.25 off).
    W = windows.Box(0, 0, 0, 1, 1, 1)
    m1, v1 = _mean_euler_curve(W, 500, 48, 21)
    m2, v2 = _mean_euler_curve(W, 4000, 6, 22)
    rich = 2 * m2 - m1
    se = np.sqrt(4 * v2 + v1)
    tol = 0.06
    assert se.max() < 0.015
    np.testing.assert_allclose(rich, miles(RHO, 3), rtol=0, atol=tol)
    assert_rejects_wrong(rich, tol, 3)
    assert np.max(np.abs(m1 - miles(RHO, 3))) > tol
