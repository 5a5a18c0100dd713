"""Every strikeline tool through ``processing.run`` on the demo sheet gives the library's numbers.

# Source: strikeline library result as the reference (the numerical truth is tested in tests/);
# the external checks below name their own sources (numpy's SVD, scipy's interpolator, GDAL's
# gdaldem slope/aspect, GEOS distances through shapely).
"""
from __future__ import annotations

import numpy as np
import pytest
import shapely
from osgeo import gdal
from qgis.core import (
    QgsCoordinateReferenceSystem,
    QgsProcessingFeatureSourceDefinition,
    QgsProcessingFeedback,
    QgsProject,
)
from qgis_helpers import assert_same_lines, bilinear_reference, memory_copy, model_index, raster, table

from strikeline.geometry.grid import Grid
from strikeline.maps.dipgrids import depth_below_ground, dip_grids
from strikeline.io.contours import contour_lines
from strikeline.io.raster import read_raster

pytestmark = pytest.mark.qgis

TMP = "TEMPORARY_OUTPUT"
#: float32 GeoTIFF storage of elevations near 600 m: half a unit in the last place is ~3e-5 m.
F32_ELEVATION_TOL_M = 1e-4  # common practice: float32 has a 24-bit significand
#: gdaldem's Horn kernel is exact on a plane; allow for float32 storage of the surface.
GDAL_DIP_TOL_DEG = 0.05  # Project target: the dip grids' tolerance against gdal.DEMProcessing


def topo(sheet, kind):
    """(contacts, contours) as files or as memory copies of the same features."""
    if kind == "file":
        return sheet["contacts_uri"], sheet["contours_uri"]
    return memory_copy(sheet["contacts_uri"], "contacts"), memory_copy(sheet["contours_uri"], "topo_contours")


@pytest.fixture(scope="module")
def reference(library, sheet):
    """The library's whole chain on the demo sheet, computed once for this module."""
    return library(sheet)


@pytest.fixture(scope="module")
def surface_tif(tmp_path_factory, sheet):
    """The surface tool's GeoTIFF on the DEM's grid, made once through QGIS from the library's picks."""
    import processing

    out = tmp_path_factory.mktemp("surface") / "surface.tif"
    picks = processing.run("strikeline:contactpicks", {
        "CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "CONTOURS": sheet["contours_uri"],
        "ELEV_FIELD": "elev_m", "picks": TMP})["picks"]
    processing.run("strikeline:surfacemodel", {"PICKS": picks, "REFERENCE": sheet["dem"], "surface": str(out)})
    return str(out)


# --------------------------------------------------------------------------------------- picks
@pytest.mark.parametrize("kind", ["file", "memory"])
def test_contact_picks_are_the_library_picks(run, sheet, reference, kind):
    contacts, contours = topo(sheet, kind)
    res = run("contactpicks", {"CONTACTS": contacts, "DEM": sheet["dem"], "CONTOURS": contours,
                               "ELEV_FIELD": "elev_m", "picks": TMP})
    ref = reference[1].picks
    geoms, cols = table(res["picks"])
    xyz = shapely.get_coordinates(geoms, include_z=True)
    np.testing.assert_array_equal(xyz, ref.xyz)
    np.testing.assert_array_equal(cols["source"], ref.source)
    np.testing.assert_array_equal(cols["elevation_m"], ref.xyz[:, 2])
    np.testing.assert_array_equal(cols["contact_id"], ref.contact_id)
    assert (res["n_picks"], res["n_picks_dem"], res["n_picks_contours"]) == (
        len(ref), ref.counts_by_source()["dem"], ref.counts_by_source()["contours"])
    # External: DEM picks are bilinear samples of the DEM between cell centres.
    # Source: scipy.interpolate.RegularGridInterpolator(method="linear"), scipy 1.10.
    f = bilinear_reference(sheet["dem"])
    dem_rows = cols["source"] == "dem"
    expected = f(xyz[dem_rows, 0], xyz[dem_rows, 1])
    inside = np.isfinite(expected)
    assert inside.sum() > 0.9 * dem_rows.sum()
    np.testing.assert_allclose(xyz[dem_rows, 2][inside], expected[inside], atol=1e-6)


def test_dem_without_a_plain_file_is_read_through_qgis(run, sheet, reference, tmp_path):
    """A raster layer GDAL cannot open by path alone (a GeoPackage raster table) is read block-wise
    through the QGIS provider; the picks are the same as from the GeoTIFF."""
    from qgis.core import QgsRasterLayer

    from adapter_qgis.layers import raster_path, read_raster_layer

    gpkg = tmp_path / "dem.gpkg"
    gdal.Translate(str(gpkg), sheet["dem"], format="GPKG", creationOptions=["RASTER_TABLE=ground"])
    layer = QgsRasterLayer(f"GPKG:{gpkg}:ground", "ground", "gdal")
    assert layer.isValid() and raster_path(layer) is None
    arr, grid = read_raster_layer(layer)
    ref_arr, ref_grid = read_raster(sheet["dem"], label="DEM")
    assert grid.transform == ref_grid.transform
    # Source: GDAL's own GeoPackage driver (gdal.Translate) as the reference copy of the DEM.
    np.testing.assert_array_equal(arr, ref_arr)
    res = run("contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": layer, "picks": TMP})
    geoms, _ = table(res["picks"])
    ref = reference[1].picks
    np.testing.assert_array_equal(shapely.get_coordinates(geoms, include_z=True), ref.xyz[ref.source == "dem"])


