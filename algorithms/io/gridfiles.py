"""Grids too large for memory: GeoTIFFs written and read a window at a time.

:class:`StripWriter` takes the rows of a grid in order, a band of rows at a time, and writes them
in strips one tile high, so that GDAL compresses and places the tiles in the same order as a
whole-array write (:func:`strikeline.io.geotiff.write_geotiffs`): a grid written in strips is the
same file, byte for byte. :func:`read_window` reads a window back, :class:`FileMask` answers
"does this cell hold data" for scattered cells, and :func:`contour_lines_from_file` hands a
written band to GDAL's contour generator, which reads it a block of lines at a time.

Scratch grids (float64, uncompressed, the lowest float64 as nodata) hold the exact values a
contour is drawn on, so that lines drawn from a file equal the lines drawn from the array.
"""
from __future__ import annotations

import contextlib
import hashlib
import os
import threading

import numpy as np
from osgeo import gdal

from strikeline.errors import CancelledError, OutputError, RasterReadError
from strikeline.geometry.grid import Grid
from strikeline.io._gdal import gdal_exceptions, gdal_message, quiet_close
from strikeline.io.contours import _contour_band, _level_options, band_for_reading, valid_in_window
from strikeline.io.interrupt import GdalStop, raise_pending
from strikeline.io.geotiff import CREATION_OPTIONS, tile_cut_short
from strikeline.io.raster import NODATA_OUT
from strikeline.io.window_means import WindowMeans
from strikeline.maps.contours import trim_contour_fringe

__all__ = ["StripWriter", "read_window", "FileMask", "contour_lines_from_file", "contour_reading", "trimmed_lines",
           "OUTPUT_OPTIONS", "SCRATCH_NODATA"]

#: Creation options of strikeline's output GeoTIFFs: those of
#: :data:`strikeline.io.geotiff.CREATION_OPTIONS` (the block path's files must equal its files).
OUTPUT_OPTIONS = CREATION_OPTIONS
#: Rows of a scratch grid's tiles: GDAL's contour generator reads a scratch grid a line at a
#: time, so its block cache holds whole tile rows across the grid; tiles 16 rows high (TIFF's
#: least) keep that to 16 rows of the width, not 256 (our choice).
SCRATCH_TILE_ROWS = 16
#: Scratch grids: tiled 256 x 16, uncompressed (read back once or twice, then removed), BigTIFF;
#: their bytes need not equal a whole-array write, only their values.
SCRATCH_OPTIONS = ("TILED=YES", "BLOCKXSIZE=256", f"BLOCKYSIZE={SCRATCH_TILE_ROWS}", "BIGTIFF=YES")
#: Nodata of the float64 scratch grids: the lowest float64, below every value a surface takes,
#: the sentinel :func:`strikeline.io.contours.contour_lines` gives GDAL for NaN cells.
SCRATCH_NODATA = float(np.finfo(np.float64).min)
#: GDAL's block cache while the contour generator reads a scratch grid: three rows of its
#: float64 tiles across the grid (two lines it compares may lie in two tile rows), at least 64 MiB
#: (our choice): with 16-row tiles 64 MiB holds three tile rows of grids up to 170,000 columns.
CONTOUR_CACHE_BYTES = 64 * 2**20
#: Width in tiles of the windows :class:`FileMask` reads: 8 tiles of 256 x 256 float64 cells are
#: 4 MiB, few enough calls into GDAL for a sheet's contours and little memory (our choice).
MASK_WINDOW_TILES = 8


