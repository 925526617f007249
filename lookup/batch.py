"""Batch mode: test many pattern files, in parallel, with adjusted p-values.

Inputs are files, folders (every ``.csv``, ``.tsv``, ``.txt``, ``.dat``,
``.npy`` file in it, sorted by name), glob patterns, or a manifest CSV with
columns ``file`` and ``window`` (optionally ``columns``) giving a window per
file; manifest paths -- the points files and the files that windows read
(polygon files, raster and voxel masks) -- are relative to the manifest's
folder and may not leave it (an absolute path or ``..`` is refused unless
``allow_absolute``).  A file named explicitly (on the command line or in a
manifest) that does not exist, a glob that matches nothing, a malformed
window given for every file and bad shared options are refused before any
work.

Each file is tested by :func:`lookup.csr_test` in a worker process that
reads it itself, so memory stays bounded by one pattern per worker whatever
the batch size; results stream back in file order.  File i gets the i-th
``SeedSequence.spawn`` child of the batch seed, so results do not depend on
the number of workers.  A file that fails (unreadable, bad window, bad
points) is reported with its one-line error and the others are processed
(the command's exit status is then 1; 2 if every file failed).
The primary test's p-values are adjusted over the files that produced one:
Holm (family-wise) and Benjamini–Hochberg (false discovery rate), see
``lookup.inference.adjust``.

Resuming: with a ``journal`` path every finished row is appended to it (JSON
lines, flushed and synced) after a header line with the batch's options and
seed, together with the identity of its input files (size, modification
time, SHA-256 of the bytes, taken before the file is read); a run
interrupted at any point and started again with the same journal reuses the
finished rows whose files are unchanged and tests the rest -- the files not
reached, and those changed since (a journal of other options is refused;
rows of a version-1 journal, which has no identities, are tested again).
The CLI keeps the journal beside ``--out`` and removes it when the results
file is written.
"""
from __future__ import annotations

import contextlib
import csv
import glob
import json
import os
from dataclasses import dataclass, field

import numpy as np

from .errors import NullAtlasError, OptionError, WriteError
from .inference.adjust import benjamini_hochberg, holm
from .patterns.readers import parse_columns, points_file

__all__ = ["BatchItem", "BatchResult", "collect_inputs", "read_manifest", "run_batch",
           "POINT_SUFFIXES"]

POINT_SUFFIXES = (".csv", ".tsv", ".txt", ".dat", ".npy")


@dataclass
class BatchItem:
    """One file of a batch and its window specification."""

    path: str
    window: str
    columns: str | None = None


@dataclass
class BatchResult:
    """Rows of a batch (one per file, input order) and the adjustment used.

    Attributes
    ----------
    rows : list of dict
        ``file``, ``window``, ``n``, ``name`` (of the primary statistic),
        ``statistic`` (its value), ``pvalue``, ``pvalue_is_bound``, ``method``,
        ``n_sims``, ``trusted``, ``reason``, ``pvalue_holm``, ``pvalue_bh``,
        ``error``, ``secondary`` (name -> p-value, unadjusted), ``seed``:
        the names of the results' attributes (schema 2).
    statistic, pvalue : ndarray
        Primary statistics and raw p-values (NaN for failed files).
    """

    rows: list = field(default_factory=list)

    @property
    def pvalue(self) -> np.ndarray:
        return np.array([r["pvalue"] if r["pvalue"] is not None else np.nan for r in self.rows])

    @property
    def statistic(self) -> np.ndarray:
        return np.array([r["statistic"] if r["statistic"] is not None else np.nan
                         for r in self.rows])

    @property
    def failed(self) -> list:
        return [r for r in self.rows if r["error"]]


def _inside(base: str, path: str) -> bool:
    base = os.path.realpath(base)
    return os.path.commonpath([base, os.path.realpath(path)]) == base


