"""The shipped null tables: coverage, contents the runtime needs, audit and
n_min fields, and outside checks of their finite-window model."""
import json
import math
import os

import numpy as np
import pytest

from nullatlas.calibrate.nmin import TESTS
from nullatlas.calibrate.plan import DEFAULT_STATS
from nullatlas.calibrate.shapes import SHIPPED
from nullatlas.lookup.inference.tablereader import (
    load_cell,
    load_holdout,
    load_model,
    open_table,
    shipped_tables,
)
from nullatlas.lookup.summaries import grids
from nullatlas.lookup.summaries.statistics import STATISTICS

TABLES = shipped_tables()
LARGEST = {2: 100_000, 3: 20_000}


@pytest.fixture(scope="module", params=[2, 3])
def table(request):
    d = request.param
    assert d in TABLES, f"the {d}D table is not shipped (run scripts/make_tables.py)"
    return d, TABLES[d], open_table(TABLES[d], dimension=d)


#: (smallest n, replicates) of the training shapes of the geometric model and
#: the periodic cells (scripts/make_tables.py STEPS)
MORE = {"triangle": (50, 1000), "cross": (50, 1000), "holed": (50, 1000), "torus2": (100, 1000),
        "box133": (50, 1000), "cyl1": (50, 1000), "cyl8": (50, 1000), "torus3": (200, 500)}


def test_coverage_and_replicates(table):
    d, path, info = table
    assert set(info.shapes()) == set(SHIPPED[d])
    for shape in SHIPPED[d]:
        ns = sorted(c.n for c in info.cells if c.shape == shape)
        first, reps = MORE.get(shape, (50, None))
        assert ns[0] == first, (shape, ns)
        if shape not in MORE:
            assert ns[-1] >= LARGEST[d], (shape, ns)
        # roughly doubling (training shapes: 5,000 then 20,000)
        assert max(b / a for a, b in zip(ns, ns[1:])) <= (4.0 if shape in MORE else 2.5)
        for c in info.cells:
            if c.shape == shape:
                need = reps or (5000 if (d == 2 and c.n <= 10_000) else 2000)
                assert c.replicates >= need, (c.name, c.replicates)


def test_small_files():
    # package data stays small: moments and audits, not the replicates
    total = sum(os.path.getsize(p) for p in TABLES.values())
    assert total < 15e6, total


def test_schema_2_with_geometric_model_and_validated_ranges(table):
    """Every tabled statistic has a geometric model; the model route of the
    default statistics was validated on held-out windows of this dimension."""
    import h5py

    from nullatlas.calibrate.heldout import HELDOUT
    from nullatlas.lookup.summaries.statistics import default_stats

    d, path, info = table
    assert info.schema_version == 2
    assert set(info.geomodels) >= set(DEFAULT_STATS[d]) - {"betti2"}
    with h5py.File(path, "r") as fh:
        rows = json.loads(fh["validation"].attrs["rows"])
    held = {n for n, (dd, _, _) in HELDOUT.items() if dd == d}
    assert {r["window"] for r in rows} == held
    for s in default_stats(d):
        assert s in info.trust, s
        for test, rng in info.trust[s].items():
            # no failing held-out cell lies inside the validated range
            assert rng["passed"] + rng["failed"] <= rng["cells"]


