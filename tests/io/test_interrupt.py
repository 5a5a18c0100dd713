"""Stopping on request (strikeline.io.interrupt): GDAL's long steps stop at their next progress
report when cancelled or signalled, signals become exceptions only inside the block that asks for
it, and held signals are raised after the block.

Reference: GDAL's progress contract - a GDALProgressFunc that returns FALSE makes the algorithm
stop and fail ("User terminated"), GDAL API documentation (gdal_priv.h / cpl_progress.h).
"""
from __future__ import annotations

import signal
import threading

import numpy as np
import pytest
from osgeo import osr

from strikeline.errors import CancelledError
from strikeline.geometry.grid import Grid
from strikeline.io.contours import contour_lines
from strikeline.io.interrupt import Interrupted, deferred_signals, signals_as_exceptions
from strikeline.io.raster import write_geotiff

#: Stop once GDAL reports this fraction done; GDAL must then stop well before the end.
STOP_AT = 0.1


def _to_main_thread(signum) -> None:
    """Send ``signum`` to the main thread itself. A signal sent to the process goes to any thread
    that does not block it (POSIX, pthread_sigmask(3)): with the main thread blocking it inside a
    deferred block, a leftover worker thread (a thread pool's, OpenBLAS's) would take it and
    Python would run the handler whenever that thread is scheduled, possibly after the test's
    block - a race of the test, not of the code under test."""
    signal.pthread_kill(threading.main_thread().ident, signum)


def _big_surface(n=1500):
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(32633)
    y, x = np.mgrid[0:n, 0:n].astype(float)
    z = 50 * np.sin(x / 40.0) * np.cos(y / 55.0) + 0.05 * x
    return z, Grid((500_000.0, 1.0, 0.0, 4_100_000.0, 0.0, -1.0), (n, n), srs.ExportToWkt())


def test_contours_report_progress_to_the_end():
    z, grid = _big_surface(400)
    seen = []
    geoms, _ = contour_lines(z, grid, interval_m=10.0, progress=seen.append)
    assert len(geoms) > 0 and len(seen) > 10 and seen[-1] == pytest.approx(1.0)


def test_cancelling_stops_gdals_contour_generator_early():
    z, grid = _big_surface()
    seen = []
    with pytest.raises(CancelledError, match="contour lines: cancelled"):
        contour_lines(z, grid, interval_m=1.0, progress=seen.append,
                      is_cancelled=lambda: bool(seen) and seen[-1] >= STOP_AT)
    assert STOP_AT <= seen[-1] < 0.5  # GDAL stopped at its next report, not at the end


def test_a_signal_stops_gdals_contour_generator_and_raises_after_it():
    z, grid = _big_surface()
    seen, sent = [], []

    def progress(fraction):
        seen.append(fraction)
        if fraction >= STOP_AT and not sent:
            sent.append(fraction)
            _to_main_thread(signal.SIGINT)  # Ctrl-C while GDAL works

    before = signal.getsignal(signal.SIGINT)
    with signals_as_exceptions(), pytest.raises(Interrupted) as e:
        contour_lines(z, grid, interval_m=1.0, progress=progress)
    assert e.value.signum == signal.SIGINT and e.value.exit_status == 130
    assert seen[-1] < 0.5
    assert signal.getsignal(signal.SIGINT) is before


def test_sigterm_is_an_exception_only_inside_the_block():
    before = signal.getsignal(signal.SIGTERM)
    with pytest.raises(Interrupted) as e, signals_as_exceptions():
        _to_main_thread(signal.SIGTERM)
        for _ in range(1000):  # the handler runs between bytecodes
            pass
    assert e.value.exit_status == 143  # Source: common practice, 128 + SIGTERM (15)
    assert signal.getsignal(signal.SIGTERM) is before


def test_a_signal_inside_a_deferred_block_is_raised_after_it():
    done = []
    with signals_as_exceptions(), pytest.raises(Interrupted), deferred_signals():
        _to_main_thread(signal.SIGTERM)  # blocked by the block: the kernel holds it until the block ends
        for _ in range(1000):
            pass
        done.append("the block ran to its end")
    assert done == ["the block ran to its end"]


def test_cancelling_a_geotiff_write_leaves_nothing(tmp_path):
    z, grid = _big_surface(1200)
    path = tmp_path / "surface.tif"
    polls = []
    with pytest.raises(CancelledError):
        write_geotiff(path, z, grid, description="x", unit="m", is_cancelled=lambda: polls.append(1) or True)
    assert polls and list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("step", ["structure_contours", "structure_contours_on_ground", "depth_trace",
                                  "isopachs"])
def test_the_chains_contour_steps_pass_a_cancel_on_to_gdal(step):
    """A cancel (QGIS's Cancel button) reaches GDAL's contour generator in every step that draws
    contours, not only between steps: the first poll comes from inside GDAL's progress report
    (GDAL's progress contract, as above), so the generator stops at once."""
    from strikeline.pipeline.rasters import structure_contours_on_ground
    from strikeline.pipeline.steps import depth_trace_misfit, structure_contours
    from strikeline.pipeline.thickness import isopachs

    z, grid = _big_surface(300)
    polls = []

    def cancelled():
        polls.append(1)
        return True

    call = {"structure_contours": lambda: structure_contours(z, grid, interval_m=1.0, is_cancelled=cancelled),
            "structure_contours_on_ground": lambda: structure_contours_on_ground(
                z, grid, interval_m=1.0, dem=z + 5.0, is_cancelled=cancelled),
            "depth_trace": lambda: depth_trace_misfit(z + 0.5 * np.sin(z), grid, z, is_cancelled=cancelled),
            "isopachs": lambda: isopachs(z + 100.0, z, grid, interval_m=1.0,
                                         is_cancelled=lambda: bool(polls) or polls.append(0))}[step]
    with pytest.raises(CancelledError):
        call()
    assert polls, "the cancel was never asked"
