"""The georeferencing of a raster grid, free of GDAL.

A :class:`Grid` is what the numerical modules need to know about a raster: its affine
geotransform (GDAL's six-number convention), its shape, its CRS (as WKT, or ``""``) and its
nodata value. Arrays are indexed ``[row, col]`` with row 0 at the top (north-up grids).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from strikeline.errors import InputError


@dataclass(frozen=True)
class Grid:
    """Georeferencing of a north-up raster grid.

    Parameters
    ----------
    transform : tuple of 6 float
        GDAL geotransform ``(x0, dx, 0, y0, 0, dy)``: ``x0, y0`` the outer corner of the
        top-left cell, ``dx > 0`` the cell width, ``dy < 0`` the (negative) cell height, in
        the CRS's units (metres).
    shape : tuple of 2 int
        ``(rows, cols)``.
    crs_wkt : str
        The CRS as WKT; ``""`` when unknown.
    nodata : float or None
        The nodata value of the band, if any.
    """

    transform: tuple
    shape: tuple
    crs_wkt: str = ""
    nodata: float | None = None

    def __post_init__(self):
        t = tuple(float(v) for v in self.transform)
        if len(t) != 6:
            raise InputError(f"grid transform must have 6 numbers, got {len(t)}")
        if t[2] != 0.0 or t[4] != 0.0:
            raise InputError(
                "rotated or sheared rasters are not supported; warp the raster north-up first "
                "(for example with gdalwarp)"
            )
        if t[1] <= 0 or t[5] >= 0:
            raise InputError(
                f"grid cells must have positive width and negative height, got {t[1]} and {t[5]}; "
                "flip the raster north-up first"
            )
        object.__setattr__(self, "transform", t)
        object.__setattr__(self, "shape", (int(self.shape[0]), int(self.shape[1])))

    @property
    def rows(self) -> int:
        return self.shape[0]

    @property
    def cols(self) -> int:
        return self.shape[1]

    @property
    def cell_x_m(self) -> float:
        """Cell width (positive)."""
        return self.transform[1]

    @property
    def cell_y_m(self) -> float:
        """Cell height (positive)."""
        return -self.transform[5]

    @property
    def bounds(self) -> tuple:
        """``(xmin, ymin, xmax, ymax)`` of the outer cell edges."""
        x0, dx, _, y0, _, dy = self.transform
        return (x0, y0 + dy * self.rows, x0 + dx * self.cols, y0)

    @classmethod
    def from_bounds(cls, xmin, ymin, xmax, ymax, *, cell_m, crs_wkt="", nodata=None) -> "Grid":
        """A grid of square ``cell_m`` cells covering the bounds (rounded outward)."""
        if not cell_m > 0:
            raise InputError(f"cell size must be positive, got {cell_m}")
        cols = max(1, int(np.ceil((xmax - xmin) / cell_m - 1e-9)))
        rows = max(1, int(np.ceil((ymax - ymin) / cell_m - 1e-9)))
        return cls((float(xmin), float(cell_m), 0.0, float(ymax), 0.0, -float(cell_m)),
                   (rows, cols), crs_wkt, nodata)

    @classmethod
    def aligned(cls, xmin, ymin, xmax, ymax, *, cell_m, crs_wkt="", nodata=None) -> "Grid":
        """A grid of square ``cell_m`` cells covering the bounds, its corners on multiples of the
        cell size (the bounds widened outward to the nearest multiples), so that grids of the same
        cell over neighbouring sheets share cell edges and tile without gaps or overlaps.

        >>> Grid.aligned(103.0, 207.0, 151.0, 260.0, cell_m=10.0).transform
        (100.0, 10.0, 0.0, 260.0, 0.0, -10.0)
        """
        check_extent((xmin, ymin, xmax, ymax), allow_empty=True)
        if not (np.isfinite(cell_m) and cell_m > 0):
            raise InputError(f"cell size must be a positive number of metres, got {cell_m}")
        # a bound already on a multiple (to a millionth of a cell) is kept, not widened a cell
        c0 = np.floor(xmin / cell_m + 1e-6)
        r0 = np.ceil(ymax / cell_m - 1e-6)
        c1 = max(np.ceil(xmax / cell_m - 1e-6), c0 + 1)
        r1 = min(np.floor(ymin / cell_m + 1e-6), r0 - 1)
        return cls((float(c0 * cell_m), float(cell_m), 0.0, float(r0 * cell_m), 0.0, -float(cell_m)),
                   (int(r0 - r1), int(c1 - c0)), crs_wkt, nodata)

    def cell_centres(self) -> tuple[np.ndarray, np.ndarray]:
        """1-D coordinates of cell centres: ``(x of each column, y of each row)``."""
        x0, dx, _, y0, _, dy = self.transform
        xs = x0 + dx * (np.arange(self.cols) + 0.5)
        ys = y0 + dy * (np.arange(self.rows) + 0.5)
        return xs, ys

    def mesh(self) -> tuple[np.ndarray, np.ndarray]:
        """2-D arrays ``(X, Y)`` of cell-centre coordinates, each of shape ``(rows, cols)``."""
        xs, ys = self.cell_centres()
        return np.meshgrid(xs, ys)

    def xy_to_colrow(self, x, y) -> tuple[np.ndarray, np.ndarray]:
        """Fractional pixel coordinates of points; the centre of cell (r, c) is at (c, r)."""
        x0, dx, _, y0, _, dy = self.transform
        col = (np.asarray(x, dtype=float) - x0) / dx - 0.5
        row = (np.asarray(y, dtype=float) - y0) / dy - 0.5
        return col, row

    def with_nodata(self, nodata) -> "Grid":
        return Grid(self.transform, self.shape, self.crs_wkt, nodata)


def check_grid_array(array, grid: "Grid | None", name: str) -> np.ndarray:
    """Check that an array is a 2-D float band (NaN for nodata) of the grid's shape; return it."""
    z = np.asarray(array)
    if z.ndim != 2:
        raise InputError(
            f"{name} must be a 2-D array (rows, cols), got {z.ndim} dimension(s); pass one band"
        )
    if not np.issubdtype(z.dtype, np.floating):
        raise InputError(
            f"{name} must be a float array with NaN for nodata, got dtype {z.dtype}; convert it "
            "with astype(float) and set nodata cells to NaN"
        )
    if grid is not None and tuple(z.shape) != tuple(grid.shape):
        raise InputError(
            f"{name} has shape {z.shape} but its grid has shape {grid.shape}; pass the grid that "
            "belongs to the array"
        )
    return z


