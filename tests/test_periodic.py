"""Periodic windows (flat tori): the window, exact periodic alpha persistence,
periodic distances, and the command line."""
import json
import math

import numpy as np
import pytest
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import minimum_spanning_tree

from nullatlas.lookup.cli import main
from nullatlas.lookup.errors import NullAtlasError, PointsError, WindowError
from nullatlas.lookup.patterns.periodic import PeriodicBox
from nullatlas.lookup.patterns.windows import parse_window
from nullatlas.lookup.persistence.periodic import periodic_diagram
from nullatlas.lookup.summaries import grids
from nullatlas.lookup.summaries import topological as summaries
from nullatlas.lookup.summaries.statistics import STATISTICS, PatternSummary, compute

UNIT = {2: PeriodicBox(0, 0, 1, 1), 3: PeriodicBox(0, 0, 0, 1, 1, 1)}


def dyadic(n, d, seed, bits=16):
    """n distinct points on the grid 2^-bits Z^d in [0, 1)^d: sums and squares of
    their coordinates are exact doubles, so shifts and distances are exact."""
    rng = np.random.default_rng(seed)
    k = rng.choice(2 ** (bits * d), size=n, replace=False)
    idx = np.stack([(k >> (bits * a)) & (2 ** bits - 1) for a in range(d)], axis=1)
    return idx.astype(float) / 2.0 ** bits


def same(a, b):
    return len(a.pairs) == len(b.pairs) and all(np.array_equal(x, y) for x, y in zip(a.pairs, b.pairs))


# --------------------------------------------------------------------------------------
# The window
# --------------------------------------------------------------------------------------


def test_window_geometry_and_spec():
    w = parse_window("torus:0,0,4,2")
    assert isinstance(w, PeriodicBox) and w.dim == 2 and w.periodic and w.kind == "torus"
    assert w.measure == 8.0 and w.boundary_measure == 0.0 and w.kappa == 0.0
    assert np.all(np.isinf(w.boundary_distance(np.array([[0.0, 0.0], [2.0, 1.0]]))))
    assert w.inner_content(3.0) == 8.0 and np.all(w.opened_content(np.array([0.1, 9.0])) == 8.0)
    assert parse_window(w.spec()).spec() == w.spec() == "torus:0,0,4,2"
    w3 = parse_window("torus:0,0,0,1,2,3")
    assert w3.dim == 3 and w3.measure == 6.0 and w3.describe()["periodic"] is True
    x = w3.sample(1000, np.random.default_rng(0))
    assert x.shape == (1000, 3) and w3.contains(x).all()
    for bad in ("torus:0,0,1", "torus:0,0,1,x", "torus:1,0,0,1", "torus:0,0,0,1,1,nan"):
        with pytest.raises(WindowError):
            parse_window(bad)


# --------------------------------------------------------------------------------------
# (a) translation invariance, bit for bit; both engines agree bit for bit
# --------------------------------------------------------------------------------------


@pytest.mark.parametrize("d,n", [(2, 600), (3, 300)])
def test_translation_invariance_bit_identical(d, n):
    p = dyadic(n, d, seed=d)
    box = UNIT[d]
    ref = periodic_diagram(p, box)
    for seed in (1, 2, 3):
        shift = dyadic(1, d, seed=100 + seed)[0]
        moved = np.mod(p + shift, 1.0)                  # exact on the dyadic grid
        got = periodic_diagram(moved[::-1], box)         # and a different point order
        assert same(got, ref)
    # a translation by a non-dyadic vector changes the diagram by rounding only
    moved = np.mod(p + 0.1234567, 1.0)
    other = periodic_diagram(moved, box)
    for q in range(d + 1):
        assert np.allclose(other.pairs[q], ref.pairs[q], rtol=1e-12, atol=1e-12)
    assert same(periodic_diagram(p, box, engine="gudhi"), ref)


@pytest.mark.parametrize("n,bits", [(40, 16), (300, 16), (3000, 16), (300, 8), (1500, 10),
                                    (500, 6)])
