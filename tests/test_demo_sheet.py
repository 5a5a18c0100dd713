"""Checks of the shipped demo sheet (``test_data/demo/``) against the DEM and the true plane.

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

gdal.UseExceptions()
ogr.UseExceptions()

REPO = Path(__file__).resolve().parents[1]
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
    subprocess.run([sys.executable, str(GENERATOR), "--out", str(tmp_path)], check=True,
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
