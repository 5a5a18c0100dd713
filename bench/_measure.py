"""Measuring for the bench scripts: wall time, CPU time, peak memory, the machine, result lines.

Every bench script prints, for each named workload, one line that starts with ``result:`` and
carries the workload's name, its wall time, its peak memory, and its ratio to a reference
measured in the same run (``bench/run_all.py`` collects these lines into one table):

    result: <workload> | time 1.23 s | peak 456 MiB | cpu/wall 1.10 | ratio 0.80 x <reference>

A workload the tool refuses prints ``result: <workload> | refused: <the tool's one-line reason>``;
one that cannot run here prints ``result: <workload> | not available: <why>``.

Peak memory in process is the growth of the resident set's high-water mark (``VmHWM`` of
``/proc/self/status``) over the resident size at the start of the workload; the mark is reset
before each workload by writing ``5`` to ``/proc/self/clear_refs`` (Linux 4.0 and later,
documented in proc(5)). Where the reset is refused, the figure is the high-water mark of the
whole process so far, and the line says so. So that memory a workload frees goes back to the
system (and the next workload's growth is its own), the first :func:`measured` fixes glibc's mmap
threshold at 128 KiB (``mallopt(M_MMAP_THRESHOLD)``, documented in mallopt(3)): every large block is
then its own mapping, returned when freed, instead of heap memory kept for reuse. CPU time is ``resource.getrusage(RUSAGE_SELF)``
(user + system, every thread of the process); a child process is measured with ``os.wait4``,
which returns that one child's own resource usage (peak resident set ``ru_maxrss``, CPU time).
"""
from __future__ import annotations

import contextlib
import os
import platform
import resource
import subprocess
import sys
import tempfile
import time
import tracemalloc
from dataclasses import dataclass
from pathlib import Path

RESULT = "result:"
GNU_TIME = "/usr/bin/time" if os.access("/usr/bin/time", os.X_OK) else None
REPO = Path(__file__).resolve().parent.parent


@dataclass
class Measure:
    """One workload's figures: wall and CPU seconds, peak memory in bytes beyond its start."""

    wall_s: float = 0.0
    cpu_s: float = 0.0
    peak_bytes: float = 0.0
    peak_whole_process: bool = False  # the reset of the high-water mark was refused

    @property
    def cpu_per_wall(self) -> float:
        return self.cpu_s / self.wall_s if self.wall_s > 0 else float("nan")


_MMAP_FIXED = []


def _fix_mmap_threshold() -> None:
    if _MMAP_FIXED:
        return
    _MMAP_FIXED.append(True)
    with contextlib.suppress(OSError, AttributeError):
        import ctypes
        ctypes.CDLL("libc.so.6").mallopt(-3, 128 * 1024)  # -3: M_MMAP_THRESHOLD


def _status_kib(key: str) -> int:
    with open("/proc/self/status") as f:
        for line in f:
            if line.startswith(key + ":"):
                return int(line.split()[1])
    return 0


def reset_peak() -> bool:
    """Reset this process's resident high-water mark; False where the kernel refuses."""
    try:
        with open("/proc/self/clear_refs", "w") as f:
            f.write("5")
        return True
    except OSError:
        return False


def _cpu_self() -> float:
    r = resource.getrusage(resource.RUSAGE_SELF)
    return r.ru_utime + r.ru_stime


@contextlib.contextmanager
def measured():
    """``with measured() as m:`` fills ``m`` (a :class:`Measure`) when the block ends."""
    _fix_mmap_threshold()
    m = Measure()
    m.peak_whole_process = not reset_peak()
    rss0 = _status_kib("VmRSS")
    cpu0, t0 = _cpu_self(), time.perf_counter()
    try:
        yield m
    finally:
        m.wall_s = time.perf_counter() - t0
        m.cpu_s = _cpu_self() - cpu0
        hwm = _status_kib("VmHWM")
        m.peak_bytes = 1024.0 * (hwm if m.peak_whole_process else max(0, hwm - rss0))


def traced(fn):
    """Run ``fn()`` once with Python's allocation tracer on: its result and a :class:`Measure`
    whose ``peak_bytes`` is the largest memory that Python's allocators (numpy's arrays among
    them) held at once during the call beyond what they held before it (``tracemalloc``, from its
    start); wall and CPU seconds as :func:`measured` takes them. Memory that libraries such as
    GDAL allocate in C is not seen; the resident-set figures of :func:`measured` see it."""
    tracemalloc.start()
    try:
        cpu0, t0 = _cpu_self(), time.perf_counter()
        result = fn()
        wall, cpu = time.perf_counter() - t0, _cpu_self() - cpu0
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    return result, Measure(wall_s=wall, cpu_s=cpu, peak_bytes=float(peak))


def measure(fn, repeat: int = 1):
    """Run ``fn()`` ``repeat`` times: its last result and a :class:`Measure` with the best wall
    time (and that run's CPU time) and the largest peak memory of the runs."""
    best, result = None, None
    for _ in range(max(1, repeat)):
        with measured() as m:
            result = fn()
        if best is None or m.wall_s < best.wall_s:
            peak = m.peak_bytes if best is None else max(best.peak_bytes, m.peak_bytes)
            best = m
            best.peak_bytes = peak
        else:
            best.peak_bytes = max(best.peak_bytes, m.peak_bytes)
    return result, best


@dataclass
class ChildRun:
    """A finished child process: exit status, output, and its own resource usage."""

    returncode: int
    stdout: str
    stderr: str
    wall_s: float
    cpu_s: float
    peak_bytes: float  # ru_maxrss of this child alone

    @property
    def cpu_per_wall(self) -> float:
        return self.cpu_s / self.wall_s if self.wall_s > 0 else float("nan")

    def error_line(self) -> str:
        """The tool's one-line error (``error: ...``), else the last line it printed."""
        lines = [ln.strip() for ln in self.stderr.splitlines() if ln.strip()]
        for ln in lines:
            if ln.startswith("error:"):
                return ln[len("error:"):].strip()
        return lines[-1] if lines else f"exit status {self.returncode}, nothing on stderr"


