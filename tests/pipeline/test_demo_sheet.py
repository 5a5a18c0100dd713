"""Checks of the shipped demo sheets against their DEMs and their true surfaces.

``test_data/demo/`` (Harnvel Moor): a planar base with its top, boreholes, dip readings and a
grouped copy of the contacts. ``test_data/fold/`` (Tolvane Fell): a plunging fold with an
analytic formula.

The reference for every "does this point lie on the surface" check is scipy's bilinear
interpolation of the DEM (``scipy.ndimage.map_coordinates`` with ``order=1``), not anything in
strikeline. GDAL's contour generator (which made the lines) interpolates linearly along the
edges between cell centres, where the bilinear surface is linear too, so the residuals are
expected to be at round-off level; the tolerances below leave room only for the millimetre by
which cut ends are pulled inside the DEM's domain.
"""
from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import shapely

gdal = pytest.importorskip("osgeo.gdal")
from osgeo import ogr, osr  # noqa: E402
from scipy.ndimage import map_coordinates  # noqa: E402

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "test_data" / "demo"
GENERATOR = REPO / "test_data" / "make_demo_sheet.py"

EXPECTED_SHAPE = (400, 400)
EXPECTED_CELL_M = 10.0
METRE = 1.0  # Source: OSR GetLinearUnits() returns the unit's size in metres (GDAL docs)
ON_SURFACE_TOL_M = 1e-3  # Source: scipy.ndimage.map_coordinates, a general-purpose reference
ROUNDTRIP_TOL_M = 1e-4
MIN_RELIEF_M = 200.0  # "a few hundred metres" of relief, from the task statement
MAX_RELIEF_M = 800.0
MIN_SINUOSITY = 1.3  # common practice: a dipping contact crossing valleys bends into Vs
MIN_TRACE_PIECE_M = 50.0
DIP_TOL_DEG = 0.01  # TLS refit of exact points: only round-off remains


@pytest.fixture(scope="module")
def truth():
    return json.loads((DEMO / "truth.json").read_text())


def read_dem(directory):
    ds = gdal.Open(str(directory / "dem.tif"))
    band = ds.GetRasterBand(1)
    info = {
        "array": band.ReadAsArray(),
        "gt": ds.GetGeoTransform(),
        "wkt": ds.GetProjection(),
        "nodata": band.GetNoDataValue(),
        "compression": ds.GetMetadata("IMAGE_STRUCTURE").get("COMPRESSION"),
        "dtype": band.DataType,
    }
    ds = None
    return info


def read_lines(path, layer_name):
    """Return (srs_wkt, geometry type, field names, list of (attrs, shapely geometry))."""
    ds = ogr.Open(str(path))
    layer = ds.GetLayerByName(layer_name)
    assert layer is not None, f"{path.name} has no layer {layer_name!r}"
    defn = layer.GetLayerDefn()
    fields = {defn.GetFieldDefn(i).GetName(): defn.GetFieldDefn(i).GetTypeName()
              for i in range(defn.GetFieldCount())}
    records = []
    for feat in layer:
        attrs = {name: feat.GetField(name) for name in fields}
        records.append((attrs, shapely.from_wkb(bytes(feat.GetGeometryRef().ExportToIsoWkb()))))
    out = (layer.GetSpatialRef().ExportToWkt(), layer.GetGeomType(), fields, records)
    ds = None
    return out


@pytest.fixture(scope="module")
def dem():
    return read_dem(DEMO)


@pytest.fixture(scope="module")
def contacts():
    return read_lines(DEMO / "contacts.gpkg", "contacts")


@pytest.fixture(scope="module")
def contours():
    return read_lines(DEMO / "contours.gpkg", "topo_contours")


def sample_bilinear(dem, xy):
    """Bilinear DEM value at map coordinates; NaN off the grid or next to nodata."""
    z = dem["array"].astype(np.float64)
    z[z == dem["nodata"]] = np.nan
    x0, dx, _, y0, _, dy = dem["gt"]
    col = (xy[:, 0] - x0) / dx - 0.5  # cell values sit at cell centres
    row = (xy[:, 1] - y0) / dy - 0.5
    return map_coordinates(z, [row, col], order=1, mode="constant", cval=np.nan)


def plane_elevation(truth, x, y):
    dd = math.radians(truth["dip_direction_deg"])
    px, py, pz = truth["point"]
    return pz - math.tan(math.radians(truth["dip_deg"])) * ((x - px) * math.sin(dd) + (y - py) * math.cos(dd))


def vertices(records):
    return np.concatenate([shapely.get_coordinates(g) for _, g in records])


# ----------------------------------------------------------------------------- CRS and grid
@pytest.mark.parametrize("which", ["dem", "contacts", "contours"])
def test_crs_is_projected_in_metres(which, truth, dem, contacts, contours):
    wkt = {"dem": dem["wkt"], "contacts": contacts[0], "contours": contours[0]}[which]
    srs = osr.SpatialReference(wkt=wkt)
    assert srs.IsProjected()
    assert srs.GetLinearUnits() == METRE
    assert f"{srs.GetAuthorityName(None)}:{srs.GetAuthorityCode(None)}" == truth["crs"]


def test_dem_grid_type_compression_and_nodata(dem, truth):
    assert dem["array"].shape == EXPECTED_SHAPE
    _, dx, rx, _, ry, dy = dem["gt"]
    assert (dx, -dy, rx, ry) == (EXPECTED_CELL_M, EXPECTED_CELL_M, 0.0, 0.0)
    assert dem["dtype"] == gdal.GDT_Float32
    assert dem["compression"] == "DEFLATE"
    assert dem["nodata"] == truth["dem"]["nodata"]
    void = dem["array"] == dem["nodata"]
    assert 0 < void.sum() < 0.01 * void.size
    rows, cols = np.nonzero(void)
    # all voids in the north-east corner
    assert rows.max() < EXPECTED_SHAPE[0] // 10 and cols.min() > EXPECTED_SHAPE[1] * 9 // 10


