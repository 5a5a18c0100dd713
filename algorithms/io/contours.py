"""Contour lines of a grid (structure contours, the zero line of a depth grid) through GDAL.

The grid is handed to GDAL's contour generator as an in-memory raster that views the numpy
array (no file), the lines are collected in an in-memory OGR layer and come back as shapely 2
LineStrings with their elevations. The checks of the levels and the trimming of the lines to
the valid cell centres need no GDAL and live in :mod:`strikeline.maps.contours`.
"""
from __future__ import annotations

import contextlib

import numpy as np
import shapely
from osgeo import gdal, gdal_array, ogr

from strikeline.errors import CancelledError, InputError, RasterReadError
from strikeline.geometry.grid import Grid, check_grid_array
from strikeline.io._gdal import gdal_exceptions, gdal_message
from strikeline.io.interrupt import GdalStop
from strikeline.maps.contours import check_contour_levels, trim_contour_fringe

__all__ = ["contour_lines", "ValidCells"]

_ELEV_FIELD = "elevation_m"


def _level_options(interval_m, levels, base_m) -> list[str]:
    """GDAL's contour options for the checked levels (:func:`check_contour_levels`)."""
    fixed, step, base = check_contour_levels(interval_m=interval_m, levels=levels, base_m=base_m)
    if fixed is not None:
        return ["FIXED_LEVELS=" + ",".join(f"{v:.17g}" for v in fixed)]
    return [f"LEVEL_INTERVAL={step:.17g}", f"LEVEL_BASE={base:.17g}"]


#: GDAL progress reports (one per raster row) between two hand-overs of the lines drawn so far
#: when :func:`_contour_band` is given a ``sink`` (our choice: the height of a scratch tile row).
HAND_OVER_ROWS = 256
#: Vertices of the lines handed over at once, at most one line beyond (our choice: a few MiB of
#: WKB, so that the lines left at the end come in pieces the two threads finish side by side).
HAND_OVER_VERTICES = 1 << 18


def _line_of(feature, wkb: list, elev: list) -> int:
    """Append a contour feature's line (ISO WKB) and level, unless its geometry is empty; returns
    its vertex count (0 when skipped)."""
    geom = feature.GetGeometryRef()
    if geom is None or geom.IsEmpty():
        return 0
    wkb.append(bytes(geom.ExportToIsoWkb()))
    elev.append(feature.GetFieldAsDouble(1))
    return geom.GetPointCount()


def _take_lines(layer, wkb: list, elev: list) -> None:
    """Append the lines of an in-memory OGR layer (ISO WKB, level) in its order (the order GDAL
    drew them)."""
    layer.ResetReading()
    for feature in layer:
        _line_of(feature, wkb, elev)


def _hand_over(layer, taken: list, sink) -> None:
    """Hand the lines in ``layer`` to ``sink(wkb, levels)`` in their order, in chunks of about
    :data:`HAND_OVER_VERTICES` vertices, each feature removed from the layer as soon as it is read
    (so the layer and its WKB are not held twice). The in-memory layer numbers the features it is
    given 0, 1, 2, ... and none is removed but here, so those left are the ``GetFeatureCount()``
    from ``taken[0]`` on, the count of those already taken."""
    wkb, elev, vertices = [], [], 0
    first = taken[0]
    for fid in range(first, first + layer.GetFeatureCount()):
        feature = layer.GetFeature(fid)
        if feature is None:
            raise RuntimeError(f"contour line {fid} is missing from GDAL's in-memory layer")
        vertices += _line_of(feature, wkb, elev)
        feature = None
        layer.DeleteFeature(fid)
        taken[0] = fid + 1
        if vertices >= HAND_OVER_VERTICES:
            sink(wkb, elev)
            wkb, elev, vertices = [], [], 0
    if wkb:
        sink(wkb, elev)


