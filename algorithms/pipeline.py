"""The end-to-end chain: inputs -> picks -> plane -> grids -> structure contours -> trace -> files.

Each step is a function that the command line and the QGIS adapter can call on its own; :func:`run`
chains them and writes every output atomically (into a temporary sibling of the output folder,
renamed into place at the end).
"""
from __future__ import annotations

import hashlib
import json
import os
import shutil
import uuid
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import shapely
from osgeo import ogr

from strikeline import CAUTION, __version__
from strikeline.errors import CancelledError, InputError, OutputError
from strikeline.fitting import PlaneFit, fit_plane
from strikeline.grid import Grid
from strikeline.grids import depth_below_ground, dip_grids
from strikeline.io.contours import contour_lines
from strikeline.io.crs import crs_label, same_crs, srs_from_wkt
from strikeline.io.raster import read_raster, write_geotiff
from strikeline.io.vector import LayerOut, VectorLayer, read_layer, write_gpkg
from strikeline.picks import PickSet, picks_from_contours, picks_from_dem, sample_bilinear
from strikeline.trace import trace_misfit

Log = Callable[[str], None]


def _quiet(_msg: str) -> None:
    pass


@dataclass
class RunOptions:
    """What ``strikeline run`` was asked to do (the CLI contract of issue 2)."""

    contacts: str
    out: str
    contacts_layer: str | None = None
    where: str | None = None
    dem: str | None = None
    contours: str | None = None
    contours_layer: str | None = None
    elev_field: str | None = None
    interval_m: float = 50.0
    cell_m: float | None = None
    overwrite: bool = False


@dataclass
class Inputs:
    """Inputs in memory, all in one projected CRS (``crs_wkt``)."""

    contacts: VectorLayer
    crs_wkt: str
    dem: np.ndarray | None = None
    dem_grid: Grid | None = None
    contours: VectorLayer | None = None
    contour_elevations_m: np.ndarray | None = None
    paths: dict = field(default_factory=dict)


@dataclass
class Results:
    """Everything the chain computed (arrays, geometries and the summary)."""

    picks: PickSet
    plane: PlaneFit
    grid: Grid
    surface: np.ndarray
    dip_deg: np.ndarray
    dip_direction_deg: np.ndarray
    depth_m: np.ndarray | None
    contour_geoms: np.ndarray
    contour_elevations_m: np.ndarray
    trace_geoms: np.ndarray
    summary: dict


# --------------------------------------------------------------------------- checks on options
def check_options(opts: RunOptions) -> None:
    """Refuse contradictory or incomplete options before any work is done."""
    if opts.dem is None and opts.contours is None:
        raise InputError("no topography given: give --dem PATH, --contours PATH --elev-field NAME, or both")
    if opts.contours is not None and not opts.elev_field:
        raise InputError(
            f"contours '{opts.contours}': the elevation field is not named; add --elev-field NAME "
            "(the numeric field that holds each contour's elevation)"
        )
    if not (opts.interval_m > 0 and np.isfinite(opts.interval_m)):
        raise InputError(f"--interval must be a positive number of metres, got {opts.interval_m}")
    if opts.cell_m is not None and not (opts.cell_m > 0 and np.isfinite(opts.cell_m)):
        raise InputError(f"--cell must be a positive number of metres, got {opts.cell_m}")
    out = Path(opts.out)
    if out.exists() and not out.is_dir():
        raise OutputError(f"--out '{out}' exists and is not a folder; name a folder to create")
    if out.exists() and not opts.overwrite:
        raise OutputError(
            f"output folder '{out}' already exists; add --overwrite to replace it, or name a new folder"
        )
    for p in (opts.contacts, opts.dem, opts.contours):
        if p and out.exists() and Path(p).resolve().is_relative_to(out.resolve()):
            raise OutputError(
                f"input '{p}' lies inside the output folder '{out}', which --overwrite would delete; "
                "write the results to another folder"
            )


