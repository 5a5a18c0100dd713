"""One plane per group (``strikeline.pipeline.planes``) against planes of known attitude."""
from __future__ import annotations

import numpy as np
import pytest
import shapely

from strikeline.pipeline.planes import group_labels, planes_by_group, point_planes

# A projected CRS in metres (UTM zone 31N). Source: EPSG dataset, EPSG:32631.
UTM31_WKT = ('PROJCS["WGS 84 / UTM zone 31N",GEOGCS["WGS 84",DATUM["WGS_1984",SPHEROID["WGS 84",6378137,'
             '298.257223563]],PRIMEM["Greenwich",0],UNIT["degree",0.0174532925199433]],'
             'PROJECTION["Transverse_Mercator"],PARAMETER["latitude_of_origin",0],'
             'PARAMETER["central_meridian",3],PARAMETER["scale_factor",0.9996],'
             'PARAMETER["false_easting",500000],PARAMETER["false_northing",0],UNIT["metre",1],'
             'AUTHORITY["EPSG","32631"]]')

#: Exact points of a plane: total least squares returns it to rounding.
EXACT_TOL_DEG = 1e-7  # common practice: rounding of an SVD on exact data, well below 1e-7 deg

#: Two planes of our own: (dip, dip direction) in degrees.
PLANES = {"north_block": (20.0, 45.0), "south_block": (60.0, 300.0)}


def plane_z(x, y, dip_deg, dip_direction_deg, *, z0=400.0, x0=500000.0, y0=5200000.0):
    """Elevation on a plane through (x0, y0, z0) dipping ``dip_deg`` toward ``dip_direction_deg``.

    # Source: from memory - the definition of dip and dip direction (Ragan 2009, Structural
    # Geology, ch. 1): the plane descends tan(dip) metres per metre along the unit vector
    # (sin az, cos az) of the dip direction, x east and y north.
    """
    az = np.radians(dip_direction_deg)
    return z0 - np.tan(np.radians(dip_deg)) * ((x - x0) * np.sin(az) + (y - y0) * np.cos(az))


def two_blocks(n=40, seed=5):
    rng = np.random.default_rng(seed)
    xyz, labels = [], []
    for k, (name, (dip, dd)) in enumerate(PLANES.items()):
        x = 500000.0 + rng.uniform(-800, 800, n)
        y = 5200000.0 + 3000.0 * k + rng.uniform(-600, 600, n)
        xyz.append(np.column_stack([x, y, plane_z(x, y, dip, dd)]))
        labels += [name] * n
    return np.vstack(xyz), np.array(labels, dtype=object)


def test_each_group_recovers_its_own_plane():
    xyz, labels = two_blocks()
    planes = planes_by_group(xyz, labels, crs_wkt=UTM31_WKT, resamples=50)
    assert list(planes) == sorted(PLANES)
    for name, (dip, dd) in PLANES.items():
        att = planes[name]
        assert att["quality"] == "good"
        got_dip = att["dip_deg"]
        got_dd = att["dip_direction_deg"]
        assert got_dip == pytest.approx(dip, abs=EXACT_TOL_DEG)
        assert got_dd == pytest.approx(dd, abs=EXACT_TOL_DEG)
        assert att["n_picks"] == int((labels == name).sum())


def test_a_group_on_one_line_is_undetermined_not_an_error():
    xyz, labels = two_blocks()
    t = np.linspace(0.0, 500.0, 12)
    # common practice: points along one straight line leave the plane's rotation about it free.
    line = np.column_stack([500000.0 + t, 5190000.0 + 0.5 * t, 300.0 + 0.1 * t])
    planes = planes_by_group(np.vstack([xyz, line]), np.concatenate([labels, ["ridge"] * 12]).astype(object),
                             crs_wkt=UTM31_WKT, resamples=50)
    assert planes["ridge"]["quality"] == "undetermined"
    assert planes["ridge"]["n_picks"] == 12
    assert planes["north_block"]["quality"] == "good"


def test_progress_after_every_group_and_group_labels_as_text():
    xyz, labels = two_blocks(n=10)
    seen = []
    planes_by_group(xyz, labels, crs_wkt=UTM31_WKT, resamples=20, progress=seen.append)
    assert seen == [0.5, 1.0]
    assert group_labels([1, None, "a", 2.5]).tolist() == ["1", "None", "a", "2.5"]