def read_manifest(path: str, allow_absolute: bool = False) -> list[BatchItem]:
    """Items of a manifest CSV (columns ``file``, ``window``, optional ``columns``)."""
    if not os.path.isfile(path):
        raise OptionError(f"{path}: no such manifest file")
    base = os.path.dirname(os.path.abspath(path))
    try:
        with open(path, newline="", encoding="utf-8") as fh:
            rows = list(csv.DictReader(fh))
    except (OSError, UnicodeDecodeError, csv.Error) as exc:
        raise OptionError(f"{path}: cannot read the manifest ({exc})") from None
    if not rows or not {"file", "window"} <= set(rows[0].keys() or ()):
        raise OptionError(f"{path}: a manifest needs a header with columns 'file' and 'window'")
    out = []
    for i, r in enumerate(rows, start=2):
        f, w = (r.get("file") or "").strip(), (r.get("window") or "").strip()
        where = f"{path}, row {i}"
        if not f or not w:
            raise OptionError(f"{where}: empty 'file' or 'window'")
        full = _manifest_path(f, base, allow_absolute, where)
        if not os.path.exists(points_file(full)):
            raise OptionError(f"{where}: no such points file '{f}'")
        out.append(BatchItem(full, _manifest_window(w, base, allow_absolute, where),
                             (r.get("columns") or "").strip() or None))
    return out


def _manifest_path(name: str, base: str, allow_absolute: bool, where: str) -> str:
    """A file named in a manifest, resolved against the manifest's folder
    ``base``; an absolute name or one that leaves the folder (``..``, a
    symbolic link) is refused unless ``allow_absolute``."""
    full = name if os.path.isabs(name) else os.path.join(base, name)
    if not allow_absolute and (os.path.isabs(name) or not _inside(base, full)):
        raise OptionError(f"{where}: '{name}' is outside the manifest's folder "
                          "(use --allow-absolute to permit it)")
    return full


def _manifest_window(spec: str, base: str, allow_absolute: bool, where: str) -> str:
    """A manifest's window with the file it reads (polygon, raster or voxel
    mask) resolved against the manifest's folder, by the same rule as the
    points files; specifications that read no file are unchanged."""
    from .patterns.windows import window_file

    def exists(name):
        return os.path.exists(name if os.path.isabs(name) else os.path.join(base, name))

    try:
        parts = window_file(spec, exists)
    except NullAtlasError:
        return spec                    # malformed: the row gets the error
    if parts is None:
        return spec
    before, name, after = parts
    return before + _manifest_path(name, base, allow_absolute, where) + after


def check_window_spec(spec: str) -> None:
    """Parse a window given for every file once, before any work: a malformed
    one would put the same error in every row.  ``bbox`` and ``hull`` are
    estimated from each file's points, so they are checked per file."""
    import warnings

    from .patterns.windows import parse_window

    if spec.strip().lower() in ("bbox", "hull"):
        return
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        parse_window(spec)


def check_options(opts: dict) -> None:
    """Options shared by every file, checked once before any work (the same
    checks as ``csr_test``; statistic names that exist in no dimension; the
    user's tables).

    Raises
    ------
    NullAtlasError
        One line, as for ``nullatlas test``.
    """
    from .csrtest import _check_options, check_budget
    from .summaries.statistics import STATISTICS

    _check_options(opts["method"], opts["n_sims"], 1, opts["alternative"], opts["alpha"],
                   opts["engine"], opts.get("curve_test", "maxabs"))
    check_budget(opts.get("fallback_budget"))
    for raw in opts.get("stats") or ():
        for name in str(raw).split(","):
            name = name.strip().lower()
            if name and name not in STATISTICS:
                raise OptionError(f"unknown statistic '{name}'; choose from "
                                  f"{', '.join(sorted(STATISTICS))}")
    if opts.get("tables"):
        from .inference.tablereader import open_table
        for path in opts["tables"]:
            open_table(path)


def collect_inputs(inputs: list[str], window: str | None, columns: str | None = None,
                   manifest: str | None = None, allow_absolute: bool = False) -> list[BatchItem]:
    """Expand files, folders and globs (or read a manifest) into items."""
    if manifest:
        if inputs:
            raise OptionError("give either a manifest or input files, not both")
        return read_manifest(manifest, allow_absolute)
    if not window:
        raise OptionError("give --window for all files, or a --manifest with a window per file")
    check_window_spec(window)
    parse_columns(columns)             # a bad --columns would fail every file
    paths = []
    for spec in inputs:
        if os.path.isdir(spec):
            found = sorted(os.path.join(spec, f) for f in os.listdir(spec)
                           if f.lower().endswith(POINT_SUFFIXES))
            if not found:
                raise OptionError(f"{spec}: the folder holds no point files ({', '.join(POINT_SUFFIXES)})")
            paths += found
        elif any(ch in spec for ch in "*?["):
            found = sorted(glob.glob(spec))
            if not found:
                raise OptionError(f"'{spec}' matches no file")
            paths += found
        else:
            if not os.path.exists(points_file(spec)):
                raise OptionError(f"{spec}: no such points file")
            paths.append(spec)
    if not paths:
        raise OptionError("no input files")
    return [BatchItem(p, window, columns) for p in paths]