def test_dem_relief_and_flat_lake(dem, truth):
    z = dem["array"][dem["array"] != dem["nodata"]]
    assert MIN_RELIEF_M < z.max() - z.min() < MAX_RELIEF_M
    level = np.float32(truth["lake_level_m"])
    lake = dem["array"] == level
    assert lake.sum() > 100  # a real flat water surface, not a coincidence
    shore = np.zeros_like(lake)
    shore[1:] |= lake[:-1]
    shore[:-1] |= lake[1:]
    shore[:, 1:] |= lake[:, :-1]
    shore[:, :-1] |= lake[:, 1:]
    shore &= ~lake
    # the water is held in: every cell on the shore stands above the lake level
    assert np.all(dem["array"][shore] > level)


def test_truth_strike_follows_right_hand_rule(truth):
    # common practice: strike (RHR) = dip direction - 90 degrees
    assert truth["strike_rhr_deg"] == pytest.approx((truth["dip_direction_deg"] - 90.0) % 360.0)
    assert 0.0 < truth["dip_deg"] < 90.0
    assert 0.0 <= truth["dip_direction_deg"] < 360.0


# ----------------------------------------------------------------------------- contacts
def test_contacts_schema(contacts, truth):
    _, geom_type, fields, records = contacts
    assert ogr.GT_Flatten(geom_type) == ogr.wkbLineString
    assert fields == {"name": "String", "unit": "String", "kind": "String"}
    assert len(records) >= 1
    for attrs, geom in records:
        assert geom.geom_type == "LineString" and geom.is_valid
        assert geom.length >= MIN_TRACE_PIECE_M
        assert attrs == {"name": truth["contact"], "unit": truth["upper_unit"], "kind": "unconformity"}


def test_contact_vertices_lie_on_plane_and_dem(contacts, dem, truth):
    xy = vertices(contacts[3])
    ground = sample_bilinear(dem, xy)
    assert np.all(np.isfinite(ground)), "contact vertex off the DEM or next to nodata"
    residual = ground - plane_elevation(truth, xy[:, 0], xy[:, 1])
    assert np.max(np.abs(residual)) < ON_SURFACE_TOL_M


def test_contact_points_refit_to_truth_plane(contacts, dem, truth):
    xy = vertices(contacts[3])
    pts = np.column_stack([xy, sample_bilinear(dem, xy)])
    # Source: numpy.linalg.svd; total-least-squares normal = last right singular vector
    normal = np.linalg.svd(pts - pts.mean(axis=0), full_matrices=False)[2][-1]
    normal = normal if normal[2] > 0 else -normal
    dip = math.degrees(math.acos(normal[2]))
    dip_direction = math.degrees(math.atan2(normal[0], normal[1])) % 360.0
    assert dip == pytest.approx(truth["dip_deg"], abs=DIP_TOL_DEG)
    assert dip_direction == pytest.approx(truth["dip_direction_deg"], abs=DIP_TOL_DEG)


def test_contact_is_not_mapped_across_the_lake(contacts, dem, truth):
    mids = np.concatenate([
        (shapely.get_coordinates(g)[1:] + shapely.get_coordinates(g)[:-1]) / 2 for _, g in contacts[3]
    ])
    # inside the flat lake floor the bilinear DEM equals the lake level exactly
    assert np.all(sample_bilinear(dem, mids) != np.float32(truth["lake_level_m"]))


def test_contact_trace_is_sinuous(contacts):
    records = contacts[3]
    length = sum(g.length for _, g in records)
    xy = vertices(records)
    along = xy @ np.array([1.0, -1.0]) / math.sqrt(2.0)  # rough trend of the trace, NW-SE
    ends = xy[[np.argmin(along), np.argmax(along)]]
    assert length / np.hypot(*(ends[1] - ends[0])) > MIN_SINUOSITY


# ----------------------------------------------------------------------------- topo contours
def test_contour_levels_and_vertices(contours, dem):
    _, geom_type, fields, records = contours
    assert ogr.GT_Flatten(geom_type) == ogr.wkbLineString
    assert fields == {"elev_m": "Real"}
    levels = np.array([a["elev_m"] for a, _ in records])
    assert np.all(np.mod(levels, 10.0) == 0.0)
    z = dem["array"][dem["array"] != dem["nodata"]]
    expected = set(np.arange(math.ceil(z.min() / 10) * 10, math.floor(z.max() / 10) * 10 + 1, 10.0))
    assert set(levels) == expected
    xy = np.concatenate([shapely.get_coordinates(g) for _, g in records])
    level_per_vertex = np.repeat(levels, [len(g.coords) for _, g in records])
    ground = sample_bilinear(dem, xy)
    assert np.all(np.isfinite(ground)), "contour vertex off the DEM or next to nodata"
    assert np.max(np.abs(ground - level_per_vertex)) < ON_SURFACE_TOL_M


# ----------------------------------------------------------------------------- determinism
def test_generator_reproduces_shipped_files(tmp_path, dem, contacts, contours, truth):
    subprocess.run([sys.executable, str(GENERATOR), "--only", "demo", "--out", str(tmp_path)], check=True,
                   capture_output=True, timeout=120)
    assert json.loads((tmp_path / "truth.json").read_text()) == truth
    again = read_dem(tmp_path)
    np.testing.assert_allclose(again["array"], dem["array"], rtol=0, atol=ROUNDTRIP_TOL_M)
    assert again["gt"] == dem["gt"]
    for shipped, name, layer in [(contacts, "contacts.gpkg", "contacts"),
                                 (contours, "contours.gpkg", "topo_contours")]:
        fresh = read_lines(tmp_path / name, layer)
        assert fresh[2] == shipped[2]
        assert len(fresh[3]) == len(shipped[3])
        for (a1, g1), (a2, g2) in zip(fresh[3], shipped[3]):
            assert a1 == a2
            assert shapely.equals_exact(g1, g2, tolerance=ROUNDTRIP_TOL_M)
    # the top contact, boreholes, dip readings and grouped contacts come back the same too
    for name, layer in NEW_DEMO_LAYERS:
        shipped = read_lines(DEMO / name, layer)
        fresh = read_lines(tmp_path / name, layer)
        assert fresh[2] == shipped[2]
        assert len(fresh[3]) == len(shipped[3])
        for (a1, g1), (a2, g2) in zip(fresh[3], shipped[3]):
            assert a1 == a2
            assert shapely.equals_exact(g1, g2, tolerance=ROUNDTRIP_TOL_M)


