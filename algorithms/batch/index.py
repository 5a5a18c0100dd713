"""The batch's own files: ``index.gpkg`` (every sheet's footprint, plane, local attitudes,
structure contours and the shared edges), ``index.html`` (the sheets, their status and headline
attitude, linked to their reports) and the records ``batch.json`` is made of.

Read from the sheets' folders after they are written, so the same code serves sheets run here, in
worker processes or on a cluster.
"""
from __future__ import annotations

import html
import json
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import shapely

from strikeline import CAUTION
from strikeline import vocabulary as V
from strikeline.batch.edges import edge_mismatch, footprint, sample_cells, shared_edge
from strikeline.errors import StrikelineError, one_line

#: The plane's keys the index and batch.json repeat for each sheet.
PLANE_SHOWN = ("dip_deg", "dip_direction_deg", "strike_rhr_deg", "dip_ci95_deg", "dip_direction_ci95_deg",
               "n_picks", "quality")
#: Edge samples whose surface cells are read from the file at once: consecutive samples half a cell
#: apart, so a window of at most about (CHUNK / 2 + 2) cells a side (our choice).
SAMPLE_CHUNK = 512


@dataclass
class SheetOutputs:
    """What the index reads of one sheet's folder."""

    name: str
    status: str
    contact: str | None
    error: str | None
    footprint: object = None  # shapely polygon (empty when unknown)
    crs_wkt: str = ""
    surface: tuple | None = None  # (path, grid) of surface.tif, read by windows along the edges
    summary: dict = field(default_factory=dict)
    attitudes: object = None  # VectorLayer
    contours: object = None  # VectorLayer
    data_xy: object = None  # (n, 2) positions of the picks of the sheet's contact (its model's data)
    reach_m: float | None = None  # the model's reach (summary model.reach_m)
    warnings: list = field(default_factory=list)  # the lines the sheet's run logged at warning level
    earlier_utc: str | None = None  # a failed sheet: when the earlier results left in its folder were written


def read_sheet(folder: Path, name: str, status: str, contact, error, opts, log, *, warnings=(),
               earlier_utc=None) -> SheetOutputs:
    """The footprint (the surface grid, else the DEM), summary, attitudes and structure contours
    of one sheet; a sheet without results gets the DEM's footprint when the DEM reads. Rasters
    give only their georeferencing here; the edges read the surface along them."""
    from strikeline.io.raster import raster_grid  # the georeferencing only, any size
    from strikeline.io.vector import read_layer

    s = SheetOutputs(name, status, contact, error, footprint=shapely.Polygon(), warnings=list(warnings),
                     earlier_utc=earlier_utc)
    if status in ("ok", "unchanged"):
        path = folder / V.SURFACE.file
        grid = raster_grid(path, label=f"sheet '{name}' surface")
        s.surface, s.footprint, s.crs_wkt = (path, grid), footprint(grid), grid.crs_wkt
        s.summary = json.loads((folder / V.SUMMARY_FILE).read_text(encoding="utf-8"))
        for attr, spec, geometry in (("attitudes", V.ATTITUDES, "point"), ("contours", V.STRUCTURE_CONTOURS, "line")):
            try:
                setattr(s, attr, read_layer(folder / V.RESULTS_FILE, layer=spec.name, geometry=geometry,
                                            label=f"sheet '{name}' {spec.name}", layer_option="layer"))
            except StrikelineError as exc:  # an empty layer, for one
                log(f"sheet {name}: {spec.name} not indexed ({one_line(exc)})")
        s.reach_m = (s.summary.get("model") or {}).get("reach_m")
        try:
            picks = read_layer(folder / V.RESULTS_FILE, layer=V.PICKS.name, geometry="point",
                               label=f"sheet '{name}' {V.PICKS.name}", layer_option="layer")
            s.data_xy = shapely.get_coordinates(np.asarray(picks.geoms, dtype=object))
        except StrikelineError as exc:
            log(f"sheet {name}: {V.PICKS.name} not read, its edges not split by reach ({one_line(exc)})")
    elif opts.dem:
        try:
            grid = raster_grid(opts.dem, label=f"sheet '{name}' DEM")
            s.footprint, s.crs_wkt = footprint(grid), grid.crs_wkt
        except StrikelineError:
            pass
    return s


