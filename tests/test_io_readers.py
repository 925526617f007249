"""Reading point coordinates: text formats, column selection, .npy, HDF5,
and one clear NullAtlasError (a ValueError) for every kind of bad file."""
import os

import h5py
import numpy as np
import pytest

from nullatlas.lookup.errors import NullAtlasError, PointsError
from nullatlas.lookup.patterns.readers import parse_columns, read_points

XY = np.array([[0.1, 0.2], [0.3, 0.4], [0.5, 0.6], [-1.5, 2e3]])
XYZ = np.array([[0.1, 0.2, 0.3], [0.4, 0.5, 0.6], [0.7, 0.8, 0.9], [1.0, 1.1, 1.2]])


def _w(tmp_path, name, text, mode="w"):
    path = tmp_path / name
    if mode == "wb":
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    return str(path)


def _lines(arr, sep):
    return "".join(sep.join(repr(float(v)) for v in row) + "\n" for row in arr)


def _bad(call, *fragments):
    """Assert ``call`` raises a NullAtlasError (a ValueError) naming the problem."""
    with pytest.raises(NullAtlasError) as info:
        call()
    err = info.value
    assert isinstance(err, ValueError)
    assert isinstance(err, PointsError)
    msg = str(err)
    assert "\n" not in msg.strip(), "error message should be one line"
    for frag in fragments:
        assert frag.lower() in msg.lower(), f"{frag!r} not in {msg!r}"
    return msg


# --------------------------------------------------------------------------
# Text formats
# --------------------------------------------------------------------------

def test_csv_with_header(tmp_path):
    p = _w(tmp_path, "a.csv", "x,y\n" + _lines(XY, ","))
    out = read_points(p)
    assert out.dtype == np.float64
    np.testing.assert_array_equal(out, XY)


def test_csv_without_header(tmp_path):
    np.testing.assert_array_equal(read_points(_w(tmp_path, "a.csv", _lines(XY, ","))), XY)


def test_csv_3d_without_header(tmp_path):
    np.testing.assert_array_equal(read_points(_w(tmp_path, "a.csv", _lines(XYZ, ","))), XYZ)


def test_csv_with_spaces_after_commas(tmp_path):
    p = _w(tmp_path, "a.csv", "x, y\n" + _lines(XY, ", "))
    np.testing.assert_array_equal(read_points(p), XY)


def test_tsv(tmp_path):
    p = _w(tmp_path, "a.tsv", "x\ty\tz\n" + _lines(XYZ, "\t"))
    np.testing.assert_array_equal(read_points(p), XYZ)


def test_whitespace_separated(tmp_path):
    text = "".join("  " + "   ".join(repr(float(v)) for v in row) + "  \n" for row in XY)
    np.testing.assert_array_equal(read_points(_w(tmp_path, "a.txt", text)), XY)


def test_whitespace_with_header(tmp_path):
    p = _w(tmp_path, "a.dat", "x y z\n" + _lines(XYZ, " "))
    np.testing.assert_array_equal(read_points(p), XYZ)


def test_semicolons(tmp_path):
    p = _w(tmp_path, "a.csv", "x;y\n" + _lines(XY, ";"))
    np.testing.assert_array_equal(read_points(p), XY)


def test_comment_and_blank_lines(tmp_path):
    text = ("# points from a survey\n"
            "   # indented comment\n"
            "\n"
            "x,y\n"
            "0.1,0.2\n"
            "# a comment in the middle\n"
            "\n"
            "0.3,0.4\n"
            "0.5,0.6\n"
            "-1.5,2000\n"
            "# trailing comment\n")
    np.testing.assert_array_equal(read_points(_w(tmp_path, "a.csv", text)), XY)


def test_crlf_and_bom(tmp_path):
    text = "x,y\r\n" + _lines(XY, ",").replace("\n", "\r\n")
    p = _w(tmp_path, "a.csv", b"\xef\xbb\xbf" + text.encode(), mode="wb")
    np.testing.assert_array_equal(read_points(p), XY)


