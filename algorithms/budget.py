"""How much memory one run of strikeline may plan to use.

Options and inputs that drive the size of a run (cells of the output grid, picks, windows,
contour levels, resamples) are checked against this budget before any work starts, so that an
absurd value is refused in one line instead of exhausting the machine
(:mod:`strikeline.pipeline.workload`). Imports neither GDAL nor QGIS.
"""
from __future__ import annotations

import os

#: Share of the machine's physical memory one run may plan to fill: the rest is left to the
#: operating system, QGIS and the user's other programs (our choice).
MEMORY_SHARE = 0.5
#: The budget where the physical memory cannot be read (``os.sysconf`` missing, e.g. Windows):
#: 4 GiB, half of a common 8 GiB laptop (our choice).
FALLBACK_BUDGET_BYTES = 4 * 2**30


#: Bytes of the chain's arrays per cell of the output grid. Measured: 42 (plane) and 47 (spline)
#: bytes more for each further cell (peak resident memory of load_inputs and compute, the demo sheet's
#: DEM resampled to 1.4 M and 5.8 M cells); 200 allows for the thickness grids, the map-unit checks
#: and writing (our choice).
BYTES_PER_CELL = 200
#: Share of the budget the grid's arrays may fill in memory; beyond it a run computes and writes its
#: grids block by block (:mod:`strikeline.pipeline.tiled`), leaving the rest to the DEM, the picks
#: and the models (our choice).
GRID_SHARE = 0.5
#: Cells of the output grid beyond which a run goes block by block whatever the budget (2,048²).
#: Measured on the bench's plane sheet (bench/_sheets.py), whole run, quiet machine: at 2,000² the
#: block path took 21.3 s and 566 MiB against 23.1 s and 650 MiB in memory, at 4,000² 33.8 s and
#: 722 MiB against 37.9 s and 1,179 MiB, the files byte for byte the same; so memory stops
#: growing with the sheet at no cost in time (our choice of the size).
BLOCK_SWITCH_CELLS = 2048 * 2048
#: Bytes per cell of the output grid that a run still holds when its grids go block by block: the
#: DEM read whole (the reader's 4 + 16 bytes per cell, :func:`strikeline.io.raster.read_raster`)
#: and its slope for the pick errors (two float32 grids). Measured: 8 to 21 bytes more per further
#: cell (peak resident memory of strikeline run in blocks on invented sheets of 2,000^2, 4,000^2 and
#: 8,000^2 cells: 570, 665 and 1,624 MiB, the peak reached before the grids); 32 with a margin (our
#: choice).
BLOCK_BYTES_PER_CELL = 32
#: Bytes per cell of the output grid that a run holds when its grids go block by block and its DEM
#: stays in its file, read by windows (:mod:`strikeline.pipeline.dem_access`): nothing grows with
#: the cells but the thickness statistics (the true thickness of every cell within reach of both
#: surfaces, float64, and the sorted copy its percentiles take), with top contacts only. 1 byte
#: per cell is our allowance without them (our choice, checked against the peaks of the sheet
#: bench: see the README's Performance section).
WINDOWED_BYTES_PER_CELL = 1
#: What the thickness statistics add per cell with top contacts (two float64 copies).
THICKNESS_BYTES_PER_CELL = 16


def physical_memory_bytes() -> int | None:
    """The machine's physical memory (``os.sysconf('SC_PHYS_PAGES') * SC_PAGE_SIZE``), or None."""
    try:
        pages, size = os.sysconf("SC_PHYS_PAGES"), os.sysconf("SC_PAGE_SIZE")
    except (AttributeError, ValueError, OSError):
        return None
    if pages <= 0 or size <= 0:
        return None
    return int(pages) * int(size)


def grids_go_in_blocks(rows: int, cols: int) -> bool:
    """Whether a run's grids of ``rows`` x ``cols`` cells go block by block by themselves: more
    cells than :data:`BLOCK_SWITCH_CELLS`, or arrays (:data:`BYTES_PER_CELL` per cell) that would
    fill more than :data:`GRID_SHARE` of the memory budget.

    >>> grids_go_in_blocks(2000, 2000), grids_go_in_blocks(2049, 2048)
    (False, True)
    """
    cells = float(rows) * float(cols)
    return cells > BLOCK_SWITCH_CELLS or cells * BYTES_PER_CELL > GRID_SHARE * memory_budget_bytes()


def memory_budget_bytes() -> int:
    """Bytes one run may plan to use: :data:`MEMORY_SHARE` of the physical memory, else
    :data:`FALLBACK_BUDGET_BYTES`."""
    phys = physical_memory_bytes()
    return FALLBACK_BUDGET_BYTES if phys is None else int(phys * MEMORY_SHARE)


def budget_words() -> str:
    """The memory budget and its basis, for messages: ``'11.8 GiB (half the machine's memory)'``."""
    basis = ("half the machine's memory" if physical_memory_bytes() is not None
             else "the fixed budget used where the machine's memory cannot be read")
    return f"{size_words(memory_budget_bytes())} ({basis})"


def size_words(n_bytes: float) -> str:
    """A byte count in words: ``'3.2 GiB'``, ``'800 MiB'``, ``'2.1e+04 GiB'``."""
    gib = n_bytes / 2**30
    if gib >= 1e4:
        return f"{gib:.2g} GiB"
    if gib >= 1:
        return f"{gib:.1f} GiB"
    return f"{n_bytes / 2**20:.0f} MiB"
