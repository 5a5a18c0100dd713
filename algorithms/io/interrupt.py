"""Stopping on request: SIGINT and SIGTERM as exceptions, and callbacks that stop GDAL's long steps.

A scheduler or ``timeout`` stops a program with SIGTERM, a user with Ctrl-C (SIGINT). While
:func:`signals_as_exceptions` is active (the command line runs inside it), either signal raises
:class:`Interrupted` in the main thread, so the output writers' clean-up runs and no partial
output is left. Two places must not be interrupted half-way and defer the signal instead:

* GDAL's C code (contour generation, raster writes): a Python exception raised inside a GDAL
  progress callback is printed and swallowed by GDAL's bindings, so the handler only records the
  signal while :class:`GdalStop` is active; the callback then returns 0, GDAL stops at its next
  progress report, and :meth:`GdalStop.check` raises the recorded interruption.
* the renames that replace an output folder (:func:`deferred_signals`): the signal is held
  until the folder is complete, old or new.

A caller's ``is_cancelled()`` (the QGIS feedback's ``isCanceled``) stops GDAL the same way and
raises :class:`strikeline.errors.CancelledError`.
"""
from __future__ import annotations

import contextlib
import signal
import threading

from strikeline.errors import CancelledError

__all__ = ["STOP_SIGNALS", "GdalStop", "Interrupted", "deferred_signals", "signals_as_exceptions"]

#: The signals that stop a run: Ctrl-C and the terminate request of schedulers and ``timeout``.
STOP_SIGNALS = (signal.SIGINT, signal.SIGTERM)

# ``hold``: how many sections (GDAL calls, folder replaces) are deferring signals now;
# ``pending``: the signal received meanwhile (None if none).
_state = {"hold": 0, "pending": None}


class Interrupted(KeyboardInterrupt):
    """The run was stopped by a signal; ``signum`` is its number (exit status 128 + signum)."""

    def __init__(self, signum: int):
        self.signum = int(signum)
        super().__init__(signal.Signals(self.signum).name)

    @property
    def exit_status(self) -> int:
        return 128 + self.signum


def _handler(signum, frame):
    if _state["hold"]:
        _state["pending"] = signum
        return
    raise Interrupted(signum)


def _main_thread() -> bool:
    return threading.current_thread() is threading.main_thread()


@contextlib.contextmanager
def signals_as_exceptions():
    """SIGINT and SIGTERM raise :class:`Interrupted` inside the block; handlers restored after.

    Outside the main thread (where Python cannot set handlers) the block runs unchanged.
    """
    if not _main_thread():
        yield
        return
    previous = {s: signal.getsignal(s) for s in STOP_SIGNALS}
    for s in STOP_SIGNALS:
        signal.signal(s, _handler)
    try:
        yield
    finally:
        for s, h in previous.items():
            signal.signal(s, h)
        _state["pending"] = None


def raise_pending() -> None:
    """Raise the interruption recorded while signals were held, if any (and forget it)."""
    signum, _state["pending"] = _state["pending"], None
    if signum is not None:
        raise Interrupted(signum)


@contextlib.contextmanager
def deferred_signals():
    """Hold SIGINT and SIGTERM for the duration of the block; raise the held one after it.

    The signals are blocked in the kernel too (main thread), so even Python's default SIGINT
    handler cannot interrupt the block; they are delivered when it ends.
    """
    blocked = _main_thread() and hasattr(signal, "pthread_sigmask")
    if blocked:
        old_mask = signal.pthread_sigmask(signal.SIG_BLOCK, STOP_SIGNALS)
    _state["hold"] += 1
    try:
        yield
    finally:
        _state["hold"] -= 1
        if blocked:
            signal.pthread_sigmask(signal.SIG_SETMASK, old_mask)
    if not _state["hold"]:
        raise_pending()


class GdalStop:
    """A GDAL progress callback that reports progress and stops GDAL on request.

    Use as a context manager around one GDAL call that takes ``callback=``; after the call (and
    when it fails) call :meth:`check`, which raises :class:`Interrupted` for a signal received
    meanwhile and :class:`CancelledError` when ``is_cancelled()`` said so.

    Parameters
    ----------
    progress : callable(fraction), optional
        Called with GDAL's completed fraction (0-1).
    is_cancelled : callable() -> bool, optional
        Polled at every progress report of GDAL; true stops GDAL.
    what : str
        The step, for the cancellation message (``"contour lines"``).
    """

    def __init__(self, progress=None, is_cancelled=None, *, what: str = "GDAL step"):
        self.progress, self.is_cancelled, self.what = progress, is_cancelled, what
        self.cancelled = False
        self.error: BaseException | None = None
        self.calls = 0

    def __enter__(self) -> GdalStop:
        _state["hold"] += 1
        return self

    def __exit__(self, *exc) -> None:
        _state["hold"] -= 1

    def callback(self, complete, message=None, data=None) -> int:
        """GDAL's progress function: 1 to go on, 0 to stop."""
        self.calls += 1
        try:
            if _state["pending"] is not None or self.error is not None:
                return 0
            if self.is_cancelled is not None and self.is_cancelled():
                self.cancelled = True
                return 0
            if self.progress is not None:
                self.progress(float(complete))
        except BaseException as exc:  # noqa: BLE001 - GDAL's bindings would print and swallow it
            self.error = exc
            return 0
        return 1

    @property
    def stopped(self) -> bool:
        return self.cancelled or self.error is not None or _state["pending"] is not None

    def check(self) -> None:
        """Raise the reason GDAL was stopped, if it was stopped on request."""
        if _state["pending"] is not None and _state["hold"] <= 1:
            raise_pending()
        if self.error is not None:
            raise self.error
        if self.cancelled:
            raise CancelledError(f"{self.what}: cancelled; nothing was written")
