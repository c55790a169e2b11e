"""Malformed and hostile traces and peak tables for the corpus (``xcheck ringdown``,
``ringdown --peaks`` and ``compare``).

Each case is a variant of an invented base: :func:`base_rows`, a scope export of a
12 V ring-down at 5 kHz decaying at 2000 /s with 5 mV of seeded noise, and
:data:`PEAKS_BASE`, ten extrema of the same ring read off cursors. The variants cover
what the brief of a trace reader meets: files empty, header-only or of one sample;
NaN and infinite cells; times out of order, repeated or near 1e300; a constant signal
and values near 1e300; mixed delimiters and line ends; damaged and oversized gzip;
binary garbage; a 10 MB line; the event at the very end of the record.
"""

from __future__ import annotations

import codecs
import gzip
import math
import zlib

import numpy as np

from security.corpus_case import Case

HEADER = "time [s],CH1 [V]"


def base_rows(count: int = 800) -> list[str]:
    """The base capture's data rows (``time,volts``), invented and seeded."""
    rng = np.random.default_rng(7)
    time = -0.2e-3 + 2.5e-6 * np.arange(count)
    after = np.clip(time, 0.0, None)
    volts = np.where(time < 0, 12.0,
                     12.0 * np.exp(-2000.0 * after) * np.cos(2 * math.pi * 5e3 * after))
    volts = volts + rng.normal(0.0, 0.005, count)
    return [f"{t:.6e},{v:.5f}" for t, v in zip(time, volts)]


def csv(rows: list[str], header: str | None = HEADER, end: str = "\n") -> bytes:
    """The rows as a file (after ``header`` when given), each line ended by ``end``."""
    lines = ([header] if header is not None else []) + rows
    return (end.join(lines) + end).encode()


ROWS = base_rows()
BASE_TRACE = csv(ROWS)

#: Ten extrema of the same ring (time in ms, volts, reading uncertainty), invented.
PEAKS_ROWS = [
    f"{0.1 * k:.4f},{12.0 * math.exp(-2000.0 * 1e-4 * k) * (-1) ** k:.4f},0.01"
    for k in range(10)
]
PEAKS_HEADER = "time [ms],value [V],uncertainty [V]"
PEAKS_BASE = csv(PEAKS_ROWS, PEAKS_HEADER)


def _with_cell(row: int, cell: str, column: int = 1) -> bytes:
    rows = list(ROWS)
    fields = rows[row].split(",")
    fields[column] = cell
    rows[row] = ",".join(fields)
    return csv(rows)


def _scaled(time_factor: float = 1.0, time_offset: float = 0.0,
            volt_factor: float = 1.0) -> bytes:
    rows = []
    for row in ROWS:
        t, v = (float(x) for x in row.split(","))
        rows.append(f"{t * time_factor + time_offset:.17g},{v * volt_factor:.17g}")
    return csv(rows)