def _column(values, kind: str) -> np.ndarray:
    if kind == "real":
        return np.array([np.nan if v is None else float(v) for v in values], dtype=float)
    if kind == "integer":
        return np.array([-1 if v is None else int(v) for v in values], dtype=np.int64)
    if kind == "bool":
        return np.array([bool(v) for v in values], dtype=bool)
    return np.array([None if v is None else str(v) for v in values], dtype=object)


def _layer(spec: V.Layer, geoms: list, rows: list[dict]):
    from strikeline.io.vector import LayerOut

    fields = {}
    for f in spec.fields:
        if f.name in spec.optional and all(r.get(f.name) is None for r in rows) and rows:
            continue
        fields[f.name] = _column([r.get(f.name) for r in rows], f.type)
    return LayerOut(spec.name, np.array(geoms, dtype=object), fields, spec.geometry)


def _from_layer(s: SheetOutputs, lyr, spec: V.Layer, z_field: str | None = None):
    geoms, rows = [], []
    if lyr is None:
        return geoms, rows
    for i, g in enumerate(lyr.geoms):
        row = {"sheet": s.name, **{k: lyr.fields[k][i] for k in spec.field_names if k in lyr.fields}}
        if z_field is not None and row.get(z_field) is not None:
            g = shapely.force_3d(g, float(row[z_field]))
        geoms.append(g)
        rows.append(row)
    return geoms, rows


def surface_sampler(path, grid):
    """``f(x, y) -> z`` of a surface GeoTIFF (:func:`strikeline.batch.edges.sample_grid`'s values)
    that reads only the cells around :data:`SAMPLE_CHUNK` consecutive points at a time."""
    from strikeline.io.gridfiles import read_window

    def read(r0, r1, c0, c1):
        return read_window(path, r0, r1, c0, c1)

    def sample(x, y):
        x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
        return np.concatenate([sample_cells(read, grid, x[k:k + SAMPLE_CHUNK], y[k:k + SAMPLE_CHUNK])
                               for k in range(0, x.size, SAMPLE_CHUNK)] or [np.empty(0)])
    return sample


def reach_test(sheets: list[SheetOutputs]):
    """``f(x, y) -> bool``: within reach of every one of ``sheets``' data (its nearest pick no farther
    than its model's reach: :meth:`strikeline.surfaces.SurfaceModel.is_extrapolated`'s rule on the
    picks the sheet wrote: its model's data unless boreholes add some or thinning leaves some out),
    or None when a sheet's picks or reach are unknown."""
    from scipy.spatial import cKDTree

    if any(s.data_xy is None or not len(s.data_xy) or s.reach_m is None for s in sheets):
        return None
    trees = [(cKDTree(s.data_xy), float(s.reach_m)) for s in sheets]

    def within(x, y):
        xy = np.column_stack([np.ravel(x), np.ravel(y)])
        ok = np.ones(len(xy), dtype=bool)
        for tree, reach in trees:
            bound = reach * (1.0 + 1e-9) + 1e-9  # a pick at exactly the reach is found
            ok &= tree.query(xy, distance_upper_bound=bound)[0] <= reach
        return ok
    return within


#: What the split of the elevation difference means, in batch.json's words.
REACH_NOTE = ("*_in_reach_m: where both sheets have picks within their model's reach, the surfaces interpret "
              "nearby data (a large difference there is worth a look); max_dz_extrapolated_m: where one or both "
              "extrapolate (their structure contours are forecasts), two sheets fitting their own surfaces can "
              "disagree by much")


