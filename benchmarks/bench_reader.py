"""Reader throughput: xcheck.capture.scope_csv.read_trace against a bare pyarrow.csv.read_csv.

Writes a 10-million-row, two-column CSV (time, channel; an invented damped ringing with
noise, 8-bit-like quantisation) to a temporary directory, then times, in one run:

- ``pyarrow.csv.read_csv(path)`` with default options (the bare reader), and
- ``xcheck.capture.scope_csv.read_trace(path)``: layout sniffing, the same reader, then every check
  (finite values, strictly increasing time, metadata cross-checks, quantisation step,
  clipping) and the conversion to SI numpy arrays.

Each is run ``--repeat`` times alternately and the best time of each is kept (the
least disturbed by other work on the machine). Prints the rows per second of both and
the ratio; the goal is a ratio of at least 0.8.

Usage: python benchmarks/bench_reader.py [--rows 10000000] [--repeat 3] [--keep DIR]
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import numpy as np
import pyarrow.csv as pacsv

from xcheck.capture.scope_csv import read_trace


def write_capture(path: Path, rows: int, seed: int = 0) -> None:
    """An invented capture: 1 us sampling, a 20 kHz ring-down quantised to 10 V / 256."""
    rng = np.random.default_rng(seed)
    chunk = 1_000_000
    with open(path, "w", encoding="ascii") as handle:
        handle.write("Time (s),CH1 (V)\n")
        for start in range(0, rows, chunk):
            k = np.arange(start, min(rows, start + chunk))
            t = k * 1e-6 - 1e-3
            after = np.clip(t, 0, None)
            ring = 4.0 * np.exp(-200.0 * after) * np.cos(2 * np.pi * 2e4 * after)
            volts = np.where(t < 0, 4.0, ring) + 0.02 * rng.standard_normal(k.size)
            volts = np.round(volts / (10 / 256)) * (10 / 256)
            body = np.column_stack((t, volts))
            np.savetxt(handle, body, fmt=("%.6e", "%.6g"), delimiter=",")


def seconds(fn) -> float:
    """Wall-clock time of one call."""
    start = time.perf_counter()
    fn()
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=10_000_000)
    parser.add_argument("--repeat", type=int, default=7)
    parser.add_argument("--keep", type=Path, default=None, help="write the file here and keep it (reused when already there)")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        path = (args.keep or Path(tmp)) / "capture.csv"
        if not path.exists():
            start = time.perf_counter()
            write_capture(path, args.rows)
            size = path.stat().st_size / 1e6
            print(f"wrote {path} ({size:.0f} MB) in {time.perf_counter() - start:.1f} s")
        bare_times, ours_times = [], []
        for _ in range(args.repeat):  # alternate, so both see the same machine state
            bare_times.append(seconds(lambda: pacsv.read_csv(path)))
            ours_times.append(seconds(lambda: read_trace(path)))
        if len(read_trace(path)) != args.rows:
            raise SystemExit("read_trace returned the wrong number of rows")
        bare, ours = min(bare_times), min(ours_times)
        print(f"rows: {args.rows}")
        print(f"pyarrow.csv.read_csv: {bare:.3f} s  ({args.rows / bare / 1e6:.2f} M rows/s)")
        print(f"xcheck read_trace:    {ours:.3f} s  ({args.rows / ours / 1e6:.2f} M rows/s)")
        print(f"throughput ratio (read_trace / bare reader): {bare / ours:.2f}  (goal >= 0.8)")


if __name__ == "__main__":
    main()
