"""A DEM left in its file and read by windows: grids larger than memory.

:func:`open_dem` checks a DEM as :func:`strikeline.io.raster.read_raster` does (the same one-line
messages: missing file, not a raster, not one band of elevations, no georeferencing, CRS not
projected in metres, undeclared nodata markers, no valid cell), reading it once in strips of rows
to count its markers and its valid cells and to find its lowest and highest values. The
:class:`DemFile` it returns holds no cell: each use reads the window it needs (and GDAL drops the
window's blocks from its cache after), converted as the whole band would be (float64, NaN for
nodata and non-finite cells, then times the unit's metres), so every value is the one the whole
array holds. Memory is one window, whatever the DEM's size.
"""
from __future__ import annotations

import contextlib
import os
import threading
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field, replace

import numpy as np
from osgeo import gdal

from strikeline.budget import WINDOWED_BYTES_PER_CELL, budget_words, memory_budget_bytes, size_words
from strikeline.errors import InputError, RasterReadError
from strikeline.geometry.grid import Grid
from strikeline.io._gdal import gdal_exceptions, gdal_message
from strikeline.io.raster import HoleCount, as_float, check_holes, checked_band, open_raster, valid_range
from strikeline.picks.dem import sample_bilinear

#: Cells read at once by the strips of the check at opening and of the samplers (about 32 MiB as
#: float64; our choice).
STRIP_CELLS = 1 << 22
#: Most cells of the window kept for the next read, in the file's own type (64 MiB as Float32; our choice).
CACHE_CELLS = 1 << 24
#: GDAL's exception mode is process-wide (strikeline.io._gdal): windows read on several threads
#: (the blocks of a band) take turns.
_READ_LOCK = threading.Lock()
#: Threads on which GDAL decodes the blocks of one read (GDAL 3.6's multithreaded GeoTIFF decoding,
#: its ``GDAL_NUM_THREADS`` option, taken when the file is opened): the machine's cores, at most 2.
DECODE_THREADS = max(1, min(2, os.cpu_count() or 1))


@contextlib.contextmanager
def decode_threads(n: int | None = None):
    """Within the block, rasters opened by this thread decode a read's compressed blocks on ``n``
    threads (default :data:`DECODE_THREADS`): GDAL's ``GDAL_NUM_THREADS`` set as a thread-local
    configuration option, the caller's value restored after. GDAL's GeoTIFF driver reads the
    option when it opens the file and uses it for reads that cross several blocks (GDAL 3.6 NEWS:
    multithreaded decoding); the values read do not depend on it."""
    name = "GDAL_NUM_THREADS"
    previous = gdal.GetThreadLocalConfigOption(name, None)
    gdal.SetThreadLocalConfigOption(name, str(max(1, int(n if n is not None else DECODE_THREADS))))
    try:
        yield
    finally:
        gdal.SetThreadLocalConfigOption(name, previous)


