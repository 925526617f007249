"""Compiled kernels: an ahead-of-time build when there is one, numba's JIT otherwise.

Every compiled kernel of the package is declared with :func:`njit` of this
module instead of ``numba.njit``.  The decorator returns a :class:`Kernel`, a
lazy stand-in that imports nothing:

* when an ahead-of-time (AOT) build of exactly these kernel sources (and this
  Python, numpy, numba and llvmlite) is in the cache folder, a call whose
  argument types were exported goes straight to the compiled extension
  module, which needs only numpy: no numba import, no cached kernels to load;
* any other call (no build, or argument types the build did not see) imports
  numba and makes ``numba.njit(cache=True, ...)`` dispatchers of all kernels
  (compiled on first use, cached on disk by numba, as before).

A kernel that calls another kernel reads it from its module's globals while
numba compiles it; :func:`_register_typeof` teaches numba that a
:class:`Kernel` types as its dispatcher, so kernels call kernels exactly as
before, in the JIT and in the AOT build alike.

The AOT build (:func:`build`, ``nullatlas compile``) runs a representative
workload under the JIT (``lookup.kernels.workload``: 2D and 3D patterns,
every statistic, the window kinds of the instant route), records the argument types of every call that
comes from Python, and exports those signatures with ``numba.pycc`` into one
extension module.  It is written in a temporary folder of the cache and
renamed into place, so a half-written build is never seen and several
processes may race: the first rename wins, the others discard their copy.
The same machine code is compiled from the same sources by the same
numba, so AOT and JIT results are identical (``tests/test_aot.py``).

Environment:

``NULLATLAS_CACHE_DIR``
    cache folder (default ``$XDG_CACHE_HOME/nullatlas`` or
    ``~/.cache/nullatlas``); the build lives in ``aot-<hash>/`` inside it.
``NULLATLAS_AOT``
    ``auto`` (default: use a build; the ``nullatlas`` command builds one at
    its first run), ``use`` (use a build, never build one), ``off`` (JIT
    only).
"""
from __future__ import annotations

import functools
import hashlib
import importlib.util
import json
import os
import sys
import threading

from ..errors import CompileError

__all__ = ["njit", "Kernel", "build", "ensure_built", "aot_status", "cache_root", "aot_dir",
           "announce", "find_compiler"]

#: The modules that define kernels, and the build's workload (their sources make the build's hash).
KERNEL_MODULES = (
    "persistence/jit.py", "persistence/expansions.py", "persistence/exactvalues.py",
    "persistence/pointsets.py", "persistence/pairing.py", "persistence/meshrepair.py",
    "persistence/delaunay2d.py", "persistence/delaunay3d.py", "persistence/alpha2d.py",
    "persistence/alpha3d.py", "persistence/periodic.py", "summaries/classical.py",
    "processes/alternatives.py", "kernels.py",
)

#: Name of the extension module of a build (its init symbol is PyInit_<name>).
AOT_MODULE = "_nullatlas_kernels"

_KERNELS: list = []
#: Serialises loading the build and making the dispatchers (threads of a dask worker).
_LOCK = threading.RLock()
_STATE = {"aot": None, "aot_checked": False, "numba": False, "recording": False,
          "announced": False}


def njit(*args, **options):
    """Declare a compiled kernel, as ``numba.njit`` would (``@njit`` or ``@njit(cache=True, ...)``).

    Parameters
    ----------
    *args : callable, optional
        The function, when used without parentheses.
    **options
        numba options of the JIT dispatcher (``cache``, ``nogil``, ...).

    Returns
    -------
    Kernel or callable
        The kernel, or a decorator that makes one.
    """
    if args and callable(args[0]) and not options:
        return Kernel(args[0], {})
    return lambda func: Kernel(func, options)


def _argkey(a):
    """Hashable type key of one argument, as ``numba.typeof`` would type it
    (None when the type is not one an AOT build exports)."""
    import numpy as np

    if isinstance(a, np.ndarray):
        f = a.flags
        if not f.aligned or not a.dtype.isnative or a.dtype.kind not in "biuf":
            return None
        layout = "C" if f.c_contiguous else ("F" if f.f_contiguous else "A")
        return ("a", a.dtype.str, a.ndim, layout, bool(f.writeable))
    if isinstance(a, (bool, np.bool_)):
        return ("s", "|b1")
    if isinstance(a, int):
        return ("s", "<i8") if -2 ** 63 <= a < 2 ** 63 else None
    if isinstance(a, float):
        return ("s", "<f8")
    if isinstance(a, np.generic) and a.dtype.kind in "iuf":
        return ("s", a.dtype.str)
    if isinstance(a, tuple):
        keys = tuple(_argkey(x) for x in a)
        return None if any(k is None for k in keys) else ("t",) + keys
    return None


