"""The DEM's checksum is taken on a second thread while the DEM is checked: the same digest, and
no hashing thread or open file left behind when the DEM is refused.

Reference: Python's ``hashlib.sha256`` of the file's bytes read whole (FIPS 180-4), independent
of the chunked reader the run uses.
"""
from __future__ import annotations

import hashlib
import threading

import numpy as np
import pytest
from osgeo import gdal

from helpers import DEMO, gdal_exceptions
from strikeline.errors import InputError
from strikeline.pipeline.inputs import load_inputs
from strikeline.pipeline.options import RunOptions


def _hashing_threads():
    return [t for t in threading.enumerate() if t.name.startswith("strikeline-dem-hash")]


@pytest.mark.parametrize("block_cells", [None, 128])  # in memory, and left in its file (read by windows)
def test_the_dem_record_holds_the_files_sha256(block_cells):
    dem = DEMO / "dem.tif"
    opts = RunOptions(contacts=str(DEMO / "contacts.gpkg"), dem=str(dem), out="/nonexistent-out",
                      block_cells=block_cells)
    inputs = load_inputs(opts)
    assert hasattr(inputs.dem, "sample_bilinear") == (block_cells is not None)
    assert inputs.records["dem"]["sha256"] == hashlib.sha256(dem.read_bytes()).hexdigest()
    assert not _hashing_threads()


@pytest.mark.parametrize("block_cells", [None, 128])
def test_a_refused_dem_leaves_no_hashing_thread(tmp_path, block_cells):
    bad = tmp_path / "dem.tif"
    with gdal_exceptions():
        gdal.Translate(str(bad), str(DEMO / "dem.tif"), noData="none")  # -9999 cells, nodata undeclared
        ds = gdal.Open(str(bad))
        n = int(np.count_nonzero(ds.GetRasterBand(1).ReadAsArray() == -9999.0))
        ds = None
    if n == 0:
        pytest.skip("the demo DEM holds no nodata cell to leave undeclared")
    opts = RunOptions(contacts=str(DEMO / "contacts.gpkg"), dem=str(bad), out="/nonexistent-out",
                      block_cells=block_cells)
    with pytest.raises(InputError, match=f"{n} cell\\(s\\) equal -9999"):
        load_inputs(opts)
    assert not _hashing_threads()