def compare_edges(sheets: list[SheetOutputs], interval_of: dict) -> list[dict]:
    """The shared edge of every two sheets that model the same contact and whose footprints touch."""
    edges = []
    for i, a in enumerate(sheets):
        for b in sheets[i + 1:]:
            if a.contact is None or a.contact != b.contact:
                continue
            if a.footprint.is_empty or b.footprint.is_empty:
                continue
            line = shared_edge(a.footprint, b.footprint)
            if line is None:
                continue
            first, second = sorted((a, b), key=lambda s: s.name)
            rec = {"sheet_a": first.name, "sheet_b": second.name, "contact": a.contact, "geometry": line,
                   "length_m": float(line.length), "n_samples": 0, "n_levels": 0,
                   "interval_m": min(interval_of[a.name], interval_of[b.name])}
            if a.surface is None or b.surface is None:
                failed = ", ".join(s.name for s in (first, second) if s.surface is None)
                rec["note"] = f"not compared: no surface of sheet {failed}"
            elif a.crs_wkt != b.crs_wkt:
                rec["note"] = "not compared: the two sheets' surfaces are in different CRSs"
            else:
                (pa, ga), (pb, gb) = first.surface, second.surface
                cell = min(ga.cell_x_m, ga.cell_y_m, gb.cell_x_m, gb.cell_y_m)
                rec.update(edge_mismatch(line, surface_sampler(pa, ga), surface_sampler(pb, gb), cell_m=cell,
                                         interval_m=rec["interval_m"], in_reach=reach_test([first, second])))
                rec["note"] = (f"both surface grids sampled every {cell / 2:g} m along the edge (bilinear between "
                               "cell centres, extended linearly to the grid's edge); " + REACH_NOTE)
            edges.append(rec)
    return edges


def index_layers(sheets: list[SheetOutputs], edges: list[dict]) -> list:
    """The layers of index.gpkg (:data:`strikeline.vocabulary.INDEX_LAYERS`)."""
    foot_rows = [{"sheet": s.name, "status": s.status, "contact": s.contact, "error": s.error} for s in sheets]
    planes_g, planes_r = [], []
    att_g, att_r, con_g, con_r = [], [], [], []
    for s in sheets:
        pl = s.summary.get("plane")
        if pl and pl.get("centroid_m"):
            planes_g.append(shapely.Point(*pl["centroid_m"]))
            planes_r.append({"sheet": s.name, **{k: pl.get(k) for k in V.SHEET_PLANES.field_names if k != "sheet"}})
        g, r = _from_layer(s, s.attitudes, V.ATTITUDES)
        att_g += g
        att_r += r
        g, r = _from_layer(s, s.contours, V.STRUCTURE_CONTOURS, z_field="elevation_m")
        con_g += g
        con_r += r
    return [_layer(V.SHEETS, [s.footprint for s in sheets], foot_rows),
            _layer(V.SHEET_PLANES, planes_g, planes_r),
            _layer(V.SHEET_ATTITUDES, att_g, att_r),
            _layer(V.SHEET_CONTOURS, con_g, con_r),
            _layer(V.SHARED_EDGES, [e["geometry"] for e in edges], edges)]


def headline(plane: dict | None) -> str:
    """A sheet's plane in a few words for the index page."""
    if not plane:
        return ""
    if plane.get("quality") == "undetermined" or plane.get("dip_deg") is None:
        return f"undetermined ({plane.get('reason', '')})" if plane.get("reason") else "undetermined"

    def pm(v, h):
        return f"{v:.1f}" if h is None else f"{v:.1f} ± {h:.1f}"

    if plane.get("dip_direction_deg") is None:
        return f"dip {pm(plane['dip_deg'], plane.get('dip_ci95_deg'))}°, horizontal within its 95% confidence"
    return (f"dip {pm(plane['dip_deg'], plane.get('dip_ci95_deg'))}° toward "
            f"{pm(plane['dip_direction_deg'], plane.get('dip_direction_ci95_deg'))}° (grid north), "
            f"quality {plane.get('quality')}")


def _split_words(e: dict) -> str:
    """The elevation difference within reach of both sheets' data and where extrapolated, in words."""
    n = e.get("n_samples_in_reach")
    if n is None:
        return "not split (picks or reach unknown)" if e.get("median_dz_m") is not None else ""
    near = (f"median {e['median_dz_in_reach_m']:.2f} m, max {e['max_dz_in_reach_m']:.2f} m over {n} of "
            f"{e['n_samples']} samples" if n else "no sample within reach of both")
    far = e.get("max_dz_extrapolated_m")
    return html.escape(near + (f"; extrapolated: max {far:.2f} m" if far is not None else "; none extrapolated"))


