"""Property tests: bad input of any kind ends in a NullAtlasError, never in
another exception, and anything accepted is well-formed.

Bugs these tests found have regression tests in test_io_validate.py.
One still-open precision bug is worked around in ``_check_window`` below."""
import io
import json
import math
import os
import warnings

import h5py
import numpy as np
import pytest
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

from nullatlas.lookup.errors import NullAtlasError, WindowError
from nullatlas.lookup.patterns.readers import read_points
from nullatlas.lookup.patterns.validate import MIN_POINTS, validate_pattern
from nullatlas.lookup.patterns.windows import EstimatedWindowWarning, Window, parse_window

# NULLATLAS_FUZZ_EXAMPLES=5000 runs a longer, randomised bug hunt; by default
# the examples are fixed (derandomize) so the suite is fast and stable.
_LONG = os.environ.get("NULLATLAS_FUZZ_EXAMPLES")
FUZZ = settings(max_examples=int(_LONG) if _LONG else 150, deadline=None,
                derandomize=not _LONG, database=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])

KAPPA_MIN = {2: 2 * math.sqrt(math.pi), 3: (36 * math.pi) ** (1 / 3)}

# Finite numbers: mostly of moderate magnitude, but also huge and tiny ones
# whose areas/volumes overflow or underflow a float.
_MODERATE = st.one_of(
    st.just(0.0),
    st.floats(1e-50, 1e50),
    st.floats(-1e50, -1e-50),
    st.integers(-1000, 1000).map(float),
)
_FINITE = st.one_of(_MODERATE, st.floats(allow_nan=False, allow_infinity=False),
                    st.sampled_from([1e308, -1e308, 1e-320, 5e-324, 1e200, 1e-200]))


@pytest.fixture(scope="module")
def fuzzdir(tmp_path_factory):
    return tmp_path_factory.mktemp("fuzz")


_counter = [0]


def _fresh(directory, suffix):
    _counter[0] += 1
    return str(directory / f"f{_counter[0]}{suffix}")


def _check_points(out):
    assert isinstance(out, np.ndarray)
    assert out.dtype == np.float64
    assert out.ndim == 2 and out.shape[1] in (2, 3) and out.shape[0] >= 1
    assert np.isfinite(out).all()


# --------------------------------------------------------------------------
# Strategies for file contents
# --------------------------------------------------------------------------

_TOKENS = st.one_of(
    st.sampled_from(["x", "y", "z", "X", "id", "nan", "NaN", "inf", "-inf", "1e999", "",
                     " ", "#", "0", "-0", "1.5", ".", "-", "+", "e5", "1e", "0x10", "1_0",
                     "\u0661", "\ufeff", "\x0c", "\r", "\u2028", "\x00", "\"1\"", "1,5"]),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-10**30, 10**30).map(str),
    st.text(max_size=4),
)
_DELIMS = st.sampled_from([",", "\t", ";", " ", "  ", ", ", " ,"])
_NEWLINES = st.sampled_from(["\n", "\r\n", "\r"])


@st.composite
def _texty(draw):
    delim = draw(_DELIMS)
    nl = draw(_NEWLINES)
    ncol = draw(st.integers(1, 4))
    rows = draw(st.lists(st.one_of(
        st.lists(_TOKENS, min_size=ncol, max_size=ncol),          # regular rows
        st.lists(_TOKENS, min_size=0, max_size=6),                 # ragged rows
        st.just(["# comment"]),
        st.lists(st.floats(-1e6, 1e6).map(repr), min_size=ncol, max_size=ncol),
    ), max_size=8))
    text = nl.join(delim.join(r) for r in rows) + draw(st.sampled_from(["", nl]))
    enc = draw(st.sampled_from(["utf-8", "utf-8-sig", "latin-1", "utf-16"]))
    return text.encode(enc, errors="replace")


_NPY_ARRAYS = st.one_of(
    hnp.arrays(dtype=st.sampled_from([np.float64, np.float32, np.int64, np.uint8, np.bool_,
                                      np.complex128, np.float16]),
               shape=hnp.array_shapes(min_dims=0, max_dims=3, min_side=0, max_side=5)),
    hnp.arrays(dtype=np.float64, shape=st.tuples(st.integers(0, 6), st.integers(1, 4)),
               elements=st.floats(allow_nan=True, allow_infinity=True)),
    st.just(np.array(["a", "b"])),
    st.just(np.zeros(3, dtype=[("x", "f8"), ("y", "f8")])),
)


