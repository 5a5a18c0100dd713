"""What a command tells its user while it works: a progress bar on a terminal and a JSON Lines log.

:class:`TerminalReporter` draws one tqdm bar on stderr over a run's named steps
(:mod:`strikeline.pipeline.progress`) when stderr is a terminal and ``--quiet`` is not given,
and prints the pipeline's log lines (above the bar while it is drawn). ``--quiet`` drops the bar
and the information lines; warnings and errors are still printed, and the results on stdout are
the command's answer, so they are too. On a pipe or a file (CI, a batch log) nothing of the bar is
written: the log lines only, as before.

:class:`JsonLogReporter` writes ``--log-json FILE``: one JSON object per line and per event, each
line flushed as it is written so that a run that is killed leaves the events so far. Its first
line marks the file as a strikeline log (``"format": "strikeline-log"``); :func:`check_log_path`
refuses a path inside the output folder (which the run replaces as a whole), the ``--out`` file
itself, a folder, and an existing file that is not such a log (an earlier log is replaced).
"""
from __future__ import annotations

import json
import os
import sys
import threading
import time

from strikeline import __version__
from strikeline.errors import InputError
from strikeline.pipeline.progress import ERROR, INFO, WARNING, Clock, Reporter, Reporters

#: The ``format`` of a log's first line: the mark that lets a later run replace the file.
LOG_FORMAT = "strikeline-log"
#: Version of the log's event layout (raised when a key changes meaning).
LOG_VERSION = 1


# --------------------------------------------------------------------------- terminal
class TerminalReporter(Reporter):
    """A progress bar over the steps (on a terminal) and the log lines, on ``stream``.

    Parameters
    ----------
    stream : file, optional
        Where to write (default: ``sys.stderr`` as it is at each call).
    quiet : bool
        No bar and no information lines; warnings and errors only.
    bar : bool, optional
        Draw the bar; default: when ``stream`` is a terminal and not ``quiet``.
    """

    def __init__(self, stream=None, *, quiet: bool = False, bar: bool | None = None):
        self._stream = stream
        self.quiet = quiet
        out = self.stream
        self.draw = (not quiet and _isatty(out)) if bar is None else (bar and not quiet)
        self._bar = None
        self._lock = threading.Lock()  # the bar is redrawn by the run and by the ticker
        self._ticker: threading.Thread | None = None
        self._stop = threading.Event()
        self._drawn = 0.0  # perf_counter of the last redraw

    @property
    def stream(self):
        return self._stream if self._stream is not None else sys.stderr

    def _make_bar(self, total: int, desc: str):
        from tqdm import tqdm

        class _Bar(tqdm):
            monitor_interval = 0  # no monitor thread left behind in the process

        return _Bar(total=total, desc=desc, file=self.stream, leave=False, dynamic_ncols=True, unit="step",
                    bar_format="{desc}: {percentage:3.0f}%|{bar}| {elapsed}")

    def start(self, step):
        if not self.draw:
            return
        desc = f"{step.label} ({step.index}/{step.total})"
        with self._lock:
            if self._bar is None:
                self._bar = self._make_bar(step.total, desc)
                self._stop.clear()
                # a step without progress reports of its own (the model fit) still shows its time pass
                self._ticker = threading.Thread(target=self._tick, name="strikeline-progress", daemon=True)
                self._ticker.start()
            self._bar.set_description_str(desc, refresh=False)
        self._set(step.index - 1, force=True)

    def advance(self, step, fraction):
        self._set(step.index - 1 + fraction)

    def finish(self, step, timing):
        self._set(step.index, force=True)
        if step.index == step.total:  # cleared before the results are printed
            self.close(status="ok")

    def _set(self, n: float, *, force: bool = False) -> None:
        with self._lock:
            if self._bar is None:
                return
            self._bar.n = n
            now = time.perf_counter()
            if force or now - self._drawn >= 0.1:  # at most ten redraws a second from a long loop
                self._bar.refresh()
                self._drawn = now

    def _tick(self) -> None:
        while not self._stop.wait(1.0):
            with self._lock:
                if self._bar is not None:
                    self._bar.refresh()

    def message(self, text, *, level=INFO, sheet=None):
        if self.quiet and level == INFO:
            return
        line = text if sheet is None else f"{sheet}: {text}"
        with self._lock:
            if self._bar is not None:
                self._bar.write(line, file=self.stream)
                return
        print(line, file=self.stream)

    def close(self, *, status, message=None, exit_code=0, timing=None):
        self._stop.set()
        if self._ticker is not None:
            self._ticker.join()
            self._ticker = None
        with self._lock:
            if self._bar is not None:
                self._bar.close()
                self._bar = None


def _isatty(stream) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError, OSError):
        return False


# --------------------------------------------------------------------------- JSON Lines log
def is_strikeline_log(path: str) -> bool:
    """Whether the file ``path`` starts with the first line of a strikeline log."""
    try:
        with open(path, encoding="utf-8") as f:
            first = f.readline(65536)
        return json.loads(first).get("format") == LOG_FORMAT
    except (OSError, ValueError, AttributeError):
        return False


