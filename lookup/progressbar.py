"""Progress bars: tqdm's notebook bar in a Jupyter notebook (where ipywidgets
is installed), its text bar on standard error otherwise."""
from __future__ import annotations

import sys

__all__ = ["in_notebook", "show_progress", "progress_bar"]


def in_notebook() -> bool:
    """True inside a Jupyter kernel (an IPython ``ZMQInteractiveShell``)."""
    ipy = sys.modules.get("IPython")
    if ipy is None:
        return False
    try:
        shell = ipy.get_ipython()
    except Exception:           # an IPython too old or half imported: not a notebook
        return False
    return shell is not None and type(shell).__name__ == "ZMQInteractiveShell"


def show_progress(progress: bool | None) -> bool:
    """Whether to draw a bar: as asked, or (None) in a notebook or on a terminal."""
    if progress is not None:
        return bool(progress)
    if in_notebook():
        return True
    try:
        return sys.stderr.isatty()
    except (AttributeError, ValueError):
        return False


def progress_bar(total: int, desc: str, unit: str, progress: bool | None = None, **kw):
    """A tqdm bar of ``total`` steps.

    Parameters
    ----------
    total : int
    desc, unit : str
        tqdm's description and unit.
    progress : bool or None
        True: always, False: never, None: in a notebook or on a terminal.
    **kw
        Passed on to tqdm.

    Returns
    -------
    tqdm.std.tqdm or tqdm.notebook.tqdm_notebook
        The notebook bar in a notebook when it can be drawn (it needs
        ipywidgets), else the text bar on standard error.
    """
    show = show_progress(progress)
    if show and in_notebook():
        try:
            from tqdm.notebook import tqdm as notebook_bar
            return notebook_bar(total=total, desc=desc, unit=unit, **kw)
        except ImportError:     # no ipywidgets: the text bar below
            pass
    from tqdm.std import tqdm as text_bar
    return text_bar(total=total, desc=desc, unit=unit, disable=not show, file=sys.stderr, **kw)
