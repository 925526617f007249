"""Atomic file writes: write to a temporary file beside the target, then rename.

A write that fails (a read-only folder, a full disk, ...) raises
:class:`~nullatlas.lookup.errors.WriteError` naming the target and the
reason, and leaves neither the target changed nor a temporary file behind.
"""
from __future__ import annotations

import contextlib
import os
import tempfile

from .errors import WriteError

__all__ = ["atomic_path", "check_writable", "write_error"]


def write_error(path, exc: OSError) -> WriteError:
    """The one-line error of a failed write of ``path``.

    Parameters
    ----------
    path : str
        The file that could not be written (not a temporary name).
    exc : OSError
        The failure; its ``strerror`` (or the first line of its message, as
        h5py gives no errno) is the reason.

    Returns
    -------
    WriteError
        ``"cannot write PATH: REASON"``.
    """
    reason = exc.strerror or (os.strerror(exc.errno) if exc.errno else "")
    if not reason:
        reason = (str(exc).strip().splitlines() or [type(exc).__name__])[0][:200]
    return WriteError(f"cannot write {os.fspath(path)}: {reason}")


def check_writable(path) -> None:
    """Fail now, not after the work, if no file can be created beside ``path``.

    Creates and removes an empty temporary file in the folder of ``path``
    (a real probe: permissions, read-only file systems and quotas on the
    number of files all show up, also for root).

    Raises
    ------
    WriteError
        Naming ``path`` and the reason.
    """
    folder = os.path.dirname(os.path.abspath(os.fspath(path)))
    try:
        fd, tmp = tempfile.mkstemp(prefix=".nullatlas-probe.", dir=folder)
    except OSError as exc:
        raise write_error(path, exc) from None
    os.close(fd)
    with contextlib.suppress(OSError):
        os.unlink(tmp)


@contextlib.contextmanager
def atomic_path(path: str):
    """Yield a temporary path in the target's folder; rename it over ``path`` on success.

    On any exception the temporary file is removed and ``path`` is untouched;
    an ``OSError`` (the write failed) becomes a :class:`WriteError` naming
    ``path``.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    base, ext = os.path.splitext(os.path.basename(path))
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{base}.", suffix=f".tmp{ext}", dir=folder)
    except OSError as exc:
        raise write_error(path, exc) from None
    os.close(fd)
    try:
        yield tmp
        # mkstemp makes the file private (0600); give it the usual permissions
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, path)
    except OSError as exc:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise write_error(path, exc) from None
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