# ============================================================================================
# The extra layers: top contact, boreholes, dip readings, grouped contacts
# ============================================================================================
NEW_DEMO_LAYERS = [
    ("top_contacts.gpkg", "top_contacts"),
    ("boreholes.gpkg", "boreholes"),
    ("orientations.gpkg", "dip_readings"),
    ("contacts_grouped.gpkg", "contacts"),
]
CONTACT_FIELDS = {"name": "String", "unit": "String", "kind": "String"}
BOREHOLE_FIELDS = {"hole_id": "String", "collar_m": "Real", "depth_m": "Real", "base_z_m": "Real"}
READING_FIELDS = {"site": "String", "dip": "Real", "dip_dir": "Real", "strike": "Real"}
EXACT_TOL_M = 1e-6  # values written as doubles from the same formulas: round-off only
FAR_FROM_TRACE_M = 400.0  # "some far from the contact trace", from the task statement
MIN_FAR_HOLES = 2
SITE_ON_TRACE_TOL_M = 0.1  # site coordinates are rounded to a decimetre (truth.json note)


@pytest.fixture(scope="module")
def top_contacts():
    return read_lines(DEMO / "top_contacts.gpkg", "top_contacts")


@pytest.fixture(scope="module")
def boreholes():
    return read_lines(DEMO / "boreholes.gpkg", "boreholes")


@pytest.fixture(scope="module")
def readings():
    return read_lines(DEMO / "orientations.gpkg", "dip_readings")


def unit_normal(dip_deg, dip_direction_deg):
    """Upward unit normal of a plane.

    common practice: the direction cosines of the upward normal of a plane dipping ``dip``
    toward ``dip direction`` (x east, y north, z up) are (sin d sin a, sin d cos a, cos d).
    """
    d, a = math.radians(dip_deg), math.radians(dip_direction_deg)
    return np.array([math.sin(d) * math.sin(a), math.sin(d) * math.cos(a), math.cos(d)])


def azimuth_gap_deg(a, b):
    return np.abs((np.asarray(a) - b + 180.0) % 360.0 - 180.0)


@pytest.mark.parametrize("name,layer", NEW_DEMO_LAYERS)
def test_new_layers_share_the_sheet_crs(name, layer, truth):
    srs = osr.SpatialReference(wkt=read_lines(DEMO / name, layer)[0])
    assert srs.IsProjected() and srs.GetLinearUnits() == METRE
    assert f"{srs.GetAuthorityName(None)}:{srs.GetAuthorityCode(None)}" == truth["crs"]


def test_top_truth_is_parallel_at_the_stated_thickness(truth):
    top = truth["top_plane"]
    assert (top["dip_deg"], top["dip_direction_deg"]) == (truth["dip_deg"], truth["dip_direction_deg"])
    assert truth["true_thickness_m"] > 0
    # common practice: vertical thickness of a dipping bed = true thickness / cos(dip)
    expected_vertical = truth["true_thickness_m"] / math.cos(math.radians(truth["dip_deg"]))
    assert truth["vertical_thickness_m"] == pytest.approx(expected_vertical, abs=1e-9)
    assert top["point"][:2] == truth["point"][:2]
    assert top["point"][2] - truth["point"][2] == pytest.approx(expected_vertical, abs=1e-9)


def test_top_contacts_schema(top_contacts, truth):
    _, geom_type, fields, records = top_contacts
    assert ogr.GT_Flatten(geom_type) == ogr.wkbLineString
    assert fields == CONTACT_FIELDS
    assert len(records) >= 1
    for attrs, geom in records:
        assert geom.geom_type == "LineString" and geom.is_valid
        assert geom.length >= MIN_TRACE_PIECE_M
        assert attrs == {"name": truth["top_contact"], "unit": truth["overlying_unit"], "kind": "conformable"}


def test_top_contact_lies_on_dem_at_true_thickness_above_base(top_contacts, dem, truth):
    xy = vertices(top_contacts[3])
    ground = sample_bilinear(dem, xy)
    assert np.all(np.isfinite(ground)), "top contact vertex off the DEM or next to nodata"
    top = truth["top_plane"]
    top_z = plane_elevation({"dip_deg": top["dip_deg"], "dip_direction_deg": top["dip_direction_deg"],
                             "point": top["point"]}, xy[:, 0], xy[:, 1])
    assert np.max(np.abs(ground - top_z)) < ON_SURFACE_TOL_M
    # Source: distance of a point p from a plane through p0 with unit normal n is n . (p - p0)
    # (vector geometry); for the top contact's 3-D points it is the unit's true thickness.
    pts = np.column_stack([xy, ground])
    normal_distance = (pts - np.asarray(truth["point"])) @ unit_normal(truth["dip_deg"], truth["dip_direction_deg"])
    assert np.max(np.abs(normal_distance - truth["true_thickness_m"])) < ON_SURFACE_TOL_M


def test_top_contact_is_not_mapped_across_the_lake(top_contacts, dem, truth):
    mids = np.concatenate([
        (shapely.get_coordinates(g)[1:] + shapely.get_coordinates(g)[:-1]) / 2 for _, g in top_contacts[3]
    ])
    assert np.all(sample_bilinear(dem, mids) != np.float32(truth["lake_level_m"]))


def test_top_contact_crops_out_down_dip_of_the_base(top_contacts, contacts, truth):
    # common practice: the top of a unit dipping toward D crops out on the D side of its base
    dd = math.radians(truth["dip_direction_deg"])
    down_dip = np.array([math.sin(dd), math.cos(dd)])
    assert np.median(vertices(top_contacts[3]) @ down_dip) > np.median(vertices(contacts[3]) @ down_dip)


def test_boreholes_schema(boreholes, truth):
    _, geom_type, fields, records = boreholes
    assert ogr.GT_Flatten(geom_type) == ogr.wkbPoint
    assert fields == BOREHOLE_FIELDS
    assert 3 <= len(records) <= 5
    ids = [a["hole_id"] for a, _ in records]
    assert len(set(ids)) == len(ids)
    assert ids == [h["hole_id"] for h in truth["boreholes"]["holes"]]


