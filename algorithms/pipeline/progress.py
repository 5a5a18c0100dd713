"""Named steps of a run, their timings and messages, told to a :class:`Reporter`.

The chain marks where each of its steps begins (:meth:`RunProgress.step`); a
:class:`RunProgress` times the step that ends (wall and CPU seconds, the process's peak resident
memory), tells its reporter, checks for cancellation between steps and keeps the older
``progress(fraction)`` / ``is_cancelled()`` callables of the library working. The command line
(a progress bar, a JSON Lines log), the QGIS adapter (Processing feedback) and tests implement
:class:`Reporter`; several are joined with :class:`Reporters`. A series of sheets gives each
sheet's :class:`RunProgress` the sheet's name (``sheet=``), which every event carries.

Imports neither GDAL nor QGIS.
"""
from __future__ import annotations

import ctypes
import ctypes.util
import resource
import sys
import time
from dataclasses import dataclass
from typing import Callable, Sequence

from strikeline.errors import CancelledError

#: The steps of ``strikeline run``, in order; ``compute`` alone makes :data:`COMPUTE_STEPS`.
READING = "reading inputs"
WRITING = "writing outputs"
COMPUTE_STEPS = ("picks", "attitude and confidence", "local attitudes", "surface model", "grids",
                 "structure contours", "depth, trace and misfit", "thickness", "summary")
RUN_STEPS = (READING, *COMPUTE_STEPS, WRITING)

#: Message levels: a line the pipeline logs is a warning when it starts with ``warning:``.
INFO, WARNING, ERROR = "info", "warning", "error"


@dataclass(frozen=True)
class Step:
    """One step of a run: its ``name``, place (``index`` from 1 of ``total``) and the ``sheet``
    it belongs to (None for a single run)."""

    name: str
    index: int
    total: int
    sheet: str | None = None

    @property
    def label(self) -> str:
        """``name`` with the sheet's name before it in a series: ``north: picks``."""
        return self.name if self.sheet is None else f"{self.sheet}: {self.name}"


@dataclass(frozen=True)
class Timing:
    """What a step (or a whole run) cost: wall-clock and CPU seconds of the process (all
    threads), and the peak resident memory of the process so far in MiB (``getrusage``'s
    ``ru_maxrss``: a high-water mark, so it never falls from one step to the next)."""

    wall_s: float
    cpu_s: float
    peak_rss_mib: float


def peak_rss_mib() -> float:
    """The peak resident set size of this process so far, in MiB (Linux reports KiB, macOS bytes)."""
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return peak / (1024.0 * 1024.0) if sys.platform == "darwin" else peak / 1024.0


def _malloc_trim():
    """glibc's ``malloc_trim`` (None elsewhere)."""
    if not sys.platform.startswith("linux"):
        return None
    try:
        return ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6").malloc_trim
    except (OSError, AttributeError):  # musl and other C libraries have none
        return None


_TRIM = _malloc_trim()


def return_free_memory() -> None:
    """Give the pages the C allocator holds free back to the system (glibc's ``malloc_trim(0)``,
    which also trims the arenas of worker threads); nothing where there is no such call. A step's
    arrays, once freed, otherwise stay in the process's resident memory under the next steps."""
    if _TRIM is not None:
        _TRIM(0)


def level_of(message: str) -> str:
    """The level of a pipeline log line: :data:`WARNING` when it starts with ``warning:``."""
    return WARNING if message.lstrip().lower().startswith("warning:") else INFO


class Reporter:
    """Receives the events of a run; every method does nothing here (override what you need).

    ``start``/``advance``/``finish`` come once per step, in order (``advance`` any number of
    times in between, with the fraction of the step done); ``message`` for each log line;
    ``close`` once at the end with the run's status (``"ok"`` or ``"error"``), the one-line
    error message (None when ok) and the command's exit code.
    """

    def start(self, step: Step) -> None:
        pass

    def advance(self, step: Step, fraction: float) -> None:
        pass

    def finish(self, step: Step, timing: Timing) -> None:
        pass

    def message(self, text: str, *, level: str = INFO, sheet: str | None = None) -> None:
        pass

    def close(self, *, status: str, message: str | None = None, exit_code: int = 0,
              timing: Timing | None = None) -> None:
        pass


