"""Helpers shared by the tests: paths of the bundled sheets, writers of derived test inputs, the
fold sheet's unit polygons, and ``run_cli``, which runs the ``strikeline`` command in this process.

Test inputs only: the writers use OGR directly so that a bug in ``strikeline.io`` cannot hide
behind the inputs it is tested on.
"""
from __future__ import annotations

import contextlib
import gc
import hashlib
import io
import json
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "test_data" / "demo"
FOLD = REPO / "test_data" / "fold"


# --------------------------------------------------------------------------- the command line
@dataclass(frozen=True)
class CliRun:
    """What a user sees of one ``strikeline`` command: exit status and the two streams."""

    args: tuple
    returncode: int
    stdout: str
    stderr: str


#: Signals whose handlers a command must leave as it found them.
_SIGNALS = tuple(getattr(signal, n) for n in ("SIGINT", "SIGTERM", "SIGPIPE", "SIGHUP") if hasattr(signal, n))
#: Python's default warning filters in a fresh interpreter (Python docs, "Default Warning
#: Filter"): what a user of the console script would see printed on stderr.
_FRESH_PROCESS_IGNORES = (DeprecationWarning, PendingDeprecationWarning, ImportWarning, ResourceWarning)


def _open_files() -> set[str]:
    """Regular files this process holds open (Linux: /proc/self/fd), outside the system's data."""
    found = set()
    fd_dir = Path("/proc/self/fd")
    if not fd_dir.is_dir():
        return found
    for fd in os.listdir(fd_dir):
        try:
            target = os.readlink(fd_dir / fd)
        except OSError:
            continue
        # PROJ's database and GDAL's support files are opened once and kept: not a leak
        if target.startswith("/") and not target.startswith(("/usr/", "/dev/", "/proc/")) \
                and ".venv" not in target and not target.endswith("(deleted)") and os.path.isfile(target):
            found.add(target)
    return found


def _process_state() -> dict:
    """The process-wide state a command could change and a separate process would not keep."""
    import logging

    from osgeo import gdal, ogr, osr

    return {
        "cwd": os.getcwd(),
        "environment": dict(os.environ),
        "GDAL/OGR/OSR exception modes": (gdal.GetUseExceptions(), ogr.GetUseExceptions(), osr.GetUseExceptions()),
        "signal handlers": {s: signal.getsignal(s) for s in _SIGNALS},
        "logging handlers": (list(logging.getLogger().handlers), logging.getLogger().level,
                             {n: list(lg.handlers) for n, lg in logging.Logger.manager.loggerDict.items()
                              if isinstance(lg, logging.Logger) and n.startswith("strikeline")}),
        "numpy error state": np.geterr(),
        "open files": _open_files(),
    }


@contextlib.contextmanager
def _fd_capture(fd: int):
    """Capture what C code (GDAL, PROJ) writes to file descriptor ``fd``; yields a reader."""
    with tempfile.TemporaryFile(mode="w+b") as tmp:
        saved = os.dup(fd)
        text = []
        try:
            os.dup2(tmp.fileno(), fd)
            yield text
        finally:
            os.dup2(saved, fd)
            os.close(saved)
            tmp.seek(0)
            text.append(tmp.read().decode("utf-8", "replace"))


