"""Issue 17, where the structure is: per-feature p-values with family-wise
error control, locations, exports and the ``nullatlas locate`` command."""
import csv
import json
import os

import numpy as np
import pytest

import nullatlas
from nullatlas.lookup.cli import main
from nullatlas.lookup.features.locate import _filtration
from nullatlas.lookup.features.nulls import EULER_GAMMA, FamilyNull, universal_pvalues
from nullatlas.lookup.features.pairs import cluster_pairs, dual_pairs, loop_pairs_3d, mst_edges
from nullatlas.lookup.features.regions import _adjacency, hole_region, stable_radius
from nullatlas.lookup.persistence.diagram import alpha_diagram

EX = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "examples")
WAFER = nullatlas.Disk(0, 0, 150)


def _iou(a, b):
    a, b = set(map(int, a)), set(map(int, b))
    return len(a & b) / len(a | b)


# ---------------------------------------------------------------- the pairs and their places

@pytest.mark.parametrize("d,seed", [(2, 1), (2, 2), (3, 3)])
def test_dual_pairs_equal_the_diagram(d, seed):
    """The sweep that keeps creators/destroyers gives exactly the engine's pairs."""
    pts = np.random.default_rng(seed).random((300, d))
    dp = dual_pairs(*_filtration(pts)[:3])
    ours = np.sort(np.stack([dp.birth, dp.death], axis=1), axis=0)
    ref = np.sort(alpha_diagram(pts).finite(d - 1), axis=0)
    assert ours.shape == ref.shape
    np.testing.assert_allclose(ours, ref, rtol=1e-12, atol=0)


def test_unit_square_hole_is_the_square():
    """Unit square: H1 (0.5, sqrt(2)/2) (REFERENCES.md, exact small cases, elementary
    geometry); its hole at birth is the whole square, bounded by all four points."""
    sq = np.array([[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]])
    fv, ft, tv, tops, fverts = _filtration(sq)
    dp = dual_pairs(fv, ft, tv)
    assert len(dp.birth) == 1
    assert dp.birth[0] == pytest.approx(0.5) and dp.death[0] == pytest.approx(np.sqrt(2) / 2)
    region, bfaces = hole_region(dp, 0)
    assert len(region) == 2                      # both triangles of the square
    assert sorted(np.unique(fverts[bfaces]).tolist()) == [0, 1, 2, 3]


def test_regular_tetrahedron_void():
    """Regular tetrahedron, edge 1: H2 (0.577350, sqrt(3/8) = 0.612372) (REFERENCES.md)."""
    T = np.array([[1, 1, 1], [1, -1, -1], [-1, 1, -1], [-1, -1, 1]], float) / np.sqrt(8)
    dp = dual_pairs(*_filtration(T)[:3])
    assert dp.birth.tolist() == pytest.approx([1 / np.sqrt(3)])
    assert dp.death.tolist() == pytest.approx([np.sqrt(3 / 8)])


def test_cluster_pairs_by_hand():
    """Two groups of 3 points on a line, 10 apart: with clusters of >= 3 points each
    is born when its third point joins and both die at the merge (half the gap |(10, 0.1)|)."""
    pts = np.array([[0, 0], [1, 0], [2, 0], [12, 0.1], [13, 0], [14, 0.1]], float)
    c = cluster_pairs(pts, 3)
    assert sorted(c.birth.tolist()) == pytest.approx([0.5, np.hypot(1, 0.1) / 2])
    gap = np.hypot(10, 0.1) / 2
    assert c.death.tolist() == pytest.approx([gap, gap])
    u, v, r = mst_edges(pts)
    assert len(r) == 5 and r.max() == pytest.approx(gap)


