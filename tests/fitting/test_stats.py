"""Information criteria, covariance and correlation of least squares.

References: the Gaussian log-likelihood evaluated by scipy.stats.norm; the textbook
criteria AIC = -2 ln L + 2 k (Akaike 1974) and BIC = -2 ln L + k ln n (Schwarz 1978),
which for Gaussian errors of unknown variance become n ln(RSS / n) + 2 k and
n ln(RSS / n) + k ln n up to a constant shared by every model (from memory);
numpy.linalg.inv, numpy.linalg.pinv and numpy.corrcoef for the matrices.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats as scipy_stats

from xcheck.fitting.stats import (
    aic,
    bic,
    correlation_from_covariance,
    covariance_from_jacobian,
    profiled_deviance,
)


def _residuals(n: int, scale: float, seed: int) -> np.ndarray:
    return np.random.default_rng(seed).normal(0.0, scale, n)


@pytest.mark.parametrize("n, k", [(40, 2), (1000, 5)])
def test_profiled_criteria_match_the_gaussian_likelihood_at_its_maximum(n, k):
    """With sigma^2 at its maximum-likelihood value RSS / n, -2 ln L (scipy.stats.norm)
    is n ln(RSS / n) + n (1 + ln 2 pi): the criteria differ from the textbook ones by
    exactly that constant, the same for every model fitted to the same data."""
    r = _residuals(n, 0.3, seed=n)
    rss = float(np.sum(r**2))
    minus_two_log_l = -2.0 * float(np.sum(scipy_stats.norm.logpdf(r, scale=math.sqrt(rss / n))))
    constant = n * (1.0 + math.log(2.0 * math.pi))
    deviance = profiled_deviance(rss, n, n)
    # Round-off of sums over n terms: 1e-9 relative is far above it and far below any
    # change of one in k.
    assert aic(deviance, k) == pytest.approx(minus_two_log_l + 2 * k - constant, rel=1e-9, abs=1e-9)
    assert bic(deviance, k, n) == pytest.approx(
        minus_two_log_l + k * math.log(n) - constant, rel=1e-9, abs=1e-9)
    # And the textbook closed form itself, n ln(RSS / n) + k ln n (from memory).
    assert bic(deviance, k, n) == pytest.approx(n * math.log(rss / n) + k * math.log(n), rel=1e-12)


def test_effective_samples_scale_the_likelihood_and_the_penalty():
    """n_eff independent samples among n: n_eff ln(RSS / n) + k ln n_eff (the textbook
    BIC with n_eff for n, the weighted residual sum of squares still averaged over n)."""
    rss, n, n_eff, k = 12.5, 4000, 250.0, 3
    deviance = profiled_deviance(rss, n, n_eff)
    assert deviance == pytest.approx(n_eff * math.log(rss / n), rel=1e-14)
    assert bic(deviance, k, n_eff) == pytest.approx(
        n_eff * math.log(rss / n) + k * math.log(n_eff), rel=1e-14)
    assert aic(deviance, k) == pytest.approx(n_eff * math.log(rss / n) + 2 * k, rel=1e-14)


def test_known_sigma_criteria_are_chi_square_plus_the_penalty():
    """With stated errors -2 ln L = chi^2 + sum ln(2 pi sigma_i^2) (scipy.stats.norm);
    the sum is the same for every model, so chi^2 stands for -2 ln L."""
    rng = np.random.default_rng(7)
    sigma = rng.uniform(0.01, 0.05, 12)
    r = rng.normal(0.0, sigma)
    chi2 = float(np.sum((r / sigma) ** 2))
    minus_two_log_l = -2.0 * float(np.sum(scipy_stats.norm.logpdf(r, scale=sigma)))
    constant = float(np.sum(np.log(2.0 * math.pi * sigma**2)))
    assert chi2 == pytest.approx(minus_two_log_l - constant, rel=1e-9)
    assert bic(chi2, 3, 12) == pytest.approx(chi2 + 3 * math.log(12), rel=1e-14)
    assert aic(chi2, 3) == pytest.approx(chi2 + 6, rel=1e-14)


def _well_conditioned(seed: int, n: int = 200, k: int = 4) -> np.ndarray:
    """Random columns in very different units (condition number after column scaling
    near 1; before it about 1e6)."""
    rng = np.random.default_rng(seed)
    return rng.normal(size=(n, k)) * np.array([1.0, 1e3, 1e-3, 10.0])


@pytest.mark.parametrize("scale_columns", [True, False])
@pytest.mark.parametrize("undetermined", ["infinite", "pseudo-inverse"])
def test_covariance_equals_the_inverse_normal_matrix(scale_columns, undetermined):
    jac = _well_conditioned(3)
    expected = np.linalg.inv(jac.T @ jac)  # numpy.linalg.inv as the reference
    got = covariance_from_jacobian(jac, scale_columns=scale_columns, undetermined=undetermined)
    # inv(J^T J) squares the condition number (~1e12 unscaled): 1e-6 relative leaves
    # room for its own round-off.
    np.testing.assert_allclose(got, expected, rtol=1e-6, atol=0.0)


def test_an_undetermined_direction_is_infinite_or_left_out():
    """Columns 0 and 1 equal: only their sum is determined. "infinite" marks both;
    "pseudo-inverse" equals numpy.linalg.pinv of J^T J."""
    rng = np.random.default_rng(5)
    base = rng.normal(size=(100, 3))
    jac = np.column_stack([base[:, 0], base[:, 0], base[:, 1], base[:, 2]])
    marked = covariance_from_jacobian(jac)
    assert np.isinf(marked[0, 0]) and np.isinf(marked[1, 1])
    assert np.isfinite(marked[2, 2]) and np.isfinite(marked[3, 3])
    left_out = covariance_from_jacobian(jac, rcond=1e-10, scale_columns=False,
                                        undetermined="pseudo-inverse")
    np.testing.assert_allclose(left_out, np.linalg.pinv(jac.T @ jac, rcond=1e-10),
                               rtol=1e-8, atol=1e-12)


def test_correlation_matches_numpy_corrcoef():
    rng = np.random.default_rng(11)
    mixing = np.array([[2.0, 0.0, 0.0], [0.9, 0.4, 0.0], [-0.1, 0.3, 0.6]])
    samples = mixing @ rng.normal(size=(3, 500))  # correlated rows
    np.testing.assert_allclose(correlation_from_covariance(np.cov(samples)), np.corrcoef(samples),
                               rtol=1e-12, atol=1e-12)


def test_a_parameter_without_variance_has_zero_correlation():
    corr = correlation_from_covariance(np.array([[2.0, 0.0], [0.0, 0.0]]))
    assert corr[0, 0] == pytest.approx(1.0, abs=1e-15)  # 2 / (sqrt 2)^2, round-off only
    assert corr[0, 1] == corr[1, 0] == corr[1, 1] == 0.0