def test_scientific_notation_and_signs(tmp_path):
    text = "1e-3,-2.5E+2\n+3,4.\n.5,-0\n6,7\n"
    out = read_points(_w(tmp_path, "a.csv", text))
    np.testing.assert_array_equal(out, [[1e-3, -250], [3, 4], [0.5, 0], [6, 7]])


def test_no_trailing_newline(tmp_path):
    text = _lines(XY, ",").rstrip("\n")
    np.testing.assert_array_equal(read_points(_w(tmp_path, "a.csv", text)), XY)


def test_pathlib_path(tmp_path):
    p = tmp_path / "a.csv"
    p.write_text(_lines(XY, ","))
    np.testing.assert_array_equal(read_points(p), XY)


# --------------------------------------------------------------------------
# Column selection
# --------------------------------------------------------------------------

WIDE = "id,mass,x,y,z,label\n" + "".join(
    f"{i},{10 * i},{r[0]!r},{r[1]!r},{r[2]!r},{i % 2}\n" for i, r in enumerate(XYZ.tolist()))


def test_default_picks_x_y_z_from_header(tmp_path):
    np.testing.assert_array_equal(read_points(_w(tmp_path, "w.csv", WIDE)), XYZ)


def test_default_picks_x_y_in_any_order_and_case(tmp_path):
    text = "Y,id,X\n" + "".join(f"{r[1]!r},{i},{r[0]!r}\n" for i, r in enumerate(XY.tolist()))
    np.testing.assert_array_equal(read_points(_w(tmp_path, "w.csv", text)), XY)


def test_default_picks_x_y_only_when_no_z(tmp_path):
    text = "id,x,y,mass\n" + "".join(f"{i},{r[0]!r},{r[1]!r},7\n" for i, r in enumerate(XY.tolist()))
    np.testing.assert_array_equal(read_points(_w(tmp_path, "w.csv", text)), XY)


def test_columns_by_name(tmp_path):
    p = _w(tmp_path, "w.csv", WIDE)
    np.testing.assert_array_equal(read_points(p, columns=["x", "z"]), XYZ[:, [0, 2]])
    np.testing.assert_array_equal(read_points(p, columns=["Z", "Y", "X"]), XYZ[:, ::-1])


def test_columns_by_index(tmp_path):
    p = _w(tmp_path, "w.csv", WIDE)
    np.testing.assert_array_equal(read_points(p, columns=[2, 4]), XYZ[:, [0, 2]])
    np.testing.assert_array_equal(read_points(p, columns=parse_columns("2,3,4")), XYZ)
    # A string is parsed like the --columns option.
    np.testing.assert_array_equal(read_points(p, columns="x,y"), XYZ[:, :2])


def test_columns_by_index_without_header(tmp_path):
    data = np.column_stack([XY[:, 0], np.arange(4.0), XY[:, 1]])
    p = _w(tmp_path, "n.csv", _lines(data, ","))
    np.testing.assert_array_equal(read_points(p, columns=parse_columns("0,2")), XY)


def test_parse_columns():
    assert parse_columns(None) is None
    assert parse_columns("x,y") == ["x", "y"]
    assert parse_columns(" lon , lat , depth ") == ["lon", "lat", "depth"]
    assert parse_columns("0,2") == [0, 2]
    assert parse_columns("3, 1, 0") == [3, 1, 0]


@pytest.mark.parametrize("text", ["x", "0", "a,b,c,d", "x,,y", ",", ""])
def test_parse_columns_rejects(text):
    _bad(lambda: parse_columns(text), "--columns")


def test_too_many_columns_without_choice(tmp_path):
    data = np.column_stack([XYZ, XYZ[:, 0]])
    _bad(lambda: read_points(_w(tmp_path, "n.csv", _lines(data, ","))), "4 columns", "--columns")


def test_single_column_file(tmp_path):
    _bad(lambda: read_points(_w(tmp_path, "n.csv", "1\n2\n3\n4\n")), "1 columns")


def test_column_index_out_of_range(tmp_path):
    _bad(lambda: read_points(_w(tmp_path, "n.csv", _lines(XY, ",")), columns=[0, 5]),
         "index 5", "out of range", "2 columns")


