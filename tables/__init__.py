"""Shipped null tables (HDF5), installed as package data.

``null2d.h5``: square, rectangles of aspect 2 and 4, disk; ``null3d.h5``: cube
and a 1:1:4 box.  Regenerate with ``python scripts/make_tables.py``; list
with ``nullatlas tables``.
"""