# --------------------------------------------------------------------------- loading
def load_inputs(opts: RunOptions, *, log: Log = _quiet) -> Inputs:
    """Read every input and bring it into one projected CRS (the DEM's, else the contacts')."""
    check_options(opts)
    contacts = read_layer(opts.contacts, layer=opts.contacts_layer, where=opts.where,
                          label="contacts", geometry="line", layer_option="--contacts-layer")
    dem = grid = None
    if opts.dem:
        dem, grid = read_raster(opts.dem, label="DEM")
        target = srs_from_wkt(grid.crs_wkt)
    else:
        target = contacts.srs
    contours = elev = None
    if opts.contours:
        contours = read_layer(opts.contours, layer=opts.contours_layer, label="contours",
                              geometry="line", layer_option="--contours-layer")
        elev = contours.numeric_field(opts.elev_field, option="--elev-field")
        if not np.isfinite(elev).any():
            raise InputError(
                f"field '{opts.elev_field}' of {contours.what} holds no elevation (all null); "
                "name the field that holds the contour elevations with --elev-field"
            )
    target_label = crs_label(target)
    layers = {"contacts": contacts, "contours": contours}
    for key, lyr in layers.items():
        if lyr is not None and not same_crs(lyr.srs, target):
            log(f"reprojecting {key} '{lyr.path}' from {crs_label(lyr.srs)} to {target_label}")
            layers[key] = lyr.reprojected(target)
    paths = {k: v for k, v in (("contacts", opts.contacts), ("dem", opts.dem), ("contours", opts.contours)) if v}
    return Inputs(contacts=layers["contacts"], crs_wkt=target.ExportToWkt(), dem=dem, dem_grid=grid,
                  contours=layers["contours"], contour_elevations_m=elev, paths=paths)


# --------------------------------------------------------------------------- steps
def collect_picks(inputs: Inputs, *, log: Log = _quiet, progress=None, is_cancelled=None) -> PickSet:
    """Elevation picks on every contact, from the DEM and/or the contour lines."""
    c = inputs.contacts
    sets = []
    if inputs.dem is not None:
        dem_picks = picks_from_dem(c.geoms, inputs.dem, inputs.dem_grid, contact_ids=c.fids,
                                   progress=progress, is_cancelled=is_cancelled)
        if len(dem_picks) == 0:
            msg = (f"contacts {c.what} lie entirely outside the valid cells of DEM '{inputs.paths['dem']}'"
                   " (outside its extent or over nodata)")
            if inputs.contours is None:
                raise InputError(msg + "; give a DEM that covers the contacts, or check that both are "
                                       "in the CRS their files declare")
            log("warning: " + msg + "; using contour picks only")
        sets.append(dem_picks)
    if inputs.contours is not None:
        sets.append(picks_from_contours(c.geoms, inputs.contours.geoms, inputs.contour_elevations_m,
                                        contact_ids=c.fids, progress=progress, is_cancelled=is_cancelled))
    return PickSet.concat(*sets)


def fit_picks(picks: PickSet, *, what: str = "the picks") -> PlaneFit:
    """Best-fit plane of a pick set (errors name the pick set)."""
    try:
        return fit_plane(picks.xyz)
    except InputError as exc:
        raise type(exc)(f"{what}: {exc}") from None


def surface_grid(inputs: Inputs, opts: RunOptions, *, log: Log = _quiet) -> Grid:
    """The output grid: the DEM's grid, else ``--cell`` metres over the contour layer's extent."""
    if inputs.dem_grid is not None:
        return inputs.dem_grid.with_nodata(None)
    geoms = inputs.contours.geoms if inputs.contours is not None else inputs.contacts.geoms
    xmin, ymin, xmax, ymax = shapely.total_bounds(geoms)
    cell = opts.cell_m
    if cell is None:
        span = max(xmax - xmin, ymax - ymin)
        raw = span / 500.0
        mag = 10 ** np.floor(np.log10(raw))
        cell = float(min((m * mag for m in (1, 2, 5, 10) if m * mag >= raw), default=raw))
        log(f"no --cell given: using {cell:g} m cells over the contour layer's extent")
    return Grid.from_bounds(xmin, ymin, xmax, ymax, cell_m=cell, crs_wkt=inputs.crs_wkt)


def compute(inputs: Inputs, opts: RunOptions, *, log: Log = _quiet, progress=None,
            is_cancelled=None) -> Results:
    """Run every step of the chain in memory."""
    def check():
        if is_cancelled is not None and is_cancelled():
            raise CancelledError("cancelled; nothing was written")

    picks = collect_picks(inputs, log=log, progress=progress, is_cancelled=is_cancelled)
    check()
    plane = fit_picks(picks, what=f"picks on contacts '{inputs.paths['contacts']}'")
    grid = surface_grid(inputs, opts, log=log)
    X, Y = grid.mesh()
    surface = plane.elevation(X, Y)
    del X, Y
    check()
    dip, dipdir = dip_grids(surface, grid, is_cancelled=is_cancelled)
    check()
    cgeoms, clevels = contour_lines(surface, grid, interval_m=opts.interval_m)
    depth = None
    trace = np.empty(0, dtype=object)
    misfit = {"median": None, "p90": None, "n_vertices": 0,
              "note": "needs a DEM: the predicted trace is the zero line of depth below ground"}
    if inputs.dem is not None:
        depth = depth_below_ground(inputs.dem, surface)
        trace, _ = contour_lines(depth, grid, levels=[0.0])
        verts = shapely.get_coordinates(inputs.contacts.geoms)
        on_dem = np.isfinite(sample_bilinear(inputs.dem, inputs.dem_grid, verts[:, 0], verts[:, 1]))
        misfit = trace_misfit(verts[on_dem], trace)
    check()
    summary = build_summary(inputs, opts, picks, plane, misfit, n_contours=len(cgeoms))
    return Results(picks, plane, grid, surface, dip, dipdir, depth, cgeoms, clevels, trace, summary)