def test_column_name_not_in_header(tmp_path):
    _bad(lambda: read_points(_w(tmp_path, "w.csv", WIDE), columns=["x", "depth"]),
         "no column named 'depth'")


def test_column_name_without_header(tmp_path):
    _bad(lambda: read_points(_w(tmp_path, "n.csv", _lines(XY, ",")), columns=["x", "y"]),
         "no header")


# --------------------------------------------------------------------------
# Text errors
# --------------------------------------------------------------------------

def test_nan_names_line(tmp_path):
    text = "# comment\nx,y\n0.1,0.2\n0.3,nan\n0.5,0.6\n"
    _bad(lambda: read_points(_w(tmp_path, "a.csv", text)), "line 4", "coordinate 2", "nan")


@pytest.mark.parametrize("token", ["inf", "-inf", "Infinity", "1e999"])
def test_inf_names_line(tmp_path, token):
    text = f"0.1,0.2\n0.3,0.4\n{token},0.6\n"
    _bad(lambda: read_points(_w(tmp_path, "a.csv", text)), "line 3", "coordinate 1", "inf")


def test_nan_count_reported(tmp_path):
    text = "1,2\nnan,3\n4,nan\n5,6\n"
    _bad(lambda: read_points(_w(tmp_path, "a.csv", text)), "line 2", "2 row(s)")


def test_nan_in_unused_column_is_fine(tmp_path):
    text = "x,y,note\n" + "".join(f"{r[0]!r},{r[1]!r},nan\n" for r in XY.tolist())
    np.testing.assert_array_equal(read_points(_w(tmp_path, "a.csv", text)), XY)


def test_text_in_numeric_column(tmp_path):
    text = "x,y\n0.1,0.2\n0.3,abc\n0.5,0.6\n"
    _bad(lambda: read_points(_w(tmp_path, "a.csv", text)), "line 3", "column 2", "'abc'", "not a number")


def test_empty_field(tmp_path):
    _bad(lambda: read_points(_w(tmp_path, "a.csv", "1,2\n3,\n5,6\n")), "line 2", "column 2")


def test_ragged_rows(tmp_path):
    text = "x,y\n1,2\n3,4\n5,6,7\n8,9\n"
    _bad(lambda: read_points(_w(tmp_path, "a.csv", text)), "line 4", "expected 2 columns", "found 3")


def test_short_row(tmp_path):
    _bad(lambda: read_points(_w(tmp_path, "a.txt", "1 2 3\n4 5 6\n7 8\n")), "line 3", "found 2")


@pytest.mark.parametrize("text", ["", "\n\n   \n", "# only a comment\n# another\n"])
def test_empty_file(tmp_path, text):
    _bad(lambda: read_points(_w(tmp_path, "a.csv", text)), "empty")


def test_header_only(tmp_path):
    _bad(lambda: read_points(_w(tmp_path, "a.csv", "x,y\n# no data\n")), "header only")


def test_missing_file(tmp_path):
    path = str(tmp_path / "nope.csv")
    _bad(lambda: read_points(path), "not found", "nope.csv")


def test_directory(tmp_path):
    d = tmp_path / "adir"
    d.mkdir()
    _bad(lambda: read_points(str(d)), "directory")


def test_binary_junk(tmp_path):
    junk = bytes(range(256)) * 4
    _bad(lambda: read_points(_w(tmp_path, "junk.csv", junk, mode="wb")), "not a text file")


def test_nul_bytes_in_ascii(tmp_path):
    _bad(lambda: read_points(_w(tmp_path, "nul.csv", b"1,2\n3,4\x00\n5,6\n", mode="wb")),
         "not a text file")


def test_errors_name_the_file(tmp_path):
    p = _w(tmp_path, "named_file.csv", "1,2\n3,x\n")
    _bad(lambda: read_points(p), "named_file.csv")


# --------------------------------------------------------------------------
# .npy
# --------------------------------------------------------------------------

@pytest.mark.parametrize("arr", [XY, XYZ, XY.astype(np.float32), np.arange(8).reshape(4, 2),
                                 np.arange(12, dtype=np.uint16).reshape(4, 3)])
