"""Frequency sweeps in delimited text: files written here, read back, compared.

Every sweep is invented and made from a recalled formula (``sweep_cases``: a series RLC
impedance, from memory; a second-order low-pass H = 1 / (1 - x**2 + j x / Q) with
x = f / f0, from memory). Tolerances follow from the digits written: nine significant
digits round a number by at most 5e-9 of itself, so a magnitude, a frequency or a
phase in degrees (|phase| <= 90) come back within 1e-8 relative (or 1e-8 rad).
"""

from __future__ import annotations

import gzip
import math
from pathlib import Path

import numpy as np
import pytest

from sweep_cases import RLC, log_grid, series_rlc
from xcheck.capture.sweep_csv import read_sweep_csv

#: Nine significant digits as written (see the module notes).
RTOL = 1e-8


def write(tmp_path: Path, text: str, name: str = "sweep.csv") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def lowpass(frequency: np.ndarray, f0: float, q: float) -> np.ndarray:
    """H = 1 / (1 - x**2 + j x / Q), x = f / f0 (second-order low-pass, from memory)."""
    x = frequency / f0
    return 1 / (1 - x**2 + 1j * x / q)


FREQ = log_grid(1e4, 1e7, 20)
Z = series_rlc(FREQ, **RLC)


def test_magnitude_and_phase_in_degrees_with_a_khz_column(tmp_path):
    rows = [f"{f / 1e3:.9g},{abs(z):.9g},{math.degrees(np.angle(z)):.9g}" for f, z in zip(FREQ, Z)]
    path = write(tmp_path, "freq (kHz),|Z| (ohm),phase (deg)\n" + "\n".join(rows) + "\n")
    sweep = read_sweep_csv(path)
    assert sweep.quantity == "impedance" and sweep.unit == "ohm"
    np.testing.assert_allclose(sweep.frequency, FREQ, rtol=RTOL)
    np.testing.assert_allclose(sweep.value, Z, rtol=2 * RTOL)  # magnitude and phase each
    assert sweep.notes == ()  # a phase reaching ±89 degrees raises no radian note
    assert sweep.source == str(path) and "|Z| (ohm)" in sweep.label


def test_decibels_radians_decimal_comma_and_a_preamble(tmp_path):
    h = lowpass(FREQ, 1e5, 8.0)
    rows = [
        f"{f / 1e6:.9e};{20 * math.log10(abs(v)):.9e};{np.angle(v):.9e}".replace(".", ",")
        for f, v in zip(FREQ, h)
    ]
    text = "Instrument;invented analyser\nAverages;16\n\nFrequency [MHz];|H| (dB);phase (rad)\n"
    sweep = read_sweep_csv(write(tmp_path, text + "\n".join(rows) + "\n"))
    assert sweep.quantity == "transfer" and sweep.unit == "1"
    assert dict(sweep.metadata) == {"Instrument": "invented analyser", "Averages": "16"}
    np.testing.assert_allclose(sweep.frequency, FREQ, rtol=RTOL)
    # dB: 10 ** (dB / 20) (definition of dB of a field quantity); a value near 0 dB
    # written as 9.9e-3 with nine digits keeps 1e-11 dB, far inside RTOL.
    np.testing.assert_allclose(sweep.value, h, rtol=2 * RTOL)


def test_real_and_imaginary_parts_tab_separated(tmp_path):
    rows = [f"{f:.9g}\t{z.real:.9g}\t{z.imag:.9g}" for f, z in zip(FREQ, Z)]
    sweep = read_sweep_csv(write(tmp_path, "f (Hz)\tR (ohm)\tX (ohm)\n" + "\n".join(rows) + "\n"))
    np.testing.assert_allclose(sweep.value.real, Z.real, rtol=RTOL)
    np.testing.assert_allclose(sweep.value.imag, Z.imag, rtol=RTOL)


