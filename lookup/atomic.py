"""Atomic file writes: write to a temporary file beside the target, then rename."""
from __future__ import annotations

import contextlib
import os
import tempfile

__all__ = ["atomic_path"]


@contextlib.contextmanager
def atomic_path(path: str):
    """Yield a temporary path in the target's folder; rename it over ``path`` on success.

    On any exception the temporary file is removed and ``path`` is untouched.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    base, ext = os.path.splitext(os.path.basename(path))
    fd, tmp = tempfile.mkstemp(prefix=f".{base}.", suffix=f".tmp{ext}", dir=folder)
    os.close(fd)
    try:
        yield tmp
        # mkstemp makes the file private (0600); give it the usual permissions
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
