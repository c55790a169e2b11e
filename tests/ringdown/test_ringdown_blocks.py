"""Building blocks of the ring-down estimator against published results and scipy.

References named beside each check:
- Hua & Sarkar, "Matrix pencil method for estimating parameters of exponentially
  damped/undamped sinusoids in noise", IEEE Trans. ASSP 38(5), 1990: noise-free data of
  M exponentials give the exact poles whenever M <= L <= N - M.
- Kay, "Fundamentals of Statistical Signal Processing, vol. 1: Estimation Theory", 1993:
  Example 3.3 (DC level in white Gaussian noise, var >= sigma^2 / N) and Example 3.14 /
  eq. 3.41 (sinusoid frequency, var(f) >= 12 / ((2 pi)^2 eta N (N^2 - 1)),
  eta = A^2 / (2 sigma^2)) -- from memory.
- AR(1) noise x[n] = a x[n-1] + w[n] has rho_k = a^k, so 1 + 2 sum rho_k = (1 + a)/(1 - a)
  (any time-series text, from memory).
- scipy.signal.lsim of the series-RLC state equations (written here from KVL): an
  independent matrix-exponential solution of the ring-down.
- scipy.optimize.approx_fprime: finite-difference Jacobian, independent of ours.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal
from scipy.linalg import toeplitz
from scipy.optimize import approx_fprime

from xcheck.ringdown.crb import crb_covariance, damped_sinusoid_crb, fisher_information
from xcheck.ringdown.extrema import find_extrema, log_decrement
from xcheck.ringdown.nls import (
    block_means,
    damped_jacobian,
    damped_model,
    fit_damped,
    linear_amplitudes,
    residual_correlation,
    sandwich_covariance,
    unblock,
)
from xcheck.ringdown.pencil import damped_pairs, matrix_pencil


def rlc_capacitor_voltage(r: float, l: float, c: float, v0: float, t: np.ndarray) -> np.ndarray:
    """Capacitor voltage of a series RLC released from v0 with zero current (scipy.signal.lsim).

    State x = [v_C, i]: i = -C dv_C/dt and v_C = L di/dt + R i (KVL round the loop).
    """
    system = scipy.signal.StateSpace(
        [[0.0, -1.0 / c], [1.0 / l, -r / l]], [[0.0], [0.0]], [[1.0, 0.0]], [[0.0]]
    )
    _, out, _ = scipy.signal.lsim(system, np.zeros_like(t), t, X0=[v0, 0.0])
    return out


def test_pencil_recovers_exact_poles_of_noise_free_modes() -> None:
    # Hua & Sarkar 1990: exact for noise-free data. Two damped sinusoids plus an offset
    # (M = 5). Tolerance 1e-7 relative: double precision through an SVD of a 100-column
    # Hankel matrix (condition ~1e3) leaves errors far below that.
    step = 1e-6
    t = np.arange(300) * step
    y = (
        2.0 * np.exp(-3e3 * t) * np.cos(2 * np.pi * 2e4 * t + 0.3)
        + 0.5 * np.exp(-9e3 * t) * np.cos(2 * np.pi * 7e4 * t - 1.0)
        + 0.2
    )
    found = matrix_pencil(y, step, 5)
    pairs = sorted(damped_pairs(found.poles, math.pi / step), key=lambda p: p[1])
    assert len(pairs) == 2
    expected = [(3e3, 2 * np.pi * 2e4), (9e3, 2 * np.pi * 7e4)]
    for (alpha, omega), (alpha0, omega0) in zip(pairs, expected):
        assert alpha == pytest.approx(alpha0, rel=1e-7)
        assert omega == pytest.approx(omega0, rel=1e-7)
    real = [s for s in found.poles if abs(s.imag) < 1.0]
    assert len(real) == 1 and abs(real[0]) < 1e-3  # the offset: a pole at s = 0


def test_pencil_rejects_too_few_samples() -> None:
    with pytest.raises(ValueError, match="too few for a pencil of order 5"):
        matrix_pencil(np.ones(8), 1.0, 5)


def test_jacobian_matches_finite_differences() -> None:
    # approx_fprime (forward differences, step 1e-7 relative) agrees to ~1e-6 of the
    # column scale; 1e-5 leaves margin and still catches a wrong sign or factor.
    t = np.linspace(0.0, 1e-3, 400)
    theta = np.array([2e3, 6e4, 1.5, -0.7, 0.1, 5e3, 1.7e5, 0.3, 0.2])[[0, 1, 2, 3, 5, 6, 7, 8, 4]]
    jac = damped_jacobian(t, theta)
    for i in range(0, 200, 37):
        numeric = approx_fprime(
            theta, lambda p: damped_model(t[i : i + 1], p)[0], 1e-7 * np.abs(theta)
        )
        np.testing.assert_allclose(
            jac[i], numeric, rtol=1e-5, atol=1e-5 * np.abs(jac).max(axis=0).max()
        )


def test_fit_recovers_scipy_generated_rlc_exactly() -> None:
    # Noise-free scipy.signal.lsim output: the model is exact, so least squares must land
    # on alpha = R/(2L) and omega_d = sqrt(1/LC - alpha^2) (series RLC natural response)
    # to the accuracy of lsim itself (~1e-12 relative); 1e-8 is asserted.
    r, l, c, v0 = 0.4, 22e-6, 4.7e-6, 12.0
    t = np.arange(2000) * 0.2e-6
    v = rlc_capacitor_voltage(r, l, c, v0, t)
    alpha = r / (2 * l)
    omega = math.sqrt(1 / (l * c) - alpha**2)
    start = linear_amplitudes(t, v, [(alpha * 1.05, omega * 0.98)])
    fit = fit_damped(t, v, start)
    assert fit.theta[0] == pytest.approx(alpha, rel=1e-8)
    assert fit.theta[1] == pytest.approx(omega, rel=1e-8)
    # initial value v(0) = a + offset = V0; the sine amplitude b = V0 alpha/omega_d.
    assert fit.theta[2] + fit.theta[4] == pytest.approx(v0, rel=1e-8)
    assert fit.theta[3] == pytest.approx(v0 * alpha / omega, rel=1e-7)


def test_extrema_of_rlc_response_sit_at_multiples_of_half_period() -> None:
    # Extrema of the capacitor voltage (zero loop current) are at t_k = k pi / omega_d
    # with values V0 (-1)^k exp(-alpha t_k) (series-RLC natural response, textbook).
    # Noise-free, 25 samples per period, window +-3 samples (a = 0.75 rad). The parabola
    # cannot follow the curve's odd part (cubic term ~ eps/3 x^3, eps = alpha/omega_d =
    # 0.047), which moves the vertex by about eps a^2 / 5 = 0.02 sample (continuous
    # least squares; discrete windows weigh the ends more): 0.05 sample is allowed, and
    # being the same for every extremum at the same sampling phase it must cancel in the
    # spacing over whole periods (1e-5 relative; 12.5 samples per half period put
    # maxima and minima at alternating phases of the sampling grid).
    # Values: the quartic term biases the vertex value low by about (a^4/24)(3/35), with a
    # up to 3.5 samples (0.88 rad) when the extremum falls between samples: ~2e-3 plus
    # the off-centre share; 4e-3 is allowed (seen: 1.6e-3 and 3.1e-3 at the two phases).
    r, l, c, v0 = 0.3, 10e-6, 1e-6, 5.0
    alpha = r / (2 * l)
    omega = math.sqrt(1 / (l * c) - alpha**2)
    period = 2 * math.pi / omega
    step = period / 25
    t = np.arange(int(8 * period / step)) * step
    v = rlc_capacitor_voltage(r, l, c, v0, t)
    ext = find_extrema(t, v, period=period, offset=0.0, noise_sigma=1e-6)
    k = np.round(ext.time / (period / 2))
    np.testing.assert_allclose(ext.time, k * math.pi / omega, atol=0.05 * step)
    np.testing.assert_allclose(ext.time[2:] - ext.time[:-2], 2 * math.pi / omega, rtol=1e-5)
    np.testing.assert_allclose(
        ext.value, v0 * (-1.0) ** k * np.exp(-alpha * k * math.pi / omega), rtol=4e-3
    )
    assert k[0] == 1 and len(ext) >= 14  # t = 0 itself is on the record's edge
    alpha_ld, omega_ld = log_decrement(ext.time, ext.value)
    # A constant relative bias of the vertex values cancels in the slope: 1e-3.
    assert alpha_ld == pytest.approx(alpha, rel=1e-3)
    assert omega_ld == pytest.approx(omega, rel=1e-5)


def test_crb_of_undamped_sinusoid_frequency_matches_kay() -> None:
    # Kay eq. 3.41 (asymptotic, f0 not near 0 or 1/2): var(omega) >= 24 sigma^2 /
    # (A^2 N (N^2 - 1)) in rad/sample. Our numeric bound for the (omega, a, b) model
    # must match within 2 % (the asymptotic form neglects O(1/N) terms; N = 500).
    n, amp, sigma = 500, 1.3, 0.2
    t = np.arange(n, dtype=float)
    theta = np.array([0.0, 2 * np.pi * 0.123, amp * math.cos(0.7), -amp * math.sin(0.7), 0.0])
    jac = damped_jacobian(t, theta)[:, 1:4]
    bound = crb_covariance(jac, sigma)
    kay = 24 * sigma**2 / (amp**2 * n * (n**2 - 1))
    assert bound[0, 0] == pytest.approx(kay, rel=0.02)
    info = fisher_information(jac, sigma)
    np.testing.assert_allclose(np.linalg.inv(info), bound, rtol=1e-8)


def test_crb_of_offset_is_sigma_squared_over_n() -> None:
    # Kay Example 3.3: DC level in WGN, var >= sigma^2 / N. With a vanishing ringing
    # amplitude only the amplitude columns exp(-alpha t) cos/sin still overlap the
    # constant, weakly (normalised overlap ~1e-2 here, entering squared): the bound may
    # exceed sigma^2/N by ~1e-4 relative, never fall below it; 1e-3 is allowed.
    t = np.arange(1000) * 1e-6
    theta = np.array([1e3, 2e5, 0.0, 0.0, 0.3])
    bound = damped_sinusoid_crb(t, theta, 0.05)
    assert bound[4, 4] == pytest.approx(0.05**2 / 1000, rel=1e-3)
    assert bound[4, 4] >= 0.05**2 / 1000


def test_effective_sample_count_of_ar1_noise() -> None:
    # AR(1), a = 0.7: N_eff / N = (1 - a)/(1 + a) = 0.176. Generated with
    # scipy.signal.lfilter; over 20 000 samples the estimate scatters by ~10 %, so 20 %.
    rng = np.random.default_rng(3)
    noise = scipy.signal.lfilter([1.0], [1.0, -0.7], rng.normal(size=21000))[1000:]
    rho, n_eff = residual_correlation(noise)
    assert n_eff / noise.size == pytest.approx(0.3 / 1.7, rel=0.2)
    assert rho[1] == pytest.approx(0.7, abs=0.03)  # sample ACF sd ~ 1/sqrt(N) = 0.007
    white, n_white = residual_correlation(rng.normal(size=5000))
    assert n_white / 5000 > 0.9  # white noise: no inflation beyond sampling wobble


def test_sandwich_covariance_equals_explicit_toeplitz_formula() -> None:
    # (J^T J)^-1 J^T Sigma J (J^T J)^-1 with Sigma built explicitly by scipy.linalg.toeplitz;
    # both branches of our sum (direct lags, FFT lags) against it, 1e-9 relative.
    rng = np.random.default_rng(4)
    jac = rng.normal(size=(240, 4))
    for lags in (6, 40):
        rho = 0.8 ** np.arange(lags + 1)
        sigma_matrix = toeplitz(np.concatenate([rho, np.zeros(240 - lags - 1)])) * 0.3**2
        bread = np.linalg.inv(jac.T @ jac)
        expected = bread @ jac.T @ sigma_matrix @ jac @ bread
        np.testing.assert_allclose(sandwich_covariance(jac, rho, 0.3), expected, rtol=1e-9)


def test_block_means_keep_poles_and_unblock_restores_amplitudes() -> None:
    # The mean of exp(s t) over a block is exp(s t_c) sinh(m s h/2)/(m sinh(s h/2))
    # (geometric series): fitting block means with the plain model must give the same
    # poles and, after unblock, the sample-level amplitudes. Noise-free: 1e-8 relative.
    step = 1e-7
    t = np.arange(40000) * step
    theta = np.array([2e3, 2 * np.pi * 3e4, 1.2, 0.4, -0.1])
    v = damped_model(t, theta)
    tb, vb = block_means(t, v, np.ones(t.size, dtype=bool), 10)
    fit = fit_damped(tb, vb, theta * np.array([1.01, 1.001, 1.0, 1.0, 1.0]))
    restored = unblock(fit.theta, 10, step)
    np.testing.assert_allclose(restored, theta, rtol=1e-8, atol=1e-9)
    assert abs(fit.theta[2] - theta[2]) > 1e-4  # the block gain is really there to undo
