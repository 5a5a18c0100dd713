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

import pytest

pytest.importorskip("osgeo.gdal")

from strikeline.io.demfile import DemFile  # noqa: E402
from strikeline.pipeline import compute, load_inputs, write_results  # noqa: E402
from strikeline.pipeline.options import RunOptions  # noqa: E402

from test_tiled import DEMO, TINY, VOLCANO, _assert_same_outputs  # noqa: E402

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
