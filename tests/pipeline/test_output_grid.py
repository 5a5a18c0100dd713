"""The output grid (--extent, --cell, origins on multiples of the cell), the DEM resampled onto it
by GDAL, and the length of contact off the DEM (strikeline.pipeline.rasters)."""
from __future__ import annotations

import json

import numpy as np
import pytest
import shapely
from osgeo import gdal

from helpers import DEMO
from strikeline.errors import InputError
from strikeline.geometry.grid import Grid, max_grid_cells
from strikeline.pipeline import RunOptions, load_inputs
from strikeline.pipeline.options import SEGMENT_CELLS
from strikeline.pipeline.rasters import ground_on_grid, length_off_raster, output_grid
from strikeline.pipeline.steps import surface_grid


def _on_multiples(value: float, cell: float) -> bool:
    return abs(value / cell - round(value / cell)) < 1e-9


# --------------------------------------------------------------------------- the grid
def test_aligned_grid_covers_the_bounds_with_corners_on_multiples():
    g = Grid.aligned(1003.7, 2011.2, 1998.1, 2504.9, cell_m=25.0)
    xmin, ymin, xmax, ymax = g.bounds
    assert (xmin, ymin, xmax, ymax) == (1000.0, 2000.0, 2000.0, 2525.0)  # widened to the next multiples of 25
    assert all(_on_multiples(v, 25.0) for v in g.bounds)
    # bounds already on multiples are kept, not widened by a cell
    assert Grid.aligned(0.0, 0.0, 100.0, 50.0, cell_m=25.0).shape == (2, 4)


def test_neighbouring_sheets_tile():
    """Two sheets side by side, same cell: their grids share the edge and every cell edge lies on
    one lattice (the grid over both sheets); common practice for tiled map grids."""
    cell = 20.0
    west = Grid.aligned(1013.0, 5007.0, 1990.0, 5993.0, cell_m=cell)
    east = Grid.aligned(1990.0, 5007.0, 2987.0, 5993.0, cell_m=cell)
    both = Grid.aligned(1013.0, 5007.0, 2987.0, 5993.0, cell_m=cell)
    # the shared edge at x = 1990 lies inside the cell 1980-2000 of both: the same cell, not two
    assert (west.bounds[2], east.bounds[0]) == (2000.0, 1980.0)
    for g in (west, east):
        off = (np.array(g.transform)[[0, 3]] - np.array(both.transform)[[0, 3]]) / cell
        assert np.allclose(off, np.round(off), atol=1e-9)


def test_contours_only_grid_has_an_aligned_origin():
    """Without a DEM the grid is the contours' extent widened to multiples of the cell."""
    inputs = load_inputs(RunOptions(contacts=str(DEMO / "contacts.gpkg"), contours=str(DEMO / "contours.gpkg"),
                                    elev_field="elev_m", out="unused-out"))
    box = shapely.total_bounds(inputs.contours.geoms)
    for cell in (None, 7.0):
        g = surface_grid(inputs, RunOptions(contacts="c", out="o", cell_m=cell))
        c = g.cell_x_m
        assert _on_multiples(g.transform[0], c) and _on_multiples(g.transform[3], c)
        gx0, gy0, gx1, gy1 = g.bounds
        assert gx0 <= box[0] < gx0 + c and gx1 - c < box[2] <= gx1
        assert gy0 <= box[1] < gy0 + c and gy1 - c < box[3] <= gy1


def test_with_a_dem_and_no_extent_or_cell_the_grid_is_the_dems():
    inputs = load_inputs(RunOptions(contacts=str(DEMO / "contacts.gpkg"), dem=str(DEMO / "dem.tif"), out="unused"))
    assert surface_grid(inputs, RunOptions(contacts="c", out="o")).transform == inputs.dem_grid.transform


@pytest.mark.parametrize("extent,cell", [((None), 17.0), ((1.0e9, 0.0, 1.0e9, 10.0), None)])
def test_refused_in_one_line(extent, cell):
    dem_grid = Grid((0.0, 10.0, 0.0, 1000.0, 0.0, -10.0), (100, 100))
    if extent is None:  # too many cells: refused before any work
        with pytest.raises(InputError, match=rf"more than the {max_grid_cells():,} that fit the memory budget.*--cell"):
            output_grid(dem_grid=dem_grid, bounds=None, cell_m=0.001, extent=None, crs_wkt="")
    else:
        with pytest.raises(InputError, match=r"^--extent .*XMIN must be less than XMAX"):
            output_grid(dem_grid=dem_grid, bounds=None, cell_m=cell, extent=extent, crs_wkt="")


def test_check_options_refuses_a_bad_extent_up_front(tmp_path):
    from strikeline.pipeline.options import check_options

    with pytest.raises(InputError, match=r"^--extent 10 0 5 10: XMIN must be less than XMAX"):
        check_options(RunOptions(contacts="c.gpkg", dem="d.tif", out=str(tmp_path / "o"), extent=(10, 0, 5, 10)))