def _typekey(t):
    """The key of :func:`_argkey` for a numba type (None when not exportable)."""
    import numpy as np
    from numba.core import types
    from numba.np.numpy_support import as_dtype

    if isinstance(t, types.Array):
        if not t.aligned or t.layout not in "CFA":
            return None
        try:
            dt = np.dtype(as_dtype(t.dtype))
        except Exception:
            return None
        if dt.kind not in "biuf":
            return None
        return ("a", dt.str, t.ndim, t.layout, bool(t.mutable))
    if isinstance(t, types.Boolean):
        return ("s", "|b1")
    if isinstance(t, (types.Integer, types.Float)):
        return ("s", np.dtype(str(t)).str)
    if isinstance(t, types.BaseTuple) and not isinstance(t, types.BaseNamedTuple):
        keys = tuple(_typekey(x) for x in t.types)
        return None if any(k is None for k in keys) else ("t",) + keys
    return None


def _freeze(obj):
    """JSON lists back to the tuples of a key."""
    return tuple(_freeze(x) for x in obj) if isinstance(obj, list) else obj


class Kernel:
    """A compiled kernel: the AOT function for exported argument types, numba's
    dispatcher for any other call.

    Parameters
    ----------
    func : callable
        The Python function (numba's nopython subset).
    options : dict
        Options of the JIT dispatcher.

    Attributes
    ----------
    py_func : callable
        The Python function.
    name : str
        ``module.qualname``, the kernel's name in a build's manifest.
    """

    def __init__(self, func, options):
        self.py_func = func
        self.options = dict(options)
        self.name = f"{func.__module__}.{func.__qualname__}"
        self._dispatcher = None
        self._aot = None          # {argument key: compiled function}, after _load_aot
        self._seen = set()        # argument types of calls from Python while recording
        self._checked = False     # numba's cache looked at for the announcement
        functools.update_wrapper(self, func)
        _KERNELS.append(self)
        if _STATE["aot"] is not None:      # a module imported after the build was loaded
            self._aot = _STATE["aot"].get(self.name)

    @property
    def dispatcher(self):
        """numba's dispatcher of this kernel (imports numba, made once)."""
        if self._dispatcher is None:
            _materialise()
        return self._dispatcher

    def __reduce__(self):
        # by reference (module and name), as a function is pickled: the
        # compiled functions it holds cannot travel to another process
        return (_kernel_named, (self.py_func.__module__, self.py_func.__qualname__))

    def __call__(self, *args, **kwargs):
        if not kwargs:
            if not _STATE["aot_checked"]:
                with _LOCK:
                    if not _STATE["aot_checked"]:
                        _load_aot()
            if self._aot:
                fn = self._aot.get(tuple(_argkey(a) for a in args))
                if fn is not None:
                    return fn(*args)
        d = self.dispatcher
        if _STATE["recording"] and not kwargs:
            self._seen.add(tuple(d.typeof_pyval(a) for a in args))
        elif not self._checked:
            self._checked = True
            if not _STATE["announced"]:
                _announce_jit(self)
        return d(*args, **kwargs)

    def __repr__(self):
        return f"<kernel {self.name}>"


def _kernel_named(module: str, qualname: str):
    """The kernel ``qualname`` of ``module`` (unpickling a :class:`Kernel`)."""
    obj = importlib.import_module(module)
    for part in qualname.split("."):
        obj = getattr(obj, part)
    return obj


def _materialise():
    """numba dispatchers for every declared kernel."""
    import numba

    with _LOCK:
        if not _STATE["numba"]:
            _register_typeof()
            _STATE["numba"] = True
        for k in list(_KERNELS):
            if k._dispatcher is None:
                k._dispatcher = numba.njit(**k.options)(k.py_func)


