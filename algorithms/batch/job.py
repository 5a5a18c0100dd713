"""The job file of ``strikeline batch``: a TOML file with one ``[[sheet]]`` table per sheet.

A ``[defaults]`` table sets options for every sheet; a sheet's own table overrides them. Every key
but ``name`` and ``contact`` is an option of ``strikeline run`` by its long name with ``_`` for
``-`` (``interval`` for ``--interval``, ``dem_sigma`` for ``--dem-sigma``); its value is checked by the very parser action of
``run`` (type, bounds, allowed values) and the sheet's :class:`RunOptions` by
:func:`strikeline.pipeline.options.check_options`, so a job file accepts exactly what the command
line accepts. Relative paths are relative to the job file's folder. Every problem of the job
file itself (its TOML, keys, values, names, options ``run`` would refuse) is found before any
sheet runs, and reported in one line naming the job file, the sheet and the key; a sheet whose
input files are missing or unreadable is not one of them: it carries the reason
(:attr:`Sheet.problem`), fails alone and the other sheets run.
"""
from __future__ import annotations

import argparse
import difflib
import os
import re
from dataclasses import MISSING, dataclass, fields, replace
from pathlib import Path

from strikeline import vocabulary as V
from strikeline.errors import InputError, StrikelineError, one_line

#: Keys of a sheet table (and of ``[defaults]``, but ``name``) that are not options of ``run``.
NAME_KEY = "name"
CONTACT_KEY = "contact"
#: Options of ``run`` a job file may not set: the batch decides where each sheet is written.
BATCH_DECIDES = ("out", "overwrite", "help")
#: A sheet's name is its folder's name: letters, digits, ``.``, ``_``, ``-``, not starting with ``.``.
NAME_PATTERN = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]{0,99}")


@dataclass(frozen=True)
class Sheet:
    """One sheet of a job: its name, the contact it models and its ``run`` options."""

    name: str
    contact: str | None
    options: object  # strikeline.pipeline.options.RunOptions, out = DIR/name
    #: Why the sheet cannot run (an input file missing or unreadable), in one line; None: it can.
    problem: str | None = None


@dataclass(frozen=True)
class Job:
    """A checked job file: its path and its sheets in the order written."""

    path: Path
    sheets: tuple


def _run_actions() -> dict:
    """The argparse actions of ``strikeline run`` by long flag: the job file's keys are checked
    by the same actions (type, bounds, choices, default) as the command line."""
    from strikeline.cli import run as run_command
    from strikeline.cli.options import OneLineParser

    sub = OneLineParser(prog="strikeline").add_subparsers(parser_class=OneLineParser)
    parser = run_command.add_parser(sub)
    return {flag: a for a in parser._actions for flag in a.option_strings if flag.startswith("--")}


def key_of(flag: str) -> str:
    """The job file's key of a long flag: ``--dem-sigma`` -> ``dem_sigma``."""
    return flag[2:].replace("-", "_")


def job_key_names() -> dict:
    """Every option's name in a job file (its key), for messages that name options (the ``names``
    of :func:`strikeline.pipeline.options.check_value` and :func:`strikeline.pipeline.run.run`)."""
    from strikeline.pipeline.options import CLI_OPTION_NAMES

    return {n: key_of(flag) for n, flag in CLI_OPTION_NAMES.items()}


def _text(value) -> str:
    return repr(value) if isinstance(value, str) else str(value).lower() if isinstance(value, bool) else str(value)


def _one(action, value, where: str):
    """One item of a value, as the command line would parse the text ``value``."""
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        raise InputError(f"{where}: expected {'a text' if action.type is None else 'a number'}, got "
                         f"{_text(value)} ({type(value).__name__}); write it as in TOML, e.g. 20 or \"name\"")
    if action.type is not None:
        try:
            value = action.type(str(value))
        except (argparse.ArgumentTypeError, ValueError, TypeError) as exc:
            raise InputError(f"{where}: {one_line(exc)}") from None
    elif not isinstance(value, str):
        raise InputError(f"{where}: expected a text, got {_text(value)}; quote it")
    if action.choices is not None and value not in action.choices:
        allowed = ", ".join(map(str, action.choices))
        raise InputError(f"{where}: must be one of {allowed}; got {_text(value)}")
    return value