def test_selected_features_only(run, sheet, reference):
    from strikeline.pipeline import RunOptions, collect_picks, load_inputs

    contacts = memory_copy(sheet["contacts_uri"], "contacts")
    QgsProject.instance().addMapLayer(contacts)
    try:
        ids = sorted(f.id() for f in contacts.getFeatures())
        chosen = ids[: max(1, len(ids) // 2)]
        contacts.selectByIds(chosen)
        src = QgsProcessingFeatureSourceDefinition(contacts.id(), selectedFeaturesOnly=True)
        res = run("contactpicks", {"CONTACTS": src, "DEM": sheet["dem"], "picks": TMP})
    finally:
        QgsProject.instance().removeMapLayer(contacts.id())
    _, cols = table(res["picks"])
    assert set(cols["contact_id"].tolist()) <= set(chosen)
    opts = RunOptions(contacts=sheet["contacts"], out="/nonexistent-out", dem=sheet["dem"],
                      where=f"fid IN ({', '.join(map(str, chosen))})")
    lib = collect_picks(load_inputs(opts))
    geoms, _ = table(res["picks"])
    np.testing.assert_array_equal(shapely.get_coordinates(geoms, include_z=True), lib.xyz)


def test_layers_in_another_crs_are_transformed(run, sheet, reference):
    import processing

    moved = processing.run("native:reprojectlayer", {
        "INPUT": sheet["contacts_uri"], "TARGET_CRS": QgsCoordinateReferenceSystem("EPSG:32632"),
        "OUTPUT": TMP})["OUTPUT"]
    fb = QgsProcessingFeedback()
    messages = []
    fb.pushInfo = messages.append  # collect the log lines
    res = run("contactpicks", {"CONTACTS": moved, "DEM": sheet["dem"], "picks": TMP}, feedback=fb)
    assert any("reprojecting contacts" in m and "EPSG:32632" in m and "EPSG:32631" in m for m in messages)
    geoms, _ = table(res["picks"])
    xyz = shapely.get_coordinates(geoms, include_z=True)
    ref = reference[1].picks
    dem_ref = ref.xyz[ref.source == "dem"]
    assert xyz.shape == dem_ref.shape
    # Two PROJ transforms (there and back) agree to well under a millimetre.
    np.testing.assert_allclose(xyz, dem_ref, atol=1e-3)


#: A DEM pick spacing of our own: two and a half cells of the demo DEM (10 m cells).
PICK_SPACING_M = 25.0


def test_pick_spacing_is_the_library_spacing(run, sheet):
    from strikeline.pipeline import RunOptions, collect_picks, load_inputs

    res = run("contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"],
                               "PICK_SPACING": PICK_SPACING_M, "picks": TMP})
    inputs = load_inputs(RunOptions(contacts=sheet["contacts"], out="/nonexistent-out", dem=sheet["dem"]))
    ref = collect_picks(inputs, spacing_m=PICK_SPACING_M)
    geoms, cols = table(res["picks"])
    xyz = shapely.get_coordinates(geoms, include_z=True)
    np.testing.assert_array_equal(xyz, ref.xyz)
    np.testing.assert_array_equal(cols["contact_id"], ref.contact_id)
    assert res["n_picks"] == len(ref) < len(collect_picks(inputs))  # the default is one DEM cell
    # common practice: samples at equal steps no longer than the spacing along a line are never
    # farther apart than the spacing (a chord is no longer than its arc); the few longer steps
    # are gaps where the contact leaves the DEM's valid cells or a new part begins.
    steps = np.concatenate([np.hypot(*np.diff(xyz[cols["contact_id"] == c, :2], axis=0).T)
                            for c in np.unique(cols["contact_id"])])
    assert np.mean(steps <= PICK_SPACING_M + 1e-9) > 0.95
    assert np.median(steps) > 0.9 * PICK_SPACING_M


# --------------------------------------------------------------------------------------- plane
@pytest.mark.parametrize("kind", ["file", "memory"])
def test_plane_attitude_is_the_library_fit(run, sheet, reference, kind, tmp_path):
    contacts, contours = topo(sheet, kind)
    picks_out = str(tmp_path / "picks.gpkg") if kind == "file" else TMP
    picks = run("contactpicks", {"CONTACTS": contacts, "DEM": sheet["dem"], "CONTOURS": contours,
                                 "ELEV_FIELD": "elev_m", "picks": picks_out})["picks"]
    res = run("planeattitude", {"PICKS": picks, "plane_attitudes": TMP})
    plane = reference[1].plane
    for key, value in (("dip_deg", plane.dip_deg), ("dip_direction_deg", plane.dip_direction_deg),
                       ("strike_rhr_deg", plane.strike_rhr_deg), ("rms_m", plane.rms_m)):
        assert res[key] == pytest.approx(value, abs=1e-9), key
    assert res["n_picks"] == plane.n_points
    geoms, cols = table(res["plane_attitudes"])
    np.testing.assert_allclose(shapely.get_coordinates(geoms, include_z=True)[0], plane.centroid, atol=1e-6)
    assert cols["dip_deg"][0] == pytest.approx(plane.dip_deg, abs=1e-9)
    # External: the total-least-squares normal is the right singular vector of the centred
    # picks for the smallest singular value. Source: numpy.linalg.svd (LAPACK gesdd).
    p = reference[1].picks.xyz
    n = np.linalg.svd(p - p.mean(axis=0))[2][-1]
    n = n if n[2] > 0 else -n
    svd_dip = np.degrees(np.arctan2(np.hypot(n[0], n[1]), n[2]))
    # common practice: the downhill azimuth of a plane with upward normal n is atan2(nx, ny)
    svd_dd = np.degrees(np.arctan2(n[0], n[1])) % 360.0
    assert res["dip_deg"] == pytest.approx(svd_dip, abs=1e-6)
    assert res["dip_direction_deg"] == pytest.approx(svd_dd, abs=1e-6)
    # common practice: strike by the right-hand rule is the dip direction minus 90°.
    assert res["strike_rhr_deg"] == pytest.approx((svd_dd - 90.0) % 360.0, abs=1e-6)