def _register_typeof():
    """numba types a :class:`Kernel` (a global of another kernel) as its dispatcher."""
    from numba.core import types
    from numba.core.typing.typeof import typeof_impl

    @typeof_impl.register(Kernel)
    def _typeof_kernel(val, c):
        return types.Dispatcher(val.dispatcher)


# ---------------------------------------------------------------------------
# where a build lives

def cache_root() -> str:
    """The cache folder (``NULLATLAS_CACHE_DIR``, else the user's cache folder)."""
    env = os.environ.get("NULLATLAS_CACHE_DIR")
    if env:
        return os.path.abspath(env)
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return os.path.join(base, "nullatlas")


def _version_file(pkg: str) -> bytes:
    """The text of a package's version module, found without importing the package."""
    try:
        spec = importlib.util.find_spec(pkg)
    except (ImportError, ValueError):
        spec = None
    if spec is None or not spec.origin:
        return b"none"
    path = os.path.join(os.path.dirname(spec.origin), "_version.py")
    try:
        with open(path, "rb") as fh:
            return fh.read()
    except OSError:
        return b"none"


@functools.lru_cache(maxsize=1)
def source_hash() -> str:
    """Hash of the kernel sources, the Python and the numpy, numba and llvmlite versions."""
    import numpy as np

    h = hashlib.sha256()
    lookup_dir = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    for rel in KERNEL_MODULES:
        with open(os.path.join(lookup_dir, rel), "rb") as fh:
            h.update(rel.encode() + b"\0" + fh.read() + b"\0")
    h.update(sys.version.encode() + b"\0" + np.__version__.encode() + b"\0")
    h.update(_version_file("numba") + b"\0" + _version_file("llvmlite"))
    return h.hexdigest()[:20]


def aot_dir() -> str:
    """The folder of the build for these sources and versions."""
    return os.path.join(cache_root(), f"aot-{source_hash()}")


def _mode() -> str:
    m = os.environ.get("NULLATLAS_AOT", "auto").strip().lower()
    return m if m in ("auto", "use", "off") else "auto"


def _load_aot():
    """Bind the build's functions to the kernels (once per process)."""
    _STATE["aot_checked"] = True
    if _mode() == "off" or _STATE["recording"]:
        return
    folder = aot_dir()
    manifest = os.path.join(folder, "manifest.json")
    if not os.path.isfile(manifest):
        return
    try:
        with open(manifest) as fh:
            man = json.load(fh)
        path = os.path.join(folder, man["file"])
        import importlib.machinery

        loader = importlib.machinery.ExtensionFileLoader(AOT_MODULE, path)
        spec = importlib.util.spec_from_file_location(AOT_MODULE, path, loader=loader)
        mod = importlib.util.module_from_spec(spec)
        loader.exec_module(mod)
    except Exception as exc:  # a damaged build: say so once, use the JIT
        sys.stderr.write(f"nullatlas: cannot load the compiled kernels in {folder} ({exc}); "
                         "using numba's JIT\n")
        return
    byname = {k.name: k for k in _KERNELS}
    table = {}
    for name, entries in man["kernels"].items():
        table[name] = {_freeze(key): getattr(mod, sym) for key, sym in entries}
    _STATE["aot"] = table
    for name, k in byname.items():
        k._aot = table.get(name)


def aot_status() -> dict:
    """Where the compiled kernels come from in this installation.

    Returns
    -------
    dict
        ``mode`` (the ``NULLATLAS_AOT`` setting), ``folder`` (of the build for
        these sources), ``built`` (it exists), ``kernels`` and ``signatures``
        (exported, when built).
    """
    folder = aot_dir()
    out = {"mode": _mode(), "folder": folder, "built": False, "kernels": 0, "signatures": 0}
    try:
        with open(os.path.join(folder, "manifest.json")) as fh:
            man = json.load(fh)
        out.update(built=True, kernels=len(man["kernels"]),
                   signatures=sum(len(v) for v in man["kernels"].values()))
    except (OSError, ValueError, KeyError):
        pass
    return out


def _failed_marker() -> str:
    return aot_dir() + ".failed"


