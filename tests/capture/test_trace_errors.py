"""Malformed traces and peak tables: each gives one clear TraceError.

Every file is written here (invented content). Each check names what a user needs to
fix it: the line or column, the bad value, and the remedy; the messages are matched
with pytest.raises(..., match=...). The command line turns any TraceError into one
paragraph and exit status 2 (xcheck.cli.main); the last test checks that path with a
stand-in subcommand that only reads the file.
"""

from __future__ import annotations

import argparse
import gzip
from pathlib import Path

import numpy as np
import pytest

from xcheck import cli
from xcheck.errors import TraceError, XcheckError
from xcheck.capture.peak_table import read_peaks
from xcheck.capture.scope_csv import read_trace

HEADER = "Time (s),CH1 (V)\n"


def body(n: int = 20, start: int = 0) -> list[str]:
    """Rows of an invented, well-formed capture: 1 us steps, a 50 kHz sine."""
    return [f"{k * 1e-6:.6e},{np.sin(2 * np.pi * 5e4 * k * 1e-6):.6f}" for k in range(start, start + n)]


def write(tmp_path: Path, text: str | bytes, name: str = "bad.csv") -> Path:
    path = tmp_path / name
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    return path


def with_row(index: int, row: str, n: int = 20) -> str:
    """HEADER + body, with data row ``index`` (0-based) replaced; it is on line index + 2."""
    lines = body(n)
    lines[index] = row
    return HEADER + "\n".join(lines) + "\n"


def test_trace_error_is_an_xcheck_error():
    assert issubclass(TraceError, XcheckError)


def test_missing_file(tmp_path):
    with pytest.raises(TraceError, match=r"nope\.csv: 1 problem .* file not found; check the path"):
        read_trace(tmp_path / "nope.csv")


def test_directory(tmp_path):
    with pytest.raises(TraceError, match=r"this is a directory"):
        read_trace(tmp_path)


def test_empty_file(tmp_path):
    with pytest.raises(TraceError, match=r"the file is empty"):
        read_trace(write(tmp_path, "\n\n"))


def test_binary_file(tmp_path):
    data = bytes(range(256)) * 8
    with pytest.raises(TraceError, match=r"looks like a binary file \(a zero byte at offset 0\).*export"):
        read_trace(write(tmp_path, data, "capture.bin"))


def test_utf16_file(tmp_path):
    text = (HEADER + "\n".join(body()) + "\n").encode("utf-16")
    with pytest.raises(TraceError, match=r"UTF-16 text; save it as UTF-8"):
        read_trace(write(tmp_path, text))


