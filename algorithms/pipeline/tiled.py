"""The grid steps of a run block by block, straight into GeoTIFFs: grids larger than memory.

The output grid is cut into blocks (a band of rows at a time, blocks across it); every block is
computed with a halo of one cell where a value needs its neighbours (dip and dip direction, the
base's dip in the true thickness), on two threads (numpy, scipy's k-d tree queries and GDAL
release Python's lock), and the band is written to each GeoTIFF in strips
(:class:`strikeline.io.gridfiles.StripWriter`) while the next band is computed. With the default
blocks (one tile row high, whole tiles wide) each block goes to the files as soon as it is done,
and memory holds a few blocks whatever the grid's size; other block shapes hold two bands. Structure contours and the predicted trace are then drawn by
GDAL's contour generator from float64 scratch copies of the surface and the depth, which it
reads a block of lines at a time.

Every value is the one the in-memory chain (:func:`strikeline.pipeline.compute`) computes for
the same cell: the surface and its standard error come from
:meth:`~strikeline.surfaces.SurfaceModel.evaluate_grid` and
:meth:`~strikeline.surfaces.SurfaceModel.standard_error_grid` with the block's ``window`` of the
whole grid (which gives the values of the whole grid's call), the other grids are cell-wise, and
the strips give the GeoTIFF bytes of a whole-array write. ``tests/pipeline/test_tiled.py`` checks the files byte for
byte against the in-memory run with blocks of 7 x 5 cells.
"""
from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from strikeline import vocabulary as V
from strikeline.errors import CancelledError
from strikeline.geometry.grid import Grid
from strikeline.maps.dipgrids import dip_grids
from strikeline.maps.thickness import isopach_grids
from strikeline.pipeline.band_share import SharedBands

#: Block of the automatic block path: 256 rows (one tile row of the GeoTIFFs) by 2048 columns;
#: a band of 256 rows of a 30,000-column grid holds 7.7 million cells (our choice).
DEFAULT_BLOCK = (256, 2048)
#: Threads over the blocks of a band: the machine's cores, at most 2 (the project's test machine).
THREADS = max(1, min(2, os.cpu_count() or 1))
#: The scratch folder's name inside the run's output folder (removed before the run ends).
SCRATCH_DIR = ".blocks-scratch"
#: The scratch copy of the isopach blocks from which the thickness statistics are read.
STATS_SCRATCH = "true_thickness_in_reach"


@dataclass(frozen=True)
class GridFile:
    """A grid of a run that lives in a GeoTIFF instead of memory (the block path).

    ``read()`` gives the whole band (float64, NaN for nodata), ``read(r0, r1, c0, c1)`` a window.
    """

    path: Path
    grid: Grid
    #: ``(cells, array)``: the grid's window means gathered while it was written, the values of a
    #: read decimated to at most ``cells`` cells (:func:`strikeline.io.sampling.read_decimated`)
    means: tuple | None = field(default=None, compare=False, repr=False)

    def read(self, r0: int = 0, r1: int | None = None, c0: int = 0, c1: int | None = None) -> np.ndarray:
        from strikeline.io.gridfiles import read_window

        return read_window(self.path, r0, self.grid.rows if r1 is None else r1, c0,
                           self.grid.cols if c1 is None else c1)

    @property
    def shape(self) -> tuple:
        return self.grid.shape


def place_grid_file(gf: GridFile, target) -> None:
    """Put a grid written block by block at ``target`` (an output folder's file): nothing when it
    is there already (written into the run's own folder), else a byte-for-byte copy written under a
    temporary name, its size checked, and renamed into place."""
    from strikeline.errors import OutputError

    target = Path(target)
    if target.exists() and os.path.samefile(gf.path, target):
        return
    tmp = target.with_name(target.name + ".part")
    try:
        shutil.copyfile(gf.path, tmp)
        if os.path.getsize(tmp) != os.path.getsize(gf.path):
            raise OSError("the copy's size differs from the original's")
    except OSError as exc:
        if tmp.exists():
            tmp.unlink()
        raise OutputError(f"'{target}': could not copy the grid from '{gf.path}' ({exc}); free some space or "
                          "choose another folder") from None
    os.replace(tmp, target)


