"""Option definitions shared by the subcommands, and the argument parser that fails in one line."""
from __future__ import annotations

import argparse
import math

from strikeline import CAUTION


class OneLineParser(argparse.ArgumentParser):
    """An argparse parser whose usage errors are one ``error:`` line and exit status 2."""

    def error(self, message):  # noqa: D401 - argparse's hook
        self.exit(2, f"error: {self.prog}: {message}; see '{self.prog} --help'\n")


def option_type(o):
    """The argparse ``type=`` of table option ``o``: parses a finite number (three for ``xyz``),
    checks the table's bounds or takes an angle modulo ``wrap``; None for text."""
    if o.kind not in (float, int, "xyz"):
        return None
    integer = o.kind is int
    words = "a number" if o.kind == "xyz" else o.kind_words()

    def parse(text: str):
        try:
            v = int(text) if integer else float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"expected {words}, got {text!r}") from None
        if not math.isfinite(v):
            raise argparse.ArgumentTypeError(f"expected a finite {words[2:]}, got {text!r}")
        if o.wrap is not None:
            return v % o.wrap
        if not o.within(v):
            raise argparse.ArgumentTypeError(f"expected {words} {o.limits()}, got {text!r}")
        return v

    parse.__name__ = o.name
    return parse


def option_help(o, command: str | None = None) -> str:
    """The option's help as ``command`` gives it, with its default (or what leaving it out means)
    and its bounds, %-escaped for argparse: ``... (default 1000; at least 20)``."""
    said = "; ".join(t for t in (o.described_default(), o.limits() if o.is_number else "") if t)
    text = o.help_for(command)
    return (f"{text} ({said})" if said else text).replace("%", "%%")


def add_option(p, name: str, *, command: str | None = None, **override):
    """Add option ``name`` of the table (:data:`strikeline.pipeline.options.OPTIONS`) to parser or
    group ``p``: its flag, type and bounds, allowed values, default and help (in the words of
    subcommand ``command`` where the table gives it its own). ``override`` replaces argparse
    keywords (e.g. ``required``) where one command takes the option differently."""
    from strikeline.pipeline.options import option

    o = option(name)
    kw = {"dest": o.dest or o.name, "help": option_help(o, command)}
    if o.kind is bool:
        kw["action"] = "store_true"
    else:
        if o.choices:
            kw["choices"] = tuple(o.cli_value(c) for c in o.choices)
        else:
            kw["metavar"] = o.metavar
        if option_type(o) is not None:
            kw["type"] = option_type(o)
        if o.default is not None:
            kw["default"] = o.cli_value(o.default)
        if o.required:
            kw["required"] = True
        if o.nargs:
            kw["nargs"] = o.nargs
        if o.repeatable:
            # each time given adds one item: a second --contacts adds to the first, never replaces it
            kw["action"] = "append"
    kw.update(override)
    return p.add_argument(o.flag, **kw)


def add_options(p, *names: str, command: str | None = None) -> None:
    """:func:`add_option` for each of ``names``."""
    for name in names:
        add_option(p, name, command=command)


def add_output(p: argparse.ArgumentParser) -> None:
    add_options(p, "out", "overwrite")


def add_contacts(p: argparse.ArgumentParser) -> None:
    add_options(p.add_argument_group("mapped contacts"), "contacts", "contacts_layer", "where")


def add_topography(p: argparse.ArgumentParser) -> None:
    add_options(p.add_argument_group("topography (give at least one)"), "dem", "contours", "contours_layer",
                "elev_field", "dem_unit", "contour_unit")


EPILOG = CAUTION
