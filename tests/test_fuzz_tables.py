"""Property tests of the table reader, the batch manifest reader and the
intensity parser: any bytes or text end in our error type, never in another
exception; loading data files never executes code."""
import os
import pickle

import h5py
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from nullatlas.calibrate import build, shapes
from nullatlas.lookup.batch import read_manifest
from nullatlas.lookup.errors import NullAtlasError, TableError
from nullatlas.lookup.inference.tablereader import load_cell, open_table
from nullatlas.lookup.processes.alternatives import intensity_function

FUZZ = settings(max_examples=120, deadline=None, derandomize=True, database=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])


@pytest.fixture(scope="module")
def good_table(tmp_path_factory):
    p = tmp_path_factory.mktemp("tab") / "good.h5"
    build.build_table(str(p), [("square", shapes.shape_window("square"))], [40, 80], 40,
                      stats=["nnmean", "euler"], root_seed=2, progress=False, n_fit=10)
    return p.read_bytes()


@FUZZ
@given(data=st.binary(max_size=4096))
def test_arbitrary_bytes_are_a_table_error(tmp_path_factory, data):
    p = tmp_path_factory.mktemp("f") / "t.h5"
    p.write_bytes(data)
    with pytest.raises(TableError):
        open_table(p)


@FUZZ
@given(cut=st.floats(0.0, 1.0), flips=st.lists(st.tuples(st.floats(0, 1), st.integers(0, 255)),
                                                max_size=8))
def test_damaged_tables_are_a_table_error_or_read(tmp_path_factory, good_table, cut, flips):
    """Truncated or bit-flipped tables either open (and their cells read) or
    raise TableError: nothing else escapes."""
    data = bytearray(good_table[: max(1, int(len(good_table) * cut))] if cut < 1 else good_table)
    for where, byte in flips:
        data[int(where * (len(data) - 1))] = byte
    p = tmp_path_factory.mktemp("d") / "t.h5"
    p.write_bytes(bytes(data))
    try:
        info = open_table(p)
        for c in info.cells:
            load_cell(p, c.name)
    except TableError:
        pass


def test_a_pickle_inside_a_table_is_never_executed(tmp_path, good_table):
    """An attacker's pickle stored as bytes in a table stays inert bytes: the
    reader never unpickles (tables are plain numeric datasets and strings)."""
    marker = tmp_path / "pwned"

    class Evil:
        def __reduce__(self):
            return (open, (str(marker), "w"))

    p = tmp_path / "t.h5"
    p.write_bytes(good_table)
    with h5py.File(p, "a") as fh:
        fh.attrs["software"] = np.void(pickle.dumps(Evil()))
        fh["cells"].attrs["payload"] = np.void(pickle.dumps(Evil()))
    try:
        info = open_table(p)
        for c in info.cells:
            load_cell(p, c.name)
    except TableError:
        pass
    assert not marker.exists()


@FUZZ
@given(text=st.text(max_size=400))
def test_manifests_of_any_text_are_our_error(tmp_path_factory, text):
    d = tmp_path_factory.mktemp("m")
    p = d / "m.csv"
    p.write_text(text, encoding="utf-8")
    try:
        items = read_manifest(str(p))
    except NullAtlasError:
        return
    for it in items:                       # accepted: inside the folder, both fields present
        assert it.window and os.path.commonpath([str(d), os.path.realpath(it.path)]) == \
            os.path.realpath(str(d))


@FUZZ
@given(text=st.one_of(st.text(max_size=80), st.sampled_from(
    ["1/0", "2**10000", "x**-1", "log(-1)", "True", "(1,2)", "x < 1", "y**y**y**y", "sqrt(x)-"]),
    st.from_regex(r"[xy0-9+\-*/(). ]{1,20}", fullmatch=True)))
def test_intensity_expressions_of_any_text_are_our_error(text):
    try:
        f = intensity_function(text, 2)
    except NullAtlasError:
        return
    v = f(np.array([[0.5, 0.25], [1.0, 2.0]]))
    assert v.shape == (2,)
