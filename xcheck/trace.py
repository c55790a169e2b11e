"""Measured traces and cursor peak tables: the data types and their readers.

Waveform files (:func:`read_trace`) are delimited text as oscilloscopes and data loggers
export it. The rules are generic, not per instrument:

- Fields are separated by commas, semicolons or tabs. With a semicolon or tab separator
  the numbers may use a decimal comma (``1,25E-03``).
- Any lines before the first data row that are not the header are metadata: a key, then
  the value (``Sample interval,1e-06,s`` or ``Sample interval: 1 us``). They are kept as
  read in :attr:`Trace.metadata`. When they state a sample interval or rate, a start
  time, a record length, a vertical scale (volts per division) or a probe attenuation,
  those are used and checked against the data: a time column must agree with the
  interval and start within the rounding of the written numbers, the row count must
  equal the record length, and the channel must fit on the screen the vertical scale
  describes (15 divisions at most, a wrong unit shows up as a factor of 1000). A probe
  attenuation multiplies the channel: the file's numbers are taken as volts at the
  scope input.
- The header row names the columns, with or without a unit: ``Time (s)``, ``CH1 [mV]``,
  ``t_ms``, ``t / us``; a row of units right under the names also works. The unit
  scales the column. Without a header, column 0 is time and the others are channels;
  a single column needs a sample interval in the metadata.
- Time is either a column of per-sample values or a column of sample numbers (named
  ``Index``, ``Sample``, ``Point``, ...) with the interval (and optionally the start)
  in the metadata, or absent altogether (one column and a sample interval).
- ``.gz`` compressed files are read directly (recognised by their content).

The layout is worked out from the first 64 KiB with plain Python; the body is read by
pyarrow's CSV reader into float64 columns, and all checks are vectorised numpy.

Errors are :class:`~xcheck.errors.TraceError` listing every problem found at once, each
naming the line or column, the bad value, and how to fix it.
"""

from __future__ import annotations

import gzip
import math
import re
import zlib
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Mapping

import numpy as np
import pyarrow as pa
import pyarrow.compute as pac
import pyarrow.csv as pacsv

from xcheck.errors import TraceError, ValueParseError
from xcheck.values import parse_value

#: How much of the (decompressed) file is read to work out its layout.
HEAD_BYTES = 64 * 1024
#: Fewest rows a waveform may have.
MIN_SAMPLES = 10
#: A run of at least this many samples at the record's maximum or minimum is clipping.
CLIP_RUN = 3
#: Fewest extrema a peak table may have (two decrements need three extrema).
MIN_PEAKS = 3
#: Peak tables longer than this are waveforms, not cursor readings.
MAX_PEAK_ROWS = 10_000
#: The channel may span at most this many divisions of the stated vertical scale.
MAX_DIVISIONS = 15.0
#: At most this many examples of one kind of problem are listed in an error.
MAX_EXAMPLES = 5

_BOM = b"\xef\xbb\xbf"
_NUM_DOT = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_NUM_COMMA = r"[+-]?(?:\d+,?\d*|,\d+)(?:[eE][+-]?\d+)?"
_NUM_DOT_RE = re.compile(_NUM_DOT + r"\Z")
_NUM_COMMA_RE = re.compile(_NUM_COMMA + r"\Z")
_NONFINITE_RE = re.compile(r"[+-]?(?:nan|inf|infinity)\Z", re.IGNORECASE)


# --------------------------------------------------------------------------- data types


@dataclass(frozen=True)
class Trace:
    """One measured channel against time, SI units.

    Attributes
    ----------
    time
        Seconds, strictly increasing (read-only array).
    voltage
        Volts (amperes for a current channel), probe attenuation applied when the
        metadata states one (read-only array).
    source
        The file path as given.
    column
        The channel's name as in the header (``"column 2"`` for the second column of a
        file without a header).
    metadata
        Preamble key -> value, as read.
    clipped
        True where the sample sits in a run of at least :data:`CLIP_RUN` samples at the
        record's maximum or minimum (the converter's rails); exclude these from fits.
    resolution
        The quantisation step (V) when the values visibly sit on a grid, else None.
    channels
        Every channel name available in the file (the time column excluded).
    """

    time: np.ndarray
    voltage: np.ndarray
    source: str
    column: str
    metadata: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    clipped: np.ndarray | None = None
    resolution: float | None = None
    channels: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        time = _read_only(self.time, float)
        voltage = _read_only(self.voltage, float)
        if time.shape != voltage.shape or time.ndim != 1:
            raise ValueError("time and voltage must be 1-D arrays of the same length")
        clipped = (
            np.zeros(time.shape, dtype=bool)
            if self.clipped is None
            else _read_only(self.clipped, bool)
        )
        if clipped.shape != time.shape:
            raise ValueError("clipped must have the same length as time")
        clipped.flags.writeable = False
        object.__setattr__(self, "time", time)
        object.__setattr__(self, "voltage", voltage)
        object.__setattr__(self, "clipped", clipped)
        object.__setattr__(self, "metadata", MappingProxyType(dict(self.metadata)))
        object.__setattr__(self, "channels", tuple(self.channels))

    @property
    def sample_interval(self) -> float:
        """Median spacing of the time axis (s)."""
        return float(np.median(np.diff(self.time))) if self.time.size > 1 else math.nan

    def __len__(self) -> int:
        return int(self.time.size)


@dataclass(frozen=True)
class PeakTable:
    """Extrema read off scope cursors: time (s), voltage (V), optional uncertainty (V).

    The time origin is arbitrary (the event, the trigger, or wherever the cursor was).
    """

    time: np.ndarray
    voltage: np.ndarray
    uncertainty: np.ndarray | None
    source: str

    def __post_init__(self) -> None:
        for name in ("time", "voltage", "uncertainty"):
            value = getattr(self, name)
            if value is not None:
                object.__setattr__(self, name, _read_only(value, float))

    def __len__(self) -> int:
        return int(self.time.size)


