"""Detecting what a ring-down cannot separate, from the Jacobian alone.

The waveform is the textbook series-RLC natural response (Nilsson & Riedel, "Electric
Circuits", natural response of a series RLC circuit; from memory), in which every series
resistance enters only through their sum R = R1 + R2 and L, C enter the frequency
through LC and the decay through R/L. Nothing in the detector knows this; the test checks
that it finds the sum and, when only LC matters, the product.
"""

import numpy as np
import pytest

from xcheck.fitting.candidates import FreeParameter
from xcheck.fitting.identifiability import correlated_pairs, find_degeneracies

T = np.linspace(0.0, 4e-3, 2000)


def _waveform(r: float, l: float, c: float) -> np.ndarray:
    alpha = r / (2 * l)
    wd = np.sqrt(1 / (l * c) - alpha**2)
    return 12 * np.exp(-alpha * T) * (np.cos(wd * T) + alpha / wd * np.sin(wd * T))


def _jacobian(func, values: np.ndarray, scale: np.ndarray) -> np.ndarray:
    columns = []
    for i in range(values.size):
        step = np.zeros_like(values)
        step[i] = 1e-6 * scale[i]
        columns.append((func(values + step) - func(values - step)) / (2e-6))
    return np.column_stack(columns)


def _free(label: str, unit: str) -> FreeParameter:
    part, name = label.split(".")
    return FreeParameter((part, name), 1.0, 0.0, 10.0, unit)


def test_two_series_resistances_are_reported_as_their_sum():
    values = np.array([0.2, 0.3, 470e-6])
    free = [_free("R1.value", "ohm"), _free("L1.dcr", "ohm"), _free("L1.value", "H")]
    jac = _jacobian(lambda p: _waveform(p[0] + p[1], p[2], 47e-6), values, values)
    groups = find_degeneracies(jac, free, values, values)
    assert len(groups) == 1
    assert set(groups[0].members) == {"R1.value", "L1.dcr"}
    assert groups[0].combination == "sum"
    assert groups[0].unit == "ohm"
    assert "sum" in groups[0].reason


def test_inductance_and_capacitance_of_a_lossless_ring_are_a_product():
    # With R = 0 the waveform depends on L and C only through LC.
    values = np.array([470e-6, 47e-6])
    free = [_free("L1.value", "H"), _free("C1.value", "F")]
    jac = _jacobian(lambda p: _waveform(0.0, p[0], p[1]), values, values)
    groups = find_degeneracies(jac, free, values, values)
    assert len(groups) == 1 and groups[0].combination == "product"


def test_separable_values_are_not_reported():
    # R and L are separable in a damped ring: alpha = R/2L and w0 = 1/sqrt(LC) with C fixed.
    values = np.array([0.5, 470e-6])
    free = [_free("R1.value", "ohm"), _free("L1.value", "H")]
    jac = _jacobian(lambda p: _waveform(p[0], p[1], 47e-6), values, values)
    assert find_degeneracies(jac, free, values, values) == []


def test_correlated_pairs_threshold():
    corr = np.array([[1.0, 0.995, 0.1], [0.995, 1.0, 0.0], [0.1, 0.0, 1.0]])
    assert correlated_pairs(["a", "b", "c"], corr) == [("a", "b", pytest.approx(0.995))]


def test_three_series_resistances_merge_into_one_sum():
    values = np.array([0.2, 0.3, 0.1, 470e-6])
    free = [_free("R1.value", "ohm"), _free("L1.dcr", "ohm"), _free("loop.extra_resistance", "ohm"),
            _free("L1.value", "H")]
    jac = _jacobian(lambda p: _waveform(p[0] + p[1] + p[2], p[3], 47e-6), values, values)
    groups = find_degeneracies(jac, free, values, values)
    assert len(groups) == 1
    assert groups[0].members == ("R1.value", "L1.dcr", "loop.extra_resistance")
    assert groups[0].combination == "sum"
