"""Structure contours of the block path finished while GDAL still draws them.

GDAL's contour generator hands the lines it has finished every few hundred rows
(:func:`strikeline.io.gridfiles.contour_lines_from_file` with ``sink=``). Each chunk is finished
- decoded, trimmed to the valid cell centres (:func:`strikeline.maps.contours.trim_contour_fringe`)
and split where it leaves the data's reach (:func:`strikeline.pipeline.steps.structure_contours`) -
by whichever of the two threads is free: the second thread once it has drawn the trace and read
which cells hold values (nothing to read when the grid's writer saw no nodata: :class:`EveryCell`),
the drawing thread once GDAL is done. Every step is line by line, so the
chunks' results put together in GDAL's order are the lines of the whole sheet finished at once,
byte for byte; memory holds the chunks waiting to be finished, not every line GDAL drew as
GDAL's objects, their WKB and their shapely copies at once.
"""
from __future__ import annotations

import collections
import threading

import numpy as np

from strikeline.errors import CancelledError
from strikeline.geometry.grid import Grid

__all__ = ["EveryCell", "LineChunks", "contours_and_trace_at_once"]


class EveryCell:
    """The valid cells of a grid in which every cell holds a value (its writer saw no nodata,
    :attr:`strikeline.io.gridfiles.StripWriter.all_valid`): ``cells[rows, cols]`` is all true, as
    :class:`strikeline.io.contours.ValidCells` of that file would answer, without reading it."""

    def __init__(self, shape):
        self.shape = tuple(shape)

    def __getitem__(self, key) -> np.ndarray:
        r, _ = np.broadcast_arrays(*(np.asarray(k, dtype=np.int64) for k in key))
        return np.ones(r.shape, dtype=bool)


class LineChunks:
    """Chunks of GDAL's lines in drawing order, finished by any thread, the results kept in order.

    ``put(wkb, levels)`` (the drawing thread) queues a chunk; ``work(wait=)`` finishes queued
    chunks with ``finish(wkb, levels)`` until none is left (``wait=True``: until :meth:`close`
    was called and none is left); ``stop()`` makes every ``work`` raise
    :class:`CancelledError` at its next chunk; ``results()`` gives the finished chunks in order.
    """

    def __init__(self, finish):
        self.finish = finish
        self._todo: collections.deque = collections.deque()
        self._done: dict = {}
        self._count = 0
        self._closed = self._stopped = False
        self._cond = threading.Condition()

    def put(self, wkb: list, levels: list) -> None:
        with self._cond:
            self._todo.append((self._count, wkb, levels))
            self._count += 1
            self._cond.notify_all()

    def close(self) -> None:
        with self._cond:
            self._closed = True
            self._cond.notify_all()

    def stop(self) -> None:
        with self._cond:
            self._stopped = True
            self._cond.notify_all()

    def work(self, *, wait: bool) -> None:
        while True:
            with self._cond:
                while wait and not self._todo and not self._closed and not self._stopped:
                    self._cond.wait()
                if self._stopped:
                    raise CancelledError("structure contours: cancelled; nothing was written")
                if not self._todo:
                    return
                i, wkb, levels = self._todo.popleft()
            self._done[i] = self.finish(wkb, levels)

    def results(self) -> list:
        return [self._done[i] for i in range(self._count)]


def _finish(wkb: list, levels: list, valid, grid: Grid, interval_m: float, extrapolated_fn):
    """One chunk's ``(lines, elevation_m, extrapolated)``: the steps
    :func:`strikeline.io.gridfiles.contour_lines_from_file` and
    :func:`strikeline.pipeline.steps.structure_contours` take for every line."""
    from strikeline.io.gridfiles import trimmed_lines
    from strikeline.pipeline.steps import structure_contours

    lines = trimmed_lines(wkb, levels, valid, grid)
    return structure_contours(None, grid, interval_m=interval_m, extrapolated_fn=extrapolated_fn, lines=lines)