@dataclass
class BlockGrids:
    """What :func:`grids_by_blocks` or :func:`isopachs_by_blocks` wrote and counted."""

    files: dict  # output file name -> GridFile, in the order they are written
    scratch: dict = field(default_factory=dict)  # 'surface' / 'depth' -> float64 scratch file
    any_valid: dict = field(default_factory=dict)  # scratch name -> whether any cell holds a value
    n_base_in: int = 0
    n_top_in: int = 0
    n_both_in: int = 0
    _owned: object | None = field(default=None, repr=False)  # a TemporaryDirectory kept alive with the files
    all_valid: dict = field(default_factory=dict)  # scratch name -> whether every cell holds a value

    def remove_scratch(self) -> None:
        """Remove the float64 scratch copies (once the contours and the trace are drawn)."""
        for p in self.scratch.values():
            if os.path.exists(p):
                os.remove(p)
            with contextlib.suppress(OSError):
                os.rmdir(os.path.dirname(p))  # the scratch folder, once empty


def block_shape_of(grid: Grid, opts, *, auto: bool = True) -> tuple[int, int] | None:
    """The block shape of a run, or None for the whole grid in memory.

    ``opts.block_cells`` N gives N x N blocks ((rows, cols) from the library); unset and with
    ``auto``, the run goes block by block (:data:`DEFAULT_BLOCK`) when the grid has more than
    :data:`strikeline.budget.BLOCK_SWITCH_CELLS` cells or its arrays would fill more than
    :data:`strikeline.budget.GRID_SHARE` of the memory budget
    (:func:`strikeline.budget.grids_go_in_blocks`). ``auto`` is off where the caller needs the
    grids as arrays (``compute`` without an output folder, e.g. the QGIS tools).
    """
    from strikeline.budget import grids_go_in_blocks

    given = getattr(opts, "block_cells", None)
    if given is not None:
        r, c = (given, given) if np.ndim(given) == 0 else given
        return max(1, int(r)), max(1, int(c))
    if auto and grids_go_in_blocks(grid.rows, grid.cols):
        return DEFAULT_BLOCK
    return None


def block_windows(shape, block_shape) -> list[list[tuple[int, int, int, int]]]:
    """The blocks of a grid of ``shape`` as bands of ``(r0, r1, c0, c1)``, top to bottom, each
    band left to right; edge blocks are smaller.

    >>> block_windows((5, 7), (2, 3))[0]
    [(0, 2, 0, 3), (0, 2, 3, 6), (0, 2, 6, 7)]
    """
    rows, cols = (int(v) for v in shape)
    br, bc = (max(1, int(v)) for v in block_shape)
    return [[(r0, min(rows, r0 + br), c0, min(cols, c0 + bc)) for c0 in range(0, cols, bc)]
            for r0 in range(0, rows, br)]


def window_grid(grid: Grid, r0: int, r1: int, c0: int, c1: int) -> Grid:
    """The grid of rows ``r0:r1`` and columns ``c0:c1`` of ``grid`` (same cells, same CRS; its cell
    centres may differ from the whole grid's by rounding, so values at cell centres are taken with
    the whole grid and a window, as :meth:`~strikeline.surfaces.SurfaceModel.evaluate_grid` does).

    >>> window_grid(Grid((100.0, 10.0, 0.0, 500.0, 0.0, -10.0), (8, 9)), 2, 5, 3, 9).transform
    (130.0, 10.0, 0.0, 480.0, 0.0, -10.0)
    """
    x0, dx, _, y0, _, dy = grid.transform
    return Grid((x0 + c0 * dx, dx, 0.0, y0 + r0 * dy, 0.0, dy), (r1 - r0, c1 - c0), grid.crs_wkt, grid.nodata)