def run_child(argv, *, cwd=None, env=None) -> ChildRun:
    """Run ``argv`` to its end and measure it alone.

    Started through GNU ``/usr/bin/time`` where present: the resource usage of a process
    started straight from Python would include this (large) process's resident set, since
    Linux carries the high-water mark across fork/vfork and exec into the child's ``ru_maxrss``.
    Without GNU time, ``os.wait4`` gives the child's own usage with that overstatement.
    """
    with tempfile.TemporaryDirectory(prefix="strikeline-bench-child-") as d:
        out_p, err_p, time_p = (os.path.join(d, n) for n in ("out", "err", "time"))
        wrap = ([GNU_TIME, "-f", "%e %U %S %M", "-o", time_p] if GNU_TIME else [])
        with open(out_p, "w") as out, open(err_p, "w") as err:
            t0 = time.perf_counter()
            proc = subprocess.Popen(wrap + list(argv), stdout=out, stderr=err, cwd=cwd, env=env)
            _, status, usage = os.wait4(proc.pid, 0)
            wall = time.perf_counter() - t0
        proc.returncode = os.waitstatus_to_exitcode(status)
        cpu, peak = usage.ru_utime + usage.ru_stime, usage.ru_maxrss * 1024.0
        if GNU_TIME:
            with open(time_p) as f:
                fields = f.read().split()[-4:]  # "Command exited with non-zero status N" may come first
            _, user, system, max_kib = (float(v) for v in fields)  # wall: ours, finer than time's
            cpu, peak = user + system, max_kib * 1024.0
        with open(out_p) as f1, open(err_p) as f2:
            return ChildRun(proc.returncode, f1.read(), f2.read(), wall, cpu, peak)


def strikeline_command() -> list:
    """The console script ``strikeline`` of this interpreter's environment, as a user runs it."""
    script = Path(sys.executable).parent / "strikeline"
    if script.exists():
        return [str(script)]
    return [sys.executable, "-m", "strikeline.cli.main"]


def mib(n_bytes: float) -> str:
    return f"{n_bytes / 2**20:,.0f} MiB"


def result_line(workload: str, m, *, ratio: float | None = None, reference: str = "",
                extra: str = "", peak_note: str = "") -> str:
    """Print and return one ``result:`` line for a :class:`Measure` or :class:`ChildRun`
    (``peak_note``: what the peak counts, when not the resident set, e.g. ``tracemalloc``)."""
    parts = [f"{RESULT} {workload}", f"time {m.wall_s:.2f} s", f"peak {mib(m.peak_bytes)}"
             + (" (whole process)" if getattr(m, "peak_whole_process", False) else "")
             + (f" ({peak_note})" if peak_note else ""),
             f"cpu/wall {m.cpu_per_wall:.2f}"]
    if ratio is not None:
        parts.append(f"ratio {ratio:.2f} x {reference}".rstrip())
    if extra:
        parts.append(extra)
    line = " | ".join(parts)
    print(line, flush=True)
    return line


def status_line(workload: str, status: str) -> str:
    """Print a ``result:`` line for a workload that did not run (``refused: ...``, ``not available: ...``)."""
    line = f"{RESULT} {workload} | {status}"
    print(line, flush=True)
    return line


def git_commit() -> str:
    try:
        head = subprocess.run(["git", "-C", str(REPO), "rev-parse", "--short", "HEAD"],
                              capture_output=True, text=True, check=True).stdout.strip()
        dirty = subprocess.run(["git", "-C", str(REPO), "status", "--porcelain", "--untracked-files=no"],
                               capture_output=True, text=True, check=True).stdout.strip()
        return head + (" (working tree has uncommitted changes)" if dirty else "")
    except (OSError, subprocess.CalledProcessError):
        return "unknown"


def machine() -> dict:
    """The machine and software the figures come from, and its load right now."""
    cpu = "unknown"
    with contextlib.suppress(OSError):
        for line in open("/proc/cpuinfo"):
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    ram = os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    info = {"cpus": os.cpu_count(), "ram_gib": round(ram / 2**30, 1), "cpu_model": cpu,
            "python": platform.python_version(), "load": os.getloadavg(), "commit": git_commit()}
    with contextlib.suppress(ImportError):
        import numpy
        info["numpy"] = numpy.__version__
    with contextlib.suppress(ImportError):
        from osgeo import gdal
        info["gdal"] = gdal.__version__
    with contextlib.suppress(ImportError):
        import scipy
        info["scipy"] = scipy.__version__
    with contextlib.suppress(ImportError):
        import shapely
        info["shapely"] = f"{shapely.__version__} (GEOS {shapely.geos_version_string})"
    return info


def machine_line() -> str:
    """Print and return one line naming the machine, versions, load and commit."""
    m = machine()
    load = ", ".join(f"{v:.2f}" for v in m["load"])
    line = (f"machine: {m['cpus']} CPU(s) {m['cpu_model']}, {m['ram_gib']} GiB RAM; Python {m['python']}, "
            f"numpy {m.get('numpy', '-')}, GDAL {m.get('gdal', '-')}; load average {load} (1/5/15 min); "
            f"commit {m['commit']}")
    print(line, flush=True)
    return line


def load_line(when: str) -> str:
    load = ", ".join(f"{v:.2f}" for v in os.getloadavg())
    line = f"load average {when}: {load} (1/5/15 min)"
    print(line, flush=True)
    return line