def strip_rows(cols: int, block_rows: int, *, cells: int | None = None) -> int:
    """Rows of a strip of about ``cells`` cells (default :data:`STRIP_CELLS`) of a band ``cols``
    wide whose blocks are ``block_rows`` high: a whole number of block rows when a strip holds
    one or more, so that no block is decoded twice (each strip's blocks leave GDAL's cache after
    it: a strip ending inside a block row would decode that row again for the next).

    >>> strip_rows(8000, 256), strip_rows(8000, 1), strip_rows(100_000, 256)
    (512, 524, 41)
    """
    rows = max(1, (STRIP_CELLS if cells is None else int(cells)) // max(int(cols), 1))
    b = max(1, int(block_rows))
    return rows // b * b if rows >= b else rows


@dataclass(frozen=True)
class DemFile:
    """One band of a raster file, read by windows.

    Attributes
    ----------
    path : str
    grid : Grid
        Georeferencing, shape, CRS (WKT) and the band's nodata value.
    band : int
    label : str
        How messages name it (``"DEM"``).
    scale : float
        Metres per unit of the file's values (1 for metres): every window is multiplied by it.
    minimum, maximum : float
        The lowest and highest valid value, in metres.
    dtype : str
        GDAL's name of the band's type (``"Float32"``).
    """

    path: str
    grid: Grid
    band: int = 1
    label: str = "DEM"
    scale: float = 1.0
    minimum: float = float("nan")
    maximum: float = float("nan")
    dtype: str = ""
    # the last window read (r0, r1, c0, c1, array): the blocks of a band and the samples of one
    # stretch of a contact read it once
    _last: list = field(default_factory=lambda: [None], repr=False, compare=False)

    # ---------------------------------------------------------------- array-like facts
    @property
    def shape(self) -> tuple:
        return tuple(self.grid.shape)

    @property
    def ndim(self) -> int:
        return 2

    @property
    def what(self) -> str:
        return f"{self.label} '{self.path}'"

    def in_metres(self, metres_per_unit: float) -> "DemFile":
        """The same file with its values multiplied by ``metres_per_unit`` (as
        :func:`strikeline.pipeline.elevation_units.to_metres` multiplies an array)."""
        f = float(metres_per_unit)
        if f == 1.0:
            return self
        lo, hi = np.float64(self.minimum) * f, np.float64(self.maximum) * f
        return replace(self, scale=self.scale * f, minimum=float(min(lo, hi)), maximum=float(max(lo, hi)),
                       _last=[None])

    # ---------------------------------------------------------------- reading
    def read_window(self, r0: int, r1: int, c0: int, c1: int) -> np.ndarray:
        """Rows ``r0:r1`` and columns ``c0:c1`` (clipped to the band) as float64 metres, NaN for nodata."""
        rows, cols = self.shape
        r0, r1 = max(0, int(r0)), min(rows, int(r1))
        c0, c1 = max(0, int(c0)), min(cols, int(c1))
        if r1 <= r0 or c1 <= c0:
            return np.empty((max(r1 - r0, 0), max(c1 - c0, 0)))
        out = as_float(self._raw(r0, r1, c0, c1), self.grid.nodata)  # a new array: the kept window stays as read
        if self.scale != 1.0:
            out *= self.scale
        return out

    def _raw(self, r0: int, r1: int, c0: int, c1: int) -> np.ndarray:
        """The file's own values (its data type) of a window inside the band: a view of the window
        kept from the last read when it holds this one, else read from the file and kept when it
        has at most :data:`CACHE_CELLS` cells. Kept as read (4 bytes a cell for Float32, not the 8
        of float64 metres), each use converts only its own cells, which gives the values the
        conversion of the whole window gives (it is cell by cell)."""
        last = self._last[0]
        if last is not None and last[0] <= r0 and r1 <= last[1] and last[2] <= c0 and c1 <= last[3]:
            return last[4][r0 - last[0]:r1 - last[0], c0 - last[2]:c1 - last[2]]
        with _READ_LOCK, gdal_exceptions(), decode_threads():
            ds = open_raster(self.path, label=self.label)
            try:
                b = ds.GetRasterBand(self.band)
                try:
                    raw = b.ReadAsArray(c0, r0, c1 - c0, r1 - r0)
                except RuntimeError as exc:
                    raise RasterReadError(f"{self.what}: GDAL could not read band {self.band} "
                                          f"({gdal_message(exc)})") from None
                b.FlushCache()  # drop the window's blocks: memory stays one window
            finally:
                ds = None
        if raw.size <= CACHE_CELLS:
            raw.flags.writeable = False
            self._last[0] = (r0, r1, c0, c1, raw)
        return raw

    def read(self) -> np.ndarray:
        """The whole band (for a DEM that fits in memory)."""
        return self.read_window(0, self.grid.rows, 0, self.grid.cols)

    def __array__(self, dtype=None):
        arr = self.read()
        return arr if dtype is None else arr.astype(dtype)

    def __getitem__(self, key) -> np.ndarray:
        """``dem[r0:r1, c0:c1]``: a window (slices with unit steps only)."""
        if not (isinstance(key, tuple) and len(key) == 2 and all(isinstance(k, slice) for k in key)):
            raise TypeError("a DEM file is indexed by two slices, dem[r0:r1, c0:c1]")
        (r0, r1, rs), (c0, c1, cs) = key[0].indices(self.grid.rows), key[1].indices(self.grid.cols)
        if rs != 1 or cs != 1:
            raise TypeError("a DEM file is read by windows with unit steps")
        last = self._last[0]
        if (last is None or not (last[0] <= r0 and r1 <= last[1] and last[2] == 0 and last[3] == self.grid.cols)) \
                and (r1 - r0) * self.grid.cols <= CACHE_CELLS and r1 > r0:
            self._raw(r0, r1, 0, self.grid.cols)  # the band's rows whole, kept: its other blocks follow
        return self.read_window(r0, r1, c0, c1)

    # ---------------------------------------------------------------- sampling
    def sample_bilinear(self, x, y, *, derive=None, halo: int = 0) -> np.ndarray:
        """Bilinear values at the points ``(x, y)``: those of
        :func:`strikeline.picks.dem.sample_bilinear` on the whole band (or on ``derive`` of it).

        The points are taken a strip of rows at a time; each strip's window holds the columns its
        points need. ``derive(window, grid)`` turns a window into another grid of the same cells
        (e.g. the ground's slope) computed cell by cell from neighbours at most ``halo`` cells away:
        the window is read ``halo`` cells wider on every side (short of the band's edges), so its
        cells in use see the neighbours they see in the whole band.
        """
        x, y = np.broadcast_arrays(np.asarray(x, dtype=float), np.asarray(y, dtype=float))
        shape = x.shape
        x, y = x.ravel(), y.ravel()
        out = np.full(x.shape, np.nan)
        rows, cols = self.shape
        col, row = self.grid.xy_to_colrow(x, y)
        inside = np.isfinite(col) & np.isfinite(row) & (col >= -0.5) & (col <= cols - 0.5) \
            & (row >= -0.5) & (row <= rows - 0.5)
        idx = np.flatnonzero(inside)
        if not len(idx):
            return out.reshape(shape)
        r0 = np.floor(np.clip(row[idx], 0.0, rows - 1.0)).astype(np.int64)
        c0 = np.floor(np.clip(col[idx], 0.0, cols - 1.0)).astype(np.int64)
        step = max(1, STRIP_CELLS // max(cols, 1))
        h = max(0, int(halo))
        for start in range(int(r0.min()) - int(r0.min()) % step, int(r0.max()) + 1, step):
            here = (r0 >= start) & (r0 < start + step)
            if not here.any():
                continue
            sel = idx[here]
            ra, rb = max(0, start - h), min(rows, start + step + 1 + h)
            ca, cb = max(0, int(c0[here].min()) - h), min(cols, int(c0[here].max()) + 2 + h)
            window = self.read_window(ra, rb, ca, cb)
            if derive is not None:
                window = derive(window, _window_grid(self.grid, ra, rb, ca, cb))
            out[sel] = sample_bilinear(window, self.grid, x[sel], y[sel], origin=(ra, ca))
        return out.reshape(shape)

    def window_of_bounds(self, bounds, *, margin_cells: int = 2) -> tuple[int, int, int, int]:
        """``(r0, r1, c0, c1)`` of the cells under ``bounds`` (xmin, ymin, xmax, ymax) widened by
        ``margin_cells`` cells, clipped to the band."""
        xmin, ymin, xmax, ymax = (float(v) for v in bounds)
        cs, rs = self.grid.xy_to_colrow(np.array([xmin, xmax]), np.array([ymax, ymin]))
        rows, cols = self.shape
        m = int(margin_cells)
        c0 = int(np.clip(np.floor(cs.min()) - m, 0, cols))
        c1 = int(np.clip(np.ceil(cs.max()) + 1 + m, 0, cols))
        r0 = int(np.clip(np.floor(rs.min()) - m, 0, rows))
        r1 = int(np.clip(np.ceil(rs.max()) + 1 + m, 0, rows))
        return r0, r1, c0, c1


def _window_grid(grid: Grid, r0: int, r1: int, c0: int, c1: int) -> Grid:
    """The grid of rows ``r0:r1``, columns ``c0:c1`` of ``grid`` (same cells, same nodata)."""
    x0, dx, _, y0, _, dy = grid.transform
    return Grid((x0 + c0 * dx, dx, 0.0, y0 + r0 * dy, 0.0, dy), (r1 - r0, c1 - c0), grid.crs_wkt, grid.nodata)


def window_grid(dem: DemFile, r0: int, r1: int, c0: int, c1: int) -> Grid:
    """The :class:`Grid` of a window of ``dem`` (rows ``r0:r1``, columns ``c0:c1``)."""
    return _window_grid(dem.grid, r0, r1, c0, c1)


def open_dem(path, *, label: str = "DEM", band: int = 1) -> DemFile:
    """Check a raster as :func:`strikeline.io.raster.read_raster` does and leave it in its file.

    The band is read once in strips of whole block rows (each dropped from GDAL's block cache
    after) to refuse undeclared nodata markers and a band without a valid cell, and to find its
    lowest and highest value; memory is two strips whatever the raster's size. GDAL decodes each
    strip's blocks on :data:`DECODE_THREADS` threads (:func:`decode_threads`) while the strip
    before is checked on this one, in the band's own type: its valid range
    (:func:`strikeline.io.raster.valid_range`) gives the lowest and highest value and says whether
    it can hold a marker at all; only a strip that can is compared with the markers cell by cell.

    Raises
    ------
    InputError, RasterReadError, CRSError
        As :func:`strikeline.io.raster.read_raster`, with its messages.
    """
    path = os.fspath(path)
    with decode_threads(), checked_band(path, band=band, label=label) as (b, grid, what):
        rows, cols = grid.shape
        need = float(rows) * float(cols) * WINDOWED_BYTES_PER_CELL
        if need > memory_budget_bytes():  # refused before the pass over its cells (hours for such a file)
            raise InputError(
                f"{what} has {cols} x {rows} cells, which need about {size_words(need)} even read by windows "
                f"and computed in blocks, more than this run's memory budget of {budget_words()}; clip it to "
                "the area of the contacts (gdalwarp -te) or coarsen it (gdalwarp -tr)")
        dtype = gdal.GetDataTypeName(b.DataType)
        holes = HoleCount(grid.nodata)
        lo, hi, any_valid = np.inf, -np.inf, False
        step = strip_rows(cols, b.GetBlockSize()[1])

        def read(source, r0):
            try:
                raw = source.ReadAsArray(0, r0, cols, min(step, rows - r0))
            except RuntimeError as exc:
                raise RasterReadError(f"{what}: GDAL could not read band {band} ({gdal_message(exc)})") from None
            source.FlushCache()
            return raw

        # one strip read ahead on a second thread (GDAL decodes without Python's lock) while this
        # one counts the strip before: the band is only ever used by that thread
        with ThreadPoolExecutor(max_workers=1, thread_name_prefix="strikeline-dem-check") as pool:
            starts = list(range(0, rows, step))
            ahead = pool.submit(read, b, starts[0])
            try:
                for k in range(len(starts)):
                    raw = ahead.result()
                    ahead = pool.submit(read, b, starts[k + 1]) if k + 1 < len(starts) else None
                    found = valid_range(raw, grid.nodata)  # in the band's type: no float64 copy
                    holes.add(raw, value_range=found)  # counted cell by cell only where markers may be
                    if found is not None:
                        any_valid = True
                        lo, hi = min(lo, found[0]), max(hi, found[1])
                    del raw
            finally:
                if ahead is not None:
                    ahead.cancel()
                    with contextlib.suppress(BaseException):
                        ahead.result()  # a read under way ends before the band is released
        del b, ahead
    check_holes(holes.result(), grid.nodata, what=what, path=path)
    if not any_valid:
        raise InputError(f"{what} holds no valid cell (every cell is nodata); give a raster with data")
    return DemFile(path, grid, band=band, label=label, minimum=lo, maximum=hi, dtype=dtype)


def raster_shape(path, *, label: str = "DEM") -> tuple[int, int] | None:
    """``(rows, cols)`` of a raster's first band without reading it, or None when GDAL cannot open
    it (the reader that follows then says why)."""
    try:
        with gdal_exceptions():
            ds = open_raster(path, label=label)
            try:
                return ds.RasterYSize, ds.RasterXSize
            finally:
                ds = None
    except (InputError, RasterReadError):
        return None
