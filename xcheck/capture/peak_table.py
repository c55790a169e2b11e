"""Reading a cursor peak table (:func:`read_peaks`).

Owns the parsing of the table (header, units, one extremum per row), the reading of
each cell (:func:`xcheck.values.parse_value` for SPICE suffixes), the step of the last
written digit of each cell, and the checks on the rows. The result type
(:class:`~xcheck.capture.types.PeakTable`) and the limits
(:data:`~xcheck.capture.types.MIN_PEAKS`, :data:`~xcheck.capture.types.MAX_PEAK_ROWS`)
live in :mod:`xcheck.capture.types`.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np

from xcheck.capture.csvlayout import (
    CHANNEL_LIMIT,
    HEAD_BYTES,
    NUM_DOT_RE,
    UnitProblem,
    check_text,
    head_lines,
    is_number,
    open_source,
    split,
    split_header_field,
    unit,
)
from xcheck.capture.ranges import span_problem, time_range_problem
from xcheck.errors import TraceError, ValueParseError
from xcheck.capture.types import MAX_EXAMPLES, MAX_PEAK_ROWS, MIN_PEAKS, PeakTable
from xcheck.quoting import quoted
from xcheck.values import parse_value


def read_peaks(path: str | Path) -> PeakTable:
    """Read a table of extrema read off scope cursors.

    The file is delimited text (comma, semicolon or tab; decimal comma with a semicolon
    or tab), optionally after ``#`` comment lines. A header row is required; the first
    column is time, the second voltage, an optional third the uncertainty of each
    voltage reading. A unit in the header (``time [ms]``, ``value [mV]``) scales the
    column; without one, values may carry SPICE suffixes and units (``2.5m``, ``12mV``)
    and are otherwise seconds and volts. An uncertainty column without a unit takes the
    voltage column's unit.

    Parameters
    ----------
    path
        The table (optionally gzip-compressed).

    Returns
    -------
    PeakTable
        Time (s), voltage (V) and uncertainty (V, or None), sorted as written.

    Raises
    ------
    TraceError
        Listing every problem: no header, fewer than :data:`MIN_PEAKS` rows, unreadable
        values (line and column named), times not strictly increasing, non-positive
        uncertainties.
    """
    src = open_source(path, HEAD_BYTES)
    check_text(src)
    if not src.complete:
        raise TraceError(
            src.name,
            [
                "this is too long for a peak table (read off cursors, a few dozen rows); "
                "read a waveform file with read_trace instead"
            ],
        )
    lines = [
        line for line in head_lines(src)
        if line.text.strip() and not line.text.lstrip().startswith("#")
    ]
    if not lines:
        raise TraceError(src.name, ["the file has no rows; write a header and one row per extremum"])
    header_line, rows = lines[0], lines[1:]
    delimiter = next((d for d in (";", "\t", ",") if d in header_line.text), None)
    header = split(header_line.text, delimiter)
    decimal_comma = delimiter in (";", "\t")
    if delimiter is None or len(header) not in (2, 3) or any(is_number(h, False) for h in header):
        raise TraceError(
            src.name,
            [
                f"line {header_line.number} must be a header naming two or three columns "
                "(time, voltage, optional uncertainty) separated by commas, semicolons or "
                f"tabs, such as 'time [ms],value [mV]'; it reads {header_line.text[:80]!r}"
            ],
        )
    if len(rows) > MAX_PEAK_ROWS:
        raise TraceError(src.name, [f"{len(rows)} rows is too long for a peak table; use read_trace"])
    problems: list[str] = []
    roles = ("time", "voltage", "uncertainty")
    expected_units = ("s", "V", "V")
    scales: list[float | None] = []
    for i, text in enumerate(header):
        _name, unit_text = split_header_field(text)
        if unit_text is None and i == 2:
            scales.append(scales[1] if scales[1] is not None else None)
            continue
        if unit_text is None:
            scales.append(None)
            continue
        try:
            dimension, scale = unit(unit_text)
        except UnitProblem as exc:
            problems.append(f"line {header_line.number}, the {roles[i]} column {text!r}: {exc}")
            scales.append(1.0)
            continue
        if dimension != expected_units[i]:
            problems.append(
                f"line {header_line.number}: the {roles[i]} column {text!r} must be in "
                f"{'a time' if expected_units[i] == 's' else 'a voltage'} unit"
            )
        scales.append(scale)
    values = np.full((len(rows), len(header)), np.nan)
    written = np.full((len(rows), 2), np.inf)  # last-digit step of time and voltage
    for r, line in enumerate(rows):
        fields = split(line.text, delimiter)
        if len(fields) != len(header):
            problems.append(
                f"line {line.number} has {len(fields)} fields, the header {len(header)}; "
                "write one extremum per row"
            )
            continue
        for i, text in enumerate(fields):
            value = _peak_value(text, scales[i], expected_units[i], decimal_comma)
            if isinstance(value, str):
                problems.append(f"line {line.number}, {roles[i]} column {header[i]!r}: {value}")
            else:
                values[r, i] = value
                if i < 2:
                    written[r, i] = _written_step(text, value, scales[i], decimal_comma)
    if problems:
        raise TraceError(src.name, problems)
    if len(rows) < MIN_PEAKS:
        raise TraceError(
            src.name,
            [
                f"{len(rows)} extrema; at least {MIN_PEAKS} are needed to measure a decay "
                "(read more peaks off the screen)"
            ],
        )
    time, volts = values[:, 0], values[:, 1]
    steps = np.diff(time)
    for k in np.flatnonzero(~(steps > 0))[:MAX_EXAMPLES]:
        problems.append(
            f"line {rows[k + 1].number}: time {time[k + 1]:.9g} s does not come after "
            f"{time[k]:.9g} s on line {rows[k].number}; list the extrema in time order, "
            "each once"
        )
    uncertainty = values[:, 2] if len(header) == 3 else None
    if uncertainty is not None:
        for k in np.flatnonzero(~(uncertainty > 0))[:MAX_EXAMPLES]:
            problems.append(
                f"line {rows[k].number}: the uncertainty must be positive, got "
                f"{uncertainty[k]:.6g} V"
            )
    for k in np.flatnonzero(np.abs(values[:, 1:]).max(axis=1) > CHANNEL_LIMIT)[:MAX_EXAMPLES]:
        problems.append(
            f"line {rows[k].number}: {np.abs(values[k, 1:]).max():.6g} V is beyond "
            f"±{CHANNEL_LIMIT:.0e} V, the most xcheck accepts; check the column's unit"
        )
    if not problems:
        found = time_range_problem(time)
        if found is not None:
            problems.append(f"line {rows[found[0]].number}: {found[1]}")
        spread = span_problem(volts)
        if spread is not None:
            problems.append(f"the voltage column {quoted(header[1])}: {spread}")
    if problems:
        raise TraceError(src.name, problems)
    finest = [float(np.min(written[:, i])) for i in (0, 1)]
    return PeakTable(
        time=time,
        voltage=volts,
        uncertainty=uncertainty,
        source=src.name,
        time_resolution=finest[0] if math.isfinite(finest[0]) else None,
        voltage_resolution=finest[1] if math.isfinite(finest[1]) else None,
    )


def _written_step(text: str, value: float, scale: float | None, decimal_comma: bool) -> float:
    """SI step of the last digit of one cell as written ("0.50" ms: 1e-5 s), or inf when
    it cannot be told (a zero written with a unit suffix)."""
    number = text.replace(",", ".") if decimal_comma else text
    match = _MANTISSA_RE.match(number)
    if match is None or not (match.group(1) or match.group(2)):
        return math.inf
    places = len(match.group(2) or "")
    exponent = int(match.group(3) or 0)
    if scale is None:  # a suffix or none: the cell's own multiplier
        mantissa = float(match.group(0))
        if mantissa == 0:
            return math.inf
        scale = value / mantissa
    return abs(scale) * 10.0 ** (exponent - places)


#: Sign, integer digits, decimals and exponent at the start of a cell.
_MANTISSA_RE = re.compile(r"\s*[+-]?(\d*)(?:\.(\d*))?(?:[eE]([+-]?\d+))?")


def _peak_value(text: str, scale: float | None, si_unit: str, decimal_comma: bool) -> float | str:
    """The SI value of one cell, or a message saying why it cannot be read."""
    number = text.replace(",", ".") if decimal_comma else text
    if scale is not None:
        if not NUM_DOT_RE.match(number):
            return (
                f"{text!r} is not a plain number; the header gives the unit, so write the "
                "number alone (or drop the unit from the header and write e.g. '2.5m')"
            )
        value = float(number) * scale
    else:
        try:
            value = parse_value(number, unit=si_unit)
        except ValueParseError as exc:
            return f"{exc}"
    if not math.isfinite(value):
        return f"{text!r} is not a finite number"
    return value