def _read_only(values: object, dtype: type) -> np.ndarray:
    """A read-only view of ``values`` as an array (no copy when already one), so a
    frozen record's arrays cannot be changed through it by accident."""
    view = np.asarray(values, dtype=dtype).view()
    view.flags.writeable = False
    return view


# --------------------------------------------------------------------------- units

_PREFIXES = {"": 1.0, "k": 1e3, "m": 1e-3, "u": 1e-6, "µ": 1e-6, "μ": 1e-6, "n": 1e-9, "p": 1e-12}
_BASE_UNITS = {
    "seconds": "s", "second": "s", "secs": "s", "sec": "s", "s": "s",
    "volts": "V", "volt": "V", "v": "V",
    "amps": "A", "amp": "A", "a": "A",
}
_KNOWN_UNITS_HELP = "s, ms, us, ns, ps for time; V, mV, uV, kV (or A, mA) for a channel"


class _UnitProblem(Exception):
    """A unit text that is not a known unit (message says why)."""


def _unit(text: str) -> tuple[str, float]:
    """Dimension (``"s"``, ``"V"``, ``"A"``) and scale to SI of a unit such as ``mV``."""
    raw = text.strip()
    lowered = raw.lower()
    for base in sorted(_BASE_UNITS, key=len, reverse=True):
        if not lowered.endswith(base):
            continue
        prefix = raw[: len(raw) - len(base)].strip()
        if prefix == "M":
            raise _UnitProblem(
                f"unit {raw!r} is ambiguous: an upper-case 'M' reads as milli in SPICE and "
                f"mega elsewhere; write 'm{raw[1:]}' for milli"
            )
        if prefix.lower() in _PREFIXES or prefix in _PREFIXES:
            return _BASE_UNITS[base], _PREFIXES.get(prefix, _PREFIXES.get(prefix.lower(), 1.0))
    raise _UnitProblem(f"unknown unit {raw!r}; known units are {_KNOWN_UNITS_HELP}")


def _unit_or_none(text: str) -> tuple[str, float] | None:
    try:
        return _unit(text)
    except _UnitProblem:
        return None


_BRACKET_UNIT_RE = re.compile(r"^(?P<name>.*?)\s*[\(\[](?P<unit>[^\)\]]*)[\)\]]\s*$")
_SLASH_UNIT_RE = re.compile(r"^(?P<name>.+?)\s*/\s*(?P<unit>[A-Za-zµμ]+)$")
_SUFFIX_UNIT_RE = re.compile(r"^(?P<name>.+?)_(?P<unit>[A-Za-zµμ]+)$")


def _split_header_field(text: str) -> tuple[str, str | None]:
    """``'CH1 [mV]' -> ('CH1', 'mV')``; ``'t_ms' -> ('t', 'ms')``; ``'CH2' -> ('CH2', None)``."""
    text = _clean(text)
    match = _BRACKET_UNIT_RE.match(text)
    if match and match.group("name"):
        return match.group("name").strip(), match.group("unit").strip() or None
    for pattern in (_SLASH_UNIT_RE, _SUFFIX_UNIT_RE):
        match = pattern.match(text)
        if match and _unit_or_none(match.group("unit")) is not None:
            return match.group("name").strip(), match.group("unit")
    return text, None


# --------------------------------------------------------------------------- layout


def _clean(field_text: str) -> str:
    """A field without surrounding blanks and one pair of double quotes."""
    text = field_text.strip()
    if len(text) >= 2 and text[0] == text[-1] == '"':
        text = text[1:-1].strip()
    return text


def _is_number(text: str, decimal_comma: bool) -> bool:
    pattern = _NUM_COMMA_RE if decimal_comma else _NUM_DOT_RE
    return bool(pattern.match(text)) or bool(_NONFINITE_RE.match(text))


def _split(text: str, delimiter: str | None) -> list[str]:
    return [_clean(part) for part in (text.split(delimiter) if delimiter else [text])]


def _is_data_row(text: str, delimiter: str | None, decimal_comma: bool, n_fields: int) -> bool:
    fields = _split(text, delimiter)
    if len(fields) != n_fields:
        return False
    filled = [f for f in fields if f]
    return bool(filled) and all(_is_number(f, decimal_comma) for f in filled)


@dataclass
class _Source:
    path: Path
    name: str
    is_gzip: bool
    head: bytes
    complete: bool


@dataclass
class _Line:
    number: int  # 1-based physical line number
    offset: int  # byte offset of the line's start in the decompressed file
    text: str


@dataclass
class _Layout:
    delimiter: str | None
    decimal_comma: bool
    n_fields: int
    body_line: int
    body_offset: int
    header: list[str] | None
    units: list[str | None]
    header_line: int | None
    metadata: dict[str, str]
    metadata_lines: dict[str, int]
    samples: list[list[str]]  # fields of the first data rows, as text


def _open(path: str | Path, size: int = HEAD_BYTES) -> _Source:
    name = str(path)
    file = Path(path)
    if not file.exists():
        raise TraceError(name, ["file not found; check the path and the working directory"])
    if file.is_dir():
        raise TraceError(name, ["this is a directory; give the path of a CSV or text file"])
    try:
        with open(file, "rb") as handle:
            is_gzip = handle.read(2) == b"\x1f\x8b"
    except PermissionError:
        raise TraceError(name, ["permission denied; make the file readable"]) from None
    except OSError as exc:
        raise TraceError(name, [f"cannot read the file ({exc.strerror or exc})"]) from None
    try:
        with (gzip.open if is_gzip else open)(file, "rb") as handle:
            head = handle.read(size + 1)
    except (OSError, EOFError, zlib.error) as exc:
        what = "the gzip data is damaged or cut short" if is_gzip else "cannot read the file"
        raise TraceError(name, [f"{what} ({exc}); copy or export the capture again"]) from None
    return _Source(file, name, is_gzip, head[:size], len(head) <= size)


