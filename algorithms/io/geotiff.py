"""Writing strikeline's float32 GeoTIFFs: whole arrays or window by window, several files at once.

Compression
-----------
DEFLATE level 1 with the floating-point predictor (``PREDICTOR=3``), 256 x 256 tiles. Measured on
five 4,000 x 4,000 grids of a run (surface, dip, dip direction, depth, uncertainty; GDAL 3.6,
``bench/bench_writes.py``): DEFLATE level 6 (GDAL's default) wrote them in 10.8 s into 38.8 MiB,
level 1 in 6.3 s into 45.0 MiB (+16 % size, 42 % less time); ZSTD level 1 was no faster (6.6 s,
45.9 MiB) and ZSTD level 9 no smaller than DEFLATE 6 worth its time; LZW 7.1 s, 88.6 MiB. DEFLATE
is read by every GeoTIFF reader (libtiff, GDAL of any version, QGIS, ArcGIS), ZSTD only by
readers built with it, so DEFLATE 1 is the trade: most of the time saved for a sixth more disk.
The pixel values do not depend on the compression.
"""
from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np
from osgeo import gdal

from strikeline.errors import OutputError
from strikeline.geometry.grid import Grid
from strikeline.io._gdal import gdal_exceptions, gdal_message, quiet_close
from strikeline.io.interrupt import GdalStop

#: Nodata written into strikeline's own float32 GeoTIFFs.
NODATA_OUT = -99999.0
#: GDAL creation options of every GeoTIFF strikeline writes (the module docstring: why).
CREATION_OPTIONS = ("COMPRESS=DEFLATE", "ZLEVEL=1", "PREDICTOR=3", "TILED=YES", "BLOCKXSIZE=256",
                    "BLOCKYSIZE=256", "BIGTIFF=IF_SAFER")
#: Cells converted to float32 at a time (a block of rows; bounds the extra memory of a write).
_CONVERT_CELLS = 1 << 22  # rounded to whole rows of tiles


@dataclass(frozen=True)
class RasterOut:
    """One GeoTIFF to write with :func:`write_geotiffs`: its path, values (``grid.shape``, NaN for
    nodata), band description and unit (``None``: unitless)."""

    path: object
    array: object
    description: str
    unit: str | None


