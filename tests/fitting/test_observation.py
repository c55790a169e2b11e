"""One observation class per kind of measurement: residuals, statistics, engine curve.

References: the textbook series-RLC natural response with the capacitor probed and no
initial current, v(t) = V0 exp(-alpha t) (cos wd t + (alpha / wd) sin wd t), whose
turning points lie at t_k = k pi / wd with values V0 (-1)^k exp(-alpha t_k) (from
memory); BIC = -2 ln L + k ln n with -2 ln L = n_eff ln(RSS / n) for profiled noise and
chi^2 for stated errors (see tests/fitting/test_stats.py).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from xcheck.circuit.expand import build_circuit
from xcheck.circuit.parameters import parameters_from_fixture
from xcheck.engines.theory import simulate_theory
from compare_cases import data_text

from xcheck.fitting.observation import PeakObservation, TraceObservation
from xcheck.fixture.reader import parse_fixture_text

#: Invented example: a 10 uF capacitor charged to 12 V rings through 1.3 ohm and 220 uH.
SERIES_RLC = data_text("series_rlc.toml")
V0, R, L, C = 12.0, 1.3, 220e-6, 10e-6
ALPHA = R / (2 * L)
OMEGA_D = math.sqrt(1 / (L * C) - ALPHA**2)
PERIOD = 2 * math.pi / OMEGA_D


def textbook(t: np.ndarray, alpha: float = ALPHA) -> np.ndarray:
    wd = math.sqrt(1 / (L * C) - alpha**2)
    return V0 * np.exp(-alpha * t) * (np.cos(wd * t) + alpha / wd * np.sin(wd * t))


def textbook_turning_points(count: int) -> tuple[np.ndarray, np.ndarray]:
    t = np.arange(count) * math.pi / OMEGA_D
    return t, V0 * (-1.0) ** np.arange(count) * np.exp(-ALPHA * t)


class TextbookModel:
    """A stand-in for the fit's closed form (volts, as the circuit predicts them):
    physical[0] is alpha (1/s)."""

    response = "natural"

    def shape(self, physical, times):
        return textbook(np.maximum(times, 0.0), physical[0])

    def extrema(self, physical, count):
        wd = math.sqrt(1 / (L * C) - physical[0] ** 2)
        t = np.arange(count) * math.pi / wd
        return t, V0 * (-1.0) ** np.arange(count) * np.exp(-physical[0] * t)


def _trace(n: int = 400, n_effective: float = 100.0) -> TraceObservation:
    t = np.linspace(0.0, 4 * PERIOD, n)
    # Planted instrument: gain 0.5 (a 1:2 probe seen as 1:1), offset 0.25 V.
    return TraceObservation(t, 0.5 * textbook(t) + 0.25, 0.01, PERIOD, n_effective)


def _peaks(count: int = 8, origin: float = 3e-4) -> PeakObservation:
    t, v = textbook_turning_points(count)
    # Planted: amplitude 1.5 (a 12 V capacitor read as 18 V) and an arbitrary time base.
    return PeakObservation(t + origin, 1.5 * v, np.full(count, 0.02), PERIOD, time_sigma=1e-7)


def test_trace_residuals_one_per_sample_and_linear_start_for_gain_and_offset():
    obs = _trace()
    res = obs.residuals(TextbookModel(), np.array([ALPHA]))
    assert res.names == ("gain", "offset", "shift")
    weighted = res.weighted(np.array([ALPHA]), res.start)
    assert weighted.shape == (400,)
    # At the true alpha the linear start recovers the planted gain and offset (exact
    # least squares on noise-free data: round-off only, 1e-9 of the 0.01 V sigma).
    nuisance = res.in_si(res.start, np.zeros(3))
    assert nuisance["gain"][0] == pytest.approx(0.5, rel=1e-9)
    assert nuisance["offset"][0] == pytest.approx(0.25, rel=1e-9)
    assert np.max(np.abs(weighted)) < 1e-9
    # A wrong alpha leaves residuals far beyond the noise.
    assert np.max(np.abs(res.weighted(np.array([1.2 * ALPHA]), res.start))) > 10


def test_trace_bic_uses_the_effective_sample_count():
    obs = _trace(n=400, n_effective=100.0)
    chi2, k = 380.0, 4
    assert obs.sample_count(400) == 100.0
    n_eff, aic, bic = obs.criteria(chi2, 400, k)
    assert n_eff == 100.0
    # Textbook with n_eff independent samples: n_eff ln(RSS / n) + k ln n_eff.
    assert bic == pytest.approx(100.0 * math.log(chi2 / 400) + k * math.log(100.0), rel=1e-14)
    assert aic == pytest.approx(100.0 * math.log(chi2 / 400) + 2 * k, rel=1e-14)
    # Never more independent samples than residuals.
    assert _trace(n=400, n_effective=1e6).sample_count(400) == 400.0


def test_peak_residuals_cover_voltages_and_times():
    obs = _peaks(count=8)
    res = obs.residuals(TextbookModel(), np.array([ALPHA]))
    assert res.names == ("amplitude", "time_origin")
    weighted = res.weighted(np.array([ALPHA]), res.start)
    assert weighted.shape == (16,)  # one voltage and one time residual per reading
    nuisance = res.in_si(res.start, np.zeros(2))
    assert nuisance["amplitude"][0] == pytest.approx(1.5, rel=1e-12)
    assert nuisance["time_origin"][0] == pytest.approx(3e-4, rel=1e-9)
    assert np.max(np.abs(weighted)) < 1e-6
    assert obs.n_effective == 8.0


def test_peak_bic_counts_every_residual_and_uses_chi_square():
    obs = _peaks(count=8)
    chi2, k = 14.2, 3
    assert obs.sample_count(16) == 16.0
    n_eff, aic, bic = obs.criteria(chi2, 16, k)
    assert n_eff == 16.0
    # Stated errors: -2 ln L = chi^2 + const, so BIC = chi^2 + k ln n.
    assert bic == pytest.approx(chi2 + k * math.log(16), rel=1e-14)
    assert aic == pytest.approx(chi2 + 2 * k, rel=1e-14)


def test_peak_readings_are_numbered_by_half_periods():
    t, v = textbook_turning_points(6)
    skipped = np.delete(np.arange(6), 2)  # the third extremum was not read
    obs = PeakObservation(t[skipped], v[skipped], 0.02, PERIOD)
    np.testing.assert_array_equal(obs.turning_points("natural"), [0, 1, 3, 4, 5])
    # A step's first reading is the first overshoot, turning point 1.
    np.testing.assert_array_equal(obs.turning_points("step"), [1, 2, 4, 5, 6])


def test_how_each_kind_is_drawn():
    assert PeakObservation.discrete and not TraceObservation.discrete


def _circuit():
    fixture = parse_fixture_text(SERIES_RLC, "series_rlc.toml")
    return build_circuit(fixture, parameters_from_fixture(fixture))


def _fine_engine(circuit):
    """A stand-in simulator: the closed form on a grid of 2000 points per period."""
    def simulate(stop: float):
        from xcheck.engines.waveform import Waveform

        t = np.linspace(0.0, stop, int(stop / PERIOD * 2000) + 2)
        return Waveform(t, simulate_theory(circuit, t).probe_voltage)
    return simulate


def test_trace_engine_curve_applies_gain_offset_and_shift():
    obs = _trace()
    circuit = _circuit()
    nuisance = {"gain": (0.5, 0.0), "offset": (0.25, 0.0), "shift": (0.0, 0.0)}
    curve, disagreement = obs.engine_curve(circuit, nuisance, _fine_engine(circuit))
    # Linear interpolation on 2000 points per period: error below (2 pi / 2000)^2 / 8
    # of the amplitude, about 1.3e-6.
    assert disagreement < 2e-6
    np.testing.assert_allclose(curve, obs.voltage, atol=2e-6 * V0)


def test_peak_engine_curve_finds_the_textbook_turning_points():
    obs = _peaks(count=8)
    circuit = _circuit()
    nuisance = {"amplitude": (1.5, 0.0), "time_origin": (3e-4, 0.0)}
    curve, disagreement = obs.engine_curve(circuit, nuisance, _fine_engine(circuit))
    # Parabolic refinement of a turning point on a fine grid: exact to round-off for a
    # parabola, the cubic term leaves about 1e-10 of the amplitude here.
    assert disagreement < 1e-7
    np.testing.assert_allclose(curve, obs.voltage, atol=1e-7 * V0)


def test_ring_of_a_trace_prediction_is_the_textbook_ring():
    obs = _trace(n=2000)
    ring = obs.ring(textbook(obs.time))
    assert ring is not None
    f_d, alpha = ring
    # Noise-free: the estimator's own error is far below 1e-6 relative.
    assert f_d == pytest.approx(OMEGA_D / (2 * math.pi), rel=1e-6)
    assert alpha == pytest.approx(ALPHA, rel=1e-6)
    assert _peaks().ring(_peaks().voltage) is None  # a table gives no record to estimate
