"""Reading oscilloscope and data-logger exports into a :class:`~xcheck.capture.types.Trace`.

Waveform files (:func:`read_trace`) are delimited text as oscilloscopes and data loggers
export it. The rules are generic, not per instrument:

- Fields are separated by commas, semicolons or tabs. With a semicolon or tab separator
  the numbers may use a decimal comma (``1,25E-03``).
- Lines before the first data row, other than the header, are metadata: a key, then
  the value (``Sample interval,1e-06,s`` or ``Sample interval: 1 us``), kept as read in
  :attr:`Trace.metadata`. When they state a sample interval or rate, a start time, a
  record length, a vertical scale (volts per division) or a probe attenuation, those
  are used and checked against the data (:mod:`xcheck.capture.csvmeta`): a time column must
  agree with the interval and start within the rounding of the written numbers, the
  row count must equal the record length, and the channel must fit within 15 divisions
  of the vertical scale (a wrong unit shows up as a factor of 1000). A probe
  attenuation multiplies the channel: the file's numbers are taken as volts at the
  scope input.
- The header row names the columns, with or without a unit: ``Time (s)``, ``CH1 [mV]``,
  ``t_ms``, ``t / us``; a row of units right under the names also works. The unit
  scales the column. Without a header, column 0 is time and the others are channels;
  a single column needs a sample interval in the metadata.
- Time is a column of per-sample values, or a column of sample numbers (named
  ``Index``, ``Sample``, ``Point``, ... or, without a header, whole numbers counting up
  by one while the metadata gives an interval) with the interval and optional start
  in the metadata, or absent (one column and a sample interval).
- gzip-compressed files are read directly (recognised by their content).

The layout is worked out from the first 64 KiB with plain Python
(:mod:`xcheck.capture.csvlayout`); the body is read by pyarrow's CSV reader into float64
columns, and every check is vectorised numpy. Line numbers for error messages are
found only when something is wrong.

Errors are :class:`~xcheck.errors.TraceError` listing every problem found at once, each
naming the line or column, the bad value, and how to fix it.

This module owns :func:`read_trace` and the waveform body reader. The data types live
in :mod:`xcheck.capture.types`, peak tables are read by :mod:`xcheck.capture.peak_table`,
and clipping and quantisation are found by :mod:`xcheck.capture.clipping`.
"""

from __future__ import annotations

import math
import zlib
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.compute as pac
import pyarrow.csv as pacsv

from xcheck.capture.clipping import detect_clipping, estimate_resolution
from xcheck.capture.types import MAX_EXAMPLES, MIN_SAMPLES, Trace
from xcheck.capture.csvlayout import (
    CHANNEL_LIMIT,
    HEAD_BYTES,
    NUM_COMMA,
    NUM_DOT,
    Column,
    Layout,
    Source,
    column_scale,
    columns,
    looks_like_sample_numbers,
    open_source,
    pick_column,
    sniff_layout,
)
from xcheck.capture.csvmeta import Meta, Stated, read_metadata, record_problems, time_problems
from xcheck.capture.ranges import span_problem, time_range_problem
from xcheck.capture import csvlayout
from xcheck.errors import TraceError
from xcheck.input_file import BoundedStream, InputFileProblem

__all__ = ["read_trace"]

# --------------------------------------------------------------------------- read_trace