def test_borehole_depths_are_collar_minus_plane(boreholes, dem, truth):
    records = boreholes[3]
    xy = np.array([[g.x, g.y] for _, g in records])
    collar = np.array([a["collar_m"] for a, _ in records])
    depth = np.array([a["depth_m"] for a, _ in records])
    base_z = np.array([a["base_z_m"] for a, _ in records])
    # Source: scipy.ndimage.map_coordinates (bilinear) is the reference for the collar elevation
    np.testing.assert_allclose(collar, sample_bilinear(dem, xy), rtol=0, atol=EXACT_TOL_M)
    np.testing.assert_allclose(base_z, plane_elevation(truth, xy[:, 0], xy[:, 1]), rtol=0, atol=EXACT_TOL_M)
    # common practice: vertical depth to a surface = collar elevation - surface elevation
    np.testing.assert_allclose(depth, collar - base_z, rtol=0, atol=EXACT_TOL_M)
    assert np.all(depth > 0), "every borehole must reach the base below ground"
    assert np.all(collar != np.float32(truth["lake_level_m"])), "a borehole collared in the lake"
    for (attrs, geom), hole in zip(records, truth["boreholes"]["holes"]):
        assert (geom.x, geom.y) == (hole["x"], hole["y"])
        assert attrs["depth_m"] == pytest.approx(hole["depth_m"], abs=EXACT_TOL_M)


def test_some_boreholes_are_far_from_the_trace(boreholes, contacts):
    trace = shapely.union_all([g for _, g in contacts[3]])
    distance = np.array([trace.distance(g) for _, g in boreholes[3]])
    assert np.count_nonzero(distance > FAR_FROM_TRACE_M) >= MIN_FAR_HOLES


def test_dip_readings_schema(readings, truth):
    _, geom_type, fields, records = readings
    assert ogr.GT_Flatten(geom_type) == ogr.wkbPoint
    assert fields == READING_FIELDS
    assert 4 <= len(records) <= 8
    assert [a for a, _ in records] == [{k: r[k] for k in READING_FIELDS} for r in truth["orientations"]["readings"]]


def test_dip_readings_within_stated_error_of_the_plane(readings, truth):
    attrs = [a for a, _ in readings[3]]
    dip = np.array([a["dip"] for a in attrs])
    dd = np.array([a["dip_dir"] for a in attrs])
    strike = np.array([a["strike"] for a in attrs])
    max_err = truth["orientations"]["max_reading_error_deg"]
    assert 1.0 <= max_err <= 2.0  # "+-1-2 degrees", from the task statement
    assert np.all(np.abs(dip - truth["dip_deg"]) <= max_err)
    assert np.all(azimuth_gap_deg(dd, truth["dip_direction_deg"]) <= max_err)
    # common practice: strike (right-hand rule) = dip direction - 90 degrees
    np.testing.assert_array_equal(strike, (dd - 90.0) % 360.0)
    np.testing.assert_array_equal(dip, np.round(dip))  # whole degrees, as read off a clinometer
    assert np.ptp(dip) > 0 or np.ptp(dd) > 0, "the readings carry no reading error at all"


def test_dip_reading_sites_lie_on_the_base_trace(readings, contacts):
    trace = shapely.union_all([g for _, g in contacts[3]])
    assert max(trace.distance(g) for _, g in readings[3]) < SITE_ON_TRACE_TOL_M
    # both pieces of the trace carry readings
    pieces = [g for _, g in contacts[3]]
    assert all(any(p.distance(g) < SITE_ON_TRACE_TOL_M for _, g in readings[3]) for p in pieces)


def test_grouped_contacts_are_the_contacts_with_a_block(contacts, truth):
    grouped = read_lines(DEMO / "contacts_grouped.gpkg", "contacts")
    assert ogr.GT_Flatten(grouped[1]) == ogr.wkbLineString
    assert grouped[2] == {**CONTACT_FIELDS, "block": "String"}
    assert len(grouped[3]) == len(contacts[3])
    for (a1, g1), (a2, g2) in zip(grouped[3], contacts[3]):
        assert shapely.equals_exact(g1, g2, tolerance=0.0)
        assert {k: a1[k] for k in CONTACT_FIELDS} == a2
    blocks = [a["block"] for a, _ in grouped[3]]
    assert blocks == truth["grouped_contacts"]["blocks"]
    assert len(set(blocks)) == len(blocks)
    mean_y = {a["block"]: shapely.get_coordinates(g)[:, 1].mean() for a, g in grouped[3]}
    assert mean_y["north"] > mean_y["south"]


# ============================================================================================
# contacts_mapped.gpkg: a hand-digitised copy of the base trace with one mistraced stretch
# ============================================================================================
MAPPED_FIELDS = {**CONTACT_FIELDS, "block": "String"}
# What the copy is meant to be, from the task statement (a field geologist's digitised line):
SPACING_RANGE_M = (15.0, 40.0)  # "irregular spacing of roughly 15-40 m"
SIGMA_RANGE_M = (2.0, 4.0)  # "standard deviation of about 3 m": the RMS offset lies in 2-4 m
MAX_OFFSET_CAP_M = 8.0  # "never more than ~8 m"
STRETCH_LENGTH_RANGE_M = (250.0, 350.0)  # "a stretch of about 250-350 m"
STRETCH_OFFSET_RANGE_M = (60.0, 80.0)  # "displaced by ~60-80 m"
STRETCH_OFFSET_TOL_M = 4.0  # "within a few metres of the recorded offset"
MIN_PLATEAU_VERTICES = 3
MIN_NEIGHBOUR_CORRELATION = 0.7  # a smooth error: exp(-(27/100)^2) = 0.93 at the mean spacing
STRETCH_EDGE_CLEARANCE_M = 200.0  # "not on the sheet edge"
STRETCH_LAKE_CLEARANCE_M = 1000.0  # "not near the lake"
WKT_ROUNDING_M = 0.01  # truth.json rounds the recorded coordinates to centimetres


