"""Error classes of strikeline.

One root, :class:`StrikelineError`; each subclass also inherits the built-in exception it
resembles, so callers that catch ``ValueError`` or ``OSError`` keep working. A message names
the input (file, layer, field or parameter), what was received, what was expected and how to
fix it. The command line prints it as a single ``error:`` line and exits with status 2.
"""


class StrikelineError(Exception):
    """Root of every error that strikeline raises on purpose."""


class InputError(StrikelineError, ValueError):
    """An input (file, layer, field, parameter or data set) cannot be used as given."""


class CRSError(InputError):
    """A layer has no coordinate reference system, or one in degrees instead of metres."""


class RasterReadError(StrikelineError, OSError):
    """A raster could not be opened or read; the message carries GDAL's own text."""


class VectorReadError(StrikelineError, OSError):
    """A vector layer could not be opened or read; the message carries OGR's own text."""


class OutputError(StrikelineError, OSError):
    """An output could not be written, or would overwrite something without permission."""


class UndeterminedError(InputError):
    """The data cannot determine the requested quantity (too few picks, collinear picks)."""


class CancelledError(StrikelineError):
    """The caller's ``is_cancelled()`` returned true; nothing was written."""


def one_line(message: str) -> str:
    """Fold a message onto one line (GDAL's texts sometimes carry newlines)."""
    return " ".join(str(message).split())
