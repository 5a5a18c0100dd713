"""The one table of options: RunOptions, the command line's parsers and the checks agree with it.

The table (strikeline.pipeline.options.OPTIONS) is the single place a default, a bound or an
allowed value is written; these tests prove that every consumer takes them from there, and that a
value outside the table is refused in one line that names the option.
"""
from __future__ import annotations

import argparse
import ast
import dataclasses
import math
import subprocess
import sys
from pathlib import Path

import pytest

from strikeline.errors import InputError
from strikeline.pipeline.options import (OPTIONS, RunOptions, check_options, check_value, option,
                                         options_of)

CLI_DIR = Path(__file__).resolve().parents[2] / "algorithms" / "cli"

#: The defaults as documented with their basis (the same numbers the README and --help state).
DOCUMENTED_DEFAULTS = {
    "interval_m": 50.0,  # common practice: a handful of structure contours over a sheet's relief
    "dem_sigma_m": 2.0,  # common practice: 5-25 m national DEMs state 1-5 m vertical RMSE
    "contour_sigma_m": 2.5,  # common practice: half of a 5 m tolerance (0.5 mm at 1:10,000)
    "contact_sigma_m": 2.5,  # common practice: linework digitised at 1:10,000, as contours
    "borehole_sigma_m": 1.0,  # common practice: a levelled collar and a logged depth, about a metre
    "orientation_sigma_deg": 5.0,  # common practice: compass-clinometer repeatability
    # Source: Efron & Tibshirani (1993), An Introduction to the Bootstrap, ch. 13: about 1000
    # resamples for percentile intervals
    "resamples": 1000,
    "model": "auto",
    "seed": 0,
}


def _one_line(message: str) -> bool:
    return "\n" not in message.strip()


# --------------------------------------------------------------------------- RunOptions
def test_run_options_defaults_are_the_tables():
    for f in dataclasses.fields(RunOptions):
        o = option(f.name)  # every field is an option of the table
        if f.default is dataclasses.MISSING:
            assert o.required, f.name
        else:
            assert f.default == o.default, f.name
            assert not o.required, f.name
    assert {f.name for f in dataclasses.fields(RunOptions)} == {o.name for o in options_of(command="run")}


@pytest.mark.parametrize("name", sorted(DOCUMENTED_DEFAULTS))
def test_documented_defaults(name):
    assert option(name).default == DOCUMENTED_DEFAULTS[name]
    assert getattr(RunOptions("c", "o"), name) == DOCUMENTED_DEFAULTS[name]


def test_shared_options_have_one_default():
    """The defects the table removes: one model list and default, one resample floor, one DEM error."""
    from strikeline.attitude import MIN_REPLICATES
    from strikeline.surfaces import MODEL_CHOICES

    assert set(option("model").choices) == set(MODEL_CHOICES)
    assert option("resamples").minimum == MIN_REPLICATES
    # run and attitude take the same --dem-sigma (one entry, both commands)
    assert {"run", "attitude"} <= set(option("dem_sigma_m").commands)


def test_the_surface_library_defaults_the_stated_errors_as_the_tools():
    """fit_surface called without the errors of boreholes and dip readings assumes what the
    command line and QGIS assume (the borehole error was 0 in the library and 1 m in the tools)."""
    import inspect

    from strikeline.surfaces import fit_surface

    params = inspect.signature(fit_surface).parameters
    assert params["borehole_sigma_m"].default == option("borehole_sigma_m").default
    assert params["orientation_sigma_deg"].default == option("orientation_sigma_deg").default
    assert params["model"].default == option("model").default


def test_the_attitude_library_defaults_the_resample_counts_as_the_tools():
    """The resample count was written in ten places: the library's functions and the tools now
    start from the same numbers."""
    import inspect

    from strikeline.attitude import bootstrap_plane, local_attitudes, monte_carlo_plane, plane_confidence
    from strikeline.pipeline import attitude_of

    for fn, keys in ((bootstrap_plane, ("n_resamples",)), (monte_carlo_plane, ("n_draws",)),
                     (plane_confidence, ("n_resamples", "n_draws")), (attitude_of, ("resamples",))):
        for k in keys:
            assert inspect.signature(fn).parameters[k].default == option("resamples").default, (fn, k)
    for k in ("n_resamples", "n_draws"):
        assert inspect.signature(local_attitudes).parameters[k].default == option("window_resamples").default


