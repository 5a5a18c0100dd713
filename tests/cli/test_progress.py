"""What a command says while it works: named steps in --log-json, --quiet, the bar on a terminal only.

The log is read as JSON Lines (https://jsonlines.org: one JSON value per line, UTF-8, lines ended
by ``\\n``) with the standard library's ``json``; times are checked against the run's own total
and memory against ``getrusage(2)`` of this process (the runs are in process), never against a
wall-clock threshold.
"""
from __future__ import annotations

import fcntl
import json
import os
import pty
import resource
import select
import struct
import subprocess
import sys
import termios
from pathlib import Path

import pytest

from helpers import DEMO, run_cli
from strikeline import vocabulary as V
from strikeline.cli.progress import LOG_FORMAT, check_log_path, is_strikeline_log
from strikeline.errors import InputError
from strikeline.pipeline.progress import RUN_STEPS

#: A quick run of the demo's contact on its DEM: few picks (one every 150 m), few resamples.
QUICK = ("run", "--contacts", DEMO / "contacts.gpkg", "--dem", DEMO / "dem.tif", "--pick-spacing", "150",
         "--resamples", "20")
#: The same contact with no feature selected: refused while the inputs are read (exit 2).
EMPTY = ("run", "--contacts", DEMO / "contacts.gpkg", "--dem", DEMO / "dem.tif", "--where", "fid < 0")


def read_log(path: Path) -> list[dict]:
    """The events of a JSON Lines file; every line must parse and end with a newline."""
    text = path.read_text(encoding="utf-8")
    assert text.endswith("\n"), "a JSON Lines file ends each line, the last too, with \\n"
    return [json.loads(line) for line in text.split("\n")[:-1]]


@pytest.fixture(scope="module")
def quiet_logged(tmp_path_factory):
    """One quick run with --quiet and --log-json: its CliRun, its log's events, its folder."""
    folder = tmp_path_factory.mktemp("logged")
    proc = run_cli(*QUICK, "--out", folder / "out", "--quiet", "--log-json", folder / "run.jsonl")
    assert proc.returncode == 0, proc.stderr
    return proc, read_log(folder / "run.jsonl"), folder


def test_the_log_has_every_step_once_in_order_with_non_negative_costs(quiet_logged):
    _, events, _ = quiet_logged
    assert events[0]["event"] == "start" and events[0]["format"] == LOG_FORMAT
    assert events[-1]["event"] == "end"
    # every key written is a name of the vocabulary, with its meaning in the README's reference
    assert set().union(*events) <= {k.name for k in V.LOG_KEYS}
    starts = [e["step"] for e in events if e["event"] == "step_start"]
    ends = [e for e in events if e["event"] == "step_end"]
    assert starts == list(RUN_STEPS) == [e["step"] for e in ends]
    # each step ends before the next starts
    order = [(e["event"], e["step"]) for e in events if e["event"] in ("step_start", "step_end")]
    assert order == [(k, s) for s in RUN_STEPS for k in ("step_start", "step_end")]
    assert [e["index"] for e in ends] == list(range(1, len(RUN_STEPS) + 1))
    for e in ends:
        assert e["wall_s"] >= 0 and e["cpu_s"] >= 0 and e["peak_rss_mib"] > 0, e
    # seconds since the log began never go back; the steps lie within the whole command
    t = [e["t_s"] for e in events[1:]]
    assert t == sorted(t)
    assert sum(e["wall_s"] for e in ends) <= events[-1]["wall_s"]
    # the peak resident memory is a high-water mark of this process (the run is in process):
    # never falling from step to step and at most what getrusage(2) reports for it afterwards
    peaks = [e["peak_rss_mib"] for e in ends]
    assert peaks == sorted(peaks)
    assert events[-1]["peak_rss_mib"] <= resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0 + 1e-3


def test_the_log_ends_ok_and_holds_every_message_with_its_level(quiet_logged):
    proc, events, _ = quiet_logged
    end = events[-1]
    assert (end["status"], end["exit_code"], end["message"]) == ("ok", 0, None)
    messages = [e for e in events if e["event"] == "message"]
    assert {e["level"] for e in messages} <= {"info", "warning"}
    assert any(e["level"] == "info" for e in messages)  # the model choice is said on every run
    for e in messages:
        assert (e["level"] == "warning") == e["text"].startswith("warning:"), e
    assert events[0]["command"][:2] == ["strikeline", "run"]