def test_plane_confidence_and_quality_are_the_library_ones(run, sheet, reference):
    from strikeline.pipeline import attitude_of, segment_labels

    picks = run("contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "picks": TMP})["picks"]
    res = run("planeattitude", {"PICKS": picks, "RESAMPLES": 200, "DEM_SIGMA": 0.5, "SEED": 3, "plane_attitudes": TMP})
    geoms, cols = table(picks)
    xyz = shapely.get_coordinates(geoms, include_z=True)
    # The library's call behind `strikeline attitude --dem-sigma 0.5 --resamples 200 --seed 3`:
    # the picks carry contact_id, so the bootstrap resamples contact segments.
    blocks = segment_labels(xyz, np.asarray(cols["contact_id"], dtype=float))
    att = attitude_of(xyz, np.full(len(xyz), 0.5), crs_wkt=reference[0].crs_wkt, what="picks", strict=False,
                      resamples=200, seed=3, blocks=blocks)
    assert att["confidence_method"] == "block_bootstrap+monte_carlo"
    # one name for each value: the tool's output, the library's key (strikeline.vocabulary)
    for key in ("dip_ci95_deg", "dip_direction_ci95_deg", "cone95_deg", "dip_direction_true_deg", "coplanarity",
                "collinearity"):
        assert res[key] == att[key], key
    assert (res["quality"], res["reason"]) == (att["quality"], att["reason"])
    _, row = table(res["plane_attitudes"])
    assert row["quality"][0] == att["quality"] and row["cone95_deg"][0] == att["cone95_deg"]
    assert row["meridian_convergence_deg"][0] == att["meridian_convergence_deg"]
    # External: grid north and true north differ by the meridian convergence of UTM zone 31N at
    # the centroid; the true azimuth is the grid azimuth plus the convergence.
    # Source: pyproj 3.4 Proj.get_factors(...).meridian_convergence (PROJ's own computation).
    import pyproj

    lon, lat = pyproj.Transformer.from_crs("EPSG:32631", "EPSG:4326", always_xy=True).transform(
        *att["centroid_m"][:2])
    gamma = pyproj.Proj("EPSG:32631").get_factors(lon, lat).meridian_convergence
    assert abs(abs(att["meridian_convergence_deg"]) - abs(gamma)) < 1e-6
    assert (res["dip_direction_true_deg"] - res["dip_direction_deg"]) % 360.0 == pytest.approx(
        att["meridian_convergence_deg"] % 360.0, abs=1e-9)


def test_plane_per_group(run, sheet):
    picks = run("contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"],
                                 "CONTOURS": sheet["contours_uri"], "ELEV_FIELD": "elev_m", "picks": TMP})["picks"]
    res = run("planeattitude", {"PICKS": picks, "GROUP_BY": "source", "RESAMPLES": 50, "plane_attitudes": TMP})
    _, rows = table(res["plane_attitudes"])
    assert rows["group"].tolist() == ["", "contours", "dem"]
    assert rows["dip_deg"][0] == pytest.approx(res["dip_deg"], abs=1e-12)
    # common practice: contour and DEM picks of one planar contact give (nearly) the same dip.
    assert abs(rows["dip_deg"][1] - rows["dip_deg"][2]) < 0.5


def _point_layer(name, xyz):
    from qgis.core import QgsFeature, QgsGeometry, QgsVectorLayer

    mem = QgsVectorLayer("PointZ?crs=EPSG:32631", name, "memory")
    feats = []
    for x, y, z in xyz:
        f = QgsFeature()
        f.setGeometry(QgsGeometry.fromWkt(f"PointZ ({x} {y} {z})"))
        feats.append(f)
    mem.dataProvider().addFeatures(feats)
    return mem


def test_undetermined_quality_is_a_warning_in_the_log(run):
    # Picks along one straight line on flat ground: every plane through the line fits them.
    t = np.linspace(0.0, 1000.0, 40)
    rng = np.random.default_rng(7)
    mem = _point_layer("straight_shore", np.column_stack([t, 0.5 * t, 440.0 + rng.uniform(0, 0.01, 40)]))
    fb = QgsProcessingFeedback()
    warnings = []
    fb.pushWarning = warnings.append
    res = run("planeattitude", {"PICKS": mem, "RESAMPLES": 50, "plane_attitudes": TMP}, feedback=fb)
    assert res["quality"] == "undetermined"
    assert any("plane quality undetermined" in w and "data that would help" in w for w in warnings)
    assert res["dip_deg"] is None  # an undetermined plane reports no attitude


def test_level_picks_give_a_horizontal_plane_without_direction(run):
    from strikeline.pipeline import attitude_of

    # Picks at one height (1 cm of scatter) spread over a square kilometre: only a horizontal
    # plane passes through them (common practice: a horizontal contact follows the contours).
    rng = np.random.default_rng(7)
    xyz = np.column_stack([rng.uniform(0, 1000, 40), rng.uniform(0, 1000, 40), 440.0 + rng.uniform(0, 0.01, 40)])
    fb = QgsProcessingFeedback()
    logs = []
    fb.pushInfo = logs.append
    # DEM_SIGMA 0: the picks' error unknown, as in the library call below
    res = run("planeattitude", {"PICKS": _point_layer("lake_shore", xyz), "RESAMPLES": 50, "DEM_SIGMA": 0.0,
                                "plane_attitudes": TMP}, feedback=fb)
    att = attitude_of(xyz, None, crs_wkt=QgsCoordinateReferenceSystem("EPSG:32631").toWkt(), what="picks",
                      strict=False, resamples=50)
    assert att["dip_significant"] is False and res["quality"] == att["quality"] == "good"
    assert res["dip_deg"] == pytest.approx(att["dip_deg"], abs=1e-12) and res["dip_ci95_deg"] == att["dip_ci95_deg"]
    assert res["dip_direction_deg"] is None and res["strike_rhr_deg"] is None
    assert res["dip_direction_true_deg"] is None and res["dip_direction_ci95_deg"] is None
    assert any("horizontal within its 95% confidence" in m for m in logs)
    _, row = table(res["plane_attitudes"])
    assert row["dip_direction_deg"][0] is None and row["strike_rhr_deg"][0] is None  # null fields


