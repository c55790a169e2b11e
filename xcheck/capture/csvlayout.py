"""How a delimited-text export is laid out, worked out from its first few kilobytes.

Used by :mod:`xcheck.capture.scope_csv`. Plain Python on the head of the file only: the delimiter
and decimal mark (from the last rows of the head, which are data), where the data rows
start, the header row (and a row of units under it, if any), the preamble lines before
it (kept as key -> value), and what each column is (name, unit, time or sample number).
"""

from __future__ import annotations

import gzip
import re
import zlib
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from xcheck.errors import TraceError
from xcheck.input_file import BoundedStream, InputFileProblem, open_regular
from xcheck.quoting import excerpt, quoted

#: How much of the (decompressed) file is read to work out its layout.
HEAD_BYTES = 64 * 1024
#: Largest trace or peak table read, on disk and (for gzip) decompressed: generous for a
#: scope export (tens of millions of rows), small enough to refuse ``/dev/zero``-like input.
TRACE_MAX_BYTES = 2 * 2**30
#: Largest channel magnitude accepted, in SI units (volts, or amperes for a current
#: probe), in a trace or a peak table: far beyond a bench capture, far inside the range
#: where sums of squares of the samples stay finite (about 1e154).
CHANNEL_LIMIT = 1e9

BOM = b"\xef\xbb\xbf"
NUM_DOT = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
NUM_COMMA = r"[+-]?(?:\d+,?\d*|,\d+)(?:[eE][+-]?\d+)?"
NUM_DOT_RE = re.compile(NUM_DOT + r"\Z")
NUM_COMMA_RE = re.compile(NUM_COMMA + r"\Z")
NONFINITE_RE = re.compile(r"[+-]?(?:nan|inf|infinity)\Z", re.IGNORECASE)


# --------------------------------------------------------------------------- units

_PREFIXES = {"": 1.0, "k": 1e3, "m": 1e-3, "u": 1e-6, "µ": 1e-6, "μ": 1e-6, "n": 1e-9, "p": 1e-12}
_BASE_UNITS = {
    "seconds": "s", "second": "s", "secs": "s", "sec": "s", "s": "s",
    "volts": "V", "volt": "V", "v": "V",
    "amps": "A", "amp": "A", "a": "A",
}
KNOWN_UNITS_HELP = "s, ms, us, ns, ps for time; V, mV, uV, kV (or A, mA) for a channel"


class UnitProblem(Exception):
    """A unit text that is not a known unit (the message says why)."""


def unit(text: str) -> tuple[str, float]:
    """Dimension (``"s"``, ``"V"`` or ``"A"``) and scale to SI of a unit such as ``mV``.

    An upper-case ``M`` prefix is refused: SPICE reads it as milli, most people as mega.
    """
    raw = text.strip()
    lowered = raw.lower()
    for base in sorted(_BASE_UNITS, key=len, reverse=True):
        if not lowered.endswith(base):
            continue
        prefix = raw[: len(raw) - len(base)].strip()
        if prefix == "M":
            raise UnitProblem(
                f"unit {raw!r} is ambiguous: an upper-case 'M' reads as milli in SPICE and "
                f"mega elsewhere; write 'm{raw[1:]}' for milli"
            )
        if prefix in _PREFIXES or prefix.lower() in _PREFIXES:
            return _BASE_UNITS[base], _PREFIXES.get(prefix, _PREFIXES.get(prefix.lower(), 1.0))
    raise UnitProblem(f"unknown unit {raw!r}; known units are {KNOWN_UNITS_HELP}")


def unit_or_none(text: str) -> tuple[str, float] | None:
    """:func:`unit`, or None when the text is not a known unit."""
    try:
        return unit(text)
    except UnitProblem:
        return None


_BRACKET_UNIT_RE = re.compile(r"^(?P<name>.*?)\s*[\(\[](?P<unit>[^\)\]]*)[\)\]]\s*$")
_SLASH_UNIT_RE = re.compile(r"^(?P<name>.+?)\s*/\s*(?P<unit>[A-Za-zµμ]+)$")
_SUFFIX_UNIT_RE = re.compile(r"^(?P<name>.+?)_(?P<unit>[A-Za-zµμ]+)$")


def split_header_field(text: str) -> tuple[str, str | None]:
    """``'CH1 [mV]' -> ('CH1', 'mV')``, ``'t_ms' -> ('t', 'ms')``, ``'t / us'``,
    ``'CH2' -> ('CH2', None)``."""
    text = clean(text)
    match = _BRACKET_UNIT_RE.match(text)
    if match and match.group("name"):
        return match.group("name").strip(), match.group("unit").strip() or None
    for pattern in (_SLASH_UNIT_RE, _SUFFIX_UNIT_RE):
        match = pattern.match(text)
        if match and unit_or_none(match.group("unit")) is not None:
            return match.group("name").strip(), match.group("unit")
    return text, None