def _warning_cell(warnings: list) -> str:
    """A sheet's warnings for the index page: how many, then each line (escaped)."""
    if not warnings:
        return "none"
    items = "".join(f"<li>{html.escape(w)}</li>" for w in warnings)
    return f"{len(warnings)} warning{'s' if len(warnings) != 1 else ''}<ul>{items}</ul>"


def index_page(sheets: list[SheetOutputs], out: Path, edges: list[dict]) -> str:
    """index.html: the caution, then one row per sheet (status, headline attitude, its report)."""
    report = getattr(V, "REPORT_FILE", None)
    esc = html.escape
    rows = []
    for s in sheets:
        folder = out / s.name
        link = esc(s.name)
        has_report = report and (folder / report).is_file()
        if has_report and s.status != "failed":
            link = f'<a href="{esc(s.name)}/{esc(report)}">{esc(s.name)}</a>'
        what = esc(s.error or headline(s.summary.get("plane")))
        if s.status == "failed" and s.earlier_utc is not None:
            when = s.earlier_utc.replace("T", " ").replace("Z", " UTC")
            earlier = (f' (<a href="{esc(s.name)}/{esc(report)}">the earlier report</a>)' if has_report else "")
            what += (f"<br>This run wrote nothing; its folder still holds the results of an earlier run, written "
                     f"{esc(when)} from that run's inputs and options{earlier}.")
        rows.append(f"<tr><td>{link}</td><td>{esc(s.status)}</td><td>{what}</td><td>{_warning_cell(s.warnings)}"
                    "</td></tr>")
    edge_rows = [f"<tr><td>{esc(e['sheet_a'])} / {esc(e['sheet_b'])}</td><td>{esc(e['contact'])}</td><td>"
                 + (f"median {e['median_dz_m']:.2f} m, max {e['max_dz_m']:.2f} m" if e.get("median_dz_m") is not None
                    else esc(e.get("note", ""))) + "</td><td>" + _split_words(e) + "</td><td>"
                 + (f"median {e['median_offset_m']:.1f} m, max {e['max_offset_m']:.1f} m"
                    if e.get("median_offset_m") is not None else "") + "</td></tr>" for e in edges]
    return "\n".join([
        "<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8"><title>strikeline batch</title>',
        "<style>body{font-family:sans-serif;max-width:60em;margin:2em auto}table{border-collapse:collapse}"
        "td,th{border:1px solid #888;padding:.3em .6em;text-align:left}.caution{border:2px solid #000;"
        "padding:.6em;font-weight:bold}</style></head><body>",
        f'<p class="caution">{esc(CAUTION)}</p>', "<h1>Sheets</h1>",
        "<table><tr><th>sheet</th><th>status</th><th>best-fit plane (95% half-widths), or the error</th>"
        "<th>warnings of its run</th></tr>",
        *rows, "</table>", "<h2>Shared edges</h2>",
        "<p>Both sheets' surfaces are compared along the edge they share. Where both sheets have data "
        "within reach (their structure contours drawn solid) the surfaces interpret nearby data, and a large "
        "difference is worth a look (a mistraced contact, a different model on either side, a surface curving "
        "within the reach); "
        "where one or both extrapolate (contours dashed as forecasts), sheets that each fit their own "
        "surface may disagree by much, the more the farther from data: that figure says how uncertain the "
        "forecasts are there, not that the edge is wrong.</p>",
        "<table><tr><th>sheets</th><th>contact</th><th>elevation difference (all of the edge)</th>"
        "<th>within reach of both sheets' data / where extrapolated</th><th>offset of equal-elevation "
        "crossings</th></tr>", *edge_rows, "</table>",
        f"<p>Layers of every sheet: {esc(V.INDEX_FILE)}; status, checksums and edges: {esc(V.BATCH_FILE)}.</p>",
        "</body></html>", ""])