def test_engines_agree_bit_for_bit_2d(n, bits):
    """The fast engine (our exact kernels, union-find persistence by duality on the
    torus) against the reference (gudhi's exact alpha complex, SimplexTree
    persistence); 6-bit grids have many equal values and co-circular points."""
    for seed in range(4):
        p = dyadic(n, 2, seed=seed, bits=bits)
        assert same(periodic_diagram(p, UNIT[2]), periodic_diagram(p, UNIT[2], engine="gudhi"))


def test_rescaled_box_gives_the_same_normalised_diagram():
    p = dyadic(500, 2, seed=7)
    a = periodic_diagram(p, UNIT[2])
    b = periodic_diagram(p * [4.0, 2.0] + [-3.0, 8.0], PeriodicBox(-3, 8, 1, 10))
    # not a similarity (4 x 2 box), so only the counts and essential classes agree
    assert len(a.pairs[0]) == len(b.pairs[0]) == 500
    assert a.meta["essential_betti"] == b.meta["essential_betti"] == [1, 2, 1]
    c = periodic_diagram(p * 8.0 - 4.0, PeriodicBox(-4, -4, 4, 4))     # a similarity
    assert same(a, c)


def test_images_are_exact_translates():
    """The frame of ``torus_frame``: for any box (here with non-dyadic sides) every
    image u + k L_i within the admissible halo is an exact double, so all copies
    of a simplex have bit-identical filtration values."""
    from nullatlas.lookup.persistence.periodic import torus_frame

    rng = np.random.default_rng(0)
    for lo, hi in (([0.1, -7.3], [1.3, 0.9]), ([3.0, 0.0, 1e-3], [3.7, 0.3, 2.1e-3])):
        box = PeriodicBox(*lo, *hi)
        p = box.lo + box.sides * rng.random((2000, box.dim))
        u, L, g = torus_frame(p, box)
        assert np.all(np.abs(u - (p - (box.lo + 0.5 * L))) <= g)       # moved < 1 ulp(L)
        top = np.ldexp(1.0, np.frexp(L)[1])
        for k in (-2, -1, 1, 2):
            v = u + k * L
            inside = np.abs(v) <= top
            bb = v - u
            err = (u - (v - bb)) + (k * L - bb)                           # Two-Sum error
            assert np.all(err[inside] == 0.0)


def test_large_hole_grows_the_halo_and_stays_exact():
    """Points everywhere but in an empty disc of radius 0.15 on the unit torus: the
    first halo (a few mean spacings) is too thin for the hole's Delaunay triangles,
    the halo grows, and the diagram is the same wherever the hole sits (here moved
    across the corner of the box)."""
    p = dyadic(6000, 2, seed=4)
    p = p[np.linalg.norm(p - 0.5, axis=1) > 0.15][:2000]
    box = UNIT[2]
    ref = periodic_diagram(p, box)
    assert ref.meta["halo"] > 0.3
    # the last hole to fill is this one, and on a torus filling the last hole closes
    # the surface: it gives birth to the H2 class (its boundary loop was already
    # null-homologous in the punctured torus), at the hole's Delaunay circumradius
    assert 0.14 < ref.pairs[2][0, 0] / ref.scale < 0.2
    assert ref.finite(1)[:, 1].max() / ref.scale < 0.1
    for shift in ([0.5, 0.5], [0.25, 0.625], [0.5, 0.0]):
        assert same(periodic_diagram(np.mod(p + shift, 1.0), box), ref)
    assert same(periodic_diagram(p, box, engine="gudhi"), ref)


# --------------------------------------------------------------------------------------
# (b) H0 = half the edges of the periodic Euclidean minimum spanning tree, exactly
# --------------------------------------------------------------------------------------


@pytest.mark.parametrize("d,n", [(2, 500), (3, 400)])
def test_h0_deaths_are_half_the_periodic_mst_edges(d, n):
    box = UNIT[d]
    p = dyadic(n, d, seed=10 + d)
    tree = box.tree(p)
    dm = tree.sparse_distance_matrix(tree, 0.5, output_type="coo_matrix")
    i, j = dm.row[dm.row < dm.col], dm.col[dm.row < dm.col]
    diff = p[i] - p[j]
    diff -= np.round(diff)                              # minimum image, exact here
    sq = np.sum(diff * diff, axis=1)                    # exact squared lengths
    mst = minimum_spanning_tree(coo_matrix((sq, (i, j)), shape=(n, n))).tocoo()
    assert mst.nnz == n - 1
    expected = np.sort(np.sqrt(mst.data / 4.0)) * (n / box.measure) ** (1.0 / d)
    h0 = periodic_diagram(p, box).pairs[0]
    assert np.all(h0[:, 0] == 0.0)
    assert np.count_nonzero(np.isinf(h0[:, 1])) == 1
    assert np.array_equal(np.sort(h0[np.isfinite(h0[:, 1]), 1]), expected)