def _check_text(src: _Source) -> None:
    head = src.head
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise TraceError(
            src.name,
            ["the file is UTF-16 text; save it as UTF-8 or plain ASCII text (CSV) and read that"],
        )
    if not head.strip():
        raise TraceError(src.name, ["the file is empty; export the capture again"])
    nul = head.find(b"\x00")
    codes = np.frombuffer(head[:8192], dtype=np.uint8)
    control = np.count_nonzero((codes < 9) | ((codes > 13) & (codes < 32)))
    if nul >= 0 or control > 0.01 * codes.size:
        where = f" (a zero byte at offset {nul})" if nul >= 0 else ""
        raise TraceError(
            src.name,
            [
                f"this looks like a binary file{where}, not delimited text; export the "
                "capture from the instrument as CSV or text"
            ],
        )


def _head_lines(src: _Source) -> list[_Line]:
    data = src.head
    start = len(_BOM) if data.startswith(_BOM) else 0
    pieces = data[start:].split(b"\n")
    if not src.complete:
        pieces = pieces[:-1]  # the last line may be cut short
    lines = []
    offset = start
    for number, piece in enumerate(pieces, 1):
        text = piece.rstrip(b"\r").decode("utf-8", errors="replace")
        lines.append(_Line(number, offset, text))
        offset += len(piece) + 1
    return lines


def _sniff_delimiter(src: _Source, lines: list[_Line]) -> tuple[str | None, bool, int]:
    """Delimiter, decimal comma and field count, from the last rows of the head."""
    tail = [line.text for line in lines if line.text.strip()][-50:]
    if not tail:
        raise TraceError(src.name, ["the file has no data rows; export the capture again"])
    for delimiter in (";", "\t", ","):
        counts = Counter(len(text.split(delimiter)) for text in tail)
        n_fields = counts.most_common(1)[0][0]
        if n_fields < 2:
            continue
        for decimal_comma in (False, True) if delimiter != "," else (False,):
            good = sum(_is_data_row(t, delimiter, decimal_comma, n_fields) for t in tail)
            if good >= 0.8 * len(tail):
                return delimiter, decimal_comma, n_fields
    if sum(_is_data_row(t, None, False, 1) for t in tail) >= 0.8 * len(tail):
        return None, False, 1
    example = tail[-1][:80]
    raise TraceError(
        src.name,
        [
            "cannot find rows of numbers separated by commas, semicolons or tabs near the "
            f"start of the file (a late line reads {example!r}); export the capture as "
            "delimited text with one sample per row"
        ],
    )


def _header_like(text: str, delimiter: str | None, n_fields: int, decimal_comma: bool) -> bool:
    fields = _split(text, delimiter)
    filled = [f for f in fields if f]
    if not filled or len(fields) > n_fields or any(_is_number(f, decimal_comma) for f in filled):
        return False
    if n_fields == 1:
        return not re.search(r"[:=]", text)
    return len(fields) >= 2


def _units_row(text: str, delimiter: str | None) -> list[str | None] | None:
    """The units of a row such as ``(s),(V)`` or ``s;mV``, or None if it is not one."""
    units: list[str | None] = []
    for part in _split(text, delimiter):
        inner = part.strip("()[] ")
        if not inner:
            units.append(None)
            continue
        if _unit_or_none(inner) is None:
            return None
        units.append(inner)
    return units if any(units) else None


def _metadata_entry(line: _Line, delimiter: str | None) -> tuple[str, str]:
    text = line.text.strip()
    if delimiter and delimiter in text:
        key, _, value = text.partition(delimiter)
        value = value.strip().rstrip(delimiter).strip()
    elif re.search(r"[:=]", text):
        key, _, value = re.split(r"([:=])", text, maxsplit=1)
    else:
        key, value = text, ""
    key = _clean(key) or f"line {line.number}"
    return key, value.strip()


def _layout(src: _Source) -> _Layout:
    _check_text(src)
    lines = _head_lines(src)
    delimiter, decimal_comma, n_fields = _sniff_delimiter(src, lines)
    filled = [line for line in lines if line.text.strip()]
    body_index = None
    is_data: dict[int, bool] = {}

    def data_row(i: int) -> bool:
        if i not in is_data:
            is_data[i] = _is_data_row(filled[i].text, delimiter, decimal_comma, n_fields)
        return is_data[i]

    for i in range(len(filled)):
        # A data row followed by mostly data rows (one bad value must not end the preamble
        # late: that line is reported with its number when the body is read).
        following = [data_row(k) for k in range(i + 1, min(i + 4, len(filled)))]
        if data_row(i) and sum(following) >= min(2, len(following)):
            body_index = i
            break
    if body_index is None:  # pragma: no cover - the sniff above found data rows
        raise TraceError(src.name, ["no data rows found; export the capture again"])
    before = filled[:body_index]
    header: list[str] | None = None
    units: list[str | None] = [None] * n_fields
    header_line = None
    if before and _header_like(before[-1].text, delimiter, n_fields, decimal_comma):
        last = before.pop()
        unit_row = _units_row(last.text, delimiter)
        if (
            unit_row is not None
            and before
            and _header_like(before[-1].text, delimiter, n_fields, decimal_comma)
        ):
            names_line = before.pop()
            header = _split(names_line.text, delimiter)
            header_line = names_line.number
            units = (unit_row + [None] * n_fields)[:n_fields]
        else:
            header = _split(last.text, delimiter)
            header_line = last.number
        header = (header + [""] * n_fields)[:n_fields]
    metadata: dict[str, str] = {}
    metadata_lines: dict[str, int] = {}
    for line in before:
        key, value = _metadata_entry(line, delimiter)
        while key in metadata:
            key = f"{key} (line {line.number})"
        metadata[key] = value
        metadata_lines[key] = line.number
    body = filled[body_index]
    samples = [_split(line.text, delimiter) for line in filled[body_index : body_index + 200]]
    return _Layout(
        delimiter, decimal_comma, n_fields, body.number, body.offset, header, units,
        header_line, metadata, metadata_lines, samples,
    )