def test_every_cell_has_what_the_runtime_needs(table):
    d, path, info = table
    for c in info.cells:
        assert set(DEFAULT_STATS[d]) <= set(c.stats), c.name
        raw = load_cell(path, c.name)
        for s in DEFAULT_STATS[d]:
            st, item = STATISTICS[s], raw[s]
            k = 1 if st.kind != "curve" else len(st.grid)
            assert item["mean"].shape == (k,) and item["m2"].shape == (k, k)
            assert int(item["count"]) == c.replicates - int(item["attrs"]["nonfinite"])
            if int(item["attrs"]["nonfinite"]) > 0.01 * c.replicates:
                # border-corrected L/G at small n in thin windows: often no point
                # far enough from the boundary; the audit must then keep the
                # instant test of that statistic away from this cell
                assert s in ("lfunc", "gfunc"), (c.name, s)
                nm = info.n_min(c.shape, s)["maxabs"]
                assert nm is None or nm > c.n, (c.name, s, nm)
            sd = np.sqrt(np.diag(item["m2"]) / (int(item["count"]) - 1))
            assert np.all(np.isfinite(item["mean"])) and np.all(np.isfinite(sd))
            a = item["audit"]
            if int(item["attrs"]["nonfinite"]) > 0.01 * c.replicates:
                assert int(a["n"]) == 0          # not audited, never trusted
                continue
            assert int(a["n"]) >= 0.98 * int(item["count"])
            want = {"scalar": ["ks", "lower", "upper", "two_sided"],
                    "extreme": ["ks", "ks_gumbel", "upper"],
                    "curve": ["point_lower", "point_upper"]}[st.kind]
            for key in want:
                assert key in a and np.all(np.isfinite(a[key])), (c.name, s, key)
            if st.kind == "extreme":
                assert len(item["values"]) == int(item["count"])
                assert np.all(np.diff(item["values"]) >= 0)
            if st.kind == "scalar":
                assert np.all(np.diff(item["quantiles"]) >= 0)
            if s.startswith("betti"):
                np.testing.assert_allclose(item["expected_count"], c.n * item["mean"])
            if st.kind == "curve":
                assert item["usable"].shape == (k,)
                if c.n == max(x.n for x in info.cells if x.shape == c.shape) and s != "betti2":
                    # the largest cell of a shape has usable grid points and global rates
                    assert item["usable"].sum() > 0 and "maxabs" in a and "mahalanobis" in a, \
                        (c.name, s)


def test_n_min_recorded_for_every_shape_and_statistic(table):
    d, path, info = table
    ns = {c.n for c in info.cells}
    for shape in SHIPPED[d]:
        for s in DEFAULT_STATS[d]:
            got = info.n_min(shape, s)
            assert set(got) == set(TESTS[STATISTICS[s].kind]), (shape, s)
            assert all(v is None or v in ns for v in got.values())


def test_normal_statistics_are_trusted_somewhere(table):
    """Total H0 persistence is a sum of many weakly dependent terms: its
    two-sided asymptotic test must hold from some calibrated n on in every
    shape (a check that the audit is not simply failing everything)."""
    d, path, info = table
    for shape in SHIPPED[d]:
        assert info.n_min(shape, "total0")["two_sided"] is not None, shape


def _geomodel(path, stat):
    import h5py

    with h5py.File(path, "r") as fh:
        g = fh[f"geomodel/{stat}"]
        out = {k: np.asarray(g[k][()]) for k in ("mean_coef", "mean_se", "mean_chi2")}
        out["cells"] = len(json.loads(g.attrs["cells"]))
    return out


def test_euler_limit_matches_miles_formula(table):
    """The geometric model's n -> infinity limit of the Euler curve per point
    (its intercept) against the Boolean-model formula (Miles; Chiu, Stoyan,
    Kendall & Mecke 2013): 2D exp(-eta)(1 - eta), eta = pi rho^2;
    3D exp(-eta)(1 - 3 eta + (3 pi^2 / 32) eta^2), eta = 4/3 pi rho^3."""
    d, path, info = table
    m = _geomodel(path, "euler")
    mu, se = m["mean_coef"][:, 0], m["mean_se"][:, 0]
    rho = grids.RHO
    if d == 2:
        eta = math.pi * rho ** 2
        miles = np.exp(-eta) * (1 - eta)
    else:
        eta = 4 / 3 * math.pi * rho ** 3
        miles = np.exp(-eta) * (1 - 3 * eta + 3 * math.pi ** 2 / 32 * eta ** 2)
    # standard errors scaled by sqrt(chi2/dof) where the model misfits (the
    # Birge ratio; common practice)
    birge = np.sqrt(np.maximum(1.0, m["mean_chi2"] / (m["cells"] - m["mean_coef"].shape[1])))
    z = (mu - miles) / np.maximum(se * birge, 1e-12)
    ok = np.isfinite(z)
    assert ok.sum() > 40
    assert np.mean(np.abs(z[ok]) < 3) > 0.9, np.round(z, 1)
    # absolute agreement (a per-point Euler characteristic is O(1)); measured
    # 3.5e-5 in 2D and 6.6e-4 in 3D
    assert np.max(np.abs(mu - miles)) < (5e-4 if d == 2 else 5e-3)