def test_local_attitudes_are_the_library_ones(run, sheet, reference):
    from strikeline.attitude import local_attitudes

    picks = run("contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"],
                                 "CONTOURS": sheet["contours_uri"], "ELEV_FIELD": "elev_m", "picks": TMP})["picks"]
    # DEM_SIGMA 0: no Monte Carlo of the picks' error, as in the library call below
    res = run("localattitudes", {"PICKS": picks, "WINDOW": 400.0, "RESAMPLES": 50, "DEM_SIGMA": 0.0, "attitudes": TMP})
    geoms, cols = table(picks)
    xyz = shapely.get_coordinates(geoms, include_z=True)
    ref = local_attitudes(xyz, window_m=400.0, contact_id=cols["contact_id"].astype(np.int64), n_resamples=50,
                          n_draws=50)
    assert res["n_windows"] == len(ref) > 0 and res["window_m"] == ref.window_m
    g, out = table(res["attitudes"], z=False)
    np.testing.assert_array_equal(shapely.get_coordinates(g), np.column_stack([ref.x, ref.y]))
    for f in ("dip_deg", "dip_direction_deg", "strike_rhr_deg", "dip_ci95_deg", "cone95_deg", "elevation_m"):
        got = np.array([np.nan if v is None else v for v in out[f]], dtype=float)
        np.testing.assert_array_equal(got, getattr(ref, f), err_msg=f)
    assert out["quality"].tolist() == ref.quality.tolist()
    # windows over all picks have no contact: -1, as in the attitudes layer of strikeline run
    assert [int(c) for c in out["contact_id"]] == [-1 if c is None else int(c) for c in ref.contact_id]
    # the same layer as the whole chain's: the fields of strikeline.vocabulary.ATTITUDES, in order
    from strikeline import vocabulary as V

    assert [f for f in out if f != "fid"] == list(V.ATTITUDES.field_names)
    # External: a window over a plane dips as the plane (the demo sheet's contact is planar).
    # Source: numpy.linalg.svd normal of all picks, as in test_plane_attitude_is_the_library_fit.
    p = reference[1].picks.xyz
    n = np.linalg.svd(p - p.mean(axis=0))[2][-1]
    n = n if n[2] > 0 else -n
    good = out["quality"] == "good"
    assert good.any()
    dips = np.array(out["dip_deg"][good], dtype=float)
    np.testing.assert_allclose(dips, np.degrees(np.arctan2(np.hypot(n[0], n[1]), n[2])), atol=0.05)


def test_plane_attitude_from_a_z_field(run, sheet, reference):
    from qgis.core import QgsFeature, QgsGeometry, QgsVectorLayer

    picks = run("contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "picks": TMP})["picks"]
    by_z = run("planeattitude", {"PICKS": picks, "plane_attitudes": TMP})
    # The same picks with their Z flattened to 0 m: only the elevation field still holds the
    # elevations, so a tool that read Z would find a horizontal plane instead.
    geoms, cols = table(picks)
    flat = QgsVectorLayer("PointZ?crs=EPSG:32631&field=elevation_m:double", "flattened", "memory")
    feats = []
    for (x, y, _), e in zip(shapely.get_coordinates(geoms, include_z=True), cols["elevation_m"]):
        f = QgsFeature(flat.fields())
        f.setGeometry(QgsGeometry.fromWkt(f"PointZ ({x!r} {y!r} 0)"))
        f.setAttributes([float(e)])
        feats.append(f)
    assert flat.dataProvider().addFeatures(feats)
    by_field = run("planeattitude", {"PICKS": flat, "PICKS_ELEV_FIELD": "elevation_m", "plane_attitudes": TMP})
    assert by_field["dip_deg"] == pytest.approx(by_z["dip_deg"], abs=1e-12)
    assert by_field["dip_direction_deg"] == pytest.approx(by_z["dip_direction_deg"], abs=1e-12)


# ------------------------------------------------------------------------------------- surface
def test_surface_model_on_the_dem_grid(surface_tif, reference, sheet):
    r = reference[1]
    got, gt, wkt = raster(surface_tif)
    dem_ds = gdal.Open(sheet["dem"])
    assert gt == dem_ds.GetGeoTransform()
    np.testing.assert_array_equal(got, r.surface.astype(np.float32).astype(float))
    # External: the plane through the centroid with the SVD normal (numpy.linalg.svd, as above).
    p = r.picks.xyz
    c = p.mean(axis=0)
    n = np.linalg.svd(p - c)[2][-1]
    X, Y = Grid(gt, got.shape).mesh()
    plane_z = c[2] - (n[0] * (X - c[0]) + n[1] * (Y - c[1])) / n[2]
    np.testing.assert_allclose(got, plane_z, atol=F32_ELEVATION_TOL_M)


def test_surface_model_over_an_extent(run, sheet, reference):
    picks = run("contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"],
                                 "CONTOURS": sheet["contours_uri"], "ELEV_FIELD": "elev_m", "picks": TMP})["picks"]
    res = run("surfacemodel", {"PICKS": picks, "CELL": 25.0, "surface": TMP})
    got, gt, _ = raster(res["surface"])
    xyz = reference[1].picks.xyz
    # the picks' extent widened to multiples of the cell, so that sheets tile (strikeline's output grid)
    want = Grid.aligned(xyz[:, 0].min(), xyz[:, 1].min(), xyz[:, 0].max(), xyz[:, 1].max(), cell_m=25.0)
    assert gt == want.transform and got.shape == want.shape
    X, Y = want.mesh()
    np.testing.assert_allclose(got, reference[1].plane.elevation(X, Y), atol=F32_ELEVATION_TOL_M)


@pytest.fixture(scope="module")
def contour_picks(sheet):
    """Picks from the contour lines only (a couple of hundred: quick for the spline)."""
    import processing

    out = processing.run("strikeline:contactpicks", {
        "CONTACTS": sheet["contacts_uri"], "CONTOURS": sheet["contours_uri"], "ELEV_FIELD": "elev_m",
        "picks": TMP})["picks"]
    geoms, _ = table(out)
    return out, shapely.get_coordinates(geoms, include_z=True)