# --------------------------------------------------------------------------- columns

_TIME_NAMES = {"time", "t", "x", "sec", "seconds", "timestamp", "time stamp", "zeit"}
_INDEX_NAMES = {
    "index", "idx", "sample", "samples", "sample index", "sample number", "sample no",
    "point", "points", "point number", "pt", "n", "no", "no.", "#", "number",
}


def _norm(text: str) -> str:
    return " ".join(text.casefold().split())


@dataclass
class _Column:
    index: int
    text: str  # as in the header (or "column k")
    name: str  # without its unit
    unit: str | None

    @property
    def label(self) -> str:
        return f"'{self.text}' (index {self.index})"

    def matches(self, wanted: str) -> bool:
        key = _norm(wanted)
        return key in {_norm(self.text), _norm(self.name), f"column {self.index + 1}"}


def _columns(layout: _Layout) -> list[_Column]:
    columns = []
    for i in range(layout.n_fields):
        if layout.header is not None and layout.header[i]:
            name, unit = _split_header_field(layout.header[i])
            text = layout.header[i]
        else:
            name, unit, text = f"column {i + 1}", None, f"column {i + 1}"
        columns.append(_Column(i, text, name, layout.units[i] or unit))
    return columns


def _time_kind(column: _Column) -> str | None:
    """``"time"``, ``"index"`` or None, from the column's unit and name."""
    if column.unit is not None:
        found = _unit_or_none(column.unit)
        if found is not None and found[0] == "s":
            return "time"
    name = _norm(column.name)
    if name in _INDEX_NAMES:
        return "index"
    if name in _TIME_NAMES or name.startswith("time"):
        return "time"
    return None


def _pick(
    src: _Source, columns: list[_Column], wanted: str | int, role: str
) -> _Column:
    if isinstance(wanted, bool) or not isinstance(wanted, (str, int)):
        raise TraceError(src.name, [f"the {role} must be a column name or a 0-based index, got {wanted!r}"])
    if isinstance(wanted, int):
        if 0 <= wanted < len(columns):
            return columns[wanted]
        found = []
    else:
        found = [c for c in columns if c.matches(wanted)]
        if len(found) == 1:
            return found[0]
    available = ", ".join(c.label for c in columns)
    if len(found) > 1:
        problem = f"the {role} {wanted!r} matches several columns ({available}); choose by index"
    else:
        problem = (
            f"there is no column {wanted!r} for the {role}; the file has {available}; "
            "give one of these names (case and unit optional) or a 0-based index"
        )
    raise TraceError(src.name, [problem])


# --------------------------------------------------------------------------- metadata

_INTERVAL_KEYS = {
    "sample interval", "sampling interval", "sample period", "sampling period", "time step",
    "timestep", "time increment", "x increment", "xincrement", "dt", "delta t",
    "time per sample", "time per point", "horizontal interval", "interval", "time interval",
    "sample spacing",
}
_RATE_KEYS = {
    "sample rate", "sampling rate", "sample frequency", "sampling frequency",
    "samples per second", "fs",
}
_LENGTH_KEYS = {
    "record length", "number of points", "number of samples", "points", "samples",
    "point count", "sample count", "npts", "length", "record size", "data points",
}
_START_KEYS = {
    "start", "start time", "x origin", "xorigin", "first time", "time of first sample",
    "t0", "time start", "t start", "first sample time",
}
_VSCALE_KEYS = {
    "vertical scale", "volts div", "v div", "volts per div", "volts per division",
    "vertical sensitivity", "scale v div",
}
_PROBE_KEYS = {"probe", "probe attenuation", "attenuation", "probe factor", "probe ratio"}

_META_NUMBER_RE = re.compile(
    r"\s*(?P<number>[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?)\s*(?P<rest>.*)\Z"
)
_PROBE_RE = re.compile(
    r"\s*(?:[xX]\s*(?P<a>\d+(?:\.\d*)?)|(?P<b>\d+(?:\.\d*)?)\s*[xX]?"
    r"|(?P<c>\d+(?:\.\d*)?)\s*:\s*(?P<d>\d+(?:\.\d*)?))\s*\Z"
)
_RATE_UNIT_RE = re.compile(
    r"(?P<prefix>[kKmMgG]?)(?:hz|sa/s|s/s|sps|samples/s|sa/sec|samples/sec)\Z", re.IGNORECASE
)


def _half_ulp(number: str) -> float:
    """Half a unit in the last written digit of ``number`` (``'1.25e-6' -> 5e-9``)."""
    mantissa, _, exponent = number.lower().replace(",", ".").partition("e")
    decimals = len(mantissa.partition(".")[2])
    return 0.5 * 10.0 ** (int(exponent or 0) - decimals)


@dataclass
class _Stated:
    """A number stated in the metadata: SI value, its rounding, where it was written."""

    value: float
    rounding: float
    key: str
    line: int

    def where(self) -> str:
        return f"metadata line {self.line} ('{self.key}')"


@dataclass
class _Meta:
    interval: _Stated | None = None
    rate: _Stated | None = None
    start: _Stated | None = None
    length: _Stated | None = None
    vscale: _Stated | None = None
    probe: _Stated | None = None


def _meta_key(key: str) -> tuple[str, str | None, str | None]:
    """Normalised key phrase, channel number it names (if any), unit in brackets."""
    unit = None
    match = re.search(r"[\(\[]([^\)\]]*)[\)\]]", key)
    if match:
        unit = match.group(1).strip() or None
        key = key[: match.start()] + key[match.end() :]
    phrase = re.sub(r"[^0-9a-zµμ]+", " ", key.lower().replace("/", " ")).strip()
    channel = None
    match = re.match(r"(?:ch|chan|channel)\s*(\d+)\s+(.*)", phrase)
    if match:
        channel, phrase = match.group(1), match.group(2)
    return phrase, channel, unit


