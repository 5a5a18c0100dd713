"""A graphical-modeler model chaining picks -> surface -> structure contours gives `strikeline run`'s contours.

# Source: strikeline library result as the reference (`strikeline run`, the library's own command
# line, on the same files); the numerical truth is tested in tests/. External check: every vertex
# lies on the total-least-squares plane of the picks computed with numpy.linalg.svd (LAPACK).
"""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import shapely
from osgeo import ogr
from qgis.core import (
    QgsProcessing,
    QgsProcessingModelAlgorithm,
    QgsProcessingModelChildAlgorithm,
    QgsProcessingModelChildParameterSource,
    QgsProcessingModelOutput,
    QgsProcessingModelParameter,
    QgsProcessingParameterFeatureSource,
    QgsProcessingParameterField,
    QgsProcessingParameterRasterLayer,
)
from qgis_helpers import model_index, table

pytestmark = pytest.mark.qgis

INTERVAL_M = 50.0
#: The model's surface passes through a float32 GeoTIFF, the command line's stays float64:
#: contour positions differ by the float32 rounding of ~600 m over the slope (tan 18.7° ~ 0.34).
FLOAT32_CONTOUR_TOL_M = 1e-3  # common practice: float32 keeps ~7 significant digits


def _param(source):
    return [source]


def build_model() -> QgsProcessingModelAlgorithm:
    S = QgsProcessingModelChildParameterSource
    m = QgsProcessingModelAlgorithm("contact to structure contours", "strikeline tests")
    for p in (QgsProcessingParameterFeatureSource("contacts", "Contacts", [QgsProcessing.TypeVectorLine]),
              QgsProcessingParameterRasterLayer("dem", "DEM"),
              QgsProcessingParameterFeatureSource("contours", "Contours", [QgsProcessing.TypeVectorLine]),
              QgsProcessingParameterField("elev", "Elevation field", parentLayerParameterName="contours")):
        m.addModelParameter(p, QgsProcessingModelParameter(p.name()))

    picks = QgsProcessingModelChildAlgorithm("strikeline:contactpicks")
    picks.setChildId("picks")
    for name, src in (("CONTACTS", "contacts"), ("DEM", "dem"), ("CONTOURS", "contours"), ("ELEV_FIELD", "elev")):
        picks.addParameterSources(name, _param(S.fromModelParameter(src)))
    m.addChildAlgorithm(picks)

    surface = QgsProcessingModelChildAlgorithm("strikeline:surfacemodel")
    surface.setChildId("surface")
    surface.addParameterSources("PICKS", _param(S.fromChildOutput("picks", "picks")))
    surface.addParameterSources("REFERENCE", _param(S.fromModelParameter("dem")))
    surface.addParameterSources("MODEL", _param(S.fromStaticValue(model_index("plane"))))
    m.addChildAlgorithm(surface)

    contours = QgsProcessingModelChildAlgorithm("strikeline:structurecontours")
    contours.setChildId("contours")
    contours.addParameterSources("SURFACE", _param(S.fromChildOutput("surface", "surface")))
    contours.addParameterSources("INTERVAL", _param(S.fromStaticValue(INTERVAL_M)))
    out = QgsProcessingModelOutput("structure_contours", "Structure contours")
    out.setChildId("contours")
    out.setChildOutputName("structure_contours")
    contours.setModelOutputs({"structure_contours": out})
    m.addChildAlgorithm(contours)
    m.updateDestinationParameters()
    return m


def test_model_gives_the_contours_of_strikeline_run(sheet, tmp_path):
    import processing

    model = build_model()
    ok, msg = model.validate()
    assert ok, msg
    out_name = next(p.name() for p in model.destinationParameterDefinitions())
    res = processing.run(model, {"contacts": sheet["contacts_uri"], "dem": sheet["dem"],
                                 "contours": sheet["contours_uri"], "elev": sheet["elev_field"],
                                 out_name: str(tmp_path / "model_contours.gpkg")})
    got_geoms, got_cols = table(res[out_name], z=False)

    cli = Path(sys.executable).with_name("strikeline")
    done = subprocess.run([str(cli), "run", "--contacts", sheet["contacts"], "--dem", sheet["dem"],
                           "--contours", sheet["contours"], "--elev-field", sheet["elev_field"],
                           "--interval", str(INTERVAL_M), "--model", "plane", "--resamples", "100",
                           "--out", str(tmp_path / "cli")],
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    ds = ogr.Open(str(tmp_path / "cli" / "results.gpkg"))
    lyr = ds.GetLayerByName("structure_contours")
    wkbs, levels = [], []
    for f in lyr:
        wkbs.append(bytes(f.GetGeometryRef().ExportToIsoWkb()))
        levels.append(f.GetField("elevation_m"))
    ds = None
    ref_geoms = shapely.force_2d(shapely.from_wkb(wkbs))
    ref_z = np.asarray(levels, dtype=float)

    # `strikeline run` cuts its lines where they leave the reach of the data; the model's
    # structure contours are whole lines: per level, the same line work.
    levels = np.unique(ref_z)
    np.testing.assert_array_equal(np.unique(got_cols["elevation_m"]), levels)
    for z in levels:
        got = shapely.line_merge(shapely.union_all(got_geoms[got_cols["elevation_m"] == z]))
        ref = shapely.line_merge(shapely.union_all(ref_geoms[ref_z == z]))
        assert shapely.hausdorff_distance(got, ref) <= FLOAT32_CONTOUR_TOL_M, z
        assert abs(got.length - ref.length) <= FLOAT32_CONTOUR_TOL_M * 10, z

    # External: the vertices lie on the TLS plane of the picks (numpy SVD of the centred picks).
    picks = processing.run("strikeline:contactpicks", {
        "CONTACTS": sheet["contacts_uri"], "DEM": sheet["dem"], "CONTOURS": sheet["contours_uri"],
        "ELEV_FIELD": sheet["elev_field"], "picks": "TEMPORARY_OUTPUT"})["picks"]
    pg, _ = table(picks)
    p = shapely.get_coordinates(pg, include_z=True)
    c = p.mean(axis=0)
    n = np.linalg.svd(p - c)[2][-1]
    for g, z in zip(got_geoms, got_cols["elevation_m"]):
        xy = shapely.get_coordinates(g)
        plane_z = c[2] - (n[0] * (xy[:, 0] - c[0]) + n[1] * (xy[:, 1] - c[1])) / n[2]
        np.testing.assert_allclose(plane_z, z, atol=FLOAT32_CONTOUR_TOL_M)
