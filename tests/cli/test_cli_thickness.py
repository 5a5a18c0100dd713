"""``strikeline thickness``: the worked values of the issue through the command line, and isopachs.

The command runs in this process (``helpers.run_cli``: ``strikeline.cli.main.main(argv)`` with
exit status, stdout and stderr captured); the console script as a separate process is tested in
test_console.py.
"""
import re

import numpy as np
import pytest
from osgeo import gdal, osr

# Source: Rowland, Duebendorfer & Schiefelbein (2007), Structural Analysis and Synthesis; Ragan
# (2009), Structural Geology: t = w sin(delta + sigma) (ground slopes against the dip),
# t = w |sin(delta - sigma)| (with the dip), t = w sin(delta) on flat ground, vertical thickness
# t / cos(delta). Worked values of the planning review, recomputed by hand:
#   100 sin 50 = 76.604;  100 sin 10 = 17.365;  100 sin 30 = 50.000;  50 / cos 30 = 57.735
AGAINST_DIP_M = 76.604
WITH_DIP_M = 17.365
FLAT_M = 50.000
VERTICAL_OF_50_AT_30_M = 57.735
# The same width measured on the map: h = 100 cos 20 = 93.969 m (recomputed by hand).
MAP_WIDTH_OF_100_ON_20_DEG_M = 93.96926
# Source: vector geometry, t = L |b . n| (recomputed by hand in tests/test_thickness.py):
BOREHOLE_1_M = 71.985   # L 100, plunge 70, azimuth 045, bed 40 toward 135
BOREHOLE_2_M = 35.355   # L 100, plunge 45, azimuth 200, bed 60 toward 110
# common practice: 250 m of outcrop on flat ground at 26 deg is about 110 m thick (sin 26 = 0.438)
ABOUT_110_M = 110.0
# Source: vector geometry: points 10 m apart on the vertical, bed dipping 60 deg:
# t = 10 cos 60 = 5.000 m (recomputed by hand)
TWO_POINTS_M = 5.000
# Source: analytic geometry: planes 80 m apart along their normal (the isopach case)
ISOPACH_NORMAL_M = 80.0

TOL_M = 5e-4  # the worked values are given to 3 decimals

WORKED = {
    "outcrop against the dip": (["outcrop", "--width-m", 100, "--dip-deg", 30, "--ground-slope-deg", 20,
                                 "--slope-sense", "against-dip"], AGAINST_DIP_M, "sin(dip + slope)"),
    "outcrop with the dip": (["outcrop", "--width-m", 100, "--dip-deg", 30, "--ground-slope-deg", 20,
                              "--slope-sense", "with-dip"], WITH_DIP_M, "|sin(dip - slope)|"),
    "outcrop on flat ground": (["outcrop", "--width-m", 100, "--dip-deg", 30], FLAT_M, "sin(dip)"),
    "outcrop, map width": (["outcrop", "--width-m", MAP_WIDTH_OF_100_ON_20_DEG_M, "--dip-deg", 30,
                            "--ground-slope-deg", 20, "--slope-sense", "against-dip", "--width-kind",
                            "horizontal"], AGAINST_DIP_M, "h / cos(slope)"),
    "two points": (["points", "--top", 0, 0, 0, "--base", 0, 0, -10, "--dip-deg", 60,
                    "--dip-direction-deg", 90], TWO_POINTS_M, "(p_top - p_base) . n"),
    "borehole 1": (["borehole", "--length-m", 100, "--hole-azimuth-deg", 45, "--hole-plunge-deg", 70,
                    "--dip-deg", 40, "--dip-direction-deg", 135], BOREHOLE_1_M, "L * |b . n|"),
    "borehole 2": (["borehole", "--length-m", 100, "--hole-azimuth-deg", 200, "--hole-plunge-deg", 45,
                    "--dip-deg", 60, "--dip-direction-deg", 110], BOREHOLE_2_M, "L * |b . n|"),
}


@pytest.fixture
def run(cli):
    """``strikeline ARGS`` in this process (conftest's ``cli``)."""
    return cli


def _number(pattern, text):
    m = re.search(pattern, text)
    assert m, (pattern, text)
    return float(m.group(1))


def _one_error_line(proc):
    lines = proc.stderr.strip().splitlines()
    assert proc.returncode == 2, (proc.returncode, proc.stderr)
    assert len(lines) == 1 and lines[0].startswith("error: "), proc.stderr
    assert "Traceback" not in proc.stderr
    return lines[0]