def run_cli(*args, cwd=None) -> CliRun:
    """Run ``strikeline ARGS`` in this process, as the console script does, and return what a user
    sees: the exit status (``main``'s return value or ``SystemExit``'s code), stdout and stderr
    (what Python and what C code such as GDAL printed, and the warnings a fresh interpreter would
    print).

    The command must leave the process as it found it - working folder, environment, GDAL's
    exception mode, signal and logging handlers, numpy's error state, open files - because many
    commands share one test process; a leak fails here, naming what leaked. The runner itself
    restores what it swaps for the run (``sys.stdout``/``sys.stderr``, file descriptors 1 and 2,
    the warning filters). ``STRIKELINE_DEBUG`` is unset for the run, as for a user who did not
    ask for tracebacks.
    """
    from strikeline.cli.main import main

    argv = [str(a) for a in args]
    for stream in (sys.stdout, sys.stderr):
        stream.flush()
    debug = os.environ.pop("STRIKELINE_DEBUG", None)
    try:
        # what the test's own code left for the garbage collector (a GDAL dataset it opened and
        # dropped in a cycle) is closed now, not during the run, where it would count as a change
        gc.collect()
        before = _process_state()
        out, err = io.StringIO(), io.StringIO()
        with contextlib.ExitStack() as stack:
            c_out = stack.enter_context(_fd_capture(1))
            c_err = stack.enter_context(_fd_capture(2))
            caught = stack.enter_context(warnings.catch_warnings(record=True))
            warnings.resetwarnings()
            warnings.simplefilter("default")
            for category in _FRESH_PROCESS_IGNORES:
                warnings.simplefilter("ignore", category)
            stack.enter_context(contextlib.redirect_stdout(out))
            stack.enter_context(contextlib.redirect_stderr(err))
            if cwd is not None:
                stack.enter_context(contextlib.chdir(cwd))
            try:
                code = main(argv)
            except SystemExit as exc:  # argparse: usage errors, --help, --version
                code = exc.code
            if code is None:
                code = 0
            elif not isinstance(code, int):  # sys.exit("message"): the message goes to stderr
                print(code, file=sys.stderr)
                code = 1
            for stream in (sys.stdout, sys.stderr):  # Python's buffers, before the fds are restored
                stream.flush()
        after = _process_state()
    finally:
        if debug is not None:
            os.environ["STRIKELINE_DEBUG"] = debug
    leaked = [name for name in before if before[name] != after[name]]
    if leaked:
        detail = {n: (before[n], after[n]) for n in leaked if n != "environment"}
        if "environment" in leaked:
            e0, e1 = before["environment"], after["environment"]
            detail["environment"] = {k: (e0.get(k), e1.get(k)) for k in set(e0) | set(e1) if e0.get(k) != e1.get(k)}
        raise AssertionError(f"strikeline {' '.join(argv)} changed the process's state: {detail}")
    shown = "".join(warnings.formatwarning(w.message, w.category, w.filename, w.lineno, w.line) for w in caught)
    return CliRun(args=tuple(argv), returncode=int(code), stdout=out.getvalue() + c_out[0],
                  stderr=err.getvalue() + c_err[0] + shown)


# --------------------------------------------------------------------------- derived inputs
def sha256_of(path) -> str:
    """The SHA-256 of a file's bytes, hex (files compared byte for byte)."""
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def coreutils_sha256(path) -> str:
    """The SHA-256 of a file as GNU coreutils' ``sha256sum`` prints it: a checksum made outside the
    project and outside Python's hashlib, to check the ones strikeline records (the calling test
    is skipped where the command is not installed)."""
    exe = shutil.which("sha256sum")
    if exe is None:
        import pytest
        pytest.skip("coreutils' sha256sum is not installed")
    # Source: GNU coreutils sha256sum (outside the project)
    return subprocess.run([exe, str(path)], check=True, capture_output=True, text=True).stdout.split()[0]


@contextlib.contextmanager
def gdal_exceptions():
    """GDAL/OGR exceptions on inside the block, the previous modes restored after (GDAL 3.6 has no
    ExceptionMgr)."""
    from osgeo import gdal, ogr

    was = gdal.GetUseExceptions(), ogr.GetUseExceptions()
    gdal.UseExceptions()
    ogr.UseExceptions()
    try:
        yield
    finally:
        if not was[1]:
            ogr.DontUseExceptions()
        if not was[0]:
            gdal.DontUseExceptions()


