"""Records that settle without ringing: overdamped, critically damped, first order.

The signals are the textbook natural responses, re-derived here (standard circuit
theory, e.g. the series RLC natural response in Nilsson & Riedel, Electric Circuits,
from memory). Series RLC with the capacitor charged to V0 and no current at t = 0:
Kirchhoff's voltage law ``L di/dt + R i + v = 0`` with ``i = C dv/dt`` gives
``v'' + (R/L) v' + v/(L C) = 0``. Trying ``exp(-s t)``: ``s^2 - (R/L) s + 1/(L C) = 0``,
so ``s1,2 = alpha -+ sqrt(alpha^2 - omega0^2)`` with ``alpha = R/(2L)`` and
``omega0 = 1/sqrt(L C)``. By Vieta ``s1 s2 = 1/(L C)`` and ``s1 + s2 = R/L``, hence
``sqrt(s1 s2) = omega0`` and ``(s1 + s2) / (2 sqrt(s1 s2)) = (R/L) sqrt(L C) / 2 =
(R/2) sqrt(C/L) = zeta``: the two relations the estimator reports. With ``v(0) = V0`` and
``v'(0) = i(0)/C = 0``:

- overdamped (zeta > 1): ``v = V0 (s2 exp(-s1 t) - s1 exp(-s2 t)) / (s2 - s1)``
  (check: v(0) = V0, v'(0) = V0 (-s1 s2 + s1 s2)/(s2 - s1) = 0);
- the resistor's voltage ``R i = R C v' = -V0 (s1 + s2) (exp(-s1 t) - exp(-s2 t)) /
  (s2 - s1)``, using ``R C s1 s2 = R/L = s1 + s2`` (both terms equally large);
- critically damped (R = 2 sqrt(L/C), s1 = s2 = s = omega0): ``v = V0 (1 + s t) exp(-s t)``;
- first order (an RC discharge, ``C v' = -v/R``): ``v = V0 exp(-t/(R C))``.

One case is also checked against scipy.signal.lsim of the state equations (an
independent matrix-exponential solution). Noise is seeded Gaussian, so every pass is
reproducible. "Recovered" means within 3 reported standard errors (a 3-sigma band misses
with probability 0.3 % per number when the standard errors are right; the Monte Carlo
test checks the standard errors themselves). Values are invented.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal

from xcheck.capture.types import Trace, check_enough_decay
from xcheck.errors import TraceError
from xcheck.ringdown import (
    AperiodicEstimate,
    Estimate,
    RingdownEstimate,
    derive_aperiodic_circuit,
    estimate_aperiodic,
    estimate_ringdown,
)
from xcheck.ringdown.aperiodic_model import second_order_basis

L, C, V0 = 10e-6, 1e-6, 9.0
OMEGA0 = 1.0 / math.sqrt(L * C)
SIGMA = 0.02


def rates(zeta: float) -> tuple[float, float]:
    """s1 < s2 of a series RLC with this damping ratio (formulas in the module docstring)."""
    alpha = zeta * OMEGA0
    root = math.sqrt(alpha**2 - OMEGA0**2)
    return alpha - root, alpha + root


def resistance(zeta: float) -> float:
    return 2.0 * zeta * math.sqrt(L / C)  # zeta = (R/2) sqrt(C/L)


def capacitor_overdamped(t: np.ndarray, zeta: float) -> np.ndarray:
    s1, s2 = rates(zeta)
    return V0 * (s2 * np.exp(-s1 * t) - s1 * np.exp(-s2 * t)) / (s2 - s1)


def resistor_overdamped(t: np.ndarray, zeta: float) -> np.ndarray:
    s1, s2 = rates(zeta)
    return -V0 * (s1 + s2) * (np.exp(-s1 * t) - np.exp(-s2 * t)) / (s2 - s1)


def within(item: Estimate, true: float, k: float = 3.0) -> bool:
    return abs(item.value - true) <= k * item.stderr


def noisy(clean: np.ndarray, seed: int) -> np.ndarray:
    return clean + np.random.default_rng(seed).normal(0.0, SIGMA, clean.size)


def test_closed_form_matches_lsim() -> None:
    # scipy.signal.lsim of x = [v, i]: v' = i / C, i' = -(v + R i) / L (an independent
    # solution); the closed form above must agree to the integrator's accuracy (1e-9 V
    # of 9 V: lsim's matrix exponential is exact to rounding for zero input).
    zeta = 1.8
    r = resistance(zeta)
    system = scipy.signal.StateSpace(
        [[0.0, 1.0 / C], [-1.0 / L, -r / L]], [[0.0], [0.0]], [[1.0, 0.0]], [[0.0]]
    )
    t = np.linspace(0.0, 60e-6, 600)
    v = scipy.signal.lsim(system, np.zeros_like(t), t, X0=[V0, 0.0])[1]
    np.testing.assert_allclose(capacitor_overdamped(t, zeta), v, atol=1e-9)


def test_basis_passes_smoothly_through_critical_damping() -> None:
    # Reference: the closed forms of the second-order solution (module docstring of
    # aperiodic_model): for d = g^2 > 0, phi1 = exp(-a u) sinh(g u) / g; for d = -w^2,
    # exp(-a u) sin(w u) / w; for d = 0, u exp(-a u); phi0 = exp(-a u) cosh(..) + a phi1.
    u = np.linspace(0.0, 12.0, 400)
    a = 1.3
    for d in (0.49, -0.64, 1e-9, -1e-9, 0.0):
        phi0, phi1 = second_order_basis(u, a, d)
        if d > 0:
            g = math.sqrt(d)
            ref1 = np.exp(-a * u) * np.sinh(g * u) / g
            ref0 = np.exp(-a * u) * np.cosh(g * u) + a * ref1
        elif d < 0:
            w = math.sqrt(-d)
            ref1 = np.exp(-a * u) * np.sin(w * u) / w
            ref0 = np.exp(-a * u) * np.cos(w * u) + a * ref1
        else:
            ref1 = u * np.exp(-a * u)
            ref0 = np.exp(-a * u) * (1 + a * u)
        # 1e-12 absolute on functions of order one: the series and the closed forms
        # both hold about 15 digits; near d = 0 the closed forms lose about 3 digits
        # to cancellation (sinh(g u)/g with g ~ 3e-5), hence no tighter.
        np.testing.assert_allclose(phi1, ref1, atol=1e-12, err_msg=f"phi1, d = {d}")
        np.testing.assert_allclose(phi0, ref0, atol=1e-12, err_msg=f"phi0, d = {d}")


def test_overdamped_capacitor_voltage_recovered() -> None:
    zeta = 1.8
    s1, s2 = rates(zeta)
    t = np.arange(1000) * (1.0 / s1 / 100)  # 10 slow time constants, 10 samples per fast one
    est = estimate_aperiodic(t, noisy(capacitor_overdamped(t, zeta), 11), noise_sigma=SIGMA)
    assert est.regime == "overdamped" and est.aperiodic
    assert within(est.time_constants[0], 1.0 / s1) and within(est.time_constants[1], 1.0 / s2)
    assert within(est.decay_rates[0], s1) and within(est.decay_rates[1], s2)
    assert within(est.natural_angular_frequency, OMEGA0)
    assert within(est.damping_ratio, zeta)
    assert within(est.settled_level, 0.0) and within(est.initial_volts, V0)
    # Amplitudes of the closed form: V0 s2/(s2 - s1) and -V0 s1/(s2 - s1).
    assert within(est.amplitudes[0], V0 * s2 / (s2 - s1))
    assert within(est.amplitudes[1], -V0 * s1 / (s2 - s1))
    assert est.span_time_constants == pytest.approx(9.99, abs=0.01)  # 999 steps of tau1/100
    # White noise of the stated level: standard errors at the white-noise bound, allowing
    # the sandwich covariance's sampling wobble (10 %).
    assert est.time_constants[0].stderr == pytest.approx(est.time_constants[0].crb, rel=0.1)
    # Series R from the given C: R = (tau1 + tau2) / C (aperiodic_derived docstring).
    circuit = derive_aperiodic_circuit(est, capacitance=C)
    assert within(circuit.resistance, resistance(zeta)) and within(circuit.inductance, L)
    data = est.to_json()
    assert data["regime"] == "overdamped" and len(data["time_constants_s"]) == 2
    assert np.allclose(est.model(t[:3]), capacitor_overdamped(t[:3], zeta), atol=5 * SIGMA)


def test_strongly_overdamped_resistor_voltage_recovered() -> None:
    # zeta = 5: s2/s1 = 98. Probed across R both terms are equally large, so the fast
    # one (0.32 us) is resolved with 16 samples per time constant.
    zeta = 5.0
    s1, s2 = rates(zeta)
    t = np.arange(4000) * (1.0 / s2 / 16)
    est = estimate_aperiodic(t, noisy(resistor_overdamped(t, zeta), 12), noise_sigma=SIGMA)
    assert est.regime == "overdamped"
    assert within(est.time_constants[0], 1.0 / s1) and within(est.time_constants[1], 1.0 / s2)
    assert within(est.damping_ratio, zeta) and within(est.natural_angular_frequency, OMEGA0)
    # The data fix zeta to better than 2 % here (the fast term is well sampled).
    assert est.damping_ratio.stderr < 0.02 * zeta


def test_critically_damped_recovered_and_named() -> None:
    s = OMEGA0  # R = 2 sqrt(L/C): double root at omega0
    t = np.arange(1000) * (1.0 / s / 100)
    v = noisy(V0 * (1 + s * t) * np.exp(-s * t), 13)
    est = estimate_aperiodic(t, v, noise_sigma=SIGMA)
    assert est.regime == "critically damped"
    assert len(est.time_constants) == 1 and within(est.time_constants[0], 1.0 / s)
    assert within(est.natural_angular_frequency, OMEGA0)
    assert within(est.amplitudes[0], V0) and within(est.ramp, V0 * s)  # A = V0, B = V0 s
    # zeta is 1 by the chosen model; the free fit's zeta covers 1 within 3 errors.
    assert est.damping_ratio.value == 1.0
    assert within(est.second_order_damping_ratio, 1.0)
    scores = est.information_criteria
    assert scores["critically damped"] < min(scores["second order"], scores["first order"])


def test_first_order_rc_discharge_recovered_and_named() -> None:
    r, c = 4.7e3, 2.2e-9  # tau = R C = 10.34 us
    tau = r * c
    t = np.arange(800) * (tau / 80)
    est = estimate_aperiodic(t, noisy(V0 * np.exp(-t / tau), 14) + 0.3, noise_sigma=SIGMA)
    assert est.regime == "first order"
    assert within(est.time_constants[0], tau) and within(est.settled_level, 0.3)
    assert est.natural_angular_frequency is None and est.damping_ratio is None
    # An RC reading: R = tau / C (aperiodic_derived docstring).
    assert within(derive_aperiodic_circuit(est, capacitance=c).resistance, r)


def test_standard_errors_match_the_spread_of_50_records() -> None:
    # 50 seeded records of one overdamped response (zeta = 1.8, 400 samples). The sample
    # standard deviation of 50 estimates is known to 1/sqrt(2 * 49) = 10 %, so the band
    # of a factor 1.5 either way (ln 1.5 = 0.41) lies four of those from a correct
    # estimator and fails a standard error wrong by a factor of 2.
    zeta = 1.8
    s1, s2 = rates(zeta)
    t = np.arange(400) * (1.0 / s1 / 50)
    clean = capacitor_overdamped(t, zeta)
    values, errors = [], []
    for seed in range(50):
        est = estimate_aperiodic(t, noisy(clean, 1000 + seed), noise_sigma=SIGMA)
        assert est.regime == "overdamped"
        values.append([est.time_constants[0].value, est.time_constants[1].value,
                       est.damping_ratio.value])
        errors.append([est.time_constants[0].stderr, est.time_constants[1].stderr,
                       est.damping_ratio.stderr])
    spread = np.std(np.array(values), axis=0, ddof=1)
    reported = np.mean(np.array(errors), axis=0)
    ratio = reported / spread
    assert np.all((ratio > 1 / 1.5) & (ratio < 1.5)), ratio
    # Unbiased within the sampling error of the mean (3 sd / sqrt(50) = 0.42 sd): the
    # truths are tau1 = 1/s1, tau2 = 1/s2, zeta.
    bias = (np.mean(values, axis=0) - [1 / s1, 1 / s2, zeta]) / spread
    assert np.all(np.abs(bias) < 0.45), bias


def test_estimate_ringdown_returns_aperiodic_only_when_allowed() -> None:
    zeta = 1.8
    s1, _ = rates(zeta)
    t = np.arange(1000) * (1.0 / s1 / 100)
    v = noisy(capacitor_overdamped(t, zeta), 15)
    est = estimate_ringdown(t, v, noise_sigma=SIGMA, allow_aperiodic=True)
    assert isinstance(est, AperiodicEstimate) and est.regime == "overdamped"
    with pytest.raises(
        TraceError, match=r"od\.csv: .*does not ring: .* an overdamped response .*time constants"
    ):
        estimate_ringdown(t, v, noise_sigma=SIGMA, source="od.csv")


def test_ringing_record_still_takes_the_ringing_path() -> None:
    # zeta = 0.1 (underdamped): alpha = zeta omega0, omega_d = omega0 sqrt(1 - zeta^2).
    zeta = 0.1
    alpha, wd = zeta * OMEGA0, OMEGA0 * math.sqrt(1 - zeta**2)
    t = np.arange(2000) * (2 * math.pi / wd / 40)
    v = noisy(V0 * np.exp(-alpha * t) * (np.cos(wd * t) + alpha / wd * np.sin(wd * t)), 16)
    est = estimate_ringdown(t, v, noise_sigma=SIGMA, allow_aperiodic=True)
    assert isinstance(est, RingdownEstimate) and est.regime == "underdamped"
    assert not est.aperiodic and within(est.neper_frequency, alpha)


def test_short_non_ringing_record_gets_advice_about_time_constants() -> None:
    tau = 10e-6
    t = np.arange(150) * (tau / 100)  # 1.5 time constants
    v = noisy(V0 * np.exp(-t / tau), 17)
    with pytest.raises(TraceError) as caught:
        estimate_ringdown(t, v, noise_sigma=SIGMA, allow_aperiodic=True, source="short.csv")
    message = str(caught.value)
    assert "does not ring" in message and "covers only 1." in message
    assert "at least 2 are needed" in message and "longer time window" in message
    assert "periods" not in message  # a non-ringing record needs no periods
    with pytest.raises(TraceError, match="covers only 1.*time constants"):
        estimate_aperiodic(t, v, noise_sigma=SIGMA)


def test_oscillating_record_is_not_taken_as_aperiodic() -> None:
    # One period of a zeta = 0.3 ring-down: too little ringing to count 1.5 periods, and
    # the free second-order fit is significantly oscillatory (zeta well below 1).
    zeta = 0.3
    alpha, wd = zeta * OMEGA0, OMEGA0 * math.sqrt(1 - zeta**2)
    t = np.arange(60) * (2 * math.pi / wd / 50)
    v = noisy(V0 * np.exp(-alpha * t) * (np.cos(wd * t) + alpha / wd * np.sin(wd * t)), 18)
    with pytest.raises(
        TraceError, match=r"at least 1\.5 periods are needed.*damping ratio 0\.[23]"
    ):
        estimate_ringdown(t, v, noise_sigma=SIGMA, allow_aperiodic=True)
    with pytest.raises(TraceError, match="the response oscillates"):
        estimate_aperiodic(t, v, noise_sigma=SIGMA)


def test_noise_only_record_is_refused_either_way() -> None:
    t = np.arange(2000) * 1e-7
    v = np.random.default_rng(19).normal(0.0, SIGMA, t.size)
    with pytest.raises(TraceError, match="nor does a decay toward a settled level stand out"):
        estimate_ringdown(t, v, allow_aperiodic=True)
    with pytest.raises(TraceError, match="no decay toward a settled level stands out"):
        estimate_aperiodic(t, v)


def test_check_enough_decay_on_a_trace() -> None:
    # Common practice, no source: two time constants at least; the trace spans 99 steps
    # of 1 us = 99 us, so 9.9 time constants of 10 us and 0.99 of 100 us.
    t = np.arange(100) * 1e-6
    trace = Trace(t, np.exp(-t / 10e-6), "rc.csv", "CH1")
    check_enough_decay(trace, 10e-6)
    with pytest.raises(TraceError, match=r"rc\.csv: .*covers only 0\.99 time constants"):
        check_enough_decay(trace, 100e-6)
