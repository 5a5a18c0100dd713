"""Thickness of planar units (strikeline.maps.thickness)."""
import numpy as np
import pytest

from strikeline.errors import CancelledError, InputError
from strikeline.geometry.grid import Grid
from strikeline.geometry import normal_from_dip
from strikeline.maps.thickness import (
    isopach_grids,
    outcrop_width_gives_thickness,
    thickness_between_points,
    thickness_from_borehole,
    thickness_from_outcrop_width,
    thickness_from_vertical,
    vertical_thickness,
)

# common practice: 250 m of outcrop width on horizontal ground, dip 26 deg -> about 110 m
# (sin 26 deg = 0.438; 250 * 0.438 = 109.5)
WIDTH_250_M = 250.0
DIP_26_DEG = 26.0
SIN_26 = 0.438
ABOUT_110_M = 110.0

# Source: Rowland, Duebendorfer & Schiefelbein (2007), Structural Analysis and Synthesis; Ragan
# (2009), Structural Geology: t = w sin(delta + sigma) (ground slopes against the dip),
# t = w |sin(delta - sigma)| (with the dip), t = w sin(delta) on flat ground; vertical
# thickness t / cos(delta). Worked values of the planning review, recomputed by hand here:
#   100 * sin(30 + 20) = 100 * 0.766044 = 76.604 m
#   100 * sin(30 - 20) = 100 * 0.173648 = 17.365 m
#   100 * sin 30       = 50.000 m;   50 / cos 30 = 50 / 0.866025 = 57.735 m
W_100_M, DIP_30_DEG, SLOPE_20_DEG = 100.0, 30.0, 20.0
AGAINST_DIP_M = 76.604
WITH_DIP_M = 17.365
FLAT_M = 50.000
VERTICAL_OF_50_AT_30_M = 57.735

# Source: vector geometry, t = L |b . n| (b the hole's unit vector, n the bedding's unit
# normal); worked values of the planning review, recomputed by hand here:
#   b = (cos70 sin45, cos70 cos45, -sin70) = (0.241845, 0.241845, -0.939693)
#   n = (sin40 sin135, sin40 cos135, cos40) = (0.454519, -0.454519, 0.766044)
#   b.n = -0.719846 -> 71.985 m
#   b = (cos45 sin200, cos45 cos200, -sin45) = (-0.241845, -0.664463, -0.707107)
#   n = (sin60 sin110, sin60 cos110, cos60) = (0.813798, -0.296198, 0.5)
#   b.n = -0.353553 -> 35.355 m
BOREHOLE_1 = dict(length_m=100.0, hole_azimuth_deg=45.0, hole_plunge_deg=70.0,
                  dip_direction_deg=135.0, dip_deg=40.0)
BOREHOLE_1_M = 71.985
BOREHOLE_2 = dict(length_m=100.0, hole_azimuth_deg=200.0, hole_plunge_deg=45.0,
                  dip_direction_deg=110.0, dip_deg=60.0)
BOREHOLE_2_M = 35.355


def test_common_practice_250_m_at_26_degrees_is_about_110_m():
    t = float(thickness_from_outcrop_width(WIDTH_250_M, DIP_26_DEG))
    assert t == pytest.approx(WIDTH_250_M * SIN_26, abs=0.1)
    assert abs(t - ABOUT_110_M) < 1.0


def test_flat_ground_worked_value():
    assert float(thickness_from_outcrop_width(W_100_M, DIP_30_DEG)) == pytest.approx(FLAT_M,
                                                                                 abs=5e-4)


def test_sloping_ground_against_and_with_the_dip():
    against = thickness_from_outcrop_width(W_100_M, DIP_30_DEG, ground_slope_deg=SLOPE_20_DEG,
                                           slope_sense="against_dip")
    with_dip = thickness_from_outcrop_width(W_100_M, DIP_30_DEG, ground_slope_deg=SLOPE_20_DEG,
                                            slope_sense="with_dip")
    assert float(against) == pytest.approx(AGAINST_DIP_M, abs=5e-4)
    assert float(with_dip) == pytest.approx(WITH_DIP_M, abs=5e-4)