def test_a_downward_sweep_is_read_in_reverse_with_a_note(tmp_path):
    rows = [f"{f:.9g},{z.real:.9g},{z.imag:.9g}" for f, z in zip(FREQ[::-1], Z[::-1])]
    path = write(tmp_path, "freq,Re(Z),Im(Z)\n" + "\n".join(rows) + "\n")
    sweep = read_sweep_csv(path, relative_error=np.linspace(0.01, 0.02, FREQ.size))
    np.testing.assert_allclose(sweep.frequency, FREQ, rtol=RTOL)
    np.testing.assert_allclose(sweep.value, Z, rtol=2 * RTOL)
    assert any("reverse" in note for note in sweep.notes)
    # The stated errors were in file order (high frequency first): reversed with the rows.
    assert sweep.relative_error[0] == pytest.approx(0.02, rel=1e-12)


def test_gzip_file(tmp_path):
    rows = [f"{f:.9g},{abs(z):.9g},{math.degrees(np.angle(z)):.9g}" for f, z in zip(FREQ, Z)]
    path = tmp_path / "sweep.csv.gz"
    path.write_bytes(gzip.compress(("freq (Hz),|Z| (ohm),phase (deg)\n" + "\n".join(rows)).encode()))
    np.testing.assert_allclose(read_sweep_csv(path).value, Z, rtol=2 * RTOL)


def test_keyword_arguments_supply_and_override_units(tmp_path):
    rows = [f"{f / 1e3:.9g},{20 * math.log10(abs(z)):.9g},{math.degrees(np.angle(z)):.9g}"
            for f, z in zip(FREQ, Z)]
    # The header says Hz, wrongly: frequency_unit overrides it.
    path = write(tmp_path, "freq (Hz),mag,phase\n" + "\n".join(rows) + "\n")
    sweep = read_sweep_csv(path, frequency_unit="kHz", magnitude_unit="dB", phase_unit="deg",
                           quantity="impedance", phase_error=0.01)
    np.testing.assert_allclose(sweep.frequency, FREQ, rtol=RTOL)
    # dB rounding: 9 digits of a dB value up to 80 dB is 4e-7 dB, 5e-8 relative.
    np.testing.assert_allclose(sweep.value, Z, rtol=1e-7)
    np.testing.assert_allclose(sweep.phase_error, 0.01, rtol=0)


def test_columns_chosen_by_name(tmp_path):
    rows = [f"{k},{f:.9g},{abs(z):.9g},{math.degrees(np.angle(z)):.9g}"
            for k, (f, z) in enumerate(zip(FREQ, Z))]
    path = write(tmp_path, "point,sweep axis,A,B\n" + "\n".join(rows) + "\n")
    sweep = read_sweep_csv(path, frequency_column="sweep axis", magnitude_column="A",
                           phase_column=3, magnitude_unit="ohm", phase_unit="deg")
    np.testing.assert_allclose(sweep.value, Z, rtol=2 * RTOL)


def test_degrees_that_look_like_radians_give_a_note_not_an_error(tmp_path):
    # A nearly resistive part whose phase stays within ±3 degrees, stated in degrees.
    rows = [f"{f:.9g},{1 + k * 1e-3:.9g},{0.5 * math.sin(k):.9g}" for k, f in enumerate(FREQ)]
    sweep = read_sweep_csv(write(tmp_path, "freq (Hz),|Z| (ohm),phase (deg)\n" + "\n".join(rows)))
    assert any("within ±pi" in note and "phase_unit='rad'" in note for note in sweep.notes)
    # Read as stated: d degrees is d * pi / 180 rad (definition of the degree); nine digits
    # of values up to 0.5 degrees round them by at most 5e-10 degrees, under 1e-11 rad.
    expected = np.radians(0.5 * np.sin(np.arange(FREQ.size)))
    np.testing.assert_allclose(sweep.phase, expected, rtol=0, atol=1e-11)


def test_both_forms_present_reads_real_and_imaginary_parts(tmp_path):
    rows = [f"{f:.9g},{abs(z):.9g},{math.degrees(np.angle(z)):.9g},{z.real:.9g},{z.imag:.9g}"
            for f, z in zip(FREQ, Z)]
    header = "freq (Hz),|Z| (ohm),phase (deg),Re (ohm),Im (ohm)\n"
    sweep = read_sweep_csv(write(tmp_path, header + "\n".join(rows)))
    assert any("real and imaginary parts" in note for note in sweep.notes)
    np.testing.assert_allclose(sweep.value.imag, Z.imag, rtol=RTOL)
