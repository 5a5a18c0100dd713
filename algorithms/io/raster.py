"""Reading and writing rasters (GeoTIFF) through GDAL.

Rasters come back as ``(array, grid)``: a float64 array with NaN for nodata and a
:class:`strikeline.geometry.grid.Grid` carrying geotransform, CRS WKT and the band's nodata value.
"""
from __future__ import annotations

import os

import numpy as np
from osgeo import gdal

from strikeline.errors import InputError, OutputError, RasterReadError
from strikeline.geometry.grid import Grid
from strikeline.io._gdal import gdal_exceptions, gdal_message, quiet_close
from strikeline.io.crs import require_projected_metres
from strikeline.io.interrupt import GdalStop

#: Nodata written into strikeline's own float32 GeoTIFFs.
NODATA_OUT = -99999.0


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
    what = f"{label} '{path}'"
    if not os.path.exists(path):
        raise InputError(f"{what}: file not found; check the path")
    with gdal_exceptions():
        try:
            ds = gdal.Open(path, gdal.GA_ReadOnly)
        except RuntimeError as exc:
            raise RasterReadError(
                f"{what}: GDAL cannot open it as a raster ({gdal_message(exc)}); give a GeoTIFF or "
                "another raster format GDAL reads"
            ) from None
        try:
            if band > ds.RasterCount:
                raise InputError(f"{what} has {ds.RasterCount} band(s), band {band} was asked for")
            gt = ds.GetGeoTransform(can_return_null=True)
            if gt is None:
                raise InputError(f"{what} has no georeferencing; georeference it and try again")
            wkt = ds.GetProjection() or ""
            shape = (ds.RasterYSize, ds.RasterXSize)
            require_projected_metres(wkt, what=what, centre_xy=_centre(Grid(gt, shape, wkt)))
            b = ds.GetRasterBand(band)
            nodata = b.GetNoDataValue()
            try:
                arr = b.ReadAsArray().astype(np.float64)
            except RuntimeError as exc:
                raise RasterReadError(f"{what}: GDAL could not read band {band} ({gdal_message(exc)})") from None
        finally:
            ds = None
    return raster_from_array(arr, Grid(gt, shape, wkt, nodata), what=what, crs_checked=True)


def _centre(grid: Grid):
    xmin, ymin, xmax, ymax = grid.bounds
    return ((xmin + xmax) / 2, (ymin + ymax) / 2)


def raster_from_array(array, grid: Grid, *, what: str, crs_checked: bool = False) -> tuple[np.ndarray, Grid]:
    """The checks of :func:`read_raster` for a band already in memory.

    The CRS must be projected in metres; the grid's nodata value and non-finite cells become
    NaN (float64 copy); a band without a valid cell is refused. ``what`` names the raster in
    messages (``"DEM 'dem.tif'"``).
    """
    if not crs_checked:
        require_projected_metres(grid.crs_wkt, what=what, centre_xy=_centre(grid))
    arr = np.array(array, dtype=np.float64)
    if arr.shape != grid.shape:
        raise InputError(f"{what}: the band has shape {arr.shape}, its grid {grid.shape}")
    if grid.nodata is not None:
        arr[arr == grid.nodata] = np.nan
    arr[~np.isfinite(arr)] = np.nan
    if not np.isfinite(arr).any():
        raise InputError(f"{what} holds no valid cell (every cell is nodata); give a raster with data")
    return arr, grid