def write_tiled_dem(path, z, *, nodata=-9999.0, block=16, epsg=32633) -> str:
    """A float32 DEM GeoTIFF of the array ``z``: DEFLATE, tiles of ``block`` cells, 5 m cells from
    (400000, 5301500), UTM 33N by default, band nodata ``nodata``. Returns its path as a string."""
    from osgeo import gdal

    with gdal_exceptions():
        ds = gdal.GetDriverByName("GTiff").Create(
            str(path), z.shape[1], z.shape[0], 1, gdal.GDT_Float32,
            options=["COMPRESS=DEFLATE", "TILED=YES", f"BLOCKXSIZE={block}", f"BLOCKYSIZE={block}"])
        ds.SetGeoTransform((400000.0, 5.0, 0.0, 5301500.0, 0.0, -5.0))
        ds.SetProjection(srs_of(epsg).ExportToWkt())
        ds.GetRasterBand(1).SetNoDataValue(nodata)
        ds.GetRasterBand(1).WriteArray(z)
        ds = None
    return str(path)


def srs_of(epsg):
    """An OSR spatial reference of an EPSG code (``None``: no CRS)."""
    from osgeo import osr

    if epsg is None:
        return None
    s = osr.SpatialReference()
    s.ImportFromEPSG(epsg)
    return s


def write_vector(path, geoms, *, epsg=None, geom_type=None, fields=None, layer="lines", driver=None, options=()):
    """Write geometries (WKT text, WKB bytes, shapely geometries or None) to a vector file with OGR
    (test inputs only). ``epsg=None``: no CRS; ``geom_type``: an ``ogr.wkb*`` code (default unknown);
    the driver follows the suffix (.gpkg, .shp, .geojson) unless named."""
    import shapely
    from osgeo import ogr

    path = str(path)
    driver = driver or {".gpkg": "GPKG", ".shp": "ESRI Shapefile", ".geojson": "GeoJSON"}[Path(path).suffix]
    with gdal_exceptions():
        ds = ogr.GetDriverByName(driver).CreateDataSource(path)
        lyr = ds.CreateLayer(layer, srs_of(epsg), ogr.wkbUnknown if geom_type is None else geom_type,
                             options=list(options))
        fields = fields or {}
        for name, values in fields.items():
            kind = ogr.OFTReal if isinstance(values[0], float) else ogr.OFTString
            lyr.CreateField(ogr.FieldDefn(name, kind))
        for i, g in enumerate(geoms):
            f = ogr.Feature(lyr.GetLayerDefn())
            if isinstance(g, str):
                f.SetGeometry(ogr.CreateGeometryFromWkt(g))
            elif isinstance(g, bytes):
                f.SetGeometry(ogr.CreateGeometryFromWkb(g))
            elif g is not None:
                f.SetGeometry(ogr.CreateGeometryFromWkb(shapely.to_wkb(g)))
            for name, values in fields.items():
                if values[i] is not None:
                    f.SetField(name, values[i])
            lyr.CreateFeature(f)
        ds = None
    return path


def write_lines(path, lines, *, epsg=None, fields=None, layer="lines", driver=None):
    """Write shapely lines to a vector file with OGR (test inputs only). ``epsg=None``: no CRS."""
    from osgeo import ogr

    return write_vector(path, lines, epsg=epsg, geom_type=ogr.wkbLineString, fields=fields, layer=layer,
                        driver=driver)


# --------------------------------------------------------------------------- the fold sheet's units
#: ``strikeline run`` options naming the fold sheet's units: the upper unit and the lower one
#: (Source: the polygons written by :func:`write_fold_units`; Alluvium is cover, ignored).
UNIT_OPTS = ("--unit-field", "unit", "--units-above", "Cawl", "--units-below", "Brenlow")


def fold_z(x, y):
    """The true surface elevation of the fold sheet at map points."""
    # Source: truth.json "equation" and "frame" of the fold sheet
    s = json.loads((FOLD / "truth.json").read_text())["surface"]
    a, p = np.radians(s["axis_trend_deg"]), np.radians(s["plunge_deg"])
    u = (x - s["x0"]) * np.sin(a) + (y - s["y0"]) * np.cos(a)
    t = (x - s["x0"]) * np.cos(a) - (y - s["y0"]) * np.sin(a)
    return s["z0"] - np.tan(p) * u + s["amplitude_m"] * np.cos(2 * np.pi * t / s["wavelength_m"])


