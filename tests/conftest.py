import os

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
EXAMPLES = os.path.join(ROOT, "examples")


@pytest.fixture(scope="session", autouse=True)
def compiled_kernels():
    """Compile the kernels ahead of time once, as ``nullatlas compile`` would (a
    no-op when the cache folder has them), so that every command-line test runs
    as after an installation's first run: no compile announcement on stderr.
    Without a C compiler the tests run through numba's JIT."""
    from nullatlas.lookup import kernels
    from nullatlas.lookup.errors import CompileError
    from nullatlas.lookup.persistence import jit

    if jit._mode() != "off":
        try:
            kernels.build()
        except CompileError:
            pass
    yield


@pytest.fixture
def examples():
    return EXAMPLES


def _table_contents(path):
    """Every dataset and attribute of an HDF5 file except timing metadata
    (creation time, simulation seconds)."""
    import h5py
    import numpy as np

    out = {}
    skip = ("created", "simulation_seconds")
    with h5py.File(path, "r") as fh:
        def visit(name, obj):
            for k, v in obj.attrs.items():
                if k not in skip:
                    out[f"{name}@{k}"] = np.asarray(v)
            if isinstance(obj, h5py.Dataset):
                out[name] = np.asarray(obj[()])
        fh.visititems(visit)
        for k, v in fh.attrs.items():
            if k not in skip:
                out[f"@{k}"] = np.asarray(v)
    return out


@pytest.fixture
def same_tables():
    """assert_same(a, b): two HDF5 tables hold the same bits (timing aside)."""
    import numpy as np

    def check(a, b):
        x, y = _table_contents(a), _table_contents(b)
        assert x.keys() == y.keys()
        for k in x:
            assert x[k].dtype == y[k].dtype and x[k].shape == y[k].shape, k
            assert np.array_equal(x[k], y[k], equal_nan=x[k].dtype.kind == "f"), k
    return check
