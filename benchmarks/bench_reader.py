"""Reader throughput and memory: xcheck.capture.scope_csv.read_trace against a bare pyarrow.csv.read_csv.

Writes an invented capture (a generic preamble, then ``Time (s),CH1 (V),CH2 (V)``; 1 us
sampling, a damped ringing with noise, 8-bit-like quantisation) to a temporary
directory, plain or gzip-compressed, then measures in one run:

- throughput: ``pyarrow.csv.read_csv(path)`` (the preamble skipped, default options
  otherwise: the bare reader) and ``read_trace(path)`` (layout sniffing, the same
  reader, then every check: finite values, strictly increasing time, metadata
  cross-checks, quantisation step, clipping; conversion to SI numpy arrays), run
  ``--repeat`` times alternately; the best time of each is kept (the run least
  disturbed by other work). Goal: ratio >= 0.8.
- peak memory: in a fresh child process per reader, after the imports and a warm-up
  read of a small file, the peak resident set size during one read (``VmHWM`` of
  /proc/self/status, reset through /proc/self/clear_refs; Linux only) less the resident
  size before it, divided by the size of the file's columns parsed as float64
  (rows x columns x 8 bytes). Goal: <= 3.

Usage: python -m benchmarks.bench_reader [--rows 10000000] [--repeat 7] [--gzip] [--keep DIR]
"""

from __future__ import annotations

import argparse
import gc
import gzip
import json
import re
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pyarrow.csv as pacsv

from benchmarks.table import Row, judged
from xcheck.capture.scope_csv import read_trace

#: The invented preamble (key, value lines a generic instrument might write).
PREAMBLE = (
    "Instrument,invented bench oscilloscope (example data)",
    "Sample interval,1e-06 s",
    "Record length,{rows}",
    "Note,benchmark capture; not a real measurement",
)
HEADER = "Time (s),CH1 (V),CH2 (V)"
#: Columns in the file (time and two channels).
COLUMNS = 3
THROUGHPUT_GOAL = 0.8
MEMORY_GOAL = 3.0
REPO = Path(__file__).resolve().parent.parent


def write_capture(path: Path, rows: int, seed: int = 0) -> None:
    """An invented capture: 1 us sampling, a 20 kHz ring-down quantised to 10 V / 256.

    Parameters
    ----------
    path
        File to write; gzip-compressed when the name ends in ``.gz``.
    rows
        Number of data rows.
    seed
        Seed of the noise.
    """
    rng = np.random.default_rng(seed)
    chunk = 1_000_000
    opener = gzip.open if path.suffix == ".gz" else open
    with opener(path, "wt", encoding="ascii") as handle:
        handle.write("\n".join(PREAMBLE).format(rows=rows) + "\n" + HEADER + "\n")
        for start in range(0, rows, chunk):
            k = np.arange(start, min(rows, start + chunk))
            t = k * 1e-6 - 1e-3
            after = np.clip(t, 0, None)
            ring = 4.0 * np.exp(-200.0 * after) * np.cos(2 * np.pi * 2e4 * after)
            ch1 = np.where(t < 0, 4.0, ring) + 0.02 * rng.standard_normal(k.size)
            ch1 = np.round(ch1 / (10 / 256)) * (10 / 256)
            ch2 = np.round((0.5 * ring + 0.02 * rng.standard_normal(k.size)) / (10 / 256)) * (10 / 256)
            np.savetxt(handle, np.column_stack((t, ch1, ch2)), fmt=("%.6e", "%.6g", "%.6g"), delimiter=",")


def bare_read(path: Path):
    """The bare reader: pyarrow's CSV reader with the preamble skipped."""
    return pacsv.read_csv(path, read_options=pacsv.ReadOptions(skip_rows=len(PREAMBLE)))


def seconds(fn) -> float:
    """Wall-clock time of one call."""
    start = time.perf_counter()
    fn()
    return time.perf_counter() - start


def throughput(path: Path, rows: int, repeat: int) -> tuple[float, float]:
    """Best times (bare, read_trace) in seconds over ``repeat`` alternating runs."""
    bare_times, ours_times = [], []
    for _ in range(repeat):  # alternate, so both see the same machine state
        bare_times.append(seconds(lambda: bare_read(path)))
        ours_times.append(seconds(lambda: read_trace(path)))
    if len(read_trace(path)) != rows or bare_read(path).num_rows != rows:
        raise RuntimeError("a reader returned the wrong number of rows")
    return min(bare_times), min(ours_times)


def _peak_in_child(path: Path, which: str) -> float:
    """Growth of the peak RSS (bytes) over one read, in a fresh interpreter."""
    out = subprocess.run(
        [sys.executable, "-m", "benchmarks.bench_reader", "--peak", which, str(path)],
        cwd=REPO, capture_output=True, text=True, check=True,
    )
    return float(json.loads(out.stdout.strip().splitlines()[-1])["peak_growth_bytes"])


def _status_kib(field: str) -> int:
    """A ``VmRSS``/``VmHWM`` line of /proc/self/status, in KiB."""
    text = Path("/proc/self/status").read_text(encoding="ascii")
    return int(re.search(rf"^{field}:\s+(\d+) kB", text, re.MULTILINE).group(1))


def _peak_here(which: str, path: Path) -> float:
    """Child side of :func:`_peak_in_child`: warm up on a small file, then measure.

    ``resource.getrusage(...).ru_maxrss`` cannot be used: Linux carries the parent's
    high-water mark across ``fork`` + ``exec`` into the child. The per-process peak
    ``VmHWM`` is reset instead by writing ``5`` to ``/proc/self/clear_refs`` (Linux
    proc(5)).
    """
    reader = read_trace if which == "ours" else bare_read
    with tempfile.TemporaryDirectory() as tmp:
        small = Path(tmp) / ("warm.csv.gz" if path.suffix == ".gz" else "warm.csv")
        write_capture(small, 2000)
        reader(small)
    gc.collect()
    Path("/proc/self/clear_refs").write_text("5", encoding="ascii")
    before = _status_kib("VmRSS")
    result = reader(path)
    peak = _status_kib("VmHWM")
    del result
    return 1024.0 * max(0, peak - before)


