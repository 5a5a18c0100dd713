"""Tests of strikeline.picks: contour crossings, DEM sampling, densifying, the PickSet.

Exact analytic cases first (crossing points of straight lines worked by hand, planes that
bilinear interpolation must reproduce), then checks against reference libraries: GEOS
(through shapely, on the unsplit lines), scipy.ndimage.map_coordinates and GDAL's warper.
"""
import numpy as np
import pytest
import shapely
from shapely import LineString, MultiLineString, Point, Polygon

from strikeline.errors import CancelledError, InputError
from strikeline.geometry.grid import Grid
from strikeline.picks import (PickSet, densify_lines, picks_from_contours, picks_from_dem,
                              sample_bilinear)

ATOL_M = 1e-9  # exact-arithmetic cases: only floating-point rounding allowed


def sorted_rows(a):
    a = np.asarray(a, dtype=float)
    return a[np.lexsort(a.T[::-1])] if len(a) else a


# --------------------------------------------------------------------------------------------
# PickSet
# --------------------------------------------------------------------------------------------
def test_pickset_concat_counts_and_empty():
    a = PickSet(np.ones((2, 3)), np.array([4, 4]), np.array(["dem", "dem"]))
    b = PickSet(np.zeros((1, 3)), np.array([9]), np.array(["contours"]))
    both = PickSet.concat(a, PickSet.empty(), b)
    assert len(both) == 3
    assert both.contact_id.dtype == np.int64 and both.contact_id.tolist() == [4, 4, 9]
    assert both.source.dtype == np.dtype("<U8")
    assert both.counts_by_source() == {"dem": 2, "contours": 1}
    assert PickSet.empty().counts_by_source() == {"dem": 0, "contours": 0}
    assert len(PickSet.concat()) == 0 and PickSet.concat().xyz.shape == (0, 3)


def test_pickset_refuses_bad_arrays():
    with pytest.raises(InputError, match="differ in length"):
        PickSet(np.zeros((2, 3)), np.array([1]), np.array(["dem", "dem"]))
    with pytest.raises(InputError, match="source must be one of dem, contours"):
        PickSet(np.zeros((1, 3)), np.array([1]), np.array(["lidar"]))
    with pytest.raises(InputError, match=r"\(n, 3\)"):
        PickSet(np.zeros((2, 2)), np.array([1, 1]), np.array(["dem", "dem"]))


# --------------------------------------------------------------------------------------------
# Contour crossings: exact cases
# --------------------------------------------------------------------------------------------
# A contact from (0, 0) to (100, 50), i.e. y = x / 2, crosses the horizontal lines y = k at
# x = 2k.  Source: elementary analytic geometry (common practice).
DIAGONAL = LineString([(0.0, 0.0), (100.0, 50.0)])
LEVELS_Y = [10.0, 20.0, 30.0, 40.0]
LEVELS_Z = [310.0, 320.0, 330.0, 340.0]
EXPECTED_DIAGONAL = [[20.0, 10.0, 310.0], [40.0, 20.0, 320.0],
                     [60.0, 30.0, 330.0], [80.0, 40.0, 340.0]]  # common practice: x = 2y


def horizontal(y, x0=-10.0, x1=110.0):
    return LineString([(x0, y), (x1, y)])


def test_straight_contact_crosses_horizontal_contours_at_known_points():
    p = picks_from_contours([DIAGONAL], [horizontal(y) for y in LEVELS_Y], LEVELS_Z)
    np.testing.assert_allclose(p.xyz, EXPECTED_DIAGONAL, atol=ATOL_M)
    assert p.source.tolist() == ["contours"] * 4
    assert p.contact_id.tolist() == [0] * 4