def test_damaged_gzip(tmp_path):
    packed = gzip.compress((HEADER + "\n".join(body(2000)) + "\n").encode())
    with pytest.raises(TraceError, match=r"gzip data is damaged or cut short"):
        read_trace(write(tmp_path, packed[: len(packed) // 2], "cut.csv.gz"))


def test_unreadable_number_names_line_and_column(tmp_path):
    text = with_row(5, "5.000000e-06,0.3O9017")  # letter O for a zero
    with pytest.raises(
        TraceError,
        match=r"column 'CH1 \(V\)' \(index 1\): cannot read a number: line 7 reads '0\.3O9017'",
    ):
        read_trace(write(tmp_path, text))


def test_wrong_number_of_fields(tmp_path):
    text = with_row(9, "9.000000e-06,0.309017,0.5")
    with pytest.raises(TraceError, match=r"rows must have 2 fields .*line 11 has 3"):
        read_trace(write(tmp_path, text))


def test_duplicate_time(tmp_path):
    lines = body()
    lines[8] = lines[7].split(",")[0] + ",0.1"
    with pytest.raises(TraceError, match=r"must increase strictly .*line 10 repeats the value of line 9"):
        read_trace(write(tmp_path, HEADER + "\n".join(lines) + "\n"))


def test_time_going_backwards(tmp_path):
    lines = body()
    lines[12], lines[13] = lines[13], lines[12]
    with pytest.raises(TraceError, match=r"line 15 goes back \(1\.2e-05 s after 1\.3e-05 s on line 14\)"):
        read_trace(write(tmp_path, HEADER + "\n".join(lines) + "\n"))


def test_nan_value(tmp_path):
    with pytest.raises(TraceError, match=r"needs a finite number in every row: line 5 \(empty or NaN\)"):
        read_trace(write(tmp_path, with_row(3, "3.000000e-06,NaN")))


def test_empty_field(tmp_path):
    with pytest.raises(TraceError, match=r"line 6 \(empty or NaN\)"):
        read_trace(write(tmp_path, with_row(4, "4.000000e-06,")))


def test_infinite_value(tmp_path):
    with pytest.raises(TraceError, match=r"line 4 \(infinite\)"):
        read_trace(write(tmp_path, with_row(2, "2.000000e-06,inf")))


def test_unknown_column_lists_the_available_ones(tmp_path):
    path = write(tmp_path, "Time (s),CH1 (V),CH2 (V)\n" + "\n".join(r + ",0" for r in body()) + "\n")
    with pytest.raises(
        TraceError,
        match=r"no column 'CH3' for the channel; the file has 'Time \(s\)' \(index 0\), "
        r"'CH1 \(V\)' \(index 1\), 'CH2 \(V\)' \(index 2\)",
    ):
        read_trace(path, column="CH3")
    with pytest.raises(TraceError, match=r"no column 7 for the channel"):
        read_trace(path, column=7)


def test_time_column_chosen_as_channel(tmp_path):
    path = write(tmp_path, HEADER + "\n".join(body()) + "\n")
    with pytest.raises(TraceError, match=r"'Time \(s\)' \(index 0\) is the time column; choose a channel"):
        read_trace(path, column=0)


def test_too_short_record(tmp_path):
    text = "Model,invented\nSample interval,1e-06\nProbe,1X\n" + HEADER + "\n".join(body(5)) + "\n"
    with pytest.raises(TraceError, match=r"only 5 data rows; a waveform needs at least 10"):
        read_trace(write(tmp_path, text))


def test_header_only(tmp_path):
    with pytest.raises(TraceError, match=r"cannot find rows of numbers"):
        read_trace(write(tmp_path, "Model,invented\n" + HEADER))


def test_interval_disagrees_with_time_column(tmp_path):
    # The time column advances 1 us per row; the preamble claims 1 ms (a unit slip).
    text = "Sample interval,1e-3\n" + HEADER + "\n".join(body()) + "\n"
    with pytest.raises(
        TraceError,
        match=r"metadata line 1 \('Sample interval'\) gives a sample interval of 0\.001 s, "
        r"but the time column .* advances 1e-06 s per row",
    ):
        read_trace(write(tmp_path, text))


def test_record_length_disagrees(tmp_path):
    text = "Record length,500\n" + HEADER + "\n".join(body()) + "\n"
    with pytest.raises(TraceError, match=r"record length of 500 samples but the file has 20 data rows"):
        read_trace(write(tmp_path, text))


def test_vertical_scale_disagrees_with_the_unit(tmp_path):
    # Values written in millivolts under a header that says volts: 2000 V peak-to-peak
    # against 0.5 V/div.
    rows = [f"{k * 1e-6:.6e},{1000 * np.sin(0.3 * k):.3f}" for k in range(20)]
    text = "Vertical scale,500 mV/div\n" + HEADER + "\n".join(rows) + "\n"
    with pytest.raises(TraceError, match=r"spans .* V, \d+ divisions of the vertical scale"):
        read_trace(write(tmp_path, text))


def test_sample_numbers_without_interval(tmp_path):
    rows = [f"{k},{np.sin(0.3 * k):.4f}" for k in range(20)]
    with pytest.raises(TraceError, match=r"'Index' \(index 0\) holds sample numbers, but no sample interval"):
        read_trace(write(tmp_path, "Index,CH1\n" + "\n".join(rows) + "\n"))


def test_ambiguous_and_unknown_units(tmp_path):
    rows = [f"{k * 1e-6:.6e},{np.sin(0.3 * k):.4f},{k}" for k in range(20)]
    path = write(tmp_path, "Time (s),CH1 (MV),CH2 (div)\n" + "\n".join(rows) + "\n")
    with pytest.raises(TraceError, match=r"unit 'MV' is ambiguous.*write 'mV' for milli"):
        read_trace(path)
    with pytest.raises(TraceError, match=r"unknown unit 'div'; known units are s, ms"):
        read_trace(path, column="CH2")


def test_constant_channel(tmp_path):
    rows = [f"{k * 1e-6:.6e},0.25" for k in range(20)]
    with pytest.raises(TraceError, match=r"holds 0\.25 in every row; choose the channel"):
        read_trace(write(tmp_path, HEADER + "\n".join(rows) + "\n"))


def test_several_problems_reported_together(tmp_path):
    lines = body()
    lines[3] = "3.000000e-06,"
    lines[15] = "1.600000e-05,abc"
    lines[16] = "1.700000e-05,xyz"
    with pytest.raises(
        TraceError,
        match=r"2 problems .*\(1\) .*line 17 reads 'abc', line 18 reads 'xyz'.*"
        r"\(2\) .*line 5 \(empty or NaN\)",
    ):
        read_trace(write(tmp_path, HEADER + "\n".join(lines) + "\n"))
    lines = body()
    lines[3] = "3.000000e-06,nan"
    text = "Sample interval,1e-06\n" + "Time (s),CH1 (V)\n" + "\n".join(lines) + "\n"
    with pytest.raises(TraceError, match=r"2 problems .*\(1\) .*line 6 \(empty or NaN\).*\(2\)"):
        bad_time = text.replace("1.000000e-05,", "nan,")
        read_trace(write(tmp_path, bad_time))


# ------------------------------------------------------------------ peak tables


def test_peaks_need_a_header(tmp_path):
    with pytest.raises(TraceError, match=r"line 1 must be a header naming two or three columns"):
        read_peaks(write(tmp_path, "0.1,2.9\n0.2,-2.4\n0.3,1.9\n"))


def test_peaks_need_three_extrema(tmp_path):
    with pytest.raises(TraceError, match=r"2 extrema; at least 3 are needed"):
        read_peaks(write(tmp_path, "time [ms],value [V]\n0.1,2.9\n0.2,-2.4\n"))


def test_peaks_out_of_order(tmp_path):
    with pytest.raises(TraceError, match=r"line 4: time 0\.00015 s does not come after 0\.0002 s on line 3"):
        read_peaks(write(tmp_path, "time [ms],value [V]\n0.1,2.9\n0.2,-2.4\n0.15,1.9\n"))


def test_peaks_unreadable_and_doubly_scaled_values(tmp_path):
    text = "time [ms],value [V]\n0.1,2.9\n0.2u,-2.4\n0.3,1.9x\n"
    with pytest.raises(
        TraceError,
        match=r"2 problems .*line 3, time column 'time \[ms\]': '0\.2u' is not a plain number; "
        r"the header gives the unit.*line 4, voltage column 'value \[V\]': '1\.9x'",
    ):
        read_peaks(write(tmp_path, text))


def test_peaks_uncertainty_must_be_positive(tmp_path):
    text = "time,value,uncertainty\n1m,2.9,0.1\n2m,-2.4,0\n3m,1.9,0.1\n"
    with pytest.raises(TraceError, match=r"line 3: the uncertainty must be positive, got 0 V"):
        read_peaks(write(tmp_path, text))


def test_peaks_megavolt_trap(tmp_path):
    # SPICE reads 'M' as milli (ngspice manual, "Basic conventions"); xcheck refuses it.
    with pytest.raises(TraceError, match=r"upper-case 'M' suffix is ambiguous"):
        read_peaks(write(tmp_path, "time,value\n1m,2.9\n2m,-2.4M\n3m,1.9\n"))


# ------------------------------------------------------------------ command line


def test_command_line_reports_a_trace_error_with_exit_status_2(tmp_path, monkeypatch, printed):
    """The dispatcher's handling of XcheckError, exercised with a stand-in subcommand."""
    path = write(tmp_path, with_row(5, "5.000000e-06,abc"))

    def build_parser(argv=None) -> argparse.ArgumentParser:
        parser = argparse.ArgumentParser(prog="xcheck")
        parser.add_argument("trace")
        parser.set_defaults(_run=lambda args: (read_trace(args.trace), 0)[1])
        return parser

    monkeypatch.setattr(cli, "build_parser", build_parser)
    assert cli.main([str(path)]) == cli.EXIT_BAD_INPUT == 2
    err = printed().err
    assert err.startswith("xcheck: ")
    assert "line 7 reads 'abc'" in err