@pytest.mark.parametrize("sense", ["against_dip", "with_dip"])
@pytest.mark.parametrize("dip,slope", [(30.0, 20.0), (10.0, 35.0), (70.0, 5.0), (45.0, 45.0)])
def test_sloping_ground_matches_projection_on_the_normal(sense, dip, slope):
    # Independent path: put the top contact at the origin and the base at slope distance w
    # along the ground, perpendicular to strike, and project on the bedding normal.
    # Bed dips east (090). "against_dip": ground rises eastward; "with_dip": it falls eastward.
    w = 80.0
    s = np.radians(slope)
    rise = 1.0 if sense == "against_dip" else -1.0
    base = np.array([w * np.cos(s), 0.0, rise * w * np.sin(s)])
    expected = thickness_between_points([0.0, 0.0, 0.0], base, 90.0, dip)
    if sense == "with_dip" and dip == slope:
        # a dip slope: the far end of the width lies in the same bedding plane (projection 0),
        # so the width carries no thickness and is refused instead of giving 0 m
        assert float(expected) == pytest.approx(0.0, abs=1e-9)
        with pytest.raises(InputError, match="dip slope"):
            thickness_from_outcrop_width(w, dip, ground_slope_deg=slope, slope_sense=sense)
        return
    got = thickness_from_outcrop_width(w, dip, ground_slope_deg=slope, slope_sense=sense)
    assert float(got) == pytest.approx(float(expected), abs=1e-9)


@pytest.mark.parametrize("dip,slope,sense,words", [
    (0.0, 0.0, None, "horizontal bed on flat ground"),
    (20.0, 20.0, "with_dip", "dip slope"),
    (63.5, 63.5, "with_dip", "dip slope"),
])
def test_outcrop_width_refused_where_the_ground_parallels_the_bedding(dip, slope, sense, words):
    # Source: Ragan (2009) and Rowland et al. (2007), both from memory (t = w sin(dip + slope)
    # against the dip, w sin(dip - slope) with it; a horizontal bed's contacts follow the
    # topographic contours and its thickness is the elevation difference of its contacts):
    # sin(dip -/+ slope) = 0 where ground and bedding are parallel, so
    # any width would give 0 m - the width says nothing about the thickness there.
    assert not outcrop_width_gives_thickness(dip, ground_slope_deg=slope, slope_sense=sense)
    with pytest.raises(InputError, match=f"cannot give a thickness in this geometry: .*{words}"):
        thickness_from_outcrop_width(100.0, dip, ground_slope_deg=slope, slope_sense=sense)
    with pytest.raises(InputError, match="between a point on the top and one on the base"):
        thickness_from_outcrop_width([100.0, 50.0], [30.0, dip], ground_slope_deg=slope, slope_sense=sense)
    # against the dip the same angles cut the bedding at dip + slope, and a width gives a thickness
    if slope > 0:
        assert float(thickness_from_outcrop_width(100.0, dip, ground_slope_deg=slope, slope_sense="against_dip")) \
            == pytest.approx(100.0 * np.sin(np.radians(dip + slope)), abs=1e-9)


def test_horizontal_width_on_sloping_ground():
    # the map (horizontal) width of a slope distance w is w cos(sigma)
    h = W_100_M * np.cos(np.radians(SLOPE_20_DEG))
    got = thickness_from_outcrop_width(h, DIP_30_DEG, ground_slope_deg=SLOPE_20_DEG,
                                       slope_sense="against_dip", width_kind="horizontal")
    assert float(got) == pytest.approx(AGAINST_DIP_M, abs=5e-4)


def test_outcrop_width_broadcasts():
    got = thickness_from_outcrop_width([100.0, 200.0], [30.0, 30.0])
    assert np.allclose(got, [50.0, 100.0])