@pytest.fixture(scope="module")
def mapped():
    return read_lines(DEMO / "contacts_mapped.gpkg", "contacts")


def signed_offsets(line, exact):
    """Distance of each vertex of ``line`` from the line ``exact``, positive to its left, and
    the along-``exact`` position of its nearest point.

    Source: shapely 2 (GEOS) ``distance`` and ``line_locate_point`` give the distance and the
    foot point; the side is the sign of the 2-D cross product of the direction of ``exact``
    there with the vector from the foot to the vertex (vector geometry).
    """
    pts = shapely.points(shapely.get_coordinates(line))
    along = shapely.line_locate_point(exact, pts)
    distance = shapely.distance(pts, exact)
    foot = shapely.get_coordinates(shapely.line_interpolate_point(exact, along))
    ahead = shapely.get_coordinates(shapely.line_interpolate_point(exact, np.minimum(along + 1.0, exact.length)))
    behind = shapely.get_coordinates(shapely.line_interpolate_point(exact, np.maximum(along - 1.0, 0.0)))
    t = ahead - behind
    v = shapely.get_coordinates(line) - foot
    side = np.sign(t[:, 0] * v[:, 1] - t[:, 1] * v[:, 0])
    return np.where(side < 0, -distance, distance), along


def error_masks(truth, along, index):
    """Vertices of feature ``index`` inside the recorded mistraced stretch, and inside its
    plateau (between the ramps); all False on the other features."""
    err = truth["mapped_contacts"]["digitising_error"]
    if index != err["feature_index"]:
        return np.zeros(len(along), bool), np.zeros(len(along), bool)
    lo, hi = err["plateau_m"]
    return (along >= err["start_m"]) & (along <= err["end_m"]), (along >= lo) & (along <= hi)


def test_mapped_contacts_schema_and_order(mapped, contacts, truth):
    _, geom_type, fields, records = mapped
    rec = truth["mapped_contacts"]
    assert ogr.GT_Flatten(geom_type) == ogr.wkbLineString
    assert fields == MAPPED_FIELDS
    assert (rec["file"], rec["layer"], rec["field"]) == ("contacts_mapped.gpkg", "contacts", "block")
    grouped = read_lines(DEMO / "contacts_grouped.gpkg", "contacts")[3]
    assert len(records) == len(contacts[3]) == len(grouped) == 2
    # same features in the same order as contacts_grouped.gpkg: attributes and blocks
    assert [a for a, _ in records] == [a for a, _ in grouped]
    assert [a["block"] for a, _ in records] == rec["blocks"] == truth["grouped_contacts"]["blocks"]
    for (_, g), (_, exact) in zip(records, contacts[3]):
        assert g.geom_type == "LineString" and g.is_valid and g.is_simple
        # each copy follows its own exact piece: same ends, similar length
        np.testing.assert_allclose(shapely.get_coordinates(g)[[0, -1]], shapely.get_coordinates(exact)[[0, -1]],
                                   rtol=0, atol=ROUNDTRIP_TOL_M)
        assert 0.9 < g.length / exact.length < 1.1


def test_mapped_contacts_lie_on_land_inside_the_dem(mapped, dem, truth):
    for _, g in mapped[3]:
        xy = shapely.get_coordinates(shapely.segmentize(g, 1.0))
        ground = sample_bilinear(dem, xy)  # Source: scipy.ndimage.map_coordinates (bilinear)
        assert np.all(np.isfinite(ground)), "digitised contact off the DEM or next to nodata"
        # the ends are the exact trace's, one of them on the shore (at lake level); in between,
        # the bilinear DEM at lake level means a point on the flat lake floor
        assert np.all(ground[1:-1] != np.float32(truth["lake_level_m"])), "digitised contact on the lake"


def test_mapped_vertices_are_coarser_and_irregular(mapped, contacts, dem):
    cell_m = dem["gt"][1]
    for (_, g), (_, exact) in zip(mapped[3], contacts[3]):
        gaps = np.hypot(*np.diff(shapely.get_coordinates(g), axis=0).T)
        lo, hi = SPACING_RANGE_M
        assert lo <= np.median(gaps) <= hi
        # sideways errors of a few metres change a 15-40 m step by little
        assert np.mean((gaps > lo - 5.0) & (gaps < hi + 5.0)) > 0.95
        assert np.std(gaps) > 3.0, "the spacing is regular, not hand-digitised"
        # Source: the DEM's own cell size (geotransform); the exact trace has a vertex per cell edge
        assert np.median(gaps) > cell_m * 1.5
        assert len(g.coords) < len(exact.coords) / 2


def test_mapped_offsets_outside_the_mistrace(mapped, contacts, truth):
    """Outside the mistraced stretch every vertex lies within max_offset_m of the exact trace.

    Source: the exact trace is contacts.gpkg, generated from the analytic plane (its vertices
    lie on the plane and the DEM, test_contact_vertices_lie_on_plane_and_dem).
    """
    rec = truth["mapped_contacts"]
    assert rec["max_offset_m"] <= MAX_OFFSET_CAP_M
    assert SIGMA_RANGE_M[0] <= rec["positional_sigma_m"] <= SIGMA_RANGE_M[1]
    kept = []
    for i, ((_, g), (_, exact)) in enumerate(zip(mapped[3], contacts[3])):
        offset, along = signed_offsets(g, exact)
        stretch, _ = error_masks(truth, along, i)
        outside = offset[~stretch]
        assert np.max(np.abs(outside)) <= rec["max_offset_m"]
        # a smooth error, not jitter: neighbouring vertices are displaced alike
        # Source: numpy.corrcoef (Pearson correlation of consecutive offsets)
        assert np.corrcoef(outside[:-1], outside[1:])[0, 1] > MIN_NEIGHBOUR_CORRELATION
        # the copy is displaced to both sides, not shifted bodily
        assert np.mean(outside > 0) > 0.2 and np.mean(outside < 0) > 0.2
        kept.append(outside)
    rms = float(np.sqrt(np.mean(np.concatenate(kept) ** 2)))
    assert SIGMA_RANGE_M[0] <= rms <= SIGMA_RANGE_M[1]