def test_geometric_model_recovers_clark_evans_and_donnelly():
    """2D mean nearest-neighbour distance, normalised, in the geometric
    model: intercept mu = 0.5 (Clark & Evans 1954) and boundary coefficient
    (of B1 = kappa n^(-1/2)) c = 0.0514 (Donnelly 1978; from memory, hence
    4 fit SE or 0.002); measured 0.500005 and 0.0515."""
    m = _geomodel(TABLES[2], "nnmean")
    mu, c = m["mean_coef"][0, :2]
    se_mu, se_c = m["mean_se"][0, :2]
    assert abs(mu - 0.5) < max(4 * se_mu, 1e-4)
    assert abs(c - 0.0514) < max(4 * se_c, 0.002)


def test_nn_distance_model_recovers_clark_evans_and_donnelly():
    """2D mean nearest-neighbour distance, normalised: Clark & Evans (1954)
    mu = 0.5; Donnelly (1978; from memory) boundary coefficient c = 0.0514.
    Donnelly's value came from simulations of his time, hence a tolerance of
    4 fit SE or 0.002, whichever is larger."""
    m = load_model(TABLES[2])["nnmean"]
    mu, c = m["mean_coef"][0, :2]
    se_mu, se_c = m["mean_se"][0, :2]
    assert abs(mu - 0.5) < max(4 * se_mu, 1e-4)
    assert abs(c - 0.0514) < max(4 * se_c, 0.002)


def test_disk_is_held_out_and_predicted():
    """Second copy of the 2D model fitted without the disk: its cells' means
    are predicted within a few standard errors for the additive summaries."""
    h = load_holdout(TABLES[2])["disk"]
    for s in ("euler", "total0", "nnmean", "apf0"):
        err = np.asarray(h[s]["errors"], float)
        err = err[np.isfinite(err)]
        assert err.size > 0
        assert np.sqrt(np.mean(err ** 2)) < 3.0, (s, np.sqrt(np.mean(err ** 2)))
    assert json.loads(h["euler"]["attrs"]["heldout_cells"])


def test_tables_command_lists_the_shipped_tables(capsys):
    from nullatlas.lookup import cli
    assert cli.main(["tables", "--json"]) == 0
    t = json.loads(capsys.readouterr().out)["tables"]
    assert sorted(x["dimension"] for x in t) == [2, 3]
    for x in t:
        for shape, sh in x["shapes"].items():
            assert sh["n_min"] and sh["cells"]


def test_3d_curvature_term_predicts_the_heldout_ball_and_cylinder():
    """In 3D the loop and void totals need the smooth-curvature covariate BC
    (lookup.patterns.boundary): the shipped fit chooses it, and on the
    held-out ball and cylinder (never fitted) the mean of total H1
    persistence is predicted within 0.1 pattern sd from n = 2,000 (without
    BC the error was 0.7-1.5 sd at every n)."""
    import h5py

    with h5py.File(TABLES[3], "r") as fh:
        models = {s: fh[f"geomodel/{s}"].attrs.get("model") for s in ("total1", "total2", "euler")}
        rows = json.loads(fh["validation"].attrs["rows"])
    assert models["total1"] == "curved" and models["total2"] == "curved"
    near = [r for r in rows if r["statistic"] == "total1" and r["window"] in ("ball", "cylinder6")
            and r["n"] >= 2000]
    assert len(near) == 4
    for r in near:
        assert abs(r["mean_err_sd"]) < 0.1, r