def _regions_by_brute_force(dp, k, adj):
    """[(lo, hi, region)] of pair k: the region evaluated between every two
    consecutive face radii in (birth, death), equal neighbours merged."""
    b, d = dp.birth[k], dp.death[k]
    v = np.sqrt(dp.face_values)
    cuts = np.concatenate([[b], np.unique(v[(v > b) & (v < d)]), [d]])
    out = []
    for lo, hi in zip(cuts[:-1], cuts[1:]):
        reg = tuple(hole_region(dp, k, adj, radius=np.sqrt(lo * hi))[0].tolist())
        if out and out[-1][2] == reg:
            out[-1][1] = hi
        else:
            out.append([lo, hi, reg])
    return out


@pytest.mark.parametrize("d,seed", [(2, 4), (3, 5)])
def test_stable_radius_is_the_longest_constant_stretch(d, seed):
    """The radius of ``stable_radius`` is the log-middle of the longest stretch of
    the hole's life with one region, checked against the region at every radius
    between two face values (a planted empty ball gives a long-lived hole)."""
    rng = np.random.default_rng(seed)
    pts = rng.random((400 if d == 2 else 500, d))
    pts = pts[np.linalg.norm(pts - 0.5, axis=1) > 0.2]
    dp = dual_pairs(*_filtration(pts)[:3])
    adj = _adjacency(dp.face_tops, len(dp.top_values))
    order = np.argsort(-dp.death / dp.birth)[:6]           # the planted hole and five more
    for k in order.tolist():
        r, lo, hi = stable_radius(dp, k, adj)
        stretches = _regions_by_brute_force(dp, k, adj)
        widths = [np.log(h / l_) for l_, h, _ in stretches]
        best = stretches[int(np.argmax(widths))]
        assert (lo, hi) == pytest.approx((best[0], best[1]), rel=1e-12)
        assert r == pytest.approx(np.sqrt(lo * hi)) and dp.birth[k] <= lo < r < hi <= dp.death[k]
        assert tuple(hole_region(dp, k, adj, radius=r)[0].tolist()) == best[2]
    assert len(_regions_by_brute_force(dp, int(order[0]), adj)) > 2


# ---------------------------------------------------------------- planted structures

def test_planted_cluster_found_in_place():
    rng = np.random.default_rng(7)
    spot = nullatlas.Disk(60, 20, 6)
    pts = np.vstack([WAFER.sample(300, rng), spot.sample(25, rng)])
    res = nullatlas.locate_features(pts, WAFER, n_sims=99, seed=1, progress=False)
    sig = [f for f in res.significant if f.kind == "cluster"]
    assert sig and sig[0].pvalue <= 0.05 and res.pvalue <= 0.05
    best = sig[0]
    assert np.hypot(*(best.centre - [60, 20])) < 4
    assert _iou(best.points, np.arange(300, 325)) >= 0.6
    assert best.birth_norm == pytest.approx(best.birth * (325 / WAFER.measure) ** 0.5)


def _ring_wafer(seed, n_bg=300, centre=(-40.0, 30.0), radius=40.0, n_ring=70):
    """Uniform defects with none inside a disk and an extra ring of defects around it."""
    rng = np.random.default_rng(seed)
    bg = WAFER.sample(n_bg, rng)
    bg = bg[np.hypot(*(bg - centre).T) > radius]
    t = rng.uniform(0, 2 * np.pi, n_ring)
    ring = np.c_[centre[0] + radius * np.cos(t), centre[1] + radius * np.sin(t)]
    return np.vstack([bg, ring])


def test_planted_ring_found_in_place():
    from shapely.geometry import Point, Polygon

    pts = _ring_wafer(3)
    res = nullatlas.locate_features(pts, WAFER, families=[1], progress=False)
    loops = [f for f in res.significant if f.kind == "loop"]
    assert loops and loops[0].pvalue < 0.01
    hole = Polygon(loops[0].polygon)
    truth = Point(-40, 30).buffer(40, 256)
    assert hole.intersection(truth).area / hole.union(truth).area >= 0.8
    assert np.hypot(*(loops[0].centre - [-40, 30])) < 8
    # its largest empty disk: no point inside, radius the death, on the planted disk
    cx, cy, rad = loops[0].core
    assert rad == pytest.approx(loops[0].death, rel=1e-9)
    assert np.min(np.hypot(pts[:, 0] - cx, pts[:, 1] - cy)) >= rad * (1 - 1e-9)
    assert np.hypot(cx + 40, cy - 30) < 3 and rad == pytest.approx(40, abs=3)
    from nullatlas.lookup.features.export import geojson
    core = [g for g in geojson(res)["features"] if g["id"] == f"{loops[0].id}-core"]
    disk = Polygon(core[0]["geometry"]["coordinates"][0])
    assert disk.is_valid and disk.exterior.is_ccw
    assert disk.area == pytest.approx(np.pi * rad ** 2, rel=0.01)


