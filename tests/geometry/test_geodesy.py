"""Meridian convergence (grid north vs true north)."""
import numpy as np
import pyproj
import pytest

from strikeline.geometry.geodesy import grid_to_true_azimuth, meridian_convergence_deg

POINTS = [("EPSG:32631", 488412.0, 5215583.0), ("EPSG:32631", 650000.0, 5215583.0),
          ("EPSG:32633", 300000.0, 6500000.0), ("EPSG:32733", 700000.0, 7000000.0),
          ("EPSG:27700", 530000.0, 180000.0)]


@pytest.mark.parametrize("crs,x,y", POINTS)
def test_matches_pyproj_factors(crs, x, y):
    # Source: pyproj (PROJ) Proj.get_factors().meridian_convergence, a general-purpose reference
    # library, evaluated at the same longitude/latitude.
    c = pyproj.CRS(crs)
    lon, lat = pyproj.Transformer.from_crs(c, c.geodetic_crs, always_xy=True).transform(x, y)
    ref = pyproj.Proj(c).get_factors(lon, lat).meridian_convergence
    assert meridian_convergence_deg(c.to_wkt(), x, y) == pytest.approx(ref, abs=1e-5)


def test_first_order_transverse_mercator_formula():
    # Source: Snyder 1987, USGS Prof. Paper 1395, ch. 8: gamma ~ dlambda * sin(phi) near the
    # central meridian (first order); UTM zone 31's central meridian is 3 deg E (common practice).
    c = pyproj.CRS("EPSG:32631")
    x, y = 560000.0, 5300000.0
    lon, lat = pyproj.Transformer.from_crs(c, c.geodetic_crs, always_xy=True).transform(x, y)
    approx = (lon - 3.0) * np.sin(np.radians(lat))
    assert meridian_convergence_deg("EPSG:32631", x, y) == pytest.approx(approx, abs=2e-3)
    assert meridian_convergence_deg("EPSG:32631", x, y) > 0  # east of the CM, north: grid N east of true N


def test_true_azimuth_and_vectorised():
    g = meridian_convergence_deg("EPSG:32631", np.array([400000.0, 600000.0]), np.array([5.2e6, 5.2e6]))
    assert g.shape == (2,) and g[0] < 0 < g[1]
    assert grid_to_true_azimuth(359.5, 1.0) == pytest.approx(0.5)


# Source: worked value of the planning review, from pyproj and Karney, C. F. F. (2011),
# "Transverse Mercator with an accuracy of a few nanometers", J. Geodesy 85, 475-485:
# at 74 W 40.6 N in UTM zone 18N (EPSG:32618) the meridian convergence is 0.6508 deg.
KARNEY_LON, KARNEY_LAT, KARNEY_GAMMA_DEG = -74.0, 40.6, 0.6508


def test_worked_value_utm_18n():
    x, y = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32618", always_xy=True).transform(KARNEY_LON, KARNEY_LAT)
    gamma = meridian_convergence_deg("EPSG:32618", x, y)
    assert gamma == pytest.approx(KARNEY_GAMMA_DEG, abs=5e-5)
    # true azimuth = grid azimuth + convergence
    assert grid_to_true_azimuth(90.0, gamma) == pytest.approx(90.0 + KARNEY_GAMMA_DEG, abs=5e-5)
