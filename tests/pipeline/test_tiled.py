"""The grids of a run block by block (strikeline.pipeline.tiled): the same files as in memory.

The reference is the in-memory chain on the same inputs, and the outside checks are GDAL's: the
GeoTIFFs are compared byte for byte and read back by GDAL's GTiff driver, the layers of
``results.gpkg`` are read with OGR and compared feature by feature (the GeoPackage's bytes hold
write times), and the contour lines drawn by GDAL's contour generator from a file must be those
it draws from the array.
"""
from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import pytest

gdal = pytest.importorskip("osgeo.gdal")
from osgeo import ogr  # noqa: E402

from strikeline.pipeline import compute, load_inputs, write_results  # noqa: E402
from strikeline.pipeline.options import RunOptions  # noqa: E402
from strikeline.pipeline.tiled import block_windows, grids_by_blocks  # noqa: E402

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "test_data" / "demo"
VOLCANO = REPO / "test_data" / "real" / "volcano"
sys.path.insert(0, str(REPO / "tests"))
from helpers import gdal_exceptions, sha256_of as _sha  # noqa: E402

#: Blocks of 7 x 5 cells: neither divides the grids' sides nor GDAL's 256-cell tiles, so block
#: edges, halos, the grid's edges and tile edges all fall in different places.
TINY = (7, 5)


def _layers(gpkg: Path) -> dict:
    """Every layer of a GeoPackage as OGR reads it: field names, and each feature's fields and geometry
    as ISO WKB (Source: OGR's GeoPackage driver, GDAL 3.6)."""
    out = {}
    with gdal_exceptions():
        ds = ogr.Open(str(gpkg))
        for i in range(ds.GetLayerCount()):
            lyr = ds.GetLayerByIndex(i)
            defn = lyr.GetLayerDefn()
            names = [defn.GetFieldDefn(k).GetName() for k in range(defn.GetFieldCount())]
            # a style row's update time is when it was written (OGC GeoPackage layer_styles)
            keep = [k for k, n in enumerate(names) if not (lyr.GetName() == "layer_styles" and "time" in n)]
            names = [names[k] for k in keep]
            feats = []
            for f in lyr:
                g = f.GetGeometryRef()
                feats.append((tuple(f.GetField(k) for k in keep),
                              None if g is None else bytes(g.ExportToIsoWkb())))
            out[lyr.GetName()] = (names, feats)
        ds = None
    return out


def _run_both(tmp_path, opts_kw: dict, block) -> tuple[Path, Path, object]:
    """The same inputs computed in memory and in blocks of ``block``, each written with write_results."""
    folders = []
    for name, cells in (("memory", None), ("blocks", block)):
        opts = RunOptions(out=str(tmp_path / name), **opts_kw)
        inputs = load_inputs(opts)
        opts.block_cells = cells  # (rows, cols): the library's form of --block-cells
        results = compute(inputs, opts)
        write_results(results, tmp_path / name)
        folders.append(tmp_path / name)
    return folders[0], folders[1], results


def _assert_same_outputs(mem: Path, blk: Path) -> None:
    names = sorted(p.name for p in mem.iterdir())
    assert names == sorted(p.name for p in blk.iterdir())  # no scratch file left
    tifs = [n for n in names if n.endswith(".tif")]
    assert tifs
    for n in tifs:
        assert _sha(mem / n) == _sha(blk / n), n
        with gdal_exceptions():  # Source: GDAL's GTiff driver reads both files to the same cells
            a = gdal.Open(str(mem / n)).ReadAsArray()
            b = gdal.Open(str(blk / n)).ReadAsArray()
        assert np.array_equal(a.view(np.uint32), b.view(np.uint32))
    assert (mem / "summary.json").read_bytes() == (blk / "summary.json").read_bytes()
    la, lb = _layers(mem / "results.gpkg"), _layers(blk / "results.gpkg")
    assert list(la) == list(lb)
    for name in la:
        assert la[name] == lb[name], name


# ---------------------------------------------------------------- the pieces
def test_block_windows_cover_every_cell_once():
    shape = (23, 17)
    seen = np.zeros(shape, dtype=int)
    for band in block_windows(shape, TINY):
        assert len({w[:2] for w in band}) == 1  # one band of rows
        for r0, r1, c0, c1 in band:
            seen[r0:r1, c0:c1] += 1
    assert (seen == 1).all()  # Source: arithmetic - a partition of the grid


def _volcano_model(case: str, kind: str):
    from strikeline.pipeline.steps import collect_picks
    from strikeline.surfaces import fit_surface

    opts = RunOptions(out="unused", contacts=str(next((VOLCANO / case).glob("*.gpkg"))), dem=str(VOLCANO / "dem.tif"))
    inputs = load_inputs(opts)
    return fit_surface(collect_picks(inputs).xyz, model=kind), inputs.dem_grid


