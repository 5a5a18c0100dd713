"""Elevations in metres: the DEM's declared unit, --dem-unit / --contour-unit, and the check that
stops contours in feet on a DEM in metres (strikeline.pipeline.elevation_units)."""
from __future__ import annotations

import numpy as np
import pytest
import shapely
from osgeo import gdal, osr

from helpers import DEMO
from strikeline.errors import InputError
from strikeline.io.raster import read_vertical_unit
from strikeline.pipeline import RunOptions, load_inputs
from strikeline.pipeline.elevation_units import (METRES_PER_UNIT, check_elevations_agree, dem_unit,
                                                 elevation_ratio, theil_sen_slope, to_metres, unit_from_text)
from strikeline.pipeline.steps import collect_picks

# Source: NIST Handbook 44 (Appendix C) and NIST SP 811 (2008), Appendix B: the international foot
# is 0.3048 m exactly; the US survey foot is 1200/3937 m (from memory).
INTERNATIONAL_FOOT_M = 0.3048
US_SURVEY_FOOT_M = 1200.0 / 3937.0
#: The demo contours' elevation field (test_data/demo/contours.gpkg, layer topo_contours).
DEMO_ELEV_FIELD = "elev_m"


# --------------------------------------------------------------------------- units and factors
def test_factors_are_the_handbook_values():
    assert METRES_PER_UNIT == {"m": 1.0, "ft": INTERNATIONAL_FOOT_M, "us-ft": US_SURVEY_FOOT_M}
    assert to_metres([1000.0], "ft", what="x")[0] == pytest.approx(304.8, rel=1e-15)
    assert to_metres([3937.0], "us-ft", what="x")[0] == pytest.approx(1200.0, rel=1e-15)


def test_the_us_survey_foot_is_the_epsg_datasets():
    """Source: the EPSG dataset through PROJ's database (EPSG:6360, NAVD88 height (ftUS))."""
    s = osr.SpatialReference()
    s.ImportFromEPSG(6360)
    assert s.GetTargetLinearUnits("VERT_CS") == pytest.approx(METRES_PER_UNIT["us-ft"], rel=1e-12)
    assert unit_from_text(s.GetAttrValue("VERT_CS|UNIT")) == "us-ft"


@pytest.mark.parametrize("text,unit", [("m", "m"), ("metre", "m"), ("Meters", "m"), ("ft", "ft"), ("foot", "ft"),
                                       ("feet", "ft"), ("US survey foot", "us-ft"), ("ftUS", "us-ft"),
                                       ("foot_us", "us-ft"), ("", None), (None, None), ("degrees", None)])
def test_unit_names_as_gdal_writes_them(text, unit):
    assert unit_from_text(text) == unit


def test_dem_unit_rules():
    none = {"band_unit": "", "crs_unit": "", "crs_metres_per_unit": None}
    assert dem_unit(none, None, what="DEM") == "m"
    assert dem_unit({**none, "band_unit": "ft"}, None, what="DEM") == "ft"
    assert dem_unit({**none, "band_unit": "ft"}, "m", what="DEM") == "m"  # the user's word wins
    vert = {"band_unit": "", "crs_unit": "US survey foot", "crs_metres_per_unit": US_SURVEY_FOOT_M}
    assert dem_unit(vert, None, what="DEM") == "us-ft"
    with pytest.raises(InputError, match=r"^DEM 'd.tif': its band unit 'm' .* disagree; say which is right with "
                                         r"--dem-unit m or --dem-unit us-ft$"):
        dem_unit({**vert, "band_unit": "m"}, None, what="DEM 'd.tif'")
    logs = []
    assert dem_unit({**none, "band_unit": "elevation"}, None, what="DEM", log=logs.append) == "m"
    assert logs and logs[0].startswith("warning:") and "--dem-unit" in logs[0]


def test_theil_sen_matches_scipy():
    """Source: scipy.stats.theilslopes (the median of pairwise slopes, Sen 1968)."""
    from scipy.stats import theilslopes

    rng = np.random.default_rng(3)
    x = rng.uniform(100, 900, 200)
    y = 3.28 * x + rng.normal(0, 5, 200)
    y[:20] = rng.uniform(0, 5000, 20)  # gross outliers
    assert theil_sen_slope(x, y) == pytest.approx(theilslopes(y, x)[0], rel=1e-12)


