"""The log line of an output grid made without a cell size names the cell option as the caller
knows it: the command line's flag for ``strikeline run``, the parameter's label for a caller that
passes its names (the QGIS whole chain; its own test is tests/qgis/test_qgis_cell_size_note.py).

# Source: the cell the line states is checked against the contour layer's extent as OGR reports
# it (GetExtent, GDAL 3.6), a 500th of its larger side rounded up in the 1-2-5 series (common
# practice for round map-grid steps).
"""
from __future__ import annotations

from helpers import round_cell_of_layer

from strikeline.pipeline import RunOptions, compute, load_inputs
from strikeline.pipeline.options import CLI_OPTION_NAMES

QUICK = dict(model="plane", resamples=100)


def _note(lines) -> list[str]:
    return [ln for ln in lines if ln.startswith("cell size not given")]


def test_the_command_line_note_names_the_flag(cli, demo, tmp_path):
    res = cli("run", "--contacts", demo["contacts"], "--contours", demo["contours"], "--elev-field",
              demo["elev_field"], "--out", tmp_path / "out", "--model", "plane", "--resamples", 100,
              "--no-report")
    assert res.returncode == 0, res.stderr
    cell = round_cell_of_layer(demo["contours"])
    want = f"cell size not given (--cell): using {cell:g} m cells over the contour layer's extent"
    assert want in res.stdout + res.stderr
    assert CLI_OPTION_NAMES["cell_m"] == "--cell"  # the flag the table gives the option


def test_compute_names_the_option_as_its_caller_does(demo):
    opts = RunOptions(contacts=demo["contacts"], out="/nonexistent-out", contours=demo["contours"],
                      elev_field=demo["elev_field"], **QUICK)
    inputs = load_inputs(opts)
    cell = round_cell_of_layer(demo["contours"])
    lines = []
    compute(inputs, opts, log=lines.append, names={"cell_m": "the 'Output cell size'"})
    assert _note(lines) == [f"cell size not given (the 'Output cell size'): using {cell:g} m cells over "
                            "the contour layer's extent"]
    assert not any("--cell" in ln for ln in lines)
    default = []
    compute(inputs, opts, log=default.append)
    assert _note(default) == [f"cell size not given (--cell): using {cell:g} m cells over the contour "
                              "layer's extent"]
