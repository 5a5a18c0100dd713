"""The thickness tool through QGIS: the library's numbers, and the textbook values.

# Source: strikeline library result as the reference (strikeline.maps.thickness; the numerical truth is
# tested in tests/test_thickness.py). External values:
# Source: Ragan, D. M. (2009), Structural Geology, 4th ed., thickness on horizontal and sloping
#   ground: t = w sin(dip) on level ground, t = w sin(dip + slope) for ground sloping against the dip.
# common practice: the true thickness between two points is |(base - top) . n| with n the unit
#   normal (sin d sin a, sin d cos a, cos d) of a plane dipping d toward azimuth a.
"""
from __future__ import annotations

import numpy as np
import pytest
import shapely
from qgis.core import QgsFeature, QgsField, QgsGeometry, QgsProcessingException, QgsProcessingFeedback, QgsVectorLayer
from qgis.PyQt.QtCore import QVariant
from qgis_helpers import bilinear_reference, table

from strikeline.maps.thickness import thickness_from_borehole, thickness_from_outcrop_width

pytestmark = pytest.mark.qgis

TMP = "TEMPORARY_OUTPUT"
CRS = "EPSG:32631"  # Source: EPSG dataset, WGS 84 / UTM zone 31N


def unit_normal(dip_direction_deg, dip_deg):
    a, d = np.radians(dip_direction_deg), np.radians(dip_deg)
    return np.array([np.sin(d) * np.sin(a), np.sin(d) * np.cos(a), np.cos(d)])


def memory(geom_type, fields, rows):
    lyr = QgsVectorLayer(f"{geom_type}?crs={CRS}", "measurements", "memory")
    lyr.dataProvider().addAttributes([QgsField(n, t) for n, t in fields])
    lyr.updateFields()
    feats = []
    for wkt, attrs in rows:
        f = QgsFeature(lyr.fields())
        f.setGeometry(QgsGeometry.fromWkt(wkt))
        f.setAttributes(attrs)
        feats.append(f)
    lyr.dataProvider().addFeatures(feats)
    return lyr


def test_outcrop_width_level_and_sloping_ground(run):
    lyr = memory("Point", [("w", QVariant.Double), ("slope", QVariant.Double), ("name", QVariant.String)],
                 [("Point (0 0)", [100.0, 0.0, "level"]), ("Point (10 0)", [100.0, 20.0, "scarp"])])
    res = run("unitthickness", {"METHOD": 1, "INPUT": lyr, "DIP_DEG": 30.0, "DIP_DIRECTION_DEG": 120.0,
                                "WIDTH_FIELD": "w", "SLOPE_FIELD": "slope", "SLOPE_SENSE": 0, "unit_thickness": TMP})
    _, cols = table(res["unit_thickness"])
    LEVEL = 100.0 * np.sin(np.radians(30.0))  # Source: Ragan (2009), t = w sin(dip) = 50 m
    SCARP = 100.0 * np.sin(np.radians(50.0))  # Source: Ragan (2009), t = w sin(dip + slope) = 76.604 m
    np.testing.assert_allclose(cols["true_thickness_m"], [LEVEL, SCARP], atol=1e-9)
    np.testing.assert_allclose(cols["true_thickness_m"], thickness_from_outcrop_width(
        np.array([100.0, 100.0]), 30.0, ground_slope_deg=np.array([0.0, 20.0]), slope_sense="against_dip"))
    # common practice: vertical thickness = true thickness / cos(dip)
    np.testing.assert_allclose(cols["vertical_thickness_m"], cols["true_thickness_m"] / np.cos(np.radians(30.0)))
    assert cols["name"].tolist() == ["level", "scarp"]  # the input's own fields are kept


def test_outcrop_width_on_a_dip_slope_is_left_empty_with_a_warning(run):
    # Source: Ragan (2009, from memory): t = w |sin(dip - slope)| with the dip is 0 for any width
    # on a dip slope (slope = dip): the width gives no thickness there, so the feature gets none.
    lyr = memory("Point", [("w", QVariant.Double), ("slope", QVariant.Double)],
                 [("Point (0 0)", [100.0, 30.0]), ("Point (10 0)", [100.0, 20.0])])
    fb = QgsProcessingFeedback()
    warnings = []
    fb.pushWarning = warnings.append
    res = run("unitthickness", {"METHOD": 1, "INPUT": lyr, "DIP_DEG": 30.0, "DIP_DIRECTION_DEG": 120.0,
                                "WIDTH_FIELD": "w", "SLOPE_FIELD": "slope", "SLOPE_SENSE": 1, "unit_thickness": TMP},
              feedback=fb)
    _, cols = table(res["unit_thickness"])
    assert cols["true_thickness_m"][0] is None or not np.isfinite(cols["true_thickness_m"][0])
    # Source: Ragan (2009), t = w |sin(dip - slope)| = 100 sin 10 = 17.365 m
    assert cols["true_thickness_m"][1] == pytest.approx(100.0 * np.sin(np.radians(10.0)), abs=1e-9)
    assert res["n_measurements"] == 1
    assert any("parallel to the bedding" in w for w in warnings)


