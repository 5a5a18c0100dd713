"""What the report shows, read back from a run's output folder in bounded memory.

Everything comes from the files the run wrote (``summary.json``, the layers of ``results.gpkg``,
the GeoTIFFs), so the report needs no array of the run in memory: grids are read decimated to at
most :data:`MAX_MAP_CELLS` cells, points thinned to at most :data:`MAX_POINTS`, and the residuals
of the picks are the surface GeoTIFF interpolated at them. A run that wrote its grids block by
block hands over the surface's and the depth's window means it gathered while writing them
(:class:`strikeline.io.window_means.WindowMeans`): the values of those decimated reads, without
decoding the files again.

The grids are read on :data:`READ_THREADS` threads, one file each (GDAL decodes and resamples
without Python's lock), each with GDAL's multithreaded decoding of the blocks a read crosses
(:func:`strikeline.io.demfile.decode_threads`): on a large sheet decoding every block of the
surface and the depth is most of the report's time, and each read gives the values it gives
alone.
"""
from __future__ import annotations

import json
import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import shapely

from strikeline import vocabulary as V
from strikeline.errors import StrikelineError
from strikeline.io._gdal import gdal_exceptions
from strikeline.io.demfile import decode_threads
from strikeline.io.sampling import (decimated_grid, layer_names, read_decimated, read_decimated_and_sample,
                                     read_line_pieces, read_point_sample, sample_bilinear)
from strikeline.io.vector import read_layer
from strikeline.io.window_means import PICTURE_CELLS

#: Most cells of a grid read for a picture: a map panel is about 1,000 pixels across.
MAX_MAP_CELLS = PICTURE_CELLS
#: Most points of a layer drawn (every k-th beyond it).
MAX_POINTS = 20_000
#: Most cells of a grid read for a histogram (a regular sample of them).
MAX_HISTOGRAM_CELLS = 4_000_000
#: Grid files read at once: the machine's cores, at most 2.
READ_THREADS = max(1, min(2, os.cpu_count() or 1))


@dataclass
class Raster:
    """A grid read decimated: values (NaN for nodata) and the extent ``(xmin, xmax, ymin, ymax)``."""

    values: np.ndarray
    extent: tuple
    cell_m: float  # of the grid as read (the file's cell times the decimation)
    crs_wkt: str = ""


@dataclass
class Lines:
    """Lines of a layer with their fields (shapely geometries, 2-D).

    Lines read for a picture may be kept simplified (:func:`_thinned_lines`): then
    ``simplified_m`` is the tolerance they were simplified to, and ``length`` and ``middle`` (the
    point halfway along) are those of the lines as written."""

    geoms: np.ndarray
    fields: dict = field(default_factory=dict)
    simplified_m: float | None = None
    length: np.ndarray | None = None
    middle: np.ndarray | None = None

    def __len__(self) -> int:
        return len(self.geoms)


@dataclass
class ReportData:
    """The contents of an output folder that the report draws."""

    folder: Path
    summary: dict
    ground: Raster | None = None  # surface + depth: the DEM on the output grid
    depth: Raster | None = None
    surface: Raster | None = None
    true_thickness: Raster | None = None
    thickness_sample: np.ndarray | None = None
    contours: Lines | None = None
    trace: Lines | None = None
    misfit: Lines | None = None
    contacts: Lines | None = None  # the input contacts, drawn when there is no contact_misfit layer
    picks: dict | None = None  # x, y, z, residual_m, n_total, step
    attitudes: dict | None = None  # by quality: (dip_deg, dip_direction_deg)
    notes: list = field(default_factory=list)


def _raster(path: Path, *, max_cells: int, resampling: str = "average", means=None) -> Raster | None:
    """The grid read decimated; ``means`` ``(cells, array)``: its window means gathered while it
    was written for a read of at most ``cells`` cells (:class:`strikeline.io.window_means.WindowMeans`,
    the values of that read), taken instead of decoding the file when this read is that one."""
    if not path.exists():
        return None
    grid = None
    if means is not None and means[0] == max_cells and resampling == "average":
        arr = means[1]
        grid = decimated_grid(path, max_cells=max_cells, label=path.name)
        if grid.shape != arr.shape:
            grid = None
    if grid is None:
        with decode_threads():
            arr, grid = read_decimated(path, max_cells=max_cells, resampling=resampling, label=path.name)
    xmin, ymin, xmax, ymax = grid.bounds
    return Raster(arr, (xmin, xmax, ymin, ymax), grid.cell_x_m, grid.crs_wkt)