def read_trace(
    path: str | Path,
    *,
    column: str | int | None = None,
    time_column: str | int | None = None,
) -> Trace:
    """Read one channel of a delimited-text waveform (layouts: see the module notes).

    Parameters
    ----------
    path
        CSV / text file, optionally gzip-compressed.
    column
        The channel: a header name (case-insensitive, unit optional: ``"ch1"`` matches
        ``CH1 [mV]``), ``"column k"`` (1-based), or a 0-based column index. Default: the
        first column that is neither time nor sample numbers.
    time_column
        The time (or sample-number) column, by name or 0-based index. Default: the first
        column whose unit is a time unit or whose name says time, else one named as
        sample numbers, else column 0; none for a one-column file.

    Returns
    -------
    Trace
        Time in seconds and the channel in volts, with clipping marked.

    Raises
    ------
    TraceError
        Listing every problem found: missing, empty or binary file, no data rows,
        unknown column or unit, unreadable numbers, NaN or infinite values, time not
        strictly increasing, too few rows, metadata that disagrees with the data.
    """
    src = open_source(path)
    try:
        layout = sniff_layout(src)
    except TraceError:
        if src.complete:
            raise
        src = open_source(path, 16 * HEAD_BYTES)  # a long preamble: look further
        layout = sniff_layout(src)
    plan = _plan(src, layout, column, time_column)
    data = _read_body(src, layout, plan.columns, plan.wanted)
    volts = data[plan.channel.index]
    # NaN and inf show in the extremes, which the later checks need anyway.
    top, bottom = float(volts.max()), float(volts.min())
    problems = []
    if not (math.isfinite(top) and math.isfinite(bottom)):
        problems += _nonfinite_problems(src, layout, volts, plan.channel)
    raw_time = data[plan.time.index] if plan.time is not None else None
    if raw_time is not None:
        problems += _nonfinite_problems(src, layout, raw_time, plan.time)
    if problems:
        raise TraceError(src.name, problems)
    _check_magnitude(src, layout, plan, volts, max(abs(top), abs(bottom)))
    if volts.size < MIN_SAMPLES:
        raise TraceError(
            src.name,
            [
                f"only {volts.size} data rows; a waveform needs at least {MIN_SAMPLES} "
                "(export the whole capture)"
            ],
        )
    time = _time_axis(src, layout, plan, raw_time, volts.size)
    _check_time_range(src, layout, plan, time)
    scale = plan.channel_scale  # positive, like the probe factor below
    if scale != 1.0:
        volts = volts * scale
    span = (top - bottom) * scale
    problems = record_problems(plan.meta, plan.channel, volts.size, span)
    if span == 0:
        problems.append(
            f"column {plan.channel.label} holds {volts[0]:.6g} in every row; choose the "
            "channel that carries the signal"
        )
    elif (spread := span_problem(volts)) is not None:
        problems.append(f"column {plan.channel.label}: {spread}")
    if problems:
        raise TraceError(src.name, problems)
    if plan.meta.probe is not None and plan.meta.probe.value != 1.0:
        volts = volts * plan.meta.probe.value
        scale *= plan.meta.probe.value
    resolution = estimate_resolution(volts)
    return Trace(
        time=time,
        voltage=volts,
        source=src.name,
        column=plan.channel.text,
        metadata=layout.metadata,
        clipped=detect_clipping(volts, resolution, extremes=(top * scale, bottom * scale)),
        resolution=resolution,
        channels=tuple(c.text for c in plan.channels),
        probe_factor=(plan.meta.probe.value if plan.meta.probe is not None else 1.0),
    )


def _check_magnitude(src: Source, layout: Layout, plan: _Plan, raw: np.ndarray,
                     raw_peak: float) -> None:
    """Refuse a channel beyond :data:`CHANNEL_LIMIT` once scaled to SI units.

    Values near 1e300 are finite but overflow the fit's sums of squares; no bench
    capture comes near the limit, so a value beyond it is a wrong unit, probe factor or
    column, or a damaged file.
    """
    probe = plan.meta.probe.value if plan.meta.probe is not None else 1.0
    factor = abs(plan.channel_scale * probe)
    if raw_peak * factor <= CHANNEL_LIMIT:
        return
    row = int(np.flatnonzero(np.abs(raw) * factor > CHANNEL_LIMIT)[0])
    line = int(_row_lines(src, layout, np.array([row]))[0])
    raise TraceError(src.name, [
        f"line {line}: column {plan.channel.label} holds {raw[row]:.6g}, which is "
        f"{raw[row] * factor:.3g} in SI units (V or A) after the unit and probe factor, "
        f"beyond ±{CHANNEL_LIMIT:.0e}, the most xcheck accepts; check the column, its unit "
        "and the probe factor, or export the capture again"
    ])


def _check_time_range(src: Source, layout: Layout, plan: _Plan, time: np.ndarray) -> None:
    """Refuse times beyond :data:`~xcheck.capture.ranges.TIME_LIMIT` or closer than
    :data:`~xcheck.capture.ranges.MIN_TIME_STEP` (see :mod:`xcheck.capture.ranges`)."""
    found = time_range_problem(time)
    if found is None:
        return
    row, reason = found
    if plan.time is not None:
        where = f"line {int(_row_lines(src, layout, np.array([row]))[0])}"
    else:
        where = f"data row {row + 1} (times from the metadata's sample interval)"
    raise TraceError(src.name, [f"{where}: {reason}"])