def test_contact_ids_and_serial_equals_threaded():
    contacts = [DIAGONAL, None, LineString([(0.0, 50.0), (100.0, 0.0)])]
    contours = [horizontal(y) for y in LEVELS_Y]
    p1 = picks_from_contours(contacts, contours, LEVELS_Z, contact_ids=[71, 72, 73], workers=1)
    p2 = picks_from_contours(contacts, contours, LEVELS_Z, contact_ids=[71, 72, 73])
    assert p1.contact_id.tolist() == [71] * 4 + [73] * 4
    np.testing.assert_array_equal(p1.xyz, p2.xyz)
    # The second contact is y = 50 - x / 2, so it meets y = k at x = 100 - 2k (common practice).
    np.testing.assert_allclose(p1.xyz[4:, 0], [80.0, 60.0, 40.0, 20.0], atol=ATOL_M)


def test_tangent_contour_gives_one_pick():
    # A V-shaped contour whose tip touches the contact y = 0 at (5, 0) without crossing it.
    contact = LineString([(0.0, 0.0), (10.0, 0.0)])
    contour = LineString([(0.0, 2.0), (5.0, 0.0), (10.0, 2.0)])
    TOUCH = [[5.0, 0.0, 250.0]]  # common practice: the single common point of the two lines
    p = picks_from_contours([contact], [contour], [250.0])
    np.testing.assert_allclose(p.xyz, TOUCH, atol=ATOL_M)


def test_contact_ending_on_contour_counts_once():
    contact = LineString([(0.0, 0.0), (0.0, 10.0)])  # ends on the contour y = 10
    p = picks_from_contours([contact], [horizontal(10.0)], [120.0])
    np.testing.assert_allclose(p.xyz, [[0.0, 10.0, 120.0]], atol=ATOL_M)  # common practice


def test_crossing_on_a_piece_junction_and_on_a_vertex_counts_once():
    # 100 one-metre segments: the contact is cut into pieces of 32 segments internally, so
    # x = 32 is a junction shared by two pieces; x = 50.0 is an ordinary vertex.
    x = np.arange(101.0)
    contact = LineString(np.column_stack([x, np.zeros_like(x)]))
    contours = [LineString([(32.0, -1.0), (32.0, 1.0)]), LineString([(50.0, -1.0), (50.0, 1.0)])]
    p = picks_from_contours([contact], contours, [10.0, 20.0])
    np.testing.assert_allclose(p.xyz, [[32.0, 0.0, 10.0], [50.0, 0.0, 20.0]], atol=ATOL_M)


def test_overlap_gives_its_end_points_or_points_along_it():
    # The contour runs along the contact from x = 2 to x = 5, then leaves and crosses back
    # through (7, 0). Source: common practice (the shared stretch and the crossing).
    contact = LineString([(0.0, 0.0), (10.0, 0.0)])
    contour = LineString([(2.0, -1.0), (2.0, 0.0), (5.0, 0.0), (6.0, 1.0), (7.0, 0.0), (8.0, -1.0)])
    ENDS_AND_CROSSING_X = [2.0, 5.0, 7.0]
    ALONG_1M_X = [2.0, 3.0, 4.0, 5.0, 7.0]  # stretch of 3 m in 1 m steps, plus the crossing
    p = picks_from_contours([contact], [contour], [90.0])
    np.testing.assert_allclose(p.xyz[:, 0], ENDS_AND_CROSSING_X, atol=ATOL_M)
    assert np.all(p.xyz[:, 1:] == [0.0, 90.0])
    p = picks_from_contours([contact], [contour], [90.0], overlap_spacing_m=1.0)
    np.testing.assert_allclose(p.xyz[:, 0], ALONG_1M_X, atol=ATOL_M)


def test_long_overlap_across_piece_junctions_keeps_only_its_ends():
    x = np.linspace(0.0, 1000.0, 1001)  # 1000 segments: about 31 internal pieces
    contact = LineString(np.column_stack([x, np.zeros_like(x)]))
    contour = LineString([(100.5, -1.0), (100.5, 0.0), (900.5, 0.0), (900.5, 1.0)])
    p = picks_from_contours([contact], [contour], [5.0])
    np.testing.assert_allclose(p.xyz, [[100.5, 0.0, 5.0], [900.5, 0.0, 5.0]], atol=ATOL_M)


