"""`strikeline run` on a folded surface (test_data/fold): the model must follow the fold.

Reference: the analytic fold of the fictional Tolvane Fell sheet (test_data/fold/truth.json),
evaluated here from its stated formula.
"""
import json

import numpy as np
import pytest
import shapely
from osgeo import gdal, ogr

from helpers import REPO

FOLD = REPO / "test_data" / "fold"
# Acceptance of the issue (curved surfaces): spline error against truth under 2 m RMS inside
# the data hull.
SPLINE_RMS_LIMIT_M = 2.0


def _truth():
    return json.loads((FOLD / "truth.json").read_text())["surface"]


def _fold_z(s, x, y):
    # Source: truth.json "equation" and "frame" of the fold sheet
    a, p = np.radians(s["axis_trend_deg"]), np.radians(s["plunge_deg"])
    u = (x - s["x0"]) * np.sin(a) + (y - s["y0"]) * np.cos(a)
    t = (x - s["x0"]) * np.cos(a) - (y - s["y0"]) * np.sin(a)
    return s["z0"] - np.tan(p) * u + s["amplitude_m"] * np.cos(2 * np.pi * t / s["wavelength_m"])


def _fold_dip(s, x, y):
    # Source: truth.json "gradient" and "local_dip"
    a, p = np.radians(s["axis_trend_deg"]), np.radians(s["plunge_deg"])
    t = (x - s["x0"]) * np.cos(a) - (y - s["y0"]) * np.sin(a)
    dzds = -np.tan(p)
    dzdt = -s["amplitude_m"] * 2 * np.pi / s["wavelength_m"] * np.sin(2 * np.pi * t / s["wavelength_m"])
    gx = dzds * np.sin(a) + dzdt * np.cos(a)
    gy = dzds * np.cos(a) - dzdt * np.sin(a)
    return np.degrees(np.arctan(np.hypot(gx, gy))), np.mod(np.degrees(np.arctan2(-gx, -gy)), 360)


@pytest.fixture(scope="module")
def fold_out(fold_run):
    """The session's run on the fold sheet, default options (conftest)."""
    return fold_run.out


def _grid(path):
    ds = gdal.Open(str(path))
    gt = ds.GetGeoTransform()
    a = ds.GetRasterBand(1).ReadAsArray().astype(float)
    nd = ds.GetRasterBand(1).GetNoDataValue()
    ds = None
    a[a == nd] = np.nan
    rows, cols = a.shape
    X, Y = np.meshgrid(gt[0] + gt[1] * (np.arange(cols) + 0.5), gt[3] + gt[5] * (np.arange(rows) + 0.5))
    return a, X, Y


def _hull(out):
    ds = ogr.Open(str(out / "results.gpkg"))
    pts = [shapely.from_wkb(bytes(f.GetGeometryRef().ExportToWkb())) for f in ds.GetLayerByName("picks")]
    return shapely.convex_hull(shapely.multipoints(shapely.get_coordinates(np.array(pts))))


def test_auto_chooses_the_spline_and_it_follows_the_fold(fold_out):
    s = json.loads((fold_out / "summary.json").read_text())
    assert s["model"]["chosen"] == "spline"
    cv = s["model"]["cv_rmse_m"]
    assert cv["spline"] < cv["plane"] and cv["spline"] < cv["trend2"]
    z, X, Y = _grid(fold_out / "surface.tif")
    inside = shapely.contains_xy(_hull(fold_out), X, Y)
    err = z[inside] - _fold_z(_truth(), X[inside], Y[inside])
    assert np.sqrt(np.mean(err ** 2)) < SPLINE_RMS_LIMIT_M


def test_dip_grid_follows_the_limbs(fold_out):
    dip, X, Y = _grid(fold_out / "dip.tif")
    inside = shapely.contains_xy(_hull(fold_out), X, Y) & np.isfinite(dip)
    true_dip, _ = _fold_dip(_truth(), X[inside], Y[inside])
    # the fold's dips range from 5.5 deg (hinges) to 14 deg (limbs): a 1 deg RMS error keeps them apart
    assert np.sqrt(np.mean((dip[inside] - true_dip) ** 2)) < 1.0  # measured 0.35 deg


def test_local_attitudes_swing_with_the_fold(fold_out):
    ds = ogr.Open(str(fold_out / "results.gpkg"))
    good = [(f.GetGeometryRef().GetX(), f.GetGeometryRef().GetY(), f.GetField("dip_direction_deg"),
             f.GetField("dip_deg"), f.GetField("dip_ci95_deg"))
            for f in ds.GetLayerByName("attitudes") if f.GetField("quality") == "good"]
    # a window whose dip does not differ from 0 at 95% has no dip direction (horizontal within its
    # confidence); that may happen only where its interval reaches the hinges' gentle dips
    level = [r for r in good if r[2] is None]
    assert all(r[3] - r[4] <= 5.5 for r in level)
    rows = [r[:3] for r in good if r[2] is not None]
    assert len(rows) > 20 and len(level) <= len(good) / 4
    x, y, dd = map(np.array, zip(*rows))
    _, true_dd = _fold_dip(_truth(), x, y)
    diff = np.abs((dd - true_dd + 180) % 360 - 180)
    # the dip direction swings across the fold (limbs dip NW and SE); the windows follow it
    assert np.ptp(true_dd) > 90
    assert np.median(diff) < 8  # measured 4.5 deg


def test_one_plane_through_a_fold_is_flagged_not_planar(fold_out):
    pl = json.loads((fold_out / "summary.json").read_text())["plane"]
    # the fold's picks scatter tens of metres about one plane, far beyond the 2 m DEM error
    assert pl["rms_m"] > 10 and pl["quality"] == "weak" and "not planar" in pl["reason"]
