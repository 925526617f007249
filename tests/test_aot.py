"""Issue 15: the ahead-of-time kernels, the first run, and the light instant path.

* the AOT build gives bit-identical results to numba's JIT (every statistic
  on 2D, 3D and periodic patterns, and whole ``csr_test`` results), and a
  process that uses it never imports numba, scipy.stats or scipy.spatial;
* the first command run compiles after exactly one line on standard error,
  later runs are silent; without a C compiler: one line, and the JIT;
* the light replacements (normal and chi-square tails, the compiled
  close-pair and nearest-neighbour search, the Gumbel fit kept on disk, the
  tables opened per dimension) agree with what they replace.
"""
import json
import os
import subprocess
import sys

import numpy as np
import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
EX = os.path.join(ROOT, "examples", "wafer_lot_random.csv")

# Computes every statistic on 2D, 3D and periodic patterns and whole instant
# tests; writes them to an .npz; prints which heavy modules were imported.
SCRIPT = r"""
import json, sys
import numpy as np
from nullatlas import csr_test
from nullatlas.lookup.patterns import windows
from nullatlas.lookup.patterns.periodic import PeriodicBox
from nullatlas.lookup.summaries.statistics import STATISTICS, compute, resolve_stats

out = {}
rng = np.random.default_rng(11)
wins = [windows.Rectangle(0, 0, 1, 1), windows.Disk(0, 0, 1), windows.Box(0, 0, 0, 1, 2, 1),
        PeriodicBox(0, 0, 1, 1)]
for w in wins:
    d = w.dim
    names = [s for s in STATISTICS if d in STATISTICS[s].dims and not STATISTICS[s].needs_h1_pairs]
    for n in ((1500,) if w.kind == "torus" else (40, 900)):
        pts = w.sample(n, rng)
        for k, v in compute(pts, w, resolve_stats(names, d)).items():
            out[f"{w.kind}{n}:{k}"] = np.asarray(v, float)
        if w.kind != "torus":
            res = csr_test(pts, w, method="asymptotic", seed=1)
            dd = res.as_dict()
            dd.pop("elapsed_s")
            out[f"{w.kind}{n}:result"] = np.array(json.dumps(dd, sort_keys=True))
np.savez(sys.argv[1], **out)
print(json.dumps({m: m in sys.modules for m in ("numba", "scipy.stats", "scipy.spatial")}))
"""


def _env(cache, **extra):
    env = dict(os.environ, NULLATLAS_CACHE_DIR=str(cache))
    env.update(extra)
    return env


def _nullatlas(args, env, cwd=None):
    return subprocess.run([sys.executable, "-m", "nullatlas.lookup", *args], capture_output=True,
                          text=True, env=env, cwd=cwd)


@pytest.fixture(scope="module")
def first_run(tmp_path_factory):
    """A fresh cache folder and the first and second runs of one command in it."""
    from nullatlas.lookup.persistence.jit import find_compiler

    if find_compiler() is None:
        pytest.skip("no C compiler: the ahead-of-time build cannot run here")
    cache = tmp_path_factory.mktemp("aotcache")
    args = ["test", EX, "-w", "disk:0,0,150", "--method", "asymptotic", "--seed", "3", "--json"]
    one = _nullatlas(args, _env(cache, NULLATLAS_AOT="auto"))
    two = _nullatlas(args, _env(cache, NULLATLAS_AOT="auto"))
    return cache, one, two


def test_first_run_announced_once_then_silent(first_run):
    cache, one, two = first_run
    assert one.returncode == 0, one.stderr
    lines = one.stderr.strip().splitlines()
    assert len(lines) == 1, one.stderr
    assert "once" in lines[0] and "nullatlas compile" in lines[0] and "min" in lines[0]
    assert two.returncode == 0 and two.stderr == ""
    d1, d2 = json.loads(one.stdout), json.loads(two.stdout)
    d1.pop("elapsed_s"), d2.pop("elapsed_s")
    assert d1 == d2
    built = [d for d in os.listdir(cache) if d.startswith("aot-")]
    assert len(built) == 1 and os.path.isfile(os.path.join(cache, built[0], "manifest.json"))
    assert not [d for d in os.listdir(cache) if d.startswith(".build-")]   # no leftovers