def half_ulp(number: str) -> float:
    """Half a unit in the last written digit of ``number`` (``'1.25e-6' -> 5e-9``)."""
    mantissa, _, exponent = number.lower().replace(",", ".").partition("e")
    decimals = len(mantissa.partition(".")[2])
    return 0.5 * 10.0 ** (int(exponent or 0) - decimals)


# --------------------------------------------------------------------------- fields


def clean(field_text: str) -> str:
    """A field without surrounding blanks and one pair of double quotes."""
    text = field_text.strip()
    if len(text) >= 2 and text[0] == text[-1] == '"':
        text = text[1:-1].strip()
    return text


def is_number(text: str, decimal_comma: bool) -> bool:
    """True for a plain number (or NaN / inf, which are numbers to the CSV reader)."""
    pattern = NUM_COMMA_RE if decimal_comma else NUM_DOT_RE
    return bool(pattern.match(text)) or bool(NONFINITE_RE.match(text))


def split(text: str, delimiter: str | None) -> list[str]:
    """The cleaned fields of one line."""
    return [clean(part) for part in (text.split(delimiter) if delimiter else [text])]


def is_data_row(text: str, delimiter: str | None, decimal_comma: bool, n_fields: int) -> bool:
    """``n_fields`` fields, every filled one a number, at least one filled."""
    fields = split(text, delimiter)
    if len(fields) != n_fields:
        return False
    filled = [f for f in fields if f]
    return bool(filled) and all(is_number(f, decimal_comma) for f in filled)


# --------------------------------------------------------------------------- the file


@dataclass
class Source:
    """An opened file: where it is, whether gzip, and its (decompressed) head."""

    path: Path
    name: str
    is_gzip: bool
    head: bytes
    complete: bool  # the head is the whole file


@dataclass
class Line:
    """One line of the head."""

    number: int  # 1-based physical line number
    offset: int  # byte offset of the line's start in the decompressed file
    text: str


@dataclass
class Layout:
    """What the head says about the file."""

    delimiter: str | None
    decimal_comma: bool
    n_fields: int
    body_line: int  # line number of the first data row
    body_offset: int  # its byte offset
    header: list[str] | None
    units: list[str | None]
    metadata: dict[str, str]
    metadata_lines: dict[str, int]
    samples: list[list[str]]  # fields of the first data rows, as text


def open_source(path: str | Path, size: int = HEAD_BYTES) -> Source:
    """Open ``path`` (plain or gzip, told apart by content) and read its head.

    Raises
    ------
    TraceError
        When the file is missing, a directory, not a regular file (a FIFO, a device),
        larger than :data:`TRACE_MAX_BYTES`, unreadable, or damaged gzip.
    """
    name = str(path)
    file = Path(path)
    if not file.exists():
        raise TraceError(name, ["file not found; check the path and the working directory"])
    if file.is_dir():
        raise TraceError(name, ["this is a directory; give the path of a CSV or text file"])
    is_gzip = False
    try:
        with open_regular(file, TRACE_MAX_BYTES, "a CSV or text file") as handle:
            is_gzip = handle.read(2) == b"\x1f\x8b"
            handle.seek(0)
            with (gzip.open(handle, "rb") if is_gzip else handle) as text:
                head = text.read(size + 1)
                if is_gzip and len(head) > size:
                    _check_decompressed_size(text, len(head))
    except InputFileProblem as exc:
        raise TraceError(name, [f"the file {exc}"]) from None
    except PermissionError:
        raise TraceError(name, ["permission denied; make the file readable"]) from None
    except FileNotFoundError:
        raise TraceError(name, ["file not found; check the path and the working directory"]) from None
    except (OSError, EOFError, zlib.error) as exc:
        what = "the gzip data is damaged or cut short" if is_gzip else "cannot read the file"
        raise TraceError(name, [f"{what} ({exc}); copy or export the capture again"]) from None
    return Source(file, name, is_gzip, head[:size], len(head) <= size)


def _check_decompressed_size(stream: gzip.GzipFile, already: int) -> None:
    """Read a gzip file's content to its end, raising
    :class:`~xcheck.input_file.InputFileProblem` once it passes :data:`TRACE_MAX_BYTES`.

    A gzip file of a few megabytes can expand to gigabytes; counting before the body is
    parsed refuses such a file in the time it takes to decompress the limit, with memory
    for one chunk, instead of parsing gigabytes of rows into arrays first.
    """
    bounded = BoundedStream(stream, TRACE_MAX_BYTES, "decompressed text", already=already)
    while bounded.read(2**20):
        pass


def check_text(src: Source) -> None:
    """Raise unless the head looks like text (not empty, not UTF-16, not binary)."""
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