@pytest.mark.parametrize("case", list(WORKED))
def test_worked_values_through_the_cli(run, case):
    args, expected, formula = WORKED[case]
    proc = run("thickness", *args)
    assert proc.returncode == 0, proc.stderr
    assert _number(r"true thickness: ([\d.]+) m", proc.stdout) == pytest.approx(expected, abs=TOL_M)
    assert "formula: " in proc.stdout and formula in proc.stdout
    assert "reference: " in proc.stdout and "Ragan" in proc.stdout


def test_a_missing_option_is_one_error_line(run):
    _one_error_line(run("thickness", "outcrop", "--width-m", 100))  # --dip-deg missing


def test_flat_ground_reports_the_vertical_thickness(run):
    proc = run("thickness", "outcrop", "--width-m", 100, "--dip-deg", 30)
    assert _number(r"vertical thickness: ([\d.]+) m", proc.stdout) == pytest.approx(
        VERTICAL_OF_50_AT_30_M, abs=TOL_M)


def test_common_practice_250_m_at_26_degrees_is_about_110_m(run):
    proc = run("thickness", "outcrop", "--width-m", 250, "--dip-deg", 26)
    assert proc.returncode == 0, proc.stderr
    assert abs(_number(r"true thickness: ([\d.]+) m", proc.stdout) - ABOUT_110_M) < 1.0


@pytest.mark.parametrize("args,words", [
    (["--dip-deg", 0], ["--dip-deg 0", "horizontal bed on flat ground", "elevation"]),
    (["--dip-deg", 20, "--ground-slope-deg", 20, "--slope-sense", "with-dip"],
     ["--slope-sense with-dip", "dip slope", "parallel to the bedding"]),
])
def test_outcrop_width_parallel_to_the_bedding_is_refused(run, args, words):
    # Source: Ragan (2009) and Rowland et al. (2007), both from memory: t = w sin(dip)
    # on flat ground and w sin(dip - slope) on ground sloping with the dip are 0 for any width
    # where ground and bedding are parallel, so the width gives no thickness (it printed 0.000 m).
    proc = run("thickness", "outcrop", "--width-m", 100, *args)
    line = _one_error_line(proc)
    assert "cannot give a thickness" in line and proc.stdout == ""
    for w in words:
        assert w in line, (w, line)


def test_outcrop_width_nearly_parallel_to_the_bedding_warns(run):
    # t = 100 sin(20 - 15) = 8.716 m (recomputed by hand), with a warning: a degree of error in
    # dip or slope changes it by cot(5 deg) = 11 percent per degree
    proc = run("thickness", "outcrop", "--width-m", 100, "--dip-deg", 20, "--ground-slope-deg", 15,
               "--slope-sense", "with-dip")
    assert proc.returncode == 0
    assert _number(r"true thickness: ([\d.]+) m", proc.stdout) == pytest.approx(8.716, abs=TOL_M)
    assert "warning:" in proc.stderr and "within 5.0 deg of the bedding" in proc.stderr


def test_swapped_points_warn_but_give_the_thickness(run):
    proc = run("thickness", "points", "--top", 0, 0, -10, "--base", 0, 0, 0, "--dip-deg", 60,
               "--dip-direction-deg", 90)
    assert proc.returncode == 0
    assert _number(r"true thickness: ([\d.]+) m", proc.stdout) == pytest.approx(TWO_POINTS_M, abs=TOL_M)
    assert "warning:" in proc.stderr and "swapped" in proc.stderr


@pytest.mark.parametrize("args,words", [
    (["outcrop", "--width-m", 100, "--dip-deg", 30, "--ground-slope-deg", 20], ["--slope-sense", "against-dip"]),
    (["outcrop", "--width-m", 100, "--dip-deg", 95], ["--dip-deg", "[0, 90]"]),
    (["outcrop", "--width-m", -3, "--dip-deg", 30], ["--width-m"]),
    (["outcrop", "--width-m", 100, "--dip-deg", 30, "--ground-slope-deg", 10, "--slope-sense", "down"],
     ["against-dip", "with-dip"]),
    (["borehole", "--length-m", 100, "--hole-azimuth-deg", 0, "--hole-plunge-deg", -5, "--dip-deg", 30,
      "--dip-direction-deg", 90], ["--hole-plunge-deg"]),
    (["points", "--top", 0, 0, "nan", "--base", 0, 0, 0, "--dip-deg", 30, "--dip-direction-deg", 90], ["--top"]),
    ([], ["choose a case", "--grids"]),
    (["--grids", "a.tif", "b.tif"], ["--out"]),
])
def test_bad_arguments_give_one_line(run, args, words):
    line = _one_error_line(run("thickness", *args))
    for w in words:
        assert w in line, (w, line)