# --------------------------------------------------------------------------- summary
def file_sha256(path: str) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _r(v, nd=4):
    return None if v is None or not np.isfinite(v) else round(float(v), nd)


def build_summary(inputs: Inputs, opts: RunOptions, picks: PickSet, plane: PlaneFit, misfit: dict,
                  *, n_contours: int) -> dict:
    return {
        "version": __version__,
        "crs": crs_label(srs_from_wkt(inputs.crs_wkt)),
        "n_picks": len(picks),
        "picks_by_source": picks.counts_by_source(),
        "plane": {
            "dip": _r(plane.dip_deg, 3),
            "dip_direction": _r(plane.dip_direction_deg, 3),
            "strike_rhr": _r(plane.strike_rhr_deg, 3),
            "rms_m": _r(plane.rms_m, 3),
            "centroid": [_r(c, 3) for c in plane.centroid],
            "n_picks": plane.n_points,
        },
        "trace_misfit_m": {k: (_r(v, 3) if isinstance(v, float) else v) for k, v in misfit.items()},
        "structure_contours": {"interval_m": opts.interval_m, "n_lines": n_contours},
        "conventions": "dip direction 0-360 clockwise from grid north of the CRS; dip 0-90 from "
                       "horizontal; strike by the right-hand rule (dip to the right)",
        "inputs": {os.path.basename(p): file_sha256(p) for p in inputs.paths.values()},
        "caution": CAUTION,
    }


# --------------------------------------------------------------------------- writing
def write_results(results: Results, out_dir, *, overwrite: bool = False) -> Path:
    """Write every output into ``out_dir`` atomically.

    Everything goes into a temporary sibling folder first; only when every file is complete is
    it renamed to ``out_dir`` (an existing ``out_dir`` is replaced only with ``overwrite``).
    """
    out = Path(out_dir)
    if out.exists() and not overwrite:
        raise OutputError(f"output folder '{out}' already exists; add --overwrite to replace it")
    parent = out.resolve().parent
    if not parent.is_dir():
        raise OutputError(f"cannot create '{out}': the folder '{parent}' does not exist; create it first")
    tmp = parent / f".{out.name}.part-{uuid.uuid4().hex[:8]}"
    try:
        tmp.mkdir()
    except OSError as exc:
        raise OutputError(f"cannot create '{out}': {exc.strerror}; choose a writable folder") from None
    try:
        _write_all(results, tmp)
        if out.exists():
            old = parent / f".{out.name}.old-{uuid.uuid4().hex[:8]}"
            os.replace(out, old)
            os.replace(tmp, out)
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.replace(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return out


def _write_all(r: Results, folder: Path) -> None:
    g = r.grid
    write_geotiff(folder / "surface.tif", r.surface, g)
    write_geotiff(folder / "dip.tif", r.dip_deg, g)
    write_geotiff(folder / "dip_direction.tif", r.dip_direction_deg, g)
    if r.depth_m is not None:
        write_geotiff(folder / "depth.tif", r.depth_m, g)
    p = r.picks
    pts = shapely.points(p.xyz)
    layers = [
        LayerOut("picks", pts, {"contact_id": p.contact_id.astype(np.int64), "source": p.source.astype(str),
                                "elevation_m": p.xyz[:, 2]}, ogr.wkbPoint25D),
        LayerOut("structure_contours", shapely.force_3d(r.contour_geoms, r.contour_elevations_m)
                 if len(r.contour_geoms) else r.contour_geoms,
                 {"elevation": np.asarray(r.contour_elevations_m, dtype=float)}, ogr.wkbLineString25D),
        LayerOut("predicted_trace", r.trace_geoms, {}, ogr.wkbLineString),
    ]
    write_gpkg(folder / "results.gpkg", layers, g.crs_wkt)
    (folder / "summary.json").write_text(json.dumps(r.summary, indent=2, sort_keys=True) + "\n")


def run(opts: RunOptions, *, log: Log = _quiet, progress=None, is_cancelled=None) -> Results:
    """Load, compute and write: the whole of ``strikeline run``."""
    inputs = load_inputs(opts, log=log)
    results = compute(inputs, opts, log=log, progress=progress, is_cancelled=is_cancelled)
    write_results(results, opts.out, overwrite=opts.overwrite)
    return results