def check_log_path(path: str, *, out: str | None = None, flag: str = "--log-json") -> str:
    """Refuse a log path the run may not write; return it as an absolute path.

    Refused, each in one line naming the path, the problem and the fix: a folder; a path in a
    folder that does not exist; ``out`` itself or a path inside the folder ``out`` (the run
    replaces that folder as a whole); an existing file that is not a strikeline log (an input,
    a result: never overwritten).
    """
    full = os.path.abspath(path)
    if os.path.isdir(full):
        raise InputError(f"{flag} '{path}' is a folder; give a file name for the log (e.g. {path.rstrip('/')}/run.jsonl "
                         "beside the results, not inside --out)")
    if out:
        real, real_out = os.path.realpath(full), os.path.realpath(os.path.abspath(out))
        if real == real_out:
            raise InputError(f"{flag} '{path}' is the --out path itself; give the log a file name of its own")
        if real.startswith(real_out.rstrip(os.sep) + os.sep):
            raise InputError(f"{flag} '{path}' lies inside --out '{out}', which the run replaces as a whole; "
                             "write the log beside the output folder")
    parent = os.path.dirname(full)
    if not os.path.isdir(parent):
        raise InputError(f"{flag} '{path}': its folder '{parent}' does not exist; create it or give a log path in "
                         "an existing folder")
    if os.path.lexists(full) and not is_strikeline_log(full):
        raise InputError(f"{flag} '{path}' exists and is not a strikeline log (its first line does not mark one); "
                         "give a new file name - a strikeline log from an earlier run is replaced, nothing else is")
    return full


class JsonLogReporter(Reporter):
    """The events of a command as JSON Lines in ``path`` (checked by :func:`check_log_path`).

    Lines (``event`` first): ``start`` (format mark, the log layout's version, strikeline's
    version, command line, UTC time), ``step_start`` and ``step_end`` (step, index, total, sheet when in a series;
    ``wall_s``, ``cpu_s`` and ``peak_rss_mib`` at the end), ``message`` (``level`` info,
    warning or error; text), ``end`` (``status`` ok or error, the one-line ``message``,
    ``exit_code``, the command's own ``wall_s``, ``cpu_s``, ``peak_rss_mib``). Every line is
    flushed when written. ``t_s`` on each line: seconds since the log began.
    """

    def __init__(self, path: str, *, command: list[str] | None = None):
        self.path = path
        exists = os.path.lexists(path)
        self._f = open(path, "w" if exists else "x", encoding="utf-8")  # noqa: SIM115 - closed by close()
        self._clock = Clock()
        self._write({"event": "start", "format": LOG_FORMAT, "log_version": LOG_VERSION,
                     "version": __version__, "command": list(command or []),
                     "time_utc": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())})

    def _write(self, record: dict) -> None:
        if self._f is None:
            return
        if record.get("event") != "start":
            record = {**record, "t_s": round(time.perf_counter() - self._clock.wall0, 6)}
        self._f.write(json.dumps(record, ensure_ascii=False, allow_nan=False) + "\n")
        self._f.flush()

    @staticmethod
    def _step(step) -> dict:
        d = {"step": step.name, "index": step.index, "total": step.total}
        if step.sheet is not None:
            d["sheet"] = step.sheet
        return d

    def start(self, step):
        self._write({"event": "step_start", **self._step(step)})

    def finish(self, step, timing):
        self._write({"event": "step_end", **self._step(step), **_timing(timing)})

    def message(self, text, *, level=INFO, sheet=None):
        d = {"event": "message", "level": level, "text": text}
        if sheet is not None:
            d["sheet"] = sheet
        self._write(d)

    def close(self, *, status, message=None, exit_code=0, timing=None):
        if self._f is None:
            return
        try:
            self._write({"event": "end", "status": status, "message": message, "exit_code": int(exit_code),
                         **_timing(timing or self._clock.timing())})
        finally:
            self._f.close()
            self._f = None


def _timing(t) -> dict:
    return {"wall_s": round(t.wall_s, 6), "cpu_s": round(t.cpu_s, 6), "peak_rss_mib": round(t.peak_rss_mib, 3)}


# --------------------------------------------------------------------------- for a command
class CommandReporter(Reporters):
    """The reporters of one command (terminal, and the log when asked for) with the pipeline's
    ``log(message)`` callable and :meth:`error` for the command's final failure."""

    def __init__(self, *, quiet: bool = False, log_json: str | None = None, out: str | None = None,
                 command: list[str] | None = None, stream=None):
        self.terminal = TerminalReporter(stream, quiet=quiet)
        path = None if log_json is None else check_log_path(log_json, out=out)
        self.json = None if path is None else JsonLogReporter(path, command=command)
        self._clock = Clock()
        super().__init__(self.terminal, self.json)

    def log(self, message: str) -> None:
        """A log line of the pipeline (``warning:`` first makes it a warning)."""
        from strikeline.pipeline.progress import level_of

        self.message(message, level=level_of(message))

    def warn(self, message: str) -> None:
        self.message(message, level=WARNING)

    def end(self, exit_code: int, error: str | None = None) -> None:
        """Close every reporter with the command's status: ok for exit 0, else error with the
        one-line ``error`` (the message the command prints after ``error:``)."""
        if error is not None and self.json is not None:
            self.json.message(error, level=ERROR)
        self.close(status="ok" if exit_code == 0 else "error", message=error, exit_code=exit_code,
                   timing=self._clock.timing())


def command_reporter(args, *, command: list[str] | None = None) -> CommandReporter:
    """The :class:`CommandReporter` of parsed arguments ``args`` (``quiet``, ``log_json``, ``out``
    where the command has them)."""
    return CommandReporter(quiet=bool(getattr(args, "quiet", False)), log_json=getattr(args, "log_json", None),
                           out=getattr(args, "out", None), command=command)
