"""The extremes' quantile model (calibrate.model.fit_extreme_quantiles,
lookup.inference.extremequantiles) and the choice among the additive
candidates (calibrate.model.comparable_shapes)."""
import math

import numpy as np
import pytest

from nullatlas.calibrate.model import comparable_shapes, fit_extreme_quantiles
from nullatlas.lookup.inference.extremequantiles import (
    QUANTILE_P,
    extreme_design,
    quantile_sample,
)

EULER_GAMMA = 0.5772156649  # Euler-Mascheroni constant (mean of the standard Gumbel)


def _cells(rng, truth, reps=4000):
    """Synthetic cells: values Gumbel(loc, scale) with loc = a + b log n + c B1
    + e B2 and scale 0.05 -- the law the largest lifetime approaches
    (Gumbel max-stability: location grows like scale * log n)."""
    cells = []
    for shape, b1, b2 in (("s1", 0.2, 0.01), ("s2", 0.5, 0.05), ("s3", 0.8, 0.02),
                          ("s4", 0.35, 0.08)):
        for n in (200, 1000, 5000):
            cov = np.array([[1.0, b1 * (1000 / n) ** 0.5, b2, 1.0 / n, 0.0]])
            loc = truth @ extreme_design(cov, n, ("1", "log n", "B1", "B2"))
            v = rng.gumbel(loc, 0.05, reps)
            cells.append({"shape": shape, "n": n, "cov": cov, "values": np.sort(v)})
    return cells


def test_quantile_model_recovers_a_gumbel_location_law():
    rng = np.random.default_rng(7)
    truth = np.array([0.1, 0.05, -0.2, 0.3])
    fit = fit_extreme_quantiles(_cells(rng, truth), d=2, n_fit=100)
    assert fit["columns"] == ["1", "log n", "B1", "B2"]
    # at every level the slopes are those of the location: the Gumbel
    # quantile is loc - scale log(-log p), so only the intercept moves with p
    j = np.argmin(np.abs(QUANTILE_P - 0.5))
    assert fit["qcoef"][j, 1:] == pytest.approx(truth[1:], abs=0.02)
    assert fit["qcoef"][j, 0] == pytest.approx(truth[0] - 0.05 * math.log(math.log(2)), abs=0.03)
    # a window never fitted: the sample has the Gumbel mean and sd
    cov = np.array([[1.0, 0.6, 0.04, 1e-3, 0.0]])
    x = extreme_design(cov, 3000, fit["columns"])
    s = quantile_sample(fit["p"], fit["qcoef"], x, 20000)
    loc = truth @ x
    assert s.mean() == pytest.approx(loc + 0.05 * EULER_GAMMA, abs=0.004)
    assert s.std() == pytest.approx(0.05 * math.pi / math.sqrt(6), rel=0.05)
    assert np.all(np.diff(s) >= 0)
    # beyond the modelled levels the Gumbel tail continues: the largest of
    # 20,000 sample values lies near the 1 - 1/40,000 quantile
    top = loc - 0.05 * math.log(-math.log(1 - 0.5 / 20000))
    assert s[-1] == pytest.approx(top, abs=0.02)


def test_quantile_model_needs_enough_cells():
    rng = np.random.default_rng(1)
    cells = _cells(rng, np.array([0.1, 0.05, -0.2, 0.3]))[:5]
    with pytest.raises(ValueError):
        fit_extreme_quantiles(cells, d=2)


def test_comparable_shapes_leave_out_the_only_curved_shape():
    # BC (column 4) is non-zero only for 'cyl': without it no model can learn
    # the curvature term, so it is not held against the model that has it
    def cell(shape, bc):
        return {"shape": shape, "n": 500, "cov": np.array([1.0, 0.5, 0.1, 0.002, bc])}

    cells = [cell("cube", 0.0), cell("box", 0.0), cell("cyl", 0.3), cell("slab", 0.0)]
    assert comparable_shapes(cells, 100, (0, 1, 2, 3, 4)) == ["box", "cube", "slab"]
    cells.append(cell("cyl8", 0.5))
    assert comparable_shapes(cells, 100, (0, 1, 2, 3, 4)) == ["box", "cube", "cyl", "cyl8", "slab"]
    # without the curvature column every shape is comparable
    assert len(comparable_shapes(cells[:4], 100, (0, 1, 2, 3))) == 4
