"""The chi-square and Student's t quantiles of strikeline.attitude.kernels equal scipy.stats'."""
import subprocess
import sys

import numpy as np
import pytest
from scipy import stats

from strikeline.attitude.kernels import LEVEL, chi2_quantile, few_blocks_factor, t_quantile
from strikeline.attitude.confidence import CHI2_2DOF_95


def test_chi2_quantile_equals_scipy_stats():
    # Source: scipy.stats.chi2.ppf (scipy 1.17), bit for bit over the degrees of freedom the
    # Satterthwaite match produces (1 to 2) and beyond
    df = np.concatenate([np.linspace(1.0, 2.0, 101), [0.5, 3.0, 7.5, 30.0, 200.0]])
    for p in (0.05, 0.5, LEVEL, 0.99):
        assert np.array_equal(chi2_quantile(p, df), stats.chi2.ppf(p, df))


def test_chi2_2dof_95_is_minus_two_ln_005():
    # Source: chi-square with 2 degrees of freedom is exponential with mean 2 (Abramowitz & Stegun
    # 1964, 26.4.1), so its 95% point is -2 ln 0.05
    assert CHI2_2DOF_95 == pytest.approx(-2.0 * np.log(0.05), rel=1e-13)
    assert CHI2_2DOF_95 == float(stats.chi2.ppf(0.95, 2))


def test_t_quantile_equals_scipy_stats():
    # Source: scipy.stats.t.ppf (scipy 1.17), bit for bit; 12.706 for 1 degree of freedom (the
    # handbook table's 97.5% point)
    df = np.array([1.0, 2.0, 3.0, 5.0, 10.0, 29.0, 100.0, 1e4])
    assert np.array_equal(t_quantile(0.975, df), stats.t.ppf(0.975, df))
    assert float(t_quantile(0.975, 1.0)) == pytest.approx(12.706, abs=5e-4)


def test_few_blocks_factor_as_with_scipy_stats():
    # Source: the factor's formula with scipy.stats.t.ppf; inf below two blocks
    g = np.array([0.0, 1.0, 2.0, 3.0, 10.0, 500.0])
    want = np.where(g >= 2, np.sqrt(g / np.maximum(g - 1.0, 1e-300))
                    * stats.t.ppf(0.975, np.where(g >= 2, g - 1.0, 1.0)) / 1.959963984540054, np.inf)
    assert np.array_equal(few_blocks_factor(g), want)


def test_pipeline_steps_do_not_import_scipy_stats():
    # common practice: scipy.stats costs most of a second to import; the run needs none of it
    code = "import sys, strikeline.pipeline.steps, strikeline.attitude; print('scipy.stats' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