def _with_halo(win, shape, halo: int = 1):
    r0, r1, c0, c1 = win
    rows, cols = shape
    return max(0, r0 - halo), min(rows, r1 + halo), max(0, c0 - halo), min(cols, c1 + halo)


def _block(model, grid: Grid, win, *, ground=None, errors=None) -> dict:
    """The grids of one block: the surface on the window with a one-cell halo, its dip grids
    (``dip_grids`` of the haloed surface cut to the window: the central differences at the
    window's edge cells see their neighbours as in the whole grid), the standard error and the
    depth below ``ground`` (the ground on the output grid). The model evaluates windows of the
    whole grid (``window=``), which hold the whole grid's values for those cells. ``errors``:
    a :class:`~strikeline.pipeline.band_share.SharedBands` of the standard error across the
    grid's width (the same values; computed once per band instead of once per block)."""
    r0, r1, c0, c1 = win
    halo = _with_halo(win, grid.shape)
    h0, h1, k0, k1 = halo
    inner = (slice(r0 - h0, r1 - h0), slice(c0 - k0, c1 - k0))
    s_halo = model.evaluate_grid(grid, window=halo, workers=1)
    dip, ddir = dip_grids(s_halo, window_grid(grid, *halo))  # only its cell sizes are used
    surface = s_halo[inner]
    out = {"surface": surface, "dip": dip[inner], "dip_direction": ddir[inner],
           "uncertainty": (model.standard_error_grid(grid, window=win, workers=1) if errors is None
                           else errors.get(r0, r1, c0, c1))}
    if ground is not None:
        out["depth"] = np.subtract(ground[r0:r1, c0:c1], surface)
    return out


def _isopach_block(top_model, model, grid: Grid, win) -> dict:
    """The isopachs of one block (the base's dip needs the one-cell halo) and which of its cells
    lie within reach of each surface's data (at the whole grid's cell centres)."""
    r0, r1, c0, c1 = win
    halo = _with_halo(win, grid.shape)
    h0, h1, k0, k1 = halo
    inner = (slice(r0 - h0, r1 - h0), slice(c0 - k0, c1 - k0))
    vth, tth = isopach_grids(top_model.evaluate_grid(grid, window=halo, workers=1),
                             model.evaluate_grid(grid, window=halo, workers=1), window_grid(grid, *halo))
    xs, ys = grid.cell_centres()
    X, Y = np.meshgrid(xs[c0:c1], ys[r0:r1])
    base_in, top_in = ~model.is_extrapolated(X, Y), ~top_model.is_extrapolated(X, Y)
    return {"vertical_thickness": vth[inner], "true_thickness": tth[inner], "base_in": base_in, "top_in": top_in,
            STATS_SCRATCH: np.where(base_in & top_in, tth[inner], np.nan)}