# --------------------------------------------------------------------------- isopach grids
DIP_DEG, DIP_DIRECTION_DEG = 30.0, 120.0


def _write_tif(path, array, *, epsg=32631, x0=480000.0, y0=5200000.0, cell=20.0):
    ds = gdal.GetDriverByName("GTiff").Create(str(path), array.shape[1], array.shape[0], 1, gdal.GDT_Float64)
    ds.SetGeoTransform((x0, cell, 0.0, y0, 0.0, -cell))
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(epsg)
    ds.SetProjection(srs.ExportToWkt())
    band = ds.GetRasterBand(1)
    band.SetNoDataValue(-9999.0)
    band.WriteArray(np.where(np.isfinite(array), array, -9999.0))
    ds = None
    return str(path)


def _planes(shape=(30, 40), cell=20.0):
    """Base and top planes dipping 30 deg toward 120, 80 m apart along their normal."""
    rows, cols = shape
    x = (np.arange(cols) + 0.5) * cell
    y = -(np.arange(rows) + 0.5) * cell
    X, Y = np.meshgrid(x, y)
    t = np.tan(np.radians(DIP_DEG))
    a = -t * np.sin(np.radians(DIP_DIRECTION_DEG))
    b = -t * np.cos(np.radians(DIP_DIRECTION_DEG))
    base = 400.0 + a * X + b * Y
    # z = a x + b y + c: planes |dc| / sqrt(1 + a^2 + b^2) apart (analytic geometry)
    return base + ISOPACH_NORMAL_M * np.sqrt(1 + a * a + b * b), base


@pytest.fixture
def planes(tmp_path):
    top, base = _planes()
    top[0, 0] = np.nan  # one cell without a top: nodata in both outputs
    return _write_tif(tmp_path / "top.tif", top), _write_tif(tmp_path / "base.tif", base)


def _read(path):
    ds = gdal.Open(str(path))
    b = ds.GetRasterBand(1)
    a = b.ReadAsArray().astype(float)
    a[a == b.GetNoDataValue()] = np.nan
    return a, ds.GetGeoTransform(), ds.GetProjection()


@pytest.mark.parametrize("form", ["--grids", "grids"])
def test_isopach_of_parallel_planes_reads_80_m(tmp_path, cli, planes, form):
    top, base = planes
    out = tmp_path / "iso"
    args = (["--grids", top, base] if form == "--grids" else ["grids", "--top", top, "--base", base])
    proc = cli("thickness", *args, "--out", out)
    assert proc.returncode == 0, proc.stderr
    true, gt, wkt = _read(out / "true_thickness.tif")
    vertical, _, _ = _read(out / "vertical_thickness.tif")
    assert np.isnan(true[0, 0]) and np.isnan(vertical[0, 0])
    assert np.nanmax(np.abs(true - ISOPACH_NORMAL_M)) < 1e-3
    assert np.nanmax(np.abs(vertical - ISOPACH_NORMAL_M / np.cos(np.radians(DIP_DEG)))) < 1e-3
    assert gt == gdal.Open(base).GetGeoTransform() and "32631" in wkt
    assert _number(r"true thickness: mean ([\d.]+) m", proc.stdout) == pytest.approx(ISOPACH_NORMAL_M, abs=1e-3)
    assert _number(r"true thickness: .*std ([\d.]+) m", proc.stdout) < 1e-3
    for word in ("p10", "p90", "formula: ", "cos(dip of the base)", "reference: ", "not a substitute"):
        assert word in proc.stdout
    assert sorted(p.name for p in tmp_path.iterdir()) == ["base.tif", "iso", "top.tif"]