class StripWriter:
    """A GeoTIFF written a band of rows at a time, in strips one tile high.

    Parameters
    ----------
    path : str or PathLike
        The file; written as ``path + '.part'`` and renamed by :meth:`close` once checked.
    grid : Grid
    description, unit : str
        The band's description and unit (as :func:`strikeline.io.geotiff.write_geotiffs`).
    means_k : int, optional
        Also gather the grid's ``k x k`` window means as the pieces are written
        (:class:`strikeline.io.window_means.WindowMeans`, ``k`` dividing the grid's rows and
        columns; outputs only): :attr:`means` ``.means`` holds the values of a decimated read of
        the file (:func:`strikeline.io.sampling.read_decimated`) once every row is written.
    scratch : bool, default False
        A float64 scratch grid (uncompressed, nodata :data:`SCRATCH_NODATA`, values unchanged)
        instead of a float32 output (:data:`OUTPUT_OPTIONS`, nodata
        :data:`strikeline.io.raster.NODATA_OUT`, values rounded to float32 as the whole-array
        writer does).

    Notes
    -----
    GDAL compresses a tile when it leaves the block cache and appends it to the file, so the
    order in which tiles are completed decides where they lie in the file. Rows are kept until a
    strip of whole tile rows is complete and then written with one ``WriteArray`` across the
    width, which completes the tiles row by row, left to right, as a whole-array write does;
    :meth:`write_block` takes blocks one tile row high and whole tiles wide instead, in the same
    order, so that rows need not span the grid's width in memory.
    The first and last strips' bytes are hashed; :meth:`close` closes the file (GDAL's last
    error checked, as GDAL 3.6 does not raise it on close), checks that every tile's bytes lie
    inside the file and reads those two strips back - the check of the whole-array writer
    (:class:`strikeline.io.geotiff.GeoTiffWriter`), which reading every strip back would make
    as costly as the writing itself.
    Use from one thread at a time; create and close it on the thread that holds GDAL's exception
    mode.
    """

    def __init__(self, path, grid: Grid, *, description: str = "", unit: str | None = "", scratch: bool = False,
                 means_k: int | None = None):
        self.path = os.fspath(path)
        self.tmp = self.path + ".part"
        self.grid, self.scratch = grid, scratch
        self.description, self.unit = description, unit or ""
        self.dtype = np.float64 if scratch else np.float32
        self.nodata = SCRATCH_NODATA if scratch else NODATA_OUT
        self._pending: list[np.ndarray] = []
        self._n_pending = 0
        self._next_row = 0
        self._hashes: dict[tuple, bytes] = {}  # (row, col, rows, cols) of the first and last strips' pieces -> digest
        self._next_col = 0  # where the next block goes in the current tile row (write_block)
        self._row_height = 0  # rows of the current row of blocks (write_block)
        self._any_valid = False
        self._all_valid = True
        # the k x k window means of what is written (the report's picture of the grid, without
        # decoding the file again): those of a decimated read of the file
        self.means = None if not means_k or scratch else WindowMeans(grid.shape, int(means_k), self.nodata)
        try:
            with gdal_exceptions():
                drv = gdal.GetDriverByName("GTiff")
                opts = list(SCRATCH_OPTIONS if scratch else OUTPUT_OPTIONS)
                self._ds = drv.Create(self.tmp, grid.cols, grid.rows, 1,
                                      gdal.GDT_Float64 if scratch else gdal.GDT_Float32, options=opts)
                self._ds.SetGeoTransform(grid.transform)
                if grid.crs_wkt:
                    self._ds.SetProjection(grid.crs_wkt)
                b = self._ds.GetRasterBand(1)
                b.SetNoDataValue(self.nodata)
                if not scratch:
                    b.SetDescription(self.description)
                    b.SetUnitType(self.unit)
                self.tile_cols, self.strip_rows = (int(v) for v in b.GetBlockSize())
                b = None
        except RuntimeError as exc:
            self.abort()
            raise OutputError(f"'{self.path}': GDAL could not create it ({gdal_message(exc)}); free some space "
                              "or choose another folder") from None

    @property
    def any_valid(self) -> bool:
        """Whether any cell written so far holds a value (not nodata)."""
        return self._any_valid

    @property
    def all_valid(self) -> bool:
        """Whether every cell written so far holds a value: finite and not the nodata value (the
        test of :func:`read_window` and :class:`strikeline.io.contours.ValidCells`)."""
        return self._all_valid

    def _stored(self, values) -> np.ndarray:
        """``values`` as the file stores them (this grid's type, NaN and infinities as nodata), noting
        whether they hold any value and all hold one (finite and not the nodata value).

        Where every value is finite - the common case, told by the least and greatest value, which
        a NaN or an infinity would be - the values are written as they are (the caller's array when
        it has the type already, never changed) and no mask is made; the nodata value is looked for
        only when it lies between the two. Otherwise a new array with nodata for the others."""
        out = np.asarray(values, dtype=self.dtype)
        if out.size:
            lo, hi = out.min(), out.max()
            if np.isfinite(lo) and np.isfinite(hi):
                self._any_valid = True
                if self._all_valid and lo <= self.nodata <= hi:
                    self._all_valid = not bool((out == self.nodata).any())
                return out
        ok = np.isfinite(out)
        self._any_valid = self._any_valid or bool(ok.any())
        self._all_valid = self._all_valid and bool(ok.all()) and not bool((out == self.nodata).any())
        return np.where(ok, out, self.dtype(self.nodata))  # a new array: the caller keeps its rows

    def write_rows(self, r0: int, values) -> None:
        """Append the rows ``r0 .. r0 + len(values)`` (full width; NaN for no value)."""
        if r0 != self._next_row or self._next_col:
            raise ValueError(f"rows must come in order: expected row {self._next_row}, got {r0}")
        v = np.asarray(values)
        if v.ndim != 2 or v.shape[1] != self.grid.cols:
            raise ValueError(f"rows of shape {v.shape} for a grid {self.grid.shape}")
        out = self._stored(v)
        if out is v:
            out = out.copy()  # kept until its strip is complete: the caller may reuse its rows
        self._pending.append(out)
        self._n_pending += len(out)
        self._next_row += len(out)
        done = self._next_row == self.grid.rows
        while self._n_pending >= self.strip_rows or (done and self._n_pending):
            self._write_strip()

    def takes_blocks(self, block_shape) -> bool:
        """Whether blocks of ``block_shape`` (rows, cols) can be given to :meth:`write_block`:
        a whole number of tiles wide, and one tile row high (a scratch grid, whose tiles' order in
        the file does not matter: a whole number of tile rows)."""
        rows, cols = int(block_shape[0]), int(block_shape[1])
        high = rows % self.strip_rows == 0 if self.scratch else rows == self.strip_rows
        return high and cols % self.tile_cols == 0

    def write_block(self, r0: int, c0: int, values) -> None:
        """Write the block of rows ``r0 ..`` and columns ``c0 ..`` (NaN for no value).

        Blocks come left to right along a tile row, tile rows top to bottom; each is one tile
        row high (fewer rows at the grid's foot) and starts at a tile's left edge, so its tiles
        are complete when it is written: they are compressed and appended to the file at once,
        in the order of a whole-array write, and nothing waits for the rest of the tile row.
        A scratch grid also takes blocks several tile rows high (the blocks of one row of blocks
        all as high). Not to be mixed with :meth:`write_rows`.
        """
        v = np.asarray(values)
        left = self.grid.rows - self._next_row
        if self._next_col:
            h = self._row_height  # inside a row of blocks: as high as its first block
        elif self.scratch and v.ndim == 2 and 0 < v.shape[0] <= left and (
                v.shape[0] % self.strip_rows == 0 or v.shape[0] == left):
            h = v.shape[0]  # whole tile rows, or down to the grid's foot
        else:
            h = min(self.strip_rows, left)
        if (r0, c0) != (self._next_row, self._next_col) or self._n_pending:
            raise ValueError(f"blocks must come in order: expected row {self._next_row}, column {self._next_col}, "
                             f"got row {r0}, column {c0}")
        if v.ndim != 2 or v.shape[0] != h or not (0 < v.shape[1] <= self.grid.cols - c0) or (
                c0 + v.shape[1] < self.grid.cols and v.shape[1] % self.tile_cols):
            raise ValueError(f"a block of shape {v.shape} at row {r0}, column {c0} does not end on a tile's edge "
                             f"of a grid {self.grid.shape}")
        self._write(self._stored(v), r0, c0)
        self._next_col, self._row_height = c0 + v.shape[1], h
        if self._next_col == self.grid.cols:
            self._next_row, self._next_col = r0 + h, 0

    def _write_strip(self) -> None:
        rows = np.concatenate(self._pending) if len(self._pending) > 1 else self._pending[0]
        n = min(self.strip_rows, len(rows))
        strip, rest = np.ascontiguousarray(rows[:n]), rows[n:]
        self._write(strip, self._next_row - self._n_pending, 0)
        self._pending = [rest] if len(rest) else []
        self._n_pending = len(rest)

    def _write(self, piece: np.ndarray, r0: int, c0: int) -> None:
        """Write whole tiles (a strip, or a block of one) now and hash the first and last tile rows."""
        piece = np.ascontiguousarray(piece)
        # no switch of GDAL's exception mode here (it is process-wide and strips of several files
        # are written on several threads): a failure is an exception or an error code
        failed = None
        try:
            band = self._ds.GetRasterBand(1)
            # the piece's tiles are compressed and written now, on this thread, in the order a
            # whole-array write gives them; GDAL's block cache then holds one piece of this file
            gdal.ErrorReset()  # this thread's last error (GDAL keeps one per thread)
            if band.WriteArray(piece, c0, r0) != gdal.CE_None:
                failed = gdal.GetLastErrorMsg() or "write failed"
            else:
                band.FlushCache()  # returns nothing in GDAL 3.6's bindings: its failure is the last error
                if gdal.GetLastErrorType() >= gdal.CE_Failure:
                    failed = gdal.GetLastErrorMsg()
        except RuntimeError as exc:
            failed = gdal_message(exc)
        if failed is not None:
            raise OutputError(f"'{self.path}': GDAL could not write it ({failed}); free some space or "
                              "choose another folder")
        h, w = piece.shape
        if self.means is not None:
            self.means.add(piece, r0, c0)
        if r0 == 0 or r0 + h == self.grid.rows:
            self._hashes[(r0, c0, h, w)] = hashlib.blake2b(memoryview(piece), digest_size=16).digest()

    def close(self) -> str:
        """Flush, close and check the file, then rename it into place; returns the path."""
        self.finish()
        self.verify()
        return self.commit()

    def finish(self) -> None:
        """Flush and close the file (the first part of :meth:`close`; on the thread that holds
        GDAL's exception mode)."""
        if self._next_row != self.grid.rows:
            raise ValueError(f"'{self.path}': {self._next_row} of {self.grid.rows} rows written")
        try:
            with gdal_exceptions():
                self._ds.FlushCache()
                gdal.ErrorReset()
                self._ds = None  # closes the file; GDAL 3.6 reports a failure here only as its last error
                if gdal.GetLastErrorType() >= gdal.CE_Failure:
                    raise RuntimeError(gdal.GetLastErrorMsg())
        except RuntimeError as exc:
            self.abort()
            raise OutputError(f"'{self.path}': GDAL could not write it ({gdal_message(exc)}); free some space or "
                              "choose another folder") from None

    def verify(self) -> None:
        """Check the closed file (the second part of :meth:`close`): size, nodata, description
        and unit, every tile's bytes inside the file, and the first and last strips read back
        equal to what was written. It switches no GDAL mode, so the files of a band of grids may
        be checked on several threads at once (GDAL releases Python's lock while it decompresses)."""
        try:
            self._check()
        except RuntimeError as exc:
            self.abort()
            raise OutputError(f"'{self.path}': GDAL could not write it ({gdal_message(exc)}); free some space or "
                              "choose another folder") from None

    def commit(self) -> str:
        """Rename the checked file into place (the last part of :meth:`close`); returns the path."""
        os.replace(self.tmp, self.path)
        return self.path

    def _check(self) -> None:
        # a failure is an exception or a None, whichever mode GDAL is in on this thread's call
        ds = gdal.Open(self.tmp, gdal.GA_ReadOnly)
        if ds is None:
            raise RuntimeError(gdal.GetLastErrorMsg() or "it could not be opened again")
        b = None
        try:
            b = ds.GetRasterBand(1)
            if not self.scratch and (b.GetDescription() != self.description or (b.GetUnitType() or "") != self.unit):
                raise RuntimeError("the file read back differs from what was written (band description or unit)")
            if (ds.RasterXSize, ds.RasterYSize) != (self.grid.cols, self.grid.rows) or b.GetNoDataValue() != self.nodata:
                raise RuntimeError("the file read back differs from what was written (size or nodata)")
            cut = tile_cut_short(b, os.path.getsize(self.tmp))
            if cut is not None:
                raise RuntimeError(f"the file read back differs from what was written (tile {cut[0]}, {cut[1]} "
                                   "missing or cut short)")
            for (r0, c0, h, w), digest in self._hashes.items():
                got = b.ReadAsArray(c0, r0, w, h)
                b.FlushCache()  # drop the strip's blocks from GDAL's cache: memory stays one strip
                if got is None or hashlib.blake2b(np.ascontiguousarray(got, dtype=self.dtype).tobytes(),
                                                  digest_size=16).digest() != digest:
                    raise RuntimeError(f"the file read back differs from what was written (rows from {r0})")
        finally:
            b = ds = None

    def abort(self) -> None:
        """Drop the file being written (nothing is left at ``path`` or its temporary name)."""
        with quiet_close():
            self._ds = None
        if os.path.exists(self.tmp):
            os.remove(self.tmp)


