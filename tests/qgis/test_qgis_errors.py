"""Bad input and cancellation through QGIS: the library's own message, and no output left behind.

# Source: strikeline library result as the reference (the library's messages for the same files,
# from strikeline.pipeline.load_inputs / strikeline.io); the numerical truth is tested in tests/.
# Source: EPSG:4326 is WGS 84 geographic (degrees) and EPSG:32631 is WGS 84 / UTM zone 31N, the
# UTM zone of the demo sheet's centre (EPSG Geodetic Parameter Dataset).
"""
from __future__ import annotations


import pytest
from osgeo import gdal, ogr
from qgis.core import (
    QgsCoordinateReferenceSystem,
    QgsFeature,
    QgsGeometry,
    QgsPointXY,
    QgsProcessingException,
    QgsProcessingFeedback,
    QgsVectorLayer,
)
from qgis_helpers import memory_copy, qgis_message

from strikeline.errors import StrikelineError
from strikeline.pipeline import RunOptions, load_inputs

pytestmark = pytest.mark.qgis

TMP = "TEMPORARY_OUTPUT"
GEOGRAPHIC = "EPSG:4326"  # Source: EPSG dataset, WGS 84 geographic 2D
SHEET_UTM = "EPSG:32631"  # Source: EPSG dataset, WGS 84 / UTM zone 31N (the demo sheet's CRS)
#: The required outputs of the whole chain, as temporary layers.
OUTPUTS = {"picks": TMP, "structure_contours": TMP, "surface": TMP, "dip": TMP, "dip_direction": TMP}


def library_message(**opts) -> str:
    with pytest.raises(StrikelineError) as exc:
        load_inputs(RunOptions(out="/nonexistent-out", **opts))
    return str(exc.value)




@pytest.fixture(scope="module")
def geographic_contacts(tmp_path_factory, sheet):
    import processing

    out = tmp_path_factory.mktemp("geo") / "contacts_wgs84.gpkg"
    processing.run("native:reprojectlayer", {
        "INPUT": sheet["contacts_uri"],
        "TARGET_CRS": QgsCoordinateReferenceSystem(GEOGRAPHIC), "OUTPUT": str(out)})
    return str(out)


# -------------------------------------------------------------------------------- bad inputs
def test_geographic_contacts_file(run, sheet, geographic_contacts):
    want = library_message(contacts=geographic_contacts, dem=sheet["dem"])
    got = qgis_message(run, "contactpicks", {"CONTACTS": geographic_contacts, "DEM": sheet["dem"], "picks": TMP})
    assert got == want
    assert f"geographic CRS {GEOGRAPHIC}" in got and SHEET_UTM in got


def test_geographic_contacts_memory_layer(run, sheet, geographic_contacts):
    mem = memory_copy(geographic_contacts, "contacts_wgs84")
    got = qgis_message(run, "modelcontact", {"CONTACTS": mem, "DEM": sheet["dem"], "picks": TMP,
                                             "structure_contours": TMP, "surface": TMP, "dip": TMP,
                                             "dip_direction": TMP})
    want = library_message(contacts=geographic_contacts, dem=sheet["dem"])
    # Same words after the layer's name ("... of 'memory'" instead of the file path).
    assert got.split(" is in ", 1)[1] == want.split(" is in ", 1)[1]


def test_geographic_dem(run, sheet, tmp_path):
    dem_geo = str(tmp_path / "dem_wgs84.tif")
    gdal.Warp(dem_geo, sheet["dem"], dstSRS=GEOGRAPHIC)
    want = library_message(contacts=sheet["contacts"], dem=dem_geo)
    got = qgis_message(run, "contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": dem_geo, "picks": TMP})
    assert got == want and "(degrees)" in got


def test_empty_layer_file(run, sheet, tmp_path):
    path = str(tmp_path / "empty.gpkg")
    ds = ogr.GetDriverByName("GPKG").CreateDataSource(path)
    srs = ogr.osr.SpatialReference()
    srs.ImportFromEPSG(32631)
    ds.CreateLayer("contacts", srs, ogr.wkbLineString)
    ds = None
    want = library_message(contacts=path, dem=sheet["dem"])
    got = qgis_message(run, "contactpicks", {"CONTACTS": f"{path}|layername=contacts", "DEM": sheet["dem"],
                                             "picks": TMP})
    assert got == want and "holds no feature" in got


def test_empty_memory_layer(run, sheet):
    mem = QgsVectorLayer(f"LineString?crs={SHEET_UTM}", "nothing_mapped", "memory")
    got = qgis_message(run, "contactpicks", {"CONTACTS": mem, "DEM": sheet["dem"], "picks": TMP})
    assert got == ("contacts layer 'nothing_mapped' of 'memory' holds no feature with a geometry; "
                   "give a layer with features")