def test_planted_void_found_in_place():
    rng = np.random.default_rng(11)
    box = nullatlas.Box(0, 0, 0, 10, 10, 10)
    pts = box.sample(700, rng)
    pts = pts[np.linalg.norm(pts - 5.0, axis=1) > 2.2]
    res = nullatlas.locate_features(pts, box, families=[2], progress=False)
    voids = res.significant
    assert voids and voids[0].kind == "void" and voids[0].pvalue < 0.01
    assert np.linalg.norm(voids[0].centre - 5.0) < 1.0
    assert 0.5 < voids[0].size / 4.4 < 1.3          # diameter of the empty ball
    c, rad = np.array(voids[0].core[:3]), voids[0].core[3]
    assert rad == pytest.approx(voids[0].death, rel=1e-9)
    assert np.min(np.linalg.norm(pts - c, axis=1)) >= rad * (1 - 1e-9)    # empty ball
    assert np.linalg.norm(c - 5.0) < 1.0 and 2.2 <= rad < 3.5
    # its bounding points lie around the empty ball
    dist = np.linalg.norm(res.points[voids[0].points] - 5.0, axis=1)
    assert np.median(dist) == pytest.approx(2.2, abs=0.8)


# ---------------------------------------------------------------- loops in 3D

def test_loop_pairs_3d_equal_the_diagram():
    """The H1 pairs kept with their birth edges and death triangles are the diagram's
    H1 in 3D; each birth edge and death triangle carries the pair's values."""
    pts = np.random.default_rng(6).random((300, 3))
    lp = loop_pairs_3d(pts)
    ours = np.sort(np.stack([lp.birth, lp.death], axis=1), axis=0)
    ref = np.sort(alpha_diagram(pts).finite(1), axis=0)
    assert ours.shape == ref.shape and len(ours) > 100
    np.testing.assert_allclose(ours, ref, rtol=1e-12, atol=0)
    # an edge's alpha value is at least its half length squared: the birth edge
    # is no longer than twice the birth radius, the death triangle's edges than
    # twice the death radius
    be = np.linalg.norm(pts[lp.birth_edge[:, 0]] - pts[lp.birth_edge[:, 1]], axis=1)
    assert np.all(be <= 2 * lp.birth * (1 + 1e-9))
    T = pts[lp.death_triangle]
    longest = np.max(np.linalg.norm(T - np.roll(T, 1, axis=1), axis=2), axis=1)
    assert np.all(longest <= 2 * lp.death * (1 + 1e-9))


def _ring_3d(seed, n_bg=300, n_ring=40, radius=3.0):
    """Uniform points in a 10 mm cube and a ring of points (nearly even angles,
    0.03 mm jitter off its plane) of the given radius about (5, 5, 5) in z = 5."""
    rng = np.random.default_rng(seed)
    box = nullatlas.Box(0, 0, 0, 10, 10, 10)
    bg = box.sample(n_bg, rng)
    t = 2 * np.pi * (np.arange(n_ring) + rng.uniform(-0.2, 0.2, n_ring)) / n_ring
    ring = np.c_[5 + radius * np.cos(t), 5 + radius * np.sin(t), 5 + rng.normal(0, 0.03, n_ring)]
    return box, np.vstack([bg, ring])