def test_borehole_intercepts(run):
    lyr = memory("Point", [("len", QVariant.Double), ("az", QVariant.Double), ("pl", QVariant.Double)],
                 [("Point (0 0)", [100.0, 45.0, 70.0]), ("Point (5 5)", [80.0, 0.0, 90.0]),
                  ("Point (9 9)", [None, 0.0, 90.0])])
    fb = QgsProcessingFeedback()
    warnings = []
    fb.pushWarning = warnings.append
    res = run("unitthickness", {"METHOD": 2, "INPUT": lyr, "DIP_DEG": 40.0, "DIP_DIRECTION_DEG": 135.0,
                                "LENGTH_FIELD": "len", "AZIMUTH_FIELD": "az", "PLUNGE_FIELD": "pl",
                                "unit_thickness": TMP}, feedback=fb)
    _, cols = table(res["unit_thickness"])
    t = cols["true_thickness_m"]
    n = unit_normal(135.0, 40.0)
    az, pl = np.radians(45.0), np.radians(70.0)
    hole = np.array([np.sin(az) * np.cos(pl), np.cos(az) * np.cos(pl), -np.sin(pl)])
    assert t[0] == pytest.approx(100.0 * abs(hole @ n), abs=1e-9)
    assert t[1] == pytest.approx(80.0 * np.cos(np.radians(40.0)), abs=1e-9)  # vertical hole: L cos(dip)
    assert t[0] == pytest.approx(float(thickness_from_borehole(100.0, 45.0, 70.0, 135.0, 40.0)), abs=1e-12)
    assert t[2] is None
    assert any("1 feature(s)" in w and "left empty" in w for w in warnings)


def test_two_points_with_z_and_with_the_dem(run, sheet):
    lyr = memory("LineStringZ", [], [("LineStringZ (0 0 100, 3 4 90)", [])])
    res = run("unitthickness", {"METHOD": 0, "INPUT": lyr, "DIP_DEG": 60.0, "DIP_DIRECTION_DEG": 90.0,
                                "unit_thickness": TMP})
    _, cols = table(res["unit_thickness"])
    want = abs(np.array([3.0, 4.0, -10.0]) @ unit_normal(90.0, 60.0))
    assert cols["true_thickness_m"][0] == pytest.approx(want, abs=1e-12)

    # Lines across the demo sheet: ends take the DEM's bilinear elevation.
    ends = [((487000.0, 5216000.0), (487150.0, 5215900.0)), ((489000.0, 5214500.0), (488900.0, 5214420.0))]
    lines = memory("LineString", [], [(f"LineString ({a[0]} {a[1]}, {b[0]} {b[1]})", []) for a, b in ends])
    res = run("unitthickness", {"METHOD": 0, "INPUT": lines, "DEM": sheet["dem"], "DIP_DEG": 18.7,
                                "DIP_DIRECTION_DEG": 221.3, "unit_thickness": TMP})
    geoms, cols = table(res["unit_thickness"])
    f = bilinear_reference(sheet["dem"])  # Source: scipy RegularGridInterpolator (linear), scipy 1.10
    n = unit_normal(221.3, 18.7)
    for (a, b), t in zip(ends, cols["true_thickness_m"]):
        za, zb = f([a[0]], [a[1]])[0], f([b[0]], [b[1]])[0]
        assert t == pytest.approx(abs((np.array([*b, zb]) - np.array([*a, za])) @ n), abs=1e-6)
    assert len(shapely.get_coordinates(geoms)) == 4


def test_wrong_field_type_and_missing_field(run):
    lyr = memory("Point", [("w", QVariant.String)], [("Point (0 0)", ["100"])])
    with pytest.raises(QgsProcessingException, match="is of type String, not numeric"):
        run("unitthickness", {"METHOD": 1, "INPUT": lyr, "DIP_DEG": 30.0, "DIP_DIRECTION_DEG": 0.0,
                              "WIDTH_FIELD": "w", "unit_thickness": TMP})
    with pytest.raises(QgsProcessingException, match="choose the 'Outcrop width field"):
        run("unitthickness", {"METHOD": 1, "INPUT": lyr, "DIP_DEG": 30.0, "DIP_DIRECTION_DEG": 0.0,
                              "unit_thickness": TMP})


def test_isopachs_between_the_demo_top_and_base(run, sheet):
    from strikeline.io.raster import read_raster
    from strikeline.maps.thickness import isopach_grids

    d = sheet["dir"]
    surfaces = {}
    for key, uri in (("top", f"{d / 'top_contacts.gpkg'}|layername=top_contacts"), ("base", sheet["contacts_uri"])):
        picks = run("contactpicks", {"CONTACTS": uri, "DEM": sheet["dem"], "picks": TMP})["picks"]
        surfaces[key] = run("surfacemodel", {"PICKS": picks, "REFERENCE": sheet["dem"], "surface": TMP})["surface"]
    res = run("isopachs", {"TOP": surfaces["top"], "BASE": surfaces["base"], "INTERVAL": 10.0,
                           "vertical_thickness": TMP, "true_thickness": TMP, "isopachs": TMP})
    top, grid = read_raster(surfaces["top"], label="top")
    base, _ = read_raster(surfaces["base"], label="base")
    v_ref, t_ref = isopach_grids(top, base, grid)
    v, _ = read_raster(res["vertical_thickness"], label="v")
    t, _ = read_raster(res["true_thickness"], label="t")
    np.testing.assert_array_equal(v, v_ref.astype(np.float32).astype(float))
    np.testing.assert_array_equal(t, t_ref.astype(np.float32).astype(float))
    TRUE_M = sheet["truth"]["true_thickness_m"]  # Source: truth.json of the demo generator (73.6 m)
    VERTICAL_M = TRUE_M / np.cos(np.radians(sheet["truth"]["dip_deg"]))  # common practice: t / cos(dip)
    assert res["true_thickness_median_m"] == pytest.approx(TRUE_M, abs=0.5)
    assert np.nanmedian(v) == pytest.approx(VERTICAL_M, abs=0.5)
    assert res["n_negative_cells"] == 0