def _input_contacts(summary: dict, crs_wkt: str) -> Lines | None:
    """The contacts inputs the summary names (read-only, in the outputs' CRS); None when one of them
    cannot be read any more (moved or changed since the run)."""
    geoms = []
    for rec in (summary.get("inputs") or {}).get("contacts") or []:
        try:
            layer = read_layer(rec.get("path_absolute") or rec["path"], layer=rec.get("layer"), where=rec.get("where"),
                               label="contacts", geometry="line", layer_option="--contacts-layer")
            if crs_wkt and layer.crs_wkt:
                layer = layer.reprojected(crs_wkt)
        except (StrikelineError, KeyError):
            return None
        geoms += list(layer.geoms)
    return Lines(np.array(geoms, dtype=object)) if geoms else None


def _lines(gpkg: Path, name: str, names: list) -> Lines | None:
    if name not in names:
        return None
    try:
        layer = read_layer(gpkg, layer=name, label="results", geometry="line", layer_option="the layer name")
    except StrikelineError:  # an empty layer: nothing to draw
        return Lines(np.empty(0, dtype=object))
    return Lines(layer.geoms, layer.fields)


def _thinned_lines(gpkg: Path, name: str, names: list, tolerance_m: float | None) -> Lines | None:
    """The lines of layer ``name`` simplified as the map draws them (Douglas-Peucker to
    ``tolerance_m``, :func:`strikeline.report.figures.simplified`), read a few features at a time:
    memory holds the simplified lines and one piece of the layer, not every vertex of a large
    sheet's structure contours. Each line's length and middle point are taken before it is
    simplified, so labels sit where they would on the lines as written."""
    if name not in names:
        return None

    def keep(piece):
        g = piece.geoms
        thin = shapely.simplify(g, tolerance_m, preserve_topology=False) if tolerance_m and len(g) else g
        return thin, shapely.length(g), shapely.line_interpolate_point(g, 0.5, normalized=True), piece.fields

    try:
        parts = read_line_pieces(gpkg, layer=name, each=keep, label="results")
    except StrikelineError:
        parts = []
    if not parts:  # an empty layer: nothing to draw
        return Lines(np.empty(0, dtype=object))
    cat = lambda i: np.concatenate([p[i] for p in parts])  # noqa: E731
    fields = {k: np.concatenate([p[3][k] for p in parts]) for k in parts[0][3]}
    return Lines(cat(0), fields, simplified_m=tolerance_m or None, length=cat(1), middle=cat(2))


def _map_tolerance(surf: Path, depth: Path, max_cells: int) -> float | None:
    """The tolerance to which the map simplifies structure contours
    (:data:`strikeline.report.figures.SIMPLIFY_PX` of a pixel of the map, whose extent is the
    surface's decimated grid, else the depth's), from the files' headers; None without either."""
    from strikeline.report.figures import SIMPLIFY_PX, pixel_m

    for path in (surf, depth):
        if path.exists():
            xmin, ymin, xmax, ymax = decimated_grid(path, max_cells=max_cells, label=path.name).bounds
            return SIMPLIFY_PX * pixel_m((xmin, xmax, ymin, ymax))
    return None


def _bool(values) -> np.ndarray:
    return np.array([bool(v) for v in values], dtype=bool)


