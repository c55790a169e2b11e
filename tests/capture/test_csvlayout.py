"""Sniffing a delimited export's layout (xcheck.capture.csvlayout), tested directly.

Every file is written here (invented content). References from outside the module:
Python's ``csv`` module (``csv.Sniffer`` for the delimiter of dot-decimal data,
``csv.reader`` for how a line splits into fields, quotes included), ``float()`` for what
a number is, ``decimal.Decimal`` for the last written digit, and the byte offsets and
line numbers counted in the text the test wrote. ``csv.Sniffer`` does not apply to
decimal-comma data (it takes the decimal comma for the delimiter, as its preference
list puts ',' first), so there the reference is the written numbers themselves.
SI prefixes (milli 1e-3, micro 1e-6, nano 1e-9, pico 1e-12, kilo 1e3) are from memory.
"""

from __future__ import annotations

import csv
import decimal
import io
from pathlib import Path

import pytest

from xcheck.capture.csvlayout import (
    Layout,
    UnitProblem,
    column_scale,
    columns,
    half_ulp,
    is_number,
    looks_like_sample_numbers,
    open_source,
    pick_column,
    sniff_layout,
    split_header_field,
    unit,
)
from xcheck.errors import TraceError

#: Invented capture rows: time in seconds, a channel in volts, 1 us apart.
TIMES = [k * 1e-6 for k in range(12)]
VOLTS = [0.25 * (-1) ** k * (12 - k) for k in range(12)]


def data_rows(sep: str = ",", comma: bool = False) -> list[str]:
    """The invented rows written with ``sep``; decimal commas if ``comma``."""
    rows = []
    for t, v in zip(TIMES, VOLTS):
        fields = [f"{t:.6e}", f"{v:.4f}"]
        if comma:
            fields = [f.replace(".", ",") for f in fields]
        rows.append(sep.join(fields))
    return rows


def layout_of(tmp_path: Path, text: str | bytes, name: str = "capture.csv") -> Layout:
    path = tmp_path / name
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_bytes(text.encode("utf-8"))
    return sniff_layout(open_source(path))


# ------------------------------------------------------------------ delimiters


@pytest.mark.parametrize("sep", [",", ";", "\t"])
def test_delimiter_agrees_with_the_standard_library_sniffer(tmp_path: Path, sep: str) -> None:
    header = sep.join(["Time (s)", "CH1 (V)"])
    text = header + "\n" + "\n".join(data_rows(sep)) + "\n"
    layout = layout_of(tmp_path, text)
    # Reference: csv.Sniffer restricted to the three delimiters the reader knows.
    assert layout.delimiter == csv.Sniffer().sniff(text, delimiters=",;\t").delimiter == sep
    assert not layout.decimal_comma
    assert layout.n_fields == 2
    # The header splits as csv.reader splits it.
    assert layout.header == next(csv.reader(io.StringIO(header), delimiter=sep))


@pytest.mark.parametrize("sep", [";", "\t"])
def test_decimal_comma_with_semicolon_or_tab(tmp_path: Path, sep: str) -> None:
    rows = data_rows(sep, comma=True)
    layout = layout_of(tmp_path, sep.join(["Time [s]", "CH1 [V]"]) + "\n" + "\n".join(rows) + "\n")
    assert layout.delimiter == sep and layout.decimal_comma
    # The sampled fields, read with the decimal comma as a point, are the written numbers
    # (float() of the same text with a point; the rows were written to 7 and 5 digits).
    first = layout.samples[:3]
    assert [[float(f.replace(",", ".")) for f in row] for row in first] == [
        [float(f"{t:.6e}"), float(f"{v:.4f}")] for t, v in zip(TIMES[:3], VOLTS[:3])
    ]


def test_comma_separator_never_takes_a_decimal_comma(tmp_path: Path) -> None:
    # "1,5,2,5" cannot be two decimal-comma numbers: with ',' as the separator the
    # module reads four fields, as csv.reader does.
    rows = [f"{k},5,{k + 1},5" for k in range(10)]
    layout = layout_of(tmp_path, "\n".join(rows) + "\n")
    assert layout.delimiter == "," and not layout.decimal_comma
    assert layout.n_fields == len(next(csv.reader(io.StringIO(rows[0])))) == 4


def test_one_column_file_has_no_delimiter(tmp_path: Path) -> None:
    text = "Sample interval: 2 us\n" + "\n".join(f"{v:.4f}" for v in VOLTS) + "\n"
    layout = layout_of(tmp_path, text)
    assert layout.delimiter is None and layout.n_fields == 1
    assert layout.metadata == {"Sample interval": "2 us"}
    assert layout.header is None


# ------------------------------------------------------------------ header and units