@dataclass
class _Plan:
    """Which columns to read and what they mean (decided before reading the body)."""

    columns: list[Column]
    channel: Column
    channels: list[Column]
    time: Column | None
    time_kind: str  # "time", "index" (sample numbers) or "none"
    time_scale: float
    channel_scale: float
    meta: Meta
    interval: Stated | None

    @property
    def wanted(self) -> list[Column]:
        return [self.channel] + ([self.time] if self.time is not None else [])


def _plan(
    src: Source, layout: Layout, column: str | int | None, time_column: str | int | None
) -> _Plan:
    found = columns(layout)
    time_col: Column | None
    if time_column is not None:
        time_col = pick_column(src.name, found, time_column, "time column")
    elif len(found) == 1:
        time_col = None
    else:
        time_col = next(
            (c for c in found if c.kind == "time"),
            next((c for c in found if c.kind == "index"), found[0]),
        )
    with_data = [c for c in found if c is not time_col and c.has_data(layout)]
    channels = [c for c in with_data if c.kind is None] or with_data
    if column is not None:
        channel = pick_column(src.name, found, column, "channel")
        if channel is time_col:
            raise TraceError(
                src.name,
                [
                    f"column {channel.label} is the time column; choose a channel from "
                    + ", ".join(c.label for c in channels)
                ],
            )
    elif channels:
        channel = channels[0]
    else:
        raise TraceError(src.name, ["the file has a time column but no channel column"])

    problems: list[str] = []
    meta = read_metadata(layout, channel, problems)
    interval = meta.sample_interval(problems)
    if time_col is None:
        time_kind = "none"
    else:
        time_kind = time_col.kind or "time"
        if (
            time_kind == "time"
            and layout.header is None
            and interval is not None
            and looks_like_sample_numbers(layout, time_col)
        ):
            time_kind = "index"
    if time_kind != "time" and interval is None:
        what = (
            f"column {time_col.label} holds sample numbers"
            if time_col is not None
            else "the file has one column and no time column"
        )
        problems.append(
            f"{what}, but no sample interval is given; add a metadata line such as "
            "'Sample interval,1e-06' (seconds) before the data, or a time column"
        )
    channel_scale = column_scale(channel, "V", problems)
    time_scale = column_scale(time_col, "s", problems) if time_kind == "time" else 1.0
    if problems:
        raise TraceError(src.name, problems)
    return _Plan(
        found, channel, channels, time_col, time_kind, time_scale, channel_scale, meta, interval
    )


def _time_axis(
    src: Source, layout: Layout, plan: _Plan, raw: np.ndarray | None, rows: int
) -> np.ndarray:
    """Seconds for every row, checked (strictly increasing, agreeing with metadata)."""
    meta, interval = plan.meta, plan.interval
    if plan.time_kind == "time":
        assert raw is not None and plan.time is not None
        time = raw * plan.time_scale if plan.time_scale != 1.0 else raw
        problems = _increasing_problems(src, layout, time, f"the time column {plan.time.label}")
        if not problems:
            problems = time_problems(layout, plan.time, plan.time_scale, time, interval, meta.start)
    elif plan.time_kind == "index":
        assert raw is not None and plan.time is not None and interval is not None
        problems = []
        bad = np.flatnonzero(raw != np.round(raw))
        if bad.size:
            line = _row_lines(src, layout, bad[:1])[0]
            problems.append(
                f"column {plan.time.label} should hold whole sample numbers, but line {line} "
                f"reads {raw[bad[0]]:.9g}; name the column 'Time' if it holds times"
            )
        problems += _increasing_problems(
            src, layout, raw, f"the sample numbers in column {plan.time.label}", ""
        )
        # With a stated start, the first row is at the start; else sample 0 is at t = 0.
        if meta.start is not None:
            time = meta.start.value + (raw - raw[0]) * interval.value
        else:
            time = raw * interval.value
    else:
        assert interval is not None
        problems = []
        start = meta.start.value if meta.start is not None else 0.0
        time = start + np.arange(rows) * interval.value
    if problems:
        raise TraceError(src.name, problems)
    return time


# --------------------------------------------------------------------------- body

def _stream(src: Source, offset: int) -> pa.NativeFile | BoundedStream:
    """The file from byte ``offset`` of its (decompressed) content.

    A gzip file's decompressed content is capped at :data:`csvlayout.TRACE_MAX_BYTES`
    (:class:`~xcheck.input_file.BoundedStream`); a plain file's size was checked when
    :func:`~xcheck.capture.csvlayout.open_source` opened it.
    """
    stream = pa.input_stream(str(src.path), compression="gzip" if src.is_gzip else None)
    stream.read(offset)
    if src.is_gzip:
        return BoundedStream(stream, csvlayout.TRACE_MAX_BYTES - offset, "decompressed text")
    return stream