def grids_by_blocks(model, grid: Grid, folder=None, *, ground=None, ground_grid: Grid | None = None,
                    block_shape=DEFAULT_BLOCK, threads: int = THREADS, progress=None,
                    is_cancelled=None, means_cells: int | None = None) -> BlockGrids:
    """Evaluate the surface and its grids block by block and write them as GeoTIFFs into ``folder``.

    Parameters
    ----------
    model : strikeline.surfaces.SurfaceModel
        The fitted surface.
    grid : Grid
        The output grid.
    folder : path, optional
        Where the GeoTIFFs go under their vocabulary names (the run's temporary output folder);
        the float64 scratch copies of the surface and the depth go into its :data:`SCRATCH_DIR`.
        Default: a new temporary folder that lives as long as the returned object.
    ground : ndarray, optional
        The ground (DEM) on the output grid, for the depth below ground.
    ground_grid : Grid, optional
        The ground's grid (the output grid's cells; its georeferencing is the depth's scratch copy's,
        which the trace is drawn on). Default ``grid``.
    block_shape : (int, int)
        Rows and columns of a block; the values never depend on it.
    threads : int
        Blocks of a band computed at once.
    progress, is_cancelled : callable, optional
        Fraction of the rows done; polled between bands (:class:`CancelledError`).
    means_cells : int, optional
        Also gather the surface's and the depth's window means as they are written, the values of
        a read decimated to at most this many cells (``GridFile.means``; the report's map,
        :data:`strikeline.io.window_means.PICTURE_CELLS`), when the factor divides the grid's sides.

    Returns
    -------
    BlockGrids
        The surface, dip, dip direction, uncertainty (and depth) files, with scratch copies
        ``'surface'`` (and ``'depth'``).
    """
    outs = [("surface", V.SURFACE), ("dip", V.DIP), ("dip_direction", V.DIP_DIRECTION),
            ("uncertainty", V.UNCERTAINTY)] + ([("depth", V.DEPTH)] if ground is not None else [])
    scratch = {"surface": grid} if ground is None else {"surface": grid, "depth": ground_grid or grid}
    errors = SharedBands(lambda a, b: model.standard_error_grid(grid, window=(a, b, 0, grid.cols), workers=1),
                         uses=len(range(0, grid.cols, max(1, int(block_shape[1])))), parts=threads,
                         dtype=np.float32)  # written only as a float32 output: the values its writer keeps
    means = {}
    if means_cells:
        from strikeline.io.sampling import decimation

        k = decimation(grid.shape, means_cells)
        if grid.rows % k == 0 and grid.cols % k == 0:
            means = {"surface": (means_cells, k), "depth": (means_cells, k)}
    return _by_blocks(lambda w: _block(model, grid, w, ground=ground, errors=errors), outs, scratch, grid, folder,
                      block_shape=block_shape, threads=threads, progress=progress, is_cancelled=is_cancelled,
                      means=means)


def isopachs_by_blocks(top_model, model, grid: Grid, folder=None, *, block_shape=DEFAULT_BLOCK,
                       threads: int = THREADS, progress=None, is_cancelled=None) -> BlockGrids:
    """The vertical and true thickness grids between ``top_model`` and the base ``model``
    (:func:`strikeline.maps.thickness.isopach_grids`) block by block into ``folder``, with the
    counts of cells within reach of each surface's data and a float64 scratch copy of the true
    thickness of the cells within reach of both (NaN elsewhere; ``scratch[STATS_SCRATCH]``), from
    which the statistics are read. Parameters as :func:`grids_by_blocks`."""
    outs = [("vertical_thickness", V.VERTICAL_THICKNESS), ("true_thickness", V.TRUE_THICKNESS)]
    return _by_blocks(lambda w: _isopach_block(top_model, model, grid, w), outs, {STATS_SCRATCH: grid}, grid, folder,
                      block_shape=block_shape, threads=threads, progress=progress, is_cancelled=is_cancelled)


