"""Summaries of a pattern: topological and classical, on fixed grids.

``grids`` (the normalised grids of the curves), ``topological`` (Betti and
Euler curves, persistent Betti numbers, APF, persistence totals,
silhouettes of a diagram), ``classical`` (Clark-Evans, G and L) and
``statistics`` (the registry of named statistics and ``compute``).
"""
