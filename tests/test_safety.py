"""Stored-energy and voltage cautions.

E = C V^2 / 2 for a capacitor and L I^2 / 2 for an inductor (any circuits textbook,
e.g. Nilsson & Riedel, "Electric Circuits", chapter on inductance and capacitance;
from memory). Thresholds of about 60 V DC and 10 J: common practice, no source.
"""

import pytest

from xcheck.fixture.reader import parse_fixture
from xcheck.safety import CAUTION, assess


def _fixture(volts: str, capacitance: str):
    return parse_fixture(
        {
            "title": "safety check (invented example)",
            "response": "natural",
            "loop": ["C1", "L1"],
            "probe": "C1",
            "parts": {
                "C1": {"kind": "capacitor", "nominal": capacitance, "initial": volts},
                "L1": {"kind": "inductor", "nominal": "1m", "initial": "2"},
            },
        },
        "inline",
    )


def test_energy_is_half_cv_squared_plus_half_li_squared():
    result = assess(_fixture("12", "47u"))
    expected = 0.5 * 47e-6 * 12**2 + 0.5 * 1e-3 * 2**2
    assert result.stored_energy_joules == pytest.approx(expected, rel=1e-12)  # float rounding only
    assert result.max_volts == pytest.approx(12.0)
    assert not result.hazardous


def test_high_voltage_is_hazardous():
    result = assess(_fixture("400", "1u"))  # 0.08 J but 400 V
    assert result.hazardous
    assert any("60 V" in r for r in result.reasons)


def test_high_energy_is_hazardous_at_low_voltage():
    result = assess(_fixture("50", "0.01"))  # 12.5 J at 50 V
    assert result.hazardous
    assert any("10 J" in r for r in result.reasons)


def test_caution_defers_to_local_codes():
    assert "local codes" in CAUTION and "E = CV²/2" in CAUTION


def test_a_source_part_counts_its_voltage_and_the_energy_it_settles_into():
    # A 400 V step through 10 ohm charges a 1 mF capacitor to 400 V at the DC
    # operating point it settles to (no current through the capacitor at DC; common practice, no
    # source): E = C V^2 / 2 = 80 J, and the 100 uH inductor carries no DC current
    # here (the capacitor blocks it), so it adds nothing.
    fixture = parse_fixture(
        {
            "version": 2,
            "title": "supply switched onto a capacitor bank (invented example)",
            "response": "step",
            "probe": ["out", "0"],
            "parts": {
                "V1": {"kind": "voltage_source", "volts": "400", "waveform": "step",
                       "source_resistance": "10", "nodes": ["in", "0"]},
                "L1": {"kind": "inductor", "nominal": "100u", "nodes": ["in", "out"]},
                "C1": {"kind": "capacitor", "nominal": "1m", "nodes": ["out", "0"]},
            },
        },
        "inline",
    )
    result = assess(fixture)
    assert result.max_volts == pytest.approx(400.0)
    assert result.stored_energy_joules == pytest.approx(0.5 * 1e-3 * 400**2, rel=1e-9)
    assert result.hazardous
