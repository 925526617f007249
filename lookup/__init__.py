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
import importlib

# Names are imported on first use (PEP 562) so that ``nullatlas --help`` and
# other light commands start without loading numba, gudhi and scipy.
_WHERE = {
    "csr_test": "csrtest", "Diagram": "persistence.diagram", "alpha_diagram": "persistence.diagram",
    "NullAtlasError": "errors", "OptionError": "errors", "PointsError": "errors",
    "TableError": "errors", "WindowError": "errors", "read_points": "patterns.readers",
    "CSRTestResult": "results", "StatResult": "results", "STATISTICS": "summaries.statistics",
    "default_stats": "summaries.statistics", "validate_pattern": "patterns.validate",
    "Ball": "patterns.windows", "Box": "patterns.windows", "ConvexPolytope": "patterns.windows",
    "Disk": "patterns.windows", "PolygonWindow": "patterns.windows", "Rectangle": "patterns.windows",
    "Window": "patterns.windows", "parse_window": "patterns.windows",
    "plot_result": "plots", "plot_diagram": "plots", "plot_curve": "plots", "plot_scalars": "plots",
    "plot_batch": "plots", "locate_features": "features.locate", "FeatureMap": "features.results",
    "Feature": "features.results", "plot_feature_map": "features.mapplot",
}
__all__ = list(_WHERE)


def __getattr__(name):
    if name in _WHERE:
        value = getattr(importlib.import_module(f".{_WHERE[name]}", __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return sorted(list(globals()) + __all__)
