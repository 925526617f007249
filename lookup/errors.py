"""Error types: every bad input raises a subclass of :class:`NullAtlasError`.

``NullAtlasError`` derives from :class:`ValueError`, so callers that already
catch ``ValueError`` keep working.  The command line turns any of these into
one line on standard error and exit status 2.
"""


class NullAtlasError(ValueError):
    """Base class of all input errors raised by nullatlas."""


class PointsError(NullAtlasError):
    """The point data cannot be read or fails validation."""


class WindowError(NullAtlasError):
    """The observation window is malformed or does not fit the data."""


class TableError(NullAtlasError):
    """A null table cannot be opened or does not fit the question."""


class OptionError(NullAtlasError):
    """An option value is out of range or inconsistent with the others."""


class WriteError(NullAtlasError):
    """A result, figure, table or journal cannot be written (a read-only
    folder, a full disk, ...); the message names the file and the reason."""


class CompileError(NullAtlasError):
    """The kernels cannot be compiled ahead of time (no C compiler, a cache
    folder that cannot be written); they still run through numba's JIT."""