class GeoTiffWriter:
    """A float32 GeoTIFF of ``grid`` written window by window, then closed, checked and renamed.

    Values go to ``path + '.part'``; :meth:`close` checks GDAL's close (GDAL 3.6's ``ds = None``
    reports a failure only as its last error), then opens the file again (:meth:`_check`) and
    only then renames it to ``path``; :meth:`discard` removes the part file. Not thread-safe by
    itself: one writer per thread, and the caller holds GDAL's exception mode
    (:func:`strikeline.io._gdal.gdal_exceptions`) around its use.
    """

    def __init__(self, path, grid: Grid, *, description: str, unit: str | None, nodata: float = NODATA_OUT):
        self.path = os.fspath(path)
        self.tmp = self.path + ".part"
        self.grid = grid
        self.description = description
        self.unit = unit or ""
        self.nodata = float(nodata)
        self.rows, self.cols = grid.shape
        self.tile = 256
        # the first and last tiles of the file, kept as written to compare after reading back
        self._keep = {(0, 0): None, ((self.rows - 1) // self.tile, (self.cols - 1) // self.tile): None}
        self._expect = {k: np.full(self._tile_shape(*k), np.nan, dtype=np.float32) for k in self._keep}
        self.ds = gdal.GetDriverByName("GTiff").Create(self.tmp, self.cols, self.rows, 1, gdal.GDT_Float32,
                                                       options=list(CREATION_OPTIONS))
        self.ds.SetGeoTransform(grid.transform)
        if grid.crs_wkt:
            self.ds.SetProjection(grid.crs_wkt)
        self.band = self.ds.GetRasterBand(1)
        self.band.SetNoDataValue(self.nodata)
        self.band.SetDescription(description)
        self.band.SetUnitType(self.unit)

    def _tile_shape(self, tr, tc):
        return (min(self.tile, self.rows - tr * self.tile), min(self.tile, self.cols - tc * self.tile))

    def write(self, array, *, row0: int = 0, col0: int = 0, callback=None) -> None:
        """Write ``array`` (any float dtype, NaN and infinities for nodata) with its top-left
        cell at ``(row0, col0)``, converted to float32 a block of rows at a time (no whole
        float32 copy)."""
        a = np.asarray(array)
        if a.ndim != 2 or row0 < 0 or col0 < 0 or row0 + a.shape[0] > self.rows or col0 + a.shape[1] > self.cols:
            raise OutputError(f"'{self.path}': array shape {a.shape} at row {row0}, column {col0} does not fit "
                              f"the grid {self.grid.shape}")
        # whole rows of tiles where the window starts on one, so that GDAL compresses and places
        # the tiles in the order of a whole-array write (the same file, byte for byte)
        step = max(self.tile, _CONVERT_CELLS // max(a.shape[1], 1) // self.tile * self.tile)
        for r in range(0, a.shape[0], step):
            with np.errstate(over="ignore"):  # beyond float32's range: infinite, so nodata
                block = a[r:r + step].astype(np.float32)
            block[~np.isfinite(block)] = np.float32(self.nodata)
            self.band.WriteArray(block, col0, row0 + r, callback=callback)
            self._remember(block, row0 + r, col0)

    def _remember(self, block, r0, c0):
        for (tr, tc), want in self._expect.items():
            y0, x0 = tr * self.tile, tc * self.tile
            ya, yb = max(y0, r0), min(y0 + want.shape[0], r0 + block.shape[0])
            xa, xb = max(x0, c0), min(x0 + want.shape[1], c0 + block.shape[1])
            if ya < yb and xa < xb:
                want[ya - y0:yb - y0, xa - x0:xb - x0] = block[ya - r0:yb - r0, xa - c0:xb - c0]

    def close(self) -> None:
        """Flush, close (checked), check the file read back and rename it into place."""
        self.band.FlushCache()
        self.ds.FlushCache()
        self.band = None
        gdal.ErrorReset()
        self.ds = None  # closes the file; GDAL 3.6 reports a failure here only as its last error
        if gdal.GetLastErrorType() >= gdal.CE_Failure:
            raise RuntimeError(gdal.GetLastErrorMsg())
        self._check()
        os.replace(self.tmp, self.path)

    def discard(self) -> None:
        """Drop the dataset and remove the part file (a failed or stopped write)."""
        with quiet_close():
            self.band = self.ds = None
        if os.path.exists(self.tmp):
            os.remove(self.tmp)

    def _check(self) -> None:
        """Open the file just written and compare it with what was meant: every tile's bytes lie
        inside the file (a truncated file fails), the first and last tiles decode to the values
        written, and the size, nodata, description and unit are those set. Reading two tiles
        instead of the whole band keeps the check cheap (a full read-back decodes every tile,
        about two thirds of the write's own time)."""
        ds = gdal.Open(self.tmp, gdal.GA_ReadOnly)
        try:
            b = ds.GetRasterBand(1)
            size = os.path.getsize(self.tmp)
            ok = (ds.RasterXSize, ds.RasterYSize) == (self.cols, self.rows) and b.GetNoDataValue() == self.nodata
            ok = ok and b.GetDescription() == self.description and (b.GetUnitType() or "") == self.unit
            ok = ok and tile_cut_short(b, size) is None
            for (tr, tc), want in self._expect.items():
                if not ok:
                    break
                got = b.ReadAsArray(tc * self.tile, tr * self.tile, want.shape[1], want.shape[0])
                written = ~np.isnan(want)
                ok = got is not None and np.array_equal(got[written].view(np.uint32), want[written].view(np.uint32))
            if not ok:
                raise RuntimeError("the file read back differs from what was written")
        finally:
            b = ds = None


def tile_cut_short(band, size: int) -> tuple[int, int] | None:
    """The first tile ``(tx, ty)`` of a GeoTIFF band whose bytes are missing or lie beyond the
    file's ``size`` (GDAL's TIFF metadata ``BLOCK_OFFSET_x_y`` / ``BLOCK_SIZE_x_y``), else None:
    the cheap half of the check of a file just written (a truncated file fails)."""
    tw, th = band.GetBlockSize()
    for ty in range(-(-band.YSize // th)):
        for tx in range(-(-band.XSize // tw)):
            off = band.GetMetadataItem(f"BLOCK_OFFSET_{tx}_{ty}", "TIFF")
            n = band.GetMetadataItem(f"BLOCK_SIZE_{tx}_{ty}", "TIFF")
            if not off or not n or int(n) <= 0 or int(off) + int(n) > size:
                return tx, ty
    return None


def _write_one(item: RasterOut, grid: Grid, nodata: float, stop: GdalStop | None) -> None:
    a = np.asarray(item.array)
    path = os.fspath(item.path)
    if a.shape != grid.shape:
        raise OutputError(f"'{path}': array shape {a.shape} does not match the grid {grid.shape}")
    w = None
    try:
        w = GeoTiffWriter(path, grid, description=item.description, unit=item.unit, nodata=nodata)
        w.write(a, callback=None if stop is None else stop.callback)
        if stop is not None and stop.stopped:
            raise RuntimeError("stopped")
        w.close()
    except BaseException as exc:
        if w is not None:
            w.discard()
        elif os.path.exists(path + ".part"):
            os.remove(path + ".part")
        if stop is not None and stop.stopped:
            raise _Stopped() from None
        if isinstance(exc, RuntimeError):
            raise OutputError(f"'{path}': GDAL could not write it ({gdal_message(exc)}); free some space or "
                              "choose another folder") from None
        raise


class _Stopped(Exception):
    """A write stopped by GDAL's callback on request (raised as the request's own error)."""


def write_geotiffs(items, grid: Grid, *, nodata: float = NODATA_OUT, workers: int | None = None,
                   progress=None, is_cancelled=None) -> None:
    """Write several float32 GeoTIFFs of one grid, ``workers`` files at a time (threads: GDAL
    compresses and writes without Python's lock), each as :func:`write_geotiff` does.

    Parameters
    ----------
    items : sequence of RasterOut
    grid : strikeline.geometry.grid.Grid
    nodata : float
    workers : int, optional
        Files written at once; default: the CPUs, at most 4. The files do not depend on it.
    progress : callable, optional
        Called with the fraction of files written.
    is_cancelled : callable, optional
        Polled during GDAL's writes; true stops them (SIGINT/SIGTERM too).

    Raises
    ------
    OutputError
        A file could not be written or read back as written (the first failure in ``items``
        order); the files of the other items that were completed stay (the caller writes into a
        temporary folder, :func:`strikeline.io.files.output_folder`).
    CancelledError, strikeline.io.interrupt.Interrupted
        Stopped on request; no part file is left.
    """
    items = list(items)
    workers = max(1, int(workers)) if workers is not None else max(1, min(4, os.cpu_count() or 1))
    with gdal_exceptions(), GdalStop(None, is_cancelled, what="writing the GeoTIFFs") as stop:
        try:
            if workers == 1 or len(items) < 2:
                for k, item in enumerate(items):
                    _write_one(item, grid, nodata, stop)
                    if progress is not None:
                        progress((k + 1) / len(items))
            else:
                with ThreadPoolExecutor(max_workers=min(workers, len(items))) as pool:
                    futures = [pool.submit(_write_one, item, grid, nodata, stop) for item in items]
                    first = None
                    for k, f in enumerate(futures):
                        try:
                            f.result()
                        except BaseException as exc:  # noqa: BLE001 - the first failure is raised below
                            first = first or exc
                            if not isinstance(exc, _Stopped):  # stops the other writes at their next block
                                stop.error = stop.error or exc
                        if progress is not None and first is None:
                            progress((k + 1) / len(items))
                    if first is not None:
                        raise first
        except _Stopped:
            stop.check()
            raise
        stop.check()


def write_geotiff(path, array, grid: Grid, *, description: str, unit: str | None,
                  nodata: float = NODATA_OUT, progress=None, is_cancelled=None) -> None:
    """Write a float32 GeoTIFF (DEFLATE level 1 with the floating-point predictor, tiled; the
    module docstring gives the measured trade) with CRS, nodata, band description and unit.

    Parameters
    ----------
    path : str or PathLike
    array : ndarray, shape ``grid.shape``
        Values (any float dtype; converted to float32 a block of rows at a time); NaN and
        infinities become ``nodata``.
    grid : strikeline.geometry.grid.Grid
    description : str
        What the band holds (GDAL's band description, shown by QGIS and ``gdalinfo``); strikeline
        passes the meaning of the raster's :mod:`strikeline.vocabulary` entry.
    unit : str or None
        The unit of the values (GDAL's band unit type: ``"m"``, ``"deg"``); ``None`` for a
        unitless band.
    nodata : float
    progress, is_cancelled : callable, optional
        Progress (fraction) of GDAL's write and a poll that stops it; SIGINT/SIGTERM stop it too
        (:class:`strikeline.io.interrupt.GdalStop`).

    Raises
    ------
    OutputError
        GDAL could not write, flush or close the file (a full disk among others: GDAL's message
        is included), or the file read back differs from what was written.
    CancelledError, strikeline.io.interrupt.Interrupted
        Stopped on request; nothing is left at ``path``.

    Notes
    -----
    The file is written under a temporary name, closed, checked (GDAL's last error after the
    close; then opened again: every tile inside the file, the first and last tiles' values, the
    description and unit; :class:`GeoTiffWriter`) and only then renamed into place, so a failed
    write leaves nothing at ``path``. For windows of a grid, use :class:`GeoTiffWriter`.
    """
    item = RasterOut(path, array, description, unit)
    with gdal_exceptions(), GdalStop(progress, is_cancelled, what=f"writing '{os.fspath(path)}'") as stop:
        try:
            _write_one(item, grid, nodata, stop)
        except _Stopped:
            stop.check()
            raise
        stop.check()