def test_ratio_sees_a_unit_through_an_offset_and_noise():
    rng = np.random.default_rng(5)
    dem = rng.uniform(200, 600, 500)
    feet = (dem + 12.0) / INTERNATIONAL_FOOT_M + rng.normal(0, 2, 500)  # another datum, in feet
    assert elevation_ratio(dem, feet)["relief_ratio"] == pytest.approx(1 / INTERNATIONAL_FOOT_M, rel=0.01)
    assert elevation_ratio(dem, dem + 30.0)["relief_ratio"] == pytest.approx(1.0, rel=1e-9)


# --------------------------------------------------------------------------- the demo sheet in feet
def _contours_in(tmp_path, factor: float, field: str = "elev"):
    """The demo contours with their elevation divided by ``factor`` (metres -> feet), via OGR SQL."""
    out = str(tmp_path / "contours_ft.gpkg")
    gdal.VectorTranslate(out, str(DEMO / "contours.gpkg"), layerName="contours", SQLDialect="SQLITE",
                         SQLStatement=f"SELECT geom, {DEMO_ELEV_FIELD} / {factor!r} AS {field} FROM topo_contours")
    return out


def _dem_in(tmp_path, factor: float, *, unit_type: str = "", srs: str | None = None, name="dem_ft.tif"):
    """The demo DEM with its values divided by ``factor``, written as float64 with a band unit
    type and/or a CRS."""
    src = gdal.Open(str(DEMO / "dem.tif"))
    b = src.GetRasterBand(1)
    a = b.ReadAsArray().astype(np.float64)
    nd = b.GetNoDataValue()
    valid = a != nd if nd is not None else np.isfinite(a)
    out = str(tmp_path / name)
    ds = gdal.GetDriverByName("GTiff").Create(out, src.RasterXSize, src.RasterYSize, 1, gdal.GDT_Float64)
    ds.SetGeoTransform(src.GetGeoTransform())
    if srs:
        s = osr.SpatialReference()
        s.SetFromUserInput(srs)
        ds.SetSpatialRef(s)
    else:
        ds.SetProjection(src.GetProjection())
    ob = ds.GetRasterBand(1)
    ob.SetNoDataValue(-99999.0)
    ob.WriteArray(np.where(valid, a / factor, -99999.0))
    if unit_type:
        ob.SetUnitType(unit_type)
    ds = None
    return out


def _demo_dem_m():
    ds = gdal.Open(str(DEMO / "dem.tif"))  # held while its band is read (GDAL's Python bindings)
    b = ds.GetRasterBand(1)
    a = b.ReadAsArray().astype(np.float64)
    if b.GetNoDataValue() is not None:
        a[a == b.GetNoDataValue()] = np.nan
    b = ds = None
    return a


def test_contours_in_feet_on_a_metre_dem_stop_naming_the_factor(tmp_path, cli):
    """Before: exit 0 with a dip of 84.7 deg and advice about relief. Now: exit 2, one line naming
    the factor 3.2808 (feet per metre, the handbook foot above) and the fix."""
    contours = _contours_in(tmp_path, INTERNATIONAL_FOOT_M)
    r = cli("run", "--contacts", DEMO / "contacts.gpkg", "--dem", DEMO / "dem.tif", "--contours", contours,
            "--elev-field", "elev", "--out", tmp_path / "out")
    assert r.returncode == 2, r.stderr
    err = r.stderr.strip()
    assert "\n" not in err and err.startswith("error: ")
    assert f"{1 / INTERNATIONAL_FOOT_M:.4f}" in err and "feet per metre" in err
    assert "--contour-unit ft" in err and contours in err
    assert not (tmp_path / "out").exists()


def test_contours_in_feet_with_contour_unit_ft_give_the_metre_run(tmp_path):
    """Reference: the same run on the metre contours; the values differ only by the exact foot."""
    contours = _contours_in(tmp_path, INTERNATIONAL_FOOT_M)
    base = dict(contacts=str(DEMO / "contacts.gpkg"), dem=str(DEMO / "dem.tif"), out=str(tmp_path / "o"))
    ref = load_inputs(RunOptions(**base, contours=str(DEMO / "contours.gpkg"), elev_field=DEMO_ELEV_FIELD))
    logs = []
    ft = load_inputs(RunOptions(**base, contours=contours, elev_field="elev", contour_unit="ft"), log=logs.append)
    assert np.allclose(ft.contour_elevations_m, ref.contour_elevations_m, rtol=1e-12, atol=1e-9)
    assert any("international feet" in m and "0.3048" in m for m in logs)
    a, b = collect_picks(ref), collect_picks(ft)
    assert len(a) == len(b) and np.allclose(a.xyz, b.xyz, rtol=0, atol=1e-8)