def read_window(path, r0: int, r1: int, c0: int, c1: int) -> np.ndarray:
    """Rows ``r0:r1`` and columns ``c0:c1`` of a band as float64, NaN for nodata."""
    path = os.fspath(path)
    with gdal_exceptions():
        try:
            ds = gdal.Open(path, gdal.GA_ReadOnly)
            b = ds.GetRasterBand(1)
            nodata = b.GetNoDataValue()
            a = b.ReadAsArray(int(c0), int(r0), int(c1 - c0), int(r1 - r0)).astype(np.float64)
        except RuntimeError as exc:
            raise RasterReadError(f"'{path}': GDAL could not read rows {r0}-{r1}, columns {c0}-{c1} "
                                  f"({gdal_message(exc)})") from None
        finally:
            b = ds = None
    if nodata is not None:
        a[a == nodata] = np.nan
    a[~np.isfinite(a)] = np.nan
    return a


class FileMask:
    """Whether cells of a band written to a file hold a value, looked up without reading it whole.

    ``mask[rows, cols]`` with integer arrays of cell indices gives a bool array (like indexing a
    boolean array of the band's shape). The cells are grouped by windows one tile row high and
    :data:`MASK_WINDOW_TILES` tiles wide; the file is opened once per look-up and each window
    holding a cell is read once and then dropped from GDAL's block cache (memory: one window,
    4 MiB of float64 with 256-cell tiles, whatever the cache's size).
    """

    def __init__(self, path, grid: Grid, *, tile: int = 256):
        self.path, self.shape, self.tile = os.fspath(path), tuple(grid.shape), int(tile)

    def __getitem__(self, key) -> np.ndarray:
        r, c = (np.asarray(k, dtype=np.int64) for k in key)
        r, c = np.broadcast_arrays(r, c)
        out = np.zeros(r.shape, dtype=bool)
        if r.size == 0:
            return out
        rows, cols = self.shape
        t, w = self.tile, self.tile * MASK_WINDOW_TILES
        rf, cf, of = r.ravel(), c.ravel(), out.reshape(-1)
        window = (rf // t) * (cols // w + 1) + cf // w
        order = np.argsort(window, kind="stable")
        _, starts = np.unique(window[order], return_index=True)
        ends = np.append(starts[1:], len(order))
        with band_for_reading(self.path, "the cells of a mask") as (band, nodata):
            for s, e in zip(starts, ends):
                idx = order[s:e]
                r0, c0 = int(rf[idx[0]] // t) * t, int(cf[idx[0]] // w) * w
                r1, c1 = min(r0 + t, rows), min(c0 + w, cols)
                ok = valid_in_window(band, nodata, r0, r1, c0, c1)
                of[idx] = ok[rf[idx] - r0, cf[idx] - c0]
        return out


#: Set while :func:`contour_reading` holds GDAL's exception mode and block cache for the
#: contour reads inside it (changed on the thread that holds it, before and after the threads
#: it runs; read by those threads).
_READING = {"held": 0}


def _contour_cache_bytes(*grids: Grid) -> int:
    """The block cache contour reads of ``grids`` at once keep: three tile rows of each, at least
    :data:`CONTOUR_CACHE_BYTES`."""
    return max(CONTOUR_CACHE_BYTES, sum(3 * g.cols * SCRATCH_TILE_ROWS * 8 for g in grids))


@contextlib.contextmanager
def contour_reading(*grids: Grid):
    """Hold what concurrent :func:`contour_lines_from_file` calls share, once, on this thread.

    GDAL's exception mode and the size of its block cache are process-wide. Two threads that
    each set them around their own call and restore them after could switch them under each
    other: the first to finish would turn exceptions off (GDAL's failures of the other would
    then pass as error codes) or give back the whole cache while the other still reads. Inside
    this block both are set once - exceptions on, the cache bounded to three tile rows of each of
    ``grids`` (at least :data:`CONTOUR_CACHE_BYTES`) - and restored once when it ends; the caller must have joined
    every thread it started by then. The calls' own :func:`gdal_exceptions` find the mode on
    and so leave it on, and they leave the cache to this block.
    """
    cache = gdal.GetCacheMax()
    with gdal_exceptions():
        gdal.SetCacheMax(min(cache, _contour_cache_bytes(*grids)))
        _READING["held"] += 1
        try:
            yield
        finally:
            _READING["held"] -= 1
            gdal.SetCacheMax(cache)


class _ThreadStop(GdalStop):
    """:class:`GdalStop` for a GDAL call on a thread other than the main one.

    Python runs signal handlers on the main thread only, so such a call needs no deferral of its
    own; holding one would keep the main thread's :meth:`GdalStop.check` from raising a signal
    received meanwhile (it raises only as the one section that holds signals). This callback
    stops GDAL when a signal was recorded or ``is_cancelled()`` says so; :meth:`check` then raises
    the recorded signal (:class:`strikeline.io.interrupt.Interrupted`, unless the main thread has
    raised it already) or :class:`CancelledError`.
    """

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        return None

    def check(self) -> None:
        raise_pending()
        if self.error is not None:
            raise self.error
        if self.stopped:
            raise CancelledError(f"{self.what}: cancelled; nothing was written")


def contour_lines_from_file(path, grid: Grid, *, interval_m=None, levels=None, base_m=0.0, any_valid: bool = True,
                            progress=None, is_cancelled=None, valid=None, sink=None) -> tuple[np.ndarray, np.ndarray]:
    """:func:`strikeline.io.contours.contour_lines` of a float64 scratch grid (:class:`StripWriter`
    with ``scratch=True``) read by GDAL's contour generator from the file, a block of lines at a
    time; the lines trimmed to the valid cell centres (:func:`strikeline.maps.contours.trim_contour_fringe`
    with a :class:`FileMask`). ``any_valid`` False (no cell holds a value) gives no lines, as an
    all-NaN array does. Returns ``(geoms, elevation_m)``, equal to the lines of the array.

    Two calls may run at once on two threads inside :func:`contour_reading` (GDAL releases
    Python's lock while it draws); a call off the main thread stops on a signal without holding
    it (:class:`_ThreadStop`). ``valid()``, when given, returns the cells' mask for the trimming
    instead (a :class:`strikeline.io.contours.ValidCells` read meanwhile on another thread).

    ``sink(wkb, levels)``, when given, receives GDAL's lines as it draws them instead, in chunks
    (ISO WKB with z, in GDAL's order, not trimmed: :func:`strikeline.io.contours._contour_band`),
    and the call returns ``None``; a failure of ``sink`` stops GDAL and is raised."""
    empty = (np.empty(0, dtype=object), np.empty(0, dtype=np.float64))
    options = _level_options(interval_m, levels, base_m)
    if not any_valid or grid.rows * grid.cols == 0:
        return empty if sink is None else None
    options += [f"NODATA={SCRATCH_NODATA:.17g}", "ID_FIELD=0", "ELEV_FIELD=1"]
    src = band = None
    held = bool(_READING["held"])
    cache = gdal.GetCacheMax()
    stopper = GdalStop if threading.current_thread() is threading.main_thread() else _ThreadStop
    with gdal_exceptions(), stopper(progress, is_cancelled, what="contour lines") as stop:
        try:
            # GDAL's generator reads the band a line at a time through the block cache, which would
            # keep up to GDAL_CACHEMAX (5% of the memory) of the file's blocks: bound it meanwhile
            # (contour_reading has bounded it for every read inside it)
            if not held:
                gdal.SetCacheMax(min(cache, _contour_cache_bytes(grid)))
            src = gdal.Open(os.fspath(path), gdal.GA_ReadOnly)
            band = src.GetRasterBand(1)
            wkb, elev = _contour_band(band, options, stop, sink)
        except RuntimeError as exc:
            stop.check()
            raise RasterReadError(
                f"contour lines ({' '.join(options[:2])}) of '{os.fspath(path)}': GDAL's contour generator failed "
                f"({gdal_message(exc)}); check the grid and the levels") from None
        finally:
            band = src = None
            if not held:
                gdal.SetCacheMax(cache)
    if sink is not None:
        return None
    if not wkb:
        return empty
    return trimmed_lines(wkb, elev, FileMask(path, grid) if valid is None else valid(), grid)


def trimmed_lines(wkb: list, levels: list, valid, grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    """GDAL's contour lines (ISO WKB with z, in its order) as 2-D shapely lines with their levels,
    trimmed to the valid cell centres (:func:`strikeline.maps.contours.trim_contour_fringe`;
    ``valid[rows, cols]`` says which cells hold values). Line by line: the lines of a chunk of
    GDAL's output are the chunk's lines of the whole output."""
    import shapely

    geoms = np.asarray(shapely.force_2d(shapely.from_wkb(np.array(wkb, dtype=object))), dtype=object)
    return trim_contour_fringe(geoms, np.asarray(levels, dtype=np.float64), valid, grid)