def _by_blocks(block_fn, outs, scratch_grids: dict, grid: Grid, folder, *, block_shape, threads, progress,
               is_cancelled, means=None) -> BlockGrids:
    """Run ``block_fn(window) -> {key: array}`` over the blocks of ``grid`` a band at a time on
    ``threads`` threads and write the bands: ``outs`` ((key, vocabulary raster) pairs) as output
    GeoTIFFs, ``scratch_grids`` (key -> grid) as float64 scratch copies. A band's writes are queued
    ahead of the next band's blocks, so the threads write one band while they compute the next;
    each block fills its own columns of the band and every writer takes its bands in order, so
    nothing depends on which thread finishes first."""
    from strikeline.io.gridfiles import StripWriter

    owned = None
    if folder is None:
        owned = tempfile.TemporaryDirectory(prefix="strikeline-blocks-")
        folder = owned.name
    folder = Path(folder)
    scratch_dir = folder / SCRATCH_DIR
    if scratch_grids:
        scratch_dir.mkdir(exist_ok=True)
    writers, scratch_writers = {}, {}
    counts = {"base": 0, "top": 0, "both": 0}
    try:
        means = means or {}  # key -> (cells, k): window means gathered while written
        for key, spec in outs:
            writers[key] = StripWriter(folder / spec.file, grid, description=spec.meaning, unit=spec.unit,
                                       means_k=means[key][1] if key in means else None)
        for key, g in scratch_grids.items():
            scratch_writers[key] = StripWriter(scratch_dir / f"{key}_f64.tif", g, scratch=True)
        jobs = [(k, w) for k, w in writers.items()] + [(k, w) for k, w in scratch_writers.items()]
        # a grid only written as an output is kept in float32 (the writer rounds it so anyway):
        # a band of it takes half the memory and its writer no conversion
        single = {k for k, _ in outs} - set(scratch_grids)
        streaming = all(w.takes_blocks(block_shape) for _, w in jobs)
        with ThreadPoolExecutor(max_workers=max(1, int(threads))) as pool:
            try:
                (_stream_blocks if streaming else _write_bands)(pool, block_fn, jobs, grid, block_shape, threads,
                                                                 counts, single, progress, is_cancelled)
            except BaseException:
                pool.shutdown(wait=True, cancel_futures=True)  # no writer is in use when they are dropped
                raise
        every = [*writers.values(), *scratch_writers.values()]
        for w in every:
            w.finish()
        with ThreadPoolExecutor(max_workers=max(1, int(threads))) as pool:
            list(pool.map(lambda w: w.verify(), every))  # reading back decompresses: both threads
        files = {spec.file: GridFile(Path(writers[key].commit()), grid,
                                     (means[key][0], writers[key].means.means) if key in means else None)
                 for key, spec in outs}
        any_valid = {k: w.any_valid for k, w in scratch_writers.items()}
        all_valid = {k: w.all_valid for k, w in scratch_writers.items()}
        scratch = {k: Path(w.commit()) for k, w in scratch_writers.items()}
    except BaseException:
        for w in [*writers.values(), *scratch_writers.values()]:
            w.abort()
        shutil.rmtree(scratch_dir, ignore_errors=True)
        raise
    return BlockGrids(files, scratch, any_valid, counts["base"], counts["top"], counts["both"],
                      _owned=owned, all_valid=all_valid)


def _count_reach(counts: dict, part: dict) -> None:
    """Add the cells of a block or band within reach of the base's, the top's and both data."""
    if "base_in" in part:
        b_in, t_in = part["base_in"], part["top_in"]
        counts["base"] += int(b_in.sum())
        counts["top"] += int(t_in.sum())
        counts["both"] += int((b_in & t_in).sum())


def _write_bands(pool, block_fn, jobs, grid: Grid, block_shape, threads, counts: dict, single: set, progress,
                 is_cancelled) -> None:
    """Compute the blocks a band at a time and write each band (:meth:`StripWriter.write_rows`);
    a band's writes are queued ahead of the next band's blocks."""
    writing = []
    for band in block_windows(grid.shape, block_shape):
        if is_cancelled is not None and is_cancelled():
            raise CancelledError("cancelled; nothing was written")
        # the previous band's writes were queued first: the threads write it while
        # this band's blocks wait, then compute them while the last writes finish
        computing = [pool.submit(block_fn, w) for w in band]
        rows = _gather(band, computing, grid.cols, single)
        for f in writing:
            f.result()  # a writer takes its bands in order: the previous one is done
        writing = [pool.submit(w.write_rows, band[0][0], rows[k]) for k, w in jobs]
        _count_reach(counts, rows)
        if progress is not None:
            progress(band[0][1] / grid.rows)
    for f in writing:
        f.result()