# --------------------------------------------------------------------------- the parsers
def _parsers():
    """(command, parser) for every subcommand and thickness case."""
    from strikeline.cli.main import build_parser

    def subparsers(p):
        for a in p._actions:
            if isinstance(a, argparse._SubParsersAction):
                yield from a.choices.items()

    for name, sub in subparsers(build_parser()):
        yield name, sub
        for case, casep in subparsers(sub):
            yield f"{name} {case}", casep


PARSERS = dict(_parsers())


def test_every_command_is_built():
    assert set(PARSERS) >= {"run", "demo", "attitude", "thickness", "thickness outcrop", "thickness points",
                            "thickness borehole", "thickness grids"}


@pytest.mark.parametrize("command", sorted(PARSERS))
def test_parser_defaults_and_choices_are_the_tables(command):
    parser = PARSERS[command]
    flags = {}
    for a in parser._actions:
        if not a.option_strings or isinstance(a, (argparse._HelpAction, argparse._VersionAction)):
            continue
        (o,) = [o for o in options_of(command=command) if o.flag in a.option_strings]
        flags[o.flag] = o
        assert a.dest == (o.dest or o.name)
        want = None if o.default is None else o.cli_value(o.default)
        if command.startswith("thickness ") and o.name in ("quiet", "log_json"):
            # also on the thickness parser before the case: the case leaves it unset unless given there
            want = argparse.SUPPRESS
        assert a.default == want, (command, o.flag)
        if o.choices:
            assert tuple(a.choices) == tuple(o.cli_value(c) for c in o.choices)
        assert bool(a.required) == (o.required or (command == "thickness grids" and o.name == "grids_out"))
    # every option the table gives this command is on its parser
    assert set(flags) == {o.flag for o in options_of(command=command)}


def _outside(o):
    """Values just outside option ``o``'s bounds or allowed values."""
    out = []
    if o.choices:
        out.append("no-such-value")
    if o.minimum is not None:
        out.append(o.minimum if o.minimum_open else o.minimum - 1)
    if o.maximum is not None:
        out.append(o.maximum if o.maximum_open else o.maximum * 2 + 1)
    if o.kind is int and o.minimum is not None:
        out.append(o.minimum + 0.5)  # not a whole number
    return out


CHECKED = [(o.name, v) for o in OPTIONS.values() if (o.bounded or o.choices) for v in _outside(o)]


@pytest.mark.parametrize("name,bad", CHECKED, ids=[f"{n}={v}" for n, v in CHECKED])
def test_check_value_refuses_in_one_line_naming_the_flag(name, bad):
    o = option(name)
    with pytest.raises(InputError) as exc:
        check_value(name, bad)
    msg = str(exc.value)
    assert _one_line(msg)
    assert msg.startswith(o.flag or o.name)
    assert repr(bad) in msg or f"{bad:g}" in msg  # the value received
    if o.choices:  # the allowed values, so the fix is in the message
        assert all(str(o.cli_value(c)) in msg for c in o.choices)
    else:
        above = o.maximum is not None and (bad > o.maximum or (o.maximum_open and bad == o.maximum))
        lim = o.maximum if above else o.minimum
        assert f"{lim:g}" in msg  # the limit


@pytest.mark.parametrize("name,bad", [(n, v) for n, v in CHECKED if hasattr(RunOptions, n)])
def test_check_options_refuses_every_bounded_run_option(name, bad, tmp_path):
    opts = RunOptions(contacts="c.gpkg", out=str(tmp_path / "out"), dem="dem.tif", **{name: bad})
    with pytest.raises(InputError, match=option(name).flag):
        check_options(opts)
    # the same check names a QGIS parameter by its label when asked to
    label = f"the '{option(name).label or name}'"
    with pytest.raises(InputError) as exc:
        check_options(opts, names={name: label})
    assert str(exc.value).startswith(label) and _one_line(str(exc.value))


def test_values_inside_the_bounds_pass():
    for o in OPTIONS.values():
        if o.is_number and o.default is not None:
            assert check_value(o.name, o.default) == o.default
        if o.choices:
            assert all(check_value(o.name, c) == c for c in o.choices)
    assert check_value("dip_direction_deg", -30.0) == 330.0  # an azimuth is taken modulo 360


CLI_BAD = [(cmd, o, v) for cmd in ("run", "attitude", "thickness outcrop", "thickness borehole")
           for o in options_of(command=cmd) if o.flag and (o.bounded or o.choices)
           for v in _outside(o)[:1]]