def _channel_number(column: _Column) -> str | None:
    match = re.fullmatch(r"(?:ch|chan|channel)\s*(\d+)", _norm(column.name))
    return match.group(1) if match else None


def _interpret_metadata(
    src: _Source, layout: _Layout, channel: _Column, problems: list[str]
) -> _Meta:
    meta = _Meta()
    wanted_channel = _channel_number(channel)
    for key, value in layout.metadata.items():
        phrase, key_channel, key_unit = _meta_key(key)
        kind = next(
            (
                kind
                for kind, keys in (
                    ("interval", _INTERVAL_KEYS), ("rate", _RATE_KEYS),
                    ("start", _START_KEYS), ("length", _LENGTH_KEYS),
                    ("vscale", _VSCALE_KEYS), ("probe", _PROBE_KEYS),
                )
                if phrase in keys
            ),
            None,
        )
        if kind is None or getattr(meta, kind) is not None:
            continue
        if key_channel is not None and key_channel != wanted_channel:
            continue  # about another channel
        line = layout.metadata_lines[key]
        fields = [_clean(f) for f in (value.split(layout.delimiter) if layout.delimiter else [value])]
        fields = [f for f in fields if f]
        if not fields:
            continue
        try:
            stated = _stated(kind, fields, key_unit, layout)
        except _UnitProblem as exc:
            problems.append(
                f"metadata line {line} ('{key}'): {exc}; correct the line or delete it"
            )
            continue
        if stated is None:
            continue  # not a number: a remark, kept as metadata only
        value_si, rounding = stated
        if not (math.isfinite(value_si) and value_si > 0) and kind != "start":
            problems.append(
                f"metadata line {line} ('{key}'): {value!r} must be a positive number; "
                "correct the line or delete it"
            )
            continue
        setattr(meta, kind, _Stated(value_si, rounding, key, line))
    return meta


def _stated(
    kind: str, fields: list[str], key_unit: str | None, layout: _Layout
) -> tuple[float, float] | None:
    """SI value and rounding of a metadata value, None when it is not a number."""
    first = fields[0]
    if kind == "probe":
        match = _PROBE_RE.match(first)
        if match is None:
            return None
        if match.group("c") is not None:
            a, b = float(match.group("c")), float(match.group("d"))
            return (max(a, b) / min(a, b), 0.0) if min(a, b) > 0 else (math.nan, 0.0)
        return float(match.group("a") or match.group("b")), 0.0
    match = _META_NUMBER_RE.match(first)
    if match is None:
        return None
    number = match.group("number")
    if "," in number and layout.delimiter == ",":
        return None
    number_value = float(number.replace(",", "."))
    rounding = _half_ulp(number)
    unit = match.group("rest").strip() or (fields[1] if len(fields) > 1 else "") or key_unit or ""
    unit = unit.strip("()[] ")
    if kind == "length":
        scale = {"": 1.0, "k": 1e3, "K": 1e3, "M": 1e6}.get(
            re.sub(r"\s*(pts|points|samples|sa|s)\Z", "", unit, flags=re.IGNORECASE).strip(), None
        )
        if scale is None:
            raise _UnitProblem(f"cannot read {first!r} as a number of samples")
        return number_value * scale, 0.0
    if kind == "rate":
        if not unit:
            return number_value, rounding
        found = _RATE_UNIT_RE.match(unit.replace(" ", ""))
        if found is None:
            raise _UnitProblem(f"unknown sample-rate unit {unit!r}; write e.g. '100 MSa/s' or '1e8'")
        # A milli-hertz sample rate is not a scope capture: 'm' here can only mean mega.
        scale = {"": 1.0, "k": 1e3, "m": 1e6, "g": 1e9}[found.group("prefix").lower()]
        return number_value * scale, rounding * scale
    if kind == "vscale":
        unit = re.sub(r"\s*/\s*div\Z", "", unit, flags=re.IGNORECASE)
        unit = re.sub(r"\s*div\Z", "", unit, flags=re.IGNORECASE)
    expected = "s" if kind in ("interval", "start") else "V"
    if not unit:
        return number_value, rounding
    dimension, scale = _unit(unit)
    if dimension != expected and not (expected == "V" and dimension == "A"):
        raise _UnitProblem(f"unit {unit!r} is not a {'time' if expected == 's' else 'voltage'} unit")
    return number_value * scale, rounding * scale


# --------------------------------------------------------------------------- body


def _stream(src: _Source, offset: int) -> pa.NativeFile:
    stream = pa.input_stream(str(src.path), compression="gzip" if src.is_gzip else None)
    stream.read(offset)
    return stream


def _number_regex(decimal_comma: bool) -> str:
    return "^(" + (_NUM_COMMA if decimal_comma else _NUM_DOT) + ")$"


def _read_body(
    src: _Source, layout: _Layout, columns: list[_Column], wanted: list[_Column]
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
    except (pa.ArrowInvalid, OSError, EOFError, zlib.error) as exc:
        problems = _diagnose_body(src, layout, columns, wanted)
        raise TraceError(
            src.name, problems or [f"the data rows cannot be read ({exc}); check the file"]
        ) from None
    return {i: table.column(names[i]).to_numpy() for i in keep}


def _body_lines(src: _Source, layout: _Layout) -> pa.Array:
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
    src: _Source, layout: _Layout, columns: list[_Column], wanted: list[_Column]
) -> list[str]:
    """Line-numbered reasons why the body could not be read (vectorised, error path only)."""
    try:
        lines = _body_lines(src, layout)
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
        readable = pac.or_(
            pac.match_substring_regex(values, regex),
            pac.or_(
                pac.equal(pac.utf8_length(values), 0),
                pac.match_substring_regex(values, r"(?i)^[+-]?(nan|inf|infinity)$"),
            ),
        )
        bad = np.flatnonzero(~readable.to_numpy(zero_copy_only=False))
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
    return problems