@st.composite
def _npy_bytes(draw):
    buf = io.BytesIO()
    np.save(buf, draw(_NPY_ARRAYS))
    data = bytearray(buf.getvalue())
    how = draw(st.sampled_from(["keep", "truncate", "flip"]))
    if how == "truncate" and data:
        data = data[:draw(st.integers(0, len(data) - 1))]
    elif how == "flip" and data:
        i = draw(st.integers(0, len(data) - 1))
        data[i] = draw(st.integers(0, 255))
    return bytes(data)


@st.composite
def _h5_bytes(draw, directory):
    path = _fresh(directory, ".tmp.h5")
    arr = draw(_NPY_ARRAYS)
    with h5py.File(path, "w") as fh:
        try:
            fh["points"] = arr
        except (TypeError, ValueError):
            fh["points"] = np.zeros((3, 2))
        fh.create_group("g")
    with open(path, "rb") as f:
        data = f.read()
    os.remove(path)
    # Keep the file whole or truncate it (byte flips inside HDF5 metadata
    # are not tried: they can make the C library misbehave).
    if draw(st.booleans()):
        data = data[:draw(st.integers(0, len(data)))]
    return data


_ANY_BYTES = st.one_of(st.binary(max_size=400), _texty(), _npy_bytes())


# --------------------------------------------------------------------------
# read_points
# --------------------------------------------------------------------------

def _read_or_error(path, columns=None):
    try:
        out = read_points(path, columns=columns)
    except NullAtlasError:
        event("rejected")
        return None
    _check_points(out)
    event("accepted")
    return out


@FUZZ
@given(data=_ANY_BYTES, suffix=st.sampled_from([".csv", ".txt", ".npy", ".h5", ".tsv", ""]))
def test_read_points_arbitrary_bytes(fuzzdir, data, suffix):
    path = _fresh(fuzzdir, suffix)
    with open(path, "wb") as f:
        f.write(data)
    if suffix == ".h5":
        for ds in ("", ":/points", ":/g", ":points"):
            _read_or_error(path + ds)
    else:
        _read_or_error(path)


@FUZZ
@given(data=_texty(), columns=st.one_of(
    st.none(), st.sampled_from(["x,y", "0,1", "1,2,3", "z,y,x", "0,5"]),
    st.lists(st.one_of(st.integers(-2, 5), st.sampled_from(["x", "y", "id"])), min_size=2, max_size=3)))
def test_read_points_text_with_columns(fuzzdir, data, columns):
    path = _fresh(fuzzdir, ".csv")
    with open(path, "wb") as f:
        f.write(data)
    _read_or_error(path, columns)


@FUZZ
@given(data=_npy_bytes())
def test_read_points_mutated_npy(fuzzdir, data):
    path = _fresh(fuzzdir, ".npy")
    with open(path, "wb") as f:
        f.write(data)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ResourceWarning)
        _read_or_error(path)