def _contour_band(band, options: list, stop: GdalStop, sink=None) -> tuple[list, list]:
    """GDAL's contour generator on a band (in memory or in a file, which GDAL reads a block of
    lines at a time): the lines as ISO WKB and their levels, in GDAL's order.

    With ``sink``, the lines go to ``sink(wkb, levels)`` as GDAL draws them instead: every
    :data:`HAND_OVER_ROWS` rows (at GDAL's progress report, between two rows) the lines it has
    finished are read from the layer, removed from it and handed over, the rest when it ends;
    the chunks in order are the lines of one call without ``sink``, which then returns empty
    lists. A failure of ``sink`` stops GDAL and is raised by ``stop.check()``."""
    out = layer = None
    try:
        out = ogr.GetDriverByName("Memory").CreateDataSource("strikeline_contours")
        layer = out.CreateLayer("contours", geom_type=ogr.wkbLineString)
        layer.CreateField(ogr.FieldDefn("id", ogr.OFTInteger))
        layer.CreateField(ogr.FieldDefn(_ELEV_FIELD, ogr.OFTReal))
        callback, taken = stop.callback, [0]
        if sink is not None:
            def hand_over() -> None:
                _hand_over(layer, taken, sink)

            def callback(complete, message=None, data=None) -> int:
                if stop.calls % HAND_OVER_ROWS == 0 and layer.GetFeatureCount() and not stop.stopped:
                    try:
                        hand_over()
                    except BaseException as exc:  # noqa: BLE001 - GDAL's bindings would print and swallow it
                        stop.error = exc
                        return 0
                return stop.callback(complete, message, data)
        gdal.ContourGenerateEx(band, layer, options=options, callback=callback)
        stop.check()
        wkb, elev = [], []
        if sink is not None:
            hand_over()
            return wkb, elev
        _take_lines(layer, wkb, elev)
        return wkb, elev
    finally:
        layer = out = None


def contour_lines(array, grid: Grid, *, interval_m=None, levels=None, base_m=0.0,
                  trim_fringe=True, progress=None, is_cancelled=None) -> tuple[np.ndarray, np.ndarray]:
    """Contour lines of a grid, generated by GDAL's contour generator.

    Parameters
    ----------
    array : ndarray, shape ``(rows, cols)``, float
        Values in metres (a modelled surface, a depth grid), NaN for nodata.
    grid : strikeline.geometry.grid.Grid
        Georeferencing of ``array`` (its shape must match).
    interval_m : float, optional
        Spacing of the levels: contours at ``base_m + k * interval_m`` for every integer ``k``
        within the data range.
    levels : sequence of float, optional
        Fixed levels instead of an interval, e.g. ``[0.0]`` for the zero line of a depth
        grid. Takes precedence over ``interval_m`` when both are given.
    base_m : float, default 0.0
        Offset of the interval levels.
    trim_fringe : bool, default True
        Keep only the parts of the lines that are interpolated between valid cell centres
        (see Notes). ``False`` returns GDAL's lines unchanged.
    progress : callable(fraction), optional
        Called with the fraction of the grid GDAL has contoured.
    is_cancelled : callable() -> bool, optional
        Polled at each of GDAL's progress reports; true stops the generator at once.

    Returns
    -------
    geoms : ndarray of object, shape ``(n,)``
        shapely ``LineString`` objects, one per connected piece of line, in the grid's CRS.
    elevation_m : ndarray of float64, shape ``(n,)``
        The level of each line.

    Raises
    ------
    InputError
        The array is not 2-D float of the grid's shape; neither ``interval_m`` nor ``levels``
        is given; an interval that is not a positive finite number; non-finite levels.
    RasterReadError
        GDAL's contour generator fails (its own message is included).
    CancelledError, strikeline.io.interrupt.Interrupted
        ``is_cancelled()`` said so, or SIGINT/SIGTERM arrived while signals are exceptions
        (:func:`strikeline.io.interrupt.signals_as_exceptions`): GDAL stops at its next progress
        report instead of finishing the grid.

    Notes
    -----
    GDAL's generator (marching squares since GDAL 2.4) treats cell values as samples at cell
    centres and interpolates linearly between neighbouring centres. Each GDAL feature is one
    ``LineString``; a closed contour has equal first and last vertices. NaN cells are
    passed to GDAL as a nodata sentinel, so no contour crosses a nodata region.

    Beyond the outermost valid centres, that is in the half-cell strip along the raster edge
    and around nodata, GDAL extends each line to the cell edge with extrapolated values; those
    end pieces are off the interpolated surface by up to half a cell times its slope. With
    ``trim_fringe`` (the default) every vertex that is not a linear interpolation between
    valid centres is dropped and a line is split where it leaves the data, so lines stop on
    the outermost line of valid centres and every returned vertex lies on the surface that the
    grid samples. A split line gives several entries with the same elevation.

    GDAL's exception mode is enabled only for the duration of the call and then restored
    (:func:`strikeline.io._gdal.gdal_exceptions`).

    References
    ----------
    GDAL/OGR contributors. *GDAL/OGR Geospatial Data Abstraction software Library*, Open
    Source Geospatial Foundation, https://gdal.org (``GDALContourGenerateEx``, alg/contour.cpp).

    Examples
    --------
    >>> import numpy as np
    >>> from strikeline.geometry.grid import Grid, check_grid_array
    >>> g = Grid((0.0, 10.0, 0.0, 100.0, 0.0, -10.0), (10, 10))
    >>> x, _ = g.mesh()
    >>> geoms, elev = contour_lines(x.copy(), g, interval_m=20.0)
    >>> elev.tolist()
    [20.0, 40.0, 60.0, 80.0]
    >>> sorted({round(x, 3) for x, _ in geoms[0].coords})   # a contour runs north-south
    [20.0]
    """
    z = check_grid_array(array, grid, "contour input")
    options = _level_options(interval_m, levels, base_m)
    if z.dtype not in (np.float32, np.float64):
        z = z.astype(np.float64)
    nan_mask = np.isnan(z)
    empty = (np.empty(0, dtype=object), np.empty(0, dtype=np.float64))
    if nan_mask.all() or z.size == 0:
        return empty
    # A sentinel below every finite value of the dtype: it cannot collide with data.
    sentinel = float(np.finfo(z.dtype).min)
    if np.any(z == sentinel):
        raise InputError(
            f"contour input contains the value {sentinel}, which is reserved as nodata; "
            "set nodata cells to NaN instead"
        )
    if nan_mask.any():
        z = np.where(nan_mask, z.dtype.type(sentinel), z)
    z = np.ascontiguousarray(z)
    options += [f"NODATA={sentinel:.17g}", "ID_FIELD=0", "ELEV_FIELD=1"]

    src = band = None
    with gdal_exceptions(), GdalStop(progress, is_cancelled, what="contour lines") as stop:
        try:
            # GDAL's NUMPY driver: an in-memory raster that views the array (no copy).
            src = gdal_array.OpenArray(z)
            src.SetGeoTransform(grid.transform)
            band = src.GetRasterBand(1)
            band.SetNoDataValue(sentinel)
            wkb, elev = _contour_band(band, options, stop)
        except RuntimeError as exc:
            stop.check()  # GDAL failed because it was asked to stop
            raise RasterReadError(
                f"contour lines ({' '.join(options[:2])}): GDAL's contour generator failed "
                f"({gdal_message(exc)}); check the grid and the levels"
            ) from None
        finally:
            band = src = None
    if not wkb:
        return empty
    geoms = shapely.from_wkb(np.array(wkb, dtype=object))
    geoms = np.asarray(shapely.force_2d(geoms), dtype=object)
    elevation = np.asarray(elev, dtype=np.float64)
    if trim_fringe:
        geoms, elevation = trim_contour_fringe(geoms, elevation, ~nan_mask, grid)
    return geoms, elevation


