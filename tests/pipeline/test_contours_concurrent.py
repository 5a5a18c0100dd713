"""Structure contours and the predicted trace drawn at once on two threads (the block path).

The reference for the lines is the serial pair of calls and GDAL's own contour generator run
directly on the scratch grid (GDAL 3.6 ``GDALContourGenerateEx``); the reference for the
process-wide state is what GDAL's bindings report (``GetUseExceptions``, ``GetCacheMax``)
before, during and after the concurrent calls.
"""
from __future__ import annotations

import sys
import threading
from pathlib import Path

import numpy as np
import pytest

gdal = pytest.importorskip("osgeo.gdal")
from osgeo import ogr, osr  # noqa: E402

from strikeline.errors import CancelledError  # noqa: E402
from strikeline.pipeline import load_inputs  # noqa: E402
from strikeline.pipeline.options import RunOptions  # noqa: E402
from strikeline.pipeline.tiled import (contours_and_trace_of_blocks, contours_of_blocks,  # noqa: E402
                                       grids_by_blocks, trace_of_blocks)

REPO = Path(__file__).resolve().parents[2]
VOLCANO = REPO / "test_data" / "real" / "volcano"
sys.path.insert(0, str(REPO / "tests"))
from helpers import gdal_exceptions  # noqa: E402

INTERVAL_M = 10.0


@pytest.fixture(scope="module")
def sheet(tmp_path_factory):
    """The folded contact of the volcano sheet (a real DEM) fitted with a spline, its grids
    written in blocks of 7 x 5 cells with the DEM as ground: the scratch surface and depth."""
    from strikeline.pipeline.steps import collect_picks
    from strikeline.surfaces import fit_surface

    opts = RunOptions(out="unused", contacts=str(next((VOLCANO / "fold").glob("*.gpkg"))),
                      dem=str(VOLCANO / "dem.tif"))
    inputs = load_inputs(opts)
    model = fit_surface(collect_picks(inputs).xyz, model="spline")
    grid = inputs.dem_grid
    tiles = grids_by_blocks(model, grid, tmp_path_factory.mktemp("blocks"), ground=np.asarray(inputs.dem),
                            ground_grid=grid, block_shape=(7, 5))
    return model, grid, tiles


def _wkb(geoms) -> list:
    return [g.wkb for g in geoms]


def _gdal_lines(path: Path, options: list) -> list:
    """GDAL's contour generator on a file, every line's vertices (Source: GDAL 3.6
    GDALContourGenerateEx, the generator strikeline hands the scratch grids to)."""
    with gdal_exceptions():
        ds = gdal.Open(str(path))
        band = ds.GetRasterBand(1)
        out = ogr.GetDriverByName("Memory").CreateDataSource("ref")
        lyr = out.CreateLayer("c", geom_type=ogr.wkbLineString)
        lyr.CreateField(ogr.FieldDefn("id", ogr.OFTInteger))
        lyr.CreateField(ogr.FieldDefn("elev", ogr.OFTReal))
        gdal.ContourGenerateEx(band, lyr, options=options + [f"NODATA={band.GetNoDataValue():.17g}",
                                                             "ID_FIELD=0", "ELEV_FIELD=1"])
        lines = [np.array(f.GetGeometryRef().GetPoints())[:, :2] for f in lyr]
        ds = out = None
    return lines


def test_concurrent_lines_are_the_serial_lines(sheet):
    model, grid, tiles = sheet
    (lines, elev, flags), trace = contours_and_trace_of_blocks(
        tiles, grid, grid, interval_m=INTERVAL_M, extrapolated_fn=model.is_extrapolated)
    s_lines, s_elev, s_flags = contours_of_blocks(tiles, grid, interval_m=INTERVAL_M,
                                                  extrapolated_fn=model.is_extrapolated)
    s_trace = trace_of_blocks(tiles, grid)
    assert len(lines) > 10 and len(trace) >= 1  # a sheet with something to draw
    assert _wkb(lines) == _wkb(s_lines)
    assert np.array_equal(elev, s_elev) and np.array_equal(flags, s_flags)
    assert _wkb(trace) == _wkb(s_trace)


def test_the_trace_drawn_meanwhile_is_gdals_zero_line(sheet):
    """Every vertex of the trace is one of GDAL's own zero line of the depth, and every GDAL vertex
    between the outermost cell centres is kept (the trim drops only the half-cell fringe)."""
    model, grid, tiles = sheet
    _, trace = contours_and_trace_of_blocks(tiles, grid, grid, interval_m=INTERVAL_M)
    ref = np.concatenate(_gdal_lines(tiles.scratch["depth"], ["FIXED_LEVELS=0"]))
    ours = np.concatenate([np.asarray(g.coords) for g in trace])
    ref_set, our_set = set(map(tuple, ref)), set(map(tuple, ours))
    assert our_set <= ref_set
    col, row = grid.xy_to_colrow(ref[:, 0], ref[:, 1])
    inner = (col > 1e-9) & (col < grid.cols - 1 - 1e-9) & (row > 1e-9) & (row < grid.rows - 1 - 1e-9)
    assert inner.sum() > 100
    assert set(map(tuple, ref[inner])) <= our_set