def test_mapped_mistrace_is_offset_as_recorded(mapped, contacts, truth):
    err = truth["mapped_contacts"]["digitising_error"]
    i = err["feature_index"]
    assert err["feature"] == truth["mapped_contacts"]["blocks"][i] == "north"
    exact = contacts[3][i][1]
    assert exact.length == max(g.length for _, g in contacts[3])  # the longer feature
    assert STRETCH_LENGTH_RANGE_M[0] <= err["end_m"] - err["start_m"] <= STRETCH_LENGTH_RANGE_M[1]
    assert STRETCH_OFFSET_RANGE_M[0] <= err["offset_m"] <= STRETCH_OFFSET_RANGE_M[1]
    assert err["start_m"] < err["plateau_m"][0] < err["plateau_m"][1] < err["end_m"]
    line = mapped[3][i][1]
    offset, along = signed_offsets(line, exact)
    stretch, plateau = error_masks(truth, along, i)
    assert plateau.sum() >= MIN_PLATEAU_VERTICES
    sign = 1.0 if err["side"] == "left" else -1.0
    np.testing.assert_allclose(sign * offset[plateau], err["offset_m"], rtol=0, atol=STRETCH_OFFSET_TOL_M)
    # the ramps: no vertex of the stretch lies farther out than the plateau allows
    assert np.all(sign * offset[stretch] <= err["offset_m"] + STRETCH_OFFSET_TOL_M)
    assert np.all(sign * offset[stretch] >= -truth["mapped_contacts"]["max_offset_m"])
    # the recorded stretch is the file's: same vertices, inside the recorded box
    recorded = shapely.from_wkt(err["mapped_wkt"])
    np.testing.assert_allclose(shapely.get_coordinates(recorded), shapely.get_coordinates(line)[stretch],
                               rtol=0, atol=WKT_ROUNDING_M)
    box = shapely.box(*err["mapped_bbox"]).buffer(WKT_ROUNDING_M)
    assert shapely.contains_xy(box, *shapely.get_coordinates(line)[stretch].T).all()
    exact_stretch = shapely.from_wkt(err["exact_wkt"])
    assert exact_stretch.length == pytest.approx(err["end_m"] - err["start_m"], abs=0.1)
    assert shapely.get_coordinates(exact_stretch)[0] == pytest.approx(
        shapely.get_coordinates(exact.interpolate(err["start_m"]))[0], abs=WKT_ROUNDING_M)


def test_mapped_mistrace_is_away_from_sheet_edge_and_lake(dem, truth):
    err = truth["mapped_contacts"]["digitising_error"]
    stretch = shapely.union_all([shapely.from_wkt(err["exact_wkt"]), shapely.from_wkt(err["mapped_wkt"])])
    x0, dx, _, y0, _, dy = dem["gt"]
    rows, cols = dem["array"].shape
    sheet = shapely.box(x0, y0 + rows * dy, x0 + cols * dx, y0)
    assert sheet.exterior.distance(stretch) > STRETCH_EDGE_CLEARANCE_M
    r, c = np.nonzero(dem["array"] == np.float32(truth["lake_level_m"]))
    lake = shapely.multipoints(np.column_stack([x0 + (c + 0.5) * dx, y0 + (r + 0.5) * dy]))
    assert lake.distance(stretch) > STRETCH_LAKE_CLEARANCE_M


def test_mapped_mistrace_crosses_sloping_ground(dem, truth):
    """The slip lies on sloping ground, where it puts the line off the plane by many metres."""
    err = truth["mapped_contacts"]["digitising_error"]
    z = dem["array"].astype(np.float64)
    z[z == dem["nodata"]] = np.nan
    # Source: numpy.gradient, central differences of the DEM (cell size from the geotransform)
    gy, gx = np.gradient(z, dem["gt"][5], dem["gt"][1])
    xy = shapely.get_coordinates(shapely.segmentize(shapely.from_wkt(err["exact_wkt"]), 10.0))
    x0, dx, _, y0, _, dy = dem["gt"]
    col = np.floor((xy[:, 0] - x0) / dx).astype(int)
    row = np.floor((xy[:, 1] - y0) / dy).astype(int)
    slope_deg = np.degrees(np.arctan(np.hypot(gx[row, col], gy[row, col])))
    assert np.median(slope_deg) > 8.0  # common practice: > ~5 degrees is sloping, not flat, ground
    mapped_xy = shapely.get_coordinates(shapely.from_wkt(err["mapped_wkt"]))
    ground = sample_bilinear(dem, mapped_xy)
    miss = ground - plane_elevation(truth, mapped_xy[:, 0], mapped_xy[:, 1])
    assert np.max(np.abs(miss)) > 10.0  # the slip shows in the elevations, not only in plan


def test_mapped_generator_is_deterministic(tmp_path, mapped, truth):
    subprocess.run([sys.executable, str(GENERATOR), "--only", "demo", "--out", str(tmp_path)], check=True,
                   capture_output=True, timeout=120)
    assert json.loads((tmp_path / "truth.json").read_text())["mapped_contacts"] == truth["mapped_contacts"]
    fresh = read_lines(tmp_path / "contacts_mapped.gpkg", "contacts")
    assert fresh[2] == mapped[2] and len(fresh[3]) == len(mapped[3])
    for (a1, g1), (a2, g2) in zip(fresh[3], mapped[3]):
        assert a1 == a2
        assert shapely.equals_exact(g1, g2, tolerance=ROUNDTRIP_TOL_M)