# --------------------------------------------------------------------------------------
# (c) Euler characteristic per point of CSR on the torus = Miles's formula, no boundary bias
# --------------------------------------------------------------------------------------


def miles_euler(rho, d):
    """Mean Euler characteristic per germ of the Boolean model with balls of
    normalised radius rho (source: Chiu, Stoyan, Kendall & Mecke, *Stochastic
    Geometry and its Applications*, 3rd ed. 2013, Boolean model chapter;
    Mecke & Wagner 1991 -- from memory):
    d = 2: exp(-eta) (1 - eta), eta = pi rho^2;
    d = 3: exp(-eta) (1 - 3 eta + (3 pi^2 / 32) eta^2), eta = (4/3) pi rho^3."""
    if d == 2:
        eta = math.pi * rho ** 2
        return np.exp(-eta) * (1 - eta)
    eta = 4.0 / 3.0 * math.pi * rho ** 3
    return np.exp(-eta) * (1 - 3 * eta + 3 * math.pi ** 2 / 32 * eta ** 2)


def _euler_check(d, n, reps):
    box = UNIT[d]
    curves = np.array([summaries.euler_curve(periodic_diagram(
        np.random.default_rng(seed).random((n, d)), box)) for seed in range(reps)])
    mean = curves.mean(axis=0)
    se = curves.std(axis=0, ddof=1) / math.sqrt(reps)
    # binomial (n fixed) vs Poisson germs differ by O(1/n) per point; no O(n^(-1/d))
    # boundary term exists on a torus (in the unit square the same check fails by
    # more than 20 standard errors)
    tol = 4.0 * se + 1.0 / n
    dev = np.abs(mean - miles_euler(grids.RHO, d))
    assert np.all(dev <= tol), (grids.RHO[dev > tol], dev[dev > tol], tol[dev > tol])


def test_euler_per_point_matches_miles_2d():
    _euler_check(2, 1000, 300)


@pytest.mark.slow
def test_euler_per_point_matches_miles_3d():
    _euler_check(3, 500, 200)


# --------------------------------------------------------------------------------------
# (d) square and cubic lattices: the known diagrams
# --------------------------------------------------------------------------------------


def lattice(k, d, offset=0.0):
    axes = [np.arange(k, dtype=float) + offset] * d
    return np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, d)


def rows(*blocks):
    """Expected pairs: blocks of (birth, death, count), sorted like the diagram."""
    out = [np.tile([b, dth], (c, 1)) for b, dth, c in blocks if c]
    a = np.concatenate(out) if out else np.empty((0, 2))
    return a[np.lexsort((a[:, 1], a[:, 0]))]


@pytest.mark.parametrize("k", [3, 4, 5])
@pytest.mark.parametrize("offset", [0.0, 0.25])
def test_square_lattice_diagram(k, offset):
    """k x k grid of spacing 1 on the k x k torus (normalised radius = radius, the
    intensity is 1).  Edges of length 1 enter at r = 1/2: the k^2 components merge
    into one (k^2 - 1 H0 deaths) and the grid graph has 2k^2 - k^2 + 1 = k^2 + 1
    independent cycles.  At r = sqrt(2)/2, the circumradius of a unit square, all
    k^2 squares fill: k^2 - 1 cycles die, the two cycles around the torus stay,
    and the last square closes the torus (H2 born).  Euler characteristic at the
    end: 1 - 2 + 1 = 0."""
    d = periodic_diagram(lattice(k, 2, offset), PeriodicBox(0, 0, k, k))
    h, s = 0.5, math.sqrt(0.5)
    inf = np.inf
    assert np.array_equal(d.pairs[0], rows((0.0, h, k * k - 1), (0.0, inf, 1)))
    assert np.array_equal(d.pairs[1], rows((h, s, k * k - 1), (h, inf, 2)))
    assert np.array_equal(d.pairs[2], rows((s, inf, 1)))
    assert d.meta["simplex_counts"] == [k * k, 3 * k * k, 2 * k * k]