def _one(item: BatchItem, opts: dict, seed: int) -> dict:
    """Test one file; any input error becomes the row's ``error``."""
    import warnings

    from .csrtest import csr_test

    row = {"file": item.path, "window": item.window, "n": None, "name": None, "statistic": None,
           "pvalue": None, "pvalue_is_bound": None, "method": None, "trusted": None, "reason": "",
           "error": "",
           "secondary": {}, "seed": seed,
           # identity before reading: a file changed meanwhile is retested on resume
           "_input": input_identity(item)}
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            res = csr_test(item.path, item.window, opts.get("stats"), method=opts["method"],
                           n_sims=opts["n_sims"], seed=seed, jobs=1,
                           alternative=opts["alternative"], on_duplicates=opts["on_duplicates"],
                           alpha=opts["alpha"], columns=parse_columns(item.columns),
                           progress=False, engine=opts["engine"], tables=opts.get("tables"),
                           fallback_budget=opts.get("fallback_budget"),
                           curve_test=opts.get("curve_test", "maxabs"))
    except NullAtlasError as exc:
        row["error"] = str(exc)
        return row
    p = res.primary
    row.update({"n": res.n, "name": p.name, "statistic": p.statistic, "pvalue": p.pvalue,
                "pvalue_is_bound": p.pvalue_is_bound, "method": p.method, "n_sims": p.n_sims,
                "trusted": p.trusted, "reason": p.reason,
                "secondary": {r.name: r.pvalue for r in res.results[1:]}})
    return row


def file_identity(path: str) -> dict | None:
    """What identifies a file's content: size, modification time (ns) and
    the SHA-256 of its bytes; None if it cannot be read."""
    import hashlib

    try:
        st = os.stat(path)
        digest = hashlib.sha256()
        with open(path, "rb") as fh:
            for block in iter(lambda: fh.read(1 << 20), b""):
                digest.update(block)
    except (OSError, ValueError):
        return None
    return {"size": int(st.st_size), "mtime_ns": int(st.st_mtime_ns), "sha256": digest.hexdigest()}


def input_identity(item: BatchItem) -> dict:
    """Identity of everything a row was computed from: the points file and,
    if the window reads one, the window file (see :func:`file_identity`)."""
    from .patterns.windows import window_file

    out = {"points": file_identity(points_file(item.path))}
    try:
        wf = window_file(item.window)
    except NullAtlasError:
        wf = None
    if wf is not None:
        out["window"] = file_identity(wf[1])
    return out


#: Journal format: 2 records each row's input identity (version 1 did not);
#: 3 names the row's keys as the results do (schema 2: ``name``, ``statistic``,
#: ``pvalue``); rows of older journals are tested again.
JOURNAL_VERSION = 3


def _journal_header(items, opts, seed):
    return {"journal": "nullatlas-batch", "version": JOURNAL_VERSION, "seed": int(seed),
            "options": {k: (list(v) if isinstance(v, (list, tuple)) else v) for k, v in opts.items()},
            "files": [[it.path, it.window, it.columns] for it in items]}