class Reporters(Reporter):
    """Several reporters as one: each event goes to each, in the order given."""

    def __init__(self, *reporters: Reporter | None):
        self.reporters = tuple(r for r in reporters if r is not None)

    def start(self, step):
        for r in self.reporters:
            r.start(step)

    def advance(self, step, fraction):
        for r in self.reporters:
            r.advance(step, fraction)

    def finish(self, step, timing):
        for r in self.reporters:
            r.finish(step, timing)

    def message(self, text, *, level=INFO, sheet=None):
        for r in self.reporters:
            r.message(text, level=level, sheet=sheet)

    def close(self, *, status, message=None, exit_code=0, timing=None):
        for r in self.reporters:
            r.close(status=status, message=message, exit_code=exit_code, timing=timing)


class Clock:
    """Wall and CPU seconds since it was made (``time.perf_counter``, ``time.process_time``)."""

    def __init__(self):
        self.wall0, self.cpu0 = time.perf_counter(), time.process_time()

    def timing(self) -> Timing:
        return Timing(wall_s=max(0.0, time.perf_counter() - self.wall0),
                      cpu_s=max(0.0, time.process_time() - self.cpu0), peak_rss_mib=peak_rss_mib())


class RunProgress:
    """The steps of one run, as the chain reaches them.

    Parameters
    ----------
    reporter : Reporter, optional
        Told of every step and message.
    steps : sequence of str
        The step names in the order the chain reaches them (:data:`RUN_STEPS`).
    progress : callable, optional
        ``progress(fraction)`` of the whole run, 0-1 (each step an equal share).
    is_cancelled : callable, optional
        Polled at each step's start; True raises :class:`~strikeline.errors.CancelledError`.
    sheet : str, optional
        The sheet of a series that the run belongs to; every event carries it.
    log : callable, optional
        Also receives every message given to :meth:`log` (as the pipeline's ``log`` did).
    """

    def __init__(self, reporter: Reporter | None = None, *, steps: Sequence[str] = RUN_STEPS,
                 progress: Callable[[float], None] | None = None,
                 is_cancelled: Callable[[], bool] | None = None, sheet: str | None = None,
                 log: Callable[[str], None] | None = None):
        if len(set(steps)) != len(steps) or not steps:
            raise ValueError(f"steps must be distinct names, got {list(steps)}")
        self.reporter = reporter or Reporter()
        self.steps = tuple(steps)
        self.progress = progress
        self.is_cancelled = is_cancelled
        self.sheet = sheet
        self._log = log
        self.current: Step | None = None
        self.done: list[tuple[Step, Timing]] = []
        self._clock: Clock | None = None

    # ---- steps
    def step(self, name: str) -> None:
        """End the step in progress (if any) and begin step ``name``, the next of :attr:`steps`
        after it (steps a run does not need are still passed through, quickly, so every run
        reports every step). Raises CancelledError when cancellation is asked for."""
        self.check()
        last = -1 if self.current is None else self.current.index - 1
        if name not in self.steps or self.steps.index(name) <= last:
            raise ValueError(f"step {name!r} is not after {self.steps[last] if last >= 0 else 'the start'} "
                             f"in {list(self.steps)}")
        self.finish()
        k = self.steps.index(name)
        self.current = Step(name, k + 1, len(self.steps), self.sheet)
        self._clock = Clock()
        self.reporter.start(self.current)
        self._overall(0.0)

    def advance(self, fraction: float) -> None:
        """The step in progress is ``fraction`` (0-1) done."""
        if self.current is None:
            return
        f = min(max(float(fraction), 0.0), 1.0)
        self.reporter.advance(self.current, f)
        self._overall(f)

    def part(self) -> Callable[[float], None]:
        """A ``progress(fraction)`` callable for the library's long loops within the current step."""
        return self.advance

    def finish(self) -> Timing | None:
        """End the step in progress (its timing is returned and reported); nothing when none is."""
        if self.current is None or self._clock is None:
            return None
        step, timing = self.current, self._clock.timing()
        return_free_memory()  # after the step's peak is read: the next step starts from what is in use
        self.reporter.finish(step, timing)
        self.done.append((step, timing))
        self._overall(1.0)
        self.current, self._clock = None, None
        return timing

    def check(self) -> None:
        """Raise :class:`~strikeline.errors.CancelledError` when cancellation is asked for."""
        if self.is_cancelled is not None and self.is_cancelled():
            raise CancelledError("cancelled; nothing was written")

    # ---- messages
    def log(self, message: str) -> None:
        """A pipeline log line: to the reporter (a warning when it starts with ``warning:``) and
        to the ``log`` callable given."""
        self.reporter.message(message, level=level_of(message), sheet=self.sheet)
        if self._log is not None:
            self._log(message)

    def _overall(self, within: float) -> None:
        if self.progress is not None and self.current is not None:
            self.progress(min(1.0, (self.current.index - 1 + within) / len(self.steps)))