def test_header_fields_split_into_name_and_unit() -> None:
    # The forms the reader documents: brackets, parentheses, slash, underscore suffix.
    assert split_header_field("CH1 [mV]") == ("CH1", "mV")
    assert split_header_field("Time (s)") == ("Time", "s")
    assert split_header_field("t / us") == ("t", "us")
    assert split_header_field("t_ms") == ("t", "ms")
    assert split_header_field('"CH2"') == ("CH2", None)
    # An underscore before something that is not a unit is part of the name.
    assert split_header_field("probe_tip") == ("probe_tip", None)


def test_header_with_units_gives_named_columns_and_kinds(tmp_path: Path) -> None:
    text = "Time (ms),CH1 [mV],CH2\n" + "\n".join(
        f"{t * 1e3:.4f},{v * 1e3:.1f},{v:.3f}" for t, v in zip(TIMES, VOLTS)
    ) + "\n"
    found = columns(layout_of(tmp_path, text))
    assert [(c.name, c.unit, c.kind) for c in found] == [
        ("Time", "ms", "time"), ("CH1", "mV", None), ("CH2", None, None)
    ]
    assert [c.label for c in found] == ["'Time (ms)' (index 0)", "'CH1 [mV]' (index 1)", "'CH2' (index 2)"]


def test_units_row_under_the_names(tmp_path: Path) -> None:
    text = "Time,CH1\n(s),(mV)\n" + "\n".join(data_rows()) + "\n"
    layout = layout_of(tmp_path, text)
    assert layout.header == ["Time", "CH1"]
    assert layout.units == ["s", "mV"]
    assert layout.body_line == 3  # counted in the text written above


@pytest.mark.parametrize(
    "text, dimension, scale",
    [
        ("s", "s", 1.0), ("ms", "s", 1e-3), ("us", "s", 1e-6), ("µs", "s", 1e-6),
        ("ns", "s", 1e-9), ("ps", "s", 1e-12), ("V", "V", 1.0), ("mV", "V", 1e-3),
        ("uV", "V", 1e-6), ("kV", "V", 1e3), ("mA", "A", 1e-3), ("volts", "V", 1.0),
        ("seconds", "s", 1.0),
    ],
)
def test_unit_scale_is_the_si_prefix(text: str, dimension: str, scale: float) -> None:
    assert unit(text) == (dimension, scale)


def test_upper_case_m_and_unknown_units_are_refused() -> None:
    with pytest.raises(UnitProblem, match=r"unit 'MV' is ambiguous.*write 'mV' for milli"):
        unit("MV")
    with pytest.raises(UnitProblem, match=r"unknown unit 'div'; known units are s, ms"):
        unit("div")


def test_column_scale_from_the_unit_and_its_problems(tmp_path: Path) -> None:
    text = "Time (us),CH1 (mV),CH2 (ms),CH3 (MV)\n" + "\n".join(
        f"{k},{v * 1e3:.1f},{k},{v:.3f}" for k, v in enumerate(VOLTS)
    ) + "\n"
    time, ch1, ch2, ch3 = columns(layout_of(tmp_path, text))
    problems: list[str] = []
    assert column_scale(time, "s", problems) == 1e-6
    assert column_scale(ch1, "V", problems) == 1e-3
    assert problems == []
    assert column_scale(ch2, "V", problems) == 1e-3  # a time unit on a channel ...
    assert column_scale(ch3, "V", problems) == 1.0  # ... and the megavolt trap
    assert problems[0].startswith("column 'CH2 (ms)' (index 2) is in 'ms', which is not a voltage unit")
    assert problems[1].startswith("column 'CH3 (MV)' (index 3): unit 'MV' is ambiguous")


# ------------------------------------------------------------------ preamble and body


def test_preamble_is_kept_with_line_numbers(tmp_path: Path) -> None:
    preamble = [
        "Model,invented bench scope",
        "Sample interval,1e-06,s",
        "Vertical scale: 500 mV/div",
        "",
        "Probe = 10X",
    ]
    rows = data_rows()
    text = "\n".join(preamble) + "\nTime (s),CH1 (V)\n" + "\n".join(rows) + "\n"
    layout = layout_of(tmp_path, text)
    # Reference: csv.reader splits the comma lines (the value is the rest of the line);
    # the ':' and '=' lines split at their first such sign.
    model, interval = (next(csv.reader(io.StringIO(line))) for line in preamble[:2])
    assert layout.metadata == {
        model[0]: ",".join(model[1:]),
        interval[0]: ",".join(interval[1:]),
        "Vertical scale": "500 mV/div",
        "Probe": "10X",
    }
    # Line numbers as counted in the text (the blank line 4 counts, and holds nothing).
    assert layout.metadata_lines == {"Model": 1, "Sample interval": 2, "Vertical scale": 3, "Probe": 5}
    assert layout.body_line == len(preamble) + 2
    assert text.encode("utf-8")[layout.body_offset:].startswith(rows[0].encode("ascii"))
    assert layout.samples[0] == next(csv.reader(io.StringIO(rows[0])))