def test_npy(tmp_path, arr):
    path = str(tmp_path / "p.npy")
    np.save(path, arr)
    out = read_points(path)
    assert out.dtype == np.float64
    np.testing.assert_array_equal(out, arr.astype(float))


def test_npy_columns(tmp_path):
    path = str(tmp_path / "p.npy")
    np.save(path, np.column_stack([XYZ, np.ones(4)]))
    np.testing.assert_array_equal(read_points(path, columns=[0, 2]), XYZ[:, [0, 2]])
    _bad(lambda: read_points(path), "4 columns")
    _bad(lambda: read_points(path, columns=["x", "y"]), "no header")


@pytest.mark.parametrize("arr, frag", [
    (np.arange(5.0), "shape"),
    (np.zeros((2, 2, 2)), "shape"),
    (np.zeros((0, 2)), "no rows"),
    (np.zeros((5, 1)), "1 columns"),
    (np.zeros((5, 4)), "4 columns"),
    (np.array([["a", "b"], ["c", "d"]]), "dtype"),
    (np.zeros((3, 2), dtype=bool), "dtype"),
    (np.zeros((3, 2), dtype=complex), "dtype"),
    (np.zeros(3, dtype=[("x", float), ("y", float)]), "dtype"),
    (np.array([[1.0, np.nan], [2.0, 3.0]]), "nan"),
    (np.array([[1.0, 2.0], [np.inf, 3.0]]), "row 1"),
])
def test_npy_bad_arrays(tmp_path, arr, frag):
    path = str(tmp_path / "bad.npy")
    np.save(path, arr)
    _bad(lambda: read_points(path), frag)


def test_npy_object_dtype(tmp_path):
    """An object-dtype .npy (whose payload would be a pickle) is refused before
    anything is unpickled.  The file is written by hand (npy format 1.0: magic,
    header dict, payload) with a payload that is not even a pickle, so that
    nothing here needs pickle either."""
    header = b"{'descr': '|O', 'fortran_order': False, 'shape': (2, 2), }"
    header += b" " * (63 - (10 + len(header)) % 64) + b"\n"
    blob = b"\x93NUMPY\x01\x00" + len(header).to_bytes(2, "little") + header + b"no pickle here"
    path = _w(tmp_path, "obj.npy", blob, mode="wb")
    _bad(lambda: read_points(path), "obj.npy", "not a readable .npy")


@pytest.mark.parametrize("content", [b"", b"not an npy file at all", b"\x93NUMPY\x01\x00garbage",
                                     b"PK\x03\x04zipjunk"])
def test_npy_junk(tmp_path, content):
    _bad(lambda: read_points(_w(tmp_path, "junk.npy", content, mode="wb")), "junk.npy")