def load_outputs(folder, *, max_cells: int = MAX_MAP_CELLS, max_points: int = MAX_POINTS,
                 while_reading=None, means: dict | None = None) -> ReportData:
    """Read what the report shows from a run's output ``folder`` (bounded memory, read-only).

    The grid files are read on :data:`READ_THREADS` threads while this one reads the layers of
    ``results.gpkg``; the values are those of one read after the other. ``while_reading``, if
    given, is called on this thread with the :class:`ReportData` holding the summary and the
    layers (not yet the grids, the picks or the contacts inputs) while the grids are still being
    read: work that needs no grid (figures of the summary and the attitudes) overlaps GDAL's
    decoding, which runs without Python's lock. ``means``: file name -> ``(cells, array)``, a grid's
    window means gathered while the run wrote it (the values of its decimated read), taken instead
    of decoding the file."""
    folder = Path(folder)
    summary = json.loads((folder / V.SUMMARY_FILE).read_text(encoding="utf-8"))
    d = ReportData(folder, summary)
    tt, surf = folder / V.TRUE_THICKNESS.file, folder / V.SURFACE.file
    # GDAL's exception mode is the process's: set here, once, for the reads on the other threads
    with gdal_exceptions(), ThreadPoolExecutor(max_workers=READ_THREADS,
                                               thread_name_prefix="strikeline-report-read") as pool:
        means = means or {}
        grids = {"surface": pool.submit(_raster, surf, max_cells=max_cells, means=means.get(V.SURFACE.file)),
                 "depth": pool.submit(_raster, folder / V.DEPTH.file, max_cells=max_cells,
                                      means=means.get(V.DEPTH.file)),
                 "thickness": pool.submit(_thickness, tt, max_cells=max_cells)}
        gpkg = folder / V.RESULTS_FILE
        names = layer_names(gpkg)
        d.contours = _thinned_lines(gpkg, V.STRUCTURE_CONTOURS.name, names,
                                    _map_tolerance(surf, folder / V.DEPTH.file, max_cells))
        d.trace = _lines(gpkg, V.PREDICTED_TRACE.name, names)
        d.misfit = _lines(gpkg, V.CONTACT_MISFIT.name, names)
        for lines, key in ((d.contours, "extrapolated"), (d.trace, "extrapolated"), (d.misfit, "flagged")):
            if lines is not None and key in lines.fields:
                lines.fields[key] = _bool(lines.fields[key])
        residual_at = None
        if V.PICKS.name in names:
            p = read_point_sample(gpkg, layer=V.PICKS.name, fields=("elevation_m",), max_points=max_points)
            z = np.array([np.nan if v is None else float(v) for v in p["elevation_m"]], dtype=float)
            if surf.exists():
                residual_at = pool.submit(sample_bilinear, surf, p["x"], p["y"], label=surf.name)
        if V.ATTITUDES.name in names:
            a = read_point_sample(gpkg, layer=V.ATTITUDES.name, fields=("dip_deg", "dip_direction_deg", "quality"),
                                  max_points=max_points)
            num = lambda v: np.array([np.nan if x is None else float(x) for x in v], dtype=float)  # noqa: E731
            q = np.array(["" if x is None else str(x) for x in a["quality"]])
            d.attitudes = {str(k): (num(a["dip_deg"][q == k]), num(a["dip_direction_deg"][q == k]))
                           for k in sorted(set(q.tolist()))}
        if while_reading is not None:
            while_reading(d)
        got = {k: f.result() for k, f in grids.items()}
        if V.PICKS.name in names:
            at = residual_at.result() if residual_at is not None else np.full(len(z), np.nan)
            d.picks = {"x": p["x"], "y": p["y"], "z": z, "residual_m": z - at, "n_total": p["n_total"],
                       "step": p["step"]}
    d.surface, d.depth = got["surface"], got["depth"]
    d.true_thickness, sample = got["thickness"]
    if d.surface is not None and d.depth is not None and d.surface.values.shape == d.depth.values.shape:
        # depth below ground = ground - surface, so the ground is their sum on the output grid
        d.ground = Raster(d.surface.values + d.depth.values, d.surface.extent, d.surface.cell_m, d.surface.crs_wkt)
    if sample is not None:
        d.thickness_sample = sample
    if d.misfit is None or not len(d.misfit):
        d.contacts = _input_contacts(summary, d.surface.crs_wkt if d.surface is not None else "")
    return d


def _thickness(path: Path, *, max_cells: int) -> tuple[Raster | None, np.ndarray | None]:
    """The thickness grid read as :func:`_raster` reads a grid, and the valid cells of a regular
    sample of at most :data:`MAX_HISTOGRAM_CELLS` of its cells (GDAL's nearest), from one decoding
    of the file where the factors allow; (None, None) without the file."""
    if not path.exists():
        return None, None
    with decode_threads():
        arr, grid, vals = read_decimated_and_sample(path, max_cells=max_cells, sample_cells=MAX_HISTOGRAM_CELLS,
                                                    label=path.name)
    xmin, ymin, xmax, ymax = grid.bounds
    return Raster(arr, (xmin, xmax, ymin, ymax), grid.cell_x_m, grid.crs_wkt), vals[np.isfinite(vals)]
