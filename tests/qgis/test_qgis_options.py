"""Options shared by the command line and a QGIS tool have one default, one set of bounds and one
set of allowed values in both.

# Source: the reference is the command line itself - its parsers (strikeline.cli.main.build_parser)
# are probed value by value, and each QGIS parameter must accept and refuse the same values, start
# from the same default and offer the same choices in the same order.
"""
from __future__ import annotations

import argparse

import pytest
from qgis.core import (
    QgsApplication,
    QgsProcessingContext,
    QgsProcessingException,
    QgsProcessingParameterBoolean,
    QgsProcessingParameterEnum,
    QgsProcessingParameterExtent,
    QgsProcessingParameterNumber,
)

from adapter_qgis.params import CLI_ONLY, value
from strikeline.cli.main import build_parser
from strikeline.errors import InputError
from strikeline.pipeline.options import OPTIONS, options_of

pytestmark = pytest.mark.qgis

TMP = "TEMPORARY_OUTPUT"


def _cli_actions() -> dict:
    """(command, flag) -> the argparse action, for every subcommand and thickness case."""
    def subparsers(p):
        for a in p._actions:
            if isinstance(a, argparse._SubParsersAction):
                yield from a.choices.items()

    out = {}
    for name, sub in subparsers(build_parser()):
        parsers = [(name, sub), *((f"{name} {case}", c) for case, c in subparsers(sub))]
        for command, parser in parsers:
            for a in parser._actions:
                for flag in a.option_strings:
                    out[command, flag] = a
    return out


ACTIONS = _cli_actions()
#: (option, command, tool) for every option that a command and a QGIS tool both take.
SHARED = [(o, c, t) for o in OPTIONS.values() if o.flag and o.qgis for c in o.commands for t in o.tools]
IDS = [f"{o.name}:{c}:{t}" for o, c, t in SHARED]


def _tool(name):
    alg = QgsApplication.processingRegistry().createAlgorithmById(f"strikeline:{name}")
    assert alg is not None, name
    return alg


def _both(o, command, tool):
    """The command's argparse action, the tool (kept alive: QGIS owns the parameter) and the
    tool's parameter for option ``o``."""
    alg = _tool(tool)
    return ACTIONS[command, o.flag], alg, alg.parameterDefinition(o.qgis)


def _read(alg, o, given):
    """What the tool takes for parameter ``o`` given ``given`` ({} for its default)."""
    return value(alg, given, o.name, QgsProcessingContext())


def test_every_shared_option_is_checked():
    names = {o.name for o, _, _ in SHARED}
    # the options the issue found defaulted differently in different places
    assert names >= {"interval_m", "resamples", "model", "dem_sigma_m", "borehole_sigma_m", "seed"}


@pytest.mark.parametrize("o,command,tool", SHARED, ids=IDS)
def test_same_default(o, command, tool):
    action, alg, param = _both(o, command, tool)
    assert param is not None, (tool, o.qgis)
    cli_default = action.default
    if isinstance(param, QgsProcessingParameterEnum) and cli_default is None:
        # unset on the command line: an empty choice in QGIS, read as unset (the library chooses)
        assert param.defaultValue() is None and param.flags() & param.FlagOptional
        assert _read(alg, o, {}) is None and _read(alg, o, {o.qgis: None}) is None
    elif isinstance(param, QgsProcessingParameterEnum):
        assert o.cli_value(o.choices[param.defaultValue()]) == cli_default
        assert o.cli_value(_read(alg, o, {})) == cli_default
    elif isinstance(param, QgsProcessingParameterExtent):  # --extent: four numbers, unset by default
        assert cli_default is None and action.nargs == 4
        assert param.defaultValue() is None and param.flags() & param.FlagOptional
    elif isinstance(param, QgsProcessingParameterNumber):
        if action.required:  # no default on either side: the value must be given
            assert param.defaultValue() is None and not param.flags() & param.FlagOptional
        elif cli_default is None:  # unset on the command line: 0 in QGIS, read as unset
            assert param.defaultValue() == 0
            assert _read(alg, o, {}) is None
        else:
            assert param.defaultValue() == cli_default
            assert _read(alg, o, {}) == cli_default
        want = QgsProcessingParameterNumber.Integer if o.kind is int else QgsProcessingParameterNumber.Double
        assert param.dataType() == want
    elif isinstance(param, QgsProcessingParameterBoolean):
        assert param.defaultValue() == cli_default
    else:  # a field, a text or a layer
        assert param.defaultValue() in ((cli_default,) if cli_default is not None else (None, ""))


def _cli_accepts(action, text: str) -> bool:
    try:
        action.type(text)
    except argparse.ArgumentTypeError:
        return False
    return True