def test_planted_ring_in_3d_found_with_its_cycle(tmp_path):
    from nullatlas.lookup.features.export import geojson, write_labels
    from nullatlas.lookup.features.mapplot import plot_feature_map

    box, pts = _ring_3d(0, n_bg=150)
    res = nullatlas.locate_features(pts, box, n_sims=99, seed=2, progress=False)
    assert sorted(res.families) == [0, 1, 2]                   # three families in 3D
    loops = [f for f in res.significant if f.kind == "loop"]
    assert loops, res.summary()
    f = loops[0]
    assert f.pvalue == pytest.approx(min(1.0, 3 * f.pvalue_family))    # Bonferroni over 3
    cyc = np.asarray(f.cycle)
    assert cyc.tolist() == f.points.tolist() and len(set(cyc.tolist())) == len(cyc)
    # its points are the ring's, on the circle of radius 3 in the plane z = 5
    assert np.mean(cyc >= 150) >= 0.95
    P = pts[cyc]
    assert np.median(np.abs(np.hypot(P[:, 0] - 5, P[:, 1] - 5) - 3)) < 0.1
    assert np.median(np.abs(P[:, 2] - 5)) < 0.1
    # closed: consecutive points, and the last with the first (the birth edge), are
    # edges of the complex present at the birth (length <= 2 x birth radius)
    steps = np.linalg.norm(P - np.roll(P, -1, axis=0), axis=1)
    assert np.all(steps <= 2 * f.birth * (1 + 1e-9))
    lp = loop_pairs_3d(pts)
    edges = {tuple(sorted(e)) for e in lp.edges.tolist()}
    assert all(tuple(sorted((int(a), int(b)))) in edges for a, b in zip(cyc, np.roll(cyc, -1)))
    assert f.cycle_length == pytest.approx(2 * np.pi * 3, rel=0.05)
    assert np.linalg.norm(f.centre - 5.0) < 0.3 and 5.4 < f.size < 7.2     # diameter 6
    # outputs: a closed 3D LineString beside the points, labels, the projected map
    gj = geojson(res)
    line = [g for g in gj["features"] if g["id"] == f"{f.id}-cycle"]
    assert line and line[0]["geometry"]["type"] == "LineString"
    xyz = line[0]["geometry"]["coordinates"]
    assert len(xyz[0]) == 3 and xyz[0] == xyz[-1] and len(xyz) == len(cyc) + 1
    write_labels(res, str(tmp_path / "l.csv"))
    rows = list(csv.DictReader(open(tmp_path / "l.csv")))
    assert {int(r["index"]) for r in rows if f.id in r["features"].split(";")} == set(cyc.tolist())
    assert res.as_dict()["features"][res.features.index(f)]["cycle"] == cyc.tolist()
    plot_feature_map(res, str(tmp_path / "m.png"))
    assert (tmp_path / "m.png").stat().st_size > 10000


def test_csr_cube_rarely_gives_a_significant_loop():
    """40 CSR patterns of 200 points in the unit cube, loops alone: at most 6
    significant at 0.05 (the planted ring above reaches p = 0.01 with this null)."""
    cube = nullatlas.Box(0, 0, 0, 1, 1, 1)
    hits, ps = 0, []
    for s in range(40):
        pts = cube.sample(200, np.random.default_rng(2000 + s))
        res = nullatlas.locate_features(pts, cube, families=[1], n_sims=99, seed=4,
                                        progress=False)
        hits += res.pvalue <= 0.05
        ps.append(res.pvalue)
    assert hits <= 6
    assert np.median(ps) > 0.2                   # p-values spread, not stuck at the floor


# ---------------------------------------------------------------- CSR: family-wise size

def test_csr_rarely_gives_a_significant_feature():
    """40 CSR wafers: the share with any significant feature (clusters and loops,
    Bonferroni over the two families) is near or below 0.05 (binomial: at most 6 of 40
    has probability 0.99 at size 0.05; 0 or 1 would also pass: the test is conservative
    by construction)."""
    hits = 0
    for s in range(40):
        pts = WAFER.sample(300, np.random.default_rng(1000 + s))
        res = nullatlas.locate_features(pts, WAFER, n_sims=99, seed=5, progress=False)
        hits += res.pvalue <= 0.05
    assert hits <= 6