def test_multipart_contacts_and_contours():
    contact = MultiLineString([[(0.0, 0.0), (50.0, 25.0)], [(50.0, 25.0), (100.0, 50.0)],
                               [(0.0, 100.0), (10.0, 100.0)]])  # last part crosses nothing
    contours = [MultiLineString([[(-10.0, 10.0), (110.0, 10.0)], [(-10.0, 20.0), (110.0, 20.0)]]),
                horizontal(30.0), horizontal(40.0)]
    # The shared vertex (50, 25) of parts one and two is not on a contour; crossings as DIAGONAL.
    EXPECTED = [[20.0, 10.0, 500.0], [40.0, 20.0, 500.0],
                [60.0, 30.0, 530.0], [80.0, 40.0, 540.0]]  # common practice: x = 2y
    p = picks_from_contours([contact], contours, [500.0, 530.0, 540.0], contact_ids=[12])
    np.testing.assert_allclose(sorted_rows(p.xyz), EXPECTED, atol=ATOL_M)
    assert set(p.contact_id.tolist()) == {12}


def test_multipart_parts_meeting_on_a_contour_give_one_pick():
    contact = MultiLineString([[(0.0, 0.0), (40.0, 20.0)], [(40.0, 20.0), (100.0, 50.0)]])
    p = picks_from_contours([contact], [horizontal(20.0)], [77.0])
    np.testing.assert_allclose(p.xyz, [[40.0, 20.0, 77.0]], atol=ATOL_M)  # common practice


def test_duplicate_vertices_change_nothing():
    clean = picks_from_contours([DIAGONAL], [horizontal(y) for y in LEVELS_Y], LEVELS_Z)
    dup_contact = LineString([(0.0, 0.0), (0.0, 0.0), (40.0, 20.0), (40.0, 20.0), (40.0, 20.0),
                              (100.0, 50.0), (100.0, 50.0)])
    dup_contours = [LineString([(-10.0, y), (50.0, y), (50.0, y), (110.0, y)]) for y in LEVELS_Y]
    p = picks_from_contours([dup_contact], dup_contours, LEVELS_Z)
    np.testing.assert_allclose(p.xyz, clean.xyz, atol=ATOL_M)
    np.testing.assert_allclose(p.xyz, EXPECTED_DIAGONAL, atol=ATOL_M)


def test_contour_split_at_the_crossing_and_two_levels_at_one_point():
    contact = LineString([(0.0, -5.0), (0.0, 5.0)])
    split = [LineString([(-5.0, 0.0), (0.0, 0.0)]), LineString([(0.0, 0.0), (5.0, 0.0)])]
    p = picks_from_contours([contact], split, [40.0, 40.0])
    np.testing.assert_allclose(p.xyz, [[0.0, 0.0, 40.0]], atol=ATOL_M)
    # Two contours of different elevation meeting at the crossing (a cliff): both kept.
    p = picks_from_contours([contact], split, [40.0, 50.0])
    np.testing.assert_allclose(p.xyz, [[0.0, 0.0, 40.0], [0.0, 0.0, 50.0]], atol=ATOL_M)


def test_tolerance_merges_close_picks_of_one_contact_only():
    contact = LineString([(0.0, 0.0), (10.0, 0.0)])
    near = [LineString([(5.0, -1.0), (5.0, 1.0)]), LineString([(5.0005, -1.0), (5.0005, 1.0)])]
    assert len(picks_from_contours([contact], near, [60.0, 60.0], tolerance_m=1e-3)) == 1
    assert len(picks_from_contours([contact], near, [60.0, 60.0], tolerance_m=1e-4)) == 2
    # Two contacts crossing the contour at the same point each keep their pick.
    pair = [LineString([(4.0, -1.0), (6.0, 1.0)]), LineString([(6.0, -1.0), (4.0, 1.0)])]
    p = picks_from_contours(pair, [horizontal(0.0)], [60.0], contact_ids=[1, 2])
    assert p.contact_id.tolist() == [1, 2]
    np.testing.assert_allclose(p.xyz, [[5.0, 0.0, 60.0]] * 2, atol=ATOL_M)  # common practice


