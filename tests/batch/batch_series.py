"""A small invented map series for the batch tests: neighbouring sheets cut from one ground and one
planar contact, and a sheet whose contact lies higher.

The contact is the plane ``z = Z0 + A*u + B*v`` (``u, v``: metres east and north of the series'
origin). The ground is the plane plus ``H * sin(2 pi u / LU) * cos(2 pi v / LV)``, so it meets the
plane exactly along the lines ``u = k LU/2`` and ``v = LV/4 + k LV/2``: those lines are the mapped
contacts, and the picks a DEM gives on them lie on the plane. The DEM's cell centres lie
symmetrically about every ``u = k LU/2`` line, where the sine is odd, so linear interpolation on
them gives the plane too. Sheet ``E`` has its ground (and so its contact) raised by ``RAISED_M``.
Written with OGR and GDAL directly (test inputs only).
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from helpers import write_lines

EPSG = 32633  # WGS 84 / UTM zone 33N: projected, metres
X0, Y0 = 500000.0, 4000000.0  # the series' origin (invented)
Z0, A, B = 500.0, -0.1, -0.2  # the contact plane: z = Z0 + A*u + B*v (metres)
H, LU, LV = 30.0, 500.0, 700.0  # the ground's relief about the plane
CELL_M = 10.0
SIDE_M = 600.0  # a sheet is SIDE_M x SIDE_M
RAISED_M = 10.0  # sheet E's contact lies this much above the plane
#: name -> (column, row) of the sheet in the series (u0 = column * SIDE_M, v0 = row * SIDE_M)
LAYOUT = {"A": (0, 0), "B": (1, 0), "C": (0, 1), "D": (1, 1), "E": (2, 0)}


def plane_z(u, v, raised=0.0):
    """The reference surface the batch tests check against. Source: the equation of a plane,
    z = z0 + a*u + b*v, whose dip is atan(sqrt(a^2 + b^2)) and whose dip direction is down the
    gradient (-a, -b) (common practice; any structural geology text's plane geometry)."""
    return Z0 + A * np.asarray(u) + B * np.asarray(v) + raised


def ground_z(u, v, raised=0.0):
    """The ground: the plane plus a product of sines that is zero on the contact lines (arithmetic:
    sin(k pi) = 0 and cos(pi/2 + k pi) = 0), so the contacts lie on the plane by construction."""
    return plane_z(u, v, raised) + H * np.sin(2 * math.pi * np.asarray(u) / LU) * np.cos(2 * math.pi * np.asarray(v) / LV)


def write_dem(path: Path, u0: float, v0: float, raised: float = 0.0) -> None:
    from osgeo import gdal

    from helpers import srs_of

    n = int(SIDE_M / CELL_M)
    uc = u0 + CELL_M * (np.arange(n) + 0.5)
    vc = v0 + SIDE_M - CELL_M * (np.arange(n) + 0.5)  # north-up: the first row is the northernmost
    z = ground_z(uc[None, :], vc[:, None], raised).astype(np.float32)
    ds = gdal.GetDriverByName("GTiff").Create(str(path), n, n, 1, gdal.GDT_Float32)
    ds.SetGeoTransform((X0 + u0, CELL_M, 0.0, Y0 + v0 + SIDE_M, 0.0, -CELL_M))
    ds.SetProjection(srs_of(EPSG).ExportToWkt())
    ds.GetRasterBand(1).WriteArray(z)
    ds.GetRasterBand(1).SetNoDataValue(-9999.0)
    ds.FlushCache()
    ds = None


def contact_lines(u0: float, v0: float) -> list[str]:
    """The lines where the ground meets the plane inside a sheet, half a cell in from its edges."""
    inset = CELL_M / 2
    lines = []
    for k in range(0, 10):
        u = k * LU / 2
        if u0 + inset < u < u0 + SIDE_M - inset:
            lines.append(f"LINESTRING ({X0 + u} {Y0 + v0 + inset}, {X0 + u} {Y0 + v0 + SIDE_M - inset})")
        v = LV / 4 + k * LV / 2
        if v0 + inset < v < v0 + SIDE_M - inset:
            lines.append(f"LINESTRING ({X0 + u0 + inset} {Y0 + v}, {X0 + u0 + SIDE_M - inset} {Y0 + v})")
    return lines


def make_series(folder: Path, sheets=("A", "B", "C", "D", "E"), *, defaults: str = "", extra: dict | None = None
                ) -> Path:
    """Write the sheets' DEMs and contacts under ``folder/data`` and a job file ``folder/job.toml``
    naming them by relative paths; ``extra`` adds lines to a sheet's table. Returns the job file."""
    data = folder / "data"
    data.mkdir(parents=True, exist_ok=True)
    tables = []
    for name in sheets:
        col, row = LAYOUT[name]
        u0, v0 = col * SIDE_M, row * SIDE_M
        raised = RAISED_M if name == "E" else 0.0
        write_dem(data / f"dem_{name}.tif", u0, v0, raised)
        write_lines(str(data / f"contacts_{name}.gpkg"), contact_lines(u0, v0), epsg=EPSG)
        tables.append(f'[[sheet]]\nname = "{name}"\ncontacts = "data/contacts_{name}.gpkg"\n'
                      f'dem = "data/dem_{name}.tif"\n' + (extra or {}).get(name, ""))
    job = folder / "job.toml"
    job.write_text('[defaults]\ncontact = "base_of_unit"\nmodel = "plane"\nresamples = 50\ninterval = 10\n'
                   + defaults + "\n" + "\n".join(tables))
    return job


def contacts_off_dem(folder: Path, name: str, metres: float) -> None:
    """Rewrite sheet ``name``'s contacts with an extra line running ``metres`` south of its DEM
    from the sheet's edge (on the plane's contact line ``u = LU/2 + k LU``): that stretch has no
    DEM under it, so the sheet's run warns of contacts off the DEM."""
    col, row = LAYOUT[name]
    u0, v0 = col * SIDE_M, row * SIDE_M
    u = next(k * LU / 2 for k in range(10) if u0 < k * LU / 2 < u0 + SIDE_M)
    off = f"LINESTRING ({X0 + u + 1.0} {Y0 + v0 - metres}, {X0 + u + 1.0} {Y0 + v0 - CELL_M})"
    path = folder / "data" / f"contacts_{name}.gpkg"
    path.unlink()
    write_lines(str(path), contact_lines(u0, v0) + [off], epsg=EPSG)
