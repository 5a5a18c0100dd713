"""How big a run will be, checked before any work starts.

Every option that scales a run's memory or time - the output grid (``--cell``, or the DEM's
cells), the DEM picks (``--pick-spacing``), the local-attitude windows (``--window``), the
structure-contour levels (``--interval``) and the resamples (``--resamples``) - is turned into a
count as soon as the inputs are loaded (the count needs their extent, length and relief), and
the run is refused in one line naming the option, the estimate and the limit when the count
would not fit :func:`strikeline.budget.memory_budget_bytes` (half the machine's memory) or a
stated limit. The estimates are upper-end figures of the chain's own arrays; they refuse values
that are off by orders of magnitude (a cell of 5 cm over a map sheet), not values near a limit.

Imports neither GDAL nor QGIS.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import shapely

from strikeline.attitude import DEFAULT_WINDOW_RESAMPLES
from strikeline.budget import (BLOCK_BYTES_PER_CELL, BYTES_PER_CELL, THICKNESS_BYTES_PER_CELL,
                               WINDOWED_BYTES_PER_CELL, budget_words, memory_budget_bytes, size_words)
from strikeline.errors import InputError
from strikeline.pipeline.option_table import CLI_OPTION_NAMES
from strikeline.pipeline.tiled import block_shape_of

#: Bytes per DEM pick (coordinates, source, contact, sigma, segment labels, k-d trees, windows'
#: member lists). Measured: 4.0 kB more for each further pick (peak resident memory, plane model,
#: the demo sheet's contacts picked every 1 m and every 0.2 m: 8.8 k and 44 k picks); 8 kB allows
#: for the other models (our choice).
BYTES_PER_PICK = 8000
#: Bytes per local-attitude window: its bootstrap normals (resamples x 3 float64) and summaries.
BYTES_PER_WINDOW = 24 * DEFAULT_WINDOW_RESAMPLES + 1000
#: Bytes per candidate centre of the grid of windows across the picks (its coordinates and the
#: list of picks found within the radius, mostly empty).
BYTES_PER_GRID_CENTRE = 200
#: Most structure-contour levels a run draws: lines 0.2 mm apart across a 400 mm wide sheet, more
#: than a map can show (our choice). Each level is a pass of GDAL's contour generator over the grid.
MAX_CONTOUR_LEVELS = 2000
#: Bytes per bootstrap resample and Monte Carlo draw of one plane (their normals, the draws'
#: chunks, the sorted copies for the percentiles). Measured: 146 bytes (peak resident memory of
#: ``strikeline.attitude.plane_confidence`` with 2 million resamples and draws of 100 points);
#: 300 with a margin (our choice).
BYTES_PER_RESAMPLE = 300
#: Most resample-pick operations of the bootstrap and Monte Carlo draws of one plane (resamples x
#: picks). Measured: 1.9e7 to 2.9e7 a second (``strikeline.attitude.plane_confidence``, 2,000 and
#: 20,000 points in blocks, 1,000 resamples and draws, on the project's 2-core test machine), so
#: 1e10 is some six to nine minutes: more than any interval needs (1,000 resamples of 10 million
#: picks; our choice).
MAX_RESAMPLE_WORK = 1e10


@dataclass(frozen=True)
class Estimate:
    """One size of a run: what drives it, how many items, the bytes (or work) they need, the limit."""

    option: str  # how the user names what drives it (a flag, a file)
    what: str  # the items counted, in words
    count: float
    need: float  # bytes, or units of work when ``unit`` says so
    limit: float
    fix: str
    unit: str = "bytes"

    @property
    def exceeded(self) -> bool:
        return not math.isfinite(self.need) or self.need > self.limit

    def message(self) -> str:
        if self.unit == "bytes":
            need = (f"which need about {size_words(self.need)}, more than this run's memory budget of "
                    f"{budget_words()}")
        else:
            need = f"more than the limit of {self.limit:g} {self.unit}"
        return f"{self.option}: about {self.count:.3g} {self.what}, {need}; {self.fix}"


def _lines_length_m(lyr) -> float:
    return 0.0 if lyr is None else float(shapely.length(lyr.geoms).sum())


def _extent(geoms) -> tuple[float, float]:
    xmin, ymin, xmax, ymax = shapely.total_bounds(geoms)
    return float(xmax - xmin), float(ymax - ymin)


def relief_m(inputs) -> float | None:
    """Elevation range of the inputs (DEM cells, contour elevations, borehole elevations)."""
    lo, hi = [], []
    for values in (inputs.dem, inputs.contour_elevations_m,
                   None if inputs.boreholes_xyz is None else inputs.boreholes_xyz[:, 2]):
        if values is None:
            continue
        if getattr(values, "minimum", None) is not None and hasattr(values, "sample_bilinear"):
            lo.append(values.minimum)  # a DEM in its file: its range was found when it was opened
            hi.append(values.maximum)
            continue
        v = np.asarray(values, dtype=float)
        if np.isfinite(v).any():
            lo.append(np.nanmin(v))
            hi.append(np.nanmax(v))
    return float(max(hi) - min(lo)) if lo else None


def estimate_workload(inputs, opts, *, grid=None, names: dict | None = None, auto_blocks: bool = True
                      ) -> list[Estimate]:
    """The sizes of a run on loaded ``inputs`` (:class:`~strikeline.pipeline.inputs.Inputs`) with
    ``opts`` (:class:`~strikeline.pipeline.options.RunOptions`), each with its limit.

    ``grid`` is the output grid (:class:`~strikeline.geometry.grid.Grid`; default the DEM's);
    ``names`` says how to name the options (default the command line's flags); ``auto_blocks``
    says whether a large grid may go block by block (:func:`strikeline.pipeline.tiled.block_shape_of`).
    """
    names = names or CLI_OPTION_NAMES
    budget = memory_budget_bytes()
    out = []
    contacts = [inputs.contacts] + ([inputs.top_contacts] if inputs.top_contacts is not None else [])
    length = sum(_lines_length_m(c) for c in contacts)
    n_vertices = sum(int(shapely.get_num_coordinates(c.geoms).sum()) for c in contacts)
    # ---- the output grid: its arrays in memory, or block by block (strikeline.pipeline.tiled), where
    # what still grows with the cells is the DEM read whole and the arrays made from it
    if grid is not None or inputs.dem_grid is not None:
        g = grid if grid is not None else inputs.dem_grid
        cells = float(g.rows) * float(g.cols)
        per_cell = BYTES_PER_CELL if block_shape_of(g, opts, auto=auto_blocks) is None else BLOCK_BYTES_PER_CELL
        if per_cell == BLOCK_BYTES_PER_CELL and hasattr(inputs.dem, "sample_bilinear"):  # the DEM read by windows
            per_cell = WINDOWED_BYTES_PER_CELL + (THICKNESS_BYTES_PER_CELL if inputs.top_contacts is not None else 0)
            if g is not inputs.dem_grid and not (g.shape == inputs.dem_grid.shape
                                                 and g.transform == inputs.dem_grid.transform):
                per_cell += 8  # the DEM resampled onto another grid is an array (dem_access.ground_on_grid)
        if opts.cell_m is not None or inputs.dem_grid is None:
            named = names.get("cell_m", "cell_m")
            out.append(Estimate(named, f"output grid cells of {g.cell_x_m:g} m ({g.cols} x {g.rows})", cells,
                                cells * per_cell, budget,
                                f"give {named} a larger value (leave it out for the DEM's cells, or about 1/500 of "
                                "the extent without a DEM)"))
        else:
            out.append(Estimate(f"DEM '{inputs.paths.get('dem', 'in memory')}'",
                                f"output grid cells (the DEM's {g.cols} x {g.rows})", cells,
                                cells * per_cell, budget,
                                "clip the DEM to the area of the contacts (gdalwarp -te) or coarsen it "
                                "(gdalwarp -tr)"))
    # ---- DEM picks along the contacts
    n_picks = float(n_vertices)
    if inputs.dem_grid is not None:
        spacing = opts.pick_spacing_m or min(inputs.dem_grid.cell_x_m, inputs.dem_grid.cell_y_m)
        n_picks = length / spacing + n_vertices
        named = names.get("pick_spacing_m", "pick_spacing_m")
        out.append(Estimate(named, f"DEM picks every {spacing:g} m along {length:.0f} m of contacts", n_picks,
                            n_picks * BYTES_PER_PICK, budget,
                            f"give {named} a larger value (leave it out for one pick per DEM cell)"))
    # ---- local-attitude windows
    if opts.window_m is not None:
        w, h = _extent(np.concatenate([c.geoms for c in contacts]))
        along = length / opts.window_m + len(inputs.contacts)
        grid = (math.floor(w / opts.window_m) + 1.0) * (math.floor(h / opts.window_m) + 1.0)
        named = names.get("window_m", "window_m")
        out.append(Estimate(named, f"local-attitude windows of {opts.window_m:g} m radius ({along:.3g} along the "
                            f"contacts, {grid:.3g} grid centres across them)", along + grid,
                            along * BYTES_PER_WINDOW + grid * BYTES_PER_GRID_CENTRE, budget,
                            f"give {named} a larger value (leave it out for about 50 picks per window)"))
    # ---- structure-contour levels
    relief = relief_m(inputs)
    if relief is not None and opts.interval_m:
        levels = relief / opts.interval_m + 1.0
        named = names.get("interval_m", "interval_m")
        out.append(Estimate(named, f"structure-contour levels at {opts.interval_m:g} m over the inputs' "
                            f"{relief:.0f} m of relief", levels, levels, MAX_CONTOUR_LEVELS,
                            f"give {named} a larger value, e.g. {_round_interval(relief)} m", unit="levels"))
    # ---- resamples and Monte Carlo draws of the plane's confidence
    if getattr(opts, "resamples", None):
        out += resample_estimates(opts.resamples, n_picks, names=names)
    return out


def resample_estimates(resamples: int, n_points: float, *, names: dict | None = None) -> list[Estimate]:
    """The memory and the work of ``resamples`` bootstrap resamples and Monte Carlo draws of one plane
    of ``n_points`` points."""
    named = (names or CLI_OPTION_NAMES).get("resamples", "resamples")
    fix = f"give {named} a smaller value (1000 give percentile intervals; Efron & Tibshirani 1993, ch. 13)"
    work = float(resamples) * float(n_points)
    return [Estimate(named, "resamples and draws of the plane", float(resamples),
                     float(resamples) * BYTES_PER_RESAMPLE, memory_budget_bytes(), fix),
            Estimate(named, f"resample-pick operations ({resamples} resamples x about {n_points:.3g} picks)", work,
                     work, MAX_RESAMPLE_WORK, fix, unit="resample-pick operations")]


def check_resamples(resamples: int, n_points: float, *, names: dict | None = None) -> None:
    """Refuse ``resamples`` whose memory or work on ``n_points`` points exceeds its limit (for
    commands and tools that fit a plane to points without the whole chain)."""
    for e in resample_estimates(resamples, n_points, names=names):
        if e.exceeded:
            raise InputError(e.message())


def _round_interval(relief: float) -> str:
    """A round interval giving about 20 levels over ``relief``."""
    raw = max(relief / 20.0, 1e-3)
    mag = 10 ** math.floor(math.log10(raw))
    return f"{min((m * mag for m in (1, 2, 5, 10) if m * mag >= raw), default=raw):g}"


def check_workload(inputs, opts, *, grid=None, names: dict | None = None, auto_blocks: bool = True
                   ) -> list[Estimate]:
    """Refuse a run whose size (:func:`estimate_workload`) exceeds its limits, in one line naming the
    option, the estimate and the limit; returns the estimates otherwise."""
    estimates = estimate_workload(inputs, opts, grid=grid, names=names, auto_blocks=auto_blocks)
    for e in estimates:
        if e.exceeded:
            raise InputError(e.message())
    return estimates
