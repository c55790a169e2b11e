"""Reading measured traces and peak tables: layouts written here, values checked.

Every file is written by the test into tmp_path from a known, invented signal (a
damped 5 kHz ring-down sampled every 2 us), so the reference for each value is the
number the test generated. Tolerances are the rounding of the written text: half a
unit in the last written digit, times the column's unit scale (plus 1e-12 of the
largest value for binary floating point, IEEE 754 double).
"""

from __future__ import annotations

import gzip
from pathlib import Path

import numpy as np
import pytest

from xcheck.errors import TraceError
from xcheck.capture.clipping import CLIP_RUN, detect_clipping, estimate_resolution
from xcheck.capture.peak_table import read_peaks
from xcheck.capture.scope_csv import read_trace
from xcheck.capture.types import check_enough_ringing

N = 400
DT = 2e-6
T0 = -1e-4


def signal(n: int = N) -> tuple[np.ndarray, np.ndarray]:
    """Invented capture: 3 V before t = 0, then a damped 5 kHz ring-down."""
    t = T0 + np.arange(n) * DT
    tp = np.clip(t, 0.0, None)
    v = np.where(t < 0, 3.0, 3.0 * np.exp(-800.0 * tp) * np.cos(2 * np.pi * 5e3 * tp))
    return t, v


def rows(*columns: np.ndarray, fmt: tuple[str, ...], sep: str = ",", comma: bool = False) -> str:
    lines = []
    for values in zip(*columns):
        fields = [f % x for f, x in zip(fmt, values)]
        if comma:
            fields = [f.replace(".", ",") for f in fields]
        lines.append(sep.join(fields))
    return "\n".join(lines) + "\n"


def write(tmp_path: Path, name: str, text: str, newline: str = "\n") -> Path:
    path = tmp_path / name
    with open(path, "w", encoding="utf-8", newline="") as handle:
        handle.write(text.replace("\n", newline))
    return path


def assert_close(got: np.ndarray, want: np.ndarray, written_step: float) -> None:
    """Equal within the rounding of the written text (half the last digit's step),
    plus 1e-12 of the largest value for double-precision arithmetic (IEEE 754)."""
    assert got.shape == want.shape
    atol = 0.5 * written_step * (1 + 1e-9) + 1e-12 * float(np.max(np.abs(want)))
    np.testing.assert_allclose(got, want, rtol=0, atol=atol)


def test_comma_header_with_units_in_parentheses(tmp_path):
    t, v = signal()
    path = write(tmp_path, "a.csv", "Time (s),CH1 (V)\n" + rows(t, v, fmt=("%.9e", "%.6f")))
    trace = read_trace(path)
    assert trace.column == "CH1 (V)"
    assert trace.channels == ("CH1 (V)",)
    assert trace.source == str(path)
    # %.9e of |t| <= 7e-4 rounds to <= 5e-14 s; %.6f to 5e-7 V.
    assert_close(trace.time, t, 1e-13)
    assert_close(trace.voltage, v, 1e-6)


def test_preamble_kept_and_bracket_units_scale_the_columns(tmp_path):
    t, v = signal()
    preamble = "Instrument,invented scope\nSample interval,2e-06,s\nRecord length,400\n"
    text = preamble + "Time [us],CH1 [mV]\n" + rows(t * 1e6, v * 1e3, fmt=("%.3f", "%.3f"))
    trace = read_trace(write(tmp_path, "b.csv", text))
    assert dict(trace.metadata) == {
        "Instrument": "invented scope",
        "Sample interval": "2e-06,s",
        "Record length": "400",
    }
    assert_close(trace.time, t, 1e-3 * 1e-6)  # 3 decimals of microseconds
    assert_close(trace.voltage, v, 1e-3 * 1e-3)  # 3 decimals of millivolts


def test_semicolon_with_decimal_comma(tmp_path):
    t, v = signal()
    text = "Time (s);CH1 (V)\n" + rows(t, v, fmt=("%.9e", "%.6f"), sep=";", comma=True)
    trace = read_trace(write(tmp_path, "c.csv", text))
    assert_close(trace.time, t, 1e-13)
    assert_close(trace.voltage, v, 1e-6)


def test_tab_separated_with_underscore_units(tmp_path):
    t, v = signal()
    text = "t_ms\tch1_mV\n" + rows(t * 1e3, v * 1e3, fmt=("%.6f", "%.4f"), sep="\t")
    trace = read_trace(write(tmp_path, "d.tsv", text))
    assert trace.column == "ch1_mV"
    assert_close(trace.time, t, 1e-6 * 1e-3)
    assert_close(trace.voltage, v, 1e-4 * 1e-3)


def test_start_and_interval_with_an_index_column(tmp_path):
    t, v = signal()
    text = (
        "Sample interval: 2 us\nStart time: -100 us\nIndex,CH1\n"
        + rows(np.arange(N) + 1.0, v, fmt=("%.0f", "%.6f"))
    )
    trace = read_trace(write(tmp_path, "e.csv", text))
    # time = start + (index - first index) * interval, all exact in the text.
    assert_close(trace.time, t, 0.0)
    assert_close(trace.voltage, v, 1e-6)


