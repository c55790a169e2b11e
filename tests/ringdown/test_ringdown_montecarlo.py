"""Reported standard errors against the Monte Carlo spread of the estimates.

Each test draws 200 seeded noise records of one short ring-down (closed form
A exp(-alpha t) cos(omega_d t + phi) + c), estimates each, and compares the mean reported
standard error with the standard deviation of the estimates. With 200 trials the sample
standard deviation itself is uncertain by 1/sqrt(2 x 199) = 5 %, so the agreement
required, 25 %, is five of its standard deviations: a real error of a factor 1.3 fails,
a correct estimator passes. The estimates must also be unbiased: the mean within 4
standard errors of the mean (sd / sqrt(200)) of the truth.

Correlated noise is first-order autoregressive, made by scipy.signal.lfilter; the
relevant variance for frequency and decay is the noise spectrum near the ringing
frequency, which the sandwich covariance (Newey & West 1987) weighs correctly.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal

from xcheck.ringdown import estimate_from_peaks, estimate_ringdown

TRIALS = 200
STEP = 1e-6
T = np.arange(300) * STEP
ALPHA, FREQ, AMP, PHASE, OFFSET = 1.2e4, 5e4, 2.0, 0.3, 0.1
CLEAN = AMP * np.exp(-ALPHA * T) * np.cos(2 * math.pi * FREQ * T + PHASE) + OFFSET
TRUTH = {
    "neper_frequency": ALPHA,
    "damped_frequency": FREQ,
    "initial_volts": AMP * math.cos(PHASE) + OFFSET,
}


def monte_carlo(
    noise: np.ndarray, **kwargs: float
) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
    values: dict[str, list[float]] = {k: [] for k in TRUTH}
    errors: dict[str, list[float]] = {k: [] for k in TRUTH}
    for record in noise:
        est = estimate_ringdown(T, CLEAN + record, **kwargs)
        for k in TRUTH:
            values[k].append(getattr(est, k).value)
            errors[k].append(getattr(est, k).stderr)
    return {k: np.array(v) for k, v in values.items()}, {k: np.array(v) for k, v in errors.items()}


def check(values: dict[str, np.ndarray], errors: dict[str, np.ndarray]) -> None:
    for k, truth in TRUTH.items():
        spread = values[k].std(ddof=1)
        assert np.mean(errors[k]) == pytest.approx(spread, rel=0.25), k
        assert abs(values[k].mean() - truth) <= 4 * spread / math.sqrt(TRIALS), k


def test_white_noise_standard_errors_match_the_spread() -> None:
    rng = np.random.default_rng(201)
    noise = rng.normal(0.0, 0.03, (TRIALS, T.size))
    values, errors = monte_carlo(noise)  # noise level from the residuals
    check(values, errors)


def test_correlated_noise_standard_errors_match_the_spread() -> None:
    # AR(1) with a = 0.6: five times the white-noise variance at DC, 2.6 times at the
    # ringing frequency; plain white-noise standard errors would be 40 % too small.
    rng = np.random.default_rng(202)
    white = rng.normal(0.0, 0.03, (TRIALS, T.size + 200))
    noise = scipy.signal.lfilter([1.0], [1.0, -0.6], white, axis=1)[:, 200:]
    values, errors = monte_carlo(noise, noise_sigma=float(np.std(noise)))
    check(values, errors)


def test_quantised_noise_standard_errors_match_the_spread() -> None:
    # 8 bits over +-10 V (q = 78 mV) with 30 mV of analogue noise (0.4 LSB): the
    # quantisation error adds q^2/12 to the variance (common practice).
    rng = np.random.default_rng(203)
    q = 20.0 / 256
    noisy = CLEAN + rng.normal(0.0, 0.03, (TRIALS, T.size))
    noise = np.round(noisy / q) * q - CLEAN
    values, errors = monte_carlo(noise, noise_sigma=0.03, resolution=q)
    check(values, errors)


def test_peak_table_standard_errors_match_the_spread() -> None:
    # Ten cursor readings per trial with a stated 30 mV uncertainty and 20 ns of time
    # jitter: extrema t_k = k pi/omega_d, V0 (-1)^k exp(-alpha t_k) (series RLC, zero
    # initial current; Nilsson & Riedel, from memory).
    rng = np.random.default_rng(204)
    omega = 2 * math.pi * FREQ
    k = np.arange(10)
    tk = k * math.pi / omega
    vk = 5.0 * (-1.0) ** k * np.exp(-ALPHA / 4 * tk)
    truth = {"neper_frequency": ALPHA / 4, "damped_frequency": FREQ, "initial_volts": 5.0}
    values = {n: [] for n in truth}
    errors = {n: [] for n in truth}
    for _ in range(TRIALS):
        est = estimate_from_peaks(
            tk + rng.normal(0.0, 2e-8, 10), vk + rng.normal(0.0, 0.03, 10), np.full(10, 0.03)
        )
        base = est if not est.excludes_flagged else est.alternate  # all readings, as drawn
        for n in truth:
            values[n].append(getattr(base, n).value)
            errors[n].append(getattr(base, n).stderr)
    for n, true in truth.items():
        spread = np.std(values[n], ddof=1)
        assert np.mean(errors[n]) == pytest.approx(spread, rel=0.25), n
        assert abs(np.mean(values[n]) - true) <= 4 * spread / math.sqrt(TRIALS), n
