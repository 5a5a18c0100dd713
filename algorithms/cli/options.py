"""Option definitions shared by the subcommands, and the argument parser that fails in one line."""
from __future__ import annotations

import argparse
import math

from strikeline import CAUTION


class OneLineParser(argparse.ArgumentParser):
    """An argparse parser whose usage errors are one ``error:`` line and exit status 2."""

    def error(self, message):  # noqa: D401 - argparse's hook
        self.exit(2, f"error: {self.prog}: {message}; see '{self.prog} --help'\n")


def positive_metres(text: str) -> float:
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number of metres, got {text!r}") from None
    if not (v > 0 and math.isfinite(v)):
        raise argparse.ArgumentTypeError(f"expected a positive number of metres, got {text!r}")
    return v


def non_negative_metres(text: str) -> float:
    """An argparse type: a finite number of metres, zero allowed (a standard error)."""
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number of metres, got {text!r}") from None
    if not (v >= 0 and math.isfinite(v)):
        raise argparse.ArgumentTypeError(f"expected zero or a positive number of metres, got {text!r}")
    return v


def finite_number(text: str) -> float:
    """An argparse type: any finite number (coordinates, angles; ranges are checked later)."""
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None
    if not math.isfinite(v):
        raise argparse.ArgumentTypeError(f"expected a finite number, got {text!r}")
    return v


def non_negative(text: str) -> float:
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None
    if not (v >= 0 and math.isfinite(v)):
        raise argparse.ArgumentTypeError(f"expected zero or a positive number, got {text!r}")
    return v


def positive_int(text: str) -> int:
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if v < 1:
        raise argparse.ArgumentTypeError(f"expected a positive whole number, got {text!r}")
    return v


def add_output(p: argparse.ArgumentParser) -> None:
    p.add_argument("--out", required=True, metavar="DIR",
                   help="folder to create for the results (must not exist unless --overwrite)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output folder")


def add_contacts(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("mapped contacts")
    g.add_argument("--contacts", required=True, metavar="PATH",
                   help="line layer of the mapped contact(s): GeoPackage, Shapefile, GeoJSON, ...")
    g.add_argument("--contacts-layer", metavar="NAME", help="layer name inside PATH (default: the first)")
    g.add_argument("--where", metavar="SQL", help="OGR SQL filter on the contacts, e.g. \"unit = 'Kv'\"")


def add_topography(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("topography (give at least one)")
    g.add_argument("--dem", metavar="PATH", help="DEM raster (GeoTIFF or any GDAL raster), metres")
    g.add_argument("--contours", metavar="PATH", help="line layer of topographic contours")
    g.add_argument("--contours-layer", metavar="NAME", help="layer name inside the contours file")
    g.add_argument("--elev-field", metavar="NAME", help="numeric field with each contour's elevation")


EPILOG = CAUTION