@pytest.mark.parametrize("model", ["trend2", "spline"])
def test_surface_models_are_the_library_models(run, contour_picks, model):
    from strikeline.picks import PickSet
    from strikeline.pipeline import RunOptions, model_surface

    layer, xyz = contour_picks
    res = run("surfacemodel", {"PICKS": layer, "MODEL": model_index(model), "CELL": 50.0, "surface": TMP,
                               "uncertainty": TMP, "forecast_mask": TMP})
    got, gt, _ = raster(res["surface"])
    grid = Grid(gt, got.shape)
    _, cols = table(layer)
    # The library's surface step of `strikeline run --model ...` (folds by contact segment).
    ref = model_surface(PickSet(xyz, cols["contact_id"].astype(np.int64), cols["source"].astype(str)),
                        RunOptions(contacts="picks", out="", model=model), grid, what="picks")
    assert res["model_chosen"] == ref.kind == model
    assert res["cv_rmse_m"] == pytest.approx(ref.cv_rmse_m[model], abs=1e-12)
    np.testing.assert_array_equal(got, ref.evaluate_grid(grid).astype(np.float32).astype(float))
    se, _, _ = raster(res["uncertainty"])
    np.testing.assert_array_equal(se, ref.standard_error_grid(grid).astype(np.float32).astype(float))
    ex, _, _ = raster(res["forecast_mask"])
    X, Y = grid.mesh()
    np.testing.assert_array_equal(ex.astype(bool), ref.is_extrapolated(X, Y))
    # External: the mask is "farther than the reach from every datum".
    # Source: scipy.spatial.cKDTree nearest-neighbour distances (scipy 1.10).
    from scipy.spatial import cKDTree

    d, _ = cKDTree(ref.data_xy).query(np.column_stack([X.ravel(), Y.ravel()]))
    np.testing.assert_array_equal(ex.ravel().astype(bool), d > res["reach_m"])


def test_surface_model_honours_a_borehole(run, contour_picks, sheet):
    from qgis.core import QgsFeature, QgsGeometry, QgsVectorLayer

    from strikeline.picks import sample_bilinear
    from strikeline.surfaces import fit_surface

    layer, xyz = contour_picks
    BOREHOLE = (488000.0, 5215000.0, 560.0)  # a drilled intersection of our own, off the plane
    holes = QgsVectorLayer("PointZ?crs=EPSG:32631", "boreholes", "memory")
    f = QgsFeature()
    f.setGeometry(QgsGeometry.fromWkt("PointZ ({} {} {})".format(*BOREHOLE)))
    holes.dataProvider().addFeatures([f])
    res = run("surfacemodel", {"PICKS": layer, "MODEL": model_index("plane"), "REFERENCE": sheet["dem"], "BOREHOLES": holes,
                               "BOREHOLE_SIGMA": 0.0, "surface": TMP})
    surface, grid = read_raster(res["surface"], label="surface")
    ref = fit_surface(xyz, model="plane", boreholes=np.array([BOREHOLE]), borehole_sigma_m=0.0,
                      cross_validate_model=False)
    np.testing.assert_array_equal(surface, ref.evaluate_grid(grid).astype(np.float32).astype(float))
    # common practice: a model that honours a borehole (standard error 0) passes through it.
    z = sample_bilinear(surface, grid, BOREHOLE[0], BOREHOLE[1])
    assert float(z) == pytest.approx(BOREHOLE[2], abs=F32_ELEVATION_TOL_M)


def test_surface_model_with_the_demo_boreholes_and_dips(run, contour_picks, sheet):
    """Boreholes by collar and depth fields and dip readings go through the library's own
    conversions (pipeline.borehole_points / orientation_rows), as in strikeline run."""
    from strikeline.io.vector import read_layer
    from strikeline.picks import PickSet, sample_bilinear
    from strikeline.pipeline import RunOptions, borehole_points, model_surface, orientation_rows

    d = sheet["dir"]
    layer, xyz = contour_picks
    res = run("surfacemodel", {"PICKS": layer, "MODEL": model_index("trend2"), "REFERENCE": sheet["dem"],
                               "BOREHOLES": f"{d / 'boreholes.gpkg'}|layername=boreholes",
                               "BOREHOLE_COLLAR_FIELD": "collar_m", "BOREHOLE_DEPTH_FIELD": "depth_m",
                               "BOREHOLE_SIGMA": 0.0,
                               "ORIENTATIONS": f"{d / 'orientations.gpkg'}|layername=dip_readings",
                               "surface": TMP})
    surface, grid = read_raster(res["surface"], label="surface")
    opts = RunOptions(contacts="picks", out="", model="trend2", borehole_collar_field="collar_m",
                      borehole_depth_field="depth_m", borehole_sigma_m=0.0)
    holes = borehole_points(read_layer(d / "boreholes.gpkg", label="boreholes", geometry="point",
                                       layer_option="--boreholes-layer"), opts)
    dips = orientation_rows(read_layer(d / "orientations.gpkg", label="orientations", geometry="point",
                                       layer_option="--orientations-layer"), opts)
    _, cols = table(layer)
    ref = model_surface(PickSet(xyz, cols["contact_id"].astype(np.int64), cols["source"].astype(str)), opts,
                        grid, boreholes=holes, orientations=dips, what="picks")
    np.testing.assert_array_equal(surface, ref.evaluate_grid(grid).astype(np.float32).astype(float))
    # External: the holes' base elevations by construction. Source: test_data/demo/truth.json
    # (collar minus depth is the base plane's elevation); a surface that honours the holes
    # exactly (standard error 0) passes through them, to float32 storage.
    truth = sheet["truth"]["boreholes"]["holes"]
    z = sample_bilinear(surface, grid, np.array([h["x"] for h in truth]), np.array([h["y"] for h in truth]))
    np.testing.assert_allclose(z, [h["base_z_m"] for h in truth], atol=F32_ELEVATION_TOL_M)


def test_structure_contours_dash_the_forecast(run, contour_picks):
    from scipy.spatial import cKDTree

    layer, xyz = contour_picks
    sm = run("surfacemodel", {"PICKS": layer, "MODEL": model_index("plane"), "CELL": 25.0, "surface": TMP, "forecast_mask": TMP})
    res = run("structurecontours", {"SURFACE": sm["surface"], "FORECAST_MASK": sm["forecast_mask"],
                                    "INTERVAL": 50.0, "structure_contours": TMP})
    geoms, cols = table(res["structure_contours"], z=False)
    forecast = cols["extrapolated"].astype(bool)
    assert forecast.any() and (~forecast).any()
    # External: distance of each vertex to the nearest pick (scipy cKDTree): beyond the reach on
    # forecast parts, within it elsewhere, give or take one cell (the mask is cut between centres).
    tree = cKDTree(xyz[:, :2])
    slack = 25.0 * np.sqrt(2.0)
    for g, fc in zip(geoms, forecast):
        d, _ = tree.query(shapely.get_coordinates(g))
        assert (d > sm["reach_m"] - slack).all() if fc else (d <= sm["reach_m"] + slack).all()