def head_lines(src: Source) -> list[Line]:
    """The complete lines of the head, with line numbers and byte offsets."""
    data = src.head
    start = len(BOM) if data.startswith(BOM) else 0
    pieces = data[start:].split(b"\n")
    if not src.complete:
        pieces = pieces[:-1]  # the last line may be cut short
    lines = []
    offset = start
    for number, piece in enumerate(pieces, 1):
        lines.append(Line(number, offset, piece.rstrip(b"\r").decode("utf-8", errors="replace")))
        offset += len(piece) + 1
    return lines


def _sniff_delimiter(src: Source, lines: list[Line]) -> tuple[str | None, bool, int]:
    """Delimiter, decimal comma and field count, from the last rows of the head."""
    tail = [line.text for line in lines if line.text.strip()][-50:]
    if not tail:
        raise TraceError(src.name, ["the file has no data rows; export the capture again"])

    def mostly_data(delimiter: str | None, decimal_comma: bool, n_fields: int) -> bool:
        # From the first data row on (a short file's tail still holds its preamble),
        # at least 80 % of the lines must be data rows.
        flags = [is_data_row(t, delimiter, decimal_comma, n_fields) for t in tail]
        if True not in flags:
            return False
        rest = flags[flags.index(True) :]
        return sum(rest) >= 0.8 * len(rest)

    for delimiter in (";", "\t", ","):
        n_fields = Counter(len(text.split(delimiter)) for text in tail[-10:]).most_common(1)[0][0]
        if n_fields < 2:
            continue
        for decimal_comma in (False, True) if delimiter != "," else (False,):
            if mostly_data(delimiter, decimal_comma, n_fields):
                return delimiter, decimal_comma, n_fields
    if mostly_data(None, False, 1):
        return None, False, 1
    raise TraceError(
        src.name,
        [
            "cannot find rows of numbers separated by commas, semicolons or tabs near the "
            f"start of the file (a late line reads {tail[-1][:80]!r}); export the capture "
            "as delimited text with one sample per row"
        ],
    )


def _header_like(text: str, delimiter: str | None, n_fields: int, decimal_comma: bool) -> bool:
    fields = split(text, delimiter)
    while len(fields) > n_fields and not fields[-1]:
        fields.pop()  # a trailing separator the data rows do not have
    filled = [f for f in fields if f]
    if not filled or len(fields) > n_fields or any(is_number(f, decimal_comma) for f in filled):
        return False
    if n_fields == 1:  # a lone name: no key-value pair, no separators
        return not re.search(r"[:=,;\t]", text)
    return len(fields) >= 2


def _units_row(text: str, delimiter: str | None) -> list[str | None] | None:
    """The units of a row such as ``(s),(V)`` or ``s;mV``, or None if it is not one."""
    units: list[str | None] = []
    for part in split(text, delimiter):
        inner = part.strip("()[] ")
        if not inner:
            units.append(None)
        elif unit_or_none(inner) is None:
            return None
        else:
            units.append(inner)
    return units if any(units) else None


def _metadata_entry(line: Line, delimiter: str | None) -> tuple[str, str]:
    text = line.text.strip()
    if delimiter is None:  # one-column data: the preamble may use any separator
        delimiter = next((d for d in (",", ";", "\t") if d in text), None)
    if delimiter and delimiter in text:
        key, _, value = text.partition(delimiter)
        value = value.strip().rstrip(delimiter).strip()
    elif re.search(r"[:=]", text):
        key, _, value = re.split(r"([:=])", text, maxsplit=1)
    else:
        key, value = text, ""
    return clean(key) or f"line {line.number}", value.strip()


def sniff_layout(src: Source) -> Layout:
    """Work out the layout from the head of ``src``.

    Raises
    ------
    TraceError
        When the head is not text or holds no rows of numbers.
    """
    check_text(src)
    lines = head_lines(src)
    delimiter, decimal_comma, n_fields = _sniff_delimiter(src, lines)
    filled = [line for line in lines if line.text.strip()]
    is_data: dict[int, bool] = {}

    def data_row(i: int) -> bool:
        if i not in is_data:
            is_data[i] = is_data_row(filled[i].text, delimiter, decimal_comma, n_fields)
        return is_data[i]

    body_index = 0
    for i in range(len(filled)):
        # A data row followed by mostly data rows (one bad value must not end the preamble
        # late: that line is reported with its number when the body is read).
        following = [data_row(k) for k in range(i + 1, min(i + 4, len(filled)))]
        if data_row(i) and sum(following) >= min(2, len(following)):
            body_index = i
            break
    before = filled[:body_index]
    header: list[str] | None = None
    units: list[str | None] = [None] * n_fields
    if before and _header_like(before[-1].text, delimiter, n_fields, decimal_comma):
        last = before.pop()
        unit_row = _units_row(last.text, delimiter)
        if (
            unit_row is not None
            and before
            and _header_like(before[-1].text, delimiter, n_fields, decimal_comma)
        ):
            header = split(before.pop().text, delimiter)
            units = (unit_row + [None] * n_fields)[:n_fields]
        else:
            header = split(last.text, delimiter)
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
    samples = [split(line.text, delimiter) for line in filled[body_index : body_index + 200]]
    return Layout(
        delimiter, decimal_comma, n_fields, body.number, body.offset, header, units,
        metadata, metadata_lines, samples,
    )


