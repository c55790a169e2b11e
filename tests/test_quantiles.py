"""Normal / Student-t quantiles and the Theil-Sen line, without scipy.stats.

References: every value is checked against scipy.stats (norm.isf, norm.sf, t.isf,
t.ppf, theilslopes with its default method 'separate') as the oracle. xcheck's
functions call the same scipy.special routines (ndtri, ndtr, stdtrit) that
scipy.stats.norm and scipy.stats.t call, and form the Theil-Sen medians from the same
pairwise slopes, so agreement is expected to the last bit; the tolerance, relative
1e-12 (about 5000 units in the last place), only leaves room for a future scipy to
reorder a floating-point operation.
"""

from __future__ import annotations

import subprocess
import sys
import warnings

import numpy as np
import pytest
from scipy import stats as scipy_stats

from xcheck.quantiles import normal_isf, normal_sf, student_isf, student_ppf
from xcheck.ringdown.robust_line import theil_sen

#: Relative tolerance for every comparison with scipy.stats (see the module docstring).
RTOL = 1e-12

#: Upper-tail probabilities from 1e-12 to 0.5: the range the outlier thresholds use
#: (0.01 / (2 n) for n up to a few hundred) and the one-sided 4-sigma tail of the
#: alignment, plus round values.
PROBABILITIES = np.concatenate([np.logspace(-12.0, np.log10(0.5), 61),
                                [1e-12, 1e-9, 1e-6, 1e-3, 0.005, 0.01 / 14, 0.025, 0.5]])
DEGREES_OF_FREEDOM = [1, 2, 3, 5, 30, 1000]


def test_normal_isf_matches_scipy_stats_norm_isf():
    # Oracle: scipy.stats.norm.isf on the same grid.
    np.testing.assert_allclose(normal_isf(PROBABILITIES), scipy_stats.norm.isf(PROBABILITIES),
                               rtol=RTOL, atol=0.0)


def test_normal_isf_of_a_scalar_is_a_float():
    # Oracle: scipy.stats.norm.isf(0.01 / 14), the envelope threshold for 7 extrema.
    value = normal_isf(0.01 / 14)
    assert isinstance(value, float)
    assert value == pytest.approx(float(scipy_stats.norm.isf(0.01 / 14)), rel=RTOL)


def test_normal_sf_matches_scipy_stats_norm_sf():
    # Oracle: scipy.stats.norm.sf from deep in the lower tail to 40 sigma, where the
    # upper tail is about 4e-350 and underflows to 0 in both.
    x = np.linspace(-10.0, 40.0, 501)
    np.testing.assert_allclose(normal_sf(x), scipy_stats.norm.sf(x), rtol=RTOL, atol=0.0)


@pytest.mark.parametrize("df", DEGREES_OF_FREEDOM)
def test_student_isf_matches_scipy_stats_t_isf(df: int):
    # Oracle: scipy.stats.t.isf; df = 1 (Cauchy, isf(1e-12) ~ 3e11) to 1000 (near normal).
    np.testing.assert_allclose(student_isf(PROBABILITIES, df),
                               scipy_stats.t.isf(PROBABILITIES, df), rtol=RTOL, atol=0.0)


@pytest.mark.parametrize("df", DEGREES_OF_FREEDOM)
def test_student_ppf_matches_scipy_stats_t_ppf_in_both_tails(df: int):
    # Oracle: scipy.stats.t.ppf at q and 1 - q; 1 - q covers the one-sigma coverage
    # level Phi(1) ~ 0.841 that the peak-table fit uses.
    q = np.concatenate([PROBABILITIES, 1.0 - PROBABILITIES,
                        [float(scipy_stats.norm.cdf(1.0))]])
    np.testing.assert_allclose(student_ppf(q, df), scipy_stats.t.ppf(q, df),
                               rtol=RTOL, atol=0.0)


def test_student_functions_broadcast_probability_against_df():
    # Oracle: scipy.stats.t.isf / t.ppf broadcast the same way.
    p = PROBABILITIES[:, None]
    df = np.array(DEGREES_OF_FREEDOM, dtype=float)[None, :]
    np.testing.assert_allclose(student_isf(p, df), scipy_stats.t.isf(p, df), rtol=RTOL, atol=0.0)
    np.testing.assert_allclose(student_ppf(p, df), scipy_stats.t.ppf(p, df), rtol=RTOL, atol=0.0)


def test_boundary_and_invalid_arguments_give_what_scipy_stats_gives():
    # Oracle: scipy.stats at p = 0 and 1 (the ends of the support), p outside [0, 1]
    # and df <= 0 (nan). Exact equality: these are infinities and nans.
    p = np.array([0.0, 1.0, -0.1, 1.1, np.nan])
    for df in (0.5, 1.0, 7.0, np.inf, 0.0, -1.0):
        np.testing.assert_array_equal(student_isf(p, df), scipy_stats.t.isf(p, df))
        np.testing.assert_array_equal(student_ppf(p, df), scipy_stats.t.ppf(p, df))
    np.testing.assert_array_equal(normal_isf(p), scipy_stats.norm.isf(p))
    x = np.array([-np.inf, np.inf, np.nan])
    np.testing.assert_array_equal(normal_sf(x), scipy_stats.norm.sf(x))


