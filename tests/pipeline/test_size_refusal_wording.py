"""Size refusals say "give <option> a larger value" (or "a smaller value"), a sentence that reads
the same with a command-line flag and with a QGIS tool's ``the '<label>'``.

References: GDAL's exact ``ComputeRasterMinMax(False)`` (GDAL 3.6) of the demo DEM for the relief
behind the structure-contour levels (levels = relief / interval + 1, by hand); English grammar
for the wording (common practice: no article before a quoted label that carries its own "the").
"""
from __future__ import annotations

import pytest
from osgeo import gdal

from helpers import DEMO, gdal_exceptions
from strikeline.errors import InputError
from strikeline.pipeline.inputs import load_inputs
from strikeline.pipeline.options import CLI_OPTION_NAMES, RunOptions
from strikeline.pipeline.steps import surface_grid
from strikeline.pipeline.workload import estimate_workload

#: Names as a QGIS tool passes them (adapter_qgis.params.option_names: ``the '<label>'``).
LABELS = {k: f"the '{k.replace('_', ' ').title()}'" for k in CLI_OPTION_NAMES}


@pytest.fixture(scope="module")
def demo_inputs():
    opts = RunOptions(contacts=str(DEMO / "contacts.gpkg"), dem=str(DEMO / "dem.tif"), out="/nonexistent-out")
    return load_inputs(opts)


def _demo_relief_m():
    with gdal_exceptions():
        ds = gdal.Open(str(DEMO / "dem.tif"))
        lo, hi = ds.GetRasterBand(1).ComputeRasterMinMax(False)
        ds = None
    return hi - lo


@pytest.mark.parametrize("names", [CLI_OPTION_NAMES, LABELS])
def test_every_size_fix_names_the_option_then_asks_for_a_value(demo_inputs, names):
    opts = RunOptions(contacts=str(DEMO / "contacts.gpkg"), dem=str(DEMO / "dem.tif"), out="/nonexistent-out",
                      interval_m=0.001, window_m=0.001, pick_spacing_m=1e-5, resamples=10**9)
    found = {e.option: e for e in estimate_workload(demo_inputs, opts, names=names) if e.exceeded}
    for key, word in (("interval_m", "larger"), ("window_m", "larger"), ("pick_spacing_m", "larger"),
                      ("resamples", "smaller")):
        msg = found[names[key]].message()
        assert f"; give {names[key]} a {word} value" in msg, msg
        assert "a larger the" not in msg and "fewer the" not in msg
    levels = found[names["interval_m"]].count
    assert levels == pytest.approx(_demo_relief_m() / 0.001 + 1.0, rel=1e-9)  # relief / interval + 1


@pytest.mark.parametrize("names", [None, LABELS])
def test_a_grid_too_large_asks_for_a_larger_cell_or_a_smaller_extent(demo_inputs, names):
    opts = RunOptions(contacts=str(DEMO / "contacts.gpkg"), dem=str(DEMO / "dem.tif"), out="/nonexistent-out",
                      cell_m=0.001)
    said = names or CLI_OPTION_NAMES
    with pytest.raises(InputError) as err:
        surface_grid(demo_inputs, opts, names=names)
    assert str(err.value).endswith(f"give {said['cell_m']} a larger value or {said['extent']} a smaller one")