def test_dem_in_feet_read_as_metres_stops_naming_the_factor(tmp_path):
    dem = _dem_in(tmp_path, INTERNATIONAL_FOOT_M)  # feet, declared nowhere
    opts = RunOptions(contacts=str(DEMO / "contacts.gpkg"), dem=dem, contours=str(DEMO / "contours.gpkg"),
                      elev_field=DEMO_ELEV_FIELD, out=str(tmp_path / "o"))
    with pytest.raises(InputError, match=r"near 0\.3048 \(metres per foot\).*--dem-unit ft"):
        load_inputs(opts)
    fixed = load_inputs(RunOptions(**{**opts.__dict__, "dem_unit": "ft"}))
    assert np.allclose(fixed.dem, _demo_dem_m(), rtol=1e-12, atol=1e-9, equal_nan=True)


@pytest.mark.parametrize("unit_type,srs,factor", [
    ("ft", None, INTERNATIONAL_FOOT_M),  # the band says feet (GDAL SetUnitType)
    ("", "EPSG:32631+6360", US_SURVEY_FOOT_M),  # a compound CRS whose vertical axis is in US survey feet
])
def test_a_dem_that_says_feet_is_converted(tmp_path, unit_type, srs, factor):
    """Reference: the demo DEM in metres, and the exact foot definitions above."""
    dem = _dem_in(tmp_path, factor, unit_type=unit_type, srs=srs)
    declared = read_vertical_unit(dem)
    if unit_type:
        assert declared["band_unit"] == unit_type
    else:
        assert declared["crs_metres_per_unit"] == pytest.approx(US_SURVEY_FOOT_M, rel=1e-12)
    logs = []
    inputs = load_inputs(RunOptions(contacts=str(DEMO / "contacts.gpkg"), dem=dem, out=str(tmp_path / "o")),
                         log=logs.append)
    assert np.allclose(inputs.dem, _demo_dem_m(), rtol=1e-12, atol=1e-9, equal_nan=True)
    assert any("converted to metres" in m for m in logs)
    ref = load_inputs(RunOptions(contacts=str(DEMO / "contacts.gpkg"), dem=str(DEMO / "dem.tif"),
                                 out=str(tmp_path / "o")))
    a, b = collect_picks(ref), collect_picks(inputs)
    assert len(a) == len(b) and np.allclose(a.xyz, b.xyz, rtol=0, atol=1e-6)


def test_agreeing_sources_pass_and_an_offset_is_fine():
    from strikeline.geometry.grid import Grid

    grid = Grid((0.0, 10.0, 0.0, 1000.0, 0.0, -10.0), (100, 100))
    X, Y = grid.mesh()
    dem = 100.0 + 0.3 * X + 0.1 * Y
    levels = np.arange(120.0, 400.0, 20.0)
    lines = []
    for z in levels:  # the exact contour of the plane at z: 0.3 x + 0.1 y = z - 100
        xs = np.linspace(5, 995, 50)
        ys = (z - 100.0 - 0.3 * xs) / 0.1
        keep = (ys > 5) & (ys < 995)
        lines.append(shapely.LineString(np.column_stack([xs[keep], ys[keep]])) if keep.sum() > 1 else None)
    geoms = np.array([g for g in lines if g is not None], dtype=object)
    z = np.array([lv for lv, g in zip(levels, lines) if g is not None])
    cmp = check_elevations_agree(dem, grid, geoms, z + 15.0, dem_what="DEM", contours_what="contours")
    assert cmp["relief_ratio"] == pytest.approx(1.0, rel=1e-6)
    with pytest.raises(InputError, match="3.2808"):
        check_elevations_agree(dem, grid, geoms, z / INTERNATIONAL_FOOT_M, dem_what="DEM", contours_what="contours")