def test_sloping_ground_needs_a_sense():
    with pytest.raises(InputError, match="slope_sense is needed"):
        thickness_from_outcrop_width(100.0, 30.0, ground_slope_deg=10.0)


def test_bad_choices_list_the_valid_ones():
    with pytest.raises(InputError, match="against_dip, with_dip"):
        thickness_from_outcrop_width(100.0, 30.0, ground_slope_deg=10.0, slope_sense="down")
    with pytest.raises(InputError, match="slope, horizontal"):
        thickness_from_outcrop_width(100.0, 30.0, width_kind="map")


@pytest.mark.parametrize("kwargs,match", [
    (dict(width_m=-1.0, dip_deg=30.0), "width_m"),
    (dict(width_m=10.0, dip_deg=91.0), "dip_deg"),
    (dict(width_m=10.0, dip_deg=30.0, ground_slope_deg=90.0, slope_sense="with_dip"),
     "ground_slope_deg"),
])
def test_out_of_range_inputs(kwargs, match):
    with pytest.raises(InputError, match=match):
        thickness_from_outcrop_width(**kwargs)


def test_vertical_thickness_worked_value_and_inverse():
    assert float(vertical_thickness(FLAT_M, DIP_30_DEG)) == pytest.approx(VERTICAL_OF_50_AT_30_M,
                                                                          abs=5e-4)
    assert float(thickness_from_vertical(VERTICAL_OF_50_AT_30_M, DIP_30_DEG)) == pytest.approx(
        FLAT_M, abs=5e-4)
    assert np.isinf(vertical_thickness(10.0, 90.0))
    assert float(vertical_thickness(10.0, 0.0)) == 10.0


def test_thickness_between_points_of_two_parallel_planes():
    # two planes 12.5 m apart; random points on each give exactly 12.5 m
    rng = np.random.default_rng(3)
    dd, dip, t = 217.0, 41.0, 12.5
    n = normal_from_dip(dd, dip)
    u = np.cross(n, [0.0, 0.0, 1.0])
    u /= np.linalg.norm(u)
    v = np.cross(n, u)
    a = rng.normal(0, 300, (20, 2)) @ np.array([u, v])
    b = rng.normal(0, 300, (20, 2)) @ np.array([u, v]) - t * n
    assert np.allclose(thickness_between_points(a, b, dd, dip), t)


def test_thickness_between_points_needs_xyz():
    with pytest.raises(InputError, match="x, y, z"):
        thickness_between_points([0.0, 0.0], [1.0, 1.0], 90.0, 30.0)


def test_borehole_worked_values():
    assert float(thickness_from_borehole(**BOREHOLE_1)) == pytest.approx(BOREHOLE_1_M, abs=5e-4)
    assert float(thickness_from_borehole(**BOREHOLE_2)) == pytest.approx(BOREHOLE_2_M, abs=5e-4)


def test_borehole_special_cases():
    # common practice: a vertical hole drills the vertical thickness, t = L cos(dip)
    assert float(thickness_from_borehole(100.0, 0.0, 90.0, 70.0, 30.0)) == pytest.approx(
        100.0 * np.cos(np.radians(30.0)))
    # a hole perpendicular to bedding (along the pole: trend dd+180, plunge 90-dip) drills t
    assert float(thickness_from_borehole(42.0, 250.0, 55.0, 70.0, 35.0)) == pytest.approx(42.0)
    # a hole along strike on a horizontal line drills parallel to bedding: 0
    assert float(thickness_from_borehole(42.0, 340.0, 0.0, 70.0, 35.0)) == pytest.approx(
        0.0, abs=1e-12)


def test_borehole_rejects_upward_plunge():
    with pytest.raises(InputError, match="hole_plunge_deg"):
        thickness_from_borehole(100.0, 0.0, -10.0, 90.0, 30.0)