def max_grid_cells() -> int:
    """Most cells an output grid may have: the run's memory budget over the chain's bytes per cell
    (:data:`strikeline.budget.BYTES_PER_CELL`), the same limit as the run's workload check
    (:mod:`strikeline.pipeline.workload`), so a tool that makes a grid alone refuses what the run
    refuses."""
    from strikeline.budget import BYTES_PER_CELL, memory_budget_bytes

    return int(memory_budget_bytes() // BYTES_PER_CELL)


def check_extent(extent, *, what: str = "--extent", allow_empty: bool = False) -> tuple:
    """``(xmin, ymin, xmax, ymax)`` as floats, refused in one line unless four finite numbers with
    ``xmin < xmax`` and ``ymin < ymax`` (equal allowed with ``allow_empty``)."""
    try:
        vals = tuple(float(v) for v in extent)
    except (TypeError, ValueError):
        raise InputError(f"{what} must be four numbers XMIN YMIN XMAX YMAX, got {extent!r}") from None
    if len(vals) != 4 or not all(np.isfinite(vals)):
        raise InputError(f"{what} must be four finite numbers XMIN YMIN XMAX YMAX, got {extent!r}")
    xmin, ymin, xmax, ymax = vals
    bad = (xmin > xmax or ymin > ymax) if allow_empty else (xmin >= xmax or ymin >= ymax)
    if bad:
        raise InputError(f"{what} {xmin:g} {ymin:g} {xmax:g} {ymax:g}: XMIN must be less than XMAX and YMIN less "
                         "than YMAX; give the corners in the order XMIN YMIN XMAX YMAX")
    return vals


def auto_cell_m(bounds) -> float:
    """About 1/500 of the larger side of ``bounds``, rounded up to 1, 2 or 5 times a power of ten
    (a round cell size; common practice for map grids)."""
    xmin, ymin, xmax, ymax = bounds
    raw = max(xmax - xmin, ymax - ymin) / 500.0
    if not raw > 0:
        return 1.0
    mag = 10 ** np.floor(np.log10(raw))
    return float(min((m * mag for m in (1, 2, 5, 10) if m * mag >= raw * (1 - 1e-12)), default=raw))


def check_grid_size(grid: "Grid", *, what: str = "the output grid", fix: str = "give a larger --cell or a "
                    "smaller --extent") -> None:
    """Refuse a grid of more than :func:`max_grid_cells` cells, before any work, in one line."""
    from strikeline.budget import budget_words

    n, most = grid.rows * grid.cols, max_grid_cells()
    if n > most:
        raise InputError(f"{what} would have {grid.rows} x {grid.cols} = {n:,} cells of {grid.cell_x_m:g} m, more "
                         f"than the {most:,} that fit the memory budget of {budget_words()}; {fix}")
