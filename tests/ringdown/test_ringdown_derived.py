"""derive_circuit against the series-RLC formulas and hand-derived uncertainty propagation.

Series RLC natural response (Nilsson & Riedel, Electric Circuits; Hayt & Kemmerly,
Engineering Circuit Analysis; both from memory): alpha = R/(2L), omega0 = 1/sqrt(LC),
omega_d = sqrt(omega0^2 - alpha^2), zeta = alpha/omega0, Q = omega0/(2 alpha) =
sqrt(L/C)/R. Uncertainties: first-order (delta-method) propagation,
var f = g^T Sigma g (the law of propagation of uncertainty of the ISO Guide to the
Expression of Uncertainty in Measurement, from memory), with the gradients g worked
out by hand below (independent of the code's numerical differentiation).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from xcheck.ringdown import derive_circuit
from xcheck.ringdown.envelope import diagnose_envelope
from xcheck.ringdown.result import Estimate, RingdownEstimate

R, L, C = 0.42, 33e-6, 4.7e-6
ALPHA = R / (2 * L)
OMEGA0 = 1 / math.sqrt(L * C)
OMEGA = math.sqrt(OMEGA0**2 - ALPHA**2)
COV = np.array([[40.0**2, 0.3 * 40.0 * 9.0], [0.3 * 40.0 * 9.0, 9.0**2]])  # (alpha, omega_d)


def estimate() -> RingdownEstimate:
    full = np.zeros((5, 5))
    full[:2, :2] = COV
    env = diagnose_envelope(np.arange(5.0), np.exp(-np.arange(5.0)), np.full(5, 1e-3))
    return RingdownEstimate(
        neper_frequency=Estimate(ALPHA, 40.0),
        angular_frequency=Estimate(OMEGA, 9.0),
        damped_frequency=Estimate(OMEGA / (2 * math.pi), 9.0 / (2 * math.pi)),
        amplitude=Estimate(1.0, 0.0),
        phase=Estimate(0.0, 0.0),
        offset=Estimate(0.0, 0.0),
        initial_volts=Estimate(1.0, 0.0),
        covariance=full,
        crb_covariance=full / 4,
        model_parameters=np.array([ALPHA, OMEGA, 1.0, 0.0, 0.0]),
        extrema_time=np.zeros(0),
        extrema_value=np.zeros(0),
        noise_sigma=0.01,
        noise_source="invented",
        samples_used=100,
        samples_excluded=0,
        effective_samples=100.0,
        residual_rms=0.01,
        envelope=env,
        method="invented",
    )


def test_values_follow_the_series_rlc_formulas() -> None:
    # Exact formulas: agreement to rounding (1e-12 relative).
    d = derive_circuit(estimate(), capacitance=C)
    assert d.natural_angular_frequency.value == pytest.approx(OMEGA0, rel=1e-12)
    assert d.damping_ratio.value == pytest.approx(ALPHA / OMEGA0, rel=1e-12)
    assert d.quality_factor.value == pytest.approx(math.sqrt(L / C) / R, rel=1e-12)
    assert d.inductance.value == pytest.approx(L, rel=1e-12)
    assert d.resistance.value == pytest.approx(R, rel=1e-12)
    d2 = derive_circuit(estimate(), inductance=L)
    assert d2.capacitance.value == pytest.approx(C, rel=1e-12)
    assert d2.resistance.value == pytest.approx(R, rel=1e-12)


def test_uncertainties_match_hand_derived_gradients() -> None:
    # Central differences vs exact gradients: 1e-6 relative.
    dc = 0.02 * C
    d = derive_circuit(estimate(), capacitance=C, capacitance_stderr=dc)
    w2 = ALPHA**2 + OMEGA**2
    # omega0 = sqrt(alpha^2 + omega^2)
    g = np.array([ALPHA, OMEGA]) / math.sqrt(w2)
    assert d.natural_angular_frequency.stderr == pytest.approx(math.sqrt(g @ COV @ g), rel=1e-6)
    # Q = sqrt(w2) / (2 alpha)
    g = np.array(
        [
            ALPHA / math.sqrt(w2) / (2 * ALPHA) - math.sqrt(w2) / (2 * ALPHA**2),
            OMEGA / math.sqrt(w2) / (2 * ALPHA),
        ]
    )
    assert d.quality_factor.stderr == pytest.approx(math.sqrt(g @ COV @ g), rel=1e-6)
    # L = 1 / (w2 C): dL/dalpha = -2 alpha / (w2^2 C), dL/domega = -2 omega / (w2^2 C), dL/dC = -L/C
    g = np.array([-2 * ALPHA / (w2**2 * C), -2 * OMEGA / (w2**2 * C)])
    var_l = g @ COV @ g + (L / C * dc) ** 2
    assert d.inductance.stderr == pytest.approx(math.sqrt(var_l), rel=1e-6)
    # R = 2 alpha / (w2 C)
    g = np.array([2 / (w2 * C) - 4 * ALPHA**2 / (w2**2 * C), -4 * ALPHA * OMEGA / (w2**2 * C)])
    var_r = g @ COV @ g + (R / C * dc) ** 2
    assert d.resistance.stderr == pytest.approx(math.sqrt(var_r), rel=1e-6)
    # The bound carries only the trace's share (component taken as exact): CRB = cov/4.
    g = np.array([-2 * ALPHA / (w2**2 * C), -2 * OMEGA / (w2**2 * C)])
    assert d.inductance.crb == pytest.approx(math.sqrt(g @ COV @ g / 4), rel=1e-6)
    assert "implied" in d.notes[0]


def test_both_components_given_reports_consistency() -> None:
    d = derive_circuit(estimate(), capacitance=C, inductance=L * 1.1, inductance_stderr=0.01 * L)
    assert d.resistance.value == pytest.approx(2 * ALPHA * L * 1.1, rel=1e-12)
    assert "differs from 1/sqrt(LC)" in d.notes[0]


def test_bad_component_values_are_refused() -> None:
    with pytest.raises(ValueError, match="capacitance must be a positive finite number"):
        derive_circuit(estimate(), capacitance=-1e-6)
    with pytest.raises(ValueError, match="standard errors must not be negative"):
        derive_circuit(estimate(), inductance=1e-6, inductance_stderr=-1.0)


def test_json_carries_units_in_the_keys() -> None:
    data = derive_circuit(replace(estimate()), capacitance=C).to_json()
    assert data["inductance_henries"]["value"] == pytest.approx(L, rel=1e-12)
    assert data["series_resistance_ohms"]["value"] == pytest.approx(R, rel=1e-12)
    assert "quality_factor" in data and "capacitance_farads" in data
