"""n_min: from which n the asymptotic test of a statistic is trusted.

Per statistic, window shape and test, n_min is the smallest calibrated n
from which the audited size (``calibrate.assemble.audit_cell``) stays within
tolerance *in every larger calibrated cell of that shape*:

* scalar statistics, at alpha = 0.05: ``lower`` tail within 0.025 +- 0.005,
  ``upper`` tail within 0.025 +- 0.005, ``two_sided`` within 0.05 +- 0.01 —
  judged separately, because two-sided sizes hide skewness (DESIGN.md);
* extreme statistics: the Gumbel upper-tail test (``upper``) within
  0.05 +- 0.01;
* curves: the global ``maxabs`` and ``mahalanobis`` tests within 0.05 +- 0.01.

A cell is out of tolerance when its audited rate lies outside
target +- tolerance by more than two binomial standard errors of the audit,
sqrt(target (1 - target) / N) with N audited replicates (about 0.005 for a
two-sided size at N = 2,000, 0.003 at N = 5,000): audit noise alone then
rarely fails a good cell, while a size clearly outside the band still fails
it.  -1 means that not even the largest calibrated n passes.
"""
from __future__ import annotations

import math

import numpy as np

__all__ = ["TESTS", "TOLERANCE", "passes", "n_min_table"]

#: Tests audited per kind of statistic.
TESTS = {"scalar": ("lower", "upper", "two_sided"), "extreme": ("upper",),
         "curve": ("maxabs", "mahalanobis")}
#: (target, tolerance) of each audited rate at alpha = 0.05.
TOLERANCE = {("scalar", "lower"): (0.025, 0.005), ("scalar", "upper"): (0.025, 0.005),
             ("scalar", "two_sided"): (0.05, 0.01), ("extreme", "upper"): (0.05, 0.01),
             ("curve", "maxabs"): (0.05, 0.01), ("curve", "mahalanobis"): (0.05, 0.01)}
_I05 = 1  # index of alpha = 0.05 in assemble.ALPHAS


def passes(kind: str, test: str, audit: dict) -> bool:
    """Whether one cell's audit of one test is within tolerance at 0.05."""
    if test not in audit or int(audit.get("n", 0)) == 0:
        return False
    target, tol = TOLERANCE[(kind, test)]
    rate = float(np.asarray(audit[test])[_I05])
    se = math.sqrt(target * (1 - target) / int(audit["n"]))
    return abs(rate - target) <= tol + 2.0 * se + 1e-12


def n_min_table(cells: list[dict], kinds: dict) -> dict:
    """n_min per shape, statistic and test.

    Parameters
    ----------
    cells : list of dict
        Each with ``shape``, ``n`` and ``audit`` (stat -> audit dict).
    kinds : dict stat -> kind

    Returns
    -------
    dict shape -> stat -> (tests, array of n_min)
    """
    out = {}
    shapes = dict.fromkeys(c["shape"] for c in cells)
    for shape in shapes:
        cs = sorted((c for c in cells if c["shape"] == shape), key=lambda c: c["n"])
        out[shape] = {}
        for stat, kind in kinds.items():
            tests = TESTS[kind]
            vals = []
            for t in tests:
                nm = -1
                for c in reversed(cs):          # walk down from the largest n
                    if stat in c["audit"] and passes(kind, t, c["audit"][stat]):
                        nm = c["n"]
                    else:
                        break
                vals.append(nm)
            out[shape][stat] = (tests, np.array(vals, dtype=np.int64))
    return out