def test_text_elevation_field(run, sheet, tmp_path):
    import processing

    path = str(tmp_path / "contours_text.gpkg")
    processing.run("native:fieldcalculator", {
        "INPUT": sheet["contours_uri"], "FIELD_NAME": "elev_txt", "FIELD_TYPE": 2, "FIELD_LENGTH": 10,
        "FORMULA": 'to_string("elev_m")', "OUTPUT": path})
    want = library_message(contacts=sheet["contacts"], contours=path, elev_field="elev_txt")
    got = qgis_message(run, "contactpicks", {"CONTACTS": sheet["contacts_uri"], "CONTOURS": path,
                                             "ELEV_FIELD": "elev_txt", "picks": TMP})
    # The fix names QGIS's parameter instead of the command line's option.
    assert got == want.replace("--elev-field", "the 'Elevation field of the contour lines'")
    assert "is of type String, not numeric" in got


def test_messages_name_the_qgis_parameters(run, sheet):
    """The library's checks of boreholes and contours (pipeline.assemble_inputs) speak of the
    tool's parameters instead of the command line's options."""
    holes = f"{sheet['dir'] / 'boreholes.gpkg'}"
    want = library_message(contacts=sheet["contacts"], dem=sheet["dem"], boreholes=holes,
                           borehole_collar_field="collar_m")
    got = qgis_message(run, "modelcontact", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"],
                                             "BOREHOLES": f"{holes}|layername=boreholes",
                                             "BOREHOLE_COLLAR_FIELD": "collar_m", **OUTPUTS})
    labels = {"--borehole-collar-field": "the 'Borehole field: collar elevation'",
              "--borehole-depth-field": "the 'Borehole field: depth from collar to the surface'",
              "--borehole-z-field": "the 'Borehole field: the surface's elevation (empty: Z)'"}
    for option, label in labels.items():
        want = want.replace(option, label)
    assert got == want and "give both" in got
    got = qgis_message(run, "contactpicks", {"CONTACTS": sheet["contacts_uri"], "CONTOURS": sheet["contours_uri"],
                                             "picks": TMP})
    want = library_message(contacts=sheet["contacts"], contours=sheet["contours"])
    assert "the elevation field is not named" in got
    assert got == want.replace("--elev-field", "the 'Elevation field of the contour lines'")


def test_no_topography(run, sheet):
    got = qgis_message(run, "contactpicks", {"CONTACTS": sheet["contacts_uri"], "picks": TMP})
    assert got.startswith("no topography given")


def test_too_few_picks(run):
    mem = QgsVectorLayer(f"PointZ?crs={SHEET_UTM}", "two_points", "memory")
    feats = []
    for x, y, z in ((0.0, 0.0, 10.0), (100.0, 0.0, 20.0)):
        f = QgsFeature()
        f.setGeometry(QgsGeometry.fromWkt(f"PointZ ({x} {y} {z})"))
        feats.append(f)
    mem.dataProvider().addFeatures(feats)
    # As `strikeline attitude`: an undetermined plane is reported (no attitude), with the reason.
    fb = QgsProcessingFeedback()
    warnings = []
    fb.pushWarning = warnings.append
    res = run("planeattitude", {"PICKS": mem, "plane_attitudes": TMP}, feedback=fb)
    assert res["quality"] == "undetermined" and res["dip_deg"] is None
    assert any("only 2 pick(s)" in w and "at least three" in w for w in warnings)


def test_points_without_z(run):
    mem = QgsVectorLayer(f"Point?crs={SHEET_UTM}", "flat_points", "memory")
    f = QgsFeature()
    f.setGeometry(QgsGeometry.fromPointXY(QgsPointXY(1.0, 2.0)))
    mem.dataProvider().addFeatures([f])
    got = qgis_message(run, "planeattitude", {"PICKS": mem, "plane_attitudes": TMP})
    assert "points without Z" in got


def test_surface_off_the_dem_grid(run, sheet, tmp_path):
    picks = run("contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "picks": TMP})["picks"]
    surf = run("surfacemodel", {"PICKS": picks, "CELL": 25.0, "surface": str(tmp_path / "s.tif")})["surface"]
    got = qgis_message(run, "depthtrace", {"SURFACE": surf, "DEM": sheet["dem"], "depth": TMP,
                                           "predicted_trace": TMP})
    assert "are not on one grid" in got


# ------------------------------------------------------------------------------ cancellation
def cancelling_feedback(at_percent: float) -> QgsProcessingFeedback:
    """A feedback that the user cancels as soon as progress reaches ``at_percent``."""
    fb = QgsProcessingFeedback()
    fb.progressChanged.connect(lambda p: fb.cancel() if p >= at_percent else None)
    return fb


@pytest.mark.parametrize("at", [6.0, 40.0, 81.0])
def test_cancelled_whole_chain_leaves_no_output(run, sheet, tmp_path, at):
    outs = {k: str(tmp_path / f"{k.lower()}.tif") for k in ("surface", "dip", "dip_direction", "depth", "uncertainty")}
    outs.update({k: str(tmp_path / f"{k.lower()}.gpkg")
                 for k in ("picks", "structure_contours", "predicted_trace", "contact_misfit", "attitudes")})
    fb = cancelling_feedback(at)
    with pytest.raises(QgsProcessingException, match="cancelled"):
        run("modelcontact", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"],
                             "CONTOURS": sheet["contours_uri"], "ELEV_FIELD": "elev_m", "MODEL": 1,
                             "RESAMPLES": 100, "summary": str(tmp_path / "summary.json"), **outs}, feedback=fb)
    assert fb.isCanceled()  # (how fast it stops is a benchmark matter, not a test's: no wall clock here)
    assert sorted(p.name for p in tmp_path.iterdir()) == []


