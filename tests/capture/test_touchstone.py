"""Touchstone files written by scikit-rf (the reference library) for a known impedance.

The impedance is an invented series RLC (``sweep_cases``, from memory). scikit-rf
converts it to network parameters and writes the file; xcheck reads it back and must
recover the impedance.

The two-port conversions, from first principles: drive port 1 from a source Vs with a
source impedance Z0 and end port 2 in a load Z0. With both ports matched, the wave
incident on port 1 is Vs / 2 and the wave leaving port 2 is the load voltage V2, so
S21 = 2 V2 / Vs.

- Shunt (the part Z from the line to ground): Z0 || Z loads the source, so
  V2 / Vs = (Z Z0 / (Z + Z0)) / (Z0 + Z Z0 / (Z + Z0)) = Z / (2 Z + Z0), hence
  S21 = 2 Z / (2 Z + Z0) and, solving for Z, Z = Z0 S21 / (2 (1 - S21)).
- Series (the part Z in the line): the current is Vs / (2 Z0 + Z) and V2 = Z0 times it,
  so S21 = 2 Z0 / (2 Z0 + Z) and Z = 2 Z0 (1 - S21) / S21.

The tests also check these S21 expressions against scikit-rf's own conversion of the
element's ABCD matrix (series [[1, Z], [0, 1]], shunt [[1, 0], [1 / Z, 1]], from memory).

Tolerances: scikit-rf writes full-precision floats, so only round-off remains; it grows
as eps |Z| / Z0 where S is near 1, and |Z| / Z0 stays below 20 on these grids, so 1e-12
relative is ample and still far below any real error of the formulas.
"""

from __future__ import annotations

import sys

import numpy as np
import pytest

from sweep_cases import RLC, log_grid, series_rlc
from xcheck.capture.sweep_types import SweepError
from xcheck.capture.touchstone import read_touchstone

skrf = pytest.importorskip("skrf")

FREQ = log_grid(1e4, 1e7, 20)
Z = series_rlc(FREQ, **RLC)
RTOL = 1e-12


def _network(**kwargs):
    return skrf.Network(frequency=skrf.Frequency.from_f(FREQ, unit="Hz"), **kwargs)


def test_one_port_reflection_becomes_the_impedance(tmp_path):
    _network(z=Z.reshape(-1, 1, 1), z0=50).write_touchstone(str(tmp_path / "dut"))
    sweep = read_touchstone(tmp_path / "dut.s1p")
    assert sweep.quantity == "impedance" and sweep.label == "S11"
    np.testing.assert_allclose(sweep.frequency, FREQ, rtol=RTOL)
    np.testing.assert_allclose(sweep.value, Z, rtol=RTOL)
    assert "Z = Z0 (1 + S11) / (1 - S11)" in sweep.notes[0] and "Z0 = 50 ohm" in sweep.notes[0]


def test_one_port_in_magnitude_angle_form_with_75_ohm_reference(tmp_path):
    net = _network(z=Z.reshape(-1, 1, 1), z0=75)
    net.write_touchstone(str(tmp_path / "dut"), form="ma")
    sweep = read_touchstone(tmp_path / "dut.s1p")
    assert sweep.metadata["reference impedance"] == "75 ohm"
    # Magnitude-angle in degrees adds the round-off of one more cos and sin.
    np.testing.assert_allclose(sweep.value, Z, rtol=RTOL)


def test_one_port_given_as_z_parameters(tmp_path):
    net = _network(z=Z.reshape(-1, 1, 1), z0=50)
    net.write_touchstone(str(tmp_path / "dut"), parameter="Z")
    # scikit-rf names it .z1p; the reader takes the port count from either name.
    np.testing.assert_allclose(read_touchstone(tmp_path / "dut.z1p").value, Z, rtol=RTOL)


def _two_port(abcd: np.ndarray, path) -> None:
    s = skrf.network.a2s(abcd, z0=50)
    _network(s=s, z0=50).write_touchstone(str(path))


def test_shunt_through(tmp_path):
    one, zero = np.ones_like(FREQ), np.zeros_like(FREQ)
    abcd = np.stack([np.stack([one, zero], -1), np.stack([1 / Z, one], -1)], -2)
    # The derivation in the module notes against scikit-rf's conversion of the ABCD matrix.
    s21 = skrf.network.a2s(abcd, z0=50)[:, 1, 0]
    np.testing.assert_allclose(s21, 2 * Z / (2 * Z + 50), rtol=RTOL)
    _two_port(abcd, tmp_path / "shunt")
    sweep = read_touchstone(tmp_path / "shunt.s2p", connection="shunt")
    np.testing.assert_allclose(sweep.value, Z, rtol=RTOL)
    assert "shunt" in sweep.label


def test_series_through(tmp_path):
    one, zero = np.ones_like(FREQ), np.zeros_like(FREQ)
    abcd = np.stack([np.stack([one, Z], -1), np.stack([zero, one], -1)], -2)
    s21 = skrf.network.a2s(abcd, z0=50)[:, 1, 0]
    np.testing.assert_allclose(s21, 2 * 50 / (2 * 50 + Z), rtol=RTOL)
    _two_port(abcd, tmp_path / "series")
    sweep = read_touchstone(tmp_path / "series.s2p", connection="series")
    np.testing.assert_allclose(sweep.value, Z, rtol=RTOL)


def test_downward_frequencies_are_read_in_reverse(tmp_path):
    # Hand-written (scikit-rf writes increasing frequencies): S11 of Z in a 50 ohm
    # system, S = (Z - Z0) / (Z + Z0) (from memory), printed with 17 digits.
    s = (Z - 50) / (Z + 50)
    rows = [f"{f / 1e3:.17g} {v.real:.17g} {v.imag:.17g}" for f, v in zip(FREQ[::-1], s[::-1])]
    path = tmp_path / "down.s1p"
    path.write_text("! invented\n# kHz S RI R 50\n" + "\n".join(rows) + "\n", encoding="utf-8")
    sweep = read_touchstone(path)
    np.testing.assert_allclose(sweep.frequency, FREQ, rtol=RTOL)
    np.testing.assert_allclose(sweep.value, Z, rtol=1e-11)  # S printed, then inverted
    assert any("reverse" in note for note in sweep.notes)


def test_missing_scikit_rf_is_reported_with_the_install_command(tmp_path, monkeypatch):
    _network(z=Z.reshape(-1, 1, 1), z0=50).write_touchstone(str(tmp_path / "dut"))
    monkeypatch.setitem(sys.modules, "skrf.io.touchstone", None)  # import fails
    with pytest.raises(SweepError, match=r"needs scikit-rf.*pip install 'xcheck\[touchstone\]'"):
        read_touchstone(tmp_path / "dut.s1p")


def test_version_2_file_with_its_keywords(tmp_path):
    # scikit-rf writes Touchstone 2.0 ([Number of Ports], [Two-Port Data Order], ...) as .ts.
    one, zero = np.ones_like(FREQ), np.zeros_like(FREQ)
    abcd = np.stack([np.stack([one, Z], -1), np.stack([zero, one], -1)], -2)
    net = _network(s=skrf.network.a2s(abcd, z0=50), z0=50)
    net.write_touchstone(str(tmp_path / "series"), version="2.0")
    sweep = read_touchstone(tmp_path / "series.ts", connection="series")
    assert sweep.metadata["version"] == "2.0"
    np.testing.assert_allclose(sweep.value, Z, rtol=RTOL)