def _read_journal(path, items, opts, seed, notify):
    """(seed, finished rows by index) from a journal; checks it is this batch's
    and keeps only the rows whose input files have not changed since."""
    if not os.path.exists(path):
        return seed, {}
    try:
        with open(path, encoding="utf-8") as fh:
            lines = fh.read().splitlines()
        head = json.loads(lines[0]) if lines else None
    except (OSError, UnicodeDecodeError, json.JSONDecodeError):
        raise OptionError(f"{path}: unreadable batch journal; remove it to start afresh") from None
    if not isinstance(head, dict) or head.get("journal") != "nullatlas-batch":
        raise OptionError(f"{path}: not a nullatlas batch journal")
    if head.get("version") not in (1, 2, JOURNAL_VERSION):
        raise OptionError(f"{path}: batch journal of another nullatlas version "
                          f"({head.get('version')}); remove it to start afresh")
    want = _journal_header(items, opts, head["seed"] if seed is None else seed)
    if {**head, "version": JOURNAL_VERSION} != want:
        raise OptionError(f"{path}: journal of a batch with other files, options or seed; "
                          "use the original ones or remove the journal")
    last = {}
    for ln in lines[1:]:
        try:
            r = json.loads(ln)
        except json.JSONDecodeError:
            break                      # a line cut by the interruption: recompute from here
        if head.get("version") != JOURNAL_VERSION:
            r.pop("_input", None)                    # other keys: tested again
        last[int(r.pop("_index"))] = r          # a row tested again is written again, later
    return head["seed"], _unchanged(path, items, last, notify)


def _unchanged(path, items, rows, notify):
    """The journal rows whose inputs are still what they were tested on; the
    others (changed since, or of an older journal without identities) are
    tested again, and ``notify`` is told so once."""
    done, old, changed = {}, 0, []
    for i, r in rows.items():
        if not 0 <= i < len(items):
            continue
        ident = r.pop("_input", None)
        if ident is None:
            old += 1
        elif ident != input_identity(items[i]):
            changed.append(items[i].path)
        else:
            done[i] = r
    if old:
        notify(f"{path}: {old} row(s) written by an older nullatlas without the identity of "
               "their input files; those files are tested again")
    if changed:
        shown = ", ".join(os.path.basename(p) for p in changed[:5])
        notify(f"{len(changed)} file(s) changed since the interrupted run (size, time or "
               f"content); tested again: {shown}{', ...' if len(changed) > 5 else ''}")
    return done


def _open_journal(path, items, opts, seed, resume):
    """The journal, opened for appending rows (a new one starts with its
    header); a failure is a WriteError naming it, before any file is tested."""
    from .atomic import write_error

    try:
        if not (resume and os.path.exists(path)):
            with open(path, "w", encoding="utf-8") as fh:
                fh.write(json.dumps(_journal_header(items, opts, seed)) + "\n")
        return open(path, "a", encoding="utf-8")
    except OSError as exc:
        raise write_error(path, exc) from None


def _journal_row(fh, path, index, row, ident, kept):
    """Append one finished row and its input identity, flushed and synced; on
    a failed write (a full disk) stop with one line saying that the earlier
    rows are kept."""
    from .atomic import write_error
    from .results import _clean

    try:
        fh.write(json.dumps({**_clean(row), "_index": index, "_input": ident},
                            allow_nan=False) + "\n")
        fh.flush()
        os.fsync(fh.fileno())
    except OSError as exc:
        raise WriteError(f"{write_error(path, exc)}; the {kept} file(s) finished before are "
                         "kept in it: run the same command with --resume once it can be "
                         "written") from None