def write_geotiff(path, array, grid: Grid, *, description: str, unit: str | None,
                  nodata: float = NODATA_OUT, progress=None, is_cancelled=None) -> None:
    """Write a float32 GeoTIFF (DEFLATE, tiled) with CRS, nodata, band description and unit.

    Parameters
    ----------
    path : str or PathLike
    array : ndarray, shape ``grid.shape``
        Values; NaN becomes ``nodata``.
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
    close, which ``ds = None`` does not raise in GDAL 3.6; then opened again and its values,
    description and unit compared) and only then renamed into place, so a failed write leaves
    nothing at ``path``.
    """
    path = os.fspath(path)
    a = np.asarray(array, dtype=np.float32)
    if a.shape != grid.shape:
        raise OutputError(f"'{path}': array shape {a.shape} does not match the grid {grid.shape}")
    tmp = path + ".part"
    values = np.where(np.isfinite(a), a, np.float32(nodata))
    unit = unit or ""
    ds = b = None
    with gdal_exceptions(), GdalStop(progress, is_cancelled, what=f"writing '{path}'") as stop:
        try:
            drv = gdal.GetDriverByName("GTiff")
            opts = ["COMPRESS=DEFLATE", "PREDICTOR=3", "TILED=YES", "BIGTIFF=IF_SAFER"]
            ds = drv.Create(tmp, grid.cols, grid.rows, 1, gdal.GDT_Float32, options=opts)
            ds.SetGeoTransform(grid.transform)
            if grid.crs_wkt:
                ds.SetProjection(grid.crs_wkt)
            b = ds.GetRasterBand(1)
            b.SetNoDataValue(nodata)
            b.SetDescription(description)
            b.SetUnitType(unit)
            b.WriteArray(values, callback=stop.callback)
            stop.check()
            b.FlushCache()
            ds.FlushCache()
            b = None
            gdal.ErrorReset()
            ds = None  # closes the file; GDAL 3.6 reports a failure here only as its last error
            if gdal.GetLastErrorType() >= gdal.CE_Failure:
                raise RuntimeError(gdal.GetLastErrorMsg())
            _check_written(tmp, values, description, unit)
            stop.check()  # a signal received while closing
        except BaseException as exc:
            with quiet_close():
                b = ds = None
            if os.path.exists(tmp):
                os.remove(tmp)
            stop.check()
            if isinstance(exc, RuntimeError):
                raise OutputError(f"'{path}': GDAL could not write it ({gdal_message(exc)}); free some space or "
                                  "choose another folder") from None
            raise
    os.replace(tmp, path)


def _check_written(tmp: str, values: np.ndarray, description: str, unit: str) -> None:
    """Open a GeoTIFF just written and compare it with what was meant to be written."""
    ds = gdal.Open(tmp, gdal.GA_ReadOnly)
    try:
        b = ds.GetRasterBand(1)
        got = b.ReadAsArray()
        same = (got is not None and got.shape == values.shape
                and np.array_equal(got.view(np.uint32), values.view(np.uint32)))
        if not same or b.GetDescription() != description or (b.GetUnitType() or "") != unit:
            raise RuntimeError("the file read back differs from what was written")
    finally:
        b = ds = None


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
            mem = gdal.GetDriverByName("MEM")
            src = mem.Create("", grid.cols, grid.rows, 1, gdal.GDT_Float64)
            src.SetGeoTransform(grid.transform)
            if grid.crs_wkt:
                src.SetProjection(grid.crs_wkt)
            b = src.GetRasterBand(1)
            b.SetNoDataValue(float("nan"))
            b.WriteArray(a)
            dst = mem.Create("", target.cols, target.rows, 1, gdal.GDT_Float64)
            dst.SetGeoTransform(target.transform)
            if grid.crs_wkt:
                dst.SetProjection(grid.crs_wkt)
            db = dst.GetRasterBand(1)
            db.SetNoDataValue(float("nan"))
            db.Fill(float("nan"))
            gdal.Warp(dst, src, resampleAlg="bilinear", srcNodata=float("nan"), dstNodata=float("nan"))
            out = db.ReadAsArray().astype(np.float64)
        except RuntimeError as exc:
            raise RasterReadError(f"{what}: GDAL could not resample it onto the output grid "
                                  f"({gdal_message(exc)})") from None
        finally:
            src = dst = b = db = None
    out[~np.isfinite(out)] = np.nan
    return out
