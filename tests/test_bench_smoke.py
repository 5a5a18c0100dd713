"""The benchmark scripts run and print their figures (at their smallest sizes; no timing is checked).

Each script of ``bench/`` is run as ``make bench`` runs it - a child process of the venv's Python -
with the smallest-size arguments ``bench/run_all.py`` gives it for ``--quick``, and must exit 0
and print, for every workload, a ``result:`` line with its time and peak memory, or a clean
``refused:`` / ``not available:`` reason. The measuring helpers are checked against the kernel's
own figures and exact arithmetic.
"""
from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

BENCH = Path(__file__).resolve().parent.parent / "bench"
sys.path.insert(0, str(BENCH))
import _measure  # noqa: E402
import run_all  # noqa: E402
from bench_sheet import growth_exponent  # noqa: E402

FIGURES = re.compile(r"^result: .+ \| time \d+\.\d\d s \| peak [\d,]+ MiB( \([^)|]+\))* \| cpu/wall "
                     r"(\d+\.\d\d|nan)( \| .*)?$")
STATUS = re.compile(r"^result: .+ \| (refused|not available|failed[^:]*): .+$")
EXPONENTS = re.compile(r"^result: sheet growth exponents over \d+ sizes \| time ~ cells\^-?\d+\.\d\d \| "
                       r"peak memory ~ cells\^-?\d+\.\d\d$")


def run_script(script: str, args: list) -> str:
    proc = subprocess.run([sys.executable, str(BENCH / script), *args], capture_output=True, text=True,
                          cwd=BENCH.parent, timeout=1800)
    assert proc.returncode == 0, f"{script} {args}: exit {proc.returncode}\n{proc.stdout[-2000:]}\n{proc.stderr[-3000:]}"
    return proc.stdout


NAMED = {s for s, *_ in run_all.SUITE}


@pytest.mark.slow
@pytest.mark.parametrize("script,args", [(s, q) for s, _, q, _ in run_all.suite()], ids=lambda v: str(v))
def test_each_script_prints_its_figures(script, args):
    out = run_script(script, args)
    results = [ln for ln in out.splitlines() if ln.startswith("result:")]
    if script not in NAMED and not results:  # a script that prints figures in its own layout
        assert out.strip(), f"{script} printed nothing"
        return
    assert results, f"{script} printed no result line:\n{out[-2000:]}"
    for line in results:
        assert FIGURES.match(line) or STATUS.match(line) or EXPONENTS.match(line), line
    # a workload the tool ran (not refused) carries the figures; batch may be absent from this tree
    assert any(FIGURES.match(ln) for ln in results) or script == "bench_batch.py", results
    if script == "bench_batch.py" and not any(FIGURES.match(ln) for ln in results):
        assert "batch: not available" in out


@pytest.mark.slow
def test_run_all_prints_one_table():
    out = run_script("run_all.py", ["--quick", "--only", "dipgrids,thinning"])
    table = out[out.index("=== results"):]
    results = [ln for ln in out[:out.index("=== results")].splitlines() if ln.startswith("result:")]
    rows = [ln for ln in table.splitlines() if ln.startswith("| ") and not ln.startswith("| workload")]
    assert len(rows) == len(results) >= 2, table
    assert "| workload | strikeline: wall; CPU/wall; peak | reference in the same run | ratio | target |" in table
    assert "machine:" in table and "load average after the suite" in table
    assert "Load average (1/5/15 min):" in table and "numpy" in table and "GDAL" in table


def test_a_result_line_becomes_a_readme_row():
    line = ("5 contacts on a 600^2 sheet end to end (strikeline run) | time 12.34 s | peak 456 MiB | cpu/wall 0.98 | "
            "ratio 1.10 x the same trace as 2 whole lines (11.2 s, 400 MiB) | target < 60 s: met")
    # Source: the README's Performance table (its five columns)
    assert run_all.table_row(line) == ("| 5 contacts on a 600^2 sheet end to end (strikeline run) | 12.34 s; 0.98; "
                                       "456 MiB | the same trace as 2 whole lines (11.2 s, 400 MiB) | 1.10 × | "
                                       "target < 60 s: met |")
    assert run_all.table_row("batch of sheets | not available: no batch command") == \
        "| batch of sheets | not available: no batch command | — | — | — |"


