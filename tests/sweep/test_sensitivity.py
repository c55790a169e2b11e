"""Normalised sensitivities and the words on which tolerance explains a gap.

References (standard circuit theory, from memory): the undamped resonance
f = 1 / (2 pi sqrt(L C)), whose normalised sensitivity to L and to C is -1/2; the
damped series RLC omega_d^2 = 1 / (L C) - R^2 / (4 L^2) and alpha = R / (2 L),
differentiated by hand: (C / omega_d) d omega_d / dC = -omega0^2 / (2 omega_d^2),
(L / omega_d) d omega_d / dL = (2 alpha^2 - omega0^2) / (2 omega_d^2),
(R / omega_d) d omega_d / dR = -alpha^2 / omega_d^2; (L / alpha) d alpha / dL = -1 and
(R / alpha) d alpha / dR = 1.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import pytest

from compare_cases import data_text, variant
from xcheck.fitting.candidates import default_ladder
from xcheck.fixture.reader import parse_fixture_text
from xcheck.ringdown.result import Estimate
from xcheck.sweep.sensitivity import sensitivities


def rlc(resistance: str = "1.3"):
    text = variant(data_text("series_rlc.toml"),
                   ('nominal = "10u"', 'nominal = "10u"\ntolerance = "10%"'),
                   ('nominal = "220u"', 'nominal = "220u"\ntolerance = "5%"'),
                   ('nominal = "1.3"', f'nominal = "{resistance}"'))
    return parse_fixture_text(text, "rlc.toml")


def label(fixture):
    return next(c for c in default_ladder(fixture) if c.name == "label")


def by_label(result):
    return {s.label: s for s in result.sensitivities}


def test_f_d_moves_as_minus_one_half_of_l_and_c_when_lightly_damped() -> None:
    fixture = rlc("0.01")  # zeta = R / 2 sqrt(C / L) ~ 1e-3, so f_d = f0 (1 - 5e-7)
    found = by_label(sensitivities(fixture, label(fixture)))
    # Tolerance 1e-4: the damping moves the -1/2 by zeta^2 ~ 1e-6 and the central
    # difference by about h^2 = 1e-8.
    assert found["L1.value"].frequency == pytest.approx(-0.5, abs=1e-4)
    assert found["C1.value"].frequency == pytest.approx(-0.5, abs=1e-4)
    assert found["R1.value"].frequency == pytest.approx(0.0, abs=1e-4)


def test_the_damped_sensitivities_match_the_formulas() -> None:
    fixture = rlc("1.3")
    R, L, C = 1.3, 220e-6, 10e-6
    alpha = R / (2 * L)
    w0sq = 1 / (L * C)
    wdsq = w0sq - alpha**2
    found = by_label(sensitivities(fixture, label(fixture)))
    # Tolerance 1e-6: the central difference's truncation is about h^2 = 1e-8 times
    # the output's curvature, and each side is an eigenvalue to rounding.
    assert found["C1.value"].frequency == pytest.approx(-w0sq / (2 * wdsq), abs=1e-6)
    assert found["L1.value"].frequency == pytest.approx((2 * alpha**2 - w0sq) / (2 * wdsq),
                                                        abs=1e-6)
    assert found["R1.value"].frequency == pytest.approx(-alpha**2 / wdsq, abs=1e-6)
    assert found["L1.value"].alpha == pytest.approx(-1.0, abs=1e-6)
    assert found["R1.value"].alpha == pytest.approx(1.0, abs=1e-6)
    assert found["C1.value"].alpha == pytest.approx(0.0, abs=1e-6)
    assert math.isnan(found["C1.value"].residual)  # no measurement, no residual


@dataclass(frozen=True)
class FakeMeasured:
    """What the explanations read of a measurement: f_d and alpha with errors."""

    damped_frequency_hz: Estimate
    neper_frequency_per_s: Estimate
    aperiodic: bool = False


def test_which_tolerance_explains_the_frequency_and_none_the_damping() -> None:
    fixture = rlc("1.3")
    found0 = sensitivities(fixture, label(fixture))
    # An invented measurement: f_d 3 % low (L +6 % would do it, beyond its 5 %; C
    # +6 % within its 10 %), alpha 40 % high (only R moves alpha that far: R has no
    # tolerance, and L's 5 % moves it by about 5 %).
    measured = FakeMeasured(Estimate(found0.frequency * 0.97, 0.05),
                            Estimate(found0.alpha * 1.4, 0.3))
    result = sensitivities(fixture, label(fixture), measured=measured)
    frequency, damping = result.discrepancies
    assert [e.varied.part for e in frequency.explained_by] == ["C1"]
    assert [e.varied.part for e in frequency.not_explained] == ["L1"]
    assert frequency.explained_by[0].needed == pytest.approx(0.0634, abs=0.003)
    assert damping.explained_by == ()
    assert damping.not_explained[0].varied.part == "L1"
    assert 0.05 < damping.not_explained[0].covers < 0.2
    assert result.sentence.startswith(
        "C1 within its 10 % tolerance (uniform) explains the frequency (it needs +6.")
    assert "no tolerance explains the damping (the nearest, L1, reaches" in result.sentence


def test_a_measurement_that_agrees_says_so() -> None:
    fixture = rlc("1.3")
    found0 = sensitivities(fixture, label(fixture))
    measured = FakeMeasured(Estimate(found0.frequency + 0.01, 0.05),
                            Estimate(found0.alpha, 0.3))
    result = sensitivities(fixture, label(fixture), measured=measured)
    assert all(d.agrees for d in result.discrepancies)
    assert result.sentence.startswith("The stated values already give the measured frequency")
