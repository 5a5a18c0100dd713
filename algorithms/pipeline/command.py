"""The command line a run was started with, for its summary.

The command line sets it around a subcommand (:func:`command_line`); the summary records it
(:func:`current_command_line`), else the process's own ``sys.argv`` (in QGIS: QGIS's). Imports
neither GDAL nor QGIS.
"""
from __future__ import annotations

import contextlib
import sys
from contextvars import ContextVar

_COMMAND: ContextVar[tuple | None] = ContextVar("strikeline_command_line", default=None)

#: How the summary names the program: the command as a user types it, wherever it is installed.
PROGRAM = "strikeline"


@contextlib.contextmanager
def command_line(args):
    """Within the block, :func:`current_command_line` is ``[PROGRAM, *args]`` (``args``: the
    arguments after the program's name, as given); restored on leaving it."""
    token = _COMMAND.set((PROGRAM, *(str(a) for a in args)))
    try:
        yield
    finally:
        _COMMAND.reset(token)


def current_command_line() -> list[str]:
    """The command line of the run in progress: set by :func:`command_line`, else ``sys.argv``."""
    given = _COMMAND.get()
    return list(given) if given is not None else [str(a) for a in sys.argv]
