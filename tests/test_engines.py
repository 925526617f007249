"""The two persistence engines give the same answers.

``fast`` (our exact kernels, lookup.persistence.alpha2d / lookup.persistence.alpha3d) and ``gudhi``
(gudhi's AlphaComplex with its generic reduction, the reference) must produce
the same diagrams, hence the same statistics and the same Monte Carlo
p-values for the same seed.  gudhi's default precision carries a relative
error far below 1e-9, so values are compared to 1e-9 relative.
"""
import json
import os

import numpy as np
import pytest

from nullatlas.lookup import csr_test
from nullatlas.lookup.cli import main
from nullatlas.lookup.patterns.windows import parse_window
from nullatlas.lookup.persistence.diagram import FastDiagram3D, alpha_diagram
from nullatlas.lookup.summaries.statistics import STATISTICS, compute, resolve_stats

EX = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "examples")


def _sorted(p):
    return p[np.lexsort((p[:, 1], p[:, 0]))]


@pytest.mark.parametrize("dim,seed", [(2, 0), (2, 1), (3, 0)])
def test_diagrams_agree(dim, seed):
    pts = np.random.default_rng(seed).random((300, dim))
    fast = alpha_diagram(pts, 1.0, "fast")
    ref = alpha_diagram(pts, 1.0, "gudhi")
    assert fast.meta["engine"] == "fast" and ref.meta["engine"] == "gudhi"
    for q in range(dim):
        a, b = _sorted(fast.pairs[q]), _sorted(ref.pairs[q])
        assert a.shape == b.shape
        np.testing.assert_allclose(a, b, rtol=1e-9)


def test_3d_curves_without_h1_pairs():
    """The fast 3D engine gets Betti-1 and total H1 from chi = b0 - b1 + b2 and
    the filtration, without pairing H1 (its H1 pairs are not computed)."""
    pts = np.random.default_rng(4).random((250, 3))
    fast = alpha_diagram(pts, 1.0, "fast")
    assert isinstance(fast, FastDiagram3D)
    ref = alpha_diagram(pts, 1.0, "gudhi")
    grid = np.linspace(0.0, 1.2, 61)
    for q in range(3):
        np.testing.assert_array_equal(fast.betti_counts(q, grid), ref.betti_counts(q, grid))
    assert fast._h1 is None                      # no H1 pairs were needed so far
    assert fast.total_lifetime(1) == pytest.approx(ref.total_lifetime(1), rel=1e-9)
    assert fast._h1 is None


@pytest.mark.parametrize("dim,window", [(2, "disk:0,0,1"), (3, "box:0,0,0,1,1,1")])
def test_statistics_agree(dim, window):
    W = parse_window(window)
    pts = W.sample(400, np.random.default_rng(9))
    names = [n for n, s in STATISTICS.items() if dim in s.dims]
    stats = resolve_stats(names, dim)
    a = compute(pts, W, stats, "fast")
    b = compute(pts, W, stats, "gudhi")
    for s in stats:
        np.testing.assert_allclose(a[s.name], b[s.name], rtol=1e-9, atol=1e-12, err_msg=s.name)


def test_mc_pvalues_identical_across_engines():
    path = os.path.join(EX, "wafer_lot_random.csv")
    r1 = csr_test(path, "disk:0,0,150", method="mc", n_sims=49, seed=21, engine="fast")
    r2 = csr_test(path, "disk:0,0,150", method="mc", n_sims=49, seed=21, engine="gudhi")
    assert [r.pvalue for r in r1.results] == [r.pvalue for r in r2.results]
    assert r1.engine == "fast" and r2.engine == "gudhi"


def test_cli_engine_option(capsys):
    path = os.path.join(EX, "wafer_lot_regular.csv")
    rc = main(["test", path, "--window", "disk:0,0,150", "--method", "mc", "--sims", "19", "--seed", "2",
               "--engine", "gudhi", "--json", "--no-progress"])
    assert rc == 0
    assert json.loads(capsys.readouterr().out)["engine"] == "gudhi"
    with pytest.raises(SystemExit) as e:
        main(["test", path, "--window", "disk:0,0,150", "--engine", "cgal"])
    assert e.value.code == 2
    assert "invalid choice" in capsys.readouterr().err


def test_api_rejects_unknown_engine():
    with pytest.raises(ValueError, match="engine"):
        csr_test(np.random.default_rng(0).random((50, 2)), "rect:0,0,1,1", n_sims=9,
                 seed=1, engine="cgal")
