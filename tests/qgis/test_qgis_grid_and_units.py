"""The whole chain's elevation-unit and output-grid parameters do what ``strikeline run``'s
``--dem-unit``, ``--contour-unit``, ``--extent`` and ``--cell`` do.

# Source: the international foot is exactly 0.3048 m (International Yard and Pound Agreement,
# 1959; NIST SP 811, appendix B); the library's run with the same options is the reference for
# the grid (strikeline.pipeline.compute), and the grid's corners on multiples of the cell is the
# rule the command line documents for --extent/--cell.
"""
from __future__ import annotations

import numpy as np
import pytest
import shapely
from qgis.core import QgsProcessingException
from qgis_helpers import raster, table

pytestmark = pytest.mark.qgis

TMP = "TEMPORARY_OUTPUT"
QUICK_TOOL = {"MODEL": 1, "RESAMPLES": 100}  # the tool's values of conftest.QUICK: plane, 100 resamples
OUT = {"picks": TMP, "structure_contours": TMP, "surface": TMP, "dip": TMP, "dip_direction": TMP,
       "NO_REPORT": True}
#: Source: International Yard and Pound Agreement (1959), NIST SP 811 appendix B: 1 ft = 0.3048 m exactly.
FOOT_M = 0.3048
#: Index of each unit among the parameter's choices (the table's order: m, ft, us-ft).
FT = 1


def test_a_dem_in_feet_is_turned_into_metres(run, sheet, library):
    res = run("modelcontact", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "DEM_UNIT": FT,
                               "INTERVAL": 50.0, **QUICK_TOOL, **OUT})
    _, in_metres = library(sheet, contours=False)  # the same DEM read as metres (its band says m)
    geoms, _ = table(res["picks"])
    xyz = shapely.get_coordinates(geoms, include_z=True)
    np.testing.assert_array_equal(xyz[:, :2], in_metres.picks.xyz[:, :2])
    np.testing.assert_allclose(xyz[:, 2], in_metres.picks.xyz[:, 2] * FOOT_M, rtol=1e-12)
    # the command line's --dem-unit ft gives the same surface
    _, ft = library(sheet, contours=False, dem_unit="ft")
    got, _, _ = raster(res["surface"])
    np.testing.assert_array_equal(got, ft.surface.astype(np.float32).astype(float))


def test_contours_in_feet_are_turned_into_metres(run, sheet, library):
    res = run("modelcontact", {"CONTACTS": sheet["contacts_uri"], "CONTOURS": sheet["contours_uri"],
                               "ELEV_FIELD": "elev_m", "CONTOUR_UNIT": FT, "INTERVAL": 50.0, **QUICK_TOOL, **OUT})
    _, in_metres = library(sheet, dem=False)
    geoms, _ = table(res["picks"])
    z = shapely.get_coordinates(geoms, include_z=True)[:, 2]
    np.testing.assert_allclose(z, in_metres.picks.xyz[:, 2] * FOOT_M, rtol=1e-12)


def test_contours_in_feet_against_a_dem_in_metres_are_refused_naming_the_parameter(run, sheet):
    from qgis.core import QgsApplication

    label = QgsApplication.processingRegistry().algorithmById("strikeline:modelcontact") \
        .parameterDefinition("CONTOUR_UNIT").description()
    with pytest.raises(QgsProcessingException) as exc:
        run("modelcontact", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"],
                             "CONTOURS": sheet["contours_uri"], "ELEV_FIELD": "elev_m", "CONTOUR_UNIT": FT,
                             "INTERVAL": 50.0, **QUICK_TOOL, **OUT})
    msg = str(exc.value)
    assert "\n" not in msg and label in msg


def test_extent_and_cell_give_the_command_lines_grid(run, sheet, library):
    # a window inside the demo DEM (486300-490300 E, 5213700-5217700 N, EPSG:32631), corners off the cell
    xmin, ymin, xmax, ymax, cell = 487013.0, 5214420.0, 489377.0, 5216980.0, 25.0
    res = run("modelcontact", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "INTERVAL": 50.0,
                               "EXTENT": f"{xmin},{xmax},{ymin},{ymax} [EPSG:32631]", "CELL": cell,
                               **QUICK_TOOL, **OUT})
    _, r = library(sheet, contours=False, extent=(xmin, ymin, xmax, ymax), cell_m=cell)
    got, gt, _ = raster(res["surface"])
    assert gt == r.grid.transform
    np.testing.assert_array_equal(got, r.surface.astype(np.float32).astype(float))
    # corners on multiples of the cell, covering the extent asked for
    x0, y0 = gt[0], gt[3]
    x1, y1 = x0 + got.shape[1] * cell, y0 - got.shape[0] * cell
    assert gt[1] == cell and gt[5] == -cell
    assert all(v / cell == round(v / cell) for v in (x0, y0, x1, y1))
    assert x0 <= xmin and y1 <= ymin and x1 >= xmax and y0 >= ymax
    assert x0 > xmin - cell and y1 > ymin - cell and x1 < xmax + cell and y0 < ymax + cell


def test_the_depth_tool_turns_a_dem_in_feet_into_metres(run, sheet):
    # the demo DEM as the surface (read as it is, metres) and as the ground declared in feet:
    # depth = 0.3048 z - z wherever the DEM has a value
    from strikeline.io.raster import read_raster

    res = run("depthtrace", {"SURFACE": sheet["dem"], "DEM": sheet["dem"], "DEM_UNIT": FT, "depth": TMP,
                             "predicted_trace": TMP})
    z, _ = read_raster(sheet["dem"], label="DEM")
    got, _, _ = raster(res["depth"])
    want = (z * FOOT_M - z).astype(np.float32).astype(float)
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-4, equal_nan=True)
    assert np.isfinite(got).sum() == np.isfinite(z).sum() > 0
