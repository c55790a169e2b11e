"""Run every benchmark and write BENCHMARKS.md.

Usage: ``python -m benchmarks [--quick] [--large] [--out FILE]``

- ``--quick``: tiny sizes (a smoke run in seconds; the numbers mean nothing).
- ``--large``: add the 10-million-row reader rows and the 10-million-sample compare size.
- ``--out``: where to write the table (default ``BENCHMARKS.md`` at the repository root).
"""

from __future__ import annotations

import argparse
import datetime as dt
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path

from benchmarks import (bench_compare, bench_crb, bench_exact, bench_ngspice, bench_reader,
                        bench_startup, bench_sweep)
from benchmarks.table import Row, machine, render

REPO = Path(__file__).resolve().parent.parent


@dataclass(frozen=True)
class Sizes:
    """How big each benchmark runs."""

    reader_rows: int
    reader_repeat: int
    large_rows: int
    large_repeat: int
    crb_trials: int
    bisection_steps: int
    startup_runs: int
    exact_sets: int
    exact_spice_runs: int
    sweep_runs: int
    compare_sizes: tuple[int, ...]
    compare_large: int


FULL = Sizes(1_000_000, 7, 10_000_000, 3, 300, 10, 7, 1000, 20, 200,
             (10_000, 100_000, 1_000_000), 10_000_000)
QUICK = Sizes(20_000, 1, 100_000, 1, 2, 0, 1, 10, 1, 4, (2_000, 5_000), 20_000)


def all_rows(sizes: Sizes, large: bool, workdir: Path) -> list[Row]:
    """Every row of the table, in order (a) to (g).

    Parameters
    ----------
    sizes
        :data:`FULL` or :data:`QUICK`.
    large
        Also measure the reader on ``sizes.large_rows`` rows and compare on
        ``sizes.compare_large`` samples.
    workdir
        Scratch directory for the generated captures.

    Returns
    -------
    list of Row
    """
    rows: list[Row] = []
    rows += bench_reader.measure(sizes.reader_rows, sizes.reader_repeat, False, "a-plain", workdir)
    rows += bench_reader.measure(sizes.reader_rows, sizes.reader_repeat, True, "a-gzip", workdir)
    rows.append(bench_reader.pandas_row(sizes.reader_rows, sizes.reader_repeat, "a-pandas", workdir))
    if large:
        rows += bench_reader.measure(sizes.large_rows, sizes.large_repeat, False, "a-large", workdir)
    rows += bench_crb.rows(sizes.crb_trials)
    rows += bench_ngspice.rows(sizes.bisection_steps)
    rows += bench_exact.rows(sizes.exact_sets, sizes.exact_spice_runs)
    compare_sizes = [*sizes.compare_sizes, *([sizes.compare_large] if large else [])]
    rows += bench_compare.rows(compare_sizes, workdir)
    rows += bench_startup.rows(sizes.startup_runs)
    rows += bench_sweep.rows(sizes.sweep_runs)
    return rows


def main(argv: list[str] | None = None) -> int:
    """Command-line entry: run, write the file, print where it went."""
    parser = argparse.ArgumentParser(prog="python -m benchmarks", description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="tiny sizes (smoke run)")
    parser.add_argument("--large", action="store_true",
                        help="add the 10-million-row reader rows and compare on 1e7 samples")
    parser.add_argument("--out", type=Path, default=REPO / "BENCHMARKS.md", help="output file")
    args = parser.parse_args(argv)
    when = dt.datetime.now(dt.timezone.utc)
    with tempfile.TemporaryDirectory() as tmp:
        rows = all_rows(QUICK if args.quick else FULL, args.large, Path(tmp))
    command = " ".join(["python -m benchmarks", *(argv if argv is not None else sys.argv[1:])])
    text = render(rows, machine(), command, when, quick=args.quick)
    args.out.write_text(text, encoding="utf-8")
    print(f"wrote {args.out}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