def run_batch(items: list[BatchItem], *, stats=None, method="auto", n_sims=999, seed=None,
              jobs=1, alternative="two-sided", on_duplicates="error", alpha=0.05,
              engine="fast", tables=None, progress=None, journal: str | None = None,
              resume: bool = False, scheduler: str | None = None,
              notify=None, fallback_budget: float | None = None,
              curve_test: str = "maxabs") -> BatchResult:
    """Test every item; see the module docstring.

    Parameters
    ----------
    journal : str, optional
        Append finished rows to this file, each with the identity of its
        input files (:func:`input_identity`); with ``resume`` reuse the rows
        already in it whose input files are unchanged (size, modification
        time and SHA-256), and test the others again.
    notify : callable(str), optional
        Told, as soon as known, what the resume does differently (changed
        files, rows of an older journal); the messages are also in
        ``result.notes``.
    fallback_budget, curve_test
        As for :func:`lookup.csr_test`, for every file.
    scheduler : str, optional
        Run the files on this dask.distributed scheduler (through joblib's
        Dask backend); the workers must see the files at the same paths
        (a shared file system).

    Returns
    -------
    BatchResult
    """
    from tqdm.auto import tqdm

    if jobs < 0:
        raise OptionError(f"--jobs must be 0 (all cores) or positive, got {jobs}")
    jobs = jobs or os.cpu_count() or 1
    opts = {"stats": stats, "method": method, "n_sims": n_sims, "alternative": alternative,
            "on_duplicates": on_duplicates, "alpha": alpha, "engine": engine, "tables": tables}
    if fallback_budget is not None:     # only then: journals of older versions still match
        opts["fallback_budget"] = fallback_budget
    if curve_test != "maxabs":
        opts["curve_test"] = curve_test
    check_options(opts)
    notes = []

    def note(msg):
        notes.append(msg)
        if notify is not None:
            notify(msg)

    done = {}
    if journal and resume:
        seed, done = _read_journal(journal, items, opts, seed, note)
    if seed is None:
        seed = int(np.random.SeedSequence().entropy % (2 ** 63))
    kids = np.random.SeedSequence(int(seed)).spawn(len(items))
    seeds = [int(k.generate_state(2, np.uint32).astype(np.uint64) @ np.array([1, 2 ** 32],
                                                                            np.uint64) % (2 ** 63))
             for k in kids]
    todo = [i for i in range(len(items)) if i not in done]
    bar = tqdm(total=len(items), initial=len(items) - len(todo), desc="patterns", unit="file",
               disable=None if progress is None else not progress, leave=False)
    jfh = _open_journal(journal, items, opts, seed, resume) if journal else None

    def finished(i, r):
        ident = r.pop("_input", None)
        done[i] = r
        bar.update(1)
        if jfh is not None:
            _journal_row(jfh, journal, i, r, ident, len(done) - 1)

    try:
        if jobs == 1 and scheduler is None:
            for i in todo:
                finished(i, _one(items[i], opts, seeds[i]))
        else:
            from joblib import Parallel, delayed

            from .parallel import backend

            with backend(scheduler) as cluster_jobs:
                gen = Parallel(n_jobs=jobs if cluster_jobs is None else cluster_jobs,
                               return_as="generator")(
                    delayed(_one)(items[i], opts, seeds[i]) for i in todo)
                for i, r in zip(todo, gen):
                    finished(i, r)
    finally:
        bar.close()
        if jfh is not None:
            with contextlib.suppress(OSError):      # a full disk was reported already
                jfh.close()
    rows = [done[i] for i in range(len(items))]
    p = np.array([r["pvalue"] if r["pvalue"] is not None and np.isfinite(r["pvalue"])
                  else np.nan for r in rows])
    ph, pb = holm(p), benjamini_hochberg(p)
    for r, a, b in zip(rows, ph, pb):
        r["pvalue_holm"] = None if not np.isfinite(a) else float(a)
        r["pvalue_bh"] = None if not np.isfinite(b) else float(b)
    res = BatchResult(rows)
    res.seed = int(seed)
    res.notes = notes
    return res


def results_document(res: BatchResult) -> dict:
    """The JSON form of a batch: what ``--json`` prints and ``--out FILE.json``
    writes (the same keys: ``seed``, ``files``, ``failed``, ``rows``)."""
    from .results import SCHEMA, _clean

    return {"schema": SCHEMA, "seed": getattr(res, "seed", None), "files": len(res.rows),
            "failed": len(res.failed), "rows": _clean(res.rows)}


def write_results(res: BatchResult, path: str) -> None:
    """Write the rows to ``path`` (.csv or .json), atomically."""
    from .atomic import atomic_path

    ext = os.path.splitext(path)[1].lower()
    with atomic_path(path) as tmp:
        if ext == ".json":
            with open(tmp, "w", encoding="utf-8") as fh:
                json.dump(results_document(res), fh, indent=1, allow_nan=False)
        else:
            keys = ["file", "window", "n", "name", "statistic", "pvalue", "pvalue_is_bound",
                    "pvalue_holm", "pvalue_bh", "method", "trusted", "reason", "error", "seed"]
            sec = sorted({k for r in res.rows for k in r["secondary"]})
            with open(tmp, "w", newline="", encoding="utf-8") as fh:
                w = csv.writer(fh)
                w.writerow(keys + [f"pvalue_{s}" for s in sec])
                for r in res.rows:
                    w.writerow([("" if r.get(k) is None else r.get(k)) for k in keys]
                               + [("" if r["secondary"].get(s) is None else r["secondary"][s])
                                  for s in sec])
