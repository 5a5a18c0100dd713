"""Picks whose elevation comes from a field, not from their Z: the plane and surface tools use it.

A plane of known attitude is written into the picks' elevation field; the points' own Z is either
missing (2-D points) or different from the field, so a tool that reads Z instead of the field
cannot recover the plane.
"""
from __future__ import annotations

import numpy as np
import pytest
from qgis.core import QgsFeature, QgsGeometry, QgsVectorLayer
from qgis_helpers import model_index

pytestmark = pytest.mark.qgis

TMP = "TEMPORARY_OUTPUT"
DIP_DEG = 30.0
DIP_DIRECTION_DEG = 120.0
#: Exact picks of a plane: total least squares recovers it to rounding.
ATTITUDE_TOL_DEG = 1e-6  # common practice: a few hundred ulps of the SVD on exact data


def plane_elevation(x, y, *, z0=500.0, x0=1000.0, y0=2000.0):
    """The plane's own formula (the reference of these tests): a plane dipping ``DIP_DEG`` toward
    azimuth ``DIP_DIRECTION_DEG`` descends by tan(dip) per metre along the unit vector
    (sin az, cos az) with x east and y north.

    # Source: from memory - the definition of dip and dip direction (Ragan 2009, ch. 1: the
    # gradient of a plane has magnitude tan(dip) and points up-dip, opposite the dip direction).
    """
    az = np.radians(DIP_DIRECTION_DEG)
    return z0 - np.tan(np.radians(DIP_DEG)) * ((x - x0) * np.sin(az) + (y - y0) * np.cos(az))


def _picks(kind: str) -> QgsVectorLayer:
    """60 picks scattered over 1.2 x 1 km with the plane's elevation in the field ``elev``.

    ``kind`` ``2d``: Point geometries (no Z at all). ``z``: PointZ whose Z is a second, steeper
    plane dipping the other way (so reading Z gives a clearly different attitude).
    """
    rng = np.random.default_rng(11)
    x = rng.uniform(400.0, 1600.0, 60)
    y = rng.uniform(1500.0, 2500.0, 60)
    elev = plane_elevation(x, y)
    wrong_z = 800.0 + 0.9 * (x - 1000.0) - 0.2 * (y - 2000.0)
    geom = "Point" if kind == "2d" else "PointZ"
    mem = QgsVectorLayer(f"{geom}?crs=EPSG:32633&field=elev:double", f"picks_{kind}", "memory")
    feats = []
    for xi, yi, ei, zi in zip(x, y, elev, wrong_z):
        f = QgsFeature(mem.fields())
        wkt = f"Point ({xi} {yi})" if kind == "2d" else f"PointZ ({xi} {yi} {zi})"
        f.setGeometry(QgsGeometry.fromWkt(wkt))
        f.setAttributes([float(ei)])
        feats.append(f)
    assert mem.dataProvider().addFeatures(feats)
    return mem


@pytest.mark.parametrize("kind", ["2d", "z"])
def test_plane_attitude_reads_the_elevation_field(run, kind):
    res = run("planeattitude", {"PICKS": _picks(kind), "PICKS_ELEV_FIELD": "elev", "RESAMPLES": 50,
                                "plane_attitudes": TMP})
    assert res["quality"] == "good"
    assert res["dip_deg"] == pytest.approx(DIP_DEG, abs=ATTITUDE_TOL_DEG)
    assert res["dip_direction_deg"] == pytest.approx(DIP_DIRECTION_DEG, abs=ATTITUDE_TOL_DEG)


@pytest.mark.parametrize("kind", ["2d", "z"])
def test_surface_model_reads_the_elevation_field(run, kind):
    res = run("surfacemodel", {"PICKS": _picks(kind), "PICKS_ELEV_FIELD": "elev", "MODEL": model_index("plane"), "CELL": 50.0,
                               "surface": TMP})
    assert res["model_chosen"] == "plane"
    assert res["dip_deg"] == pytest.approx(DIP_DEG, abs=ATTITUDE_TOL_DEG)
    assert res["dip_direction_deg"] == pytest.approx(DIP_DIRECTION_DEG, abs=ATTITUDE_TOL_DEG)