def test_gdal_state_is_held_across_both_threads_and_restored(sheet):
    """GDAL's exception mode stays on while either thread draws (polled from both threads at
    GDAL's progress reports) and the caller's mode and block cache come back after."""
    model, grid, tiles = sheet
    seen = []  # (thread, exceptions on) at each poll

    def polled() -> bool:
        seen.append((threading.current_thread().name, gdal.GetUseExceptions(), ogr.GetUseExceptions()))
        return False

    # the caller's mode here: exceptions off, as GDAL 3.6's bindings start. An earlier test of the
    # suite may have left them on (GDAL then keeps a stack of error handlers, switched off in the
    # reverse order of switching on: osr, ogr, gdal); the suite's mode is given back after
    modules = (gdal, ogr, osr)
    was = tuple(m.GetUseExceptions() for m in modules)
    for m, on in reversed(list(zip(modules, was))):
        if on:
            m.DontUseExceptions()
    try:
        cache = gdal.GetCacheMax()
        contours_and_trace_of_blocks(tiles, grid, grid, interval_m=INTERVAL_M,
                                     extrapolated_fn=model.is_extrapolated, is_cancelled=polled)
        # Source: GDAL 3.6's bindings - the mode and the cache size are process-wide
        assert tuple(m.GetUseExceptions() for m in modules) == (0, 0, 0)
        assert gdal.GetCacheMax() == cache
    finally:
        for m, on in zip(modules, was):
            if on and not m.GetUseExceptions():
                m.UseExceptions()
    assert len({name for name, _, _ in seen}) == 2  # both threads polled
    assert all(g and o for _, g, o in seen)


def test_a_cancel_stops_both_threads(sheet):
    model, grid, tiles = sheet
    before = threading.active_count()
    calls = {"n": 0}

    def cancel_soon() -> bool:
        calls["n"] += 1
        return calls["n"] > 3

    with pytest.raises(CancelledError):
        contours_and_trace_of_blocks(tiles, grid, grid, interval_m=INTERVAL_M, is_cancelled=cancel_soon)
    assert threading.active_count() == before  # the trace's thread has ended


def test_a_failure_of_the_contours_stops_the_trace(sheet):
    """An error while the contours are split (here the reach test fails) reaches the caller
    after the trace's thread was told to stop and has ended."""
    model, grid, tiles = sheet
    before = threading.active_count()

    def fails(x, y):
        raise ValueError("reach test failed")

    with pytest.raises(ValueError, match="reach test failed"):
        contours_and_trace_of_blocks(tiles, grid, grid, interval_m=INTERVAL_M, extrapolated_fn=fails)
    assert threading.active_count() == before


def test_one_core_draws_the_same_lines_one_after_the_other(sheet, monkeypatch):
    import strikeline.pipeline.tiled as tiled

    model, grid, tiles = sheet
    both = contours_and_trace_of_blocks(tiles, grid, grid, interval_m=INTERVAL_M,
                                        extrapolated_fn=model.is_extrapolated)
    monkeypatch.setattr(tiled, "THREADS", 1)
    before = threading.active_count()
    one = contours_and_trace_of_blocks(tiles, grid, grid, interval_m=INTERVAL_M,
                                       extrapolated_fn=model.is_extrapolated)
    assert threading.active_count() == before
    assert _wkb(one[0][0]) == _wkb(both[0][0]) and _wkb(one[1]) == _wkb(both[1])
    assert np.array_equal(one[0][1], both[0][1]) and np.array_equal(one[0][2], both[0][2])


def test_a_signal_stops_both_threads_and_ends_the_call_as_interrupted(sheet):
    """SIGINT arriving while the main thread's GDAL call holds signals: both draws stop at GDAL's
    next progress report, the call raises Interrupted (exit status 130, Source: POSIX 128 +
    signal number) after the trace's thread has ended, and no signal is left recorded."""
    import os
    import signal

    from strikeline.io import interrupt

    model, grid, tiles = sheet
    sent = []

    def poll() -> bool:
        if threading.current_thread() is threading.main_thread() and not sent:
            sent.append(1)
            os.kill(os.getpid(), signal.SIGINT)
        return False

    before = threading.active_count()
    with interrupt.signals_as_exceptions():
        with pytest.raises(interrupt.Interrupted) as caught:
            contours_and_trace_of_blocks(tiles, grid, grid, interval_m=INTERVAL_M,
                                         extrapolated_fn=model.is_extrapolated, is_cancelled=poll)
        assert interrupt._state["pending"] is None
    assert sent and caught.value.exit_status == 130
    assert threading.active_count() == before