# ============================================================================================
# Tolvane Fell: the fold sheet
# ============================================================================================
FOLD_DIR = REPO / "test_data" / "fold"
FOLD_SHAPE = (300, 300)
FOLD_CRS = "EPSG:32630"  # the task: same CRS family (UTM on WGS 84), a different place
MIN_HINGE_CROSSINGS = 5  # "crosses the fold's hinge region several times", from the task
MIN_HULL_FRACTION = 0.85
MAX_GAP_P95_M = 250.0  # 95 % of the hull lies within this distance of the trace
SPLINE_RMS_MAX_M = 2.0  # Project target: the spline's error against the truth under 2 m RMS
PLANE_RMS_MIN_M = 10.0  # a plane cannot fit the fold: the data really are curved
GRADIENT_TOL = 1e-6  # m/m, analytic gradient vs central differences with a 0.5 m step
# Hand computation from the truth formula at t = wavelength / 4 (steepest part of a limb):
# dz/ds = -tan 5.5 deg = -0.096289, dz/dt = -2 pi 64 / 1750 = -0.229785, |grad| = 0.249149,
# dip = atan(0.249149) = 13.990 deg; -grad points 22.736 deg from 152 deg toward 62 deg: 129.264 deg.
LIMB_DIP_DEG = 13.990  # from the formula, by hand
LIMB_DIP_DIRECTION_DEG = 129.264  # from the formula, by hand
HAND_TOL_DEG = 1e-3


@pytest.fixture(scope="module")
def fold_truth():
    return json.loads((FOLD_DIR / "truth.json").read_text())


@pytest.fixture(scope="module")
def fold_dem():
    return read_dem(FOLD_DIR)


@pytest.fixture(scope="module")
def fold_contacts():
    return read_lines(FOLD_DIR / "contacts.gpkg", "contacts")


def fold_frame(tr, x, y):
    s = tr["surface"]
    a = math.radians(s["axis_trend_deg"])
    dx, dy = np.asarray(x) - s["x0"], np.asarray(y) - s["y0"]
    return dx * math.sin(a) + dy * math.cos(a), dx * math.cos(a) - dy * math.sin(a)


def fold_z(tr, x, y):
    """The surface from the formula written in truth.json (not from the generator)."""
    s = tr["surface"]
    along, across = fold_frame(tr, x, y)
    return (s["z0"] - math.tan(math.radians(s["plunge_deg"])) * along
            + s["amplitude_m"] * np.cos(2 * np.pi * across / s["wavelength_m"]))


def fold_gradient(tr, x, y):
    """``(dz/dx, dz/dy)`` from the gradient written in truth.json."""
    s = tr["surface"]
    a = math.radians(s["axis_trend_deg"])
    _, across = fold_frame(tr, x, y)
    k = 2 * np.pi / s["wavelength_m"]
    dz_ds = -math.tan(math.radians(s["plunge_deg"]))
    dz_dt = -s["amplitude_m"] * k * np.sin(k * across)
    return dz_ds * math.sin(a) + dz_dt * math.cos(a), dz_ds * math.cos(a) - dz_dt * math.sin(a)


def local_dip(gx, gy):
    """(dip direction, dip) in degrees of a surface with gradient (gx, gy).

    common practice: dip = atan |grad z|, dip direction = azimuth of -grad z.
    """
    return (np.degrees(np.arctan2(-gx, -gy)) % 360.0, np.degrees(np.arctan(np.hypot(gx, gy))))


def test_fold_crs_and_grid(fold_dem, fold_contacts, fold_truth):
    for wkt in (fold_dem["wkt"], fold_contacts[0], read_lines(FOLD_DIR / "contours.gpkg", "topo_contours")[0]):
        srs = osr.SpatialReference(wkt=wkt)
        assert srs.IsProjected() and srs.GetLinearUnits() == METRE
        assert f"{srs.GetAuthorityName(None)}:{srs.GetAuthorityCode(None)}" == FOLD_CRS == fold_truth["crs"]
    assert fold_dem["array"].shape == FOLD_SHAPE
    _, dx, rx, _, ry, dy = fold_dem["gt"]
    assert (dx, -dy, rx, ry) == (EXPECTED_CELL_M, EXPECTED_CELL_M, 0.0, 0.0)
    assert (fold_dem["gt"][0], fold_dem["gt"][3]) == (fold_truth["dem"]["x_west"], fold_truth["dem"]["y_north"])
    assert fold_dem["dtype"] == gdal.GDT_Float32 and fold_dem["compression"] == "DEFLATE"
    assert not np.any(fold_dem["array"] == fold_dem["nodata"])
    z = fold_dem["array"]
    assert MIN_RELIEF_M < z.max() - z.min() < MAX_RELIEF_M


def test_fold_contacts_schema(fold_contacts, fold_truth):
    _, geom_type, fields, records = fold_contacts
    assert ogr.GT_Flatten(geom_type) == ogr.wkbLineString
    assert fields == CONTACT_FIELDS
    for attrs, geom in records:
        assert geom.geom_type == "LineString" and geom.is_valid
        assert geom.length >= MIN_TRACE_PIECE_M
        assert attrs == {"name": fold_truth["contact"], "unit": fold_truth["upper_unit"], "kind": "conformable"}


def test_fold_contact_vertices_lie_on_dem_and_fold(fold_contacts, fold_dem, fold_truth):
    xy = vertices(fold_contacts[3])
    ground = sample_bilinear(fold_dem, xy)
    assert np.all(np.isfinite(ground))
    assert np.max(np.abs(ground - fold_z(fold_truth, xy[:, 0], xy[:, 1]))) < ON_SURFACE_TOL_M


def test_fold_truth_gradient_matches_central_differences(fold_truth):
    rng = np.random.default_rng(7)
    d = fold_truth["dem"]
    x = rng.uniform(d["x_west"], d["x_west"] + d["cols"] * d["cell_m"], 200)
    y = rng.uniform(d["y_north"] - d["rows"] * d["cell_m"], d["y_north"], 200)
    h = 0.5
    # from memory: central difference (f(x+h) - f(x-h)) / 2h, truncation error O(h^2)
    # (Press et al. 2007, Numerical Recipes, 3rd ed., section 5.7)
    gx_fd = (fold_z(fold_truth, x + h, y) - fold_z(fold_truth, x - h, y)) / (2 * h)
    gy_fd = (fold_z(fold_truth, x, y + h) - fold_z(fold_truth, x, y - h)) / (2 * h)
    gx, gy = fold_gradient(fold_truth, x, y)
    np.testing.assert_allclose(gx, gx_fd, rtol=0, atol=GRADIENT_TOL)
    np.testing.assert_allclose(gy, gy_fd, rtol=0, atol=GRADIENT_TOL)