@pytest.mark.parametrize("contacts, contours, elevations", [
    ([], [horizontal(10.0)], [1.0]),
    ([DIAGONAL], [], []),
    (None, None, []),
    ([None, LineString()], [horizontal(10.0)], [1.0]),
    ([DIAGONAL], [None, LineString(), MultiLineString()], [1.0, 2.0, 3.0]),
    ([DIAGONAL], [horizontal(10.0)], [np.nan]),
    ([DIAGONAL], [horizontal(500.0)], [1.0]),  # no crossing at all
])
def test_empty_inputs_give_empty_pickset(contacts, contours, elevations):
    p = picks_from_contours(contacts, contours, elevations)
    assert len(p) == 0 and p.xyz.shape == (0, 3)
    assert p.counts_by_source() == {"dem": 0, "contours": 0}


def test_nan_elevation_skips_only_that_contour():
    p = picks_from_contours([DIAGONAL], [horizontal(y) for y in LEVELS_Y],
                            [310.0, np.nan, 330.0, 340.0])
    np.testing.assert_allclose(p.xyz[:, 0], [20.0, 60.0, 80.0], atol=ATOL_M)


@pytest.mark.parametrize("kwargs, match", [
    (dict(elevations_m=[1.0, 2.0]), "elevations_m has 2 values but there are 1 contour"),
    (dict(elevations_m=["high"]), "elevations must be numbers"),
    (dict(contact_ids=[1, 2]), "contact_ids has 2 values but there are 1 contacts"),
    (dict(contact_ids=[1.5]), "contact_ids must be whole numbers"),
    (dict(tolerance_m=-1.0), "tolerance_m must be a finite number >= 0"),
    (dict(tolerance_m=np.inf), "tolerance_m must be a finite number >= 0"),
    (dict(overlap_spacing_m=0.0), "overlap_spacing_m must be a finite number > 0"),
    (dict(contours=[Polygon([(0, 0), (1, 0), (1, 1)])]), r"contours\[0\] contains a Polygon"),
    (dict(contacts=[Point(0, 0)]), r"contacts\[0\] contains a Point"),
    (dict(contacts=["LINESTRING (0 0, 1 1)"]), r"contacts\[0\] is a str"),
    (dict(workers=0), "workers must be a whole number >= 1"),
])
def test_contour_input_errors(kwargs, match):
    args = dict(contacts=[DIAGONAL], contours=[horizontal(10.0)], elevations_m=[1.0])
    args.update(kwargs)
    with pytest.raises(InputError, match=match):
        picks_from_contours(args.pop("contacts"), args.pop("contours"), args.pop("elevations_m"),
                            **args)


def test_progress_and_cancel():
    seen = []
    picks_from_contours([DIAGONAL], [horizontal(y) for y in LEVELS_Y], LEVELS_Z,
                        progress=seen.append)
    assert seen[-1] == 1.0 and seen == sorted(seen)
    with pytest.raises(CancelledError):
        picks_from_contours([DIAGONAL], [horizontal(10.0)], [1.0], is_cancelled=lambda: True)
    with pytest.raises(CancelledError):
        picks_from_dem([DIAGONAL], np.zeros((3, 3)), Grid((0, 50, 0, 150, 0, -50), (3, 3)),
                       is_cancelled=lambda: True)


