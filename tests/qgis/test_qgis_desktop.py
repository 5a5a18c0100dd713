"""What the desktop shows: the toolbox's order and search, help, the log, failures as one line,
the whole chain's contours split at the ground, thickness by default, CRS from an authority id.

# Source: QGIS 3.22's own Processing toolbox model (qgis.gui.QgsProcessingToolboxProxyModel):
#   its group order and its search filter are the reference for the toolbox checks.
# Source: EPSG Geodetic Parameter Dataset - EPSG:32631 is WGS 84 / UTM zone 31N, the demo
#   sheet's CRS; GDAL's OSR (AutoIdentifyEPSG) names the CRS of a WKT.
# Source: IEEE 754 - NaN and infinity are not finite numbers (numpy.isfinite).
# Source: test_data/demo/truth.json - the invented planes the demo sheet was built from.
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
import shapely
from osgeo import osr
from qgis.core import (
    QgsApplication,
    QgsCoordinateReferenceSystem,
    QgsFeature,
    QgsGeometry,
    QgsLineString,
    QgsPoint,
    QgsProcessingException,
    QgsProcessingFeedback,
    QgsVectorLayer,
)
from qgis.gui import QgsProcessingToolboxModel, QgsProcessingToolboxProxyModel
from qgis.PyQt.QtCore import QModelIndex
from qgis_helpers import bilinear_reference, table

from adapter_qgis import base, layers
from strikeline import CAUTION

pytestmark = pytest.mark.qgis

TMP = "TEMPORARY_OUTPUT"
QUICK_TOOL = {"MODEL": 1, "RESAMPLES": 100}  # plane, 100 resamples: the chain quick in tests
SHEET_EPSG = 32631  # Source: EPSG dataset, WGS 84 / UTM zone 31N (the demo sheet's CRS)
TOOLS = {"modelcontact", "contactpicks", "planeattitude", "localattitudes", "surfacemodel", "structurecontours",
         "dipgrids", "depthtrace", "unitthickness", "isopachs"}
FORECAST_TOOLS = {"modelcontact", "surfacemodel", "structurecontours", "depthtrace", "isopachs"}


def toolbox(filter_text: str = "") -> list[tuple[int, str, str | None]]:
    """QGIS's toolbox tree under the strikeline provider: (depth, label, algorithm id), in order."""
    model = QgsProcessingToolboxProxyModel(None, QgsApplication.processingRegistry())
    model.setFilterString(filter_text)
    rows = []

    def walk(parent, depth):
        for r in range(model.rowCount(parent)):
            idx = model.index(r, 0, parent)
            rows.append((depth, model.data(idx), model.data(idx, QgsProcessingToolboxModel.RoleAlgorithmId)))
            walk(idx, depth + 1)

    walk(QModelIndex(), 0)
    start = next((i for i, (d, label, _) in enumerate(rows) if d == 0 and label == "strikeline"), None)
    if start is None:
        return []
    end = next((i for i in range(start + 1, len(rows)) if rows[i][0] == 0), len(rows))
    return rows[start + 1:end]


# --------------------------------------------------------------------------------- toolbox
def test_toolbox_shows_groups_in_the_order_of_the_work():
    tree = toolbox()
    groups = [label for depth, label, _ in tree if depth == 1]
    assert groups == [base.GROUPS[g] for g in ("chain", "picks", "surfaces", "maps", "thickness")]
    first_tool = next(alg for depth, _, alg in tree if depth == 2)
    assert first_tool == "strikeline:modelcontact"  # the whole chain first ...
    assert [label for _, label, _ in tree[:3]] == [base.GROUPS["chain"], "Model a contact (whole chain)",
                                                   base.GROUPS["picks"]]  # ... then the picks group


@pytest.mark.parametrize("word", ["geology", "outcrop", "borehole"])
def test_toolbox_search_finds_every_tool(word):
    found = {alg.split(":", 1)[1] for depth, _, alg in toolbox(word) if alg}
    assert found == TOOLS


def test_toolbox_search_can_find_nothing():
    assert toolbox("xqzvw-not-a-word") == []  # the filter the checks above rely on does filter


def test_help_url_caution_first_and_metadata_links():
    registry = QgsApplication.processingRegistry()
    for name in TOOLS:
        alg = registry.algorithmById(f"strikeline:{name}")
        text = alg.shortHelpString()
        if name in FORECAST_TOOLS:
            assert text.startswith(f"<p><b>{CAUTION}</b></p>"), name
        else:
            assert CAUTION not in text, name
        assert alg.helpUrl() == base.HELP_URL and alg.helpUrl().startswith(base.METADATA["homepage"])
        assert alg.shortDescription() and "\n" not in alg.shortDescription()
    for key in ("homepage", "repository", "tracker"):
        assert base.METADATA[key].startswith("https://"), key
    assert {"geology", "outcrop", "borehole"} <= set(base.TAGS)


