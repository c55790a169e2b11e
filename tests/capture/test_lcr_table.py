"""LCR-meter readings: conversions against hand formulas, and tables read back.

The conversions are common practice (no source): a series circuit is Z = R + jX with
X = -1 / (omega C) or omega L, D = R / |X| (so D = ESR omega C for a series C) and
Q = 1 / D (Q = omega L / ESR for a series L); a parallel circuit is Y = 1 / Rp + jB with
B = omega C or -1 / (omega L). The hand numbers below were worked out with a
calculator from those formulas. Tolerances: the hand numbers keep 7 significant digits,
so 1e-6 relative; file round trips keep what was written (9 digits: 1e-8).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from sweep_cases import CAPACITOR, log_grid, series_rlc
from xcheck.capture.lcr_table import lcr_impedance, read_lcr_table


def one(value: complex) -> np.ndarray:
    return np.array([value])


def test_series_capacitor_with_d():
    # 1 uF at 1 kHz: X = -1 / (2 pi 1e3 1e-6) = -159.1549 ohm; D = 0.01 gives
    # ESR = D / (omega C) = 1.591549 ohm.
    z = lcr_impedance(one(1e3), "capacitance", one(1e-6), "D", one(0.01))
    assert z[0].real == pytest.approx(1.591549, rel=1e-6)
    assert z[0].imag == pytest.approx(-159.1549, rel=1e-6)


def test_series_inductor_with_q():
    # 10 uH at 100 kHz: X = 2 pi 1e5 1e-5 = 6.283185 ohm; Q = 50 gives ESR = X / Q = 0.1256637.
    z = lcr_impedance(one(1e5), "inductance", one(10e-6), "Q", one(50.0))
    assert z[0].real == pytest.approx(0.1256637, rel=1e-6)
    assert z[0].imag == pytest.approx(6.283185, rel=1e-6)


def test_series_capacitor_with_esr_is_d_times_reactance():
    # D = ESR omega C (series C): 47 uF with 0.1 ohm at 120 Hz has D = 0.1 * 2 pi 120 * 47e-6
    # = 3.543716e-3; reading that D back gives the same impedance as the ESR.
    d = 0.1 * 2 * math.pi * 120 * 47e-6
    assert d == pytest.approx(3.543716e-3, rel=1e-6)
    by_esr = lcr_impedance(one(120.0), "capacitance", one(47e-6), "resistance", one(0.1))
    by_d = lcr_impedance(one(120.0), "capacitance", one(47e-6), "D", one(d))
    np.testing.assert_allclose(by_d, by_esr, rtol=1e-12)  # the same formula both ways


def test_parallel_and_series_equivalents_agree():
    # A lossy capacitor read in both circuits: Cp = Cs / (1 + D**2) with the same D
    # (common practice, no source); both must describe one impedance.
    f, cs, d = np.array([1e3, 1e4]), np.array([1e-6, 1e-6]), np.array([0.05, 0.2])
    series = lcr_impedance(f, "capacitance", cs, "D", d, "series")
    parallel = lcr_impedance(f, "capacitance", cs / (1 + d**2), "D", d, "parallel")
    np.testing.assert_allclose(parallel, series, rtol=1e-12)  # algebraically equal


def test_parallel_inductor_with_rp():
    # 1 mH || 10 kohm at 1 kHz: Y = 1e-4 - j / (2 pi 1e3 1e-3) = 1e-4 - 0.1591549j S.
    z = lcr_impedance(one(1e3), "inductance", one(1e-3), "resistance", one(1e4), "parallel")
    np.testing.assert_allclose(1 / z, [1e-4 - 0.1591549j], rtol=1e-6)


def test_impedance_magnitude_with_phase_and_with_esr():
    # |Z| = 5 ohm at -60 degrees: 2.5 - 4.330127j ohm.
    z = lcr_impedance(one(1e3), "impedance magnitude", one(5.0), "phase", one(math.radians(-60)))
    np.testing.assert_allclose(z, [2.5 - 4.330127j], rtol=1e-6)
    # |Z| = 5 ohm with Rs = 3 ohm, capacitive: X = -sqrt(25 - 9) = -4 ohm.
    z = lcr_impedance(one(1e3), "impedance magnitude", one(5.0), "resistance", one(3.0),
                      reactance="capacitive")
    np.testing.assert_allclose(z, [3 - 4j], rtol=1e-12)
    # And with Q = 4 / 3, inductive: tan(phase) = Q, so the same 3 + 4j.
    z = lcr_impedance(one(1e3), "impedance magnitude", one(5.0), "Q", one(4 / 3),
                      reactance="inductive")
    np.testing.assert_allclose(z, [3 + 4j], rtol=1e-12)


def test_a_capacitor_table_read_back_matches_its_impedance(tmp_path):
    # The invented capacitor with ESR and ESL read as a meter shows it below its
    # self-resonance: Cs = -1 / (omega X) and ESR, the meter's series C (common practice).
    f = log_grid(1e2, 1e6, 1)
    z = series_rlc(f, **CAPACITOR)
    cs = -1 / (2 * math.pi * f * z.imag)
    rows = [f"{fi:.9g},{c * 1e9:.9g},{r * 1e3:.9g}" for fi, c, r in zip(f, cs, z.real)]
    path = tmp_path / "meter.csv"
    path.write_text("# invented readings\nfreq (Hz),Cs (nF),ESR (mohm)\n" + "\n".join(rows) + "\n",
                    encoding="utf-8")
    readings = read_lcr_table(path)
    assert readings.circuit == "series" and readings.primary == "capacitance"
    np.testing.assert_allclose(readings.sweep.value, z, rtol=2e-8)  # 9 digits each of C and ESR
    np.testing.assert_allclose(readings.primary_values, cs, rtol=1e-8)
    assert "common practice" in readings.sweep.notes[0]


def test_engineering_notation_decimal_comma_and_a_parallel_header(tmp_path):
    path = tmp_path / "meter.csv"
    path.write_text("f;Lp;Q\n1k;10,5m;20\n10k;10,4m;35\n", encoding="utf-8")
    readings = read_lcr_table(path)
    assert readings.circuit == "parallel"  # from the header's 'Lp'
    # Q = Rp / (omega L) for a parallel L: Rp = 20 * 2 pi 1e3 10.5e-3 = 1319.469 ohm.
    y = 1 / readings.sweep.value[0]
    assert 1 / y.real == pytest.approx(1319.469, rel=1e-6)
    assert -1 / (2 * math.pi * 1e3 * y.imag) == pytest.approx(10.5e-3, rel=1e-12)


def test_dissipation_in_percent(tmp_path):
    path = tmp_path / "meter.csv"
    path.write_text("freq (kHz),C (uF),D (%)\n1,1,1\n", encoding="utf-8")
    z = read_lcr_table(path).sweep.value
    assert z[0].real == pytest.approx(1.591549, rel=1e-6)  # D = 0.01: as the first test