# --------------------------------------------------------------------------------------------
# Contour crossings: against GEOS on the whole (unsplit) lines
# --------------------------------------------------------------------------------------------
def wavy_sheet(seed, noise_m=2.0):
    """Closed wavy contour loops round 12 hills and 15 meandering contacts (fictional)."""
    rng = np.random.default_rng(seed)
    th = np.linspace(0.0, 2 * np.pi, 181)
    contours, z = [], []
    for hx, hy in rng.uniform(200.0, 1800.0, (12, 2)):
        for j in range(8):
            r = (250.0 - 28.0 * j) * (1 + 0.2 * np.sin(3 * th + j))
            ring = np.column_stack([hx + r * np.cos(th), hy + r * np.sin(th)])
            ring[-1] = ring[0]
            contours.append(LineString(ring))
            z.append(400.0 + 20.0 * j)
    x = np.linspace(0.0, 2000.0, 400)
    contacts = [LineString(np.column_stack([x, y0 + 150 * np.sin(x / 170 + y0)
                                            + rng.normal(0, noise_m, x.size)]))
                for y0 in rng.uniform(100.0, 1900.0, 15)]
    return contacts, contours, np.array(z)


@pytest.mark.parametrize("piece_segments", [32, 3])
def test_agrees_with_geos_intersection_of_whole_lines(piece_segments, monkeypatch):
    # With 3-segment pieces nearly every crossing is near a piece junction.
    monkeypatch.setattr("strikeline.picks.contours._PIECE_SEGMENTS", piece_segments)
    contacts, contours, z = wavy_sheet(11)
    p = picks_from_contours(contacts, contours, z)
    # Source: GEOS overlay through shapely.intersection on every unsplit pair (reference).
    ref = []
    for i, c in enumerate(contacts):
        for t, zt in zip(contours, z):
            for q in shapely.get_coordinates(shapely.intersection(c, t)):
                ref.append([i, zt, q[0], q[1]])
    ref = sorted_rows(ref)
    got = sorted_rows(np.column_stack([p.contact_id, p.xyz[:, 2], p.xyz[:, :2]]))
    assert len(ref) > 200  # the case must actually exercise many crossings
    assert got.shape == ref.shape
    # Every crossing here is proper, so GEOS computes each from the same two segments: the
    # same numbers to the last bit.
    assert got.tobytes() == ref.tobytes()


# --------------------------------------------------------------------------------------------
# Densifying
# --------------------------------------------------------------------------------------------
def test_densify_equal_steps_both_ends_and_owner():
    lines = [LineString([(0.0, 0.0), (10.0, 0.0)]), None,
             MultiLineString([[(0.0, 5.0), (0.0, 6.0)], [(3.0, 3.0), (3.0, 3.0)]])]
    xy, idx = densify_lines(lines, 4.0)
    # 10 m in ceil(10 / 4) = 3 equal steps; 1 m in one step; a zero-length part: one point.
    EXPECTED = [[0, 0], [10 / 3, 0], [20 / 3, 0], [10, 0], [0, 5], [0, 6], [3, 3]]  # arithmetic
    np.testing.assert_allclose(xy, EXPECTED, atol=ATOL_M)
    assert idx.tolist() == [0, 0, 0, 0, 2, 2, 2]


def test_densify_agrees_with_geos_interpolation_and_skips_duplicates():
    rng = np.random.default_rng(5)
    pts = np.cumsum(rng.normal(0, 7.0, (60, 2)), axis=0)
    pts = np.insert(pts, [10, 10, 30], pts[[10, 10, 30]], axis=0)  # duplicate vertices
    line = LineString(pts)
    xy, _ = densify_lines([line], 2.5)
    steps = len(xy) - 1
    assert steps == int(np.ceil(line.length / 2.5))
    # Source: GEOS linear referencing through shapely.line_interpolate_point (reference).
    ref = shapely.get_coordinates(
        shapely.line_interpolate_point(line, np.linspace(0.0, line.length, steps + 1)))
    np.testing.assert_allclose(xy, ref, atol=1e-8)
    gaps = np.hypot(*np.diff(xy, axis=0).T)
    assert gaps.max() <= 2.5 + 1e-9


