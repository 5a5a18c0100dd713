"""The DEM read by windows (strikeline.io.demfile, strikeline.pipeline.dem_access): a run whose
DEM stays in its file writes the files of the run that reads it whole, byte for byte.

The reference is the in-memory chain on the same inputs (the DEM read whole by
strikeline.io.raster.read_raster); the outside checks are GDAL's and OGR's: the GeoTIFFs are
compared byte for byte and read back by GDAL's GTiff driver, the layers of ``results.gpkg`` read
with OGR feature by feature (helpers of tests/pipeline/test_tiled.py).
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("osgeo.gdal")

from strikeline.io.demfile import DemFile  # noqa: E402
from strikeline.pipeline import compute, load_inputs, write_results  # noqa: E402
from strikeline.pipeline.options import RunOptions  # noqa: E402

from test_tiled import DEMO, TINY, _assert_same_outputs  # noqa: E402

REAL = Path(__file__).resolve().parents[2] / "test_data" / "real"


def _run_windowed_and_whole(tmp_path, opts_kw: dict, block=TINY):
    """The inputs run twice: the DEM read whole and the grids in memory; the DEM left in its file
    (``block_cells`` given before loading) and the grids in ``block`` blocks."""
    folders = {}
    for name, cells in (("memory", None), ("windows", block)):
        opts = RunOptions(out=str(tmp_path / name), block_cells=None if cells is None else 5, **opts_kw)
        inputs = load_inputs(opts)  # --block-cells given: the DEM stays in its file
        opts.block_cells = cells  # (rows, cols): the library's form of --block-cells
        assert isinstance(inputs.dem, DemFile) == (cells is not None)
        write_results(compute(inputs, opts), tmp_path / name)
        folders[name] = tmp_path / name
    return folders["memory"], folders["windows"]


def test_demo_with_contours_and_isopachs_from_dem_windows(tmp_path):
    """The demo sheet with its contours (checked against the DEM at their vertices, contour picks'
    errors from the DEM's slope) and its top contact: the DEM sampled by windows, the slope derived
    by haloed windows, depth from each block's window."""
    mem, win = _run_windowed_and_whole(tmp_path, {
        "contacts": str(DEMO / "contacts.gpkg"), "dem": str(DEMO / "dem.tif"),
        "contours": str(DEMO / "contours.gpkg"), "elev_field": "elev_m",
        "top_contacts": str(DEMO / "top_contacts.gpkg")})
    _assert_same_outputs(mem, win)


@pytest.mark.parametrize("sheet,case", [("volcano", "fold"), ("volcano", "mistraced"), ("lidar", "plane")])
def test_real_dem_from_windows(tmp_path, sheet, case):
    """Real DEMs (R's volcano; the 1 m lidar tile) with invented contacts: picks, misfit segments and
    the predicted trace from windows of the file give the whole-array run's files."""
    mem, win = _run_windowed_and_whole(tmp_path, {"contacts": str(next((REAL / sheet / case).glob("*.gpkg"))),
                                                  "dem": str(REAL / sheet / "dem.tif")})
    _assert_same_outputs(mem, win)
    summary = json.loads((win / "summary.json").read_text())
    assert summary["contact_misfit"]  # the misfit check ran on the windows


def test_workload_of_a_dem_in_its_file_does_not_grow_with_the_dem(monkeypatch):
    """A DEM read by windows is budgeted at WINDOWED_BYTES_PER_CELL per cell of its grid (plus the
    thickness statistics with top contacts), not at the whole read's BLOCK_BYTES_PER_CELL: a
    30,000 x 30,000 DEM fits a 12 GiB budget (Reference: arithmetic, 9e8 cells x 1 byte < 12 GiB
    < 9e8 cells x 32 bytes)."""
    from types import SimpleNamespace

    import shapely

    import strikeline.budget as budget
    import strikeline.pipeline.workload as workload
    from strikeline.geometry.grid import Grid

    class Layer(SimpleNamespace):
        def __len__(self):
            return len(self.geoms)

    grid = Grid((0.0, 0.5, 0.0, 15000.0, 0.0, -0.5), (30_000, 30_000))
    dem = SimpleNamespace(sample_bilinear=lambda x, y: None, minimum=300.0, maximum=900.0)
    contacts = Layer(geoms=np.array([shapely.LineString([(100, 100), (9000, 12000)])], dtype=object))
    inputs = SimpleNamespace(contacts=contacts, top_contacts=None, dem=dem, dem_grid=grid, paths={"dem": "d.tif"},
                             contours=None, contour_elevations_m=None, boreholes_xyz=None)
    opts = SimpleNamespace(cell_m=None, pick_spacing_m=None, window_m=None, interval_m=None, resamples=None,
                           block_cells=None)
    for mod in (budget, workload):
        monkeypatch.setattr(mod, "memory_budget_bytes", lambda: 12 * 2**30)
    e = next(e for e in workload.estimate_workload(inputs, opts) if e.option == "DEM 'd.tif'")
    assert e.need == 9e8 * budget.WINDOWED_BYTES_PER_CELL and not e.exceeded
    inputs.dem = np.zeros((1, 1))  # the DEM read whole: refused at this size
    e = next(e for e in workload.estimate_workload(inputs, opts) if e.option == "DEM 'd.tif'")
    assert e.need == 9e8 * budget.BLOCK_BYTES_PER_CELL and e.exceeded
    inputs.dem, inputs.top_contacts = dem, contacts  # thickness statistics grow with the cells
    e = next(e for e in workload.estimate_workload(inputs, opts) if e.option == "DEM 'd.tif'")
    assert e.need == 9e8 * (budget.WINDOWED_BYTES_PER_CELL + budget.THICKNESS_BYTES_PER_CELL)


@pytest.mark.parametrize("cell_factor,inset", [(2.0, 0.0), (0.7, 0.2)])
def test_dem_resampled_from_its_window_is_gdals_warp_of_the_whole(cell_factor, inset):
    """--cell / --extent: the ground on another grid warped (bilinear) from the window of the file under
    it holds the values GDAL's warper gives from the whole DEM in memory (Source: GDAL 3.6 gdalwarp
    -r bilinear, through strikeline.io.raster.resample_to_grid), to 1e-9 m."""
    from strikeline.geometry.grid import Grid
    from strikeline.io.demfile import open_dem
    from strikeline.io.raster import read_raster
    from strikeline.pipeline.dem_access import ground_on_grid
    from strikeline.pipeline.rasters import ground_on_grid as whole_ground

    path = REAL / "volcano" / "dem.tif"
    whole, grid = read_raster(path, label="DEM")
    xmin, ymin, xmax, ymax = grid.bounds
    w, h = xmax - xmin, ymax - ymin
    cell = grid.cell_x_m * cell_factor
    x0, y1 = xmin + inset * w, ymax - inset * h
    shape = (int((1 - 2 * inset) * h / cell), int((1 - 2 * inset) * w / cell))
    target = Grid((x0, cell, 0.0, y1, 0.0, -cell), shape, grid.crs_wkt)
    want, _ = whole_ground(whole, grid, target)
    got, got_grid = ground_on_grid(open_dem(path), grid, target)
    assert got_grid.shape == target.shape and np.isfinite(got).sum() > 0.9 * got.size
    assert np.array_equal(np.isnan(got), np.isnan(want))
    assert np.allclose(got, want, rtol=0.0, atol=1e-9, equal_nan=True)


def test_fold_sheet_with_map_units_from_dem_windows(tmp_path):
    """The map units read the window of the DEM under their polygons (its own grid, whose origin
    is a whole number of cells from the DEM's: on this sheet's round coordinates the samples are
    the whole DEM's, so the files are the same byte for byte)."""
    from helpers import UNIT_OPTS, write_fold_units

    fold = DEMO.parent / "fold"
    units = write_fold_units(tmp_path / "units.gpkg") or tmp_path / "units.gpkg"
    mem, win = _run_windowed_and_whole(tmp_path, {
        "contacts": str(fold / "contacts.gpkg"), "dem": str(fold / "dem.tif"), "map_units": str(units),
        "unit_field": UNIT_OPTS[1], "units_above": UNIT_OPTS[3], "units_below": UNIT_OPTS[5]}, block=(64, 48))
    _assert_same_outputs(mem, win)
    summary = json.loads((win / "summary.json").read_text())
    assert summary["map_units"]["n_points"] > 0