def _stream_blocks(pool, block_fn, jobs, grid: Grid, block_shape, threads, counts: dict, single: set, progress,
                   is_cancelled) -> None:
    """Compute blocks that are one tile row high and whole tiles wide and write each as soon as
    it is done (:meth:`~strikeline.io.gridfiles.StripWriter.write_block`): memory holds a few
    blocks, whatever the grid's width.

    Each file is a lane: its blocks are written one after the other in the grid's order (so its
    tiles lie in the order of a whole-array write), and the moment a lane has written block *i*
    it is given block *i + 1* if that is computed, without waiting for the other files' writes of
    block *i*. The threads thus never stand idle at the seam between two blocks while one slow file
    finishes; a block is dropped once every lane has written it, and at most
    :func:`_blocks_in_flight` blocks are computed or waiting to be written at once. The tasks
    (computing a block, writing a block to one file) go to ``pool``; this thread polls
    ``is_cancelled``, reports ``progress`` and raises the first failure. (``single``: the writers
    round to float32 themselves.)"""
    import threading

    windows = [w for band in block_windows(grid.shape, block_shape) for w in band]
    n, limit = len(windows), _blocks_in_flight(threads)
    state = threading.Condition(threading.RLock())
    parts: dict = {}  # block index -> its arrays (block_fn's dict), until every lane has written it
    left: dict = {}  # block index -> lanes still to write it
    lane_next = [0] * len(jobs)  # each lane's next block
    lane_busy = [False] * len(jobs)
    flow = {"submitted": 0, "written": 0, "error": None, "stop": False}

    def fail(exc: BaseException) -> None:
        with state:
            if flow["error"] is None:
                flow["error"] = exc
            flow["stop"] = True
            state.notify_all()

    def start_lane(k: int) -> None:  # with ``state`` held: lane k takes its next block if it is here
        i = lane_next[k]
        if not lane_busy[k] and not flow["stop"] and i in parts:
            lane_busy[k] = True
            pool.submit(write, k, i)

    def top_up() -> None:  # with ``state`` held: compute ahead while blocks in flight are few
        while not flow["stop"] and flow["submitted"] < n and flow["submitted"] - flow["written"] < limit:
            i = flow["submitted"]
            flow["submitted"] += 1
            pool.submit(compute, i)

    def compute(i: int) -> None:
        try:
            part = block_fn(windows[i])
        except BaseException as exc:
            fail(exc)
            return
        with state:
            if flow["stop"]:
                return
            parts[i], left[i] = part, len(jobs)
            _count_reach(counts, part)
            for k in range(len(jobs)):
                start_lane(k)
            state.notify_all()

    def write(k: int, i: int) -> None:
        key, writer = jobs[k]
        r0, _, c0, _ = windows[i]
        try:
            writer.write_block(r0, c0, parts[i][key])
        except BaseException as exc:
            fail(exc)
            return
        with state:
            lane_busy[k] = False
            lane_next[k] = i + 1
            left[i] -= 1
            if not left[i]:
                del parts[i], left[i]
                flow["written"] += 1
                top_up()
            start_lane(k)
            state.notify_all()

    with state:
        top_up()
    reported = 0
    try:
        while True:
            with state:
                state.wait_for(lambda: flow["stop"] or flow["written"] != reported, timeout=0.1)
                error, written = flow["error"], flow["written"]
            if error is not None:
                raise error
            if progress is not None and written != reported:
                progress(written / n)
            reported = written
            if written == n:
                return
            if is_cancelled is not None and is_cancelled():
                raise CancelledError("cancelled; nothing was written")
    finally:
        with state:
            flow["stop"] = True  # no task starts another; the caller drops the writers once the pool is idle
            parts.clear()


def _blocks_in_flight(threads: int) -> int:
    """Blocks computed or being computed and not yet written to every file, at most: two per
    thread and one more, so that each thread finds a block to compute or write (our choice).

    >>> _blocks_in_flight(2)
    5
    """
    return 2 * max(1, int(threads)) + 1


