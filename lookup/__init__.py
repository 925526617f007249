"""nullatlas.lookup -- the runtime stage: read a pattern and its window,
compute persistence summaries, and test complete spatial randomness.

Quick use
---------
>>> import numpy as np
>>> from nullatlas.lookup import csr_test, Disk
>>> w = Disk(0, 0, 150)
>>> pts = w.sample(300, np.random.default_rng(1))
>>> res = csr_test(pts, w, n_sims=99, seed=2)
>>> 0 < res.pvalue <= 1
True
"""
from .csrtest import csr_test
from .diagram import Diagram, alpha_diagram
from .errors import NullAtlasError, OptionError, PointsError, TableError, WindowError
from .readers import read_points
from .results import CSRTestResult, StatResult
from .statistics import STATISTICS, default_stats
from .validate import validate_pattern
from .windows import Ball, Box, ConvexPolytope, Disk, PolygonWindow, Rectangle, Window, parse_window

__all__ = [
    "csr_test", "Diagram", "alpha_diagram", "NullAtlasError", "OptionError", "PointsError",
    "TableError", "WindowError", "read_points", "CSRTestResult", "StatResult", "STATISTICS",
    "default_stats", "validate_pattern", "Ball", "Box", "ConvexPolytope", "Disk",
    "PolygonWindow", "Rectangle", "Window", "parse_window",
]