def _qgis_accepts(alg, o, param, v) -> bool:
    if not param.checkValueIsAcceptable(v):
        return False
    try:
        _read(alg, o, {o.qgis: v})
    except InputError:
        return False
    return True


def _probes(o):
    pts = {-1.0, 0.0, 1.0, 1e6}
    for b in (o.minimum, o.maximum):
        if b is not None:
            pts |= {b - 1.0, b - 0.001, b, b + 0.001, b + 1.0}
    if o.default is not None and o.is_number:
        pts.add(float(o.default))
    return sorted({int(round(p)) for p in pts} if o.kind is int else pts)


NUMBERS = [(o, c, t) for o, c, t in SHARED if o.is_number and o.nargs is None]


@pytest.mark.parametrize("o,command,tool", NUMBERS, ids=[f"{o.name}:{c}:{t}" for o, c, t in NUMBERS])
def test_same_bounds(o, command, tool):
    action, alg, param = _both(o, command, tool)
    checked = 0
    for v in _probes(o):
        if v == 0 and o.default is None and not o.required:
            continue  # 0 is "unset" in QGIS (the library's default), as leaving the flag out is
        cli, qgis = _cli_accepts(action, repr(v)), _qgis_accepts(alg, o, param, v)
        assert cli == qgis, (o.name, tool, v, cli, qgis)
        checked += 1
    assert checked >= 4
    # the bounds QGIS shows in its dialog are the command line's limits
    lo = param.minimum()
    assert (o.minimum is None and lo < -1e300) or lo == o.minimum
    hi = param.maximum()
    assert (o.maximum is None and hi > 1e300) or hi == o.maximum


CHOICES = [(o, c, t) for o, c, t in SHARED if o.choices]


@pytest.mark.parametrize("o,command,tool", CHOICES, ids=[f"{o.name}:{c}:{t}" for o, c, t in CHOICES])
def test_same_allowed_values_in_the_same_order(o, command, tool):
    action, alg, param = _both(o, command, tool)
    assert len(param.options()) == len(action.choices)
    for i, cli_choice in enumerate(action.choices):
        assert o.cli_value(_read(alg, o, {o.qgis: i})) == cli_choice
    assert not param.checkValueIsAcceptable(len(action.choices))  # no value beyond the list


def test_a_refused_value_names_the_parameter(run, sheet):
    """The structure-contour interval must be positive: QGIS's range stops at 0, the table's check
    refuses 0 itself, in one line naming the parameter's label."""
    alg = _tool("structurecontours")
    label = alg.parameterDefinition("INTERVAL").description()
    with pytest.raises(QgsProcessingException) as exc:
        run("structurecontours", {"SURFACE": sheet["dem"], "INTERVAL": 0.0, alg.OUTPUT: TMP})
    msg = str(exc.value)
    assert msg.startswith(f"the '{label}'") and "greater than 0" in msg and "\n" not in msg


# ------------------------------------------------------------------ the whole chain and strikeline run
def test_every_option_of_run_is_a_whole_chain_parameter_or_said_why_not():
    """An option added to ``strikeline run`` fails here until the whole chain has its parameter
    (the table's ``tools``) or ``adapter_qgis.params.CLI_ONLY`` says why QGIS does without it."""
    alg = _tool("modelcontact")
    run_options = {o.name: o for o in options_of(command="run")}
    in_qgis = {name for name, o in run_options.items() if "modelcontact" in o.tools}
    missing = sorted(set(run_options) - in_qgis - set(CLI_ONLY))
    assert not missing, f"options of run with no whole-chain parameter and no reason in CLI_ONLY: {missing}"
    assert not in_qgis & set(CLI_ONLY), "an option has a parameter and is listed as the command line's alone"
    assert set(CLI_ONLY) <= set(run_options), "CLI_ONLY names an option that run does not have"
    assert all(len(why) > 20 for why in CLI_ONLY.values())
    for name in sorted(in_qgis):
        assert alg.parameterDefinition(run_options[name].qgis) is not None, (name, run_options[name].qgis)
    # every option the table gives the tool is a parameter of it, and none of its parameters
    # that the table names belongs to another option
    for o in options_of(tool="modelcontact"):
        assert alg.parameterDefinition(o.qgis) is not None, (o.name, o.qgis)


def test_the_elevation_units_extent_cell_and_no_report_are_parameters():
    """The elevation units, the extent and the cell of the output grid, and --no-report."""
    alg = _tool("modelcontact")
    for name in ("dem_unit", "contour_unit", "extent", "cell_m", "no_report"):
        assert alg.parameterDefinition(OPTIONS[name].qgis) is not None, name
    picks = _tool("contactpicks")  # the picks tool reads the same DEM and contours
    for name in ("dem_unit", "contour_unit"):
        assert picks.parameterDefinition(OPTIONS[name].qgis) is not None, name