def test_npy_truncated(tmp_path):
    path = tmp_path / "t.npy"
    np.save(path, np.random.default_rng(0).random((100, 2)))
    data = path.read_bytes()
    path.write_bytes(data[:len(data) // 2])
    _bad(lambda: read_points(str(path)), "t.npy")


def test_array_input():
    np.testing.assert_array_equal(read_points(XY), XY)
    np.testing.assert_array_equal(read_points(XY.tolist()), XY)
    _bad(lambda: read_points(np.array([[1.0, np.nan]])), "nan")


# --------------------------------------------------------------------------
# HDF5
# --------------------------------------------------------------------------

@pytest.fixture
def h5file(tmp_path):
    path = str(tmp_path / "data.h5")
    with h5py.File(path, "w") as fh:
        fh["top"] = XY
        g = fh.create_group("group")
        g["ds"] = XYZ
        g["wide"] = np.column_stack([XYZ, np.zeros(4)])
        g["ints"] = np.arange(8, dtype=np.int32).reshape(4, 2)
        g["nan"] = np.array([[0.0, 1.0], [2.0, np.nan]])
        g["vec"] = np.arange(5.0)
        g["empty"] = np.zeros((0, 2))
        g["text"] = np.array([b"a", b"b"])
        g.create_group("sub")
    return path


def test_hdf5_dataset_in_group(h5file):
    np.testing.assert_array_equal(read_points(h5file + ":/group/ds"), XYZ)
    np.testing.assert_array_equal(read_points(h5file + ":group/ds"), XYZ)


def test_hdf5_top_level_and_ints(h5file):
    np.testing.assert_array_equal(read_points(h5file + ":/top"), XY)
    out = read_points(h5file + ":/group/ints")
    assert out.dtype == np.float64
    np.testing.assert_array_equal(out, np.arange(8).reshape(4, 2))


def test_hdf5_columns(h5file):
    np.testing.assert_array_equal(read_points(h5file + ":/group/wide", columns=[0, 1, 2]), XYZ)
    _bad(lambda: read_points(h5file + ":/group/wide"), "4 columns")


@pytest.mark.parametrize("suffix", [".hdf5", ".HDF", ".H5"])
def test_hdf5_other_suffixes(tmp_path, suffix):
    path = str(tmp_path / ("f" + suffix))
    with h5py.File(path, "w") as fh:
        fh["p"] = XY
    np.testing.assert_array_equal(read_points(path + ":/p"), XY)


def test_hdf5_missing_dataset(h5file):
    _bad(lambda: read_points(h5file + ":/group/nothing"), "no dataset", "/group/nothing")


def test_hdf5_group_instead_of_dataset(h5file):
    _bad(lambda: read_points(h5file + ":/group"), "is a group")
    _bad(lambda: read_points(h5file + ":/group/sub"), "is a group")


def test_hdf5_no_dataset_named(h5file):
    _bad(lambda: read_points(h5file), "name the dataset")
    _bad(lambda: read_points(h5file + ":"), "name the dataset")


@pytest.mark.parametrize("ds, frag", [("/group/nan", "nan"), ("/group/vec", "shape"),
                                      ("/group/empty", "no rows"), ("/group/text", "dtype")])
def test_hdf5_bad_contents(h5file, ds, frag):
    _bad(lambda: read_points(h5file + ":" + ds), frag)


def test_non_hdf5_file_with_h5_suffix(tmp_path):
    path = _w(tmp_path, "fake.h5", "x,y\n1,2\n3,4\n")
    _bad(lambda: read_points(path + ":/points"), "fake.h5", "not a readable HDF5")


def test_truncated_hdf5(tmp_path):
    path = tmp_path / "trunc.h5"
    with h5py.File(path, "w") as fh:
        fh["p"] = np.random.default_rng(0).random((1000, 2))
    data = path.read_bytes()
    path.write_bytes(data[:len(data) // 3])
    _bad(lambda: read_points(str(path) + ":/p"), "trunc.h5")


def test_hdf5_missing_file(tmp_path):
    _bad(lambda: read_points(str(tmp_path / "none.h5") + ":/p"), "not found")


def test_reader_does_not_modify_input_file(tmp_path, h5file):
    p = _w(tmp_path, "a.csv", "x,y\n1,2\n3,nan\n")
    before = open(p, "rb").read()
    with pytest.raises(PointsError):
        read_points(p)
    assert open(p, "rb").read() == before
    mtime = os.path.getmtime(h5file)
    read_points(h5file + ":/top")
    assert os.path.getmtime(h5file) == mtime


def test_digit_separators_are_not_numbers(tmp_path):
    """Issue 13: Python's float() reads '1_0e-1' as 1.0; a data file must not."""
    from nullatlas.lookup.errors import PointsError
    from nullatlas.lookup.patterns.readers import read_points

    f = tmp_path / "p.csv"
    f.write_text("x,y\n0.5,0.5\n1_0e-1,0.2\n0.3,0.3\n")
    with pytest.raises(PointsError, match=r"line 3, column 1: '1_0e-1' is not a number"):
        read_points(str(f))
    g = tmp_path / "q.csv"                 # an underscore in the header is fine
    g.write_text("x_mm,y_mm\n0.5,0.5\n0.1,0.2\n")
    assert read_points(str(g)).shape == (2, 2)