@pytest.mark.parametrize("case", ["plane", "fold"])
@pytest.mark.parametrize("kind", ["plane", "trend2", "spline"])
def test_surface_on_a_window_equals_the_whole_grid(kind, case):
    """What the block path relies on: the surface and its standard error on a block window
    (``window=``) are the whole grid's values for those cells, bit for bit."""
    model, grid = _volcano_model(case, kind)
    whole, se = model.evaluate_grid(grid), model.standard_error_grid(grid)
    for r0, r1, c0, c1 in [(10, 17, 20, 25), (0, 7, 0, 5), (80, 87, 56, 61), (40, 41, 30, 31)]:
        win = (r0, r1, c0, c1)
        assert np.array_equal(model.evaluate_grid(grid, window=win, workers=1), whole[r0:r1, c0:c1], equal_nan=True)
        assert np.array_equal(model.standard_error_grid(grid, window=win, workers=1), se[r0:r1, c0:c1],
                              equal_nan=True)


def test_contours_from_the_file_are_those_of_the_array(tmp_path):
    """GDAL's contour generator reading the float64 scratch file block by block draws the lines it
    draws from the array (Source: GDAL 3.6 GDALContourGenerateEx reads the band by lines)."""
    from strikeline.io.contours import contour_lines
    from strikeline.io.gridfiles import contour_lines_from_file

    model, grid = _volcano_model("plane", "plane")
    surface = model.evaluate_grid(grid)
    surface[30:40, 10:20] = np.nan  # a hole: the lines stop at its valid centres in both
    tiles = grids_by_blocks(_Holed(model, surface, grid), grid, tmp_path, block_shape=TINY)
    a_geoms, a_elev = contour_lines(surface, grid, interval_m=10.0)
    b_geoms, b_elev = contour_lines_from_file(tiles.scratch["surface"], grid, interval_m=10.0)
    assert len(a_geoms) > 5
    assert np.array_equal(a_elev, b_elev)
    assert [g.wkb for g in a_geoms] == [g.wkb for g in b_geoms]


class _Holed:
    """A model whose grid is a given array (with a hole), for the contour check."""

    def __init__(self, model, surface, grid):
        self.model, self.surface, self.grid = model, surface, grid

    def _cut(self, g):
        x0, y0 = g.transform[0], g.transform[3]
        c0 = int(round((x0 - self.grid.transform[0]) / g.cell_x_m))
        r0 = int(round((self.grid.transform[3] - y0) / g.cell_y_m))
        return r0, c0

    def evaluate_grid(self, g, *, window=None, workers=None):
        if window is not None:
            r0, r1, c0, c1 = window
            return self.surface[r0:r1, c0:c1]
        r0, c0 = self._cut(g)
        return self.surface[r0:r0 + g.rows, c0:c0 + g.cols]

    def standard_error_grid(self, g, *, window=None, workers=None):
        return self.model.standard_error_grid(g, window=window, workers=workers)


# ---------------------------------------------------------------- whole runs, byte for byte
def test_demo_with_isopachs_in_tiny_blocks_gives_the_same_files(tmp_path):
    """The demo sheet with its top contact (surface, dip, dip direction, uncertainty, depth, both
    isopachs; structure contours, trace, misfit, thickness statistics) in 7 x 5 blocks."""
    mem, blk, results = _run_both(tmp_path, {"contacts": str(DEMO / "contacts.gpkg"), "dem": str(DEMO / "dem.tif"),
                                             "top_contacts": str(DEMO / "top_contacts.gpkg")}, TINY)
    _assert_same_outputs(mem, blk)
    assert len(results.block_grids) == 2  # the grids pass and the isopachs pass
    summary = json.loads((blk / "summary.json").read_text())
    assert any(isinstance(v, dict) and v.get("n_cells", 0) > 0 for v in summary.values())  # thickness statistics


@pytest.mark.parametrize("case", ["plane", "mistraced", "fold"])
def test_real_sheet_in_tiny_blocks_gives_the_same_files(tmp_path, case):
    """A real DEM (R's volcano) with an invented contact draped on it, in 7 x 5 blocks (the fold
    is modelled by the spline: its coarse lattice and check belong to the whole grid)."""
    mem, blk, _ = _run_both(tmp_path, {"contacts": str(next((VOLCANO / case).glob("*.gpkg"))),
                                       "dem": str(VOLCANO / "dem.tif")}, TINY)
    _assert_same_outputs(mem, blk)