def test_compile_command_reports_the_build(first_run):
    cache = first_run[0]
    p = _nullatlas(["compile", "--json"], _env(cache))
    assert p.returncode == 0, p.stderr
    st = json.loads(p.stdout)
    assert st["built"] and not st["rebuilt"] and st["signatures"] >= st["kernels"] >= 10
    assert st["folder"].startswith(str(cache))


def test_aot_and_jit_are_bit_identical(first_run, tmp_path):
    cache = first_run[0]
    runs = {}
    for mode in ("auto", "off"):
        out = tmp_path / f"{mode}.npz"
        p = subprocess.run([sys.executable, "-c", SCRIPT, str(out)], capture_output=True, text=True,
                           env=_env(cache, NULLATLAS_AOT=mode))
        assert p.returncode == 0, p.stderr
        runs[mode] = (dict(np.load(out)), json.loads(p.stdout.strip().splitlines()[-1]))
    (aot, mods_aot), (jit, mods_jit) = runs["auto"], runs["off"]
    assert mods_aot["numba"] is False and mods_jit["numba"] is True   # AOT: the compiled module only
    assert aot.keys() == jit.keys() and len(aot) > 40
    for k in aot:
        a, b = aot[k], jit[k]
        if a.dtype.kind == "U":
            assert str(a) == str(b), k
        else:
            assert a.shape == b.shape and np.array_equal(a, b, equal_nan=True), k


LIGHT = r"""
import json, sys
import numpy as np
from nullatlas.lookup.cli import main
np.savetxt(sys.argv[1], np.random.default_rng(2).random((3000, 2)), delimiter=",")
main(["test", sys.argv[1], "-w", "rect:0,0,1,1", "--method", "asymptotic", "--seed", "1"])
heavy = ("numba", "scipy.stats", "scipy.spatial", "scipy.special", "matplotlib", "joblib", "tqdm")
print(json.dumps({m: m in sys.modules for m in heavy}))
"""


def test_instant_command_imports_nothing_heavy(first_run, tmp_path):
    """After the first run (kernels compiled, Gumbel fits kept), the instant
    route of the command imports neither numba nor scipy.stats/spatial/special,
    matplotlib, joblib or tqdm."""
    cache = first_run[0]
    for k in range(2):
        p = subprocess.run([sys.executable, "-c", LIGHT, str(tmp_path / "p.csv")], capture_output=True,
                           text=True, env=_env(cache, NULLATLAS_AOT="auto"))
        assert p.returncode == 0, p.stderr
    assert not any(json.loads(p.stdout.strip().splitlines()[-1]).values()), p.stdout


def test_aot_argument_keys_match_numba_typeof():
    numba = pytest.importorskip("numba")
    from nullatlas.lookup.persistence.jit import _argkey, _typekey

    vals = [np.zeros((3, 2)), np.zeros((3, 2))[:, 0], np.asfortranarray(np.zeros((3, 2))),
            np.zeros(4, np.int64), np.zeros(4, np.int32), np.zeros(2, bool), 3, 2.5, True,
            np.float64(1.0), np.int64(3), (1, 2.0), (np.zeros(2), 4)]
    ro = np.zeros(3)
    ro.flags.writeable = False
    vals.append(ro)
    for v in vals:
        assert _argkey(v) == _typekey(numba.typeof(v)), v


def test_compile_without_a_compiler_is_one_line(tmp_path):
    env = _env(tmp_path / "c", CC="/nonexistent/cc", NULLATLAS_AOT="auto")
    p = _nullatlas(["compile"], env)
    assert p.returncode == 2 and p.stdout == ""
    assert p.stderr.count("\n") == 1 and "no C compiler" in p.stderr and "JIT" in p.stderr
    p = _nullatlas(["compile", "--json"], env)
    assert p.returncode == 2 and p.stderr.count("\n") == 1 and "Traceback" not in p.stderr
    # a test still runs, through the JIT: one line when it compiles (cold numba
    # cache), saying why there is no ahead-of-time build; nothing once cached
    env["NUMBA_CACHE_DIR"] = str(tmp_path / "numba")
    args = ["test", EX, "-w", "disk:0,0,150", "--method", "asymptotic", "--seed", "3", "--json"]
    first, second = _nullatlas(args, env), _nullatlas(args, env)
    assert first.returncode == 0 and second.returncode == 0, first.stderr
    assert first.stderr.count("\n") == 1 and "numba" in first.stderr
    assert "no C compiler" in first.stderr and second.stderr == ""
    d1, d2 = json.loads(first.stdout), json.loads(second.stdout)
    d1.pop("elapsed_s"), d2.pop("elapsed_s")
    assert d1 == d2
    assert not any(d.startswith("aot-") for d in os.listdir(tmp_path / "c")) \
        if os.path.isdir(tmp_path / "c") else True