@pytest.mark.parametrize("spacing", [0.0, -1.0, np.nan, np.inf, "ten"])
def test_densify_refuses_bad_spacing(spacing):
    with pytest.raises(InputError, match="spacing_m must be"):
        densify_lines([DIAGONAL], spacing)


def test_densify_refuses_absurd_point_counts():
    with pytest.raises(InputError, match="use a larger spacing"):
        densify_lines([LineString([(0.0, 0.0), (1e6, 0.0)])], 1e-4)


# --------------------------------------------------------------------------------------------
# Bilinear sampling
# --------------------------------------------------------------------------------------------
GRID = Grid((500.0, 10.0, 0.0, 2000.0, 0.0, -5.0), (40, 30), nodata=-9999.0)
PLANE_A, PLANE_B, PLANE_C = 0.25, -0.4, 812.0  # fictional plane z = a x + b y + c


def plane_dem(grid):
    X, Y = grid.mesh()
    return PLANE_A * X + PLANE_B * Y + PLANE_C


def test_bilinear_reproduces_a_plane_exactly():
    # Source: Press et al. (2007), Numerical Recipes 3rd ed., §3.6 - bilinear interpolation
    # is exact for functions linear in x and y.
    rng = np.random.default_rng(1)
    xmin, ymin, xmax, ymax = GRID.bounds
    x = rng.uniform(xmin, xmax, 5000)
    y = rng.uniform(ymin, ymax, 5000)
    xs, ys = GRID.cell_centres()
    inner = (x >= xs[0]) & (x <= xs[-1]) & (y <= ys[0]) & (y >= ys[-1])
    z = sample_bilinear(plane_dem(GRID), GRID, x, y)
    np.testing.assert_allclose(z[inner], PLANE_A * x[inner] + PLANE_B * y[inner] + PLANE_C,
                               rtol=0, atol=1e-9)
    assert np.isfinite(z).all()  # the half-cell border is inside the grid too


def test_bilinear_cell_centres_and_midpoint():
    dem = np.array([[0.0, 1.0], [2.0, 3.0]])
    g = Grid((0.0, 10.0, 0.0, 20.0, 0.0, -10.0), (2, 2))
    # Cell centres give the cell values; the middle of the four gives their mean (common
    # practice: weights 1/4 each, Numerical Recipes §3.6 eq. 3.6.5 at t = u = 1/2).
    z = sample_bilinear(dem, g, [5.0, 15.0, 5.0, 15.0, 10.0], [15.0, 15.0, 5.0, 5.0, 10.0])
    np.testing.assert_allclose(z, [0.0, 1.0, 2.0, 3.0, 1.5], atol=ATOL_M)
    assert np.shape(sample_bilinear(dem, g, 10.0, 10.0)) == ()


def test_bilinear_matches_scipy_map_coordinates_on_a_random_dem():
    from scipy.ndimage import map_coordinates

    rng = np.random.default_rng(2)
    dem = rng.uniform(150.0, 900.0, GRID.shape)
    xmin, ymin, xmax, ymax = GRID.bounds
    x = rng.uniform(xmin, xmax, 20000)
    y = rng.uniform(ymin, ymax, 20000)
    col, row = GRID.xy_to_colrow(x, y)
    # Source: scipy.ndimage.map_coordinates(order=1), centres at integer indices;
    # mode="nearest" replicates the edge over the half-cell border as sample_bilinear does.
    ref = map_coordinates(dem, [row, col], order=1, mode="nearest")
    np.testing.assert_allclose(sample_bilinear(dem, GRID, x, y), ref, rtol=0, atol=1e-9)