def test_repeated_preamble_keys_are_all_kept(tmp_path: Path) -> None:
    text = "Note,first\nNote,second\nTime (s),CH1 (V)\n" + "\n".join(data_rows()) + "\n"
    layout = layout_of(tmp_path, text)
    assert layout.metadata == {"Note": "first", "Note (line 2)": "second"}
    assert layout.metadata_lines == {"Note": 1, "Note (line 2)": 2}


def test_bom_crlf_quotes_and_trailing_separator(tmp_path: Path) -> None:
    header = '"Time (s)","CH1 (V)",'
    rows = [row + "," for row in data_rows()]
    raw = b"\xef\xbb\xbf" + ("\r\n".join([header, *rows]) + "\r\n").encode("utf-8")
    layout = layout_of(tmp_path, raw)
    # csv.reader gives the same fields, quotes removed and the empty third field kept.
    assert layout.header == next(csv.reader(io.StringIO(header)))
    assert layout.n_fields == 3
    assert layout.samples[0] == next(csv.reader(io.StringIO(rows[0])))
    # The offset is in bytes of the file, BOM included: it points at the first data row.
    assert layout.body_offset == 3 + len(header) + 2
    assert raw[layout.body_offset:].startswith(rows[0].encode("ascii"))


def test_no_rows_of_numbers_is_a_trace_error(tmp_path: Path) -> None:
    with pytest.raises(TraceError, match=r"cannot find rows of numbers separated by commas"):
        layout_of(tmp_path, "Model,invented\nOperator,none\nNotes,just text\n")


# ------------------------------------------------------------------ numbers and columns


@pytest.mark.parametrize(
    "text",
    ["1", "-1.5", "+.5", "1e3", "1.", ".5e-3", "7E+02", "nan", "Inf", "-infinity",
     "abc", "1e", "--1", "1.2.3", "0x10", "1 2"],
)
def test_is_number_agrees_with_float(text: str) -> None:
    # Reference: float() of the text (underscores, which float() also takes, are left
    # out: no export writes them).
    try:
        float(text)
        expected = True
    except ValueError:
        expected = False
    assert is_number(text, decimal_comma=False) is expected
    if "." not in text:  # the same text with a decimal comma
        assert is_number(text.replace(".", ","), decimal_comma=True) is expected


@pytest.mark.parametrize("text", ["1.25e-6", "0.000100", "12", "-3.5", "4.70E+03", "0,125"])
def test_half_ulp_is_half_the_last_written_digit(text: str) -> None:
    # Reference: decimal.Decimal's exponent of the same text is the last digit's place.
    exponent = decimal.Decimal(text.replace(",", ".")).as_tuple().exponent
    assert half_ulp(text) == pytest.approx(0.5 * 10.0**exponent, rel=1e-12)


def test_sample_numbers_are_whole_and_count_up_by_one(tmp_path: Path) -> None:
    counting = "\n".join(f"{k},{v:.4f}" for k, v in enumerate(VOLTS)) + "\n"
    skipping = "\n".join(f"{2 * k},{v:.4f}" for k, v in enumerate(VOLTS)) + "\n"
    for text, expected in ((counting, True), (skipping, False)):
        layout = layout_of(tmp_path, text)
        assert looks_like_sample_numbers(layout, columns(layout)[0]) is expected
    layout = layout_of(tmp_path, "\n".join(data_rows()) + "\n")  # times, not counts
    assert not looks_like_sample_numbers(layout, columns(layout)[0])


def test_pick_column_by_name_index_or_position(tmp_path: Path) -> None:
    text = "Time (s),CH1 (V),CH2 (V)\n" + "\n".join(
        f"{t:.6e},{v:.4f},{-v:.4f}" for t, v in zip(TIMES, VOLTS)
    ) + "\n"
    found = columns(layout_of(tmp_path, text))
    assert pick_column("f.csv", found, "ch2", "channel").index == 2  # case and unit optional
    assert pick_column("f.csv", found, "CH1 (V)", "channel").index == 1
    assert pick_column("f.csv", found, "column 3", "channel").index == 2  # 1-based
    assert pick_column("f.csv", found, 0, "time column").index == 0  # 0-based
    with pytest.raises(TraceError) as info:
        pick_column("f.csv", found, "CH9", "channel")
    assert info.value.problems == (
        "there is no column 'CH9' for the channel; the file has 'Time (s)' (index 0), "
        "'CH1 (V)' (index 1), 'CH2 (V)' (index 2); give one of these names (case and unit "
        "optional) or a 0-based index",
    )
    with pytest.raises(TraceError, match=r"must be a column name or a 0-based index, got True"):
        pick_column("f.csv", found, True, "channel")