@pytest.mark.parametrize("tool,params", [
    ("contactpicks", {"picks": "picks.gpkg"}),
    ("dipgrids", {"dip": "dip.tif", "dip_direction": "dd.tif"}),
])
def test_cancelled_step_leaves_no_output(run, sheet, tmp_path, tool, params):
    inputs = {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"]} if tool == "contactpicks" \
        else {"SURFACE": sheet["dem"]}
    outs = {k: str(tmp_path / v) for k, v in params.items()}
    with pytest.raises(QgsProcessingException, match="cancelled"):
        run(tool, {**inputs, **outs}, feedback=cancelling_feedback(15.0))
    assert list(tmp_path.iterdir()) == []


def test_too_many_resamples_for_the_plane_tool_are_refused_before_any_draw(run, sheet, tmp_path):
    """As ``strikeline attitude --resamples`` (strikeline.pipeline.workload.check_resamples, the
    reference): 10^9 resamples of a few hundred picks exceed the work and memory limits; the tool
    refuses them in one line naming its parameter, and writes nothing."""
    from strikeline.pipeline.workload import check_resamples

    picks = run("contactpicks", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "picks": TMP})["picks"]
    from qgis.core import QgsApplication

    alg = QgsApplication.processingRegistry().algorithmById("strikeline:planeattitude")
    label = alg.parameterDefinition("RESAMPLES").description()
    n_picks = QgsVectorLayer(picks, "p", "ogr").featureCount() if isinstance(picks, str) else picks.featureCount()
    with pytest.raises(StrikelineError) as lib:
        check_resamples(10**9, n_picks, names={"resamples": f"the '{label}'"})
    out = tmp_path / "planes.gpkg"
    with pytest.raises(QgsProcessingException) as exc:
        run("planeattitude", {"PICKS": picks, "RESAMPLES": 10**9, "plane_attitudes": str(out)})
    assert str(exc.value) == str(lib.value) and "\n" not in str(exc.value)
    assert not out.exists()


def test_the_whole_chains_size_checks_name_its_parameters(run, sheet):
    """The run's size checks (strikeline.pipeline.workload.check_workload, the reference: the same
    refusal the command line gives for --resamples) name the tool's parameter, not the flag."""
    from qgis.core import QgsApplication

    from strikeline.pipeline import RunOptions, compute, load_inputs

    label = QgsApplication.processingRegistry().algorithmById("strikeline:modelcontact") \
        .parameterDefinition("RESAMPLES").description()
    opts = RunOptions(contacts=sheet["contacts"], dem=sheet["dem"], out="/nonexistent-out", resamples=10**9)
    with pytest.raises(StrikelineError) as lib:
        compute(load_inputs(opts), opts)
    assert "--resamples" in str(lib.value)
    with pytest.raises(QgsProcessingException) as exc:
        run("modelcontact", {"CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "RESAMPLES": 10**9, **OUTPUTS})
    assert str(exc.value) == str(lib.value).replace("--resamples", f"the '{label}'")


def test_a_dem_file_that_is_not_a_raster_gets_the_librarys_line(run, sheet, tmp_path):
    # A text file named .tif exists, so QGIS's own "... not found" would mislead: the tool refuses
    # it with the library's line for the same file (the file, GDAL cannot read it, the fix).
    txt = tmp_path / "dem_text.tif"
    txt.write_text("this is not a raster\n")
    want = library_message(contacts=sheet["contacts"], dem=str(txt))
    assert str(txt) in want and "cannot open it as a raster" in want and "give a GeoTIFF" in want
    from qgis.core import QgsApplication, QgsProcessingContext, QgsProject

    params = {"CONTACTS": sheet["contacts_uri"], "DEM": str(txt), "picks": TMP}
    with pytest.raises(QgsProcessingException) as exc:
        run("contactpicks", params)
    lines = str(exc.value).splitlines()
    # processing.run puts QGIS's own heading line before a refused parameter; the dialog shows ours alone
    assert lines[-1] == want and "not found" not in str(exc.value), lines
    alg = QgsApplication.processingRegistry().createAlgorithmById("strikeline:contactpicks")
    context = QgsProcessingContext()
    context.setProject(QgsProject.instance())
    assert alg.checkParameterValues(params, context) == (False, want)