def test_a_child_is_measured_alone():
    """run_child's peak is the child's own high-water mark as the kernel gives it (VmHWM of
    /proc/self/status, proc(5)), not inflated by this (larger) test process."""
    ballast = bytearray(300 * 2**20)  # this process holds 300 MiB more than the child will
    code = ("import numpy as np; a = np.ones(40 * 2**20 // 8); a += 1; "
            "print([l for l in open('/proc/self/status') if l.startswith('VmHWM')][0].split()[1])")
    r = _measure.run_child([sys.executable, "-c", code])
    del ballast
    assert r.returncode == 0, r.stderr
    own_kib = int(r.stdout.strip())
    if _measure.GNU_TIME:
        # Source: proc(5), VmHWM is the process's peak resident set; GNU time(1) reports the same maxrss
        assert abs(r.peak_bytes / 1024 - own_kib) <= 2048, (r.peak_bytes / 1024, own_kib)
    assert r.peak_bytes >= 40 * 2**20
    assert r.cpu_s >= 0 and r.wall_s > 0


def test_in_process_peak_is_the_workload_growth():
    """measured(): the growth of the resident high-water mark during the block, here a 64 MiB
    array written through (so resident), is at least its size and not the whole process."""
    import numpy as np
    with _measure.measured() as m:
        a = np.ones(64 * 2**20 // 8)
        a += 1.0
    del a
    if not m.peak_whole_process:
        # Source: numpy docs - a float64 array of n items holds 8n bytes, resident once written
        assert 64 * 2**20 <= m.peak_bytes < 64 * 2**20 + 32 * 2**20, m.peak_bytes


def test_growth_exponent_is_the_log_log_slope():
    # exact power laws: the log-log slope of y = c * x^k is k (Source: arithmetic,
    # log y = log c + k log x; common practice for growth exponents)
    cells = [1e6, 1.6e7, 1.44e8]
    assert growth_exponent(cells, [3e-6 * c for c in cells]) == pytest.approx(1.0)
    assert growth_exponent(cells, [7 * c ** 0.5 for c in cells]) == pytest.approx(0.5)
    assert growth_exponent(cells[:1], [1.0]) is None


def test_child_error_line_is_the_tools_one_line():
    r = _measure.ChildRun(2, "", "some log\nerror: the output grid would need 29 GiB; use --cell\n", 1.0, 1.0, 0.0)
    assert r.error_line() == "the output grid would need 29 GiB; use --cell"


@pytest.mark.parametrize("cells", [60, 150, 300])
def test_every_sheet_of_the_batch_mosaic_has_a_contact(tmp_path, cells):
    """The batch workload's 16 sheets each carry a contact trace at any size (a sheet without one
    fails in the batch, which then times 15 sheets and a refusal). The contact is an upright fold
    from 200 m to 1,000 m across every sheet and the terrain keeps within 290-910 m. The mosaic is
    made in a child process, as the bench makes it (its GDAL calls switch exceptions on)."""
    import json

    import _sheets
    import bench_batch

    xs = np.linspace(0.0, 40_000.0, 801)
    ground = _sheets.terrain(_sheets.X0 + xs[:, None], _sheets.Y0 + xs[None, :])
    # Source: arithmetic - 600 m plus sines of amplitude 180, 90 and 40 m stays within 600 -/+ 310 m
    assert bench_batch.TERRAIN_MIN_M <= ground.min() and ground.max() <= bench_batch.TERRAIN_MAX_M
    code = ("import json, sys; from pathlib import Path; from osgeo import ogr; import bench_batch; "
            f"t = Path(sys.argv[1]); job, n = bench_batch.make_job(t, {cells}, 4); "
            "ds = {p.name: ogr.Open(str(p)) for p in sorted(t.glob('*_contacts.gpkg'))}; "
            "c = {k: d.GetLayer(0).GetFeatureCount() for k, d in ds.items()}; "
            "print(json.dumps({'n': n, 'counts': c, 'sheets': job.read_text().count('[[sheet]]')}))")
    proc = subprocess.run([sys.executable, "-c", code, str(tmp_path)], capture_output=True, text=True, cwd=BENCH,
                          timeout=600)
    assert proc.returncode == 0, proc.stderr[-2000:]
    made = json.loads(proc.stdout)
    counts = made["counts"]
    assert len(counts) == 16 and min(counts.values()) >= 1, counts
    assert sum(counts.values()) == made["n"] and made["sheets"] == 16