def test_blocks_a_tile_row_high_are_written_as_they_come(tmp_path, monkeypatch):
    """Blocks one 256-cell tile row high and whole tiles wide go to the files one by one
    (StripWriter.write_block: no band across the grid's width in memory): the demo with its top
    contact on 5 m cells (800 x 800: three whole tile rows and a part, two blocks across, the
    second not a whole block) gives the in-memory run's files."""
    from strikeline.io.gridfiles import StripWriter

    calls = []
    original = StripWriter.write_block

    def spy(self, r0, c0, values):
        calls.append((r0, c0))
        return original(self, r0, c0, values)

    monkeypatch.setattr(StripWriter, "write_block", spy)
    mem, blk, results = _run_both(tmp_path, {"contacts": str(DEMO / "contacts.gpkg"), "dem": str(DEMO / "dem.tif"),
                                             "top_contacts": str(DEMO / "top_contacts.gpkg"), "cell_m": 5.0},
                                  (256, 512))
    assert results.block_grids[0].files  # the grids went by blocks
    # 4 tile rows x 2 blocks, once for each file of the grids pass (5 outputs, 2 scratch) and of
    # the isopachs pass (2 outputs, 1 scratch)
    assert len(calls) == 8 * (7 + 3)
    assert sorted(set(calls)) == [(r, c) for r in (0, 256, 512, 768) for c in (0, 512)]
    _assert_same_outputs(mem, blk)


def test_command_line_block_cells_writes_the_same_grids(tmp_path, cli):
    """``strikeline run --block-cells 5`` writes the grids it writes without the option, and leaves no
    scratch file in the output folder (its manifest lists the outputs only)."""
    base = ["run", "--contacts", str(next((VOLCANO / "plane").glob("*.gpkg"))), "--dem", str(VOLCANO / "dem.tif")]
    a = cli(*base, "--out", str(tmp_path / "a"))
    b = cli(*base, "--block-cells", "5", "--out", str(tmp_path / "b"))
    assert a.returncode == 0 and b.returncode == 0, b.stderr
    names = sorted(p.name for p in (tmp_path / "a").iterdir())
    assert names == sorted(p.name for p in (tmp_path / "b").iterdir())
    for n in names:
        if n.endswith(".tif"):
            assert _sha(tmp_path / "a" / n) == _sha(tmp_path / "b" / n), n
    manifest = json.loads((tmp_path / "b" / "strikeline_manifest.json").read_text())
    assert not [f for f in manifest["files"] if "scratch" in f]


# ---------------------------------------------------------------- the workload check
def test_workload_budgets_the_block_path_per_cell(monkeypatch):
    """A DEM grid whose arrays would not fit the budget in memory goes block by block and is
    budgeted at BLOCK_BYTES_PER_CELL per cell; one that fits stays in memory at BYTES_PER_CELL."""
    from types import SimpleNamespace

    import shapely

    import strikeline.budget as budget
    import strikeline.pipeline.workload as workload
    from strikeline.geometry.grid import Grid

    class Layer(SimpleNamespace):
        def __len__(self):
            return len(self.geoms)

    grid = Grid((0.0, 5.0, 0.0, 1000.0, 0.0, -5.0), (100, 200))
    cells = 100 * 200
    inputs = SimpleNamespace(contacts=Layer(geoms=np.array([shapely.LineString([(0, 0), (600, 800)])], dtype=object)),
                             top_contacts=None, dem=np.zeros(grid.shape), dem_grid=grid, paths={"dem": "d.tif"},
                             contours=None, contour_elevations_m=None, boreholes_xyz=None)
    opts = SimpleNamespace(cell_m=None, pick_spacing_m=None, window_m=None, interval_m=None, resamples=None,
                           block_cells=None)

    def dem_estimate():
        return next(e for e in workload.estimate_workload(inputs, opts) if e.option == "DEM 'd.tif'")

    # a budget of 100 bytes per cell: the arrays in memory (BYTES_PER_CELL) would not fit, so the
    # grid goes block by block, which fits (Reference: arithmetic on the figures above)
    for mod in (budget, workload):
        monkeypatch.setattr(mod, "memory_budget_bytes", lambda: 100 * cells)
    assert budget.BYTES_PER_CELL > 100 > budget.BLOCK_BYTES_PER_CELL
    e = dem_estimate()
    assert e.need == cells * budget.BLOCK_BYTES_PER_CELL and not e.exceeded
    # where the grids must be arrays (compute without an output folder: the QGIS tools) it is refused
    e = next(e for e in workload.estimate_workload(inputs, opts, auto_blocks=False) if e.option == "DEM 'd.tif'")
    assert e.need == cells * budget.BYTES_PER_CELL and e.exceeded
    # a budget that holds the arrays in memory twice over: in memory, at BYTES_PER_CELL
    for mod in (budget, workload):
        monkeypatch.setattr(mod, "memory_budget_bytes", lambda: 2 * budget.BYTES_PER_CELL * cells + 1)
    assert dem_estimate().need == cells * budget.BYTES_PER_CELL
    # asked for blocks: budgeted as blocks whatever the size
    opts.block_cells = 64
    assert dem_estimate().need == cells * budget.BLOCK_BYTES_PER_CELL
