"""The run's warnings name the input options as the caller knows them: the command line's flags by
default, a QGIS tool's parameter labels when it passes its ``names`` (so a QGIS user never reads a
flag the tool does not have).

References: shapely 2's ``difference`` and ``length`` (GEOS) for the length of a contact outside
the DEM's box; the demo sheet's truth.json (its generator's planes) for the unit's thickness,
whose sign flips when the top and base contacts are swapped.
"""
from __future__ import annotations

import json

import pytest
import shapely

from helpers import DEMO, write_lines
from strikeline.pipeline.compute import compute, contacts_off_dem
from strikeline.pipeline.inputs import load_inputs
from strikeline.pipeline.options import RunOptions

#: Labels as a QGIS tool would pass them (adapter_qgis.params.option_names: ``the '<label>'``).
QGIS_NAMES = {"contacts": "the 'Mapped contact lines'", "top_contacts": "the 'Top contact of the unit'",
              "contours": "the 'Topographic contour lines'"}


@pytest.fixture
def half_off(tmp_path):
    """A contact line from inside the demo DEM to 600 m beyond its east edge."""
    dem = json.loads((DEMO / "truth.json").read_text())["dem"]
    east = dem["x_west"] + dem["cols"] * dem["cell_m"]
    y = dem["y_north"] - dem["rows"] * dem["cell_m"] / 2
    line = shapely.LineString([(east - 900.0, y), (east + 600.0, y)])
    path = write_lines(tmp_path / "off.gpkg", [line], epsg=32631)
    box = shapely.box(dem["x_west"], dem["y_north"] - dem["rows"] * dem["cell_m"], east, dem["y_north"])
    # Source: shapely 2 (GEOS) difference and length
    return path, float(shapely.length(shapely.difference(line, box)))


@pytest.mark.parametrize("names, said", [(None, "--contours"), (QGIS_NAMES, QGIS_NAMES["contours"])])
def test_the_off_dem_warning_names_the_contours_option_as_given(half_off, names, said):
    path, outside_m = half_off
    opts = RunOptions(contacts=str(path), dem=str(DEMO / "dem.tif"), out="/nonexistent-out")
    lines = []
    off = contacts_off_dem(load_inputs(opts), log=lines.append, names=names)
    assert off["length_m"] == pytest.approx(outside_m, abs=2 * 10.0)  # within two 10 m cells
    assert len(lines) == 1 and lines[0].startswith("warning:")
    assert f"or contours ({said}) for those stretches" in lines[0]
    if names is not None:
        assert "--" not in lines[0]


@pytest.mark.parametrize("names", [None, QGIS_NAMES])
def test_the_top_below_base_warning_names_both_contact_options_as_given(names):
    # the demo's top and base swapped: the "top" model lies the unit's thickness below the "base"
    truth = json.loads((DEMO / "truth.json").read_text())
    opts = RunOptions(contacts=str(DEMO / "top_contacts.gpkg"), top_contacts=str(DEMO / "contacts.gpkg"),
                      dem=str(DEMO / "dem.tif"), out="/nonexistent-out", resamples=100)
    lines = []
    r = compute(load_inputs(opts), opts, log=lines.append, names=names)
    # Source: truth.json's true thickness (generator's planes), negative once swapped; 5 m: common practice
    assert r.summary["thickness"]["mean_m"] == pytest.approx(-truth["true_thickness_m"], abs=5.0)
    said = {"contacts": "--contacts", "top_contacts": "--top-contacts", **(names or {})}
    warned = [t for t in lines if "lies below the base on average" in t]
    assert len(warned) == 1
    assert warned[0].endswith(f"check which contact is the top ({said['top_contacts']}) "
                              f"and which the base ({said['contacts']})")