@settings(FUZZ, max_examples=int(_LONG) // 3 if _LONG else 60)
@given(data=st.data())
def test_read_points_hdf5_whole_or_truncated(fuzzdir, data):
    content = data.draw(_h5_bytes(fuzzdir))
    path = _fresh(fuzzdir, ".h5")
    with open(path, "wb") as f:
        f.write(content)
    for ds in (":/points", ":/g", ":/missing", ""):
        _read_or_error(path + ds)


@FUZZ
@given(arr=_NPY_ARRAYS)
def test_read_points_valid_npy_round_trip(fuzzdir, arr):
    """A well-formed (n, 2|3) finite numeric array is read back exactly."""
    path = _fresh(fuzzdir, ".npy")
    np.save(path, arr)
    out = _read_or_error(path)
    good = (arr.dtype.kind in "iuf" and arr.ndim == 2 and arr.shape[0] > 0
            and arr.shape[1] in (2, 3) and np.isfinite(arr.astype(float)).all())
    if good:
        assert out is not None
        np.testing.assert_array_equal(out, arr.astype(float))
    else:
        assert out is None


@FUZZ
@given(arr=hnp.arrays(np.float64, st.tuples(st.integers(1, 8), st.integers(2, 3)),
                      elements=st.floats(allow_nan=False, allow_infinity=False)),
       delim=st.sampled_from([",", "\t", ";", " "]), header=st.booleans())
def test_read_points_valid_text_round_trip(fuzzdir, arr, delim, header):
    """Finite floats written with repr are read back bit for bit."""
    path = _fresh(fuzzdir, ".csv")
    names = ["x", "y", "z"][:arr.shape[1]]
    lines = ([delim.join(names)] if header else []) + \
        [delim.join(repr(float(v)) for v in row) for row in arr]
    with open(path, "w") as f:
        f.write("\n".join(lines) + "\n")
    np.testing.assert_array_equal(read_points(path), arr)


# --------------------------------------------------------------------------
# parse_window
# --------------------------------------------------------------------------

def _check_window(w):
    assert isinstance(w, Window)
    assert w.dim in (2, 3)
    m, b, k = w.measure, w.boundary_measure, w.kappa
    assert math.isfinite(m) and m > 0
    assert math.isfinite(b) and b > 0
    # Isoperimetric inequality: no shape beats the disk/ball.
    assert math.isfinite(k) and k >= KAPPA_MIN[w.dim] * (1 - 1e-9)
    p = w.sample(20, np.random.default_rng(0))
    assert p.shape == (20, w.dim) and np.isfinite(p).all()
    # Sampled points must pass the window's own containment test -- except in
    # the precision regime where coordinates exceed the window size by 1e9 or
    # more (known minor bug, see test_io_validate.py).
    if np.abs(p).max() <= 1e9 * w.length_scale:
        assert w.contains(p).all()


_NUM = st.one_of(
    _FINITE.map(repr),
    st.integers(-1000, 1000).map(str),
    st.sampled_from(["nan", "inf", "-inf", "", " ", "1e", "abc", "0", "-0", "1_0", "\u0661", "0x1"]),
)

_PREFIX = st.sampled_from(["rect:", "disk:", "box:", "ball:", "RECT:", " Disk:", "polygon:",
                           "bbox", "hull", "bbox:", "hull:", "rect", "circle:", ":", ""])


@st.composite
def _valid_geometry(draw):
    """A polygon (maybe with holes, maybe several parts) built with shapely."""
    import shapely
    import shapely.affinity

    x0, y0 = draw(st.integers(-5, 5)), draw(st.integers(-5, 5))
    w, h = draw(st.integers(1, 6)), draw(st.integers(1, 6))
    geom = shapely.box(x0, y0, x0 + w, y0 + h)
    for _ in range(draw(st.integers(0, 3))):
        hx, hy = draw(st.floats(0, 1)), draw(st.floats(0, 1))
        r = draw(st.floats(0.01, 0.6))
        op = draw(st.sampled_from(["hole", "union", "triangle"]))
        if op == "hole":
            geom = geom.difference(shapely.Point(x0 + hx * w, y0 + hy * h).buffer(r * min(w, h), 3))
        elif op == "union":
            geom = geom.union(shapely.box(x0 + w + 1, y0, x0 + w + 1 + r * 5, y0 + r * 5))
        else:
            geom = geom.union(shapely.Polygon([(x0, y0), (x0 - 3 * r, y0 - r), (x0 + r, y0 - 3 * r)]))
    if draw(st.booleans()):
        geom = shapely.affinity.rotate(geom, draw(st.floats(0, 360)))
    scale = draw(st.sampled_from([1.0, 1e-6, 1e6, 1e-30, 1e30]))
    return shapely.affinity.scale(geom, scale, scale, origin=(0, 0))


@st.composite
def _wellformed_spec(draw):
    key = draw(st.sampled_from(["rect", "disk", "box", "ball"]))
    k = {"rect": 4, "disk": 3, "box": 6, "ball": 4}[key]
    nums = draw(st.lists(_FINITE, min_size=k, max_size=k))
    if key in ("rect", "box") and draw(st.booleans()):
        d = k // 2
        nums = [min(a, b) for a, b in zip(nums[:d], nums[d:])] + \
               [max(a, b) + 1 for a, b in zip(nums[:d], nums[d:])]
    return key + ":" + ",".join(repr(v) for v in nums)


@st.composite
def _spec_text(draw):
    choice = draw(st.integers(0, 3))
    if choice == 0:
        return draw(_wellformed_spec())
    if choice == 1:
        return "polygon:" + draw(_valid_geometry()).wkt
    if choice == 2:
        return draw(st.sampled_from(["bbox", "hull", " BBOX ", "Hull"]))
    head = draw(_PREFIX)
    body = draw(st.one_of(
        st.lists(_NUM, min_size=0, max_size=7).map(",".join),
        _wkt(),
        st.text(max_size=20),
    ))
    return head + body


_COORD = st.one_of(st.integers(-3, 3), _FINITE, st.sampled_from(["nan", "inf"]))


@st.composite
def _ring(draw):
    pts = draw(st.lists(st.tuples(_COORD, _COORD), min_size=0, max_size=6))
    if pts and draw(st.booleans()):
        pts = pts + [pts[0]]
    return "(" + ", ".join(f"{x} {y}" for x, y in pts) + ")"


@st.composite
def _wkt(draw):
    kind = draw(st.sampled_from(["POLYGON", "MULTIPOLYGON", "LINESTRING", "POINT", "POLYGON EMPTY",
                                 "GEOMETRYCOLLECTION", "polygon", "POLYGON Z"]))
    if kind == "POLYGON EMPTY":
        return kind
    rings = draw(st.lists(_ring(), min_size=1, max_size=3))
    if kind == "MULTIPOLYGON":
        return kind + " ((" + ", ".join(rings) + "))"
    if kind in ("LINESTRING", "POINT"):
        return kind + " " + rings[0]
    return kind + " (" + ", ".join(rings) + ")"


_POINTS = st.one_of(
    st.none(),
    hnp.arrays(np.float64, st.tuples(st.integers(0, 12), st.integers(2, 3)),
               elements=st.floats(0, 1)),
    hnp.arrays(np.float64, st.tuples(st.integers(0, 8), st.integers(2, 3)),
               elements=st.one_of(_FINITE, st.sampled_from([0.0, 1.0, np.nan, np.inf]))),
)


def _parse_or_error(spec, points=None):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", EstimatedWindowWarning)
        warnings.simplefilter("ignore", RuntimeWarning)
        try:
            w = parse_window(spec, points)
        except NullAtlasError as exc:
            assert isinstance(exc, WindowError)
            event("rejected")
            return None
        _check_window(w)
        event(f"accepted {type(w).__name__}")
        return w


@FUZZ
@given(spec=st.one_of(st.text(max_size=40), _spec_text(),
                     st.text(max_size=10).map(lambda t: t + ".wkt")), points=_POINTS)
def test_parse_window_arbitrary_text(spec, points):
    _parse_or_error(spec, points)


@FUZZ
@given(numbers=st.lists(_FINITE, min_size=3, max_size=6))
def test_parse_numeric_specs_accept_iff_valid(numbers):
    for key, k in (("rect", 4), ("disk", 3), ("box", 6), ("ball", 4)):
        spec = key + ":" + ",".join(repr(v) for v in numbers)
        w = _parse_or_error(spec)
        if len(numbers) != k:
            assert w is None
            continue
        if key in ("rect", "box"):
            d = k // 2
            sides = [float(b) - float(a) for a, b in zip(numbers[:d], numbers[d:])]
            if not all(s > 0 for s in sides):
                assert w is None                 # empty or inverted extent
                continue
            log_content = sum(math.log10(s) if math.isfinite(s) else 400 for s in sides)
            scale = max(s for s in sides)
        else:
            r = numbers[-1]
            if not r > 0:
                assert w is None
                continue
            d = k - 1
            log_content = d * math.log10(r)
            scale = r
        # A window of moderate size must be accepted (ones whose content
        # over/underflows a float may be refused).
        if -150 < log_content < 250 and 1e-60 < scale < 1e80:
            assert w is not None, spec


_JSONISH = st.recursive(
    st.one_of(st.none(), st.booleans(), st.integers(-5, 5), st.floats(-10, 10),
              st.sampled_from(["Polygon", "Feature", "FeatureCollection", "LineString", "Point",
                               "MultiPolygon", "type", "coordinates", "geometry", "features"])),
    lambda children: st.one_of(st.lists(children, max_size=5),
                               st.dictionaries(st.sampled_from(["type", "coordinates", "geometry",
                                                                "features", "properties"]),
                                               children, max_size=4)),
    max_leaves=25,
)


@st.composite
def _geojson_text(draw):
    import shapely.geometry

    choice = draw(st.sampled_from(["random", "polygon", "feature", "collection", "valid"]))
    if choice == "random":
        return json.dumps(draw(_JSONISH))
    if choice == "valid":
        geom = shapely.geometry.mapping(draw(_valid_geometry()))
        wrap = draw(st.sampled_from(["none", "feature", "collection"]))
        if wrap != "none":
            geom = {"type": "Feature", "properties": {}, "geometry": geom}
        if wrap == "collection":
            geom = {"type": "FeatureCollection", "features": [geom]}
        return json.dumps(geom)
    ring = draw(st.lists(st.lists(st.integers(-3, 3), min_size=2, max_size=3), min_size=0, max_size=6))
    if ring and draw(st.booleans()):
        ring.append(ring[0])
    geom = {"type": draw(st.sampled_from(["Polygon", "MultiPolygon", "LineString"])),
            "coordinates": [ring] if draw(st.booleans()) else [[ring]]}
    if choice == "feature":
        geom = {"type": "Feature", "geometry": geom, "properties": {}}
    elif choice == "collection":
        geom = {"type": "FeatureCollection",
                "features": [{"type": "Feature", "geometry": geom}] * draw(st.integers(0, 2))}
    return json.dumps(geom)


@FUZZ
@given(content=st.one_of(_geojson_text(), _wkt(), _valid_geometry().map(lambda g: g.wkt),
                         st.text(max_size=60),
                         st.binary(max_size=60).map(lambda b: b.decode("latin-1"))),
       suffix=st.sampled_from([".geojson", ".json", ".wkt", ".WKT"]),
       as_bytes=st.booleans())
def test_parse_window_file_contents(fuzzdir, content, suffix, as_bytes):
    path = _fresh(fuzzdir, suffix)
    with open(path, "wb") as f:
        f.write(content.encode("latin-1", errors="replace") if as_bytes else content.encode("utf-8"))
    _parse_or_error(path)


# --------------------------------------------------------------------------
# validate_pattern
# --------------------------------------------------------------------------

SQUARE = parse_window("rect:0,0,1,1")
CUBE = parse_window("box:0,0,0,1,1,1")
DISK = parse_window("disk:0.5,0.5,0.5")

_ELEMENTS = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.floats(0, 1),
    st.sampled_from([0.0, -0.0, 0.5, 1.0, 5e-324, 1e-300, 1 - 2 ** -53, 1e308, -1e308,
                     np.nan, np.inf, 0.25, 0.75]),
)