@pytest.mark.parametrize("name", ["f.csv.gz", "f_no_suffix.csv"])
def test_gzip_recognised_by_content(tmp_path, name):
    t, v = signal()
    with gzip.open(tmp_path / name, "wt", encoding="ascii") as handle:
        handle.write("Time (s),CH1 (V)\n" + rows(t, v, fmt=("%.9e", "%.6f")))
    trace = read_trace(tmp_path / name)
    assert_close(trace.time, t, 1e-13)
    assert_close(trace.voltage, v, 1e-6)


def test_several_channels_chosen_by_name_or_index(tmp_path):
    t, v = signal()
    text = "Time (s),CH1 (V),CH2 [mV],Math\n" + rows(
        t, v, -v * 1e3, 2 * v, fmt=("%.9e", "%.6f", "%.3f", "%.6f")
    )
    path = write(tmp_path, "g.csv", text)
    default = read_trace(path)
    assert default.column == "CH1 (V)"
    assert default.channels == ("CH1 (V)", "CH2 [mV]", "Math")
    by_name = read_trace(path, column="ch2")  # case-insensitive, unit optional
    assert by_name.column == "CH2 [mV]"
    assert_close(by_name.voltage, -v, 1e-3 * 1e-3)
    assert read_trace(path, column="CH2 [mV]").column == "CH2 [mV]"
    by_index = read_trace(path, column=3)
    assert by_index.column == "Math"
    assert_close(by_index.voltage, 2 * v, 1e-6)


def test_no_header_column_zero_is_time(tmp_path):
    t, v = signal()
    path = write(tmp_path, "h.csv", rows(t, v, -v, fmt=("%.9e", "%.6f", "%.6f")))
    trace = read_trace(path)
    assert trace.column == "column 2"
    assert trace.channels == ("column 2", "column 3")
    assert_close(trace.time, t, 1e-13)
    assert_close(trace.voltage, v, 1e-6)
    assert_close(read_trace(path, column="column 3").voltage, -v, 1e-6)


def test_single_column_with_interval_from_the_preamble(tmp_path):
    t, v = signal()
    text = "Sample rate,500 kSa/s\nStart,-1e-4\n" + rows(v, fmt=("%.6f",))
    trace = read_trace(write(tmp_path, "i.csv", text))
    # 1 / 500 kSa/s = 2 us exactly; start + k * interval.
    assert_close(trace.time, t, 0.0)
    assert_close(trace.voltage, v, 1e-6)


def test_names_row_then_units_row(tmp_path):
    t, v = signal()
    text = "Time,CH1\n(s),(mV)\n" + rows(t, v * 1e3, fmt=("%.9e", "%.3f"))
    trace = read_trace(write(tmp_path, "j.csv", text))
    assert trace.column == "CH1"
    assert_close(trace.voltage, v, 1e-3 * 1e-3)


def test_crlf_quotes_bom_and_trailing_separator(tmp_path):
    t, v = signal()
    body = "\n".join(f'"{a:.9e}","{b:.6f}",' for a, b in zip(t, v))
    text = '\ufeff"Time (s)","CH1 (V)",\n' + body + "\n"
    trace = read_trace(write(tmp_path, "k.csv", text, newline="\r\n"))
    assert trace.channels == ("CH1 (V)",)  # the empty trailing column is not a channel
    assert_close(trace.time, t, 1e-13)
    assert_close(trace.voltage, v, 1e-6)


def test_probe_attenuation_multiplies_only_its_channel(tmp_path):
    t, v = signal()
    text = "CH1 Probe,10X\nCH2 Probe,1:1\nTime (s),CH1,CH2\n" + rows(
        t, v / 10, v, fmt=("%.9e", "%.7f", "%.6f")
    )
    path = write(tmp_path, "l.csv", text)
    assert_close(read_trace(path, column="CH1").voltage, v, 10 * 1e-7)
    assert_close(read_trace(path, column="CH2").voltage, v, 1e-6)


def test_explicit_time_column_and_micro_sign_unit(tmp_path):
    t, v = signal()
    text = "CH1 (V);Zeitachse (µs)\n" + rows(v, t * 1e6, fmt=("%.6f", "%.4f"), sep=";")
    trace = read_trace(write(tmp_path, "m.csv", text), time_column=1)
    assert trace.column == "CH1 (V)"
    assert_close(trace.time, t, 1e-4 * 1e-6)


def test_preamble_longer_than_the_sniffed_head(tmp_path):
    t, v = signal()
    preamble = "".join(f"Comment {i},an invented remark line of some length\n" for i in range(2000))
    assert len(preamble) > 64 * 1024
    text = preamble + "Time (s),CH1 (V)\n" + rows(t, v, fmt=("%.9e", "%.6f"))
    trace = read_trace(write(tmp_path, "n.csv", text))
    assert len(trace.metadata) == 2000
    assert_close(trace.voltage, v, 1e-6)


