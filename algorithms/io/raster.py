"""Reading and writing rasters (GeoTIFF) through GDAL.

Rasters come back as ``(array, grid)``: a float64 array with NaN for nodata and a
:class:`strikeline.geometry.grid.Grid` carrying geotransform, CRS WKT and the band's nodata value.
"""
from __future__ import annotations

import os
from contextlib import contextmanager

import numpy as np
from osgeo import gdal

from strikeline.budget import budget_words, memory_budget_bytes, size_words
from strikeline.errors import InputError, RasterReadError
from strikeline.geometry.grid import Grid
from strikeline.io._gdal import gdal_exceptions, gdal_message
from strikeline.io.crs import require_projected_metres

# Writing lives in strikeline.io.geotiff; its names stay importable from here.
from strikeline.io.geotiff import NODATA_OUT, write_geotiff  # noqa: E402,F401


def read_raster(path, *, label: str = "raster", band: int = 1) -> tuple[np.ndarray, Grid]:
    """Read one band of a raster as float64 with NaN for nodata.

    Parameters
    ----------
    path : str or PathLike
    label : str
        How to name the raster in messages (``"DEM"``).
    band : int

    Raises
    ------
    InputError
        Missing file, or a band that holds no valid cell.
    RasterReadError
        GDAL cannot open or read the file (GDAL's message is included).
    CRSError
        The raster has no CRS, or its CRS is geographic or not in metres.
    """
    path = os.fspath(path)
    with checked_band(path, band=band, label=label) as (b, grid, what):
        gt, shape, wkt, nodata = grid.transform, grid.shape, grid.crs_wkt, grid.nodata
        need = shape[0] * shape[1] * (gdal.GetDataTypeSize(b.DataType) // 8 + 16)
        if need > memory_budget_bytes():
            raise InputError(
                f"{what} has {shape[1]} x {shape[0]} cells, which need about {size_words(need)} to read, "
                f"more than this run's memory budget of {budget_words()}; clip it to the area of the "
                "contacts (gdalwarp -te) or coarsen it (gdalwarp -tr)"
            )
        try:
            # the band's own type (float64 once, in raster_from_array); tiles decoded on every CPU
            previous = gdal.GetThreadLocalConfigOption("GDAL_NUM_THREADS", None)
            gdal.SetThreadLocalConfigOption("GDAL_NUM_THREADS", "ALL_CPUS")
            try:
                arr = b.ReadAsArray()
            finally:
                gdal.SetThreadLocalConfigOption("GDAL_NUM_THREADS", previous)
        except RuntimeError as exc:
            raise RasterReadError(f"{what}: GDAL could not read band {band} ({gdal_message(exc)})") from None
        del b
    return raster_from_array(arr, _grid(gt, shape, wkt, nodata, what=what), what=what, crs_checked=True,
                             path=path)


@contextmanager
def checked_band(path, *, band: int = 1, label: str = "raster"):
    """``(band object, checked Grid, "label 'path'")`` of a raster opened read-only, with
    :func:`checked_grid`'s checks and messages, inside ``gdal_exceptions()``; the dataset is
    released when the block ends (callers drop the band object before it ends)."""
    path = os.fspath(path)
    what = f"{label} '{path}'"
    with gdal_exceptions():
        ds = open_raster(path, label=label)
        try:
            grid = checked_grid(ds, band, what=what, path=path)
            yield ds.GetRasterBand(band), grid, what
        finally:
            ds = None


def raster_grid(path, *, label: str = "raster", band: int = 1) -> Grid:
    """The georeferencing of a raster (:class:`~strikeline.geometry.grid.Grid`), checked as
    :func:`read_raster` checks it (the same messages), without reading a cell: a raster of any
    size is placed in the same small memory (the batch index's footprints and shared edges).
    :func:`strikeline.io.demfile.raster_shape` gives only the shape, unchecked."""
    with checked_band(path, band=band, label=label) as (b, grid, _):
        del b
    return grid


def open_raster(path, *, label: str = "raster"):
    """A GDAL dataset of the raster at ``path``, opened read-only (call inside ``gdal_exceptions()``).

    The one opener of :func:`read_raster`, :class:`strikeline.io.demfile.DemFile` and
    :mod:`strikeline.io.sampling`, so that every reader says the same of a missing or unreadable file.

    Raises
    ------
    InputError
        The file does not exist.
    RasterReadError
        GDAL cannot open it (GDAL's message is included).
    """
    path = os.fspath(path)
    what = f"{label} '{path}'"
    if not os.path.exists(path):
        raise InputError(f"{what}: file not found; check the path")
    try:
        return gdal.Open(path, gdal.GA_ReadOnly)
    except RuntimeError as exc:
        raise RasterReadError(
            f"{what}: GDAL cannot open it as a raster ({gdal_message(exc)}); give a GeoTIFF or "
            "another raster format GDAL reads"
        ) from None


def checked_grid(ds, band: int, *, what: str, path: str) -> Grid:
    """The :class:`Grid` of one band of an open dataset (its nodata the band's), after the checks of
    :func:`read_raster`: the band exists and holds elevations, georeferencing, a projected CRS in metres."""
    if band > ds.RasterCount:
        raise InputError(f"{what} has {ds.RasterCount} band(s), band {band} was asked for")
    _require_elevation_band(ds, band, what=what, path=path)
    gt = ds.GetGeoTransform(can_return_null=True)
    if gt is None:
        raise InputError(f"{what} has no georeferencing; georeference it and try again")
    wkt = ds.GetProjection() or ""
    shape = (ds.RasterYSize, ds.RasterXSize)
    require_projected_metres(wkt, what=what, centre_xy=_centre(_grid(gt, shape, wkt, None, what=what)))
    return _grid(gt, shape, wkt, ds.GetRasterBand(band).GetNoDataValue(), what=what)


def as_float(array, nodata) -> np.ndarray:
    """A band as float64 with NaN for ``nodata`` and for non-finite cells (a copy): the conversion of
    every reader, so that a window of a raster holds the very values of the whole band read at once."""
    arr = np.array(array, dtype=np.float64)
    if nodata is not None:
        arr[arr == nodata] = np.nan
    arr[~np.isfinite(arr)] = np.nan
    return arr


def _grid(gt, shape, wkt, nodata, *, what: str) -> Grid:
    """The band's :class:`Grid`; a rotated, sheared or south-up geotransform is refused naming the file."""
    try:
        return Grid(gt, shape, wkt, nodata)
    except InputError as exc:
        raise InputError(f"{what}: {exc}") from None


#: Band colour interpretations that mark a picture, not a surface.
_PICTURE_BANDS = {gdal.GCI_RedBand: "red", gdal.GCI_GreenBand: "green", gdal.GCI_BlueBand: "blue",
                  gdal.GCI_AlphaBand: "alpha", gdal.GCI_PaletteIndex: "palette index"}
_ELEVATION_FIX = "a DEM must be a single band of elevations (Int16, Float32, ...)"


def _require_elevation_band(ds, band: int, *, what: str, path: str) -> None:
    """Refuse a raster that is not a single band of elevations: several bands (an RGB picture), a
    colour table (a palette picture or a classified map), or 8-bit data (0-255)."""
    if ds.RasterCount > 1:
        kinds = [_PICTURE_BANDS.get(ds.GetRasterBand(i).GetColorInterpretation())
                 for i in range(1, ds.RasterCount + 1)]
        said = f" ({', '.join(kinds)}: a picture)" if all(kinds) else ""
        raise InputError(
            f"{what} has {ds.RasterCount} bands{said}; {_ELEVATION_FIX} - give the elevation raster, or "
            f"extract its elevation band with gdal_translate -b N '{path}' dem.tif"
        )
    b = ds.GetRasterBand(band)
    if b.GetColorTable() is not None or b.GetColorInterpretation() == gdal.GCI_PaletteIndex:
        raise InputError(
            f"{what}: band {band} has a colour table (a palette picture or a classified map, not "
            f"elevations); {_ELEVATION_FIX} - give the elevation raster itself"
        )
    if b.DataType in _EIGHT_BIT:
        raise InputError(
            f"{what}: band {band} holds {gdal.GetDataTypeName(b.DataType)} data (8-bit whole numbers, "
            f"{'0 to 255' if b.DataType == gdal.GDT_Byte else '-128 to 127'}: a picture, a hillshade or a "
            f"classification, not elevations); {_ELEVATION_FIX} - give the elevation raster itself"
        )


_EIGHT_BIT = {gdal.GDT_Byte} | ({gdal.GDT_Int8} if hasattr(gdal, "GDT_Int8") else set())
#: Values GIS software writes into cells without data (common practice): -9999 and -99999 (ASCII
#: grids, many DEM producers), -32768 and -32767 (signed 16-bit voids, e.g. SRTM), and the lowest
#: float32 (-3.4028235e38, written by ArcGIS). Cells equal to one of them, or beyond
#: :data:`SENTINEL_ABS_LIMIT`, are holes, never elevations.
NODATA_SENTINELS = (-9999.0, -99999.0, -32768.0, -32767.0, float(np.finfo(np.float32).min))
#: Any cell whose absolute value reaches this is a marker, not an elevation (our choice).
SENTINEL_ABS_LIMIT = 1e30


def _undeclared_holes(arr: np.ndarray, nodata) -> tuple[float, int] | None:
    """The most frequent nodata marker among the cells (other than the declared ``nodata``) and its count.

    Counted a block of rows at a time, so that the comparisons' temporaries stay small."""
    return HoleCount(nodata).add(arr).result()


#: ``value_range`` not given (:meth:`HoleCount.add` works it out).
_UNKNOWN = object()


def valid_range(array, nodata) -> tuple[float, float] | None:
    """The lowest and highest valid cell of ``array`` (finite and not ``nodata``) as floats, or
    None when it has no valid cell: ``nanmin``/``nanmax`` of :func:`as_float`'s array, found
    without the float64 copy.

    A float32 or float64 array is searched in its own type (float32 to float64 is exact, so its
    extremes are the copy's): NaN-ignoring reductions (``np.fmin``/``np.fmax``) first, and only
    when an extreme is infinite or the nodata value itself, again over the valid cells. A
    ``nodata`` that float32 cannot hold exactly equals no float32 cell read as float64, as in
    :func:`as_float`. Other types are converted to float64 first, as :func:`as_float` does.

    >>> valid_range(np.array([[3.0, -9999.0], [np.nan, 7.5]], dtype=np.float32), -9999.0)
    (3.0, 7.5)
    >>> valid_range(np.array([np.inf, 1.0e-40]), 1.0e-40) is None
    True
    """
    a = np.asarray(array)
    if a.dtype not in (np.float32, np.float64):
        a = a.astype(np.float64)
    if a.size == 0:
        return None
    nd = None if nodata is None or not np.isfinite(nodata) else float(nodata)
    if nd is not None and a.dtype == np.float32:
        with np.errstate(over="ignore"):
            nd = nd if float(np.float32(nd)) == nd else None  # no float32 cell equals it
    lo, hi = np.fmin.reduce(a, axis=None), np.fmax.reduce(a, axis=None)
    if np.isfinite(lo) and np.isfinite(hi) and (nd is None or (lo != nd and hi != nd)):
        return float(lo), float(hi)
    ok = np.isfinite(a)
    if nd is not None:
        ok &= a != a.dtype.type(nd)
    if not ok.any():
        return None
    return float(np.min(a, where=ok, initial=np.inf)), float(np.max(a, where=ok, initial=-np.inf))


class HoleCount:
    """Counts of the nodata markers (:data:`NODATA_SENTINELS`, other than the declared ``nodata``,
    and values beyond :data:`SENTINEL_ABS_LIMIT`) over the pieces of a band given to :meth:`add`;
    :meth:`result` is that of :func:`_undeclared_holes` on the whole band."""

    def __init__(self, nodata):
        self.nodata = nodata
        self.sentinels = [v for v in NODATA_SENTINELS if nodata is None or v != nodata]
        self.counts = dict.fromkeys(self.sentinels, 0)
        self.n_huge, self.first_huge = 0, None

    def add(self, arr: np.ndarray, *, value_range=_UNKNOWN) -> "HoleCount":
        """Count the cells of ``arr`` (a band or a strip of it, in the band's own values or as
        float64), a block of rows at a time so that the comparisons' temporaries stay small.

        Every marker is a valid cell (finite, not the declared nodata) equal to a sentinel or
        beyond :data:`SENTINEL_ABS_LIMIT`, so when no sentinel lies within the valid cells' range
        and the range stays inside the limit there is nothing to count: ``value_range`` is that
        range (:func:`valid_range` of ``arr``, None for no valid cell), worked out here when not
        given. Only a piece whose range could hold a marker is compared cell by cell (as float64)."""
        if value_range is _UNKNOWN:
            value_range = valid_range(arr, self.nodata)
        if value_range is None or not self.could_hold_markers(*value_range):
            return self
        nodata, counts = self.nodata, self.counts
        flat = arr.reshape(arr.shape[0], -1) if arr.ndim > 1 else arr.reshape(1, -1)
        step = max(1, (1 << 20) // max(flat.shape[1], 1))
        for r in range(0, flat.shape[0], step):
            a = np.asarray(flat[r:r + step], dtype=np.float64)
            for v in self.sentinels:
                counts[v] += int(np.count_nonzero(a == v))
            huge = np.abs(a) >= SENTINEL_ABS_LIMIT
            if nodata is not None:
                huge &= a != nodata
            huge &= np.isfinite(a)
            k = int(np.count_nonzero(huge))
            if k and self.first_huge is None:
                self.first_huge = float(a[huge].flat[0])
            self.n_huge += k
        return self

    def could_hold_markers(self, lo: float, hi: float) -> bool:
        """Whether valid cells between ``lo`` and ``hi`` (the lowest and highest) may be markers."""
        return (lo <= -SENTINEL_ABS_LIMIT or hi >= SENTINEL_ABS_LIMIT
                or any(lo <= v <= hi for v in self.sentinels))

    def result(self) -> tuple[float, int] | None:
        """The most frequent marker and its count, or None."""
        counts, n_huge, first_huge = self.counts, self.n_huge, self.first_huge
        found = [(n, v) for v, n in counts.items() if n]
        if n_huge and not any(abs(v) >= SENTINEL_ABS_LIMIT for _, v in found):
            found.append((n_huge, first_huge))
        if not found:
            return None
        n, v = max(found)
        return v, n


def _centre(grid: Grid):
    xmin, ymin, xmax, ymax = grid.bounds
    return ((xmin + xmax) / 2, (ymin + ymax) / 2)


def raster_from_array(array, grid: Grid, *, what: str, crs_checked: bool = False,
                      path: str | None = None) -> tuple[np.ndarray, Grid]:
    """The checks of :func:`read_raster` for a band already in memory.

    The CRS must be projected in metres; 8-bit data (a picture, not elevations) is refused; cells
    equal to a common nodata marker (:data:`NODATA_SENTINELS`, or beyond
    :data:`SENTINEL_ABS_LIMIT`) that the grid does not declare as its nodata are refused, naming
    the command that declares it, so that -9999 never becomes an elevation; the grid's nodata value
    and non-finite cells become NaN (float64 copy); a band without a valid cell is refused.
    ``what`` names the raster in messages (``"DEM 'dem.tif'"``), ``path`` its file if it has one.
    """
    if not crs_checked:
        require_projected_metres(grid.crs_wkt, what=what, centre_xy=_centre(grid))
    if np.asarray(array).dtype in (np.uint8, np.int8):
        raise InputError(f"{what} holds 8-bit data (a picture or a classification, not elevations); "
                         f"{_ELEVATION_FIX} - give the elevation raster itself")
    arr = np.array(array, dtype=np.float64)
    if arr.shape != grid.shape:
        raise InputError(f"{what}: the band has shape {arr.shape}, its grid {grid.shape}")
    check_holes(_undeclared_holes(arr, grid.nodata), grid.nodata, what=what, path=path)
    if grid.nodata is not None:
        arr[arr == grid.nodata] = np.nan
    arr[~np.isfinite(arr)] = np.nan
    if not np.isfinite(arr).any():
        raise InputError(f"{what} holds no valid cell (every cell is nodata); give a raster with data")
    return arr, grid


def check_holes(holes, nodata, *, what: str, path: str | None) -> None:
    """Refuse undeclared nodata markers (``holes``: :meth:`HoleCount.result`), naming the command
    that declares the marker as the raster's nodata."""
    if holes is not None:
        value, n = holes
        declared = ("declares no nodata value" if nodata is None
                    else f"declares {nodata:g} as its nodata, not this value")
        target = f"'{path}'" if path else "the file"
        raise InputError(
            f"{what}: {n} cell(s) equal {value:g}, a common nodata marker, but the raster {declared}; so that "
            f"they are not read as elevations, declare it: gdal_edit.py -a_nodata {value:g} {target} (or "
            f"gdal_translate -a_nodata {value:g} to a copy), then run again"
        )


def read_vertical_unit(path, *, band: int = 1) -> dict:
    """The unit a raster declares for its values: its band's unit type and the vertical axis of a
    compound CRS (horizontal + vertical), as text and numbers.

    Returns
    -------
    dict
        ``band_unit``: the band's unit type as written (``"m"``, ``"ft"``, ``"US survey foot"``,
        ``""`` when none); ``crs_unit``: the name of the vertical axis unit of a compound or
        vertical CRS (``""`` when the CRS has no vertical part); ``crs_metres_per_unit``: that
        unit in metres (``None`` without a vertical part); ``crs_vertical``: the vertical CRS's name.

    Raises
    ------
    RasterReadError
        GDAL cannot open the file (GDAL's message is included).
    """
    path = os.fspath(path)
    with gdal_exceptions():
        try:
            ds = gdal.Open(path, gdal.GA_ReadOnly)
            try:
                band_unit = (ds.GetRasterBand(band).GetUnitType() or "") if band <= ds.RasterCount else ""
                wkt = ds.GetProjection() or ""
            finally:
                ds = None
        except RuntimeError as exc:
            raise RasterReadError(f"'{path}': GDAL cannot read its band unit ({gdal_message(exc)})") from None
    return {"band_unit": band_unit.strip(), **vertical_unit_of_crs(wkt)}


def vertical_unit_of_crs(wkt: str | None) -> dict:
    """The vertical axis unit of a compound (or vertical) CRS given as WKT: ``crs_unit`` (name,
    ``""`` when the CRS has no vertical part), ``crs_metres_per_unit`` (``None`` then) and
    ``crs_vertical`` (the vertical CRS's name)."""
    from osgeo import osr

    out = {"crs_unit": "", "crs_metres_per_unit": None, "crs_vertical": ""}
    if not wkt:
        return out
    with gdal_exceptions():
        srs = osr.SpatialReference()
        try:
            srs.ImportFromWkt(wkt)
        except RuntimeError:
            return out
        if not (srs.IsCompound() or srs.IsVertical()):
            return out
        out["crs_unit"] = srs.GetAttrValue("VERT_CS|UNIT") or ""
        out["crs_metres_per_unit"] = float(srs.GetTargetLinearUnits("VERT_CS"))
        out["crs_vertical"] = srs.GetAttrValue("VERT_CS") or ""
    return out


def resample_to_grid(array, grid: Grid, target: Grid, *, what: str = "raster") -> np.ndarray:
    """A band resampled onto another grid of the same CRS by GDAL's warper (bilinear).

    ``array`` (float, NaN for nodata) on ``grid`` is handed to ``gdal.Warp`` as an in-memory
    raster and warped onto ``target``'s geotransform and shape; cells outside ``array`` or whose
    bilinear neighbourhood holds no valid cell are NaN. This is ``gdalwarp -r bilinear -te ...
    -tr ...`` on the same data.
    """
    a = np.asarray(array, dtype=np.float64)
    if a.shape != grid.shape:
        raise InputError(f"{what}: the band has shape {a.shape}, its grid {grid.shape}")
    with gdal_exceptions():
        try:
            src = _mem_float64(grid, grid.crs_wkt)
            src.GetRasterBand(1).WriteArray(a)
            dst = _mem_float64(target, grid.crs_wkt)
            gdal.Warp(dst, src, resampleAlg="bilinear", srcNodata=float("nan"), dstNodata=float("nan"))
            out = dst.GetRasterBand(1).ReadAsArray().astype(np.float64)
        except RuntimeError as exc:
            raise RasterReadError(f"{what}: GDAL could not resample it onto the output grid "
                                  f"({gdal_message(exc)})") from None
        finally:
            src = dst = None
    out[~np.isfinite(out)] = np.nan
    return out


def _mem_float64(grid: Grid, crs_wkt: str):
    """An in-memory float64 raster of ``grid``, NaN its nodata and every cell's value."""
    ds = gdal.GetDriverByName("MEM").Create("", grid.cols, grid.rows, 1, gdal.GDT_Float64)
    ds.SetGeoTransform(grid.transform)
    if crs_wkt:
        ds.SetProjection(crs_wkt)
    band = ds.GetRasterBand(1)
    band.SetNoDataValue(float("nan"))
    band.Fill(float("nan"))
    return ds