# --------------------------------------------------------------------------- the DEM on the grid
def test_dem_resampled_onto_the_grid_is_gdalwarps(tmp_path):
    """Reference: gdalwarp -te XMIN YMIN XMAX YMAX -tr CELL CELL -r bilinear on the DEM file (GDAL's
    own warper, through gdal.Warp)."""
    inputs = load_inputs(RunOptions(contacts=str(DEMO / "contacts.gpkg"), dem=str(DEMO / "dem.tif"), out="unused"))
    x0, y0, x1, y1 = inputs.dem_grid.bounds
    extent = (x0 + 333.0, y0 + 517.0, x1 - 251.0, y1 - 409.0)
    cell = 25.0
    grid = surface_grid(inputs, RunOptions(contacts="c", out="o", cell_m=cell, extent=extent))
    assert all(_on_multiples(v, cell) for v in grid.bounds)
    ground, ggrid = ground_on_grid(inputs.dem, inputs.dem_grid, grid)
    ref_path = str(tmp_path / "warped.tif")
    gdal.Warp(ref_path, str(DEMO / "dem.tif"), outputBounds=grid.bounds, xRes=cell, yRes=cell,
              resampleAlg="bilinear", outputType=gdal.GDT_Float64, dstNodata=-99999.0)
    ds = gdal.Open(ref_path)
    ref = ds.GetRasterBand(1).ReadAsArray().astype(float)
    assert ds.GetGeoTransform() == pytest.approx(ggrid.transform)
    ds = None
    ref[ref == -99999.0] = np.nan
    assert ground.shape == ref.shape
    both = np.isfinite(ref) & np.isfinite(ground)
    assert both.mean() > 0.99
    assert np.allclose(ground[both], ref[both], rtol=0, atol=1e-6)


# --------------------------------------------------------------------------- contact off the DEM
def test_length_off_the_dem_is_the_geometric_length_outside_it():
    """Reference: GEOS (shapely.difference) - the length of the line outside the DEM's extent."""
    grid = Grid((0.0, 10.0, 0.0, 1000.0, 0.0, -10.0), (100, 100))
    dem = np.ones(grid.shape)
    lines = np.array([shapely.LineString([(-300.0, 500.0), (700.0, 520.0), (900.0, 1300.0)]),
                      shapely.LineString([(100.0, 100.0), (800.0, 300.0)])], dtype=object)
    off = length_off_raster(lines, dem, grid)
    outside = float(shapely.length(shapely.difference(lines[0], shapely.box(*grid.bounds))))
    assert off["length_m"] == pytest.approx(outside, abs=2 * 2.5)  # a quarter cell per crossing
    assert off["total_length_m"] == pytest.approx(float(np.sum(shapely.length(lines))))
    assert off["n_lines"] == 1
    assert off["percent"] == pytest.approx(100 * off["length_m"] / off["total_length_m"])
    # nodata counts as off too
    dem[:, 50:] = np.nan
    assert length_off_raster(lines[1:], dem, grid)["length_m"] > 0


def test_run_on_a_cropped_dem_warns_and_records_the_length_off_it(tmp_path, cli):
    """A DEM covering the west half of the demo sheet, an --extent over the whole sheet and a
    --cell: a warning with the length off the DEM (in metres and %) in the log and summary.json,
    and output rasters on the aligned grid. Reference for the length: GEOS (shapely.difference)."""
    src = gdal.Open(str(DEMO / "dem.tif"))
    w, h = src.RasterXSize, src.RasterYSize
    gt = src.GetGeoTransform()
    src = None
    crop = str(tmp_path / "dem_west.tif")
    gdal.Translate(crop, str(DEMO / "dem.tif"), srcWin=[0, 0, w * 3 // 5, h])
    full = (gt[0], gt[3] + gt[5] * h, gt[0] + gt[1] * w, gt[3])
    cell = 2 * gt[1] + 1.0  # not a multiple of the DEM's cell: resampled
    out = tmp_path / "out"
    r = cli("run", "--contacts", DEMO / "contacts.gpkg", "--dem", crop, "--extent", *full, "--cell", cell,
            "--out", out)
    assert r.returncode == 0, r.stderr
    s = json.loads((out / "summary.json").read_text())
    off = s["contacts_off_dem"]
    from osgeo import ogr

    vds = ogr.Open(str(DEMO / "contacts.gpkg"))
    geoms = shapely.from_wkb([bytes(f.GetGeometryRef().ExportToWkb()) for f in vds.GetLayer(0)])
    vds = None
    cds = gdal.Open(crop)
    cgt = cds.GetGeoTransform()
    box = shapely.box(cgt[0], cgt[3] + cgt[5] * cds.RasterYSize, cgt[0] + cgt[1] * cds.RasterXSize, cgt[3])
    cds = None
    outside = float(np.sum(shapely.length(shapely.difference(geoms, box))))
    assert outside > 0 and off["length_m"] == pytest.approx(outside, rel=0.02)
    assert f"warning: {off['length_m']:.0f} m of the contacts ({off['percent']:.1f}%" in r.stderr
    # the misfit segments are cut on the output grid the DEM was resampled onto
    assert s["contact_misfit"]["segment_m"] == pytest.approx(SEGMENT_CELLS * cell)
    ds = gdal.Open(str(out / "surface.tif"))
    sgt = ds.GetGeoTransform()
    ds = None
    assert sgt[1] == pytest.approx(cell) and _on_multiples(sgt[0], cell) and _on_multiples(sgt[3], cell)
    assert sgt[0] <= full[0] < sgt[0] + cell and sgt[3] - cell < full[3] <= sgt[3]