# --------------------------------------------------------------------------- isopach grids
# Source: analytic geometry: the planes z = a x + b y + c1 and z = a x + b y + c2 lie
# |c1 - c2| / sqrt(1 + a^2 + b^2) apart along their common normal, and |c1 - c2| apart along
# the vertical; with tan(dip) = sqrt(a^2 + b^2) that is t = v cos(dip) (common practice).
ISOPACH_NORMAL_M = 80.0


def _plane_pair(dip_deg, dip_direction_deg, *, shape=(40, 50), cell_m=25.0):
    g = Grid((480000.0, cell_m, 0.0, 5200000.0, 0.0, -cell_m), shape)
    x, y = g.mesh()
    n = normal_from_dip(dip_direction_deg, dip_deg)
    a, b = -n[0] / n[2], -n[1] / n[2]           # z = a x + b y + c, the plane with normal n
    base = 350.0 + a * (x - 480000.0) + b * (y - 5200000.0)
    offset = ISOPACH_NORMAL_M * np.sqrt(1.0 + a * a + b * b)   # c_top - c_base
    return g, base + offset, base, offset


@pytest.mark.parametrize("dip,dd", [(0.0, 0.0), (18.7, 221.3), (30.0, 90.0), (62.0, 305.0)])
def test_isopach_of_parallel_planes_80_m_apart_reads_80_m_everywhere(dip, dd):
    g, top, base, offset = _plane_pair(dip, dd)
    vertical, true = isopach_grids(top, base, g)
    assert vertical.shape == true.shape == g.shape
    assert np.allclose(vertical, offset, atol=1e-9)
    # dip of the base from float32 differences: a few micrometres over 80 m
    assert np.max(np.abs(true - ISOPACH_NORMAL_M)) < 1e-3
    # the same distance by the vector form, the projection of top - base on the unit normal
    n = normal_from_dip(dd, dip)
    assert float(np.dot([0.0, 0.0, offset], n)) == pytest.approx(ISOPACH_NORMAL_M, abs=1e-9)


def test_isopach_nan_where_either_surface_has_no_value():
    g, top, base, _ = _plane_pair(30.0, 90.0)
    top[3, 4] = np.nan
    base[10, 7] = np.nan
    vertical, true = isopach_grids(top, base, g)
    for r, c in ((3, 4), (10, 7)):
        assert np.isnan(vertical[r, c]) and np.isnan(true[r, c])
    # next to a NaN base cell the dip is one-sided and stays exact for a plane
    assert true[10, 8] == pytest.approx(ISOPACH_NORMAL_M, abs=1e-3)
    assert np.isfinite(true).sum() == true.size - 2


def test_isopach_keeps_the_sign_where_the_surfaces_cross():
    g, top, base, offset = _plane_pair(30.0, 90.0)
    vertical, true = isopach_grids(base, top, g)  # swapped: the "top" lies below the "base"
    assert np.allclose(vertical, -offset)
    assert np.allclose(true, -ISOPACH_NORMAL_M, atol=1e-3)


def test_isopach_of_a_wedge_follows_the_base_dip():
    # horizontal base, top rising eastward: vertical thickness grows with x, true = vertical
    g = Grid((0.0, 10.0, 0.0, 100.0, 0.0, -10.0), (10, 12))
    x, _ = g.mesh()
    base = np.full(g.shape, 100.0)
    top = base + 5.0 + 0.1 * x
    vertical, true = isopach_grids(top, base, g)
    assert np.allclose(vertical, 5.0 + 0.1 * x) and np.allclose(true, vertical)


def test_isopach_refuses_mismatched_arrays():
    g, top, base, _ = _plane_pair(30.0, 90.0)
    with pytest.raises(InputError, match="top_m has shape"):
        isopach_grids(top[:-1], base, g)
    with pytest.raises(InputError, match="float array"):
        isopach_grids(top, base.astype(int), g)


def test_isopach_can_be_cancelled():
    g, top, base, _ = _plane_pair(30.0, 90.0)
    with pytest.raises(CancelledError):
        isopach_grids(top, base, g, is_cancelled=lambda: True)