def _number_regex(decimal_comma: bool) -> str:
    return "^(" + (NUM_COMMA if decimal_comma else NUM_DOT) + ")$"


def _read_body(
    src: Source, layout: Layout, columns: list[Column], wanted: list[Column]
) -> dict[int, np.ndarray]:
    """The wanted columns as float64 arrays (NaN where a field was empty or 'nan')."""
    names = [f"c{i}" for i in range(layout.n_fields)]
    keep = sorted({c.index for c in wanted})
    delimiter = layout.delimiter or ("," if not layout.decimal_comma else ";")
    try:
        table = pacsv.read_csv(
            _stream(src, layout.body_offset),
            read_options=pacsv.ReadOptions(column_names=names),
            parse_options=pacsv.ParseOptions(delimiter=delimiter),
            convert_options=pacsv.ConvertOptions(
                column_types={names[i]: pa.float64() for i in keep},
                # Selecting columns costs time when every column is wanted anyway.
                include_columns=[names[i] for i in keep] if len(keep) < len(names) else None,
                decimal_point="," if layout.decimal_comma else ".",
            ),
        )
    except InputFileProblem as exc:
        raise TraceError(src.name, [f"the file {exc}"]) from None
    except (pa.ArrowInvalid, OSError, EOFError, zlib.error) as exc:
        problems = _diagnose_body(src, layout, columns, wanted)
        raise TraceError(
            src.name, problems or [f"the data rows cannot be read ({exc}); check the file"]
        ) from None
    # Joining pyarrow's chunks into one numpy array is a plain copy; the columns are
    # copied side by side (numpy releases the GIL while copying).
    with ThreadPoolExecutor(max_workers=len(keep)) as pool:
        arrays = pool.map(lambda i: table.column(names[i]).to_numpy(), keep)
        return dict(zip(keep, arrays))


def _body_lines(src: Source, layout: Layout) -> pa.Array:
    """Every physical line of the body as a string (blank lines included)."""
    table = pacsv.read_csv(
        _stream(src, layout.body_offset),
        read_options=pacsv.ReadOptions(column_names=["line"]),
        parse_options=pacsv.ParseOptions(
            delimiter="\x01", quote_char=False, ignore_empty_lines=False
        ),
        convert_options=pacsv.ConvertOptions(
            column_types={"line": pa.string()}, strings_can_be_null=False
        ),
    )
    return pac.utf8_rtrim(table.column("line").combine_chunks(), characters="\r")


