"""Window shapes of the null tables: see :mod:`nullatlas.lookup.patterns.shapes`.

The runtime must recognise a user's window as a calibrated shape, so the
shapes live in ``lookup``; this module re-exports them for the offline stage.
"""
from nullatlas.lookup.patterns.shapes import SHAPES, SHIPPED, normalise, shape_dimension, shape_window  # noqa: F401

__all__ = ["SHAPES", "SHIPPED", "shape_window", "normalise", "shape_dimension"]
