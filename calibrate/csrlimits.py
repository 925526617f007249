"""Exact n -> infinity limits of normalised summaries under CSR.

The finite-window model (``calibrate.model``) writes a summary's mean as
``mu + (boundary terms that vanish as n grows)``.  Fitted freely, the limit
``mu`` carries a standard error, and a test at n points feels that error as
a bias of ``SE(mu) sqrt(n) / sigma_1`` pattern sd (``sigma_1^2`` the limit of
``n Var``): with the shipped tables it reaches 0.1 sd near n = 10^6.  Where
the limit is a published closed form, the model is fitted with it held
fixed, so no error of the limit grows with n.  With lambda = n / |W| and the
normalised radius rho = r lambda^(1/2) (2D):

Euler characteristic per point (``euler``)
    exp(-eta) (1 - eta), eta = pi rho^2: the mean Euler characteristic of
    the Boolean model of disks (Miles 1976; Chiu, Stoyan, Kendall & Mecke,
    *Stochastic Geometry and its Applications*, 3rd ed., 2013), which the
    alpha complex of the points has by the nerve theorem.
Clark–Evans mean nearest-neighbour distance (``nnmean``)
    1/2 (Clark & Evans, Ecology 35, 1954).
Nearest-neighbour distribution G (``gfunc``)
    1 - exp(-pi rho^2) (the Poisson void probability; Diggle, *Statistical
    Analysis of Spatial and Spatio-Temporal Point Patterns*, 3rd ed., 2013).
Besag's L function (``lfunc``)
    L(rho) = rho (Besag 1977; Ripley 1977).

For a binomial pattern of n points the means differ from these by terms of
order 1/n ((n - 1)/n for G and K, Jensen's inequality for the square root of
L), which the model's 1/n term carries.  The shipped 2D model's freely
fitted limits agree with all four within their standard errors
(``tests/test_shipped_tables.py``; ``scripts/check_large_n.py`` prints the
likelihood-ratio check of holding them fixed).

Only 2D limits are held fixed (:data:`FIXED_DIMENSIONS`): the 3D model
misfits the Euler curve beyond rho = 0.6 (its limit is less sure to be the
model's intercept there) and patterns too large for the tables' cells are
computed tile by tile in 2D only.
"""
from __future__ import annotations

import math

import numpy as np

from nullatlas.lookup.summaries import grids

__all__ = ["FIXED_DIMENSIONS", "LIMIT_SOURCES", "csr_limit"]

#: Dimensions whose models are fitted with the exact limits held fixed.
FIXED_DIMENSIONS = (2,)

#: The published source of each 2D limit (stored beside the model in the table).
LIMIT_SOURCES = {
    "euler": "Miles 1976: exp(-pi rho^2) (1 - pi rho^2)",
    "nnmean": "Clark & Evans 1954: 1/2",
    "gfunc": "Poisson void probability: 1 - exp(-pi rho^2)",
    "lfunc": "Besag 1977: L(rho) = rho",
}


def csr_limit(stat: str, d: int):
    """The exact CSR limit of a 2D statistic on its grid, or None.

    Parameters
    ----------
    stat : str
        A statistic name (``lookup.summaries.statistics.STATISTICS``).
    d : int
        Dimension; only :data:`FIXED_DIMENSIONS` have limits here.

    Returns
    -------
    (ndarray, str) or None
        The limit per grid point (shape (k,), k = 1 for a scalar) and its
        source, or None when no closed form is held fixed.

    Examples
    --------
    >>> from nullatlas.calibrate.csrlimits import csr_limit
    >>> csr_limit("nnmean", 2)[0]
    array([0.5])
    >>> csr_limit("total0", 2) is None, csr_limit("nnmean", 3) is None
    (True, True)
    """
    if d not in FIXED_DIMENSIONS or stat not in LIMIT_SOURCES:
        return None
    if stat == "euler":
        eta = math.pi * grids.RHO ** 2
        val = np.exp(-eta) * (1.0 - eta)
    elif stat == "nnmean":
        val = np.array([0.5])
    elif stat == "gfunc":
        val = 1.0 - np.exp(-math.pi * grids.NN_RHO ** 2)
    else:
        val = np.asarray(grids.L_RHO, float).copy()
    return np.asarray(val, float), LIMIT_SOURCES[stat]