def test_quiet_keeps_the_warnings_and_the_answer_and_drops_the_rest(quiet_logged):
    proc, events, _ = quiet_logged
    said = [e for e in events if e["event"] == "message"]
    # stderr holds exactly the warnings of the log, in order
    assert proc.stderr.splitlines() == [e["text"] for e in said if e["level"] == "warning"]
    assert "results written to" in proc.stdout and "not a substitute for site investigation" in proc.stdout


def test_without_quiet_the_information_lines_are_on_stderr_and_no_bar_off_a_terminal(tmp_path):
    proc = run_cli(*EMPTY, "--out", tmp_path / "out", "--log-json", tmp_path / "run.jsonl")
    assert proc.returncode == 2
    assert "\r" not in proc.stderr and "%|" not in proc.stderr  # no bar frames: stderr is not a terminal


def test_a_refused_input_ends_the_log_with_status_error_and_exit_code_2(tmp_path):
    log = tmp_path / "run.jsonl"
    proc = run_cli(*EMPTY, "--out", tmp_path / "out", "--log-json", log)
    assert proc.returncode == 2
    (line,) = proc.stderr.splitlines()
    assert line.startswith("error: ")
    events = read_log(log)
    assert [e["step"] for e in events if e["event"] == "step_start"] == ["reading inputs"]
    end = events[-1]
    assert (end["event"], end["status"], end["exit_code"]) == ("end", "error", 2)
    assert end["message"] == line[len("error: "):]
    assert events[-2] == {**events[-2], "event": "message", "level": "error", "text": end["message"]}
    assert not (tmp_path / "out").exists()


def test_a_log_inside_out_is_refused_before_any_work(tmp_path):
    out = tmp_path / "out"
    proc = run_cli(*QUICK, "--out", out, "--log-json", out / "run.jsonl")
    assert proc.returncode == 2
    (line,) = proc.stderr.splitlines()
    assert line.startswith("error: --log-json") and "inside --out" in line and proc.stdout == ""
    assert not out.exists()
    # the --out file of attitude is refused as a log too
    with pytest.raises(InputError, match="is the --out path itself"):
        check_log_path(str(tmp_path / "plane.json"), out=str(tmp_path / "plane.json"))


def test_an_existing_file_that_is_no_log_is_never_overwritten(tmp_path):
    other = tmp_path / "notes.txt"
    other.write_text("field notes\n")
    proc = run_cli(*EMPTY, "--out", tmp_path / "out", "--log-json", other)
    assert proc.returncode == 2 and "is not a strikeline log" in proc.stderr
    assert other.read_text() == "field notes\n"
    # an input file is not a log either
    proc = run_cli(*EMPTY, "--out", tmp_path / "out", "--log-json", DEMO / "contacts.gpkg")
    assert proc.returncode == 2 and "is not a strikeline log" in proc.stderr
    # a folder
    proc = run_cli(*EMPTY, "--out", tmp_path / "out", "--log-json", tmp_path)
    assert proc.returncode == 2 and "is a folder" in proc.stderr


def test_an_earlier_log_is_replaced(tmp_path):
    log = tmp_path / "run.jsonl"
    run_cli(*EMPTY, "--out", tmp_path / "out", "--log-json", log)
    first = read_log(log)
    assert is_strikeline_log(str(log))
    proc = run_cli(*EMPTY, "--out", tmp_path / "out", "--log-json", log)
    assert proc.returncode == 2
    second = read_log(log)
    assert len(second) == len(first) and sum(e["event"] == "start" for e in second) == 1


# --------------------------------------------------------------------------- a real terminal
def _on_a_terminal(args, *, columns=100):
    """``python -m strikeline.cli.main ARGS`` with stderr on a pseudo-terminal (Python's ``pty``
    module; the window size set with TIOCSWINSZ, as a terminal emulator does) and stdout piped.
    Returns (exit status, what the terminal received, stdout)."""
    master, slave = pty.openpty()
    fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", 24, columns, 0, 0))
    env = {k: v for k, v in os.environ.items() if k != "STRIKELINE_DEBUG"}
    proc = subprocess.Popen([sys.executable, "-m", "strikeline.cli.main", *map(str, args)], stdin=subprocess.DEVNULL,
                            stdout=subprocess.PIPE, stderr=slave, env=env)
    os.close(slave)
    seen = b""
    try:
        while True:
            ready, _, _ = select.select([master], [], [], 1.0)
            if ready:
                try:
                    chunk = os.read(master, 65536)
                except OSError:  # EIO: the child closed the terminal
                    break
                if not chunk:
                    break
                seen += chunk
            elif proc.poll() is not None:
                break
        out = proc.stdout.read().decode()
        return proc.wait(timeout=600), seen.decode("utf-8", "replace"), out
    finally:
        os.close(master)
        proc.stdout.close()


