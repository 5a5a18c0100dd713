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