def test_unwritable_cache_is_one_line(tmp_path):
    if os.geteuid() == 0:
        blocker = tmp_path / "file"           # root writes anywhere: a file where the folder goes
        blocker.write_text("x")
        cache = blocker / "sub"
    else:
        cache = tmp_path / "ro"
        cache.mkdir()
        cache.chmod(0o500)
    from nullatlas.lookup.persistence.jit import find_compiler

    if find_compiler() is None:
        pytest.skip("no C compiler")
    p = _nullatlas(["compile"], _env(cache))
    assert p.returncode == 2 and p.stderr.count("\n") == 1 and "cache folder" in p.stderr


# --- the light replacements ---------------------------------------------------------------

def test_tails_agree_with_scipy():
    from scipy import special, stats

    from nullatlas.lookup.inference import tails

    rng = np.random.default_rng(0)
    x = np.concatenate([rng.normal(0, 4, 5000), [-38.0, -10.0, -1.0, 0.0, 1.0, 8.0, np.nan]])
    a, b = tails.ndtr(x), special.ndtr(x)
    ok = np.isfinite(b) & (b > 0)
    assert np.array_equal(np.isnan(a), np.isnan(b))
    assert np.max(np.abs(a[ok] - b[ok]) / b[ok]) < 1e-13
    assert float(tails.ndtr(0.3)) == pytest.approx(float(special.ndtr(0.3)), rel=1e-15)
    for k in (1, 2, 3, 7, 12, 40):
        y = np.concatenate([rng.uniform(0, 4 * k + 30, 300), [0.0, 1e-12]])
        a, b = tails.chi2.sf(y, k), stats.chi2.sf(y, k)
        assert np.max(np.abs(a - b) / b) < 1e-12, k
    q = rng.uniform(1e-12, 1, 2000)
    assert np.max(np.abs(tails.norm.isf(q) - stats.norm.isf(q))) < 1e-12
    assert tails.norm.pdf(1.3) == pytest.approx(stats.norm.pdf(1.3), rel=1e-15)
    assert tails.gumbel_r is stats.gumbel_r                 # anything else: scipy.stats itself
    assert np.allclose(tails.chi2_sf([1.0, 2.0], 2.5), stats.chi2.sf([1.0, 2.0], 2.5))


@pytest.mark.parametrize("d", [2, 3])
def test_close_pairs_and_nearest_neighbours_match_the_kd_tree(d):
    from scipy.spatial import cKDTree

    from nullatlas.lookup.summaries import classical

    rng = np.random.default_rng(d)
    for n, r in ((2, 0.5), (60, 0.0), (500, 0.05), (3000, 0.02), (300, 10.0)):
        x = rng.random((n, d)) * rng.uniform(0.01, 100)
        r = r * np.ptp(x)
        pairs, dist = classical.close_pairs(x, r)
        tree = cKDTree(x)
        ref = tree.query_pairs(r, output_type="ndarray")
        assert sorted(map(tuple, pairs.tolist())) == sorted(map(tuple, ref.tolist()))
        nn = classical.nn_from_pairs(x, pairs, dist)       # points without a pair: the scan
        assert np.array_equal(nn, tree.query(x, k=2)[0][:, 1])
    g = np.array([[i, j] for i in range(20) for j in range(20)], float)   # ties at exactly r
    assert len(classical.close_pairs(g, 1.0)[0]) == len(cKDTree(g).query_pairs(1.0))