# ----------------------------------------------------------------------------------- CRS
class _CrsLosingWkt:
    """A CRS as the quirk leaves it: valid, its authority id kept, its WKT gone."""

    def __init__(self, authid):
        self._authid = authid

    def isValid(self):  # noqa: N802
        return True

    def toWkt(self, *args):  # noqa: N802
        return ""

    def authid(self):
        return self._authid


def _epsg_of(wkt: str) -> int | None:
    srs = osr.SpatialReference()
    srs.ImportFromWkt(wkt)
    srs.AutoIdentifyEPSG()
    return int(srs.GetAuthorityCode(None)) if srs.GetAuthorityCode(None) else None


def test_a_crs_without_wkt_falls_back_to_its_authority_id():
    wkt = layers.crs_wkt(_CrsLosingWkt(f"EPSG:{SHEET_EPSG}"))
    assert _epsg_of(wkt) == SHEET_EPSG  # Source: GDAL's OSR identifies the WKT as EPSG:32631
    assert layers.crs_wkt(_CrsLosingWkt("")) == ""  # nothing to fall back to: no CRS
    assert layers.crs_wkt(QgsCoordinateReferenceSystem()) == ""


def test_a_layer_whose_crs_lost_its_wkt_is_read_in_its_crs(sheet):
    from adapter_qgis.layers import LayerName, read_vector

    lyr = QgsVectorLayer(sheet["contacts_uri"], "contacts", "ogr")
    assert lyr.isValid()

    class Source:  # the layer as a feature source whose CRS has lost its WKT
        def fields(self):
            return lyr.fields()

        def getFeatures(self):  # noqa: N802
            return lyr.getFeatures()

        def sourceCrs(self):  # noqa: N802
            return _CrsLosingWkt(lyr.crs().authid())

    got = read_vector(Source(), LayerName("contacts", "contacts", sheet["contacts"]), geometry="line")
    assert _epsg_of(got.crs_wkt) == SHEET_EPSG


# ------------------------------------------------------------------------------ NaN vertices
@pytest.mark.parametrize("wkt", [
    "LINESTRING (0 0, 1 1, 2 2)", "LINESTRING Z (0 0 5, 1 1 nan, 2 2 7)", "MULTILINESTRING ((0 0, 1 1), (2 2, 3 nan))",
    "POLYGON ((0 0, 4 0, 4 4, 0 0), (1 1, 2 1, nan 2, 1 1))", "POINT (3 inf)", "MULTIPOINT Z ((0 0 0), (1 1 1))",
    "LINESTRING (0 0, nan 1, 2 2)", "GEOMETRYCOLLECTION (POINT (0 0), LINESTRING (0 0, 1 -inf))",
])
def test_finite_check_agrees_with_numpy(wkt):
    g = shapely.from_wkt(wkt)
    # Reference: numpy's isfinite on shapely's x and y (a NaN Z alone is not a bad position).
    want = bool(np.isfinite(shapely.get_coordinates(g)).all())
    for byte_order in (0, 1):
        for flavor in ("iso", "extended"):  # ISO (+1000 for Z) and 2.5D/EWKB (high-bit flags) types
            wkb = shapely.to_wkb(g, byte_order=byte_order, flavor=flavor)
            assert layers._finite_xy(wkb) is want, (byte_order, flavor)
        with_srid = shapely.to_wkb(shapely.set_srid(g, SHEET_EPSG), byte_order=byte_order, include_srid=True)
        assert layers._finite_xy(with_srid) is want, (byte_order, "srid")


def _contacts_with_a_nan_vertex(sheet):
    src = QgsVectorLayer(sheet["contacts_uri"], "contacts", "ogr")
    mem = QgsVectorLayer(f"LineString?crs={src.crs().authid()}", "contacts_nan", "memory")
    feats = []
    for f in src.getFeatures():
        g = QgsFeature()
        g.setGeometry(f.geometry())
        feats.append(g)
    line = QgsLineString([QgsPoint(488000.0, 5215000.0), QgsPoint(math.nan, 5215100.0), QgsPoint(488200.0, 5215200.0)])
    bad = QgsFeature()
    bad.setGeometry(QgsGeometry(line))
    feats.append(bad)
    ok, added = mem.dataProvider().addFeatures(feats)
    assert ok
    return mem, added[-1].id()