def gzip_bomb(expanded: int = 2 * 2**30 + 2**20) -> bytes:
    """A valid gzip file (many members) whose text, a header and ``0,0`` rows, expands
    to ``expanded`` bytes: about a thousandth of that on disk (deflate's best ratio)."""
    chunk = b"0,0\n" * (2**20 // 4)
    member = gzip.compress(chunk, compresslevel=9, mtime=0)
    head = gzip.compress((HEADER + "\n").encode(), mtime=0)
    return head + member * (expanded // len(chunk))


def _empty_and_tiny() -> list[Case]:
    category = "empty, tiny and constant traces"
    return [
        Case(category, "empty trace", "ringdown", b"", words=("empty",)),
        Case(category, "header only", "ringdown", csv([])),
        Case(category, "one sample", "ringdown", csv(ROWS[:1])),
        Case(category, "nine samples", "ringdown", csv(ROWS[:9]), words=("10",)),
        Case(category, "white space only trace", "ringdown", b" \n\n\t\n"),
        Case(category, "byte-order mark only", "ringdown", codecs.BOM_UTF8),
        Case(category, "byte-order mark and the base trace", "ringdown",
             codecs.BOM_UTF8 + BASE_TRACE, expect=0),
        Case(category, "preamble only", "ringdown",
             b"Model,DSO-X\nSample interval,2.5e-6,s\nRecord length,800\n"),
        Case(category, "a constant signal", "ringdown",
             csv([r.split(",")[0] + ",1.00000" for r in ROWS]), words=("every row",)),
        Case(category, "all zeros", "ringdown", csv([r.split(",")[0] + ",0" for r in ROWS])),
        Case(category, "the base trace (valid)", "ringdown", BASE_TRACE, expect=0),
        Case(category, "the base trace through compare (valid)", "compare", BASE_TRACE,
             expect=0),
    ]


def _nonfinite() -> list[Case]:
    category = "NaN, inf and empty cells"
    return [
        Case(category, "NaN in the channel", "ringdown", _with_cell(400, "NaN"),
             words=("line 402",)),
        Case(category, "inf in the channel", "ringdown", _with_cell(400, "inf"),
             words=("line 402",)),
        Case(category, "-inf in the time column", "ringdown", _with_cell(300, "-inf", 0),
             words=("line 302",)),
        Case(category, "nan in the time column", "ringdown", _with_cell(300, "nan", 0),
             words=("line 302",)),
        Case(category, "an empty cell", "ringdown", _with_cell(500, ""), words=("line 502",)),
        Case(category, "every channel cell NaN", "ringdown",
             csv([r.split(",")[0] + ",nan" for r in ROWS])),
        Case(category, "a word in a cell", "ringdown", _with_cell(200, "overload"),
             words=("line 202",)),
        Case(category, "true and false cells", "ringdown",
             csv([r.split(",")[0] + ("," + "true" if i % 2 else ",false")
                  for i, r in enumerate(ROWS)])),
        Case(category, "NaN through compare", "compare", _with_cell(400, "NaN"),
             words=("line 402",)),
    ]


def _time_axis() -> list[Case]:
    category = "time axis"
    swapped = list(ROWS)
    swapped[300], swapped[301] = swapped[301], swapped[300]
    duplicate = list(ROWS)
    duplicate[301] = duplicate[300].split(",")[0] + "," + duplicate[301].split(",")[1]
    flat_then_event = [f"{i * 1e-6:.6e},{12.0 if i < len(ROWS) - 3 else 0.0:.5f}"
                       for i in range(len(ROWS))]
    return [
        Case(category, "two times swapped", "ringdown", csv(swapped), words=("line 302",)),
        Case(category, "a repeated time", "ringdown", csv(duplicate), words=("line 303",)),
        Case(category, "times reversed", "ringdown", csv(ROWS[::-1])),
        Case(category, "every time equal", "ringdown",
             csv(["0.0," + r.split(",")[1] for r in ROWS])),
        Case(category, "times offset by 1e300", "ringdown", _scaled(time_offset=1e300)),
        Case(category, "times scaled to about 1e300", "ringdown", _scaled(time_factor=1e303),
             words=("line 2",)),
        Case(category, "times near 1e308 (their sum overflows)", "ringdown",
             csv([f"{1e308 * (0.5 + k * 1e-4):.17g},{r.split(',')[1]}"
                  for k, r in enumerate(ROWS)]), words=("line 2",)),
        Case(category, "times scaled to about 1e-300", "ringdown",
             _scaled(time_factor=1e-297)),
        Case(category, "sample numbers instead of times", "ringdown",
             csv([f"{i},{r.split(',')[1]}" for i, r in enumerate(ROWS)], "Index,CH1 [V]")),
        Case(category, "the event at the very end", "ringdown", csv(flat_then_event)),
        Case(category, "times of 400 digits", "ringdown",
             csv(["1" + "0" * 400 + f"{i:04d}," + r.split(",")[1]
                  for i, r in enumerate(ROWS)])),
    ]


def _magnitudes() -> list[Case]:
    category = "magnitudes"
    return [
        Case(category, "values near 1e300", "ringdown", _scaled(volt_factor=1e300),
             words=("line 2",)),
        Case(category, "values near 1e-300", "ringdown", _scaled(volt_factor=1e-300)),
        Case(category, "subnormal values near 1e-320", "ringdown",
             _scaled(volt_factor=1e-321)),
        Case(category, "values near 1e300 through compare", "compare",
             _scaled(volt_factor=1e300), words=("line 2",)),
        Case(category, "hex numbers", "ringdown",
             csv([r.split(",")[0] + f",0x{i % 16:x}" for i, r in enumerate(ROWS)])),
        Case(category, "a 1e308 spike", "ringdown", _with_cell(400, "1e308"),
             words=("line 402",)),
        Case(category, "a 1e309 cell (beyond a double)", "ringdown", _with_cell(400, "1e309"),
             words=("line 402",)),
    ]


def _layout() -> list[Case]:
    category = "delimiters and layout"
    mixed = [r.replace(",", ";") if i % 2 else r for i, r in enumerate(ROWS)]
    tabbed = [r.replace(",", "\t") if i % 3 == 0 else r for i, r in enumerate(ROWS)]
    ragged = list(ROWS)
    ragged[400] += ",7,8"
    decimal_comma = [r.replace(",", ";").replace(".", ",") for r in ROWS]
    return [
        Case(category, "commas and semicolons mixed", "ringdown", csv(mixed)),
        Case(category, "tabs and commas mixed", "ringdown", csv(tabbed)),
        Case(category, "semicolons with decimal commas (valid)", "ringdown",
             csv(decimal_comma, "time [s];CH1 [V]"), expect=0),
        Case(category, "CRLF line ends (valid)", "ringdown", csv(ROWS, end="\r\n"), expect=0),
        Case(category, "CR-only line ends", "ringdown", csv(ROWS, end="\r")),
        Case(category, "form feeds between rows", "ringdown", csv(ROWS, end="\n\f")),
        Case(category, "a ragged row", "ringdown", csv(ragged), words=("line 402",)),
        Case(category, "a NUL byte after the head", "ringdown",
             csv(ROWS * 4).replace(b"\n", b"\n\0", 1)[:40] + csv(ROWS * 4)[40:] + b"\0\n"),
        Case(category, "a NUL byte deep in the body", "ringdown",
             csv(ROWS * 40)[:-30] + b"\0" + csv(ROWS * 40)[-29:]),
        Case(category, "a 10 MB single line", "ringdown", b"1," * 5_000_000 + b"\n"),
        Case(category, "a 10 MB line after the header", "ringdown",
             (HEADER + "\n").encode() + b"7" * 10_000_000 + b"\n" + csv(ROWS, None)),
        Case(category, "1000 columns (valid: the first channel is read)", "ringdown",
             csv([r + ",0" * 998 for r in ROWS], HEADER + "".join(f",c{i}" for i in range(998))),
             expect=0),
        Case(category, "a trailing garbage line", "ringdown",
             BASE_TRACE + b"end of record -- saved by scope\n"),
        Case(category, "a header with control characters", "ringdown",
             csv(ROWS, "time [s],CH1\x1b[31m [V]")),
        Case(category, "invalid UTF-8 in a column name (valid: shown replaced)", "ringdown",
             b"time [s],CH\xff\xfe1 [V]\n" + csv(ROWS, None), expect=0),
        Case(category, "UTF-16 trace", "ringdown",
             codecs.BOM_UTF16_LE + BASE_TRACE.decode().encode("utf-16-le"), words=("UTF-16",)),
    ]


def _compression_and_files() -> list[Case]:
    category = "compression, binary and file kinds"
    packed = gzip.compress(BASE_TRACE, mtime=0)
    return [
        Case(category, "gzip of the base trace (valid)", "ringdown", packed, expect=0,
             suffix=".csv.gz"),
        Case(category, "truncated gzip", "ringdown", packed[: len(packed) // 2],
             suffix=".csv.gz", words=("gzip",)),
        Case(category, "gzip header only", "ringdown", packed[:10], suffix=".csv.gz"),
        Case(category, "gzip with a bad checksum", "ringdown",
             packed[:-8] + bytes(8), suffix=".csv.gz"),
        Case(category, "gzip of binary garbage", "ringdown",
             gzip.compress(bytes(range(256)) * 64, mtime=0), suffix=".csv.gz"),
        Case(category, "raw deflate named .gz", "ringdown", zlib.compress(BASE_TRACE),
             suffix=".csv.gz"),
        Case(category, "gzip expanding to over 2 GiB", "ringdown", gzip_bomb(),
             suffix=".csv.gz", process=True, words=("decompressed",)),
        Case(category, "binary garbage trace", "ringdown",
             bytes(np.random.default_rng(3).integers(0, 256, 65536, dtype=np.uint8))),
        Case(category, "a PNG image", "ringdown", b"\x89PNG\r\n\x1a\n" + bytes(200)),
        Case(category, "a trace folder", "ringdown", special="folder"),
        Case(category, "a trace FIFO", "ringdown", special="fifo", words=("FIFO",)),
        Case(category, "/dev/zero as a trace", "ringdown", special="dev_zero",
             words=("character device",)),
        Case(category, "a missing trace", "ringdown", special="missing"),
    ]


def _peak_tables() -> list[Case]:
    category = "peak tables"
    rows = PEAKS_ROWS

    def table(new_rows: list[str], header: str = PEAKS_HEADER) -> bytes:
        return csv(new_rows, header)

    def cell(row: int, column: int, text: str) -> bytes:
        changed = list(rows)
        fields = changed[row].split(",")
        fields[column] = text
        changed[row] = ",".join(fields)
        return table(changed)

    swapped = list(rows)
    swapped[4], swapped[5] = swapped[5], swapped[4]
    return [
        Case(category, "the base peak table (valid)", "peaks", PEAKS_BASE, expect=0),
        Case(category, "empty peak table", "peaks", b"", words=("empty",)),
        Case(category, "peak header only", "peaks", table([])),
        Case(category, "two peaks", "peaks", table(rows[:2]), words=("3",)),
        Case(category, "NaN peak value", "peaks", cell(3, 1, "NaN"), words=("line 5",)),
        Case(category, "inf peak time", "peaks", cell(3, 0, "inf"), words=("line 5",)),
        Case(category, "peaks out of order", "peaks", table(swapped), words=("line 7",)),
        Case(category, "a repeated peak time", "peaks",
             cell(5, 0, rows[4].split(",")[0]), words=("line 7",)),
        Case(category, "zero uncertainty", "peaks", cell(2, 2, "0"), words=("line 4",)),
        Case(category, "negative uncertainty", "peaks", cell(2, 2, "-0.01"),
             words=("line 4",)),
        Case(category, "peak value 1e300", "peaks", cell(0, 1, "1e300"), words=("line 2",)),
        Case(category, "peak times near 1e300", "peaks",
             table([f"{1e300 + k * 1e285:.17g},{r.split(',', 1)[1]}"
                    for k, r in enumerate(rows)])),
        Case(category, "constant peaks", "peaks",
             table([f"{0.1 * k:.4f},1.0,0.01" for k in range(10)])),
        Case(category, "peaks in mixed delimiters", "peaks",
             table([r.replace(",", ";") if k % 2 else r for k, r in enumerate(rows)])),
        Case(category, "four columns", "peaks",
             table([r + ",1" for r in rows], PEAKS_HEADER + ",extra")),
        Case(category, "SPICE suffixes in cells (valid)", "peaks",
             table([f"{100 * k}u,{12.0 * math.exp(-0.2 * k) * (-1) ** k * 1e3:.1f}m"
                    for k in range(10)], "time,value"), expect=0),
        Case(category, "the M trap in a cell", "peaks",
             table([f"{0.1 * k:.4f},1M" for k in range(10)], "time [ms],value"),
             words=("line 2",)),
        Case(category, "peaks of booleans", "peaks",
             table(["true,false,true"] * 5)),
        Case(category, "binary garbage peak table", "peaks", bytes(range(256)) * 4),
        Case(category, "a 10 MB peak line", "peaks",
             (PEAKS_HEADER + "\n").encode() + b"9" * 10_000_000 + b"\n"),
        Case(category, "subnormal peak values", "peaks",
             table([f"{0.1 * k:.4f},{1e-320 * (-1) ** k},0.01" for k in range(10)])),
        Case(category, "a peak table FIFO", "peaks", special="fifo", words=("FIFO",)),
        Case(category, "the last peak at the record's end only", "peaks",
             table(rows[:2] + [rows[-1]])),
    ]


def trace_cases() -> list[Case]:
    """Every trace and peak-table case of the corpus."""
    return (_empty_and_tiny() + _nonfinite() + _time_axis() + _magnitudes() + _layout()
            + _compression_and_files() + _peak_tables())