def test_metadata_that_agrees_within_rounding_is_accepted(tmp_path):
    t, v = signal()
    # Interval written with 4 significant digits of 1/6 MHz; time column exact.
    dt = 1 / 6e6
    times = np.arange(N) * dt
    text = "Sample interval,1.667e-07\nRecord length,400\nTime (s),CH1 (V)\n" + rows(
        times, v, fmt=("%.12e", "%.6f")
    )
    trace = read_trace(write(tmp_path, "o.csv", text))
    assert_close(trace.time, times, 1e-17)  # %.12e of values below 1e-4


def test_eight_bit_capture_resolution_and_clipping(tmp_path):
    # Invented 8-bit capture: 10 V span in 256 codes (step 0.0390625 V), rails at
    # -5 V and +5 V - step; a 7 V sine drives past both rails.
    step = 10.0 / 256
    t = np.arange(2000) * 1e-6
    rng = np.random.default_rng(1)
    true = 7.0 * np.sin(2 * np.pi * 2e3 * t) + 0.03 * rng.standard_normal(t.size)
    codes = np.clip(np.round(true / step), -128, 127)
    text = "Time (s),CH1 (V)\n" + rows(t, codes * step, fmt=("%.9e", "%.7f"))
    trace = read_trace(write(tmp_path, "p.csv", text))
    # %.7f of multiples of 1/25.6 carries at most 5e-8 V of rounding per value, so the
    # grid step is found to within 1e-7 V (well under 0.1 % of the step).
    assert trace.resolution == pytest.approx(step, abs=1e-7)
    beyond = (true / step >= 127.5) | (true / step <= -128.5)
    # Clipped = in a run of >= CLIP_RUN samples at a rail (common practice, no
    # source). Every sample whose true value lies past a rail by more than half a step
    # sits in such a run here (the sine stays past the rails for ~100 samples).
    assert np.all(trace.clipped[beyond])
    at_rail = (codes == 127) | (codes == -128)
    assert not np.any(trace.clipped & ~at_rail)


def test_clipping_marks_runs_only():
    values = np.array([0.0, 1.0, 1.0, 0.5, 1.0, 1.0, 1.0, 0.2, -1.0, -1.0, -1.0, -1.0, 0.0])
    # Runs of >= CLIP_RUN (= 3) equal samples at the max (indices 4-6) or min (8-11);
    # the pair at indices 1-2 is too short.
    assert CLIP_RUN == 3
    expected = np.zeros(values.size, dtype=bool)
    expected[4:7] = True
    expected[8:12] = True
    np.testing.assert_array_equal(detect_clipping(values), expected)


def test_resolution_is_none_for_unquantised_values():
    rng = np.random.default_rng(2)
    assert estimate_resolution(rng.standard_normal(5000)) is None


def test_peak_table_with_header_units_and_uncertainty(tmp_path):
    # Invented cursor readings; uncertainty column without a unit takes the voltage's.
    text = "# read off the screen (invented)\ntime [ms],value [mV],uncertainty\n0.100,2950,20\n0.200,-2400,20\n0.300,1960,25\n0.400,-1590,25\n"
    table = read_peaks(write(tmp_path, "peaks.csv", text))
    np.testing.assert_allclose(table.time, [1e-4, 2e-4, 3e-4, 4e-4], rtol=1e-12)
    np.testing.assert_allclose(table.voltage, [2.95, -2.4, 1.96, -1.59], rtol=1e-12)
    np.testing.assert_allclose(table.uncertainty, [0.02, 0.02, 0.025, 0.025], rtol=1e-12)
    assert table.source.endswith("peaks.csv")


def test_peak_table_with_si_suffixes_and_decimal_comma(tmp_path):
    # SPICE suffixes (ngspice manual, "Basic conventions"): m = 1e-3, u = 1e-6.
    text = "time;value\n100u;2,95\n200u;-2400m\n0,3m;1,96V\n"
    table = read_peaks(write(tmp_path, "peaks2.csv", text))
    np.testing.assert_allclose(table.time, [1e-4, 2e-4, 3e-4], rtol=1e-12)
    np.testing.assert_allclose(table.voltage, [2.95, -2.4, 1.96], rtol=1e-12)
    assert table.uncertainty is None


def test_enough_ringing_check(tmp_path):
    t, v = signal()
    trace = read_trace(write(tmp_path, "q.csv", "Time (s),CH1 (V)\n" + rows(t, v, fmt=("%.9e", "%.6f"))))
    # The record spans 399 * 2 us = 798 us: 3.99 periods of 200 us, 0.798 of 1 ms.
    check_enough_ringing(trace, 200e-6)
    with pytest.raises(TraceError, match=r"covers 0\.80 periods .* at least 1\.5 are needed"):
        check_enough_ringing(trace, 1e-3)


def test_arrays_are_read_only(tmp_path):
    t, v = signal()
    trace = read_trace(write(tmp_path, "r.csv", "Time (s),CH1 (V)\n" + rows(t, v, fmt=("%.9e", "%.6f"))))
    with pytest.raises(ValueError, match="read-only"):
        trace.voltage[0] = 0.0