def ensure_built(workload) -> None:
    """At a command's first run: build the AOT kernels unless a build is there
    (``NULLATLAS_AOT=auto`` only), with one line on standard error first.

    When no build can be made here (no C compiler, a cache folder that cannot
    be written, or an earlier automatic build of these sources failed:
    ``aot-<hash>.failed`` in the cache folder), nothing is tried and nothing
    said: the kernels run through numba's JIT, whose one line (only when it
    has to compile) gives the reason.  ``nullatlas compile`` always tries.
    """
    if _mode() != "auto" or os.path.isfile(os.path.join(aot_dir(), "manifest.json")):
        return
    root = cache_root()
    why = None
    if find_compiler() is None:
        why = "no C compiler was found for the ahead-of-time build"
    elif os.path.exists(_failed_marker()):
        why = "the ahead-of-time build failed here before (`nullatlas compile` says why)"
    else:
        try:
            os.makedirs(root, exist_ok=True)
            writable = os.access(root, os.W_OK | os.X_OK)
        except OSError:
            writable = False
        if not writable:
            why = f"the cache folder {root} cannot be written"
    if why:
        _STATE["jit_reason"] = why
        return
    announce(f"compiling the numeric kernels for this installation ({AOT_SECONDS}, once: "
             "later runs start at once); `nullatlas compile` does this ahead of time")
    try:
        build(workload)
    except CompileError as exc:
        _STATE["jit_reason"] = "the ahead-of-time build failed"
        try:
            with open(_failed_marker(), "w") as fh:
                fh.write(f"{exc}\n")
        except OSError:
            pass
        sys.stderr.write(f"nullatlas: note: {exc}; using numba's JIT\n")


# ---------------------------------------------------------------------------
# announcements

#: Rough cost of compiling every kernel once on a 2-core machine (seconds).
JIT_SECONDS = "20-60 s"
AOT_SECONDS = "1-3 min"


def announce(text: str) -> None:
    """Write one line on standard error, once per process."""
    if _STATE["announced"]:
        return
    _STATE["announced"] = True
    sys.stderr.write(f"nullatlas: {text}\n")
    sys.stderr.flush()


def _announce_jit(kernel):
    """Say so before the JIT compiles kernels that numba's cache does not hold."""
    try:
        disp = kernel.dispatcher
        if disp.signatures or _numba_cache_has(disp):
            return
    except Exception:
        return
    if _STATE["aot"] is not None:    # a call the ahead-of-time build did not export
        announce(f"compiling {kernel.__name__} and the kernels it needs with numba (seconds "
                 "to a minute, once: later runs load them from numba's cache)")
        return
    why = _STATE.get("jit_reason")
    announce(f"compiling the numeric kernels with numba ({JIT_SECONDS}, once: later runs load "
             "them from the cache)" + (f"; {why}" if why else
                                        "; `nullatlas compile` does it ahead of time"))


def _numba_cache_has(disp) -> bool:
    cache = getattr(disp, "_cache", None)
    impl = getattr(cache, "_impl", None)
    locator = getattr(impl, "locator", None) if impl is not None else None
    if locator is None:
        return False
    try:
        folder = locator.get_cache_path()
        stem = impl.filename_base
    except Exception:
        return False
    return os.path.isfile(os.path.join(folder, stem + ".nbi"))


# ---------------------------------------------------------------------------
# the AOT build

def build(workload, verbose: bool = False) -> dict:
    """Compile every kernel ahead of time for this installation.

    Runs ``workload()`` under numba's JIT, recording the argument types of
    the calls that come from Python, and exports them with ``numba.pycc`` into
    one extension module in :func:`aot_dir` (built in a temporary folder and
    renamed into place, one build at a time under a file lock).

    Parameters
    ----------
    workload : callable
        Runs the kernels on representative inputs (``lookup.kernels.workload``).
    verbose : bool
        Print progress on standard error.

    Returns
    -------
    dict
        :func:`aot_status` after the build, with ``seconds`` (time taken) and
        ``rebuilt`` (False when a build was already there).

    Raises
    ------
    CompileError
        When the build fails (no C compiler, unwritable cache folder); the
        kernels keep working through the JIT.
    """
    import time

    t0 = time.perf_counter()
    final = aot_dir()
    if os.path.isfile(os.path.join(final, "manifest.json")):
        out = aot_status()
        out.update(seconds=time.perf_counter() - t0, rebuilt=False)
        return out
    cc = find_compiler()
    if cc is None:
        raise CompileError("no C compiler found (numba.pycc needs one; set CC or install gcc)")
    root = cache_root()
    try:
        os.makedirs(root, exist_ok=True)
        lock = open(os.path.join(root, ".build.lock"), "a")
    except OSError as exc:
        raise CompileError(f"cannot write the cache folder {root}: {exc.strerror or exc}") from None
    with lock:
        _lock(lock)          # one build at a time; the others wait, then find it built
        if not os.path.isfile(os.path.join(final, "manifest.json")):
            _remove_leftovers(root)
            _build_into(root, final, workload, verbose)
            rebuilt = True
        else:
            rebuilt = False
    _STATE["aot_checked"] = False
    try:
        os.unlink(_failed_marker())
    except OSError:
        pass
    out = aot_status()
    out.update(seconds=time.perf_counter() - t0, rebuilt=rebuilt)
    return out


