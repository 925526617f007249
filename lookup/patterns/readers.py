"""Reading point coordinates from text, .npy and HDF5 files.

Supported inputs
----------------
* delimited text (comma, tab, semicolon or whitespace), with or without a
  header line; lines starting with ``#`` are comments;
* ``.npy`` arrays of shape (n, k) (loaded with ``allow_pickle=False``);
* an HDF5 dataset, addressed as ``file.h5:/group/dataset``.

Columns are chosen with ``columns``: names (need a header) or 0-based
indices.  Without ``columns``, a header with ``x, y[, z]`` selects those,
otherwise a file of exactly 2 or 3 columns is taken whole.
"""
from __future__ import annotations

import os
import re

import numpy as np

from ..errors import PointsError

__all__ = ["read_points", "parse_columns", "points_file"]

_H5_SUFFIX = re.compile(r"^(.*\.(?:h5|hdf5|hdf))(?::(.*))?$", re.IGNORECASE)


def parse_columns(text: str | None):
    """Parse a ``--columns`` value (``"x,y"`` or ``"0,1,2"``) into a list.

    Examples
    --------
    >>> from nullatlas.lookup.patterns.readers import parse_columns
    >>> parse_columns("x,y"), parse_columns("0,2,1"), parse_columns(None)
    (['x', 'y'], [0, 2, 1], None)
    """
    if text is None:
        return None
    items = [s.strip() for s in str(text).split(",")]
    if not 2 <= len(items) <= 3 or any(not s for s in items):
        raise PointsError(f"--columns needs 2 or 3 comma-separated names or indices, got '{text}'")
    if all(re.fullmatch(r"\d+", s) for s in items):
        return [int(s) for s in items]
    return items


def _is_number(tok: str) -> bool:
    # Python's float() accepts digit separators ("1_0e-1" is 1.0): not a
    # number in a data file
    if "_" in tok:
        return False
    try:
        float(tok)
        return True
    except ValueError:
        return False


def _split_function(line: str):
    for delim in (",", "\t", ";"):
        if delim in line:
            return delim, (lambda s, d=delim: [t.strip() for t in s.split(d)])
    return None, (lambda s: s.split())


def _column_index(names, columns, k: int, where: str) -> list | None:
    """Indices of the coordinate columns among ``k`` columns called ``names``
    (None when there is no header); None means all of them."""
    low = None if names is None else [str(n).strip().lower() for n in names]
    if columns is None:
        if low is not None and "x" in low and "y" in low:
            return [low.index("x"), low.index("y")] + ([low.index("z")] if "z" in low else [])
        if k in (2, 3):
            return None
        raise PointsError(
            f"{where}: has {k} columns; choose the coordinate columns with --columns "
            "(names like x,y or 0-based indices like 0,1)")
    idx = []
    for c in columns:
        if isinstance(c, (int, np.integer)):
            if not 0 <= c < k:
                raise PointsError(f"{where}: column index {c} out of range (file has {k} columns)")
            idx.append(int(c))
        else:
            if low is None:
                raise PointsError(f"{where}: column '{c}' requested by name, but the file has no header")
            if str(c).lower() not in low:
                raise PointsError(f"{where}: no column named '{c}' (header: {', '.join(map(str, names))})")
            idx.append(low.index(str(c).lower()))
    return idx


def _select(arr: np.ndarray, names, columns, where: str) -> np.ndarray:
    idx = _column_index(names, columns, arr.shape[1], where)
    return arr if idx is None else arr[:, idx]


def _read_frame(frame, columns) -> np.ndarray:
    """Coordinates from a data frame (pandas or alike): the named or numbered
    ``columns``, else ``x, y[, z]``, else a frame of exactly 2 or 3 columns."""
    names = [str(c) for c in frame.columns]
    idx = _column_index(names, columns, len(names), "data frame")
    chosen = frame.iloc[:, idx] if idx is not None else frame
    try:
        arr = chosen.to_numpy(dtype=float)
    except (TypeError, ValueError):
        raise PointsError("data frame: the coordinate columns "
                          f"({', '.join(str(c) for c in chosen.columns)}) must hold numbers; "
                          "choose them with columns=[...]") from None
    return _read_array(arr, "data frame", None)