def test_bilinear_matches_gdal_warp():
    gdal = pytest.importorskip("osgeo.gdal")
    rng = np.random.default_rng(3)
    g = Grid((1000.0, 10.0, 0.0, 5000.0, 0.0, -10.0), (20, 24))
    dem = rng.uniform(100.0, 200.0, g.shape)
    src = gdal.GetDriverByName("MEM").Create("", g.cols, g.rows, 1, gdal.GDT_Float64)
    src.SetGeoTransform(g.transform)
    src.GetRasterBand(1).WriteArray(dem)
    ox, oy = 1000.0 + 10 * 2.3, 5000.0 - 10 * 2.6  # a grid shifted by (0.3, 0.6) cells
    out = gdal.Warp("", src, format="MEM", outputBounds=(ox, oy - 140.0, ox + 180.0, oy),
                    xRes=10, yRes=10, resampleAlg="bilinear", outputType=gdal.GDT_Float64)
    # Source: GDAL's warper with bilinear resampling (reference library, same cell size).
    ref = out.GetRasterBand(1).ReadAsArray()
    X, Y = Grid(out.GetGeoTransform(), ref.shape).mesh()
    np.testing.assert_allclose(sample_bilinear(dem, g, X, Y), ref, rtol=0, atol=1e-9)


def test_bilinear_nodata_and_outside():
    dem = plane_dem(GRID)
    dem[10, 10] = GRID.nodata
    dem[20, 20] = np.nan
    xs, ys = GRID.cell_centres()
    xmin, ymin, xmax, ymax = GRID.bounds
    # Points a quarter cell off the bad cells' centres use them: NaN.
    x = [xs[10] + 2.5, xs[20] - 2.5, xs[10] + 2.5]
    y = [ys[10] + 1.0, ys[20] - 1.0, ys[10]]
    z = sample_bilinear(dem, GRID, x, y)
    assert np.isnan(z).all()
    # On the centre row/column next to the bad cell it has zero weight: still a value.
    z = sample_bilinear(dem, GRID, [xs[11], xs[9]], [ys[10] - 2.0, ys[10]])
    np.testing.assert_allclose(z, PLANE_A * np.array([xs[11], xs[9]])
                               + PLANE_B * np.array([ys[10] - 2.0, ys[10]]) + PLANE_C, atol=1e-9)
    # Outside the outer edges (and non-finite coordinates): NaN; on the edge: a value.
    z = sample_bilinear(dem, GRID, [xmin - 0.01, xmax + 0.01, xs[3], xs[3], np.nan, xmax],
                        [ys[3], ys[3], ymax + 0.01, ymin - 0.01, ys[3], ymin])
    assert np.isnan(z[:5]).all() and np.isfinite(z[5])


def test_bilinear_masked_array_and_shape_check():
    dem = np.ma.masked_array(plane_dem(GRID), mask=False)
    dem.mask[5, 5] = True
    xs, ys = GRID.cell_centres()
    assert np.isnan(sample_bilinear(dem, GRID, xs[5] + 1.0, ys[5] - 1.0))
    with pytest.raises(InputError, match="shape"):
        sample_bilinear(np.zeros((3, 3)), GRID, 0.0, 0.0)


# --------------------------------------------------------------------------------------------
# Picks from a DEM
# --------------------------------------------------------------------------------------------
def test_dem_default_spacing_is_cell_size_and_picks_lie_on_the_plane():
    xs, ys = GRID.cell_centres()
    contact = LineString([(xs[2], ys[3]), (xs[2] + 100.0, ys[3])])  # 100 m long
    p = picks_from_dem([contact], plane_dem(GRID), GRID, contact_ids=[5])
    # Default spacing = min(10, 5) = 5 m: 100 / 5 = 20 steps, 21 picks (arithmetic).
    N_DEFAULT = 21
    assert len(p) == N_DEFAULT
    np.testing.assert_allclose(np.diff(p.xyz[:, 0]), 5.0, atol=1e-9)
    # Source: Numerical Recipes §3.6 - exact for a plane.
    np.testing.assert_allclose(p.xyz[:, 2], PLANE_A * p.xyz[:, 0] + PLANE_B * p.xyz[:, 1]
                               + PLANE_C, atol=1e-9)
    assert p.counts_by_source() == {"dem": N_DEFAULT, "contours": 0}
    assert set(p.contact_id.tolist()) == {5}
    assert len(picks_from_dem([contact], plane_dem(GRID), GRID, spacing_m=25.0)) == 5


