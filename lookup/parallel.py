"""Where parallel work runs: joblib's loky processes, or a dask.distributed
cluster through joblib's Dask backend (same tasks, same results)."""
from __future__ import annotations

import contextlib

from .errors import OptionError

__all__ = ["backend"]


@contextlib.contextmanager
def backend(scheduler: str | None):
    """Context in which ``joblib.Parallel`` runs on the Dask scheduler at
    ``scheduler`` (e.g. ``tcp://host:8786``), or locally when it is None.

    Yields the ``n_jobs`` to use with the cluster (-1: all its workers), or
    None for local runs.  Lost workers are survived by dask.distributed,
    which reruns their tasks elsewhere; results are keyed by task, so they do
    not change.
    """
    if scheduler is None:
        yield None
        return
    import joblib
    try:
        from distributed import Client
    except ImportError:
        raise OptionError("--dask-scheduler needs dask.distributed: "
                          "pip install 'nullatlas[dask]'") from None
    try:
        client = Client(scheduler, timeout=20)
    except (OSError, TimeoutError, ValueError) as exc:
        raise OptionError(f"cannot reach the Dask scheduler at {scheduler} "
                          f"({type(exc).__name__})") from None
    try:
        with joblib.parallel_config(backend="dask"):
            yield -1
    finally:
        client.close()