def _joined(parts: list, grid: Grid, interval_m: float, extrapolated_fn):
    """The chunks' results as one ``(lines, elevation_m, extrapolated)`` (no chunk: the step's
    own result for no lines)."""
    from strikeline.pipeline.steps import structure_contours

    if not parts:
        empty = (np.empty(0, dtype=object), np.empty(0, dtype=np.float64))
        return structure_contours(None, grid, interval_m=interval_m, extrapolated_fn=extrapolated_fn, lines=empty)
    lines = np.concatenate([p[0] for p in parts])
    return (np.asarray(lines, dtype=object), np.concatenate([p[1] for p in parts]),
            np.concatenate([p[2] for p in parts]))


def contours_and_trace_at_once(tiles, grid: Grid, ground_grid: Grid, *, interval_m: float, extrapolated_fn=None,
                               is_cancelled=None):
    """The two-thread body of :func:`strikeline.pipeline.tiled.contours_and_trace_of_blocks`:
    ``((lines, elevation_m, extrapolated), raw_trace)``.

    This thread draws the structure contours with GDAL, handing the lines over in chunks; the
    second draws the trace, reads which cells of the surface hold values
    (:class:`strikeline.io.contours.ValidCells`) and then finishes chunks; once GDAL is done this
    thread finishes chunks too. A failure or cancel on either side stops the other (GDAL at its
    next progress report, the chunks at the next chunk) before the error goes on.
    """
    from concurrent.futures import ThreadPoolExecutor, wait

    from strikeline.io.contours import ValidCells
    from strikeline.io.gridfiles import FileMask, contour_lines_from_file, contour_reading
    from strikeline.pipeline.tiled import trace_of_blocks

    stop, ready = threading.Event(), threading.Event()  # ready: the cells are read
    valid: dict = {}
    chunks = LineChunks(lambda wkb, levels: _finish(wkb, levels, valid["cells"], grid, interval_m,
                                                    extrapolated_fn))

    def cancelled() -> bool:
        return stop.is_set() or (is_cancelled is not None and bool(is_cancelled()))

    def second() -> np.ndarray:
        try:
            trace = trace_of_blocks(tiles, ground_grid, is_cancelled=cancelled)
            if tiles.all_valid.get("surface", False):
                valid["cells"] = EveryCell(grid.shape)  # the writer saw no nodata: nothing to read
            else:
                valid["cells"] = ValidCells(tiles.scratch["surface"], grid, is_cancelled=cancelled,
                                            fallback=FileMask(tiles.scratch["surface"], grid))
            ready.set()
            chunks.work(wait=True)
            return trace
        except BaseException:
            stop.set()  # GDAL stops at its next progress report
            raise

    with contour_reading(grid, ground_grid), ThreadPoolExecutor(max_workers=1) as pool:
        helper = pool.submit(second)
        try:
            contour_lines_from_file(tiles.scratch["surface"], grid, interval_m=interval_m,
                                    any_valid=tiles.any_valid["surface"], is_cancelled=cancelled, sink=chunks.put)
            chunks.close()
            while not ready.wait(0.05) and not helper.done():
                pass  # the trace is drawn and the cells read first (or the second thread failed)
            if ready.is_set():
                chunks.work(wait=False)  # finish chunks with the second thread
            trace = helper.result()
            return _joined(chunks.results(), grid, interval_m, extrapolated_fn), trace
        except BaseException as exc:
            stop.set()
            chunks.stop()
            wait([helper])
            # the second thread's own error (or a signal raised there) is the cause: GDAL only saw
            # the stop; a signal that stopped both draws ends the run as interrupted either way
            late = helper.exception()
            if late is not None and isinstance(exc, CancelledError) and not isinstance(late, CancelledError):
                raise late from None
            if isinstance(late, KeyboardInterrupt) and not isinstance(exc, KeyboardInterrupt):
                raise late from None
            raise
