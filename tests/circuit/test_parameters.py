"""Parameter sets taken from a fixture: which value each element gets, and its origin.

The expected values are the fixture's own numbers (copied, so compared to 1e-15
relative: only a float copy is involved), and the two-wire rule "part resistance =
reading minus shorted-lead zero" (common practice, no source), compared to 1e-12
relative (one subtraction).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from xcheck.fixture.model import Fixture, MeterReading, Part, ProbeLoading, StepSource
from xcheck.fixture.reader import load_fixture
from xcheck.circuit.parameters import (
    ORIGIN_LABEL,
    ORIGIN_MEASURED,
    ORIGIN_METER,
    ORIGIN_PARASITIC,
    ORIGIN_PROBE,
    ORIGIN_SOURCE,
    PROBE_CAPACITANCE,
    PROBE_RESISTANCE,
    STEP_SOURCE_RESISTANCE,
    STEP_VOLTS,
    missing_values,
    parameters_from_fixture,
    required_keys,
)

EXAMPLES = Path(__file__).resolve().parents[2] / "examples"
COPY = 1e-15  # a value copied from the fixture: only float identity is involved


def ring_fixture(**changes: object) -> Fixture:
    """The format's documented example (invented scenario), built directly."""
    parts = {
        "SW1": Part("SW1", "switch", parasitics={"resistance": 5e-3}),
        "C1": Part(
            "C1", "capacitor", nominal=47e-6, measured=49.1e-6, tolerance=0.2,
            parasitics={"esr": 40e-3}, initial=12.0,
        ),
        "R1": Part(
            "R1", "resistor", nominal=0.22, measured=0.291 - 0.058,
            meter=MeterReading(0.291, 0.058),
        ),
        "L1": Part("L1", "inductor", nominal=470e-6, unknown=frozenset({"dcr"})),
    }
    parts.update(changes.pop("parts", {}))  # type: ignore[arg-type]
    fields = dict(
        title="Film capacitor ring-down, jig B (invented example)",
        response="natural",
        loop=("SW1", "C1", "R1", "L1"),
        probe="C1",
        parts=parts,
        probe_loading=ProbeLoading(10e6, 11e-12),
    )
    fields.update(changes)
    return Fixture(**fields)  # type: ignore[arg-type]


def test_measured_values_win_and_carry_their_origin() -> None:
    params = parameters_from_fixture(ring_fixture())
    assert params.values[("C1", "value")] == pytest.approx(49.1e-6, rel=COPY)
    assert params.origins[("C1", "value")] == ORIGIN_MEASURED
    # Two-wire ohmmeter: reading minus shorted-lead zero (common practice, no source).
    assert params.values[("R1", "value")] == pytest.approx(0.291 - 0.058, rel=1e-12)
    assert params.origins[("R1", "value")] == ORIGIN_METER
    # No measurement: the label value.
    assert params.values[("L1", "value")] == pytest.approx(470e-6, rel=COPY)
    assert params.origins[("L1", "value")] == ORIGIN_LABEL


def test_label_values_only_when_measurements_are_not_used() -> None:
    params = parameters_from_fixture(ring_fixture(), use_measured=False)
    assert params.values[("C1", "value")] == pytest.approx(47e-6, rel=COPY)
    assert params.values[("R1", "value")] == pytest.approx(0.22, rel=COPY)
    assert {params.origins[(n, "value")] for n in ("C1", "R1", "L1")} == {ORIGIN_LABEL}


def test_parasitics_probe_and_unknowns() -> None:
    params = parameters_from_fixture(ring_fixture())
    assert params.values[("C1", "esr")] == pytest.approx(40e-3, rel=COPY)
    assert params.values[("SW1", "resistance")] == pytest.approx(5e-3, rel=COPY)
    assert params.origins[("C1", "esr")] == ORIGIN_PARASITIC
    assert params.values[PROBE_RESISTANCE] == pytest.approx(10e6, rel=COPY)
    assert params.values[PROBE_CAPACITANCE] == pytest.approx(11e-12, rel=COPY)
    assert params.origins[PROBE_CAPACITANCE] == ORIGIN_PROBE
    # Written "?": simply absent.
    assert ("L1", "dcr") not in params.values
    # A natural response has no step source.
    assert STEP_VOLTS not in params.values


def test_parasitics_and_probe_can_be_left_out() -> None:
    bare = parameters_from_fixture(ring_fixture(), include_parasitics=False, include_probe=False)
    assert sorted(bare.values) == [("C1", "value"), ("L1", "value"), ("R1", "value")]


def test_step_source_values() -> None:
    fixture = ring_fixture(response="step", step=StepSource(24.0, 0.05))
    params = parameters_from_fixture(fixture)
    assert params.values[STEP_VOLTS] == pytest.approx(24.0, rel=COPY)
    assert params.values[STEP_SOURCE_RESISTANCE] == pytest.approx(0.05, rel=COPY)
    assert params.origins[STEP_VOLTS] == ORIGIN_SOURCE


def test_unknown_nominal_is_missing_unless_measured() -> None:
    unknown_l = Part("L1", "inductor", unknown=frozenset({"nominal"}))
    fixture = ring_fixture(parts={"L1": unknown_l})
    params = parameters_from_fixture(fixture)
    assert ("L1", "value") not in params.values
    assert missing_values(fixture, params) == [("L1", "value")]

    measured_l = Part("L1", "inductor", measured=480e-6, unknown=frozenset({"nominal"}))
    fixture = ring_fixture(parts={"L1": measured_l})
    params = parameters_from_fixture(fixture)
    assert params.values[("L1", "value")] == pytest.approx(480e-6, rel=COPY)
    assert missing_values(fixture, params) == []
    # Without measurements the measured value is not used, so the value is missing.
    label_only = parameters_from_fixture(fixture, use_measured=False)
    assert missing_values(fixture, label_only) == [("L1", "value")]


def test_required_keys_cover_valued_parts_and_the_step() -> None:
    fixture = ring_fixture(response="step", step=StepSource(24.0))
    assert required_keys(fixture) == [("C1", "value"), ("R1", "value"), ("L1", "value"), STEP_VOLTS]
    params = parameters_from_fixture(fixture).without({STEP_VOLTS})
    assert missing_values(fixture, params) == [STEP_VOLTS]


def test_example_fixture_file() -> None:
    fixture = load_fixture(EXAMPLES / "film_ringdown.toml")
    params = parameters_from_fixture(fixture)
    assert missing_values(fixture, params) == []
    for name in fixture.loop:
        part = fixture.parts[name]
        if part.measured is not None:
            assert params.values[(name, "value")] == pytest.approx(part.measured, rel=COPY)
        for key, value in part.parasitics.items():
            assert params.values[(name, key)] == pytest.approx(value, rel=COPY)