@pytest.mark.parametrize("command,o,bad", CLI_BAD, ids=[f"{c}:{o.flag}" for c, o, _ in CLI_BAD])
def test_cli_refuses_out_of_bounds_in_one_line(command, o, bad, capsys):
    from strikeline.cli.main import main

    with pytest.raises(SystemExit) as exc:
        main([*command.split(), o.flag, str(bad)])
    err = capsys.readouterr().err
    assert exc.value.code == 2
    assert _one_line(err) and err.startswith("error: ") and o.flag in err


# --------------------------------------------------------------------------- no literal in cli/
def _literal_defaults(path: Path):
    """``default=`` or ``choices=`` literals of ``add_argument`` calls in ``path``."""
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Call) and getattr(node.func, "attr", "") == "add_argument":
            for kw in node.keywords:
                if kw.arg == "default" and isinstance(kw.value, ast.Constant) and kw.value.value is not None:
                    yield f"{path.name}:{node.lineno} default={kw.value.value!r}"
                if kw.arg == "choices" and isinstance(kw.value, (ast.Tuple, ast.List, ast.Set)):
                    yield f"{path.name}:{node.lineno} choices literal"
                if kw.arg == "type" and isinstance(kw.value, ast.Call):  # a bound written beside the flag
                    yield f"{path.name}:{node.lineno} type={ast.unparse(kw.value)}"


def test_no_default_or_allowed_list_is_written_in_cli():
    found = [hit for p in sorted(CLI_DIR.glob("*.py")) for hit in _literal_defaults(p)]
    assert found == []
    # and no number literal is passed as an add_argument default anywhere (e.g. default=50.0)
    numbers = [n for p in CLI_DIR.glob("*.py") for n in ast.walk(ast.parse(p.read_text()))
               if isinstance(n, ast.keyword) and n.arg in ("default", "defaultValue")
               and isinstance(n.value, ast.Constant) and isinstance(n.value.value, (int, float))
               and not isinstance(n.value.value, bool)]
    assert numbers == []


def test_the_scan_finds_a_literal_default(tmp_path):
    """The scan above can fail: a parser with a literal default is found."""
    bad = tmp_path / "bad.py"
    bad.write_text("def f(p):\n    p.add_argument('--interval', default=50.0, choices=('a', 'b'))\n")
    assert len(list(_literal_defaults(bad))) == 2


# --------------------------------------------------------------------------- imports
def test_the_table_and_the_parsers_load_without_gdal_or_qgis():
    code = ("import sys\nsys.modules['osgeo'] = None\nsys.modules['qgis'] = None\n"
            "import strikeline.pipeline.options\nfrom strikeline.cli.main import build_parser\n"
            "build_parser()\nprint('ok')\n")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert proc.returncode == 0 and proc.stdout.strip() == "ok", proc.stderr


def test_package_run_and_compute_are_the_functions():
    import strikeline.pipeline.compute  # noqa: F401 - the submodules of the same names, imported first
    import strikeline.pipeline.run  # noqa: F401
    from strikeline import pipeline

    assert callable(pipeline.run) and pipeline.run.__name__ == "run"
    assert callable(pipeline.compute) and pipeline.compute.__name__ == "compute"


def test_help_states_each_default():
    """--help says every default the table gives (the words users read)."""
    from strikeline.cli.options import option_help

    for o in OPTIONS.values():
        if o.flag and isinstance(o.default, (int, float)) and not isinstance(o.default, bool):
            assert f"default {o.default:g}" in option_help(o), o.name
        if o.flag and o.default is None and o.unset:
            assert o.unset.replace("%", "%%") in option_help(o), o.name
        if o.flag and o.is_number and o.bounded:
            # a user who gives a value out of bounds is refused: the help says the bounds first
            assert o.limits() in option_help(o), o.name
    assert math.isfinite(option("dem_sigma_m").maximum)
    # Source: strikeline.attitude.MIN_REPLICATES, the least count the library accepts
    assert "at least 20" in option_help(option("resamples"))


def test_each_command_help_speaks_of_its_own_inputs():
    """A shared option's help names the inputs of the command that shows it: attitude's --group-by
    groups the points, not "the contacts for run" (common practice: help describes the command at hand)."""
    import argparse

    from strikeline.cli.main import build_parser

    sub = next(a for a in build_parser()._actions if isinstance(a, argparse._SubParsersAction))
    helps = {name: {a.dest: a.help for a in p._actions} for name, p in sub.choices.items()}
    for name in ("group_by", "dem_sigma_m", "seed"):
        assert " run" not in helps["attitude"][name] and "contacts" not in helps["attitude"][name], name
        assert helps["attitude"][name] != helps["run"][name], name
    assert "points" in helps["attitude"]["group_by"] and "contacts" in helps["run"]["group_by"]