def test_gumbel_fit_is_scipys_without_scipy():
    """gumbel_mle follows scipy.stats.gumbel_r.fit operation for operation: the
    same doubles with the scipy this was written against (1.17), and within
    1e-12 with any other."""
    import scipy
    from scipy import stats

    from nullatlas.lookup.inference import extremes

    exact = scipy.__version__.startswith("1.17.")
    rng = np.random.default_rng(0)
    for t in range(150):
        n = int(rng.integers(20, 3000))
        v = (rng.gumbel(rng.uniform(-5, 5), rng.uniform(0.01, 10), n), rng.normal(2, 0.3, n),
             rng.exponential(1.5, n) + 1)[t % 3]
        v = np.sort(v)
        ours, ref = extremes.gumbel_mle(v), tuple(float(x) for x in stats.gumbel_r.fit(v))
        if exact:
            assert ours == ref, (t, ours, ref)
        else:
            assert np.allclose(ours, ref, rtol=1e-12, atol=0), (t, ours, ref)
    tied = np.sort(np.concatenate([np.full(5, 0.5), rng.gumbel(1.0, 0.2, 200)]))
    assert np.allclose(extremes.gumbel_mle(tied), stats.gumbel_r.fit(tied), rtol=1e-12)
    t = extremes.GumbelTail(v)
    assert (t.loc, t.scale) == extremes.gumbel_mle(v)


def test_gumbel_tail_body_needs_no_fit_beyond_it():
    from nullatlas.lookup.inference import extremes

    v = np.arange(100.0)
    t = extremes.GumbelTail(v)
    assert float(t.pvalue(50.0)) == 51.0 / 101.0
    assert 0 < float(t.pvalue(150.0)) < 11.0 / 101.0            # beyond u: the Gumbel tail


def test_tables_open_only_the_dimension_asked():
    from nullatlas.lookup.inference.nullmoments import TableSet

    ts = TableSet()
    assert all(e[2] is None for e in ts._shipped)
    two = ts.for_dimension(2)
    assert [t.d for t in two] == [2]
    assert [e[2] is None for e in ts._shipped] == [False, True]
    assert [t.d for t in ts.tables] == [2, 3]


READER_CASES = {
    "plain.csv": "0.1,0.2\n0.3,0.4\n", "header.csv": "x,y\n0.1,0.2\n0.3,0.4\n",
    "three.csv": "id,x,y\n1,0.1,0.2\n2,0.3,0.4\n", "spaces.txt": "0.1 0.2\n0.3   0.4\n",
    "padded.csv": "0.1, 0.2\n 0.3 ,0.4\n", "empty_field.csv": "0.1,\n0.3,0.4\n",
    "word.csv": "0.1,0.2\n0.3,abc\n", "nan.csv": "0.1,0.2\n0.3,nan\n",
    "inf.csv": "x,y\n0.1,0.2\n0.3,inf\n", "ragged.csv": "0.1,0.2\n0.3,0.4,0.5\n",
    "blank.csv": "0.1,0.2\n\n0.3,0.4\n", "header_only.csv": "x,y\n",
    "trailing.csv": "0.1,0.2\n0.3,0.4\n\n\n", "xyz.csv": "1,2,3\n4,5,6\n",
    "four.csv": "1,2,3,4\n4,5,6,7\n", "hex.csv": "0x1,2\n3,4\n", "under.csv": "1_0,2\n3,4\n",
    "comment.csv": "# c\n1,2\n3,4\n", "crlf.csv": "1,2\r\n3,4\r\n", "tabs.tsv": "1\t2\n3\t4\n",
}


@pytest.mark.parametrize("name", sorted(READER_CASES))
@pytest.mark.parametrize("columns", [None, [0, 1], ["x", "y"]])
def test_plain_text_reader_matches_the_general_one(tmp_path, monkeypatch, name, columns):
    """The quick reader of common text files gives what the general reader
    gives: the same array, or the same one-line error."""
    from nullatlas.lookup.errors import PointsError
    from nullatlas.lookup.patterns import readers

    p = tmp_path / name
    p.write_bytes(READER_CASES[name].encode())

    def read():
        try:
            return "ok", readers._read_text(str(p), columns)
        except PointsError as exc:
            return "error", str(exc)

    quick = read()
    monkeypatch.setattr(readers, "_read_plain", lambda *a: None)
    general = read()
    assert quick[0] == general[0]
    if quick[0] == "ok":
        assert quick[1].dtype == general[1].dtype and np.array_equal(quick[1], general[1])
    else:
        assert quick[1] == general[1]


def test_kernels_pickle_by_reference():
    import pickle

    from nullatlas.lookup.summaries import classical

    k = classical._grid_pairs
    assert pickle.loads(pickle.dumps(k)) is k
    x = np.random.default_rng(1).random((50, 2))
    assert len(k(x, 0.2)) == len(classical.close_pairs(x, 0.2)[0])