def _line_data(seed: int, n: int, *, outliers: int = 0, ties: bool = False
               ) -> tuple[np.ndarray, np.ndarray]:
    """Seeded noisy line y = 2 - 0.7 x, some points thrown far off, x optionally tied."""
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(-3.0, 5.0, n))
    if ties:
        x = np.round(x)  # about n / 8 points share each integer x
    y = 2.0 - 0.7 * x + rng.normal(0.0, 0.1, n)
    if outliers:
        bad = rng.choice(n, size=outliers, replace=False)
        y[bad] += rng.choice([-1.0, 1.0], outliers) * rng.uniform(5.0, 50.0, outliers)
    return x, y


@pytest.mark.parametrize(
    ("n", "outliers", "ties"),
    [(2, 0, False), (3, 0, False), (3, 1, False), (50, 0, False), (50, 10, False),
     (50, 0, True), (50, 10, True), (7, 2, True), (300, 40, False)],
)
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_theil_sen_matches_scipy_stats_theilslopes(seed: int, n: int, outliers: int, ties: bool):
    # Oracle: scipy.stats.theilslopes(y, x), default method 'separate'.
    x, y = _line_data(seed, n, outliers=outliers, ties=ties)
    expected = scipy_stats.theilslopes(y, x)
    slope, intercept = theil_sen(y, x)
    assert slope == pytest.approx(float(expected.slope), rel=RTOL, abs=0.0)
    assert intercept == pytest.approx(float(expected.intercept), rel=RTOL, abs=0.0)


def test_theil_sen_with_ties_at_both_ends_and_unsorted_x():
    # Oracle: scipy.stats.theilslopes; the points are shuffled and x repeats, so only
    # the pairs with distinct x count, whatever their order.
    rng = np.random.default_rng(5)
    x = np.array([0.0, 0.0, 0.0, 1.0, 2.0, 2.0, 3.0, 4.0, 4.0, 4.0])
    y = 1.0 + 3.0 * x + rng.normal(0.0, 0.5, x.size)
    order = rng.permutation(x.size)
    expected = scipy_stats.theilslopes(y[order], x[order])
    slope, intercept = theil_sen(y[order], x[order])
    assert slope == pytest.approx(float(expected.slope), rel=RTOL, abs=0.0)
    assert intercept == pytest.approx(float(expected.intercept), rel=RTOL, abs=0.0)


def test_theil_sen_is_not_dragged_by_a_minority_of_wild_points():
    # Theil (1950), Sen (1968), from memory: the breakdown point is about 29 %, so 10 of
    # 50 points thrown 5-50 units off leave the slope near the true -0.7. Tolerance 0.1:
    # a few noise widths (0.1) over the 8-unit x span, far below the outliers' pull.
    x, y = _line_data(3, 50, outliers=10)
    slope, _ = theil_sen(y, x)
    assert slope == pytest.approx(-0.7, abs=0.1)


@pytest.mark.parametrize("x, y", [
    (np.full(4, 2.0), np.arange(4.0)),  # no pair has distinct x
    ([], []),                           # no point
    ([0.0], [1.0]),                     # one point
])
def test_theil_sen_without_a_usable_pair_gives_nan_like_scipy_stats(x, y):
    # Oracle: scipy.stats.theilslopes returns nan (with a RuntimeWarning) when no pair
    # of points has distinct x, including for 0 or 1 points; ours warns the same way.
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        expected = scipy_stats.theilslopes(y, x)
    with pytest.warns(RuntimeWarning):
        slope, intercept = theil_sen(y, x)
    assert np.isnan(expected.slope) and np.isnan(slope)
    assert np.isnan(expected.intercept) and np.isnan(intercept)


def test_theil_sen_rejects_mismatched_lengths_like_scipy_stats():
    # Oracle: scipy.stats.theilslopes raises ValueError too.
    with pytest.raises(ValueError):
        scipy_stats.theilslopes([1.0, 2.0, 3.0], [0.0, 1.0])
    with pytest.raises(ValueError):
        theil_sen([1.0, 2.0, 3.0], [0.0, 1.0])


def test_compare_start_up_does_not_import_scipy_stats_or_signal():
    # Checked through sys.modules in a fresh interpreter, never by timing: scipy.stats
    # and scipy.signal (which imports scipy.stats) cost about half a second to import,
    # and the compare command needs neither (xcheck.quantiles and
    # xcheck.ringdown.signal_basics hold what it uses). The probe imports numpy, so an
    # empty module list cannot pass.
    code = ("import sys\n"
            "import xcheck.commands.compare, xcheck.report.markdown\n"
            "print('numpy' in sys.modules, 'scipy.stats' in sys.modules,"
            " 'scipy.signal' in sys.modules)\n")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                            timeout=120, check=True)
    assert result.stdout.split() == ["True", "False", "False"], result.stdout + result.stderr
