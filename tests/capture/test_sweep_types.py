"""The sweep records: frozen, read-only arrays, and refusing what cannot be a sweep.

Construction with bad arrays is a programming error (ValueError); readers check user
files first and raise SweepError. The derived views are checked against numpy's own
abs and angle.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from xcheck.capture.sweep_types import FrequencySweep, LcrReadings


def sweep(**changes) -> FrequencySweep:
    fields = dict(frequency=[1e3, 2e3, 4e3], value=[1 - 1j, 2 + 0j, 1 + 1j],
                  quantity="impedance", unit="ohm", source="invented.csv")
    fields.update(changes)
    return FrequencySweep(**fields)


def test_arrays_are_read_only_and_the_record_frozen():
    s = sweep(relative_error=0.01)
    with pytest.raises(ValueError):
        s.value[0] = 0
    with pytest.raises(ValueError):
        s.relative_error[0] = 1
    with pytest.raises(dataclasses.FrozenInstanceError):
        s.unit = "V/V"  # type: ignore[misc]
    # One error for all points is broadcast to one a point.
    np.testing.assert_array_equal(s.relative_error, [0.01, 0.01, 0.01])
    assert s.phase_error is None and len(s) == 3


def test_views_match_numpy():
    s = sweep()
    np.testing.assert_allclose(s.magnitude, np.abs(s.value), rtol=0)
    np.testing.assert_allclose(s.phase, np.angle(s.value), rtol=0)
    np.testing.assert_allclose(s.omega, 2 * math.pi * s.frequency, rtol=1e-15)


@pytest.mark.parametrize(
    "changes",
    [
        {"frequency": [1e3, 1e3, 4e3]},  # repeated
        {"frequency": [0.0, 2e3, 4e3]},  # not positive
        {"frequency": [1e3, 2e3]},  # length
        {"value": [1, np.nan, 1]},  # not finite
        {"quantity": "admittance"},
        {"unit": "V/V"},  # not an impedance unit
        {"relative_error": -0.1},
    ],
)
def test_bad_records_are_refused(changes):
    with pytest.raises(ValueError):
        sweep(**changes)


def test_lcr_readings_stand_for_an_impedance():
    s = sweep()
    readings = LcrReadings(s, "capacitance", [1e-6] * 3, "D", [0.01] * 3, "series")
    assert readings.source == "invented.csv" and len(readings) == 3
    with pytest.raises(ValueError):
        LcrReadings(sweep(quantity="transfer", unit="1"), "capacitance", [1e-6] * 3, "D",
                    [0.01] * 3, "series")
    with pytest.raises(ValueError):
        LcrReadings(s, "capacitance", [1e-6] * 2, "D", [0.01] * 3, "series")