@st.composite
def _pattern(draw):
    d = draw(st.sampled_from([2, 2, 2, 2, 3, 3, 1, 4]))
    if draw(st.booleans()):
        # Mostly good: uniform points, some repeated, a few entries spoiled.
        n = draw(st.integers(4, 14))
        p = np.random.default_rng(draw(st.integers(0, 2 ** 32))).random((n, d))
        if draw(st.booleans()):
            p = 0.5 + 0.7 * (p - 0.5)       # also well inside the disk
        for _ in range(draw(st.integers(0, 3)) if n else 0):
            p[draw(st.integers(0, n - 1))] = p[draw(st.integers(0, n - 1))]
        if n and draw(st.integers(0, 4)) == 0:
            p[draw(st.integers(0, n - 1)), draw(st.integers(0, d - 1))] = draw(_ELEMENTS)
        return p
    if draw(st.booleans()):
        # Rows drawn from a small pool: many exact duplicates.
        pool = draw(hnp.arrays(np.float64, (draw(st.integers(1, 5)), d), elements=_ELEMENTS))
        idx = draw(st.lists(st.integers(0, len(pool) - 1), min_size=0, max_size=14))
        return pool[idx] if idx else np.empty((0, d))
    return draw(hnp.arrays(np.float64, st.tuples(st.integers(0, 14), st.just(d)), elements=_ELEMENTS))


