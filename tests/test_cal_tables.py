"""Null tables: atomic HDF5 writing and a reader that refuses bad files with
one clear line (TableError, a ValueError)."""
import h5py
import numpy as np
import pytest

from nullatlas.calibrate.moments import Moments
from nullatlas.calibrate.tablewriter import write_table
from nullatlas.lookup.errors import TableError
from nullatlas.lookup.inference.tablereader import SCHEMA_VERSION, open_table


def _write(path, dimension=2):
    rng = np.random.default_rng(0)
    cells = [{"name": f"disk_n{n}", "shape": "disk", "n": n, "replicates": 30,
              "kappa": 2 * np.sqrt(np.pi), "geometry": {"kind": "disk", "r": 0.5641895835},
              "stats": {"euler": Moments.of(rng.random((30, 4))),
                        "nnmean": Moments.of(rng.random(30))}} for n in (100, 400)]
    write_table(path, dimension=dimension, root_seed=12345,
                grids={"rho": np.linspace(0.1, 0.4, 4)}, cells=cells)
    return cells


def test_round_trip(tmp_path):
    p = tmp_path / "t.h5"
    cells = _write(p)
    info = open_table(p, dimension=2)
    assert info.schema_version == SCHEMA_VERSION and info.root_seed == 12345
    assert "numpy" in info.software and info.created.endswith("+00:00")
    np.testing.assert_array_equal(info.grids["rho"], np.linspace(0.1, 0.4, 4))
    cov = info.coverage()
    assert [c["n"] for c in cov] == [100, 400]
    assert cov[0]["statistics"] == ["euler", "nnmean"]
    with h5py.File(p, "r") as fh:
        g = fh["cells/disk_n100/euler"]
        from nullatlas.lookup.inference.tablereader import read_m2
        back = Moments.from_arrays({"count": g.attrs["count"], "m2": read_m2(g["m2"]),
                                    **{k: g[k][()] for k in ("mean", "m3")}})
    # curve scatter matrices are stored in float32
    np.testing.assert_allclose(back.m2, cells[0]["stats"]["euler"].m2, rtol=1e-6)
    assert np.array_equal(back.mean, cells[0]["stats"]["euler"].mean)
    assert not [f for f in tmp_path.iterdir() if f.name.startswith(".")]   # no temp left


def test_failed_write_leaves_no_file(tmp_path):
    p = tmp_path / "t.h5"
    with pytest.raises(TypeError):
        write_table(p, dimension=2, root_seed=1, grids={},
                    cells=[{"name": "c", "shape": "disk", "n": 1, "replicates": 1,
                            "kappa": 1.0, "stats": {"x": "not moments"}}])
    assert list(tmp_path.iterdir()) == []


def _edit(p, fn):
    with h5py.File(p, "a") as fh:
        fn(fh)


@pytest.mark.parametrize("damage,frag", [
    (lambda fh: fh.attrs.__setitem__("schema_version", 99), "schema version 99"),
    (lambda fh: fh.attrs.__setitem__("schema", "something-else"), "not a nullatlas null table"),
    (lambda fh: fh.attrs.__delitem__("root_seed"), "lacks the attribute 'root_seed'"),
    (lambda fh: fh["cells/disk_n100/euler"].__delitem__("m2"), "lacks 'm2'"),
])
def test_bad_tables(tmp_path, damage, frag):
    p = tmp_path / "t.h5"
    _write(p)
    _edit(p, damage)
    with pytest.raises(TableError, match=frag):
        open_table(p)


def test_not_hdf5_truncated_missing_and_wrong_dimension(tmp_path):
    txt = tmp_path / "x.h5"
    txt.write_text("x,y\n1,2\n")
    with pytest.raises(TableError, match="not a readable HDF5"):
        open_table(txt)
    p = tmp_path / "t.h5"
    _write(p)
    data = p.read_bytes()
    cut = tmp_path / "cut.h5"
    cut.write_bytes(data[: len(data) // 2])
    with pytest.raises(TableError):
        open_table(cut)
    with pytest.raises(TableError, match="no such table"):
        open_table(tmp_path / "missing.h5")
    with pytest.raises(TableError, match="for 2D patterns, the data are 3D"):
        open_table(p, dimension=3)
    other = tmp_path / "other.h5"
    with h5py.File(other, "w") as fh:
        fh.create_dataset("points", data=np.zeros((3, 2)))
    with pytest.raises(TableError, match="not a nullatlas null table"):
        open_table(other)
    assert issubclass(TableError, ValueError)