def test_cubic_lattice_diagram():
    """k^3 grid of spacing 1 on the k^3 torus: edges at 1/2 (3k^3 of them: 2k^3 + 1
    independent cycles), squares at sqrt(2)/2 (3k^3: b1 drops to 3, b2 = k^3 + 2 by
    chi = k^3 - 3k^3 + 3k^3), cubes at sqrt(3)/2 (k^3: k^3 - 1 voids die, the
    three 2-tori stay, the last cube closes the 3-torus)."""
    k = 4
    d = periodic_diagram(lattice(k, 3), PeriodicBox(0, 0, 0, k, k, k))
    h, s, c, inf = 0.5, math.sqrt(0.5), math.sqrt(0.75), np.inf
    m = k ** 3
    assert np.array_equal(d.pairs[0], rows((0.0, h, m - 1), (0.0, inf, 1)))
    assert np.array_equal(d.pairs[1], rows((h, s, 2 * m - 2), (h, inf, 3)))
    assert np.array_equal(d.pairs[2], rows((s, c, m - 1), (s, inf, 3)))
    assert np.array_equal(d.pairs[3], rows((c, inf, 1)))


# --------------------------------------------------------------------------------------
# (e) the full complex is a torus: Euler characteristic 0, essential classes C(d, q)
# --------------------------------------------------------------------------------------


@pytest.mark.parametrize("d,n,engine", [(2, 2000, "fast"), (2, 300, "gudhi"),
                                        (3, 800, "fast"), (3, 300, "gudhi")])
def test_full_complex_is_a_torus(d, n, engine):
    sides = [3.0, 1.0] if d == 2 else [1.5, 1.0, 1.25]
    p = np.random.default_rng(d * 1000 + n).random((n, d)) * sides
    box = PeriodicBox(*([0.0] * d + sides))
    diag = periodic_diagram(p, box, engine=engine)
    counts = diag.meta["simplex_counts"]
    assert counts[0] == n
    assert sum((-1) ** q * c for q, c in enumerate(counts)) == 0
    if d == 2:                                  # a triangulated torus: E = 3V, F = 2V
        assert counts == [n, 3 * n, 2 * n]
    # from the persistence pairs (independent of the simplex counts): at the end
    # the Betti numbers are those of the torus, binomial(d, q), and chi = 0
    end = np.array([1e9])
    betti = [int(diag.betti_counts(q, end)[0]) for q in range(d + 1)]
    assert betti == [math.comb(d, q) for q in range(d + 1)]
    assert abs(summaries.euler_curve(diag, end)[0]) < 1e-15    # per point, rounded
    assert all(np.all(p[:, 1] > p[:, 0]) for p in diag.pairs)       # no zero-length pair
    # total persistence uses finite pairs only
    assert np.isfinite(summaries.total_persistence(diag, 1))


# --------------------------------------------------------------------------------------
# (f) bad input: too sparse, coincident points
# --------------------------------------------------------------------------------------


@pytest.mark.parametrize("d,n", [(2, 2), (2, 5), (2, 8), (3, 6), (3, 12)])
def test_too_sparse_gives_one_clear_error(d, n):
    p = np.random.default_rng(n).random((n, d))
    with pytest.raises(PointsError, match="too few points for a periodic window") as e:
        periodic_diagram(p, UNIT[d])
    assert "\n" not in str(e.value) and isinstance(e.value, NullAtlasError)


def test_points_coinciding_on_the_torus():
    p = np.random.default_rng(0).random((50, 2))
    p[0] = [0.0, 0.3]
    p[1] = [1.0, 0.3]                          # the image of point 0 across the face
    with pytest.raises(PointsError, match="coincide on the torus"):
        periodic_diagram(p, UNIT[2])


# --------------------------------------------------------------------------------------
# Periodic distances: nearest neighbours, close pairs, G and L without edge correction
# --------------------------------------------------------------------------------------


