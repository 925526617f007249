"""The fixed normalised grids on which curve summaries are evaluated.

A grid is part of the definition of its summary: the null tables store the
grid with the moments, and a summary computed on another grid cannot be
compared with them.  All grids are in normalised radius units
rho = r (n/|W|)^(1/d); under CSR the topological features of a pattern live
at rho below about 1.5 in 2D and 3D.
"""
from __future__ import annotations

import numpy as np

__all__ = ["RHO", "APF_AGE", "NN_RHO", "L_RHO", "PBETTI_PAIRS", "SILHOUETTE_T"]

#: Radius grid of Betti and Euler curves: 0.025, 0.05, ..., 1.5.
RHO = np.round(np.arange(1, 61) * 0.025, 12)
#: Mean-age grid (b + d) / 2 of the accumulated persistence function.
APF_AGE = RHO.copy()
#: Nearest-neighbour G function grid: 0.025, ..., 1.0.
NN_RHO = np.round(np.arange(1, 41) * 0.025, 12)
#: Besag L function grid: 0.05, 0.10, ..., 1.0.
L_RHO = np.round(np.arange(1, 21) * 0.05, 12)
#: Silhouette grid: 0.025, ..., 1.5.
SILHOUETTE_T = RHO.copy()

_PB = np.round(np.arange(1, 11) * 0.1, 12)
#: Persistent Betti grid: (rho_birth, rho_death) with rho_birth <= rho_death,
#: both in 0.1, ..., 1.0 (55 pairs), shape (55, 2).
PBETTI_PAIRS = np.array([(b, d) for b in _PB for d in _PB if b <= d])
