"""Resonances of invented sweeps made from textbook formulas (``sweep_cases``, from memory).

References: a series RLC resonates at f0 = 1 / (2 pi sqrt(L C)) with |Z(f0)| = R and
Q = sqrt(L / C) / R; its half-power points are where X = ±R, so f0 / bandwidth = Q
exactly (from memory). A capacitor with ESR and ESL is the same circuit.

Tolerances: on a 50-points-a-decade grid (4.7 % between points) the nearest point can
be 2.3 % from f0 (0.95 % here); the parabola brings the frequency and the level within
2e-5 and the bandwidth's Q within 2e-4, the phase slope's Q within 2.2e-4 for the
series RLC (measured on these grids when the tests were written; it reached 1e-3 on
the capacitor's grid, so only the bandwidth's Q is checked there). The checks allow
1e-4 on frequency and level and 1e-3 on Q: several times the measured error, and far
below what an unrefined reading gives (the first test shows the nearest point misses
the frequency tolerance).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from sweep_cases import CAPACITOR, RLC, log_grid, resonance, series_rlc
from xcheck.capture.resonance import find_resonances, half_power_frequencies, phase_slope_q

#: 50 points a decade, shifted so that no point falls on a resonance.
FREQ = log_grid(1e4, 1e7, 50) * 1.0137


def test_series_rlc_minimum_frequency_level_and_q():
    f0, q = resonance(**RLC)
    z = series_rlc(FREQ, **RLC)
    (found,) = find_resonances(FREQ, z)
    assert found.kind == "minimum"
    nearest = FREQ[found.index]
    assert abs(nearest / f0 - 1) > 1e-4  # the grid alone does not reach the tolerance
    assert found.frequency == pytest.approx(f0, rel=1e-4)
    assert found.magnitude == pytest.approx(RLC["R"], rel=1e-4)  # |Z(f0)| = R
    assert found.q_method == "-3 dB bandwidth"
    assert found.q == pytest.approx(q, rel=1e-3)
    assert found.q_phase == pytest.approx(q, rel=1e-3)
    # Half-power points where X = ±R: f = f0 (sqrt(1 + 1 / (4 Q**2)) ± 1 / (2 Q)) (from
    # memory), so bandwidth R / (2 pi L).
    low, high = found.bandwidth
    root = math.sqrt(1 + 1 / (4 * q * q))
    assert low == pytest.approx(f0 * (root - 1 / (2 * q)), rel=1e-3)
    assert high == pytest.approx(f0 * (root + 1 / (2 * q)), rel=1e-3)


def test_capacitor_self_resonance():
    # The invented 100 nF capacitor with 50 mohm ESR and 5 nH ESL: self-resonance at
    # 1 / (2 pi sqrt(ESL C)), about 7.1 MHz, where |Z| = ESR.
    srf, q = resonance(**CAPACITOR)
    grid = log_grid(1e5, 1e9, 50) * 1.0137
    (found,) = find_resonances(grid, series_rlc(grid, **CAPACITOR))
    assert found.frequency == pytest.approx(srf, rel=1e-4)
    assert found.magnitude == pytest.approx(CAPACITOR["R"], rel=1e-4)
    assert found.q == pytest.approx(q, rel=1e-3)


def test_admittance_maximum_is_the_same_resonance():
    f0, q = resonance(**RLC)
    (found,) = find_resonances(FREQ, 1 / series_rlc(FREQ, **RLC))
    assert found.kind == "maximum"
    assert found.frequency == pytest.approx(f0, rel=1e-4)
    assert found.q == pytest.approx(q, rel=1e-3)


def test_narrow_sweep_falls_back_to_the_phase_slope():
    # Q = 5: the half-power points lie about 10 % either side of f0, outside a sweep of
    # ±4 %, so only the phase slope can give Q.
    f0, q = resonance(**RLC)
    grid = np.linspace(0.96, 1.04, 41) * f0 * 1.0011
    (found,) = find_resonances(grid, series_rlc(grid, **RLC), min_prominence_db=0.1)
    assert found.bandwidth is None and found.q_bandwidth is None
    assert found.q_method == "phase slope"
    # Points 0.2 % apart: the three nearest f0 fix the slope to well within 1e-3.
    assert found.q == pytest.approx(q, rel=1e-3)
    assert phase_slope_q(grid, series_rlc(grid, **RLC), f0) == pytest.approx(q, rel=1e-3)


def test_series_resonance_then_anti_resonance():
    # A series RLC (R1, L1, C1) shunted by C2: a minimum near 1 / (2 pi sqrt(L1 C1)), then
    # a maximum at the anti-resonance 1 / (2 pi sqrt(L1 C1 C2 / (C1 + C2))) (from memory).
    c2 = 20e-9
    z1 = series_rlc(FREQ, **RLC)
    z = 1 / (1 / z1 + 2j * math.pi * FREQ * c2)
    found = find_resonances(FREQ, z)
    assert [r.kind for r in found] == ["minimum", "maximum"]
    series_c = RLC["C"] * c2 / (RLC["C"] + c2)
    anti = 1 / (2 * math.pi * math.sqrt(RLC["L"] * series_c))
    # The tank's loss (R = 2 ohm at Q about 2) moves its peak by a few parts in 1e3 from
    # the lossless anti-resonance: 1 % separates the two resonances clearly.
    assert found[1].frequency == pytest.approx(anti, rel=1e-2)
    assert found[0].frequency < found[1].frequency
    assert find_resonances(FREQ, z, kind="maximum")[0].kind == "maximum"


def test_a_flat_sweep_has_no_resonance():
    assert find_resonances(FREQ, np.full(FREQ.size, 50 + 0j)) == ()


def test_half_power_points_outside_the_sweep_are_none():
    grid = np.linspace(0.99, 1.01, 11) * resonance(**RLC)[0]
    z = series_rlc(grid, **RLC)
    assert half_power_frequencies(grid, z, int(np.argmin(abs(z))), "minimum") is None


@pytest.mark.parametrize(
    "frequency, values",
    [
        ([1.0, 2.0], [1, 2]),  # too short
        ([1.0, 3.0, 2.0], [1, 2, 3]),  # not increasing
        ([1.0, 2.0, 3.0], [1, np.nan, 3]),  # not finite
    ],
)
def test_bad_arrays_are_a_programming_error(frequency, values):
    with pytest.raises(ValueError):
        find_resonances(frequency, values)
