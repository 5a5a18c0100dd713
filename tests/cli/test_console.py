"""The installed console script ``strikeline`` as a separate process: what a user at a shell sees.

Every other test runs the command in the test process (``helpers.run_cli``). These few start the
script that ``pip install`` put beside the interpreter, to prove that it is installed and wired
to the same ``main``, that exit statuses reach the shell, that bad input is one ``error:`` line
with no traceback and writes nothing, and that a run in another process - another interpreter,
another hash seed - prints and writes what the session's in-process run printed and wrote.
"""
import hashlib
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
import shapely

from helpers import write_lines

#: The console script of ``[project.scripts]`` in pyproject.toml, installed beside the interpreter.
SCRIPT = Path(sys.executable).with_name("strikeline")


def console(*args, cwd=None):
    """``strikeline ARGS`` as a user runs it: a new process, no debugging, a random hash seed."""
    assert SCRIPT.is_file(), f"{SCRIPT} is missing: install the package (pip install -e .) to get the script"
    env = {k: v for k, v in os.environ.items() if k not in ("STRIKELINE_DEBUG", "PYTHONHASHSEED")}
    return subprocess.run([str(SCRIPT), *map(str, args)], capture_output=True, text=True, cwd=cwd, env=env,
                          timeout=600)


def _files(folder):
    return {p.relative_to(folder): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in Path(folder).rglob("*") if p.is_file()}


def test_help_lists_the_subcommands():
    proc = console("--help")
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.startswith("usage: strikeline") and proc.stderr == ""
    listed = {line.split()[0] for line in proc.stdout.splitlines() if line.startswith("    ") and line[4] != " "}
    assert {"run", "demo", "attitude", "thickness"} <= listed, listed


def test_demo_exits_0_and_matches_the_in_process_run(tmp_path, demo_command_run):
    proc = console("demo", cwd=tmp_path)  # the default output folder, demo-output, in the working folder
    assert proc.returncode == 0, proc.stderr
    out = tmp_path / "demo-output"
    # Source: the project's design brief - every summary carries the caution in these words
    assert "not a substitute for site investigation" in proc.stdout
    # the same bytes as the session's run in the test process: the in-process runner shows what a
    # user sees, and nothing in the summary depends on the process (hash seed, import order). The
    # numbers themselves are checked against the demo's analytic truth (test_data/demo/truth.json)
    # in tests/cli/test_cli.py; here the reference is the other process's output.
    # Only the command line each recorded differs: the console script's own sys.argv (program named
    # strikeline) against the in-process run's arguments, which add --out.
    a = json.loads((out / "summary.json").read_bytes())
    b = json.loads((demo_command_run.out / "summary.json").read_bytes())
    assert a.pop("command_line") == ["strikeline", "demo"]
    assert b.pop("command_line") == ["strikeline", *map(str, demo_command_run.proc.args)]
    assert a == b
    assert sorted(p.name for p in out.iterdir()) == sorted(p.name for p in demo_command_run.out.iterdir())
    # the output folder is named in the report; elsewhere the two printed the same lines
    assert proc.stdout.replace("demo-output", "OUT") == \
        demo_command_run.proc.stdout.replace(str(demo_command_run.out), "OUT")
    assert proc.stderr.replace("demo-output", "OUT") == \
        demo_command_run.proc.stderr.replace(str(demo_command_run.out), "OUT")


@pytest.mark.parametrize("case", ["usage", "missing file", "contact outside the DEM"])
def test_bad_input_exits_2_with_one_line_and_writes_nothing(tmp_path, demo, case):
    inputs = tmp_path / "inputs"
    inputs.mkdir()
    # Source: the demo DEM (test_data/demo/dem.tif, EPSG:32631 as truth.json records; gdalinfo gives
    # 486,300-490,300 m E, 5,213,700-5,217,700 m N): a line at 600 km E, 5,000 km N lies off it
    far = write_lines(inputs / "far.gpkg", [shapely.LineString([(600000, 5000000), (601000, 5001000)])], epsg=32631)
    args = {
        "usage": ["run", "--contacts"],
        "missing file": ["run", "--contacts", inputs / "nowhere.gpkg", "--dem", demo["dem"]],
        # read, reprojected and sampled before it fails: the late failure must write nothing either
        "contact outside the DEM": ["run", "--contacts", far, "--dem", demo["dem"]],
    }[case]
    before = _files(tmp_path)
    proc = console(*args, "--out", tmp_path / "results")
    # common practice: exit status 2 for bad command-line input (argparse's and POSIX utilities')
    assert proc.returncode == 2, (proc.returncode, proc.stderr)
    lines = proc.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), proc.stderr
    assert "Traceback" not in proc.stderr and proc.stdout == ""
    assert _files(tmp_path) == before  # no output folder, no temporary sibling, inputs untouched