def _remove_leftovers(root: str) -> None:
    """Temporary folders of builds that were killed (under the lock no other
    build is running, so any is a leftover)."""
    import shutil

    for name in os.listdir(root):
        if name.startswith(".build-"):
            shutil.rmtree(os.path.join(root, name), ignore_errors=True)


def _lock(fh) -> None:
    try:
        import fcntl
    except ImportError:  # pragma: no cover - not POSIX: the rename alone keeps builds whole
        return
    fcntl.flock(fh.fileno(), fcntl.LOCK_EX)


def find_compiler() -> str | None:
    """The C compiler numba.pycc would call (``CC``, else Python's build
    configuration), if it is on the PATH."""
    import shutil
    import sysconfig

    cc = os.environ.get("CC") or sysconfig.get_config_var("CC") or "cc"
    first = cc.split()[0] if cc.split() else "cc"
    return shutil.which(first)


def _build_into(root: str, final: str, workload, verbose: bool) -> None:
    import shutil
    import tempfile
    import warnings

    try:
        tmp = tempfile.mkdtemp(prefix=".build-", dir=root)
    except OSError as exc:
        raise CompileError(f"cannot write the cache folder {root}: {exc.strerror or exc}") from None
    try:
        if verbose:
            sys.stderr.write("nullatlas compile: running the kernels under numba's JIT\n")
        _materialise()
        _STATE["recording"] = True
        saved = {k: k._aot for k in _KERNELS}
        for k in _KERNELS:
            k._aot = None
        try:
            workload()
        finally:
            _STATE["recording"] = False
            for k, v in saved.items():
                k._aot = v
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            from numba.pycc import CC

            cc = CC(AOT_MODULE)
            cc.output_dir = tmp
            cc.verbose = False
            manifest = {"kernels": {}, "hash": source_hash()}
            i = 0
            for k in _KERNELS:
                for argtypes in sorted(k._seen, key=str):
                    key = tuple(_typekey(t) for t in argtypes)
                    if any(x is None for x in key):
                        continue
                    disp = k.dispatcher
                    cres = disp.overloads.get(argtypes)
                    if cres is None:
                        disp.compile(argtypes)
                        cres = disp.overloads[argtypes]
                    sym = f"k{i}"
                    i += 1
                    cc.export(sym, cres.signature)(k.py_func)
                    manifest["kernels"].setdefault(k.name, []).append([key, sym])
            if verbose:
                sys.stderr.write(f"nullatlas compile: compiling {i} kernel signatures to machine "
                                 "code (numba.pycc and the C compiler)\n")
            cc.compile()
        files = [f for f in os.listdir(tmp) if f.startswith(AOT_MODULE) and f.endswith((".so", ".pyd"))]
        if len(files) != 1:
            raise CompileError("ahead-of-time compilation failed: the compiler wrote no extension module")
        manifest["file"] = files[0]
        with open(os.path.join(tmp, "manifest.json"), "w") as fh:
            json.dump(manifest, fh)
        try:
            os.rename(tmp, final)
        except OSError:
            if not os.path.isfile(os.path.join(final, "manifest.json")):
                raise
        tmp = None
    except CompileError:
        raise
    except BaseException as exc:
        if not isinstance(exc, Exception):
            raise                      # Ctrl-C, SIGTERM: the temporary folder goes, nothing else
        msg = str(exc).strip().splitlines()
        raise CompileError(f"ahead-of-time compilation failed: {type(exc).__name__}"
                           f"{': ' + msg[-1] if msg else ''}") from None
    finally:
        if tmp is not None:
            shutil.rmtree(tmp, ignore_errors=True)