def fold_dem():
    """``(DEM with NaN, geotransform, projection WKT)`` of the fold sheet."""
    from osgeo import gdal

    ds = gdal.Open(str(FOLD / "dem.tif"))
    gt, wkt = ds.GetGeoTransform(), ds.GetProjection()
    a = ds.GetRasterBand(1).ReadAsArray().astype(float)
    nd = ds.GetRasterBand(1).GetNoDataValue()
    a[a == nd] = np.nan
    return a, gt, wkt


def write_fold_units(path, *, epsg=None):
    """Unit polygons of the fold sheet (test_data/fold), made from its analytic truth, written to a
    GeoPackage (layer ``units``, fields ``code`` and ``unit``) in the sheet's CRS or reprojected to
    ``epsg``: where the ground lies above the true surface the upper unit (Cawl) crops out,
    elsewhere the lower one (Brenlow); a block of superficial cover (Alluvium) is laid over the
    south-west corner. GDAL's polygoniser (gdal.Polygonize) turns the cells into polygons.
    Shared by the command-line tests and the QGIS adapter's tests."""
    from osgeo import gdal, ogr, osr

    dem, gt, wkt = fold_dem()
    r, c = np.mgrid[0:dem.shape[0], 0:dem.shape[1]]
    X, Y = gt[0] + (c + 0.5) * gt[1], gt[3] + (r + 0.5) * gt[5]
    code = np.where(dem > fold_z(X, Y), 1, 2).astype(np.int32)
    code[(X - X.min() < 600) & (Y - Y.min() < 500)] = 3  # superficial cover
    mem = gdal.GetDriverByName("MEM").Create("", dem.shape[1], dem.shape[0], 1, gdal.GDT_Int32)
    mem.SetGeoTransform(gt)
    mem.SetProjection(wkt)
    mem.GetRasterBand(1).WriteArray(code)
    tmp = ogr.GetDriverByName("Memory").CreateDataSource("")
    srs = osr.SpatialReference(wkt=wkt)
    lyr = tmp.CreateLayer("cells", srs, ogr.wkbPolygon)
    lyr.CreateField(ogr.FieldDefn("code", ogr.OFTInteger))
    gdal.Polygonize(mem.GetRasterBand(1), None, lyr, 0)
    out_srs = srs
    if epsg is not None:
        out_srs = osr.SpatialReference()
        out_srs.ImportFromEPSG(epsg)
        out_srs.SetAxisMappingStrategy(osr.OAMS_TRADITIONAL_GIS_ORDER)
        srs.SetAxisMappingStrategy(osr.OAMS_TRADITIONAL_GIS_ORDER)
    ct = osr.CoordinateTransformation(srs, out_srs) if epsg is not None else None
    ds = ogr.GetDriverByName("GPKG").CreateDataSource(str(path))
    o = ds.CreateLayer("units", out_srs, ogr.wkbPolygon)
    o.CreateField(ogr.FieldDefn("code", ogr.OFTInteger))
    o.CreateField(ogr.FieldDefn("unit", ogr.OFTString))
    names = {1: "Cawl", 2: "Brenlow", 3: "Alluvium"}
    for f in lyr:
        g = f.GetGeometryRef().Clone()
        if ct is not None:
            g.Transform(ct)
        nf = ogr.Feature(o.GetLayerDefn())
        nf.SetGeometry(g)
        nf.SetField("code", f.GetField("code"))
        nf.SetField("unit", names[f.GetField("code")])
        o.CreateFeature(nf)
    ds = None
    return path


def round_cell_of_layer(path) -> float:
    """The cell of a grid made over a vector file's first layer without a cell size, worked out here:
    a 500th of the larger side of the extent OGR reports (GetExtent, GDAL 3.6), rounded up in the
    1-2-5 series (common practice for round map-grid steps)."""
    import math

    from osgeo import ogr

    ds = ogr.Open(str(path))
    xmin, xmax, ymin, ymax = ds.GetLayer(0).GetExtent()
    ds = None
    raw = max(xmax - xmin, ymax - ymin) / 500.0
    mag = 10.0 ** math.floor(math.log10(raw))
    return next(m * mag for m in (1, 2, 5, 10) if m * mag >= raw)
