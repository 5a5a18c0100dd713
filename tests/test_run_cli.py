"""The tests' in-process runner (``helpers.run_cli``) shows what a user of the console script sees
and fails when a command leaves process state behind: its own checks must be able to fail.

A stand-in for the ``thickness`` subcommand's handler does each thing; the parser is built anew
for every run, so it picks the stand-in up.
"""
import logging
import os
import signal
import sys
import warnings

import numpy as np
import pytest
from osgeo import gdal

import strikeline.cli.thickness as thickness_command
from helpers import run_cli


def _run_with_handler(monkeypatch, handler):
    monkeypatch.setattr(thickness_command, "main", handler)
    return run_cli("thickness", "outcrop", "--width-m", 1, "--dip-deg", 1)


def test_streams_exit_status_and_c_level_output_are_captured(monkeypatch):
    def handler(args):
        print("to stdout")
        print("to stderr", file=sys.stderr)
        os.write(2, b"from C code\n")  # as GDAL's error handler writes: to the file descriptor
        warnings.warn("a user warning")  # a fresh interpreter prints it on stderr
        return 4

    proc = _run_with_handler(monkeypatch, handler)
    assert proc.returncode == 4
    assert proc.stdout == "to stdout\n"
    assert proc.stderr.startswith("to stderr\nfrom C code\n") and "UserWarning: a user warning" in proc.stderr


def test_sys_exit_with_a_message_is_status_1_and_the_message(monkeypatch):
    # Source: Python docs, sys.exit - "any other object is printed to stderr and results in an exit code of 1"
    def handler(args):
        sys.exit("stopped")

    proc = _run_with_handler(monkeypatch, handler)
    assert proc.returncode == 1 and proc.stderr == "stopped\n"


def test_strikeline_debug_is_unset_for_the_run_and_restored(monkeypatch):
    monkeypatch.setenv("STRIKELINE_DEBUG", "1")
    seen = []
    proc = _run_with_handler(monkeypatch, lambda args: seen.append(os.environ.get("STRIKELINE_DEBUG")) or 0)
    assert proc.returncode == 0 and seen == [None]
    assert os.environ["STRIKELINE_DEBUG"] == "1"


_HANDLER = logging.NullHandler()


class _GdalModeLeak:
    """Flip GDAL/OGR/OSR's exception modes, and back. GDAL keeps a stack of error handlers: pop
    in the reverse order of pushing (osr, ogr, gdal), as strikeline.io does."""

    def __init__(self):
        self.popped = self.pushed = ()

    def leak(self):
        from osgeo import ogr, osr

        was = dict(zip((gdal, ogr, osr), (gdal.GetUseExceptions(), ogr.GetUseExceptions(), osr.GetUseExceptions())))
        if all(was.values()):
            self.popped = (osr, ogr, gdal)
            for m in self.popped:
                m.DontUseExceptions()
        else:
            self.pushed = tuple(m for m, on in was.items() if not on)
            for m in self.pushed:
                m.UseExceptions()

    def undo(self):
        for m in reversed(self.popped):
            m.UseExceptions()
        for m in reversed(self.pushed):
            m.DontUseExceptions()


_GDAL_LEAK = _GdalModeLeak()


@pytest.mark.parametrize("leak, undo, name", [
    (lambda: os.environ.__setitem__("STRIKELINE_LEAK", "1"), lambda: os.environ.pop("STRIKELINE_LEAK", None),
     "environment"),
    (lambda: os.chdir("/"), None, "cwd"),
    # SIGHUP: the command restores its own SIGINT/SIGTERM handlers itself (strikeline.io.interrupt)
    (lambda: signal.signal(signal.SIGHUP, lambda *a: None), None, "signal handlers"),
    (_GDAL_LEAK.leak, _GDAL_LEAK.undo, "GDAL/OGR/OSR exception modes"),
    (lambda: logging.getLogger().addHandler(_HANDLER), lambda: logging.getLogger().removeHandler(_HANDLER),
     "logging handlers"),
    (lambda: np.seterr(all="raise"), None, "numpy error state"),
], ids=["environment", "cwd", "signal", "gdal exceptions", "logging", "numpy"])
def test_a_leak_fails_the_run_and_names_it(monkeypatch, tmp_path, leak, undo, name):
    cwd, hup, err = os.getcwd(), signal.getsignal(signal.SIGHUP), np.geterr()

    def handler(args):
        leak()
        return 0

    try:
        with pytest.raises(AssertionError, match=f"changed the process's state: .*'{name}'"):
            _run_with_handler(monkeypatch, handler)
    finally:
        if undo is not None:
            undo()
        os.chdir(cwd)
        signal.signal(signal.SIGHUP, hup)
        np.seterr(**err)


def test_warning_filters_set_by_a_run_do_not_outlive_it(monkeypatch):
    # the runner records warnings as a fresh interpreter shows them, inside warnings.catch_warnings
    filters = list(warnings.filters)
    _run_with_handler(monkeypatch, lambda args: warnings.filterwarnings("ignore", message="strikeline") or 0)
    assert warnings.filters == filters


def test_a_file_left_open_fails_the_run(monkeypatch, tmp_path):
    kept = []

    def handler(args):
        kept.append(open(tmp_path / "left-open.txt", "w"))  # noqa: SIM115 - the leak under test
        return 0

    try:
        with pytest.raises(AssertionError, match="'open files'"):
            _run_with_handler(monkeypatch, handler)
    finally:
        for f in kept:
            f.close()