def _read_text(path: str, columns) -> np.ndarray:
    try:
        with open(path, "r", encoding="utf-8-sig") as fh:
            raw = fh.read()
    except UnicodeDecodeError:
        raise PointsError(f"{path}: not a text file (cannot decode as UTF-8)") from None
    except OSError as exc:
        raise PointsError(f"cannot read {path}: {exc.strerror or exc}") from None
    if "\x00" in raw:
        raise PointsError(f"{path}: not a text file (contains NUL bytes)")
    fast = _read_plain(raw, path, columns)
    if fast is not None:
        return fast
    lines = [(i + 1, ln) for i, ln in enumerate(raw.replace("\r\n", "\n").replace("\r", "\n").split("\n"))
             if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        raise PointsError(f"{path}: file is empty")
    _, split = _split_function(lines[0][1])
    first = split(lines[0][1])
    names = None
    if not all(_is_number(t) for t in first):
        names = first
        lines = lines[1:]
        if not lines:
            raise PointsError(f"{path}: header only, no data rows")
    ncol = len(names) if names is not None else len(first)
    rows = []
    for lineno, ln in lines:
        toks = split(ln)
        if len(toks) != ncol:
            raise PointsError(f"{path}, line {lineno}: expected {ncol} columns, found {len(toks)}")
        rows.append(toks)
    try:
        if any("_" in t for toks in rows for t in toks):
            raise ValueError("digit separator")
        arr = np.array(rows, dtype=float)
    except ValueError:
        for (lineno, _), toks in zip(lines, rows):
            for j, t in enumerate(toks):
                if not _is_number(t):
                    raise PointsError(f"{path}, line {lineno}, column {j + 1}: "
                                      f"'{t[:40]}' is not a number") from None
        raise PointsError(f"{path}: cannot parse numbers") from None
    arr = arr.reshape(len(rows), ncol)
    out = _select(arr, names, columns, path)
    _check_finite(out, path, [ln for ln, _ in lines])
    return out


def _read_plain(raw: str, path: str, columns):
    """The common file in a few passes: no comments, carriage returns, digit
    separators or blank lines, the same number of ``,``-separated (or
    whitespace-separated) fields on every line.  Returns what the general
    reader of :func:`_read_text` returns for such a file, or None for any
    other file (which the general reader then reads, with its messages)."""
    if "#" in raw or "\r" in raw or "_" in raw:
        return None
    lines = raw.rstrip("\n").split("\n")
    if not lines or not lines[0].strip():
        return None
    delim, split = _split_function(lines[0])
    if delim not in (",", None):
        return None
    first = split(lines[0])
    names = None
    if not all(_is_number(t) for t in first):
        names, lines = first, lines[1:]
        if not lines:
            return None
    ncol = len(first)
    if delim == ",":
        if any(ln.count(",") != ncol - 1 for ln in lines):
            return None
        tokens = ",".join(lines).split(",")
    else:
        if any(len(ln.split()) != ncol for ln in lines):
            return None
        tokens = " ".join(lines).split()
    if any(not t.strip() for t in tokens[:ncol]):
        return None
    try:
        arr = np.array(tokens, dtype=float)
    except ValueError:
        return None
    arr = arr.reshape(len(lines), ncol)
    out = _select(arr, names, columns, path)
    start = 2 if names is not None else 1
    _check_finite(out, path, range(start, start + len(lines)))
    return out


def _check_finite(arr, where, linenos=None):
    bad = ~np.isfinite(arr)
    if bad.any():
        i, j = np.argwhere(bad)[0]
        what = f"line {linenos[i]}" if linenos is not None else f"row {i}"
        raise PointsError(f"{where}, {what}: coordinate {j + 1} is {arr[i, j]} (NaN/inf not allowed); "
                          f"{int(bad.any(axis=1).sum())} row(s) affected")


def _read_array(arr, where, columns):
    arr = np.asarray(arr)
    if arr.dtype.kind not in "iuf":
        raise PointsError(f"{where}: array has dtype {arr.dtype}, expected numbers")
    if arr.ndim != 2:
        raise PointsError(f"{where}: array has shape {arr.shape}, expected (n, 2) or (n, 3)")
    if arr.shape[0] == 0:
        raise PointsError(f"{where}: array has no rows")
    out = _select(arr.astype(float), None, columns, where)
    _check_finite(out, where)
    return out


def read_points(source, columns=None) -> np.ndarray:
    """Read an (n, d) array of point coordinates.

    Parameters
    ----------
    source : str or path-like or ndarray or DataFrame
        A text/CSV file, a ``.npy`` file, ``file.h5:/dataset``, an array, or
        a pandas DataFrame (other columns, e.g. labels, are ignored).
    columns : list of str or int, optional
        Coordinate columns to use (names need a header; ints are 0-based).
        Without it, columns named ``x, y[, z]``, else all of exactly 2 or 3.

    Returns
    -------
    ndarray of float, shape (n, 2) or (n, 3)

    Raises
    ------
    PointsError
        When the file is missing, unreadable, malformed or holds NaN/inf.

    Examples
    --------
    A CSV file with a header: the ``x`` and ``y`` columns are found by name.

    >>> import os
    >>> import tempfile
    >>> import numpy as np
    >>> from nullatlas import read_points
    >>> tmp = tempfile.TemporaryDirectory()
    >>> path = os.path.join(tmp.name, "pores.csv")
    >>> with open(path, "w") as fh:
    ...     _ = fh.write("id,x,y\\n1,0.5,2.0\\n2,1.5,0.25\\n3,3.0,1.0\\n")
    >>> read_points(path)
    array([[0.5 , 2.  ],
           [1.5 , 0.25],
           [3.  , 1.  ]])
    >>> read_points(path, columns="y,x")[0]
    array([2. , 0.5])

    A ``.npy`` array and an HDF5 dataset:

    >>> np.save(os.path.join(tmp.name, "pts.npy"), np.arange(12.0).reshape(4, 3))
    >>> read_points(os.path.join(tmp.name, "pts.npy")).shape
    (4, 3)
    >>> import h5py
    >>> with h5py.File(os.path.join(tmp.name, "scan.h5"), "w") as fh:
    ...     fh["/scan/pores"] = np.ones((5, 3))
    >>> read_points(os.path.join(tmp.name, "scan.h5") + ":/scan/pores").shape
    (5, 3)

    Bad input raises one ``PointsError`` (a ``ValueError``):

    >>> read_points(os.path.join(tmp.name, "missing.csv"))
    Traceback (most recent call last):
    ...
    nullatlas.lookup.errors.PointsError: points file not found: ...missing.csv
    >>> tmp.cleanup()
    """
    if isinstance(columns, str):
        columns = parse_columns(columns)
    if hasattr(source, "columns") and hasattr(source, "iloc"):
        return _read_frame(source, columns)
    if not isinstance(source, (str, os.PathLike)):
        return _read_array(source, "points", columns)
    path = os.fspath(source)
    m = _H5_SUFFIX.match(path)
    if m:
        return _read_hdf5(m.group(1), m.group(2), columns)
    if not os.path.exists(path):
        raise PointsError(f"points file not found: {path}")
    if os.path.isdir(path):
        raise PointsError(f"{path} is a directory, expected a points file")
    if path.lower().endswith(".npy"):
        try:
            arr = np.load(path, allow_pickle=False)
        except Exception as exc:
            raise PointsError(f"{path}: not a readable .npy array "
                              f"({str(exc).splitlines()[0][:80]})") from None
        return _read_array(arr, path, columns)
    return _read_text(path, columns)


def points_file(source: str) -> str:
    """The file that holds the points of ``source`` (``FILE.h5:/dataset`` ->
    ``FILE.h5``; any other path is itself)."""
    path = os.fspath(source)
    m = _H5_SUFFIX.match(path)
    return m.group(1) if m else path


def _read_hdf5(path, dataset, columns):
    import h5py

    if not os.path.exists(path):
        raise PointsError(f"points file not found: {path}")
    if not dataset:
        raise PointsError(f"{path}: name the dataset, as in {path}:/points")
    try:
        with h5py.File(path, "r") as fh:
            if dataset not in fh:
                raise PointsError(f"{path}: no dataset '{dataset}'")
            obj = fh[dataset]
            if not isinstance(obj, h5py.Dataset):
                raise PointsError(f"{path}:{dataset} is a group, not a dataset")
            arr = obj[()]
    except PointsError:
        raise
    except Exception as exc:
        raise PointsError(f"{path}: not a readable HDF5 file ({str(exc).splitlines()[0][:80]})") from None
    return _read_array(arr, f"{path}:{dataset}", columns)
