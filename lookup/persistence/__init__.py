"""Exact persistent homology of alpha complexes, the bottom layer.

From points to persistence diagrams, with nothing above it in ``lookup``:
exact Delaunay triangulations (``delaunay2d``, ``delaunay3d``), exactly
rounded filtration values and predicates (``exactvalues``), union-find
pairing (``pairing``), point-set preparation (``pointsets``), mesh repair
(``meshrepair``), the 2D and 3D alpha sweeps (``alpha2d``, ``alpha3d``) and
the :class:`~nullatlas.lookup.persistence.diagram.Diagram` type with the
choice of engine (``diagram``).
"""
