"""The geological map's unit polygons as inequality constraints on a contact surface.

Where a unit that lies *above* the modelled contact crops out, the contact is below ground there:
``z_surface(x, y) <= DEM(x, y)``; where a unit that lies *below* it crops out, the contact is above
ground: ``z_surface(x, y) >= DEM(x, y)``. Polygons of other units (superficial deposits, water,
units the user did not place) say nothing and are ignored.

:func:`unit_bounds` turns the polygons into such inequalities at sample points: a square lattice
over the polygons, points kept only a margin inside the boundary of the units of each side (so
that digitising error along the mapped contact does not turn into a contradiction with the picks
on it) and only where the DEM has a value. Each point carries ``lo <= z <= hi`` with one side
infinite; the other side is the DEM loosened by a tolerance (the DEM's vertical error).
:func:`strikeline.surfaces.fit_surface` honours them (``bounds=``);
:func:`bound_violation_m` measures by how much a surface still breaks them.

No GDAL here: polygons are shapely geometries, the DEM a float array with its
:class:`~strikeline.geometry.grid.Grid`.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely

from strikeline.errors import InputError
from strikeline.geometry.grid import Grid, check_grid_array
from strikeline.picks import sample_bilinear

__all__ = ["UNIT_SIDES", "UnitBounds", "unit_bounds", "bound_violation_m", "parse_unit_names"]

#: The sides a unit can lie on, relative to the modelled surface.
UNIT_SIDES = ("above", "below")
#: Default number of constraint points (upper bound; the lattice spacing follows from it).
DEFAULT_MAX_POINTS = 2000
#: Default margin inside the polygons, in DEM cells.
MARGIN_CELLS = 2.0
#: Smallest lattice spacing, in DEM cells (closer points carry no new information).
MIN_SPACING_CELLS = 1.0


@dataclass(frozen=True)
class UnitBounds:
    """Inequality constraints from unit polygons.

    Attributes
    ----------
    bounds : ndarray, shape ``(m, 4)``
        ``x, y, lo, hi`` (metres): the surface must satisfy ``lo <= z(x, y) <= hi``; ``lo`` is
        ``-inf`` under a unit above the surface, ``hi`` is ``+inf`` under a unit below it.
    unit : ndarray of str, shape ``(m,)``
        The unit mapped at each point.
    side : ndarray of str, shape ``(m,)``
        ``'above'`` or ``'below'``: where that unit lies relative to the surface.
    ground_m : ndarray, shape ``(m,)``
        The DEM at each point (bilinear between cell centres).
    spacing_m, margin_m, tolerance_m : float
        Lattice spacing, margin inside the polygons and the tolerance added to the DEM.
    """

    bounds: np.ndarray
    unit: np.ndarray
    side: np.ndarray
    ground_m: np.ndarray
    spacing_m: float
    margin_m: float
    tolerance_m: float

    def __len__(self) -> int:
        return len(self.bounds)

    @property
    def n_above(self) -> int:
        """Points under a unit above the surface (the surface must stay below ground)."""
        return int(np.count_nonzero(self.side == "above"))

    @property
    def n_below(self) -> int:
        """Points under a unit below the surface (the surface must stay above ground)."""
        return int(np.count_nonzero(self.side == "below"))


def parse_unit_names(text) -> tuple:
    """Unit names from a comma-separated string (or a sequence), stripped, empties dropped.

    >>> parse_unit_names(" Kv, Kl ,,Jm")
    ('Kv', 'Kl', 'Jm')
    """
    if text is None:
        return ()
    items = text.split(",") if isinstance(text, str) else [str(t) for t in text]
    out = []
    for t in (s.strip() for s in items):
        if t and t not in out:
            out.append(t)
    return tuple(out)


def _side_union(polygons, labels, names):
    keep = np.isin(labels, np.asarray(names, dtype=object)) if len(names) else np.zeros(len(labels), bool)
    if not keep.any():
        return None
    return shapely.union_all(shapely.make_valid(polygons[keep]))


def _lattice(bounds, spacing):
    xmin, ymin, xmax, ymax = bounds
    # Anchored at multiples of the spacing, so the same map gives the same points.
    x0 = (np.floor(xmin / spacing) + 0.5) * spacing
    y0 = (np.floor(ymin / spacing) + 0.5) * spacing
    xs = np.arange(x0, xmax, spacing)
    ys = np.arange(y0, ymax, spacing)
    X, Y = np.meshgrid(xs, ys)
    return X.ravel(), Y.ravel()


def unit_bounds(polygons, units, dem, grid: Grid, *, units_above=(), units_below=(),
                spacing_m: float | None = None, margin_m: float | None = None,
                tolerance_m: float = 0.0, max_points: int = DEFAULT_MAX_POINTS) -> UnitBounds:
    """Inequality constraints on a surface from the unit polygons of a geological map.

    Parameters
    ----------
    polygons : array_like of shapely (Multi)Polygons, shape ``(k,)``
        The map's unit polygons, in the DEM's CRS (metres).
    units : array_like, shape ``(k,)``
        The unit of each polygon (compared as text).
    dem : ndarray, shape ``grid.shape``
        Ground elevation (metres), NaN for nodata.
    grid : Grid
        The DEM's georeferencing.
    units_above, units_below : sequence of str or str
        Units that lie above / below the modelled surface (a string is split at commas).
        Polygons of other units are ignored.
    spacing_m : float, optional
        Lattice spacing. Default: the spacing that puts about ``max_points`` points into the
        polygons of the two sides (their eroded area), at least one DEM cell.
    margin_m : float, optional
        Points stay this far inside the outline of the units of their side (default two DEM
        cells). Boundaries between two units of the same side are not contacts of the surface
        and need no margin: the polygons of a side are merged first.
    tolerance_m : float, default 0
        The DEM is loosened by this much: ``hi = DEM + tolerance`` above, ``lo = DEM − tolerance``
        below (the DEM's vertical error).
    max_points : int, default 2000
        Most points returned; a denser lattice is thinned by widening the spacing.

    Returns
    -------
    UnitBounds

    Raises
    ------
    InputError
        A unit in both lists, lists that name no unit of the polygons (the message lists the
        units found), shapes that do not match, or a negative margin or tolerance.

    Notes
    -----
    A point in polygons of both sides (overlapping polygons) is dropped. The constraints are
    point conditions: between lattice points a surface may still cross the ground; the caller
    can check a denser lattice (a smaller ``spacing_m``) with :func:`bound_violation_m`.

    Examples
    --------
    >>> import numpy as np, shapely
    >>> from strikeline.geometry.grid import Grid
    >>> g = Grid((0.0, 10.0, 0.0, 1000.0, 0.0, -10.0), (100, 100))
    >>> dem = np.full(g.shape, 100.0)
    >>> polys = [shapely.box(0, 0, 500, 1000), shapely.box(500, 0, 1000, 1000)]
    >>> ub = unit_bounds(polys, ["Kv", "Jm"], dem, g, units_above=["Kv"], units_below="Jm",
    ...                  spacing_m=100.0)
    >>> ub.n_above, ub.n_below, ub.bounds[0].tolist()
    (50, 50, [50.0, 50.0, -inf, 100.0])
    """
    polygons = np.asarray(polygons, dtype=object).reshape(-1)
    labels = np.array([None if u is None else str(u) for u in np.asarray(units, dtype=object).reshape(-1)],
                      dtype=object)
    if len(labels) != len(polygons):
        raise InputError(f"units must give one unit per polygon: {len(labels)} for {len(polygons)}")
    dem = check_grid_array(dem, grid, "dem")
    above, below = parse_unit_names(units_above), parse_unit_names(units_below)
    both = sorted(set(above) & set(below))
    if both:
        raise InputError(f"unit(s) {', '.join(both)} listed both above and below the surface; "
                         "name each unit on one side only")
    if not above and not below:
        raise InputError("no unit named above or below the surface; name at least one")
    found = sorted({u for u in labels if u is not None})
    missing = [u for u in above + below if u not in found]
    if missing:
        raise InputError(f"unit(s) {', '.join(missing)} not found among the polygons' units "
                         f"({', '.join(found) or 'none'}); use the names as mapped")
    cell = max(grid.cell_x_m, grid.cell_y_m)
    margin = MARGIN_CELLS * cell if margin_m is None else float(margin_m)
    if not (np.isfinite(margin) and margin >= 0):
        raise InputError(f"margin_m must be zero or a positive distance in metres, got {margin_m}")
    tol = float(tolerance_m)
    if not (np.isfinite(tol) and tol >= 0):
        raise InputError(f"tolerance_m must be zero or a positive number of metres, got {tolerance_m}")
    if int(max_points) < 1:
        raise InputError(f"max_points must be at least 1, got {max_points}")
    if spacing_m is not None and not (np.isfinite(spacing_m) and spacing_m > 0):
        raise InputError(f"spacing_m must be a positive distance in metres, got {spacing_m}")

    frame = shapely.box(*grid.bounds)
    sides = {}
    for name, names in (("above", above), ("below", below)):
        u = _side_union(polygons, labels, names)
        if u is not None:
            u = shapely.intersection(shapely.buffer(u, -margin) if margin > 0 else u, frame)
            if not u.is_empty:
                shapely.prepare(u)
                sides[name] = u
    empty = UnitBounds(np.empty((0, 4)), np.empty(0, dtype=object), np.empty(0, dtype=object),
                       np.empty(0), float(spacing_m or np.nan), margin, tol)
    if not sides:
        return empty
    area = sum(g.area for g in sides.values())
    spacing = float(spacing_m) if spacing_m is not None else \
        max(np.sqrt(area / int(max_points)), MIN_SPACING_CELLS * min(grid.cell_x_m, grid.cell_y_m))
    box = shapely.bounds(shapely.union_all(list(sides.values())))
    for _ in range(8):
        X, Y = _lattice(box, spacing)
        ina = shapely.contains_xy(sides["above"], X, Y) if "above" in sides else np.zeros(len(X), bool)
        inb = shapely.contains_xy(sides["below"], X, Y) if "below" in sides else np.zeros(len(X), bool)
        keep = ina ^ inb
        z = np.full(len(X), np.nan)
        z[keep] = sample_bilinear(dem, grid, X[keep], Y[keep])
        keep &= np.isfinite(z)
        if np.count_nonzero(keep) <= int(max_points):
            break
        spacing *= 1.02 * np.sqrt(np.count_nonzero(keep) / int(max_points))
    else:  # pragma: no cover - the spacing grows geometrically, eight rounds always suffice
        idx = np.flatnonzero(keep)
        keep[:] = False
        keep[idx[np.linspace(0, len(idx) - 1, int(max_points)).astype(int)]] = True
    X, Y, z, ina = X[keep], Y[keep], z[keep], ina[keep]
    if len(X) == 0:
        return UnitBounds(empty.bounds, empty.unit, empty.side, empty.ground_m, spacing, margin, tol)
    lo = np.where(ina, -np.inf, z - tol)
    hi = np.where(ina, z + tol, np.inf)
    side = np.where(ina, "above", "below").astype(object)
    unit = np.empty(len(X), dtype=object)
    for name in above + below:
        m = labels == name
        if not m.any():
            continue
        g = shapely.union_all(shapely.make_valid(polygons[m]))
        shapely.prepare(g)
        inside = shapely.intersects_xy(g, X, Y)
        want = "above" if name in above else "below"
        unit[inside & (side == want) & (unit == None)] = name  # noqa: E711 - object array
    return UnitBounds(np.column_stack([X, Y, lo, hi]), unit, side, z, spacing, margin, tol)


def bound_violation_m(bounds, z) -> np.ndarray:
    """By how much values break their bounds: ``max(lo − z, z − hi, 0)`` per row (metres).

    Parameters
    ----------
    bounds : array_like, shape ``(m, 4)``
        ``x, y, lo, hi`` as :attr:`UnitBounds.bounds`.
    z : array_like, shape ``(m,)``
        The surface at the points.

    >>> bound_violation_m([[0, 0, -np.inf, 10.0], [0, 0, 5.0, np.inf]], [12.0, 6.0]).tolist()
    [2.0, 0.0]
    """
    b = np.asarray(bounds, dtype=float).reshape(-1, 4)
    z = np.asarray(z, dtype=float).reshape(-1)
    if len(z) != len(b):
        raise InputError(f"z must give one value per bound: {len(z)} for {len(b)}")
    with np.errstate(invalid="ignore"):
        v = np.maximum(np.maximum(b[:, 2] - z, z - b[:, 3]), 0.0)
    return v