@pytest.mark.parametrize("tool", ["contactpicks", "modelcontact"])
def test_a_nan_vertex_is_one_clear_error(run, sheet, tool):
    mem, bad_fid = _contacts_with_a_nan_vertex(sheet)
    outputs = {"picks": TMP} if tool == "contactpicks" else {
        "picks": TMP, "structure_contours": TMP, "surface": TMP, "dip": TMP, "dip_direction": TMP, **QUICK_TOOL}
    with pytest.raises(QgsProcessingException) as exc:
        run(tool, {"CONTACTS": mem, "DEM": sheet["dem"], **outputs})
    msg = str(exc.value)
    assert "\n" not in msg and "Traceback" not in msg
    assert f"fid {bad_fid}" in msg and "not a finite number" in msg


# ------------------------------------------------------------------------------- failures
def test_an_unexpected_failure_is_one_line(run, sheet, monkeypatch):
    from adapter_qgis.tools.contact_picks import ContactPicks

    def broken(self, parameters, context, steps):
        return {}["no such key"]  # any failure that is not the library's own

    monkeypatch.setattr(ContactPicks, "process", broken)
    with pytest.raises(QgsProcessingException) as exc:
        run("contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "picks": TMP})
    msg = str(exc.value)
    assert "\n" not in msg and "Traceback" not in msg
    assert msg.startswith("Contact elevation picks: internal failure (KeyError: 'no such key')")


# ---------------------------------------------------------------------------- whole chain
@pytest.fixture(scope="module")
def chain_run(sheet):
    """The whole chain with top contacts, every output as the dialog offers it by default."""
    import processing
    from qgis.core import QgsProcessingContext, QgsProject

    alg = QgsApplication.processingRegistry().algorithmById("strikeline:modelcontact")
    defaults = {d.name(): TMP for d in alg.destinationParameterDefinitions()
                if d.createByDefault() and d.name() != "summary"}
    lines = []
    fb = QgsProcessingFeedback()
    fb.pushInfo = lines.append
    context = QgsProcessingContext()
    context.setProject(QgsProject.instance())
    d = sheet["dir"]
    res = processing.run("strikeline:modelcontact", {
        "CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "INTERVAL": 50.0, **QUICK_TOOL,
        "TOP_CONTACTS": f"{d / 'top_contacts.gpkg'}|layername=top_contacts", **defaults}, feedback=fb, context=context)
    return res, lines, defaults


def test_top_contacts_give_thickness_by_default(chain_run, sheet):
    res, _, defaults = chain_run
    assert {"vertical_thickness", "true_thickness", "top_picks"} <= set(defaults)
    from qgis_helpers import raster

    tth, _, _ = raster(res["true_thickness"])
    # Source: truth.json - the demo's top lies 73.6 m (true thickness) above its base.
    assert np.nanmedian(tth) == pytest.approx(sheet["truth"]["true_thickness_m"], abs=1.0)


def test_whole_chain_contours_are_split_at_the_ground(chain_run, sheet):
    res, _, _ = chain_run
    geoms, cols = table(res["structure_contours"], z=False)
    below = cols["below_ground"].astype(bool)
    assert below.any() and (~below).any()
    assert "extrapolated" in cols
    # External: ground elevation by scipy's linear interpolation of the DEM (scipy 1.10
    # RegularGridInterpolator) minus the contour's own elevation, at every inner vertex: never
    # below zero on the parts below ground, never above zero on the parts above (eroded).
    ground = bilinear_reference(sheet["dem"])
    for g, b, z in zip(geoms, below, cols["elevation_m"]):
        xy = shapely.get_coordinates(g)[1:-1]  # the end points are where the flag changes
        depth = ground(xy[:, 0], xy[:, 1]) - z
        depth = depth[np.isfinite(depth)]
        assert (depth >= -0.5).all() if b else (depth <= 0.5).all()


def test_whole_chain_log_is_plain_lines(chain_run, sheet):
    res, lines, _ = chain_run
    text = "\n".join(lines)
    # the report page's sentences (strikeline.report.sentences), the caution before them
    heads = ("The contact dips ", "picks were taken along the mapped contacts", "The surface is modelled as ",
             "contact segments of", "The unit's true thickness averages ")
    for head in heads:
        assert any(head in line for line in lines), (head, text)
    ours = [ln for ln in lines if any(h in ln for h in heads)]
    assert not any("{" in ln or "}" in ln for ln in ours), ours
    plane = next(ln for ln in lines if ln.startswith("The contact dips "))
    assert lines[lines.index(plane) - 1] == CAUTION
    # Source: truth.json - the demo plane's dip.
    assert float(plane.split()[3].rstrip("°")) == pytest.approx(sheet["truth"]["dip_deg"], abs=0.5)
    assert lines[0] == CAUTION  # the caution first in the log too
    # the dialog's default report destination (a temporary file) gets the page, named in the log
    assert Path(res["report"]).is_file() and f"report: {res['report']}" in lines
