"""Structure contours read for the map a few features at a time and kept simplified: the same
lines, lengths and label points as the whole layer read at once and simplified after, and the
decimated grid's georeferencing known from the header alone."""
import numpy as np
import pytest
import shapely
from osgeo import gdal, ogr, osr

from strikeline.io import sampling as S
from strikeline.report import data as D

EPSG = 32633
TOL_M = 0.8


def _wiggly(i, n):
    t = np.linspace(0.0, 1.0, n)
    return np.column_stack([400_000.0 + 3_000.0 * t, 5_300_000.0 + 100.0 * i + 5.0 * np.sin(40.0 * t + i),
                            np.full(n, 10.0 * i)])


def _gpkg(path):
    """A GeoPackage written by OGR directly: 3-D lines of many vertices with elevation_m and a flag,
    one feature without geometry, one of zero length, one of a single part of one vertex."""
    ds = ogr.GetDriverByName("GPKG").CreateDataSource(str(path))
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(EPSG)
    lyr = ds.CreateLayer("structure_contours", srs, ogr.wkbLineString25D)
    lyr.CreateField(ogr.FieldDefn("elevation_m", ogr.OFTReal))
    fd = ogr.FieldDefn("extrapolated", ogr.OFTInteger)
    fd.SetSubType(ogr.OFSTBoolean)
    lyr.CreateField(fd)
    rows = [shapely.LineString(_wiggly(i, 400 + 37 * i)) for i in range(12)]
    rows.insert(3, None)
    rows.insert(7, shapely.LineString([(400_100.0, 5_300_100.0, 5.0)] * 2))
    for i, g in enumerate(rows):
        f = ogr.Feature(lyr.GetLayerDefn())
        f.SetField("elevation_m", 10.0 * i)
        f.SetField("extrapolated", i % 2)
        if g is not None:
            f.SetGeometry(ogr.CreateGeometryFromWkb(shapely.to_wkb(g, output_dimension=3)))
        lyr.CreateFeature(f)
    ds = None
    return path


def _ogr_lines(path):
    """Reference: every feature's geometry as OGR gives it, 2-D, with its fields; features without
    a line of positive length left out (as the tool's reader leaves them out)."""
    ds = ogr.Open(str(path))
    out = []
    for f in ds.GetLayer(0):
        g = f.GetGeometryRef()
        if g is None:
            continue
        line = shapely.force_2d(shapely.from_wkb(bytes(g.ExportToIsoWkb())))
        if line.length > 0:
            out.append((line, f.GetField("elevation_m"), f.GetField("extrapolated")))
    return out


@pytest.mark.parametrize("piece_bytes", [1, 20_000, 1 << 30])
def test_lines_read_in_pieces_equal_the_whole_layer_simplified(tmp_path, monkeypatch, piece_bytes):
    path = _gpkg(tmp_path / "results.gpkg")
    monkeypatch.setattr(S, "PIECE_WKB_BYTES", piece_bytes)
    monkeypatch.setattr(D, "read_line_pieces", lambda *a, **k: S.read_line_pieces(*a, piece_bytes=piece_bytes, **k))
    got = D._thinned_lines(path, "structure_contours", ["structure_contours"], TOL_M)
    ref = _ogr_lines(path)
    assert len(got) == len(ref) == 12
    for i, (line, elev, flag) in enumerate(ref):
        # Source: shapely (GEOS) Douglas-Peucker on the whole line as OGR gives it
        assert shapely.equals_exact(got.geoms[i], shapely.simplify(line, TOL_M, preserve_topology=False), 0.0)
        # Source: shapely's length and interpolation on the unsimplified line
        assert got.length[i] == line.length
        assert shapely.equals_exact(got.middle[i], shapely.line_interpolate_point(line, 0.5, normalized=True), 0.0)
        assert got.fields["elevation_m"][i] == elev and int(got.fields["extrapolated"][i]) == flag
    assert got.simplified_m == TOL_M
    # the simplified lines hold far fewer vertices than written (the point of reading them so)
    assert shapely.get_num_coordinates(got.geoms).sum() < 0.5 * sum(shapely.get_num_coordinates(r[0]) for r in ref)


def test_without_a_tolerance_the_lines_are_kept_as_written(tmp_path):
    path = _gpkg(tmp_path / "results.gpkg")
    got = D._thinned_lines(path, "structure_contours", ["structure_contours"], None)
    ref = _ogr_lines(path)
    # Source: OGR's geometries, as written
    assert all(shapely.equals_exact(g, r[0], 0.0) for g, r in zip(got.geoms, ref))
    assert got.simplified_m is None
    assert D._thinned_lines(path, "missing", ["structure_contours"], None) is None


@pytest.mark.parametrize("shape", [(300, 300), (1000, 730), (97, 1301)])
def test_decimated_grid_from_the_header_is_the_read_grid(tmp_path, shape):
    path = tmp_path / "g.tif"
    ds = gdal.GetDriverByName("GTiff").Create(str(path), shape[1], shape[0], 1, gdal.GDT_Float32,
                                              ["TILED=YES", "COMPRESS=DEFLATE"])
    ds.SetGeoTransform((500_000.0, 2.0, 0.0, 4_000_000.0, 0.0, -2.0))
    ds.GetRasterBand(1).SetNoDataValue(-99999.0)
    ds.GetRasterBand(1).Fill(7.0)
    ds = None
    for cells in (10_000, 50_000, 10**7):
        arr, grid = S.read_decimated(path, max_cells=cells)
        head = S.decimated_grid(path, max_cells=cells)
        assert head.transform == grid.transform and head.shape == grid.shape == arr.shape
        # Source: GDAL's geotransform of the file - the decimated grid starts at its corner
        gt = gdal.Open(str(path)).GetGeoTransform()
        assert head.transform[0] == gt[0] and head.transform[3] == gt[3]