# ----------------------------------------------------------------------- maps from the surface
def test_structure_contours_are_the_library_contours(run, surface_tif):
    res = run("structurecontours", {"SURFACE": surface_tif, "INTERVAL": 50.0, "structure_contours": TMP})
    surface, grid = read_raster(surface_tif, label="surface")
    ref_g, ref_z = contour_lines(surface, grid, interval_m=50.0)
    geoms, cols = table(res["structure_contours"])
    assert res["n_lines"] == len(ref_g) > 0
    np.testing.assert_array_equal(cols["elevation_m"], ref_z)
    for g, rg, z in zip(geoms, ref_g, ref_z):
        xyz = shapely.get_coordinates(g, include_z=True)
        np.testing.assert_array_equal(xyz[:, :2], shapely.get_coordinates(rg))
        assert np.all(xyz[:, 2] == z)
    # common practice: structure contours sit at whole multiples of the interval.
    assert np.all(np.mod(cols["elevation_m"], 50.0) == 0.0)


def test_structure_contours_split_at_the_ground(run, surface_tif, sheet):
    res = run("structurecontours", {"SURFACE": surface_tif, "GROUND": sheet["dem"], "INTERVAL": 50.0,
                                    "structure_contours": TMP})
    geoms, cols = table(res["structure_contours"], z=False)
    below = cols["below_ground"].astype(bool)
    assert below.any() and (~below).any()
    # External: ground minus surface at the vertices, both interpolated by scipy's linear
    # RegularGridInterpolator (scipy 1.10): never below zero on the parts below ground, never
    # above zero on the eroded ones.
    ground = bilinear_reference(sheet["dem"])
    surf = bilinear_reference(surface_tif)
    for g, b in zip(geoms, below):
        # A part's two end points are where the flag changes: they belong to both sides.
        xy = shapely.get_coordinates(g)[1:-1]
        depth = ground(xy[:, 0], xy[:, 1]) - surf(xy[:, 0], xy[:, 1])
        depth = depth[np.isfinite(depth)]
        assert (depth >= -1e-6).all() if b else (depth <= 1e-6).all()


def test_dip_grids_are_the_library_grids(run, surface_tif):
    res = run("dipgrids", {"SURFACE": surface_tif, "dip": TMP, "dip_direction": TMP})
    surface, grid = read_raster(surface_tif, label="surface")
    ref_dip, ref_dd = dip_grids(surface, grid)
    dip, _, _ = raster(res["dip"])
    dd, _, _ = raster(res["dip_direction"])
    np.testing.assert_array_equal(dip, ref_dip.astype(float))
    np.testing.assert_array_equal(dd, ref_dd.astype(float))
    # External: GDAL's own slope and aspect of the same file (aspect = downhill azimuth from north).
    # Source: gdal.DEMProcessing 'slope'/'aspect', GDAL 3.6 (Horn 1981 kernel; exact on a plane).
    slope = gdal.DEMProcessing("", surface_tif, "slope", format="MEM", computeEdges=False)
    aspect = gdal.DEMProcessing("", surface_tif, "aspect", format="MEM", computeEdges=False)
    s = slope.GetRasterBand(1).ReadAsArray()[1:-1, 1:-1]
    a = aspect.GetRasterBand(1).ReadAsArray()[1:-1, 1:-1]
    np.testing.assert_allclose(dip[1:-1, 1:-1], s, atol=GDAL_DIP_TOL_DEG)
    diff = (dd[1:-1, 1:-1] - a + 180.0) % 360.0 - 180.0
    assert np.nanmax(np.abs(diff)) < GDAL_DIP_TOL_DEG


@pytest.mark.parametrize("kind", ["file", "memory"])
def test_depth_trace_and_misfit(run, surface_tif, sheet, reference, kind):
    contacts, _ = topo(sheet, kind)
    res = run("depthtrace", {"SURFACE": surface_tif, "DEM": sheet["dem"], "CONTACTS": contacts,
                             "depth": TMP, "predicted_trace": TMP, "trace_misfit": TMP, "contact_misfit": TMP})
    dem, dgrid = read_raster(sheet["dem"], label="DEM")
    surface, _ = read_raster(surface_tif, label="surface")
    depth, _, _ = raster(res["depth"])
    np.testing.assert_array_equal(depth, depth_below_ground(dem, surface).astype(np.float32).astype(float))
    r = reference[1]
    np.testing.assert_allclose(depth, r.depth_m, atol=F32_ELEVATION_TOL_M, equal_nan=True)
    geoms, _ = table(res["predicted_trace"])
    ref_trace, _ = contour_lines(depth_below_ground(dem, surface), dgrid, levels=[0.0])
    assert_same_lines(geoms, np.zeros(len(geoms)), ref_trace, np.zeros(len(ref_trace)), tol_m=1e-9)
    assert_same_lines(geoms, np.zeros(len(geoms)), r.trace_geoms, np.zeros(len(r.trace_geoms)), tol_m=0.01)
    tm = r.summary["trace_misfit"]
    assert res["trace_misfit_median_m"] == pytest.approx(tm["median_m"], abs=1e-3)
    assert res["trace_misfit_p90_m"] == pytest.approx(tm["p90_m"], abs=1e-3)
    assert res["trace_misfit_n_vertices"] == tm["n_vertices"]
    # External: each vertex's distance to the trace. Source: GEOS point-line distance (shapely 2.0).
    pts, cols = table(res["trace_misfit"], z=False)
    trace = shapely.multilinestrings(list(geoms))
    np.testing.assert_allclose(cols["distance_m"], shapely.distance(pts, trace), atol=1e-9)
    assert res["trace_misfit_median_m"] == pytest.approx(float(np.median(cols["distance_m"])), abs=1e-12)
    # Contact segments: the library's own segmentation against the same trace.
    from strikeline.picks import sample_bilinear
    from strikeline.maps.trace import contact_misfit_segments

    ref_contacts = reference[0].contacts
    seg = contact_misfit_segments(ref_contacts.geoms, ref_contacts.fids, ref_trace, segment_m=100.0, flag_m=30.0,
                                  valid_fn=lambda x, y: np.isfinite(sample_bilinear(dem, dgrid, x, y)))
    sg, sc = table(res["contact_misfit"], z=False)
    assert len(sg) == len(seg["geoms"]) > 0
    np.testing.assert_array_equal(np.array([np.nan if v is None else v for v in sc["misfit_m"]], float),
                                  seg["misfit_m"])
    assert sc["flagged"].astype(bool).tolist() == seg["flagged"].tolist()