def _row_lines(src: _Source, layout: _Layout, rows: np.ndarray) -> np.ndarray:
    """Physical line numbers of data rows (pyarrow skips blank lines; this maps back)."""
    lines = _body_lines(src, layout)
    filled = pac.greater(pac.utf8_length(pac.utf8_trim_whitespace(lines)), 0)
    positions = np.flatnonzero(filled.to_numpy(zero_copy_only=False))
    return layout.body_line + positions[rows]


# --------------------------------------------------------------------------- checks


def estimate_resolution(values: np.ndarray) -> float | None:
    """The quantisation step of ``values`` when they visibly sit on an even grid.

    Parameters
    ----------
    values
        Samples of one channel.

    Returns
    -------
    float or None
        The grid step, or None when values rarely repeat (no grid can be seen) or the
        gaps between distinct values are not whole multiples of one step.
    """
    values = np.asarray(values, dtype=float)
    values = values[np.isfinite(values)]
    step = max(1, values.size // 65536)
    sample = values[::step]
    distinct = np.unique(sample)
    if distinct.size < 3 or distinct.size > 0.5 * sample.size:
        return None
    gaps = np.diff(distinct)
    smallest = gaps.min()
    base = gaps[gaps < 1.5 * smallest].mean()
    ratios = gaps / base
    if np.any(np.abs(ratios - np.round(ratios)) > 0.2):
        return None
    return float((distinct[-1] - distinct[0]) / np.round(ratios).sum())


def detect_clipping(values: np.ndarray, resolution: float | None = None) -> np.ndarray:
    """Mask of samples in runs of >= :data:`CLIP_RUN` at the record's maximum or minimum.

    A converter driven past its range returns its top or bottom code for as long as the
    input stays beyond it, so clipping shows as runs of equal samples at the extremes
    (common practice, no source). "At the extreme" means within half a quantisation
    step when the step is known, else within 1e-9 of the record's magnitude.

    Parameters
    ----------
    values
        Samples of one channel.
    resolution
        Quantisation step, if known (see :func:`estimate_resolution`).

    Returns
    -------
    numpy.ndarray
        Boolean mask, True for clipped samples.
    """
    values = np.asarray(values, dtype=float)
    mask = np.zeros(values.shape, dtype=bool)
    if values.size < CLIP_RUN:
        return mask
    top, bottom = float(values.max()), float(values.min())
    scale = max(abs(top), abs(bottom), top - bottom)
    tol = 0.5 * resolution if resolution else 1e-9 * scale
    for at_rail in (values >= top - tol, values <= bottom + tol):
        index = np.flatnonzero(at_rail)
        if index.size < CLIP_RUN:
            continue
        run_id = np.concatenate(([0], np.cumsum(np.diff(index) != 1)))
        lengths = np.bincount(run_id)
        mask[index[lengths[run_id] >= CLIP_RUN]] = True
    return mask


def _rounding_bound(texts: list[str], scale: float) -> tuple[float, float]:
    """(absolute, relative) bounds on the rounding of numbers written like ``texts``."""
    absolute = relative = 0.0
    for text in texts:
        if not _NUM_DOT_RE.match(text.replace(",", ".")):
            continue
        half = _half_ulp(text)
        if "e" in text.lower():
            value = abs(float(text.replace(",", ".")))
            if value > 0:
                relative = max(relative, half / value)
        else:
            absolute = max(absolute, half * scale)
    return absolute, relative


def _time_problems(
    src: _Source, layout: _Layout, time: np.ndarray, label: str, unit: str = " s"
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
    src: _Source, layout: _Layout, values: np.ndarray, column: _Column
) -> list[str]:
    if math.isfinite(float(np.add.reduce(values))):
        return []  # a finite sum: every value is finite (fast path)
    bad = np.flatnonzero(~np.isfinite(values))
    if not bad.size:
        return []
    lines = _row_lines(src, layout, bad[:MAX_EXAMPLES])
    shown = ", ".join(
        f"line {line} ({'empty or NaN' if np.isnan(values[k]) else 'infinite'})"
        for line, k in zip(lines, bad[:MAX_EXAMPLES])
    )
    more = f" and {bad.size - MAX_EXAMPLES} more" if bad.size > MAX_EXAMPLES else ""
    return [
        f"column {column.label} needs a finite number in every row: {shown}{more}; "
        "delete those rows or export the capture again"
    ]


# --------------------------------------------------------------------------- read_trace


def read_trace(
    path: str | Path,
    *,
    column: str | int | None = None,
    time_column: str | int | None = None,
) -> Trace:
    """Read one channel of a delimited-text waveform (see the module notes for layouts).

    Parameters
    ----------
    path
        CSV / text file, optionally gzip-compressed.
    column
        The channel: a header name (case-insensitive, unit optional: ``"ch1"`` matches
        ``CH1 [mV]``), ``"column k"`` (1-based), or a 0-based column index. Default: the
        first column that is not the time column.
    time_column
        The time (or sample-number) column, by name or 0-based index. Default: the column
        whose unit is a time unit or whose name says time or sample number, else column
        0; none for a one-column file.

    Returns
    -------
    Trace
        Time in seconds and the channel in volts, with clipping marked.

    Raises
    ------
    TraceError
        Listing every problem found: missing or binary file, no data rows, unknown
        column or unit, unreadable numbers, NaN or infinite values, time not strictly
        increasing, too few rows, metadata that disagrees with the data.
    """
    src = _open(path)
    try:
        layout = _layout(src)
    except TraceError:
        if src.complete:
            raise
        src = _open(path, 16 * HEAD_BYTES)  # a long preamble: look further
        layout = _layout(src)
    columns = _columns(layout)

    time_col: _Column | None
    if time_column is not None:
        time_col = _pick(src, columns, time_column, "time column")
    elif len(columns) == 1:
        time_col = None
    else:
        kinds = [_time_kind(c) for c in columns]
        time_col = next(
            (c for c, k in zip(columns, kinds) if k == "time"),
            next((c for c, k in zip(columns, kinds) if k == "index"), columns[0]),
        )
    with_data = [c for c in columns if c is not time_col and _has_data(layout, c)]
    candidates = [c for c in with_data if _time_kind(c) is None] or with_data
    if column is not None:
        channel = _pick(src, columns, column, "channel")
        if channel is time_col:
            raise TraceError(
                src.name,
                [
                    f"column {channel.label} is the time column; choose a channel from "
                    + ", ".join(c.label for c in candidates)
                ],
            )
    elif candidates:
        channel = candidates[0]
    else:
        raise TraceError(src.name, ["the file has a time column but no channel column"])

    problems: list[str] = []
    meta = _interpret_metadata(src, layout, channel, problems)
    time_kind = None
    if time_col is not None:
        time_kind = _time_kind(time_col) or "time"
        if (
            time_kind == "time"
            and layout.header is None
            and meta.interval is not None
            and all(re.fullmatch(r"[+-]?\d+", row[time_col.index] or "x") for row in layout.samples)
            and _consecutive(layout.samples, time_col.index)
        ):
            time_kind = "index"  # no header: whole consecutive numbers are sample numbers
    channel_scale = _column_scale(channel, "V", problems)
    time_scale = _column_scale(time_col, "s", problems) if time_kind == "time" else 1.0
    interval = meta.interval
    if meta.rate is not None:
        from_rate = _Stated(
            1.0 / meta.rate.value, meta.rate.rounding / meta.rate.value**2, meta.rate.key, meta.rate.line
        )
        if interval is None:
            interval = from_rate
        elif abs(interval.value - from_rate.value) > interval.rounding + from_rate.rounding + 1e-9 * interval.value:
            problems.append(
                f"{interval.where()} gives a sample interval of {interval.value:.9g} s but "
                f"{meta.rate.where()} gives {meta.rate.value:.9g} samples/s "
                f"(interval {from_rate.value:.9g} s); correct one of them"
            )
    if time_kind != "time" and interval is None:
        what = (
            f"column {time_col.label} holds sample numbers" if time_col is not None
            else "the file has one column and no time column"
        )
        problems.append(
            f"{what}, but no sample interval is given; add a metadata line such as "
            "'Sample interval,1e-06' (seconds) before the data, or a time column"
        )
    if problems:
        raise TraceError(src.name, problems)

    wanted = [channel] + ([time_col] if time_col is not None else [])
    data = _read_body(src, layout, columns, wanted)
    volts = data[channel.index]
    n = volts.size
    problems += _nonfinite_problems(src, layout, volts, channel)
    if time_col is not None:
        raw_time = data[time_col.index]
        problems += _nonfinite_problems(src, layout, raw_time, time_col)
    if problems:
        raise TraceError(src.name, problems)
    if n < MIN_SAMPLES:
        raise TraceError(
            src.name,
            [f"only {n} data rows; a waveform needs at least {MIN_SAMPLES} (export the whole capture)"],
        )

    if time_kind == "time":
        time = raw_time * time_scale if time_scale != 1.0 else raw_time
        problems += _time_problems(src, layout, time, f"the time column {time_col.label}")
    else:
        assert interval is not None
        if time_kind == "index":
            bad = np.flatnonzero(raw_time != np.round(raw_time))
            if bad.size:
                line = _row_lines(src, layout, bad[:1])[0]
                problems.append(
                    f"column {time_col.label} should hold whole sample numbers, but line "
                    f"{line} reads {raw_time[bad[0]]:.9g}; name the column 'Time' if it is time"
                )
            problems += _time_problems(
                src, layout, raw_time, f"the sample numbers in column {time_col.label}", ""
            )
            start = meta.start.value if meta.start is not None else None
            origin = raw_time[0] if start is not None else 0.0
            time = (start or 0.0) + (raw_time - origin) * interval.value
        else:
            time = (meta.start.value if meta.start else 0.0) + np.arange(n) * interval.value
    if problems:
        raise TraceError(src.name, problems)

    if time_kind == "time":
        problems += _time_cross_checks(layout, time_col, time_scale, time, interval, meta.start)
    if meta.length is not None and round(meta.length.value) != n:
        problems.append(
            f"{meta.length.where()} gives a record length of {meta.length.value:.0f} samples but "
            f"the file has {n} data rows; the file may be truncated or the line wrong: "
            "export the capture again or correct the line"
        )
    if channel_scale != 1.0:
        volts = volts * channel_scale
    span = float(volts.max() - volts.min())
    if span == 0:
        problems.append(
            f"column {channel.label} holds {volts[0]:.6g} in every row; choose the channel "
            "that carries the signal"
        )
    probe = meta.probe.value if meta.probe is not None else 1.0
    if meta.vscale is not None and span > MAX_DIVISIONS * meta.vscale.value * max(probe, 1.0):
        problems.append(
            f"column {channel.label} spans {span:.6g} V, {span / meta.vscale.value:.0f} divisions "
            f"of the vertical scale in {meta.vscale.where()} ({meta.vscale.value:.6g} V/div); a "
            f"screen holds about 10: check the column's unit (for example [mV]) or that line"
        )
    if problems:
        raise TraceError(src.name, problems)
    if probe != 1.0:
        volts = volts * probe
    resolution = estimate_resolution(volts)
    return Trace(
        time=time,
        voltage=volts,
        source=src.name,
        column=channel.text,
        metadata=layout.metadata,
        clipped=detect_clipping(volts, resolution),
        resolution=resolution,
        channels=tuple(c.text for c in candidates),
    )


def _has_data(layout: _Layout, column: _Column) -> bool:
    named = layout.header is not None and bool(layout.header[column.index])
    return named or any(len(row) > column.index and row[column.index] for row in layout.samples)


def _consecutive(samples: list[list[str]], index: int) -> bool:
    values = np.array([int(row[index]) for row in samples if row[index]])
    return values.size >= 2 and bool(np.all(np.diff(values) == 1))


def _column_scale(column: _Column | None, dimension: str, problems: list[str]) -> float:
    if column is None or column.unit is None:
        return 1.0
    try:
        found, scale = _unit(column.unit)
    except _UnitProblem as exc:
        problems.append(f"column {column.label}: {exc}; correct the header")
        return 1.0
    if found != dimension and not (dimension == "V" and found == "A"):
        kind = "time" if dimension == "s" else "a voltage"
        problems.append(
            f"column {column.label} is in {column.unit!r}, which is not {kind} unit; "
            "choose another column or correct the header"
        )
    return scale


def _time_cross_checks(
    layout: _Layout,
    time_col: _Column,
    time_scale: float,
    time: np.ndarray,
    interval: _Stated | None,
    start: _Stated | None,
) -> list[str]:
    problems = []
    texts = [row[time_col.index] for row in layout.samples if len(row) > time_col.index]
    absolute, relative = _rounding_bound(texts, time_scale)

    def written(value: float) -> float:
        return max(absolute, relative * abs(value))

    n = time.size
    if interval is not None:
        mean_step = (time[-1] - time[0]) / (n - 1)
        tol = (
            (written(time[0]) + written(time[-1])) / (n - 1)
            + interval.rounding
            + 1e-9 * interval.value
        )
        if abs(mean_step - interval.value) > tol:
            problems.append(
                f"{interval.where()} gives a sample interval of {interval.value:.9g} s, but "
                f"the time column {time_col.label} advances {mean_step:.9g} s per row on "
                f"average ({mean_step / interval.value:.6g} times as much); check the time "
                "column's unit or correct that line"
            )
    if start is not None:
        tol = written(time[0]) + start.rounding + 1e-9 * abs(time[-1] - time[0])
        if abs(time[0] - start.value) > tol:
            problems.append(
                f"{start.where()} gives a start time of {start.value:.9g} s, but the first "
                f"row of the time column {time_col.label} reads {time[0]:.9g} s; check the "
                "time column's unit or correct that line"
            )
    return problems


def check_enough_ringing(trace: Trace, period_s: float, *, minimum_periods: float = 1.5) -> None:
    """Raise unless ``trace`` covers at least ``minimum_periods`` periods of ringing.

    Call it once the period is known (from the estimate): with fewer than about one and
    a half periods neither the frequency nor the decay can be separated from an offset
    (common practice, no source).

    Parameters
    ----------
    trace
        The aligned trace (time from the event).
    period_s
        The ringing period in seconds.
    minimum_periods
        The shortest acceptable record, in periods.

    Raises
    ------
    TraceError
        When the record (from its first sample) is shorter than that.
    """
    if not (period_s > 0 and math.isfinite(period_s)):
        raise ValueError(f"period_s must be a positive number, got {period_s!r}")
    duration = float(trace.time[-1] - trace.time[0]) if len(trace) else 0.0
    periods = duration / period_s
    if periods < minimum_periods:
        raise TraceError(
            trace.source,
            [
                f"the record covers {periods:.2f} periods of the {period_s:.6g} s ringing after "
                f"the event; at least {minimum_periods:g} are needed to tell frequency and "
                "decay apart: capture a longer time window (slower time base)"
            ],
        )


# --------------------------------------------------------------------------- peak tables


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
    src = _open(path, HEAD_BYTES)
    _check_text(src)
    if not src.complete:
        raise TraceError(
            src.name,
            [
                "this is too long for a peak table (read off cursors, a few dozen rows); "
                "read a waveform file with read_trace instead"
            ],
        )
    lines = [
        line for line in _head_lines(src)
        if line.text.strip() and not line.text.lstrip().startswith("#")
    ]
    if not lines:
        raise TraceError(src.name, ["the file has no rows; write a header and one row per extremum"])
    header_line, rows = lines[0], lines[1:]
    delimiter = next((d for d in (";", "\t", ",") if d in header_line.text), None)
    header = _split(header_line.text, delimiter)
    decimal_comma = delimiter in (";", "\t")
    if delimiter is None or len(header) not in (2, 3) or any(_is_number(h, False) for h in header):
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
        _name, unit = _split_header_field(text)
        if unit is None and i == 2:
            scales.append(scales[1] if scales[1] is not None else None)
            continue
        if unit is None:
            scales.append(None)
            continue
        try:
            dimension, scale = _unit(unit)
        except _UnitProblem as exc:
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
    for r, line in enumerate(rows):
        fields = _split(line.text, delimiter)
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
    if problems:
        raise TraceError(src.name, problems)
    return PeakTable(time=time, voltage=volts, uncertainty=uncertainty, source=src.name)


def _peak_value(text: str, scale: float | None, unit: str, decimal_comma: bool) -> float | str:
    """The SI value of one cell, or a message saying why it cannot be read."""
    number = text.replace(",", ".") if decimal_comma else text
    if scale is not None:
        if not _NUM_DOT_RE.match(number):
            return (
                f"{text!r} is not a plain number; the header gives the unit, so write the "
                "number alone (or drop the unit from the header and write e.g. '2.5m')"
            )
        value = float(number) * scale
    else:
        try:
            value = parse_value(number, unit=unit)
        except ValueParseError as exc:
            return f"{exc}"
    if not math.isfinite(value):
        return f"{text!r} is not a finite number"
    return value