# ------------------------------------------------- lines handed over while GDAL draws them
def _chunks_of(path, grid, monkeypatch, rows: int, vertices: int = 1 << 18) -> list:
    """The chunks :func:`contour_lines_from_file` hands to a sink every ``rows`` rows, of about
    ``vertices`` vertices each."""
    import strikeline.io.contours as io_contours
    from strikeline.io.gridfiles import contour_lines_from_file

    monkeypatch.setattr(io_contours, "HAND_OVER_ROWS", rows)
    monkeypatch.setattr(io_contours, "HAND_OVER_VERTICES", vertices)
    chunks = []
    assert contour_lines_from_file(path, grid, interval_m=INTERVAL_M, sink=lambda w, e: chunks.append((w, e))) is None
    return chunks


@pytest.mark.parametrize("rows, vertices", [(3, 1 << 18), (10**6, 40)])
def test_lines_handed_over_as_gdal_draws_them_are_gdals_lines(sheet, monkeypatch, rows, vertices):
    """The chunks, in order, hold every line of GDAL's generator run once on the same file, in its
    order, with its vertices and levels (Source: GDAL 3.6 GDALContourGenerateEx, read after it
    ends); handed over every 3 rows, or all at the end in chunks of about 40 vertices."""
    import shapely

    model, grid, tiles = sheet
    chunks = _chunks_of(tiles.scratch["surface"], grid, monkeypatch, rows=rows, vertices=vertices)
    assert len(chunks) > 5  # handed over many times while GDAL drew
    ours = [np.asarray(shapely.get_coordinates(g)) for w, _ in chunks for g in shapely.from_wkb(w)]
    ref = _gdal_lines(tiles.scratch["surface"], [f"LEVEL_INTERVAL={INTERVAL_M:.17g}", "LEVEL_BASE=0"])
    assert len(ours) == len(ref) > 10
    assert all(np.array_equal(a, b) for a, b in zip(ours, ref))
    levels = np.concatenate([e for _, e in chunks])
    assert np.array_equal(np.mod(levels, INTERVAL_M), np.zeros(len(levels)))  # levels on the interval


def test_chunks_finished_on_both_threads_are_the_lines_finished_at_once(sheet, monkeypatch):
    """Chunks of two rows, finished by whichever thread is free: the lines, levels and flags of
    the serial calls, which finish all of GDAL's lines at once (compared feature by feature)."""
    import strikeline.io.contours as io_contours
    import strikeline.pipeline.contour_chunks as chunks_mod

    model, grid, tiles = sheet
    serial = contours_of_blocks(tiles, grid, interval_m=INTERVAL_M, extrapolated_fn=model.is_extrapolated)
    s_trace = trace_of_blocks(tiles, grid)
    finished = []
    real = chunks_mod._finish

    def counted(*a):
        finished.append(threading.current_thread().name)
        return real(*a)

    monkeypatch.setattr(io_contours, "HAND_OVER_ROWS", 2)
    monkeypatch.setattr(chunks_mod, "_finish", counted)
    (lines, elev, flags), trace = contours_and_trace_of_blocks(tiles, grid, grid, interval_m=INTERVAL_M,
                                                               extrapolated_fn=model.is_extrapolated)
    assert len(finished) > 5
    assert len(lines) > 10 and _wkb(lines) == _wkb(serial[0])
    assert np.array_equal(elev, serial[1]) and np.array_equal(flags, serial[2]) and flags.dtype == serial[2].dtype
    assert _wkb(trace) == _wkb(s_trace)


def test_a_failing_sink_stops_gdal_and_its_error_goes_on(sheet, monkeypatch):
    import strikeline.io.contours as io_contours
    from strikeline.io.gridfiles import contour_lines_from_file

    model, grid, tiles = sheet
    monkeypatch.setattr(io_contours, "HAND_OVER_ROWS", 2)
    calls = []

    def sink(wkb, levels):
        calls.append(len(wkb))
        raise ValueError("sink failed")

    with pytest.raises(ValueError, match="sink failed"):
        contour_lines_from_file(tiles.scratch["surface"], grid, interval_m=INTERVAL_M, sink=sink)
    assert len(calls) == 1  # GDAL stopped at the next report: no second hand-over