def test_true_thickness_agrees_with_gdaldem_slope(tmp_path, run):
    # Source: GDAL's own processing (gdal.DEMProcessing "slope", Horn's method) as the reference
    # for the base's dip: true = vertical * cos(slope). A curved base makes the dip vary.
    top, base = _planes()
    rows, cols = base.shape
    X, Y = np.meshgrid(np.arange(cols) * 20.0, np.arange(rows) * 20.0)
    base = base + 30.0 * np.sin(X / 250.0) * np.cos(Y / 300.0)
    top = base + 60.0
    tp, bp = _write_tif(tmp_path / "t.tif", top), _write_tif(tmp_path / "b.tif", base)
    assert run("thickness", "--grids", tp, bp, "--out", tmp_path / "o").returncode == 0
    slope_path = str(tmp_path / "slope.tif")
    gdal.DEMProcessing(slope_path, bp, "slope", computeEdges=True)
    slope, _, _ = _read(slope_path)
    true, _, _ = _read(tmp_path / "o" / "true_thickness.tif")
    ref = 60.0 * np.cos(np.radians(slope))
    inner = (slice(1, -1), slice(1, -1))  # Horn and central differences differ only in smoothing
    assert np.max(np.abs(true[inner] - ref[inner])) < 0.01  # measured 0.003 m; no cos(dip): 0.45 m


def _bad_grids(tmp_path, planes):
    top, base = planes
    t, b = _planes()
    cases = {
        "different shape": ([top, _write_tif(tmp_path / "small.tif", b[:-2])],
                            ["not on the same grid", "gdalwarp", "30 x 40 vs 28 x 40"]),
        "different origin": ([top, _write_tif(tmp_path / "moved.tif", b, x0=480010.0)],
                             ["not on the same grid", "gdalwarp", "origin"]),
        "different CRS": ([top, _write_tif(tmp_path / "other.tif", b, epsg=32632)],
                          ["not on the same grid", "EPSG:32631 vs EPSG:32632"]),
        "missing file": ([top, str(tmp_path / "nowhere.tif")], ["nowhere.tif", "not found"]),
    }
    return cases


@pytest.mark.parametrize("case", ["different shape", "different origin", "different CRS", "missing file"])
def test_bad_grids_give_one_line_and_write_nothing(tmp_path, run, planes, case):
    (top, base), words = _bad_grids(tmp_path, planes)[case]
    before = sorted(p.name for p in tmp_path.iterdir())
    line = _one_error_line(run("thickness", "--grids", top, base, "--out", tmp_path / "iso"))
    for w in words + ([base] if case == "missing file" else [top, base]):
        assert w in line, (w, line)
    assert sorted(p.name for p in tmp_path.iterdir()) == before


def test_existing_folder_needs_overwrite(tmp_path, run, planes):
    top, base = planes
    out = tmp_path / "iso"
    out.mkdir()
    (out / "keep.txt").write_text("mine")
    line = _one_error_line(run("thickness", "--grids", top, base, "--out", out))
    # a folder of the user's is refused as such at once, not with advice to add --overwrite
    assert "not written by strikeline" in line and "keep.txt" in line and "add --overwrite" not in line
    assert [p.name for p in out.iterdir()] == ["keep.txt"]
    # --overwrite replaces only what strikeline wrote: a folder with a file of the user's is refused
    line = _one_error_line(run("thickness", "--grids", top, base, "--out", out, "--overwrite"))
    assert "keep.txt" in line and "strikeline_manifest.json" in line
    assert [p.name for p in out.iterdir()] == ["keep.txt"]
    (out / "keep.txt").unlink()
    assert run("thickness", "--grids", top, base, "--out", out).returncode == 0  # an empty folder is used
    line = _one_error_line(run("thickness", "--grids", top, base, "--out", out))  # now strikeline's own
    assert "already exists" in line and "add --overwrite" in line
    proc = run("thickness", "--grids", top, base, "--out", out, "--overwrite")
    assert proc.returncode == 0, proc.stderr
    assert sorted(p.name for p in out.iterdir()) == ["strikeline_manifest.json", "true_thickness.tif",
                                                     "vertical_thickness.tif"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["base.tif", "iso", "top.tif"]


def test_crossing_surfaces_warn(tmp_path, run, planes):
    top, base = planes
    proc = run("thickness", "--grids", base, top, "--out", tmp_path / "iso")  # swapped
    assert proc.returncode == 0
    assert "warning:" in proc.stderr and "top lies below the base" in proc.stderr
    assert _number(r"true thickness: mean (-[\d.]+) m", proc.stdout) == pytest.approx(-ISOPACH_NORMAL_M, abs=1e-3)


@pytest.mark.parametrize("args", [["--help"], ["thickness", "--help"], ["thickness", "outcrop", "--help"],
                                  ["thickness", "points", "--help"], ["thickness", "borehole", "--help"],
                                  ["thickness", "grids", "--help"]])
def test_help_is_printed(run, args):
    proc = run(*args)
    assert proc.returncode == 0 and "thickness" in proc.stdout and "not a substitute" in proc.stdout
