"""The numpy signal routines against scipy.signal and scipy.ndimage as oracles, and the
estimator's block pre-averaging against the estimate from every sample."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import ndimage, signal

from xcheck.ringdown import estimate_ringdown
from xcheck.ringdown.estimator import PREAVERAGE_PER_PERIOD, preaverage_block
from xcheck.ringdown.signal_basics import (
    cubic_smoother_residual,
    spaced_peaks,
    strongest_line,
    window_maximum,
)


def _ring(n: int, per_period: float, noise: float, seed: int) -> np.ndarray:
    """Invented decaying sinusoid with white noise (samples)."""
    rng = np.random.default_rng(seed)
    k = np.arange(n)
    return (5.0 * np.exp(-k / (n / 4)) * np.cos(2 * np.pi * k / per_period + rng.uniform(0, 6))
            + noise * rng.standard_normal(n))


@pytest.mark.parametrize("seed", range(40))
def test_window_maximum_matches_ndimage(seed: int) -> None:
    # Oracle: scipy.ndimage.maximum_filter1d with -inf beyond the ends; exact (the same
    # comparisons, no arithmetic).
    rng = np.random.default_rng(seed)
    n = int(rng.integers(1, 500))
    width = 2 * int(rng.integers(0, 60)) + 1
    y = rng.standard_normal(n)
    expected = ndimage.maximum_filter1d(y, width, mode="constant", cval=-np.inf)
    assert np.array_equal(window_maximum(y, width), expected)


@pytest.mark.parametrize("seed", range(60))
def test_spaced_peaks_match_find_peaks_at_the_ringing(seed: int) -> None:
    # Oracle: scipy.signal.find_peaks(distance=d) at 0.7 period, the estimator's use.
    # The two selections differ only where noise bumps chain (a peak kept because the
    # higher one next to it was removed); at extrema well above the noise (> 0.5 V on
    # a 5 V ring with 50 mV noise) they must agree exactly.
    rng = np.random.default_rng(seed)
    per_period = float(rng.uniform(8, 200))
    y = _ring(int(rng.integers(300, 5000)), per_period, 0.05, seed)
    distance = int(0.7 * per_period)
    ours = spaced_peaks(y, distance)
    theirs = signal.find_peaks(y, distance=distance)[0]
    assert np.array_equal(ours[y[ours] > 0.5], theirs[y[theirs] > 0.5])


def test_spaced_peaks_rules() -> None:
    # Definition checks (common practice, no source): the highest sample within the
    # spacing; first and last samples never; a flat record has no peaks; a flat top
    # counts once.
    y = np.array([3.0, 1.0, 2.0, 1.0, 0.0, 4.0, 4.0, 1.0, 5.0])
    assert list(spaced_peaks(y, 1)) == [2, 5]
    assert list(spaced_peaks(y, 3)) == [5]
    assert list(spaced_peaks(y, 4)) == []  # the last sample, 3 away, is higher
    assert spaced_peaks(np.ones(50), 3).size == 0
    # A flat top longer than the spacing counts once, at its middle (as find_peaks).
    flat = np.array([0.0, 1.0, 3.0, 3.0, 3.0, 3.0, 3.0, 1.0, 0.0])
    assert list(spaced_peaks(flat, 2)) == [4] == list(signal.find_peaks(flat, distance=2)[0])
    # A missing sample is lower than any: the peak beside it stays.
    gap = np.array([0.0, 1.0, 5.0, 1.0, np.nan, 0.0, 2.0, 0.0])
    assert list(spaced_peaks(gap, 3)) == [2, 6]
    peaks = spaced_peaks(_ring(20_000, 400.0, 0.01, 3), 280)
    assert np.all(np.diff(peaks) >= 280)


@pytest.mark.parametrize("n, nfft", [(1000, 8192), (4097, 1 << 15), (333, 4096)])
def test_strongest_line_matches_periodogram(n: int, nfft: int) -> None:
    # Oracle: scipy.signal.periodogram(boxcar, no detrend); the largest bin at or above
    # the lowest frequency must be the same bin (exact frequency).
    v = _ring(n, 37.3, 0.2, n)
    step = 1e-6
    freqs, power = signal.periodogram(v, fs=1 / step, nfft=nfft, detrend=False,
                                      window="boxcar")
    lowest = 1.0 / (n * step)
    usable = freqs >= lowest
    expected = freqs[usable][np.argmax(power[usable])]
    assert strongest_line(v, step, nfft, lowest) == pytest.approx(expected, rel=1e-15)


@pytest.mark.parametrize("window", [7, 31, 65, 201])
def test_cubic_smoother_matches_savgol(window: int) -> None:
    # Oracle: scipy.signal.savgol_filter(v, window, 3) (mode "interp") and
    # savgol_coeffs(window, 3); the FFT path (window > 64) agrees to rounding of the
    # transforms: 1e-9 of the signal's 5 V scale.
    v = _ring(3000, 150.0, 0.1, window)
    resid, centre = cubic_smoother_residual(v, window)
    expected = v - signal.savgol_filter(v, window, 3)
    assert np.max(np.abs(resid - expected)) < 5e-9
    assert centre == pytest.approx(signal.savgol_coeffs(window, 3)[window // 2], rel=1e-12)


def test_preaverage_block_rules() -> None:
    # Under 1/PREAVERAGE_PER_PERIOD of a period, at least 100 000 block means.
    assert preaverage_block(10_000_000, 600_000.0) == 100
    assert preaverage_block(1_000_000, 600_000.0) == 10
    assert preaverage_block(10_000_000, 3 * PREAVERAGE_PER_PERIOD) == 3
    assert preaverage_block(10_000_000, 2 * PREAVERAGE_PER_PERIOD - 1) == 1
    assert preaverage_block(150_000, 1e9) == 1
    assert preaverage_block(1_000_000, math.inf) == 1


def test_preaveraged_estimate_matches_every_sample() -> None:
    # An invented 3.36 kHz ring (alpha 2955 /s, 12 V), 2e6 samples over 3 ms (about
    # 6e5 samples per period), 20 mV noise, seeded. The estimate from block means must
    # agree with the one from every sample within 5 % of a standard error for alpha and
    # f_d (averaging under 1/2000 period changes the data by < 1e-6 of the signal; the
    # remaining difference is how the noise falls into the two fits), with the same
    # standard errors within 5 %, and with the counts given per sample.
    n = 2_000_000
    t = np.linspace(0.0, 3e-3, n)
    rng = np.random.default_rng(20261203)
    alpha, f_d = 2955.0, 3360.0
    v = 12.0 * np.exp(-alpha * t) * np.cos(2 * np.pi * f_d * t) + 0.02 * rng.standard_normal(n)
    fast = estimate_ringdown(t, v, noise_sigma=0.02)
    full = estimate_ringdown(t, v, noise_sigma=0.02, preaverage=False)
    assert any("averaged in blocks of 20 samples" in note for note in fast.notes)
    for name in ("neper_frequency", "damped_frequency"):
        a, b = getattr(fast, name), getattr(full, name)
        assert abs(a.value - b.value) < 0.05 * b.stderr
        assert a.stderr == pytest.approx(b.stderr, rel=0.05)
        assert a.crb == pytest.approx(b.crb, rel=0.01)
    assert fast.samples_used == n and fast.samples_excluded == 0
    assert fast.noise_sigma == pytest.approx(0.02, rel=1e-12)
    # Measured on every sample (n <= SCATTER_SAMPLES) with the block means' model.
    assert fast.residual_rms == pytest.approx(full.residual_rms, rel=1e-3)
    # Extrema well above the noise (the first 15, down to about 25 mV on 20 mV noise
    # per sample) are the same within 20 ns (3e-5 of a period); near the floor
    # the two searches may keep or drop a different last few.
    assert np.allclose(fast.extrema_time[:15], full.extrema_time[:15], atol=2e-8)


def test_preaveraged_aperiodic_record_keeps_its_time_constant() -> None:
    # An invented first-order decay (tau 0.5 ms, 5 V, 20 mV noise) sampled 2e6 times
    # over 4 ms: no ringing, so the rough frequency is about 1/record and the record is
    # averaged to 100 000 means. The time constant from the means must match the one
    # from every sample within a tenth of its standard error, the counts and noise
    # level must be per sample, and the note must say so. Reference: v = V0 exp(-t/tau)
    # (first-order RC discharge, textbook; from memory).
    n = 2_000_000
    t = np.linspace(0.0, 4e-3, n)
    rng = np.random.default_rng(7)
    v = 5.0 * np.exp(-t / 5e-4) + 0.02 * rng.standard_normal(n)
    fast = estimate_ringdown(t, v, noise_sigma=0.02, allow_aperiodic=True)
    full = estimate_ringdown(t, v, noise_sigma=0.02, allow_aperiodic=True, preaverage=False)
    assert fast.aperiodic and full.aperiodic
    assert any("averaged in blocks of 20 samples" in note for note in fast.notes)
    a, b = fast.time_constants[0], full.time_constants[0]
    assert abs(a.value - b.value) < 0.1 * b.stderr
    assert a.stderr == pytest.approx(b.stderr, rel=0.05)
    assert fast.samples_used == n and fast.samples_excluded == 0
    assert fast.noise_sigma == pytest.approx(0.02, rel=1e-12)


def test_preaveraged_estimate_with_correlated_noise_and_clipping() -> None:
    # Noise correlated over 10 samples (white noise through a 10-sample moving average,
    # like a scope's bandwidth limit; 10 mV rms per sample), a clipped stretch, and an
    # invented 3.36 kHz ring sampled 1e6 times over 3 ms. The per-sample residual RMS
    # and noise level must be those of single samples (within 2 %), not the block
    # means' scatter times sqrt(block), which would be about sqrt(10) too large for
    # this noise; the excluded count must be the samples marked, and the note must
    # name the samples dropped with them.
    n = 1_000_000
    t = np.linspace(0.0, 3e-3, n)
    rng = np.random.default_rng(11)
    white = rng.standard_normal(n + 9)
    noise = np.convolve(white, np.ones(10) / 10, mode="valid")
    noise *= 0.01 / noise.std()
    v = 12.0 * np.exp(-2955.0 * t) * np.cos(2 * np.pi * 3360.0 * t) + noise
    clipped = np.zeros(n, dtype=bool)
    clipped[500_003:500_050] = True
    fast = estimate_ringdown(t, v, exclude=clipped)
    full = estimate_ringdown(t, v, exclude=clipped, preaverage=False)
    assert any("averaged in blocks of" in note for note in fast.notes)
    assert fast.residual_rms == pytest.approx(0.01, rel=0.02)
    assert fast.noise_sigma == pytest.approx(full.noise_sigma, rel=0.02)
    assert fast.samples_excluded == 47
    assert any("further samples" in note for note in fast.notes)
    # Correlated noise: the block means carry more than sigma^2 / block, and the
    # uncertainties from the means must still agree with the full-rate ones (20 %).
    assert fast.neper_frequency.stderr == pytest.approx(full.neper_frequency.stderr, rel=0.2)
