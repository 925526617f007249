"""nullatlas -- topological tests of complete spatial randomness.

The main entry points, imported on first use so that ``import nullatlas``
(and the ``nullatlas`` command's ``--help``) stays fast:

* :func:`csr_test` -- test a 2D or 3D point pattern for complete spatial
  randomness;
* the window classes :class:`Rectangle`, :class:`Disk`,
  :class:`PolygonWindow`, :class:`Box`, :class:`Ball`,
  :class:`ConvexPolytope` (all :class:`Window`) and :func:`parse_window`;
* :func:`read_points` -- read points from text, ``.npy`` or HDF5 files;
* :func:`locate_features` -- the significant clusters, loops and voids of a
  pattern, located, with family-wise p-values (a :class:`FeatureMap`);
* :class:`CSRTestResult` and :class:`NullAtlasError`;
* the figures :func:`plot_result`, :func:`plot_diagram`, :func:`plot_curve`,
  :func:`plot_scalars` and :func:`plot_batch`: each draws into a matplotlib
  ``Axes`` given, or returns a ``Figure``; a file path is optional.

They live in the runtime package :mod:`nullatlas.lookup`; the offline stage
that builds the null tables is :mod:`nullatlas.calibrate`.

Examples
--------
>>> import numpy as np
>>> import nullatlas
>>> w = nullatlas.Rectangle(0, 0, 10, 10)
>>> pts = w.sample(200, np.random.default_rng(0))
>>> res = nullatlas.csr_test(pts, w, method="asymptotic", stats=["nnmean"])
>>> 0 < res.pvalue <= 1
True
"""
import importlib

_PUBLIC = ("csr_test", "read_points", "validate_pattern", "Window", "Rectangle", "Disk",
           "PolygonWindow", "Box", "Ball", "ConvexPolytope", "parse_window", "CSRTestResult",
           "StatResult", "NullAtlasError", "plot_result", "plot_diagram", "plot_curve", "plot_scalars",
           "plot_batch", "locate_features", "FeatureMap", "Feature", "plot_feature_map")
__all__ = [*_PUBLIC, "__version__"]


def __getattr__(name):
    # PEP 562: resolved through nullatlas.lookup, itself lazy, on first use.
    if name in _PUBLIC:
        value = getattr(importlib.import_module("nullatlas.lookup"), name)
    elif name == "__version__":
        from importlib.metadata import version
        value = version("nullatlas")
    else:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    globals()[name] = value
    return value


def __dir__():
    return sorted(list(globals()) + __all__)