# ------------------------------------------------------------------------------- whole chain
QUICK_TOOL = {"MODEL": 1, "RESAMPLES": 100}  # the tool's values of conftest.QUICK: plane, 100 resamples


@pytest.mark.parametrize("kind", ["file", "memory"])
def test_whole_chain_is_the_library_chain(run, sheet, reference, kind, tmp_path):
    import json

    contacts, contours = topo(sheet, kind)
    rasters = ("surface", "dip", "dip_direction", "uncertainty", "depth")
    out = {k: str(tmp_path / f"{k.lower()}.tif") for k in rasters}
    layers = ("picks", "structure_contours", "predicted_trace", "contact_misfit", "attitudes")
    out.update({k: str(tmp_path / f"{k.lower()}.gpkg") for k in layers})
    res = run("modelcontact", {"CONTACTS": contacts, "DEM": sheet["dem"], "CONTOURS": contours,
                               "ELEV_FIELD": "elev_m", "INTERVAL": 50.0, "summary": str(tmp_path / "summary.json"),
                               **QUICK_TOOL, **out})
    inputs, r = reference
    for key, arr in zip(rasters, (r.surface, r.dip_deg, r.dip_direction_deg, r.uncertainty_m, r.depth_m)):
        got, gt, _ = raster(res[key])
        assert gt == r.grid.transform
        np.testing.assert_array_equal(got, np.asarray(arr, dtype=np.float32).astype(float), err_msg=key)
    # With the DEM the tool splits the library's lines where they pass below/above ground
    # (test_qgis_desktop checks the split against the DEM): every part lies on a library line of
    # its elevation and keeps that line's extrapolated flag, and each level keeps its length.
    geoms, cols = table(res["structure_contours"])
    assert r.contour_extrapolated.any() and not r.contour_extrapolated.all()
    assert len(geoms) >= len(r.contour_geoms) and "below_ground" in cols
    flags = cols["extrapolated"].astype(bool)
    for level in np.unique(r.contour_elevations_m):
        mine, theirs = cols["elevation_m"] == level, r.contour_elevations_m == level
        assert shapely.length(geoms[mine]).sum() == pytest.approx(shapely.length(r.contour_geoms[theirs]).sum(),
                                                                  rel=1e-9)
    for g, z, flag in zip(geoms, cols["elevation_m"], flags):
        pts = shapely.points(shapely.get_coordinates(g))
        on = [i for i in np.flatnonzero(r.contour_elevations_m == z)
              if shapely.distance(r.contour_geoms[i], pts).max() < 1e-6]
        assert on and any(r.contour_extrapolated[i] == flag for i in on)
    geoms, _ = table(res["picks"])
    np.testing.assert_array_equal(shapely.get_coordinates(geoms, include_z=True), r.picks.xyz)
    geoms, cols = table(res["predicted_trace"], z=False)
    assert len(geoms) == len(r.trace_geoms) and cols["extrapolated"].astype(bool).tolist() == r.trace_extrapolated.tolist()
    geoms, cols = table(res["contact_misfit"], z=False)
    assert len(geoms) == len(r.contact_misfit["geoms"])
    assert cols["flagged"].astype(bool).tolist() == r.contact_misfit["flagged"].tolist()
    geoms, cols = table(res["attitudes"], z=False)
    from strikeline import vocabulary as V

    assert [f for f in cols if f != "fid"] == list(V.ATTITUDES.field_names)  # as the local-attitudes tool's
    np.testing.assert_array_equal(shapely.get_coordinates(geoms), np.column_stack([r.attitudes.x, r.attitudes.y]))
    assert cols["quality"].tolist() == r.attitudes.quality.tolist()
    summary = json.loads((tmp_path / "summary.json").read_text())
    want = dict(r.summary)
    if kind == "memory":  # a memory layer is named by its provider, with no file to hash; the DEM is a file
        inputs = json.loads(json.dumps(want["inputs"]))
        for rec in (*inputs["contacts"], inputs["contours"]):
            rec.update(path="memory", path_absolute=None, sha256=None)
        want["inputs"] = inputs
    assert summary == json.loads(json.dumps(want))
    assert res["dip_deg"] == r.summary["plane"]["dip_deg"] and res["model_chosen"] == "plane"
    assert res["trace_misfit_median_m"] == r.summary["trace_misfit"]["median_m"]


