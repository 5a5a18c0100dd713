"""evaluate_grid of a spline surface against a direct evaluation by an independent implementation:
scipy.interpolate.RBFInterpolator with the same kernel (thin-plate, r² log r), a linear part and
the same smoothing on the diagonal, in the model's normalised coordinates.

What is guaranteed: every cell evaluated in full ('full') holds the kernel sum to rounding; on the
coarse lattice ('coarse') the bicubic spline differs from full evaluation by less than
``tolerance_m``, or by at most ``se_fraction`` of the model's standard error, at the check cells (data cells, random cells, centres of lattice cells), the
largest error being reported. Elsewhere the bound is not proved; it is measured here at every
cell inside the data's hull (where the surface is the spline itself, untapered).
"""
import numpy as np
import pytest
from scipy.interpolate import RBFInterpolator

from strikeline.geometry.grid import Grid
from strikeline.surfaces import fit_surface
from strikeline.surfaces.model import GRID_SE_FRACTION, GRID_TOLERANCE_M

#: Full evaluation against scipy: the same sums in another order (common practice: rounding of
#: kernel sums of a few hundred terms of size ~1e3 m).
FULL_TOL_M = 1e-6


@pytest.fixture(scope="module")
def spline_sheet():
    rng = np.random.default_rng(11)
    xy = rng.uniform(1_000.0, 4_000.0, (240, 2))
    # an invented dome and tilt, metres
    z = (500.0 + 0.05 * xy[:, 0] - 0.02 * xy[:, 1]
         + 40.0 * np.exp(-((xy[:, 0] - 2500.0) ** 2 + (xy[:, 1] - 2300.0) ** 2) / 700.0 ** 2)
         + rng.normal(0.0, 0.5, len(xy)))
    lam = 1e-4
    m = fit_surface(np.column_stack([xy, z]), model="spline", smoothing=lam, cross_validate_model=False)
    assert m.n_used == len(xy)  # nothing thinned: the reference sees the same picks
    origin, scale = np.asarray(m.params["origin_m"]), float(m.params["scale_m"])
    # Source: scipy.interpolate.RBFInterpolator (kernel 'thin_plate_spline' = r² log r, degree 1,
    # smoothing = nλ on the kernel matrix's diagonal), the system the spline solves
    ref = RBFInterpolator((xy - origin) / scale, z, kernel="thin_plate_spline", smoothing=len(xy) * lam,
                          degree=1)
    grid = Grid((0.0, 10.0, 0.0, 5_000.0, 0.0, -10.0), (500, 500))
    return m, grid, lambda x, y: ref(np.column_stack([(x - origin[0]) / scale, (y - origin[1]) / scale]))


def _inside(m, grid):
    X, Y = grid.mesh()
    inside = m.hull_distance(X, Y) == 0
    return X[inside], Y[inside], inside


def test_full_evaluation_is_the_kernel_sum(spline_sheet):
    m, grid, ref = spline_sheet
    z, rep = m.evaluate_grid(grid, tolerance_m=1e-12, se_fraction=0.0, return_report=True)
    assert rep.method == "full"
    x, y, inside = _inside(m, grid)
    assert np.max(np.abs(z[inside] - ref(x, y))) < FULL_TOL_M


def test_coarse_evaluation_within_the_tolerance(spline_sheet):
    m, grid, ref = spline_sheet
    z, rep = m.evaluate_grid(grid, se_fraction=0.0, return_report=True)
    assert rep.method == "coarse" and rep.step_cells > 1
    assert rep.max_checked_error_m < GRID_TOLERANCE_M
    x, y, inside = _inside(m, grid)
    err = np.abs(z[inside] - ref(x, y))
    # measured at every cell inside the hull, not only at the check cells
    assert err.max() < GRID_TOLERANCE_M


def test_coarse_evaluation_within_a_fraction_of_the_standard_error(spline_sheet):
    m, grid, ref = spline_sheet
    # a tolerance no lattice meets: only the standard-error bound can accept one
    z, rep = m.evaluate_grid(grid, tolerance_m=1e-9, se_fraction=GRID_SE_FRACTION, return_report=True)
    assert rep.method == "coarse" and 0 < rep.max_error_per_se <= GRID_SE_FRACTION
    x, y, inside = _inside(m, grid)
    err = np.abs(z[inside] - ref(x, y))
    # measured at every cell inside the hull, against the standard error there
    assert np.max(err / m.standard_error(x, y)) <= GRID_SE_FRACTION