def test_dem_skips_nodata_and_outside_points():
    dem = plane_dem(GRID)
    xs, ys = GRID.cell_centres()
    dem[:, 15] = GRID.nodata  # a nodata column
    xmin, _, xmax, _ = GRID.bounds
    contact = LineString([(xmin - 100.0, ys[7]), (xmax + 100.0, ys[7])])  # runs off both sides
    p = picks_from_dem([contact], dem, GRID, spacing_m=1.0)
    x = p.xyz[:, 0]
    assert x.min() >= xmin and x.max() <= xmax
    assert not np.any((x > xs[14]) & (x < xs[16]))  # every point using column 15 is gone
    assert np.any(x < xs[14]) and np.any(x > xs[16])
    inner = (x >= xs[0]) & (x <= xs[-1])
    np.testing.assert_allclose(p.xyz[inner, 2], PLANE_A * x[inner] + PLANE_B * ys[7] + PLANE_C,
                               atol=1e-9)
    # In the half-cell border the edge cell's value is replicated (common practice).
    np.testing.assert_allclose(p.xyz[x < xs[0], 2], dem[7, 0], atol=1e-9)
    np.testing.assert_allclose(p.xyz[x > xs[-1], 2], dem[7, -1], atol=1e-9)


def test_dem_multipart_shared_end_kept_once_and_empty_inputs():
    xs, ys = GRID.cell_centres()
    a, b, c = (xs[1], ys[1]), (xs[5], ys[1]), (xs[5], ys[9])
    contact = MultiLineString([[a, b], [b, c]])
    p = picks_from_dem([contact], plane_dem(GRID), GRID, spacing_m=10.0)
    # 4 columns x 10 m = 40 m and 8 rows x 5 m = 40 m, each in 4 steps of 10 m:
    # 5 + 5 points, the shared corner once -> 9 (arithmetic).
    N_MULTIPART = 9
    assert len(p) == N_MULTIPART
    assert len(np.unique(p.xyz[:, :2].round(6), axis=0)) == N_MULTIPART
    for empty in ([], None, [None], [LineString()]):
        assert len(picks_from_dem(empty, plane_dem(GRID), GRID)) == 0


@pytest.mark.parametrize("kwargs, match", [
    (dict(spacing_m=np.nan), "spacing_m must be a finite number > 0"),
    (dict(spacing_m=-3.0), "spacing_m must be a finite number > 0"),
    (dict(dem=np.zeros((2, 2))), r"DEM array has shape \(2, 2\) but its grid has shape"),
    (dict(contact_ids=[1, 2, 3]), "contact_ids has 3 values"),
    (dict(progress="yes"), "progress must be a callable"),
])
def test_dem_input_errors(kwargs, match):
    args = dict(dem=plane_dem(GRID))
    args.update(kwargs)
    with pytest.raises(InputError, match=match):
        picks_from_dem([DIAGONAL], args.pop("dem"), GRID, **args)


def test_both_sources_concatenate():
    xs, ys = GRID.cell_centres()
    contact = LineString([(xs[1], ys[1]), (xs[20], ys[30])])
    contours = [LineString([(xs[0], y), (xs[-1], y)]) for y in ys[5:30:5]]
    z_contours = PLANE_C + PLANE_B * ys[5:30:5]
    dem_p = picks_from_dem([contact], plane_dem(GRID), GRID, contact_ids=[3])
    con_p = picks_from_contours([contact], contours, z_contours, contact_ids=[3])
    both = PickSet.concat(dem_p, con_p)
    assert both.counts_by_source() == {"dem": len(dem_p), "contours": 5}
    assert len(both) == len(dem_p) + 5 and set(both.contact_id.tolist()) == {3}
