"""The report's map grids from the window means the block path gathers while it writes, against
the decimated reads of the written files they replace.

Ground: R's ``volcano`` data set (test_data/real/volcano, a real DEM shipped with R) cut to 80 x 60
cells, a plane fitted to the picks on its mapped contact. References: GDAL's average resampling
while reading (``ReadAsArray`` with ``resample_alg=GRIORA_Average``, GDAL 3.6) and the report's own
read of the files (strikeline.report.data._raster without the means).
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

gdal = pytest.importorskip("osgeo.gdal")

from strikeline import vocabulary as V  # noqa: E402
from strikeline.pipeline import load_inputs  # noqa: E402
from strikeline.pipeline.options import RunOptions  # noqa: E402
from strikeline.pipeline.tiled import grids_by_blocks, window_grid  # noqa: E402
from strikeline.report.data import _raster  # noqa: E402

VOLCANO = Path(__file__).resolve().parents[2] / "test_data" / "real" / "volcano"


@pytest.mark.parametrize("cells, k", [(300, 4), (1_000_000, 1)])
def test_means_gathered_while_writing_are_the_reports_reads(tmp_path, cells, k):
    from strikeline.pipeline.steps import collect_picks
    from strikeline.surfaces import fit_surface

    opts = RunOptions(out="unused", contacts=str(VOLCANO / "plane" / "contacts.gpkg"), dem=str(VOLCANO / "dem.tif"))
    inputs = load_inputs(opts)
    model = fit_surface(collect_picks(inputs).xyz, model="plane")
    grid = window_grid(inputs.dem_grid, 0, 80, 0, 60)
    ground = np.asarray(inputs.dem[0:80, 0:60], dtype=float)
    tiles = grids_by_blocks(model, grid, tmp_path, ground=ground, ground_grid=grid, block_shape=(256, 256),
                            means_cells=cells)
    for name in (V.SURFACE.file, V.DEPTH.file):
        gf = tiles.files[name]
        assert gf.means is not None and gf.means[0] == cells and gf.means[1].shape == (80 // k, 60 // k)
        from_means = _raster(gf.path, max_cells=cells, means=gf.means)
        from_file = _raster(gf.path, max_cells=cells)
        # Source: the report's decimated read of the written file (the values it replaces)
        np.testing.assert_array_equal(from_means.values, from_file.values)
        assert from_means.extent == from_file.extent and from_means.cell_m == from_file.cell_m
        ds = gdal.Open(str(gf.path))
        b = ds.GetRasterBand(1)
        # Source: GDAL's average resampling while reading
        want = b.ReadAsArray(buf_xsize=60 // k, buf_ysize=80 // k, buf_type=gdal.GDT_Float64,
                             resample_alg=gdal.GRIORA_Average)
        want[want == b.GetNoDataValue()] = np.nan
        ds = None
        np.testing.assert_array_equal(from_means.values, want)
    # means made for another read are not taken: the file is read
    other = _raster(tiles.files[V.SURFACE.file].path, max_cells=cells + 1, means=tiles.files[V.SURFACE.file].means)
    assert other is not None


def test_no_means_when_the_factor_does_not_divide_the_grid(tmp_path):
    from strikeline.pipeline.steps import collect_picks
    from strikeline.surfaces import fit_surface

    opts = RunOptions(out="unused", contacts=str(VOLCANO / "plane" / "contacts.gpkg"), dem=str(VOLCANO / "dem.tif"))
    inputs = load_inputs(opts)
    model = fit_surface(collect_picks(inputs).xyz, model="plane")
    grid = window_grid(inputs.dem_grid, 0, 81, 0, 60)  # 81 rows: a factor of 4 leaves a partial window
    tiles = grids_by_blocks(model, grid, tmp_path, block_shape=(256, 256), means_cells=300)
    assert tiles.files[V.SURFACE.file].means is None
