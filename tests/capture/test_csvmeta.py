"""A capture preamble's statements and their cross-checks (xcheck.capture.csvmeta).

Every file is written here (invented content, from no real instrument). What each
line states is checked against the number written in it, scaled by its SI prefix
(milli 1e-3, micro 1e-6, kilo 1e3, mega 1e6: from memory). The rounding of a written
number is half a unit in its last digit, taken from ``decimal.Decimal``'s exponent of
the same text. The cross-checks accept a disagreement that the rounding of the
written numbers explains and refuse a larger one; each pair of cases below sits on
either side of that bound, and the bound is worked out in a comment from the digits
written. Through :func:`xcheck.capture.scope_csv.read_trace` every refusal is a
TraceError whose problem names the preamble line by number and key.
"""

from __future__ import annotations

import decimal
from pathlib import Path

import numpy as np
import pytest

from xcheck.capture.csvlayout import Column, Layout, columns, open_source, sniff_layout
from xcheck.capture.csvmeta import (
    MAX_DIVISIONS,
    Meta,
    Stated,
    read_metadata,
    record_problems,
    time_problems,
)
from xcheck.capture.scope_csv import read_trace
from xcheck.errors import TraceError

HEADER = "Time (s),CH1 (V),CH2 (V)"
N = 20


def body(step: float = 1e-6, start: float = 0.0, time_format: str = "%.6e") -> list[str]:
    """N invented rows: time, a sine on CH1, a cosine on CH2 (peak-to-peak under 2 V)."""
    return [
        f"{time_format % (start + k * step)},{np.sin(0.3 * k):.4f},{np.cos(0.3 * k):.4f}"
        for k in range(N)
    ]