#: Side of the square blocks of cells :class:`ValidCells` sums up, and the rows of the windows it
#: reads (our choice: the bands of the fringe check, :mod:`strikeline.maps.contours`).
VALID_BLOCK = 256
#: Width in blocks of the windows :class:`ValidCells` reads: 4 MiB of float64 (our choice, as
#: :class:`strikeline.io.gridfiles.FileMask`'s windows).
VALID_WINDOW_BLOCKS = 8
#: Most bytes of the masks of partly valid blocks :class:`ValidCells` keeps; the cells of the
#: blocks beyond are looked up in the file when asked (our choice).
VALID_KEEP_BYTES = 32 * 2**20

_NONE, _ALL, _KEPT, _ASK = 0, 1, 2, 3


@contextlib.contextmanager
def band_for_reading(path: str, what: str):
    """``(band, nodata)`` of the first band of the raster ``path``, open for reading in GDAL's
    exception mode; a failure of GDAL inside raises the one-line
    :class:`~strikeline.errors.RasterReadError` "could not read ``what``"."""
    with gdal_exceptions():
        ds = band = None
        try:
            ds = gdal.Open(path, gdal.GA_ReadOnly)
            band = ds.GetRasterBand(1)
            yield band, band.GetNoDataValue()
        except RuntimeError as exc:
            raise RasterReadError(f"'{path}': GDAL could not read {what} ({gdal_message(exc)})") from None
        finally:
            band = ds = None