def test_fold_local_dip_at_hinge_and_limb(fold_truth):
    s = fold_truth["surface"]
    # on an anticlinal hinge line the surface dips along the axis at the plunge
    dd, dip = local_dip(*fold_gradient(fold_truth, s["x0"], s["y0"]))
    assert dip == pytest.approx(s["plunge_deg"], abs=HAND_TOL_DEG)
    assert dd == pytest.approx(s["axis_trend_deg"], abs=HAND_TOL_DEG)
    a = math.radians(s["axis_trend_deg"])
    q = s["wavelength_m"] / 4  # a quarter wavelength across the axis, toward trend + 90
    dd, dip = local_dip(*fold_gradient(fold_truth, s["x0"] + q * math.cos(a), s["y0"] - q * math.sin(a)))
    assert dip == pytest.approx(LIMB_DIP_DEG, abs=HAND_TOL_DEG)
    assert dd == pytest.approx(LIMB_DIP_DIRECTION_DEG, abs=HAND_TOL_DEG)


def test_fold_trace_crosses_the_hinges_several_times(fold_contacts, fold_truth):
    half = fold_truth["surface"]["wavelength_m"] / 2
    anticline = syncline = 0
    for _, g in fold_contacts[3]:
        xy = shapely.get_coordinates(shapely.segmentize(g, 1.0))
        k = np.floor(fold_frame(fold_truth, xy[:, 0], xy[:, 1])[1] / half)
        for i in np.flatnonzero(np.diff(k) != 0):
            # the line t = max(k) * half is an anticlinal hinge if max(k) is even (t = j wavelength)
            if max(k[i], k[i + 1]) % 2 == 0:
                anticline += 1
            else:
                syncline += 1
    assert anticline >= MIN_HINGE_CROSSINGS and syncline >= MIN_HINGE_CROSSINGS


def test_fold_trace_covers_the_sheet(fold_contacts, fold_dem):
    from scipy.spatial import cKDTree

    lines = [g for _, g in fold_contacts[3]]
    hull = shapely.convex_hull(shapely.union_all(lines))
    d = fold_dem
    x0, dx, _, y0, _, dy = d["gt"]
    rows, cols = d["array"].shape
    assert hull.area / (rows * cols * dx * -dy) > MIN_HULL_FRACTION
    xs, ys = np.meshgrid(x0 + dx * (np.arange(cols) + 0.5), y0 + dy * (np.arange(rows) + 0.5))
    inside = shapely.contains_xy(hull, xs, ys)
    dense = np.concatenate([shapely.get_coordinates(shapely.segmentize(g, 5.0)) for g in lines])
    gap, _ = cKDTree(dense).query(np.column_stack([xs[inside], ys[inside]]))  # Source: scipy.spatial.cKDTree
    assert np.percentile(gap, 95) < MAX_GAP_P95_M


def test_fold_is_recoverable_by_a_spline_but_not_a_plane(fold_contacts, fold_dem, fold_truth):
    """The data can meet the project's target for the spline: a spline fitted to DEM picks along the trace
    recovers the fold to under 2 m RMS inside the data hull (a small point budget keeps this fast)."""
    from strikeline.geometry.grid import Grid
    from strikeline.picks import picks_from_dem
    from strikeline.surfaces import fit_surface

    z = fold_dem["array"].astype(np.float64)
    grid = Grid(fold_dem["gt"], z.shape, fold_dem["wkt"], fold_dem["nodata"])
    picks = picks_from_dem([g for _, g in fold_contacts[3]], z, grid)
    xs, ys = grid.mesh()
    truth_z = fold_z(fold_truth, xs, ys)
    rms = {}
    for kind in ("spline", "plane"):
        model = fit_surface(picks.xyz, model=kind, max_points=800, cross_validate_model=False)
        inside = model.hull_distance(xs, ys) == 0
        rms[kind] = float(np.sqrt(np.mean((model.evaluate(xs, ys) - truth_z)[inside] ** 2)))
    assert rms["spline"] < SPLINE_RMS_MAX_M
    assert rms["plane"] > PLANE_RMS_MIN_M


def test_fold_contour_levels_and_vertices(fold_dem):
    _, geom_type, fields, records = read_lines(FOLD_DIR / "contours.gpkg", "topo_contours")
    assert ogr.GT_Flatten(geom_type) == ogr.wkbLineString and fields == {"elev_m": "Real"}
    levels = np.array([a["elev_m"] for a, _ in records])
    z = fold_dem["array"]
    expected = set(np.arange(math.ceil(z.min() / 10) * 10, math.floor(z.max() / 10) * 10 + 1, 10.0))
    assert set(levels) == expected
    xy = np.concatenate([shapely.get_coordinates(g) for _, g in records])
    ground = sample_bilinear(fold_dem, xy)
    assert np.all(np.isfinite(ground))
    assert np.max(np.abs(ground - np.repeat(levels, [len(g.coords) for _, g in records]))) < ON_SURFACE_TOL_M


def test_fold_generator_reproduces_shipped_files(tmp_path, fold_dem, fold_contacts, fold_truth):
    subprocess.run([sys.executable, str(GENERATOR), "--only", "fold", "--fold-out", str(tmp_path)],
                   check=True, capture_output=True, timeout=120)
    assert not (tmp_path / "boreholes.gpkg").exists()  # --only fold writes no demo files
    assert json.loads((tmp_path / "truth.json").read_text()) == fold_truth
    again = read_dem(tmp_path)
    np.testing.assert_allclose(again["array"], fold_dem["array"], rtol=0, atol=ROUNDTRIP_TOL_M)
    assert again["gt"] == fold_dem["gt"]
    for name, layer in [("contacts.gpkg", "contacts"), ("contours.gpkg", "topo_contours")]:
        shipped = read_lines(FOLD_DIR / name, layer)
        fresh = read_lines(tmp_path / name, layer)
        assert fresh[2] == shipped[2] and len(fresh[3]) == len(shipped[3])
        for (a1, g1), (a2, g2) in zip(fresh[3], shipped[3]):
            assert a1 == a2
            assert shapely.equals_exact(g1, g2, tolerance=ROUNDTRIP_TOL_M)