def convert(action, value, where: str):
    """The value of a job-file key as the parsed command line holds it (``where`` names it in errors)."""
    if isinstance(action, argparse._StoreTrueAction):
        if not isinstance(value, bool):
            raise InputError(f"{where}: expected true or false, got {_text(value)}")
        return value
    if isinstance(action, argparse._AppendAction):  # repeatable: one item or a list of them
        items = value if isinstance(value, list) else [value]
        if not items:
            raise InputError(f"{where}: the list is empty; give at least one item or leave the key out")
        return [_one(action, v, where) for v in items]
    if isinstance(action.nargs, int):
        if not isinstance(value, list) or len(value) != action.nargs:
            raise InputError(f"{where}: expected a list of {action.nargs} values, got {_text(value)}")
        return tuple(_one(action, v, where) for v in value)
    return _one(action, value, where)


def _resolve(value, base: Path):
    """A path value made absolute against the job file's folder (``PATH:LAYER`` kept whole)."""
    if isinstance(value, (list, tuple)):
        return type(value)(_resolve(v, base) for v in value)
    return value if os.path.isabs(value) else str(base / value)


def _file_problem(key: str, value) -> str | None:
    """Why an input file of a sheet cannot be read (missing, or not readable by this user), in
    one line; None when every file of ``value`` is there to be read."""
    from strikeline.pipeline.options import input_files

    for path in input_files(value):
        if not Path(path).exists():
            return (f"{key}: '{path}' not found; check the path (a relative path is relative to the job file's "
                    "folder)")
        if not os.access(path, os.R_OK):
            return f"{key}: '{path}' cannot be read (permission denied); check its permissions"
    return None


def _unknown(key: str, known: dict, where: str) -> InputError:
    by_dest = [k for k, a in known.items() if a.dest == key]  # the option's own name, not its flag
    near = by_dest or difflib.get_close_matches(key, sorted(known), n=1)
    hint = f" - did you mean {near[0]}?" if near else ""
    return InputError(f"{where}: unknown key '{key}'{hint}; give a strikeline run option by its long name with _ "
                      f"for - (e.g. interval, dem_sigma), or {NAME_KEY}, {CONTACT_KEY}")


def read_toml(path: Path) -> dict:
    """The job file's TOML (a one-line error with tomllib's line and column)."""
    import tomllib

    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise InputError(f"job file '{path}' not found; check the path") from None
    except OSError as exc:
        raise InputError(f"job file '{path}' cannot be read ({exc.strerror}); check its permissions") from None
    try:
        return tomllib.loads(data.decode("utf-8"))
    except UnicodeDecodeError as exc:
        raise InputError(f"job file '{path}' is not UTF-8 text (byte {exc.start}); save it as UTF-8") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"job file '{path}' is not valid TOML: {one_line(exc)}; fix it there") from None