def valid_in_window(band, nodata, r0: int, r1: int, c0: int, c1: int) -> np.ndarray:
    """Which cells of rows ``r0:r1`` and columns ``c0:c1`` of a GDAL ``band`` hold a value: the
    test of :func:`strikeline.io.gridfiles.read_window` (float64, nodata and non-finite values
    hold none). The window's tiles are dropped from GDAL's block cache after, so it keeps no more
    than one window."""
    win = band.ReadAsArray(c0, r0, c1 - c0, r1 - r0).astype(np.float64, copy=False)
    band.FlushCache()
    ok = np.isfinite(win)
    if nodata is not None:
        ok &= win != nodata
    return ok


class ValidCells:
    """Whether cells of a band in a file hold a value, read once ahead of the look-ups.

    ``valid[rows, cols]`` with integer arrays of cell indices gives a bool array, as indexing a
    boolean array of the band's shape (and as :class:`strikeline.io.gridfiles.FileMask`, which
    reads the file at each look-up). The band is read once, window by window (each window then
    dropped from GDAL's block cache), and kept as a summary: one flag for each square block of
    :data:`VALID_BLOCK` cells that holds values everywhere or nowhere, the block's own boolean
    mask where it is partly valid (up to ``keep_bytes`` of them; the look-ups in blocks beyond
    go to ``fallback[rows, cols]``, which reads the file). Made on one thread while another
    draws contour lines from the same file, it leaves the drawing thread nothing to read after.

    A cell holds a value when it is finite and not the band's nodata (the test of
    :func:`strikeline.io.gridfiles.read_window`). ``is_cancelled()`` is asked before each window;
    true raises :class:`strikeline.errors.CancelledError`.
    """

    def __init__(self, path, grid: Grid, *, fallback=None, is_cancelled=None, block: int = VALID_BLOCK,
                 keep_bytes: int = VALID_KEEP_BYTES):
        self.path, self.shape, self.block = str(path), tuple(grid.shape), int(block)
        rows, cols = self.shape
        b = self.block
        self.state = np.full((-(-rows // b), -(-cols // b)), _ASK, dtype=np.int8)
        self.kept: dict = {}
        self.fallback = fallback
        kept_bytes = 0
        width = b * VALID_WINDOW_BLOCKS
        with band_for_reading(self.path, "which cells hold values") as (band, nodata):
            for r0 in range(0, rows, b):
                for c0 in range(0, cols, width):
                    if is_cancelled is not None and is_cancelled():
                        raise CancelledError(f"reading which cells of '{self.path}' hold values: cancelled")
                    r1, c1 = min(r0 + b, rows), min(c0 + width, cols)
                    ok = valid_in_window(band, nodata, r0, r1, c0, c1)
                    for k0 in range(c0, c1, b):
                        part = ok[:, k0 - c0:min(k0 + b, c1) - c0]
                        key = (r0 // b, k0 // b)
                        if part.all():
                            self.state[key] = _ALL
                        elif not part.any():
                            self.state[key] = _NONE
                        elif kept_bytes + part.size <= keep_bytes:
                            self.state[key] = _KEPT
                            self.kept[key] = part.copy()
                            kept_bytes += part.size

    def __getitem__(self, key) -> np.ndarray:
        r, c = (np.asarray(k, dtype=np.int64) for k in key)
        r, c = np.broadcast_arrays(r, c)
        rf, cf = r.ravel(), c.ravel()
        b = self.block
        br, bc = rf // b, cf // b
        state = self.state[br, bc]
        out = state == _ALL
        kept = np.flatnonzero(state == _KEPT)
        if len(kept):
            block_id = br[kept] * self.state.shape[1] + bc[kept]
            order = np.argsort(block_id, kind="stable")
            cuts = np.flatnonzero(np.diff(block_id[order])) + 1
            for idx in np.split(kept[order], cuts):
                i, j = int(br[idx[0]]), int(bc[idx[0]])
                out[idx] = self.kept[(i, j)][rf[idx] - i * b, cf[idx] - j * b]
        ask = np.flatnonzero(state == _ASK)
        if len(ask):
            if self.fallback is None:
                raise RasterReadError(f"'{self.path}': cells outside the summary of which cells hold values "
                                      "were asked and there is no file look-up to ask")
            out[ask] = np.asarray(self.fallback[rf[ask], cf[ask]], dtype=bool)
        return out.reshape(r.shape)