# --------------------------------------------------------------------------- columns

_TIME_NAMES = {"time", "t", "x", "sec", "seconds", "timestamp", "time stamp", "zeit"}
_INDEX_NAMES = {
    "index", "idx", "sample", "samples", "sample index", "sample number", "sample no",
    "point", "points", "point number", "pt", "n", "no", "no.", "#", "number",
}


def norm(text: str) -> str:
    """Case-folded, whitespace-collapsed text for comparing names."""
    return " ".join(text.casefold().split())


@dataclass
class Column:
    """One column of the file."""

    index: int
    text: str  # as in the header (or "column k", 1-based)
    name: str  # without its unit
    unit: str | None

    @property
    def label(self) -> str:
        return f"'{excerpt(self.text)}' (index {self.index})"

    def matches(self, wanted: str) -> bool:
        key = norm(wanted)
        return key in {norm(self.text), norm(self.name), f"column {self.index + 1}"}

    @property
    def kind(self) -> str | None:
        """``"time"``, ``"index"`` (sample numbers) or None, from the unit and name."""
        if self.unit is not None:
            found = unit_or_none(self.unit)
            if found is not None and found[0] == "s":
                return "time"
        name = norm(self.name)
        if name in _INDEX_NAMES:
            return "index"
        if name in _TIME_NAMES or name.startswith("time"):
            return "time"
        return None

    def has_data(self, layout: Layout) -> bool:
        """Named in the header, or filled in some of the first data rows."""
        named = layout.header is not None and bool(layout.header[self.index])
        return named or any(len(r) > self.index and r[self.index] for r in layout.samples)


def columns(layout: Layout) -> list[Column]:
    """Every column of the file, named from the header or as ``column k``."""
    found = []
    for i in range(layout.n_fields):
        if layout.header is not None and layout.header[i]:
            name, unit_text = split_header_field(layout.header[i])
            text = layout.header[i]
        else:
            name, unit_text, text = f"column {i + 1}", None, f"column {i + 1}"
        found.append(Column(i, text, name, layout.units[i] or unit_text))
    return found


def _wanted(wanted: object) -> str:
    """The column the user asked for, quoted as a short excerpt."""
    return quoted(wanted) if isinstance(wanted, str) else excerpt(repr(wanted))


def pick_column(source: str, available: list[Column], wanted: object, role: str) -> Column:
    """The column ``wanted`` names (name, ``column k`` or 0-based index).

    Raises
    ------
    TraceError
        Naming the available columns when none (or several) match.
    """
    if isinstance(wanted, bool) or not isinstance(wanted, (str, int)):
        raise TraceError(
            source, [f"the {role} must be a column name or a 0-based index, got {_wanted(wanted)}"]
        )
    if isinstance(wanted, int):
        found = [available[wanted]] if 0 <= wanted < len(available) else []
    else:
        found = [c for c in available if c.matches(wanted)]
    if len(found) == 1:
        return found[0]
    listing = ", ".join(c.label for c in available)
    if found:
        problem = f"the {role} {_wanted(wanted)} matches several columns ({listing}); choose by index"
    else:
        problem = (
            f"there is no column {_wanted(wanted)} for the {role}; the file has {listing}; "
            "give one of these names (case and unit optional) or a 0-based index"
        )
    raise TraceError(source, [problem])


def column_scale(column: Column, dimension: str, problems: list[str]) -> float:
    """Scale to SI from the column's unit (1 without one); problems appended."""
    if column.unit is None:
        return 1.0
    try:
        found, scale = unit(column.unit)
    except UnitProblem as exc:
        problems.append(f"column {column.label}: {exc}; correct the header")
        return 1.0
    if found != dimension and not (dimension == "V" and found == "A"):
        kind = "a time" if dimension == "s" else "a voltage"
        problems.append(
            f"column {column.label} is in {column.unit!r}, which is not {kind} unit; "
            "choose another column or correct the header"
        )
    return scale


def looks_like_sample_numbers(layout: Layout, column: Column) -> bool:
    """True when the column's first values are whole numbers counting up by one."""
    texts = [row[column.index] for row in layout.samples if len(row) > column.index]
    if not texts or not all(re.fullmatch(r"[+-]?\d+", t) for t in texts):
        return False
    values = np.array([int(t) for t in texts])
    return values.size >= 2 and bool(np.all(np.diff(values) == 1))