def write(tmp_path: Path, preamble: list[str], rows: list[str] | None = None) -> Path:
    path = tmp_path / "capture.csv"
    lines = [*preamble, HEADER, *(body() if rows is None else rows)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def layout_of(tmp_path: Path, preamble: list[str], rows: list[str] | None = None) -> Layout:
    return sniff_layout(open_source(write(tmp_path, preamble, rows)))


def stated(tmp_path: Path, *preamble: str, channel: int = 1) -> tuple[Meta, list[str]]:
    """What the preamble states about the channel column ``channel``, and any problems."""
    layout = layout_of(tmp_path, list(preamble))
    problems: list[str] = []
    meta = read_metadata(layout, columns(layout)[channel], problems)
    return meta, problems


def half_digit(text: str) -> float:
    """Half a unit in the last written digit of ``text`` (decimal.Decimal's exponent)."""
    return 0.5 * 10.0 ** decimal.Decimal(text).as_tuple().exponent


# ------------------------------------------------------------------ reading the preamble


@pytest.mark.parametrize(
    "line, value, written",
    [
        ("Sample interval,1e-06,s", 1e-6, "1e-06"),
        ("Sample interval,2,us", 2e-6, "2"),  # unit in the next field, micro
        ("Sample interval (us),2.5", 2.5e-6, "2.5"),  # unit in brackets in the key
        ("Time per point: 500 ns", 500e-9, "500"),
        ("dt = 4.00e-7", 4.00e-7, "4.00e-7"),
    ],
)
def test_sample_interval_value_unit_and_rounding(
    tmp_path: Path, line: str, value: float, written: str
) -> None:
    meta, problems = stated(tmp_path, "Model,invented bench scope", line)
    assert problems == []
    assert meta.interval is not None
    assert meta.interval.value == pytest.approx(value, rel=1e-12)
    scale = value / float(written)
    assert meta.interval.rounding == pytest.approx(half_digit(written) * scale, rel=1e-12)
    assert meta.interval.line == 2  # counted in the preamble written above


@pytest.mark.parametrize(
    "line, interval",
    [
        ("Sample rate,500 kSa/s", 2e-6),
        ("Sample rate,2 MSa/s", 0.5e-6),  # 'M' is mega here: no capture samples at mHz
        ("Sampling frequency,1e6", 1e-6),
        ("fs: 250 kHz", 4e-6),
    ],
)
def test_sample_interval_from_a_rate(tmp_path: Path, line: str, interval: float) -> None:
    meta, problems = stated(tmp_path, line)
    assert meta.interval is None and meta.rate is not None
    derived = meta.sample_interval(problems)
    assert problems == []
    assert derived is not None and derived.value == pytest.approx(interval, rel=1e-12)
    assert derived.line == 1


def test_start_record_length_scale_and_probe(tmp_path: Path) -> None:
    meta, problems = stated(
        tmp_path,
        "Start time,-1.5e-5,s",
        "Record length,20 pts",
        "Vertical scale,500 mV/div",
        "Probe attenuation,x10",
    )
    assert problems == []
    assert meta.start is not None and meta.start.value == pytest.approx(-1.5e-5, rel=1e-12)
    assert meta.start.rounding == pytest.approx(half_digit("1.5e-5"), rel=1e-12)
    assert meta.length is not None and meta.length.value == 20
    assert meta.vscale is not None and meta.vscale.value == pytest.approx(0.5, rel=1e-12)
    assert meta.probe is not None and meta.probe.value == 10
    assert [s.line for s in (meta.start, meta.length, meta.vscale, meta.probe)] == [1, 2, 3, 4]


@pytest.mark.parametrize("text, factor", [("10X", 10.0), ("x100", 100.0), ("10:1", 10.0), ("1:10", 10.0)])
def test_probe_attenuation_forms(tmp_path: Path, text: str, factor: float) -> None:
    meta, problems = stated(tmp_path, f"Probe,{text}")
    assert problems == [] and meta.probe is not None and meta.probe.value == factor


def test_record_length_with_a_kilo_suffix(tmp_path: Path) -> None:
    meta, _ = stated(tmp_path, "Record length,10k")
    assert meta.length is not None and meta.length.value == 10_000


def test_a_channel_key_applies_to_that_channel_only(tmp_path: Path) -> None:
    on_ch1, _ = stated(tmp_path, "CH2 probe,100:1", channel=1)
    on_ch2, _ = stated(tmp_path, "CH2 probe,100:1", channel=2)
    assert on_ch1.probe is None
    assert on_ch2.probe is not None and on_ch2.probe.value == 100


def test_a_value_that_is_no_number_is_a_remark(tmp_path: Path) -> None:
    meta, problems = stated(tmp_path, "Sample interval,see manual", "Probe,none")
    assert meta.interval is None and meta.probe is None and problems == []


@pytest.mark.parametrize(
    "line, problem",
    [
        ("Sample interval,-1e-6", "metadata line 2 ('Sample interval'): '-1e-6' must be a positive number"),
        ("Probe,1:0", "metadata line 2 ('Probe'): '1:0' must be a positive number"),
        ("Sample interval,2 parsecs", "metadata line 2 ('Sample interval'): unknown unit 'parsecs'"),
        ("Sample interval,2 mV", "metadata line 2 ('Sample interval'): unit 'mV' is not a time unit"),
        ("Record length,10 q", "metadata line 2 ('Record length'): cannot read '10 q' 'q' as a number"),
        ("Sample rate,5 furlongs", "metadata line 2 ('Sample rate'): unknown sample-rate unit 'furlongs'"),
    ],
)
def test_unreadable_values_name_their_line(tmp_path: Path, line: str, problem: str) -> None:
    meta, problems = stated(tmp_path, "Model,invented bench scope", line)
    assert len(problems) == 1 and problems[0].startswith(problem)
    assert problems[0].endswith("; correct the line or delete it")
    # Through the reader the same problem is a TraceError.
    with pytest.raises(TraceError) as info:
        read_trace(write(tmp_path, ["Model,invented bench scope", line]))
    assert info.value.problems[0].startswith(problem)


# ------------------------------------------------------------------ cross-checks


def test_interval_and_rate_must_agree_within_their_rounding(tmp_path: Path) -> None:
    # "1.000e-06" s (+-5e-10 s) and "1.0003e6" /s (+-50 /s: an interval of 0.99970e-6 s
    # +-5e-11 s) are 3e-10 s apart, inside 5.5e-10 s: both may be right. With
    # "1.0000e-06" (+-5e-11 s) the bound is 1e-10 s and they disagree.
    meta, problems = stated(tmp_path, "Sample interval,1.000e-06", "Sample rate,1.0003e6")
    meta.sample_interval(problems)
    assert problems == []
    meta, problems = stated(tmp_path, "Sample interval,1.0000e-06", "Sample rate,1.0003e6")
    meta.sample_interval(problems)
    assert len(problems) == 1
    assert problems[0].startswith(
        "metadata line 1 ('Sample interval') gives a sample interval of 1e-06 s but "
        "metadata line 2 ('Sample rate') gives 1000300 samples/s"
    )


def _time_check(tmp_path: Path, preamble: list[str], rows: list[str]) -> list[str]:
    """time_problems for the time column as written (its values read by float())."""
    layout = layout_of(tmp_path, preamble, rows)
    time_column = columns(layout)[0]
    time = np.array([float(row.split(",")[0]) for row in rows])
    problems: list[str] = []
    meta = read_metadata(layout, columns(layout)[1], problems)
    assert problems == []
    return time_problems(layout, time_column, 1.0, time, meta.sample_interval(problems), meta.start)


def test_interval_against_the_time_column(tmp_path: Path) -> None:
    # Rows 1.0003 us apart written to 1e-12 s (+-5e-13 s each end, over 19 steps). A
    # stated "1.000e-06" (+-5e-10) is 3e-10 off, inside its rounding: accepted;
    # "1.0000e-06" (+-5e-11) is not.
    rows = body(step=1.0003e-6, time_format="%.12f")
    assert _time_check(tmp_path, ["Sample interval,1.000e-06"], rows) == []
    problems = _time_check(tmp_path, ["Model,invented", "Sample interval,1.0000e-06"], rows)
    assert problems == [
        "metadata line 2 ('Sample interval') gives a sample interval of 1e-06 s, but the "
        "time column 'Time (s)' (index 0) advances 1.0003e-06 s per row on average "
        "(1.0003 times as much); check the time column's unit or correct that line"
    ]


def test_start_against_the_first_row(tmp_path: Path) -> None:
    # First row at -1.03e-05 s written to 1e-12 s. "-1.0e-05" (+-5e-7) is 3e-7 off,
    # inside its rounding; "-1.00e-05" (+-5e-8) is not.
    rows = body(start=-1.03e-5, time_format="%.12f")
    assert _time_check(tmp_path, ["Start time,-1.0e-05"], rows) == []
    problems = _time_check(tmp_path, ["Model,invented", "Start time,-1.00e-05"], rows)
    assert problems == [
        "metadata line 2 ('Start time') gives a start time of -1e-05 s, but the first row "
        "of the time column 'Time (s)' (index 0) reads -1.03e-05 s; check the time "
        "column's unit or correct that line"
    ]


def _channel(tmp_path: Path) -> Column:
    return columns(layout_of(tmp_path, []))[1]


def test_record_length_against_the_row_count(tmp_path: Path) -> None:
    channel = _channel(tmp_path)
    length = Meta(length=Stated(400.0, 0.0, "Record length", 3))
    assert record_problems(length, channel, 400, 1.0) == []
    assert record_problems(length, channel, 399, 1.0) == [
        "metadata line 3 ('Record length') gives a record length of 400 samples but the "
        "file has 399 data rows; the file may be cut short or the line wrong: export the "
        "capture again or correct the line"
    ]


def test_vertical_scale_against_the_channel_span(tmp_path: Path) -> None:
    # A screen holds about 10 divisions (common practice, no source); the reader allows
    # MAX_DIVISIONS = 15 of the stated scale, times a probe factor above 1.
    channel = _channel(tmp_path)
    scale = Meta(vscale=Stated(0.5, 0.0, "Vertical scale", 2))
    limit = MAX_DIVISIONS * 0.5
    assert record_problems(scale, channel, N, 0.99 * limit) == []
    (problem,) = record_problems(scale, channel, N, 1.01 * limit)
    assert problem.startswith(
        "column 'CH1 (V)' (index 1) spans 7.575 V, 15 divisions of the vertical scale in "
        "metadata line 2 ('Vertical scale') (0.5 V/div)"
    )
    probed = Meta(vscale=scale.vscale, probe=Stated(10.0, 0.0, "Probe", 3))
    assert record_problems(probed, channel, N, 0.99 * limit * 10) == []
    assert len(record_problems(probed, channel, N, 1.01 * limit * 10)) == 1


@pytest.mark.parametrize(
    "preamble, named, start",
    [
        (["Model,invented", "Probe,10X", "Sample interval,1e-3"], "metadata line 3 ('Sample interval')",
         "metadata line 3 ('Sample interval') gives a sample interval of 0.001 s, but the time"),
        (["Model,invented", "Start time,0.5"], "metadata line 2 ('Start time')",
         "metadata line 2 ('Start time') gives a start time of 0.5 s, but the first row"),
        (["Model,invented", "Note,none", "Record length,500"], "metadata line 3 ('Record length')",
         "metadata line 3 ('Record length') gives a record length of 500 samples but the file"),
        (["Model,invented", "Vertical scale,10 mV/div"], "metadata line 2 ('Vertical scale')",
         "column 'CH1 (V)' (index 1) spans 1.99"),
    ],
)
def test_the_reader_raises_a_trace_error_naming_the_line(
    tmp_path: Path, preamble: list[str], named: str, start: str
) -> None:
    with pytest.raises(TraceError) as info:
        read_trace(write(tmp_path, preamble))
    (problem,) = info.value.problems
    assert problem.startswith(start) and named in problem


def test_the_reader_accepts_a_preamble_that_agrees(tmp_path: Path) -> None:
    preamble = [
        "Model,invented", "Sample interval,1.000e-06,s", "Start time,0", "Record length,20",
        "Vertical scale,500 mV/div", "Probe,10X",
    ]
    trace = read_trace(write(tmp_path, preamble))
    # The probe factor multiplies the channel: the file's numbers are volts at the input.
    assert trace.voltage[1] == pytest.approx(10 * float(f"{np.sin(0.3):.4f}"), rel=1e-12)
    assert trace.metadata["Record length"] == "20"