def test_simulated_null_rank_p_then_gumbel_tail_beyond_the_largest():
    """Up to the largest of m simulated values p is the rank p (k + 1) / (m + 1);
    beyond it a Gumbel tail takes p below the floor 1 / (m + 1) with the shape of
    the law (here the null is Gumbel(0, 1), survival 1 - exp(-exp(-x)))."""
    v = np.random.default_rng(0).gumbel(0.0, 1.0, 999)
    fam = FamilyNull(v, "mc", "test")
    x = np.sort(v)[[0, 500, 989, 998]]
    k = np.array([999, 499, 10, 1])
    np.testing.assert_array_equal(fam.pvalue(x), (k + 1) / 1000)
    far = v.max() + np.array([0.5, 1.5, 3.5, 5.5])
    p = fam.pvalue(far)
    assert np.all(p < 1e-3) and np.all(np.diff(p) < 0)
    true = -np.expm1(-np.exp(-far))
    np.testing.assert_allclose(p[1:] / p[1], true[1:] / true[1], rtol=0.25)
    assert fam.pvalue(fam.threshold(1e-5)) == pytest.approx(1e-5, rel=1e-6)
    assert FamilyNull(v[:19], "mc", "test").pvalue(100.0) == pytest.approx(1 / 20)


def test_universal_law_on_csr_from_memory():
    """Bobrowski & Skraba (2023), 'Random persistence diagrams are universal' (from
    memory: l = A log log pi + B, B = -0.5772 - A mean log log pi, P(l >= x) =
    exp(-exp(x)); A = 1/2 for Čech-type complexes, A = 1 recalled in the issue).
    On CSR voids in the unit cube the per-feature p-values with A = 1/2 are close to
    uniform in the upper tail, and A = 1 is far off (generous tolerance: recalled
    values, and the law is a limit)."""
    from scipy import stats

    assert EULER_GAMMA == pytest.approx(0.5772, abs=1e-4)
    ratios = []
    for s in range(4):
        p = alpha_diagram(np.random.default_rng(s).random((1500, 3))).finite(2)
        ratios.append(p[:, 1] / p[:, 0])
    half = np.concatenate([universal_pvalues(r, 0.5) for r in ratios])
    one = np.concatenate([universal_pvalues(r, 1.0) for r in ratios])
    for level in (0.01, 0.05, 0.1):
        assert np.mean(half <= level) == pytest.approx(level, rel=0.5)
    assert np.mean(one <= 0.01) > 0.1
    ll = np.concatenate([0.5 * np.log(np.log(r)) - 0.5 * np.log(np.log(r)).mean()
                         for r in ratios])
    assert ll.std() == pytest.approx(np.pi / np.sqrt(6), rel=0.15)     # the law's sd
    assert stats.skew(ll) < -0.5                                     # left-skewed


# ---------------------------------------------------------------- outputs and the command

@pytest.fixture(scope="module")
def clustered_run(tmp_path_factory):
    d = tmp_path_factory.mktemp("loc")
    out = {k: str(d / f) for k, f in (("geo", "f.geojson"), ("lab", "labels.csv"),
                                       ("png", "map.png"))}
    rc = main(["locate", os.path.join(EX, "wafer_lot_clustered.csv"), "-w", "disk:0,0,150",
               "--sims", "99", "--geojson", out["geo"], "--labels", out["lab"], "--plot",
               out["png"], "--no-progress", "--json"])
    return rc, out


