"""strikeline.io.geotiff: float32 GeoTIFFs written whole, by windows or several at once, checked.

Reference: GDAL's own reading of the files (osgeo.gdal 3.6) and numpy's float32 rounding.
"""
from __future__ import annotations

import os

import numpy as np
import pytest
from osgeo import gdal

from strikeline.errors import CancelledError, OutputError
from strikeline.geometry.grid import Grid
from strikeline.io._gdal import gdal_exceptions
from strikeline.io.geotiff import NODATA_OUT, GeoTiffWriter, RasterOut, write_geotiff, write_geotiffs

WKT_UTM33 = ('PROJCS["WGS 84 / UTM zone 33N",GEOGCS["WGS 84",DATUM["WGS_1984",SPHEROID["WGS 84",6378137,'
             '298.257223563]],PRIMEM["Greenwich",0],UNIT["degree",0.0174532925199433]],PROJECTION["Transverse_'
             'Mercator"],PARAMETER["latitude_of_origin",0],PARAMETER["central_meridian",15],PARAMETER["scale_'
             'factor",0.9996],PARAMETER["false_easting",500000],PARAMETER["false_northing",0],UNIT["metre",1],'
             'AUTHORITY["EPSG","32633"]]')


def _grid(rows=600, cols=530):
    return Grid((400000.0, 5.0, 0.0, 5300000.0, 0.0, -5.0), (rows, cols), WKT_UTM33)


def _values(grid, seed=0):
    rng = np.random.default_rng(seed)
    X, Y = grid.mesh()
    z = 500 + 0.01 * (X - 400000) + 30 * np.sin((Y - 5300000) / 300.0) + rng.normal(0, 1e-3, grid.shape)
    z[10:40, 100:130] = np.nan
    z[0, 0], z[-1, -1], z[5, 7] = np.inf, -np.inf, 1e300  # 1e300 overflows float32: nodata too
    return z


def _read(path):
    with gdal_exceptions():
        ds = gdal.Open(str(path))
        b = ds.GetRasterBand(1)
        out = (b.ReadAsArray(), b.GetNoDataValue(), b.GetDescription(), b.GetUnitType(),
               ds.GetMetadataItem("COMPRESSION", "IMAGE_STRUCTURE"), ds.GetGeoTransform())
        ds = None
    return out


def _expected(z):
    # Source: numpy's float64 -> float32 rounding; non-finite (after rounding) -> the nodata value
    with np.errstate(over="ignore"):
        a = z.astype(np.float32)
    return np.where(np.isfinite(a), a, np.float32(NODATA_OUT))


def test_values_nodata_and_metadata_read_back_by_gdal(tmp_path):
    grid = _grid()
    z = _values(grid)
    write_geotiff(tmp_path / "s.tif", z, grid, description="surface", unit="m")
    got, nodata, desc, unit, comp, gt = _read(tmp_path / "s.tif")
    assert np.array_equal(got.view(np.uint32), _expected(z).view(np.uint32))
    assert (nodata, desc, unit, comp, gt) == (NODATA_OUT, "surface", "m", "DEFLATE", grid.transform)
    assert sorted(os.listdir(tmp_path)) == ["s.tif"]


def test_windows_in_any_order_make_the_same_file_as_one_write(tmp_path):
    grid = _grid()
    z = _values(grid)
    write_geotiff(tmp_path / "whole.tif", z, grid, description="surface", unit="m")
    with gdal_exceptions():
        w = GeoTiffWriter(tmp_path / "rows.tif", grid, description="surface", unit="m")
        for r0 in range(0, grid.rows, 256):  # bands of whole tile rows, in order
            w.write(z[r0:r0 + 256], row0=r0)
        w.close()
        v = GeoTiffWriter(tmp_path / "windows.tif", grid, description="surface", unit="m")
        for r0, r1, c0, c1 in [(300, 600, 0, 530), (0, 300, 200, 530), (0, 300, 0, 200)]:
            v.write(z[r0:r1, c0:c1], row0=r0, col0=c0)
        v.close()
    assert (tmp_path / "rows.tif").read_bytes() == (tmp_path / "whole.tif").read_bytes()
    # windows in another order: the tiles may lie elsewhere in the file, the values are the same
    assert np.array_equal(_read(tmp_path / "windows.tif")[0].view(np.uint32), _expected(z).view(np.uint32))


def test_several_files_at_once_equal_one_at_a_time(tmp_path):
    grid = _grid(300, 280)
    items = [RasterOut(tmp_path / f"{k}.tif", _values(grid, k) * (k + 1), f"grid {k}", "m") for k in range(4)]
    write_geotiffs(items, grid, workers=3)
    os.mkdir(tmp_path / "serial")
    for it in items:
        write_geotiff(tmp_path / "serial" / os.path.basename(it.path), it.array, grid, description=it.description,
                      unit=it.unit)
    for it in items:
        assert (tmp_path / os.path.basename(it.path)).read_bytes() == \
            (tmp_path / "serial" / os.path.basename(it.path)).read_bytes()


@pytest.mark.parametrize("damage", ["truncate", "last_tile"])
def test_the_check_catches_a_truncated_or_damaged_file(tmp_path, damage):
    grid = _grid()
    z = _values(grid)
    with gdal_exceptions():
        w = GeoTiffWriter(tmp_path / "s.tif", grid, description="surface", unit="m")
        w.write(z)
        w.band = None
        w.ds = None  # closed, as close() does before its check
        size = os.path.getsize(w.tmp)
        ds = gdal.Open(w.tmp)
        ty, tx = (grid.rows - 1) // 256, (grid.cols - 1) // 256
        last = int(ds.GetRasterBand(1).GetMetadataItem(f"BLOCK_OFFSET_{tx}_{ty}", "TIFF"))
        ds = None
        with open(w.tmp, "r+b") as f:
            if damage == "truncate":
                f.truncate(size * 2 // 3)
            else:  # bytes at the start of the last tile (its first rows hold data) overwritten
                f.seek(last + 16)
                f.write(b"\x55" * 64)
        with pytest.raises(RuntimeError):
            w._check()
        w.discard()
    assert os.listdir(tmp_path) == []


def test_a_cancelled_or_wrong_write_leaves_nothing(tmp_path):
    grid = _grid()
    z = _values(grid)
    items = [RasterOut(tmp_path / f"{k}.tif", z, "surface", "m") for k in range(3)]
    with pytest.raises(CancelledError):
        write_geotiffs(items, grid, workers=2, is_cancelled=lambda: True)
    assert not [n for n in os.listdir(tmp_path) if n.endswith(".part")]
    with pytest.raises(OutputError, match="does not match the grid"):
        write_geotiffs([RasterOut(tmp_path / "x.tif", z[:5], "surface", "m")], grid)
    assert not (tmp_path / "x.tif").exists() and not (tmp_path / "x.tif.part").exists()