def _diagnose_body(
    src: Source, layout: Layout, columns: list[Column], wanted: list[Column]
) -> list[str]:
    """Line-numbered reasons why the body could not be read (vectorised, error path only)."""
    try:
        lines = _body_lines(src, layout)
    except InputFileProblem as exc:
        return [f"the file {exc}"]
    except (pa.ArrowInvalid, OSError, EOFError, zlib.error) as exc:
        return [f"the data rows cannot be read ({exc}); export the capture again"]
    first = layout.body_line
    filled = pac.greater(pac.utf8_length(pac.utf8_trim_whitespace(lines)), 0)
    parts = pac.split_pattern(lines, pattern=layout.delimiter) if layout.delimiter else None
    problems = []
    if parts is not None:
        counts = pac.list_value_length(parts)
        bad = np.flatnonzero(
            pac.and_(filled, pac.not_equal(counts, layout.n_fields)).to_numpy(zero_copy_only=False)
        )
        if bad.size:
            shown = ", ".join(
                f"line {first + k} has {counts[int(k)].as_py()}" for k in bad[:MAX_EXAMPLES]
            )
            more = f" and {bad.size - MAX_EXAMPLES} more lines" if bad.size > MAX_EXAMPLES else ""
            problems.append(
                f"rows must have {layout.n_fields} fields like the first data row (line {first}); "
                f"{shown}{more}; delete or repair those lines"
            )
    regex = _number_regex(layout.decimal_comma)
    for column in wanted:
        if parts is not None:
            counts = pac.list_value_length(parts)
            mask = pac.and_(filled, pac.greater(counts, column.index))
            positions = np.flatnonzero(mask.to_numpy(zero_copy_only=False))
            values = pac.list_element(pac.filter(parts, mask), column.index)
        else:
            positions = np.flatnonzero(filled.to_numpy(zero_copy_only=False))
            values = pac.filter(lines, filled)
        values = pac.utf8_trim(values, characters=' "\t')
        missing = pac.or_(
            pac.equal(pac.utf8_length(values), 0),
            pac.match_substring_regex(values, r"(?i)^[+-]?nan$"),
        ).to_numpy(zero_copy_only=False)
        infinite = pac.match_substring_regex(
            values, r"(?i)^[+-]?(inf|infinity)$"
        ).to_numpy(zero_copy_only=False)
        number = pac.match_substring_regex(values, regex).to_numpy(zero_copy_only=False)
        bad = np.flatnonzero(~(number | missing | infinite))
        if bad.size:
            shown = ", ".join(
                f"line {first + positions[k]} reads {values[int(k)].as_py()!r}"
                for k in bad[:MAX_EXAMPLES]
            )
            more = f" and {bad.size - MAX_EXAMPLES} more" if bad.size > MAX_EXAMPLES else ""
            point = "a decimal comma" if layout.decimal_comma else "a decimal point"
            problems.append(
                f"column {column.label}: cannot read a number: {shown}{more}; write plain "
                f"numbers with {point} (such as 1.5e-3) or delete those lines"
            )
        nonfinite = np.flatnonzero(missing | infinite)
        if nonfinite.size:
            problems.append(
                _nonfinite_message(
                    column,
                    first + positions[nonfinite[:MAX_EXAMPLES]],
                    infinite[nonfinite[:MAX_EXAMPLES]],
                    nonfinite.size,
                )
            )
    return problems


def _row_lines(src: Source, layout: Layout, rows: np.ndarray) -> np.ndarray:
    """Physical line numbers of data rows (pyarrow skips blank lines; this maps back)."""
    lines = _body_lines(src, layout)
    filled = pac.greater(pac.utf8_length(pac.utf8_trim_whitespace(lines)), 0)
    positions = np.flatnonzero(filled.to_numpy(zero_copy_only=False))
    return layout.body_line + positions[rows]


# --------------------------------------------------------------------------- checks


def _increasing_problems(
    src: Source, layout: Layout, time: np.ndarray, label: str, unit: str = " s"
) -> list[str]:
    increasing = np.less(time[:-1], time[1:])
    if increasing.all():
        return []
    bad = np.flatnonzero(~increasing)
    shown = bad[:MAX_EXAMPLES]
    lines = _row_lines(src, layout, np.concatenate((shown, shown + 1)))
    before, after = lines[: shown.size], lines[shown.size :]
    items = []
    for k, (a, b) in enumerate(zip(before, after)):
        i = shown[k]
        if time[i + 1] == time[i]:
            items.append(f"line {b} repeats the value of line {a} ({time[i]:.9g}{unit})")
        else:
            items.append(
                f"line {b} goes back ({time[i + 1]:.9g}{unit} after {time[i]:.9g}{unit} on line {a})"
            )
    more = f" and {bad.size - MAX_EXAMPLES} more" if bad.size > MAX_EXAMPLES else ""
    return [
        f"{label} must increase strictly from row to row: " + "; ".join(items) + more
        + "; remove duplicated rows, or export one capture per file"
    ]


def _nonfinite_problems(
    src: Source, layout: Layout, values: np.ndarray, column: Column
) -> list[str]:
    with np.errstate(over="ignore"):  # a sum of huge finite values may overflow
        if math.isfinite(float(np.add.reduce(values))):
            return []  # a finite sum: every value is finite (fast path)
    bad = np.flatnonzero(~np.isfinite(values))
    if not bad.size:
        return []
    lines = _row_lines(src, layout, bad[:MAX_EXAMPLES])
    return [_nonfinite_message(column, lines, np.isinf(values[bad[:MAX_EXAMPLES]]), bad.size)]


def _nonfinite_message(
    column: Column, lines: np.ndarray, infinite: np.ndarray, total: int
) -> str:
    shown = ", ".join(
        f"line {line} ({'infinite' if inf else 'empty or NaN'})"
        for line, inf in zip(lines, infinite)
    )
    more = f" and {total - len(lines)} more" if total > len(lines) else ""
    return (
        f"column {column.label} needs a finite number in every row: {shown}{more}; "
        "delete those rows or export the capture again"
    )