def brute_periodic(p, sides):
    diff = p[:, None, :] - p[None, :, :]
    diff -= sides * np.round(diff / sides)
    dist = np.sqrt(np.sum(diff ** 2, axis=-1))
    np.fill_diagonal(dist, np.inf)
    return dist


@pytest.mark.parametrize("d", [2, 3])
def test_nearest_neighbours_and_pairs_are_periodic(d):
    sides = np.array([3.0, 1.0, 2.0][:d])
    box = PeriodicBox(*([0.0] * d + list(sides)))
    n = 400
    p = np.random.default_rng(d).random((n, d)) * sides
    ps = PatternSummary(p, box)
    dist = brute_periodic(p, sides)
    assert np.allclose(ps.nn, dist.min(axis=1), rtol=1e-12, atol=0)
    pr, dd = ps.pairs
    rmax = grids.L_RHO[-1] / ps.scale
    assert len(pr) == np.count_nonzero(np.triu(dist <= rmax, 1))
    assert np.allclose(dd, dist[pr[:, 0], pr[:, 1]], rtol=1e-12, atol=0)
    # G and L use every point (no border correction on a torus)
    g = compute(p, box, [STATISTICS["gfunc"]])["gfunc"]
    r = grids.NN_RHO / ps.scale
    assert np.allclose(g, (dist.min(axis=1)[None, :] <= r[:, None]).mean(axis=1))
    lf = compute(p, box, [STATISTICS["lfunc"]])["lfunc"]
    rl = grids.L_RHO / ps.scale
    lam_k = (dist[None, :, :] <= rl[:, None, None]).sum(axis=(1, 2)) / n
    want = np.sqrt(lam_k / math.pi) if d == 2 else np.cbrt(3 * lam_k / (4 * math.pi))
    assert np.allclose(lf, want, rtol=1e-12)


def test_summary_uses_the_periodic_diagram():
    p = np.random.default_rng(5).random((300, 2))
    ps = PatternSummary(p, UNIT[2])
    assert ps.diagram.meta["periodic"] is True and len(ps.diagram.pairs) == 3
    # nnmean has no boundary bias on the torus: CSR limit 1/2 (Clark & Evans 1954)
    vals = [compute(np.random.default_rng(s).random((500, 2)), UNIT[2],
                    [STATISTICS["nnmean"]])["nnmean"] for s in range(60)]
    assert abs(np.mean(vals) - 0.5) < 4 * np.std(vals) / math.sqrt(60) + 0.002


# --------------------------------------------------------------------------------------
# (g) the command line
# --------------------------------------------------------------------------------------


@pytest.mark.parametrize("d", [2, 3])
def test_cli_torus_json(tmp_path, capsys, d):
    sides = [4.0, 2.0] if d == 2 else [1.25, 1.0, 1.0]
    n = 300 if d == 2 else 500
    p = np.random.default_rng(d).random((n, d)) * sides
    f = tmp_path / "pts.csv"
    np.savetxt(f, p, delimiter=",", header=",".join("xyz"[:d]), comments="")
    spec = "torus:" + ",".join(str(v) for v in [0.0] * d + sides)
    rc = main(["test", str(f), "--window", spec, "--method", "mc", "--sims", "19", "--seed", "3",
               "--json", "--no-progress"])
    assert rc == 0
    out = json.loads(capsys.readouterr().out)
    assert out["window"]["kind"] == "torus" and out["window"]["kappa"] == 0.0
    assert out["window"]["periodic"] is True and out["n"] == n and out["dimension"] == d
    assert out["results"][0]["name"] == "euler"
    assert all(0 < r["pvalue"] <= 1 for r in out["results"])


def test_cli_torus_too_sparse_is_one_line(tmp_path, capsys):
    f = tmp_path / "few.csv"
    np.savetxt(f, np.random.default_rng(1).random((6, 2)), delimiter=",")
    rc = main(["test", str(f), "--window", "torus:0,0,1,1", "--method", "mc", "--sims", "5",
               "--no-progress"])
    err = capsys.readouterr().err.strip()
    assert rc == 2 and "too few points for a periodic window" in err and "\n" not in err