def test_point_planes_leave_out_points_without_elevation_and_locate_each_plane():
    xyz, labels = two_blocks()
    xyz = xyz.copy()
    xyz[[0, 50], 2] = np.nan
    pp = point_planes(xyz, crs_wkt=UTM31_WKT, labels=labels, resamples=50)
    assert (pp.n_points, pp.n_missing) == (len(xyz) - 2, 2)
    dip = pp.plane["dip_deg"]
    assert dip is not None
    for name in PLANES:
        keep = (labels == name) & np.isfinite(xyz[:, 2])
        # Source: numpy mean - a TLS plane passes through its points' centroid (Fernandez 2005).
        np.testing.assert_allclose(pp.group_locations[name], xyz[keep].mean(axis=0), rtol=0, atol=1e-6)
    assert set(pp.group_locations) == set(PLANES)
    # The plane of all points is drawn at their mean (its centroid, or the mean if undetermined).
    np.testing.assert_allclose(pp.location, np.nanmean(xyz[np.isfinite(xyz[:, 2])], axis=0), rtol=0, atol=1e-6)


def test_point_planes_whole_plane_is_the_svd_plane_of_noisy_points():
    rng = np.random.default_rng(9)
    x = 500000.0 + rng.uniform(-700, 700, 80)
    y = 5200000.0 + rng.uniform(-700, 700, 80)
    xyz = np.column_stack([x, y, plane_z(x, y, 35.0, 160.0) + rng.normal(0, 2.0, 80)])
    cid = np.repeat(np.arange(8), 10).astype(float)
    pp = point_planes(xyz, crs_wkt=UTM31_WKT, contact_id=cid, sigma_z_m=2.0, resamples=50)
    # Source: numpy.linalg.svd - the total-least-squares normal is the right singular vector of
    # the smallest singular value of the centred points (Fernandez 2005, J. Struct. Geol. 27, 855).
    n = np.linalg.svd(xyz - xyz.mean(axis=0))[2][-1]
    n = n if n[2] > 0 else -n
    svd_dip = np.degrees(np.arctan2(np.hypot(n[0], n[1]), n[2]))
    svd_dd = np.degrees(np.arctan2(n[0], n[1])) % 360.0  # the upward normal leans down-dip
    assert pp.plane["dip_deg"] == pytest.approx(svd_dip, abs=1e-9)
    assert pp.plane["dip_direction_deg"] == pytest.approx(svd_dd, abs=1e-9)
    assert pp.groups == {}


def test_cancelled_between_groups():
    from strikeline.errors import CancelledError

    xyz, labels = two_blocks(n=10)
    with pytest.raises(CancelledError, match="cancelled"):
        planes_by_group(xyz, labels, crs_wkt=UTM31_WKT, resamples=20, is_cancelled=lambda: True)


def test_local_attitudes_of_points_on_one_plane():
    from strikeline.pipeline.planes import point_local_attitudes

    rng = np.random.default_rng(12)
    x = 500000.0 + rng.uniform(-1000, 1000, 400)
    y = 5200000.0 + rng.uniform(-1000, 1000, 400)
    xyz = np.column_stack([x, y, plane_z(x, y, 25.0, 210.0)])
    cid = np.repeat(np.arange(8.0), 50)
    cid[:10] = np.nan
    la, counts = point_local_attitudes(xyz, contact_id=cid, window_m=400.0, n_resamples=20, n_draws=20)
    assert sum(counts.values()) == len(la) > 0
    good = la.quality == "good"
    assert counts["good"] == int(good.sum()) > 0
    # Source: plane_z above (the plane's own formula): every window of exact plane points has its attitude.
    np.testing.assert_allclose(np.asarray(la.dip_deg)[good], 25.0, atol=1e-6)
    np.testing.assert_allclose(np.asarray(la.dip_direction_deg)[good], 210.0, atol=1e-6)
    assert -1 in set(int(c) for c in la.contact_id if c is not None)  # the NaN ids became -1
    from strikeline.errors import InputError

    with pytest.raises(InputError, match=r"^picks layer 'p': window_m must be a positive number"):
        point_local_attitudes(xyz, what="picks layer 'p'", window_m=-1.0)


def test_plane_attitudes_layer_one_point_per_plane_at_its_centroid():
    from strikeline.pipeline.outputs import plane_attitudes_layer

    xyz, labels = two_blocks()
    pp = point_planes(xyz, crs_wkt=UTM31_WKT, labels=labels, resamples=20)
    layer = plane_attitudes_layer(pp)
    assert layer.fields["group"].tolist() == ["", *sorted(PLANES)]
    pts = shapely.get_coordinates(layer.geoms, include_z=True)
    for k, name in enumerate(sorted(PLANES), start=1):
        # Source: numpy mean - a TLS plane passes through its points' centroid (Fernandez 2005).
        np.testing.assert_allclose(pts[k], xyz[labels == name].mean(axis=0), rtol=0, atol=1e-6)
        # Source: the plane's own formula (plane_z), as in test_each_group_recovers_its_own_plane.
        assert layer.fields["dip_deg"][k] == pytest.approx(PLANES[name][0], abs=EXACT_TOL_DEG)
    assert layer.fields["n_picks"].dtype == np.int64