def read_job(path, *, out) -> Job:
    """Read and check a job file; every sheet's options are checked before any sheet runs.

    Parameters
    ----------
    path : str or PathLike
        The job file (TOML).
    out : str or PathLike
        The batch's output folder: sheet ``NAME`` is written to ``out/NAME``.

    Raises
    ------
    InputError
        One line naming the job file, the sheet and the key: bad TOML, unknown keys, bad values,
        duplicate or unusable names, options ``run`` would refuse. (A missing or unreadable input
        file is the sheet's :attr:`Sheet.problem` instead.)
    """
    from strikeline.pipeline.options import RunOptions, check_options, option

    path = Path(os.fspath(path))
    doc = read_toml(path)
    base = path.resolve().parent
    out = Path(os.fspath(out))
    for key in doc:
        if key not in ("defaults", "sheet"):
            raise InputError(f"job file '{path}': unknown table or key '{key}' at the top; a job file holds "
                             "[defaults] and [[sheet]] tables only")
    defaults = doc.get("defaults", {})
    tables = doc.get("sheet", [])
    if not isinstance(defaults, dict):
        raise InputError(f"job file '{path}': defaults must be a table ([defaults]); got {_text(defaults)}")
    if not isinstance(tables, list) or not tables or not all(isinstance(t, dict) for t in tables):
        raise InputError(f"job file '{path}': no sheets; give one [[sheet]] table per sheet, each with a name, "
                         "its contacts and its dem and/or contours")
    if NAME_KEY in defaults:
        raise InputError(f"job file '{path}': [defaults]: {NAME_KEY} belongs to each [[sheet]], not to the defaults")
    actions = _run_actions()
    by_key = {key_of(flag): a for flag, a in actions.items() if a.dest not in BATCH_DECIDES}
    names = job_key_names()
    field_names = [f.name for f in fields(RunOptions)]
    reserved = {V.BATCH_FILE, V.INDEX_FILE, V.INDEX_PAGE, V.MANIFEST_FILE}
    seen: dict[str, int] = {}
    sheets = []
    for i, table in enumerate(tables, 1):
        name = table.get(NAME_KEY)
        where = f"job file '{path}', sheet {i}"
        if not isinstance(name, str) or not NAME_PATTERN.fullmatch(name) or name in reserved:
            raise InputError(f"{where}: {NAME_KEY} {'missing' if name is None else _text(name)}; give each sheet a "
                             "name of letters, digits, '.', '_' and '-' (not starting with '.'), which names its "
                             f"folder in --out (not {', '.join(sorted(reserved))})")
        where = f"job file '{path}', sheet '{name}'"
        if name.casefold() in seen:
            raise InputError(f"{where}: the name is already that of sheet {seen[name.casefold()]} (names are folders "
                             "and compared ignoring case); give each sheet its own name")
        seen[name.casefold()] = i
        merged = {**defaults, **{k: v for k, v in table.items() if k != NAME_KEY}}
        contact = merged.pop(CONTACT_KEY, None)
        if contact is not None and (not isinstance(contact, str) or not contact.strip()):
            raise InputError(f"{where}: {CONTACT_KEY}: expected a name, got {_text(contact)}")
        # the command line's defaults; the dataclass's for an option run's parser does not take
        values = {f.name: f.default for f in fields(RunOptions) if f.default is not MISSING}
        values.update({a.dest: a.default for a in actions.values() if a.dest in values})
        problem = None  # a missing or unreadable input: this sheet fails, the others run
        for key, value in merged.items():
            action = by_key.get(key)
            if action is None:
                raise _unknown(key, by_key, f"{where} (or [defaults])" if key in defaults else where)
            value = convert(action, value, f"{where}: {key}")
            if option(action.dest).kind == "path":
                value = _resolve(value, base)
                problem = problem or _file_problem(key, value)
            values[action.dest] = value
        if not values.get("contacts"):
            raise InputError(f"{where}: contacts missing; give the line layer(s) of the mapped contact "
                             "(contacts = \"contacts.gpkg\" or a list)")
        values.update(out=str(out / name), overwrite=True)
        opts = RunOptions(**{f: values.get(f) for f in field_names})
        try:
            # a new --out: the sheets' folders will be new too (the checks of the inputs against it hold)
            check_options(opts if out.is_dir() else replace(opts, out=str(out)), names=names)
        except StrikelineError as exc:
            raise InputError(f"{where}: {one_line(exc)}") from None
        sheets.append(Sheet(name, contact, opts, problem))
    return Job(path, tuple(sheets))


def options_record(opts) -> dict:
    """A sheet's options for batch.json and for the rerun check: every option but out and
    overwrite, JSON-ready (paths as the job file resolved them)."""
    from strikeline.io.files import json_ready

    return json_ready({f.name: getattr(opts, f.name) for f in fields(opts) if f.name not in BATCH_DECIDES})