def test_whole_chain_with_boreholes_dips_groups_and_top(run, sheet, library, tmp_path):
    d = sheet["dir"]
    res = run("modelcontact", {
        "CONTACTS": f"{d / 'contacts_grouped.gpkg'}|layername=contacts", "DEM": sheet["dem"],
        "CONTOURS": sheet["contours_uri"], "ELEV_FIELD": "elev_m", "GROUP_BY": "block",
        "BOREHOLES": f"{d / 'boreholes.gpkg'}|layername=boreholes", "BOREHOLE_COLLAR_FIELD": "collar_m",
        "BOREHOLE_DEPTH_FIELD": "depth_m",
        "ORIENTATIONS": f"{d / 'orientations.gpkg'}|layername=dip_readings",
        "TOP_CONTACTS": f"{d / 'top_contacts.gpkg'}|layername=top_contacts", **QUICK_TOOL,
        "CONTACT_SIGMA": 1.5,
        "picks": TMP, "structure_contours": TMP, "surface": TMP, "dip": TMP, "dip_direction": TMP,
        "vertical_thickness": TMP, "true_thickness": TMP, "top_picks": TMP,
        "summary": str(tmp_path / "summary.json")})
    import json

    from strikeline.pipeline import RunOptions, compute, load_inputs

    opts = RunOptions(contacts=str(d / "contacts_grouped.gpkg"), out="/nonexistent-out", dem=sheet["dem"],
                      contours=sheet["contours"], elev_field="elev_m", group_by="block",
                      boreholes=str(d / "boreholes.gpkg"), borehole_collar_field="collar_m",
                      borehole_depth_field="depth_m", orientations=str(d / "orientations.gpkg"),
                      top_contacts=str(d / "top_contacts.gpkg"), model="plane", resamples=100,
                      contact_sigma_m=1.5)
    r = compute(load_inputs(opts), opts)
    summary = json.loads((tmp_path / "summary.json").read_text())
    assert summary["data_error"]["contact_sigma_m"] == 1.5  # the QGIS parameter reached the library
    assert summary == json.loads(json.dumps(r.summary))
    assert set(summary["groups"]["planes"]) == set(r.summary["groups"]["planes"]) and len(summary["groups"]["planes"]) > 1
    for key, arr in (("surface", r.surface), ("vertical_thickness", r.vertical_thickness_m),
                     ("true_thickness", r.true_thickness_m)):
        got, _, _ = raster(res[key])
        np.testing.assert_array_equal(got, np.asarray(arr, dtype=np.float32).astype(float), err_msg=key)
    geoms, _ = table(res["top_picks"])
    np.testing.assert_array_equal(shapely.get_coordinates(geoms, include_z=True), r.top_picks.xyz)
    # External: the demo's top lies 73.6 m (true thickness) above the base, both planar and
    # parallel; within reach of the data the isopach is that thickness.
    # Source: test_data/demo/truth.json of the demo generator (the plane pair it was built from).
    TRUE_THICKNESS_M = sheet["truth"]["true_thickness_m"]  # Source: truth.json, 73.6 m by construction
    assert summary["thickness"]["mean_m"] == pytest.approx(TRUE_THICKNESS_M, abs=1.0)
    # common practice: vertical thickness = true thickness / cos(dip) for parallel planes
    VERTICAL_M = TRUE_THICKNESS_M / np.cos(np.radians(sheet["truth"]["dip_deg"]))
    v, _, _ = raster(res["vertical_thickness"])
    assert np.nanmedian(v) == pytest.approx(VERTICAL_M, abs=1.0)


def test_whole_chain_pick_spacing_is_the_command_line_one(run, sheet, library):
    res = run("modelcontact", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"],
                               "PICK_SPACING": PICK_SPACING_M, "INTERVAL": 50.0, **QUICK_TOOL,
                               "picks": TMP, "structure_contours": TMP, "surface": TMP, "dip": TMP,
                               "dip_direction": TMP})
    # The reference: the library's run with --pick-spacing (RunOptions.pick_spacing_m).
    _, r = library(sheet, contours=False, pick_spacing_m=PICK_SPACING_M)
    geoms, _ = table(res["picks"])
    np.testing.assert_array_equal(shapely.get_coordinates(geoms, include_z=True), r.picks.xyz)
    assert res["n_picks"] == len(r.picks) == r.summary["n_picks"]
    got, _, _ = raster(res["surface"])
    np.testing.assert_array_equal(got, r.surface.astype(np.float32).astype(float))
    # External: the plane through picks at any spacing along the one planar contact is the
    # demo's plane. Source: test_data/demo/truth.json (the plane the sheet was built from).
    assert res["dip_deg"] == pytest.approx(sheet["truth"]["dip_deg"], abs=0.5)
    assert res["dip_direction_deg"] == pytest.approx(sheet["truth"]["dip_direction_deg"], abs=1.0)


def test_whole_chain_without_a_dem(run, sheet, library):
    res = run("modelcontact", {"CONTACTS": sheet["contacts_uri"], "CONTOURS": sheet["contours_uri"],
                               "ELEV_FIELD": "elev_m", "INTERVAL": 50.0, "picks": TMP, **QUICK_TOOL,
                               "structure_contours": TMP, "surface": TMP, "dip": TMP, "dip_direction": TMP})
    _, r = library(sheet, dem=False)
    got, gt, _ = raster(res["surface"])
    assert gt == r.grid.transform
    np.testing.assert_array_equal(got, r.surface.astype(np.float32).astype(float))
    assert res["n_picks"] == len(r.picks) == r.picks.counts_by_source()["contours"]
    assert "predicted_trace" not in res and "depth" not in res


def test_whole_chain_on_a_level_contact_gives_a_horizontal_plane(run, sheet, tmp_path):
    from qgis.core import QgsFeature, QgsGeometry, QgsVectorLayer

    # The contact is GDAL's own 500 m contour of the demo DEM (Source: GDAL's contour generator,
    # through strikeline.io.contours): a horizontal bed following one height around the hills.
    dem, grid = read_raster(sheet["dem"])
    lines, _ = contour_lines(dem, grid, levels=[500.0])
    mem = QgsVectorLayer("LineString?crs=EPSG:32631", "level_contact", "memory")
    feats = []
    for g in lines:
        if g.length > 200.0:
            f = QgsFeature()
            f.setGeometry(QgsGeometry.fromWkt(g.wkt))
            feats.append(f)
    mem.dataProvider().addFeatures(feats)
    fb = QgsProcessingFeedback()
    logs = []
    fb.pushInfo = logs.append
    res = run("modelcontact", {"CONTACTS": mem, "DEM": sheet["dem"], "INTERVAL": 50.0, "picks": TMP, **QUICK_TOOL,
                               "structure_contours": TMP, "surface": TMP, "dip": TMP, "dip_direction": TMP},
              feedback=fb)
    assert res["quality"] != "undetermined"
    assert res["dip_direction_deg"] is None and res["strike_rhr_deg"] is None
    assert res["dip_deg"] < 0.05  # level to centimetres over kilometres
    assert any("horizontal within its 95% confidence" in m for m in logs)
    got, _, _ = raster(res["surface"])
    assert np.nanmax(np.abs(got - 500.0)) < 1.0  # a level surface at the contour's height
