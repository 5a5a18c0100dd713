"""How a CRS is named in messages and summary.json (strikeline.io.crs.crs_label): an authority code
where the CRS as a whole has one, else its own name, "no EPSG code" and its unit - never the code
of the geographic CRS a custom projection is based on."""
from __future__ import annotations

import pyproj
import pytest
from osgeo import osr

from strikeline.io.crs import crs_label


def _wkt(text: str, fmt: str | None = None) -> str:
    s = osr.SpatialReference()
    s.SetFromUserInput(text)
    return s.ExportToWkt([f"FORMAT={fmt}"] if fmt else [])


def _sheet_grid_us_feet() -> str:
    """A local transverse Mercator on WGS 84 in US survey feet, named by its maker, no code."""
    s = osr.SpatialReference()
    s.SetProjCS("Brenlow sheet grid")  # invented name
    s.SetWellKnownGeogCS("WGS84")
    s.SetTM(0.0, 3.0, 1.0, 1000.0, 0.0)
    s.SetLinearUnits("US survey foot", 1200.0 / 3937.0)
    return s.ExportToWkt()


@pytest.mark.parametrize("code", ["EPSG:32631", "EPSG:4326", "EPSG:2193", "EPSG:5972"])
def test_a_crs_with_a_code_is_labelled_by_it(code):
    """Reference: pyproj's identification of the same WKT (CRS.to_authority)."""
    wkt = _wkt(code)
    assert crs_label(wkt) == ":".join(pyproj.CRS(wkt).to_authority()) == code


def test_a_code_lost_in_an_esri_wkt_is_found_again():
    """An ESRI-flavoured WKT carries no authority node; PROJ's database matches it exactly.
    Reference: pyproj (CRS.to_epsg with full confidence)."""
    wkt = _wkt("EPSG:2193", "WKT1_ESRI")
    assert "AUTHORITY" not in wkt
    assert crs_label(wkt) == f"EPSG:{pyproj.CRS(wkt).to_epsg(min_confidence=100)}" == "EPSG:2193"


def test_a_custom_crs_in_us_feet_is_never_labelled_by_its_base_crs():
    """Before: "EPSG:4326" (the code of its geographic base). Reference: osr's and pyproj's name of
    the CRS, pyproj's to_epsg() (None: no code) and the unit name in the EPSG dataset."""
    wkt = _sheet_grid_us_feet()
    assert pyproj.CRS(wkt).to_epsg() is None
    label = crs_label(wkt)
    assert label == f"{pyproj.CRS(wkt).name} (no EPSG code, US survey foot)"
    assert pyproj.CRS(wkt).name == "Brenlow sheet grid" and "EPSG:4326" not in label


def test_an_unnamed_custom_crs_says_its_projection():
    wkt = _wkt("+proj=tmerc +lat_0=31 +lon_0=-101.5 +k=0.9999 +x_0=600000 +y_0=0 +datum=WGS84 +units=us-ft")
    assert pyproj.CRS(wkt).name == "unknown" and pyproj.CRS(wkt).to_epsg() is None
    assert crs_label(wkt) == "unnamed Transverse Mercator CRS (no EPSG code, US survey foot)"


def test_compound_crs_names_both_parts():
    """Reference: pyproj's sub-CRSs of the compound CRS and their codes."""
    wkt = _wkt("EPSG:32631+6360")
    parts = [":".join(c.to_authority()) for c in pyproj.CRS(wkt).sub_crs_list]
    assert crs_label(wkt) == " + ".join(parts) == "EPSG:32631 + EPSG:6360"


def test_a_local_engineering_crs_and_no_crs():
    s = osr.SpatialReference()
    s.SetLocalCS("quarry site grid")  # invented
    assert crs_label(s.ExportToWkt()) == "quarry site grid (no EPSG code, metre)"
    assert crs_label("") == crs_label(None) == "no CRS"


def test_a_geopackage_layer_without_a_crs_is_no_crs(tmp_path):
    """OGR reads a GeoPackage layer written without a CRS back as its placeholder 'Undefined
    geographic SRS' (srs_id 0; OGC GeoPackage 12-128r18, requirement 11): described as no CRS,
    not as a geographic CRS. Reference: the placeholder GDAL itself returns."""
    from osgeo import ogr

    path = str(tmp_path / "no_crs.gpkg")
    ds = ogr.GetDriverByName("GPKG").CreateDataSource(path)
    ds.CreateLayer("lines", None, ogr.wkbLineString)
    ds = None
    ds = ogr.Open(path)
    srs = ds.GetLayer(0).GetSpatialRef()
    wkt = srs.ExportToWkt() if srs is not None else ""
    ds = None
    assert crs_label(wkt) == "no CRS"