def test_geojson_and_labels_valid(clustered_run, capsys):
    from shapely.geometry import shape

    rc, out = clustered_run
    assert rc == 0
    gj = json.load(open(out["geo"]))
    assert gj["type"] == "FeatureCollection" and gj["features"]
    for f in gj["features"]:
        g = shape(f["geometry"])
        assert g.is_valid and not g.is_empty
        assert f["geometry"]["type"] in ("Polygon", "MultiPoint")
        assert f["properties"]["pvalue"] <= 0.05
        if f["geometry"]["type"] == "Polygon":          # RFC 7946: exterior counter-clockwise
            assert g.exterior.is_ccw
    rows = list(csv.DictReader(open(out["lab"])))
    pts = nullatlas.read_points(os.path.join(EX, "wafer_lot_clustered.csv"))
    assert len(rows) == len(pts)
    assert float(rows[5]["x"]) == pytest.approx(pts[5, 0])
    ids = {f["properties"]["id"] for f in gj["features"]}
    labelled = {r["feature"] for r in rows if r["feature"]}
    assert labelled and labelled <= ids
    with open(out["png"], "rb") as fh:
        assert fh.read(8) == b"\x89PNG\r\n\x1a\n"


def test_json_output_and_dataframe(capsys):
    rc = main(["locate", os.path.join(EX, "wafer_lot_random.csv"), "-w", "disk:0,0,150",
               "--only", "holes", "--json", "--no-progress"])
    assert rc == 0
    d = json.loads(capsys.readouterr().out)
    assert set(d["families"]) == {"loop"} and d["families"]["loop"]["route"] == "table"
    assert d["features"] and all(f["kind"] == "loop" for f in d["features"])
    pts = nullatlas.read_points(os.path.join(EX, "wafer_lot_random.csv"))
    res = nullatlas.locate_features(pts, "disk:0,0,150", families=[1])
    df = res.to_dataframe()
    assert {"id", "pvalue", "ratio", "centre_x", "centre_y"} <= set(df.columns)
    assert res.pvalue == pytest.approx(min(df["pvalue"]))


def test_json_when_no_ratio_can_reach_alpha(capsys):
    """With 19 simulations no cluster p can reach 0.05 / 2: the threshold is
    infinite, written as null, never as an invalid JSON number."""
    rc = main(["locate", os.path.join(EX, "wafer_lot_random.csv"), "-w", "disk:0,0,150",
               "--sims", "19", "--json", "--no-progress"])
    assert rc == 0
    d = json.loads(capsys.readouterr().out)
    assert d["families"]["cluster"]["threshold_ratio"] is None


@pytest.mark.parametrize("args,needle", [
    (["nope.csv", "-w", "disk:0,0,150"], "nope.csv"),
    (["WAFER", "-w", "disk:0,0,1"], "outside"),
    (["WAFER", "-w", "disk:0,0,150", "--alpha", "2"], "alpha"),
    (["WAFER", "-w", "disk:0,0,150", "--min-size", "1"], "min_size"),
    (["WAFER", "-w", "disk:0,0,150", "--sims", "5"], "n_sims"),
    (["WAFER", "-w", "disk:0,0,150", "--plot", "x.txt"], "--plot"),
    (["WAFER", "-w", "disk:0,0,150", "--labels", "/no/such/dir/l.csv"], "--labels"),
    (["WAFER", "-w", "box:0,0,0,1,1,1"], ""),
    (["WAFER", "-w", "disk:0,0,150", "--only", "voids"], "families"),
])
def test_bad_input_exit_2(capsys, args, needle):
    args = [os.path.join(EX, "wafer_lot_random.csv") if a == "WAFER" else a for a in args]
    rc = main(["locate", *args, "--no-progress"])
    err = capsys.readouterr().err
    assert rc == 2
    assert err.count("\n") == 1 and "error" in err and needle in err


def test_bad_input_is_a_valueerror():
    with pytest.raises(ValueError):
        nullatlas.locate_features(np.array([[0.0, 0.0], [np.nan, 1.0]]), WAFER)
    with pytest.raises(ValueError):
        nullatlas.locate_features(WAFER.sample(50, np.random.default_rng(0)), WAFER,
                                  families=[2])
