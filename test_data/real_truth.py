"""The analytic truth of the real-terrain test sheets in ``test_data/real/``.

Two real DEMs (``lidar``: 1 m lidar, 400 x 400 cells; ``volcano``: R's ``volcano`` matrix,
10 m cells) carry invented geological surfaces whose outcrop traces were cut from the DEM by
``test_data/make_real_sheets.py``. Each sheet folder ``test_data/real/<dem>/<case>/`` holds
``contacts.gpkg`` (layer ``contacts``: the traces as a geologist would digitise them; layer
``exact_trace``: the exact zero line of DEM - surface), ``truth.json`` and, for
``fold_units``, ``units.gpkg`` (layer ``units``).

This module needs numpy and shapely only (no GDAL), so tests and benchmarks can evaluate the
true surface anywhere::

    sys.path.insert(0, str(REPO / "test_data"))
    import real_truth
    truth = real_truth.load_truth("volcano", "fold")
    z = real_truth.truth_surface(truth, x, y)

Conventions as in the rest of strikeline: x east, y north, z up, metres; dip direction
clockwise from grid north; strike = dip direction - 90 (right-hand rule).

Surfaces (``truth["kind"]``), with ``(x0, y0, z0) = truth["point"]``, dip ``d`` toward ``a``::

    plane          z = z0 - tan(d) * ((x - x0) sin a + (y - y0) cos a)
    fold           z = plane + A sin(2 pi s / L),  s = (x - x0) sin b + (y - y0) cos b
                   (A = amplitude_m, L = wavelength_m, b = s_azimuth_deg = axis_trend_deg + 90)
    faulted_plane  z = plane on the up block, plane - throw_m on the down block; the blocks are
                   the two sides of the vertical fault through fault_wkt (a straight line),
                   down_side = "left" or "right" looking along the line from its first vertex
    horizontal     z = level_m
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import shapely

ROOT = Path(__file__).resolve().parent / "real"

DEMS = ("lidar", "volcano")
CASES = ("plane", "fold", "mistraced", "fault", "horizontal", "fold_units")
KINDS = ("plane", "fold", "faulted_plane", "horizontal")

__all__ = ["DEMS", "CASES", "KINDS", "ROOT", "case_paths", "load_truth", "truth_surface",
           "truth_gradient", "mistrace_geometry", "fault_line", "down_block"]


def _check(dem: str, case: str) -> None:
    if dem not in DEMS:
        raise ValueError(f"dem must be one of {', '.join(DEMS)}; got {dem!r}")
    if case not in CASES:
        raise ValueError(f"case must be one of {', '.join(CASES)}; got {case!r}")


def case_paths(dem: str, case: str, *, root: Path | str | None = None) -> dict:
    """Paths of one sheet: ``dem`` (GeoTIFF), ``contacts`` (GeoPackage, first layer
    ``contacts``, second ``exact_trace``), ``units`` (GeoPackage with layer ``units``, or None),
    ``truth`` (JSON). ``root`` defaults to ``test_data/real``."""
    _check(dem, case)
    base = Path(root) if root is not None else ROOT
    folder = base / dem / case
    units = folder / "units.gpkg"
    return {
        "dem": base / dem / "dem.tif",
        "contacts": folder / "contacts.gpkg",
        "units": units if case == "fold_units" else None,
        "truth": folder / "truth.json",
    }


def load_truth(dem: str, case: str, *, root: Path | str | None = None) -> dict:
    """The parsed ``truth.json`` of one sheet."""
    return json.loads(case_paths(dem, case, root=root)["truth"].read_text())


def _plane_parts(truth):
    x0, y0, z0 = (float(v) for v in truth["point"])
    dip = math.radians(float(truth["dip_deg"]))
    azi = math.radians(float(truth["dip_direction_deg"]))
    return x0, y0, z0, math.tan(dip), math.sin(azi), math.cos(azi)


def _fold_parts(truth):
    b = math.radians(float(truth["s_azimuth_deg"]))
    return float(truth["amplitude_m"]), float(truth["wavelength_m"]), math.sin(b), math.cos(b)


def fault_line(truth: dict) -> shapely.LineString:
    """The trace of the vertical fault (a straight LineString across the sheet)."""
    if truth["kind"] != "faulted_plane":
        raise ValueError(f"truth of kind {truth['kind']!r} has no fault; only 'faulted_plane' has")
    return shapely.from_wkt(truth["fault_wkt"])


def down_block(truth: dict, x, y) -> np.ndarray:
    """True where (x, y) lies on the downthrown side of the fault (points on the line: False)."""
    line = shapely.get_coordinates(fault_line(truth))
    (ax, ay), (bx, by) = line[0], line[-1]
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    cross = (bx - ax) * (y - ay) - (by - ay) * (x - ax)  # > 0: left of a -> b
    if truth["down_side"] == "left":
        return cross > 0
    if truth["down_side"] == "right":
        return cross < 0
    raise ValueError(f"down_side must be 'left' or 'right'; got {truth['down_side']!r}")


def truth_surface(truth: dict, x, y) -> np.ndarray:
    """Elevation (m) of the true surface at points ``x``, ``y`` (arrays of any one shape)."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    kind = truth["kind"]
    if kind == "horizontal":
        return np.full(np.broadcast(x, y).shape, float(truth["level_m"]))
    if kind not in KINDS:
        raise ValueError(f"kind must be one of {', '.join(KINDS)}; got {kind!r}")
    x0, y0, z0, t, sa, ca = _plane_parts(truth)
    z = z0 - t * ((x - x0) * sa + (y - y0) * ca)
    if kind == "fold":
        amp, lam, sb, cb = _fold_parts(truth)
        s = (x - x0) * sb + (y - y0) * cb
        z = z + amp * np.sin(2.0 * np.pi * s / lam)
    elif kind == "faulted_plane":
        z = z - float(truth["throw_m"]) * down_block(truth, x, y)
    return z


def truth_gradient(truth: dict, x, y) -> tuple[np.ndarray, np.ndarray]:
    """Analytic ``(dz/dx, dz/dy)`` of the true surface (the fault's step is left out)."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    shape = np.broadcast(x, y).shape
    kind = truth["kind"]
    if kind == "horizontal":
        return np.zeros(shape), np.zeros(shape)
    if kind not in KINDS:
        raise ValueError(f"kind must be one of {', '.join(KINDS)}; got {kind!r}")
    x0, y0, _, t, sa, ca = _plane_parts(truth)
    gx = np.full(shape, -t * sa)
    gy = np.full(shape, -t * ca)
    if kind == "fold":
        amp, lam, sb, cb = _fold_parts(truth)
        s = (x - x0) * sb + (y - y0) * cb
        k = amp * 2.0 * np.pi / lam * np.cos(2.0 * np.pi * s / lam)
        gx = gx + k * sb
        gy = gy + k * cb
    return gx, gy


def mistrace_geometry(truth: dict, which: str = "mapped"):
    """Geometry of the mistraced stretch: ``"mapped"`` (the wrongly digitised line, ramps
    included), ``"exact"`` (the same stretch of the exact trace) or ``"zone"`` (a polygon
    covering both, buffered by ``zone_buffer_m``)."""
    if "mistrace" not in truth:
        raise ValueError(f"case {truth.get('case')!r} has no mistraced stretch; only 'mistraced' has")
    keys = {"mapped": "mapped_wkt", "exact": "exact_wkt", "zone": "zone_wkt"}
    if which not in keys:
        raise ValueError(f"which must be one of {', '.join(keys)}; got {which!r}")
    return shapely.from_wkt(truth["mistrace"][keys[which]])