def measure(rows: int, repeat: int, compressed: bool, key: str, workdir: Path) -> list[Row]:
    """Throughput and memory rows for one file.

    Parameters
    ----------
    rows
        Data rows of the invented capture.
    repeat
        Alternating timed runs of each reader.
    compressed
        Write the file gzip-compressed.
    key
        Prefix of the rows' keys.
    workdir
        Where to write the file.

    Returns
    -------
    list of Row
        Throughput ratio, then peak memory ratio.
    """
    path = workdir / (f"capture_{rows}.csv" + (".gz" if compressed else ""))
    if not path.exists():
        write_capture(path, rows)
    label = f"{rows:,} rows" + (", gzip" if compressed else "")
    bare, ours = throughput(path, rows, repeat)
    ratio = bare / ours
    rows_out = [
        Row(
            f"{key}-speed",
            f"trace import throughput ({label}; preamble, 2 channels)",
            f">= {THROUGHPUT_GOAL}x",
            "bare pyarrow.csv.read_csv of the same file",
            f"{ratio:.2f}x",
            judged(ratio >= THROUGHPUT_GOAL),
            f"best of {repeat}: bare {bare:.3f} s, read_trace {ours:.3f} s (validation included)"
            + ("" if ratio >= THROUGHPUT_GOAL else
               "; likely reason: " + (
                   "the content is decompressed twice, once to refuse a file that expands past "
                   "xcheck's 2 GiB limit before any row is parsed (a small gzip file can hold "
                   "gigabytes of rows, which the parse would put in memory first), then by the "
                   "parse; that first pass costs about as much as the bare read's own "
                   "decompression" if compressed else
                   "the checks and the copy into numpy arrays on top of the parse (and machine "
                   "load: the ratio moves by about 0.07 between runs)")),
        )
    ]
    columns_bytes = rows * COLUMNS * 8.0
    ours_peak = _peak_in_child(path, "ours")
    bare_peak = _peak_in_child(path, "bare")
    mem = ours_peak / columns_bytes
    rows_out.append(
        Row(
            f"{key}-memory",
            f"trace import peak memory ({label})",
            f"<= {MEMORY_GOAL:g}x",
            f"file's {COLUMNS} columns as float64 ({columns_bytes / 1e6:.0f} MB)",
            f"{mem:.2f}x",
            judged(mem <= MEMORY_GOAL),
            f"peak RSS over one read less RSS before it, fresh child process, after imports and "
            f"a warm-up read (/proc/self/status VmHWM reset by clear_refs; not getrusage, "
            f"whose ru_maxrss Linux carries over from the parent): read_trace {ours_peak / 1e6:.0f} MB, "
            f"bare pyarrow {bare_peak / 1e6:.0f} MB ({bare_peak / columns_bytes:.2f}x)"
            + ("" if mem <= MEMORY_GOAL else
               "; likely reason: " + (
                   "pyarrow.csv.read_csv itself, whose own peak on this file is as high (its "
                   "parse buffers and the table's chunks); read_trace's numpy copies add "
                   "nothing above it" if ours_peak <= 1.05 * bare_peak else
                   "pyarrow's chunks and the contiguous numpy copies are alive at the same "
                   "time, plus the parse buffers")),
        )
    )
    return rows_out


def pandas_row(rows: int, repeat: int, key: str, workdir: Path) -> Row:
    """read_trace against ``pandas.read_csv`` of the same file, only if pandas is installed.

    Parameters
    ----------
    rows, repeat, key, workdir
        As for :func:`measure` (the plain-text file is reused).

    Returns
    -------
    Row
        The ratio (reported without a goal), or a skipped row saying pandas is missing.
    """
    figure = f"trace import throughput vs pandas ({rows:,} rows)"
    reference = "pandas.read_csv of the same file"
    try:
        import pandas  # noqa: PLC0415 - optional, never a dependency
    except ImportError:
        return Row(key, figure, "none (reported)", reference, "", "skipped",
                   "pandas is not installed (not a dependency; not added for this)")
    path = workdir / f"capture_{rows}.csv"
    if not path.exists():
        write_capture(path, rows)
    theirs, ours = [], []
    for _ in range(repeat):
        theirs.append(seconds(lambda: pandas.read_csv(path, skiprows=len(PREAMBLE))))
        ours.append(seconds(lambda: read_trace(path)))
    ratio = min(theirs) / min(ours)
    return Row(key, figure, "none (reported)", reference, f"{ratio:.2f}x", "info",
               f"best of {repeat}: pandas {min(theirs):.3f} s, read_trace {min(ours):.3f} s")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=10_000_000)
    parser.add_argument("--repeat", type=int, default=7)
    parser.add_argument("--gzip", action="store_true", help="gzip-compress the capture")
    parser.add_argument("--keep", type=Path, default=None, help="write the file here and keep it (reused when already there)")
    parser.add_argument("--peak", nargs=2, metavar=("READER", "PATH"), help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.peak:
        which, path = args.peak
        print(json.dumps({"peak_growth_bytes": _peak_here(which, Path(path))}))
        return
    with tempfile.TemporaryDirectory() as tmp:
        for row in measure(args.rows, args.repeat, args.gzip, "reader", args.keep or Path(tmp)):
            print(row.line())


if __name__ == "__main__":
    main()