def test_a_terminal_shows_the_bar_over_the_steps_and_clears_it(tmp_path):
    code, term, out = _on_a_terminal([*QUICK, "--out", tmp_path / "out"])
    assert code == 0, term
    total = len(RUN_STEPS)
    for k, name in enumerate(RUN_STEPS, 1):
        assert f"{name} ({k}/{total})" in term, name
    assert "100%|" in term  # tqdm's frame once the last step is done
    assert term.rstrip(" ").endswith("\r")  # the bar is cleared (tqdm leave=False): the line is blank
    assert "results written to" in out and "\r" not in out


def test_quiet_on_a_terminal_draws_no_bar_and_piped_stderr_gets_none(tmp_path):
    code, term, _ = _on_a_terminal([*EMPTY, "--out", tmp_path / "out", "--quiet"])
    assert code == 2
    assert "%|" not in term and term.strip().startswith("error: ")
    code, term, _ = _on_a_terminal([*EMPTY, "--out", tmp_path / "out"])
    assert code == 2 and f"reading inputs (1/{len(RUN_STEPS)})" in term  # the same command draws it without --quiet
    piped = subprocess.run([sys.executable, "-m", "strikeline.cli.main", *map(str, EMPTY), "--out", tmp_path / "out"],
                           capture_output=True, text=True, timeout=600)
    assert piped.returncode == 2
    assert "\r" not in piped.stderr and "%|" not in piped.stderr
    assert piped.stderr.splitlines()[-1].startswith("error: ")


# --------------------------------------------------------------------------- a run that is stopped
def _stopped_at(step: str, sig: int, tmp_path) -> tuple[int, list[dict]]:
    """Start ``python -m strikeline.cli.main`` with --log-json, send it ``sig`` once the log
    shows ``step`` begun, and return its exit status (negative: killed by the signal, as
    ``subprocess`` reports it) and the log's lines as written when it ended."""
    log = tmp_path / "run.jsonl"
    env = {k: v for k, v in os.environ.items() if k != "STRIKELINE_DEBUG"}
    proc = subprocess.Popen([sys.executable, "-m", "strikeline.cli.main", *map(str, QUICK), "--out", tmp_path / "out",
                             "--log-json", log], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env)
    try:
        while proc.poll() is None:
            if log.exists() and f'"step": "{step}"' in log.read_text(encoding="utf-8"):
                proc.send_signal(sig)
                break
            select.select([], [], [], 0.05)  # poll the log file again shortly
        code = proc.wait(timeout=600)
    finally:
        if proc.poll() is None:
            proc.kill()
        proc.stderr.close()
    return code, read_log(log)


def test_a_killed_run_leaves_every_event_so_far(tmp_path):
    import signal

    code, events = _stopped_at("surface model", signal.SIGKILL, tmp_path)
    assert code == -signal.SIGKILL  # Source: Python docs, subprocess.Popen.returncode (-N: killed by signal N)
    # every line is whole JSON (read_log parsed them); the steps up to the kill are there, no end
    starts = [e["step"] for e in events if e["event"] == "step_start"]
    assert starts == list(RUN_STEPS[:RUN_STEPS.index("surface model") + 1])
    assert events[-1]["event"] != "end"
    assert not (tmp_path / "out").exists()


def test_a_run_stopped_by_sigterm_ends_its_log_with_exit_143(tmp_path):
    import signal

    code, events = _stopped_at("surface model", signal.SIGTERM, tmp_path)
    # Source: the shell's convention, exit status 128 + signal number (bash manual, "Exit Status")
    assert code == 128 + signal.SIGTERM
    end = events[-1]
    assert (end["event"], end["status"], end["exit_code"]) == ("end", "error", 128 + signal.SIGTERM)
    assert "SIGTERM" in end["message"]
    assert not (tmp_path / "out").exists()