@FUZZ
@given(points=_pattern(), policy=st.sampled_from(["error", "drop", "jitter"]),
       choice=st.integers(0, 4), seed=st.integers(0, 3))
def test_validate_pattern_arbitrary_arrays(points, policy, choice, seed):
    # Mostly a window of the points' dimension (unit square / disk in 2D, unit
    # cube in 3D), sometimes a mismatched one.
    d = points.shape[1]
    window = ([SQUARE, SQUARE, SQUARE, DISK, CUBE] if d != 3 else [CUBE, CUBE, CUBE, CUBE, SQUARE])[choice]
    original = points.copy()
    try:
        out, rep = validate_pattern(points, window, policy, rng=np.random.default_rng(seed))
    except NullAtlasError as exc:
        event("rejected: " + " ".join(str(exc).split()[:3]))
        return
    event(f"accepted ({policy}, {rep.n_duplicates > 0 and 'with' or 'no'} duplicates)")
    np.testing.assert_array_equal(points, original)           # input untouched
    n = len(points)
    assert isinstance(out, np.ndarray) and out.dtype == np.float64
    assert out.ndim == 2 and out.shape[1] == window.dim
    assert len(out) >= MIN_POINTS[window.dim]
    assert np.isfinite(out).all()
    assert window.contains(out).all()
    assert len(np.unique(out, axis=0)) == len(out), "duplicates survived validation"
    assert rep.n_input == n
    if policy == "error":
        assert rep.n_duplicates == 0
        np.testing.assert_array_equal(out, points)
    elif policy == "drop":
        assert len(out) == n - rep.n_duplicates
    else:
        assert len(out) == n