def _gather(band, computing, cols: int, single: set) -> dict:
    """The rows of a band from its blocks' futures (in the band's order, left to right), each
    block copied into the band's arrays as soon as it is done and then dropped; grids named in
    ``single`` are kept in float32."""
    rows = None
    height = band[0][1] - band[0][0]
    for i, (_, _, c0, c1) in enumerate(band):
        part, computing[i] = computing[i].result(), None  # the future no longer holds the block
        if rows is None:
            rows = {k: np.empty((height, cols), np.float32 if k in single and v.dtype == np.float64 else v.dtype)
                    for k, v in part.items()}
        for k, v in part.items():
            rows[k][:, c0:c1] = v
        part = None
    return rows


def contours_of_blocks(tiles: BlockGrids, grid: Grid, *, interval_m: float, extrapolated_fn=None,
                       is_cancelled=None):
    """Structure contours of the surface written block by block
    (:func:`strikeline.pipeline.steps.structure_contours` on the lines GDAL's contour generator
    draws from the float64 scratch copy, :func:`strikeline.io.gridfiles.contour_lines_from_file`)."""
    from strikeline.io.gridfiles import contour_lines_from_file
    from strikeline.pipeline.steps import structure_contours

    lines = contour_lines_from_file(tiles.scratch["surface"], grid, interval_m=interval_m,
                                    any_valid=tiles.any_valid["surface"], is_cancelled=is_cancelled)
    return structure_contours(None, grid, interval_m=interval_m, extrapolated_fn=extrapolated_fn, lines=lines)


def trace_of_blocks(tiles: BlockGrids, ground_grid: Grid, *, is_cancelled=None) -> np.ndarray:
    """The zero line of the depth written block by block (the raw predicted trace of
    :func:`strikeline.pipeline.steps.depth_trace_misfit`), drawn from its float64 scratch copy."""
    from strikeline.io.gridfiles import contour_lines_from_file

    geoms, _ = contour_lines_from_file(tiles.scratch["depth"], ground_grid, levels=[0.0],
                                       any_valid=tiles.any_valid["depth"], is_cancelled=is_cancelled)
    return geoms


def contours_and_trace_of_blocks(tiles: BlockGrids, grid: Grid, ground_grid: Grid, *, interval_m: float,
                                 extrapolated_fn=None, is_cancelled=None):
    """:func:`contours_of_blocks` and :func:`trace_of_blocks` at once: the trace on a second thread
    while this one draws the structure contours (the two read different scratch grids and GDAL
    releases Python's lock while it draws). Returns ``((lines, elevation_m, extrapolated),
    raw_trace)``, the values of the two calls one after the other; with one core they are made so.
    GDAL hands the contours over in chunks as it draws them; its trace drawn, the second thread
    reads which cells of the surface hold values (:class:`strikeline.io.contours.ValidCells`) and
    then trims and splits chunks while GDAL still draws, and this thread joins in when GDAL is done
    (:func:`strikeline.pipeline.contour_chunks.contours_and_trace_at_once`: the same lines).

    The trace's time is counted in the step that runs this (a run's "structure contours"), and
    the step "depth, trace and misfit" takes the lines drawn. GDAL's exception mode and block
    cache are process-wide, so they are held once around both threads
    (:func:`strikeline.io.gridfiles.contour_reading`) and given back after the second thread has
    ended. If either thread fails or is cancelled, or a signal arrives, the other is told to stop
    (GDAL at its next progress report) and awaited before the error goes on.
    """
    from strikeline.pipeline.contour_chunks import contours_and_trace_at_once

    if THREADS < 2:
        return (contours_of_blocks(tiles, grid, interval_m=interval_m, extrapolated_fn=extrapolated_fn,
                                   is_cancelled=is_cancelled),
                trace_of_blocks(tiles, ground_grid, is_cancelled=is_cancelled))
    return contours_and_trace_at_once(tiles, grid, ground_grid, interval_m=interval_m,
                                      extrapolated_fn=extrapolated_fn, is_cancelled=is_cancelled)
