"""Option definitions shared by the subcommands, and the argument parser that fails in one line."""
from __future__ import annotations

import argparse
import math

from strikeline import CAUTION


class OneLineParser(argparse.ArgumentParser):
    """An argparse parser whose usage errors are one ``error:`` line and exit status 2."""

    def error(self, message):  # noqa: D401 - argparse's hook
        self.exit(2, f"error: {self.prog}: {message}; see '{self.prog} --help'\n")


def _number_type(name: str, *, minimum=None, strict: bool = False, unit: str = "", integer: bool = False):
    """An argparse ``type=`` that parses a finite number and checks its lower bound."""
    kind = "whole number" if integer else "number"

    def parse(text: str):
        try:
            v = int(text) if integer else float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"expected a {kind}{unit}, got {text!r}") from None
        if not math.isfinite(v):
            raise argparse.ArgumentTypeError(f"expected a finite {kind}{unit}, got {text!r}")
        if minimum is not None and (v <= minimum if strict else v < minimum):
            bound = f"greater than {minimum:g}" if strict else f"at least {minimum:g}"
            raise argparse.ArgumentTypeError(f"expected a {kind}{unit} {bound}, got {text!r}")
        return v

    parse.__name__ = name
    return parse


#: A positive number of metres (intervals, cell sizes, windows).
positive_metres = _number_type("positive_metres", minimum=0, strict=True, unit=" of metres")
#: Zero or a positive number of metres (standard errors).
non_negative_metres = _number_type("non_negative_metres", minimum=0, unit=" of metres")
#: Zero or a positive number (standard errors in degrees).
non_negative = _number_type("non_negative", minimum=0)
#: Any finite number (coordinates, angles whose range is checked later).
finite_number = _number_type("finite_number")
#: A whole number of at least 1.
positive_int = _number_type("positive_int", minimum=1, integer=True)


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
