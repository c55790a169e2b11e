"""``xcheck batch FOLDER [--workers N | --cluster ADDRESS] [--max-nrmse X] [--out DIR]``.

Every fixture below FOLDER with its capture beside it (``NAME.toml`` with ``NAME.csv``,
``NAME.csv.gz`` or ``NAME.peaks.csv``; :mod:`xcheck.sweep.batch`) is compared in
parallel; each gets its report and the batch an index. Exit 1 when a fixture misses
``--max-nrmse`` or stopped with an error, 0 otherwise, 2 for a bad folder or option.
"""

from __future__ import annotations

import argparse
import contextlib
import math
import sys
from collections.abc import Callable, Iterator
from pathlib import Path

from xcheck.errors import XcheckError


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the batch options."""
    parser.add_argument("folder", help="folder of fixtures (*.toml), each beside its capture")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int,
                       help="local worker processes (default: the CPUs available; 1 runs here)")
    where.add_argument("--cluster", metavar="ADDRESS",
                       help="run on a Dask scheduler instead, e.g. tcp://10.0.0.5:8786")
    parser.add_argument("--max-nrmse", type=float,
                        help="a fixture fails when its best candidate's NRMSE exceeds this "
                             "fraction (e.g. 0.02)")
    parser.add_argument("--out", help="batch folder (default reports/batch-<folder name>/)")
    parser.add_argument("--value", default="loop.extra_resistance", metavar="LABEL",
                        help="fitted value to tabulate and plot: PART.FIELD or "
                             "loop.extra_resistance (the default)")
    parser.add_argument("--no-ngspice", action="store_true",
                        help="skip the ngspice evaluation (closed form only)")
    parser.add_argument("--force", action="store_true",
                        help="replace the --out folder even when it is not an earlier batch "
                             "output (still written whole, then swapped in)")


@contextlib.contextmanager
def progress_bar(enabled: bool) -> Iterator[Callable[[int, int], None] | None]:
    """A rich progress bar on stderr when ``enabled``; yields its ``progress(done, total)``."""
    if not enabled:
        yield None
        return
    from rich.console import Console
    from rich.progress import (BarColumn, MofNCompleteColumn, Progress, TextColumn,
                               TimeElapsedColumn, TimeRemainingColumn)

    with Progress(TextColumn("comparing fixtures"), BarColumn(), MofNCompleteColumn(),
                  TimeElapsedColumn(), TimeRemainingColumn(), console=Console(stderr=True),
                  transient=True) as bar:
        task = bar.add_task("batch", total=None)
        yield lambda done, total: bar.update(task, completed=done, total=total)


def run(args: argparse.Namespace) -> int:
    """Run the batch, write its folder, print one line per fixture and the index's path."""
    from xcheck.atomic import check_output_folder, replacing_anyway
    from xcheck.report.batch_index import BATCH_HINT, ERROR, FAIL, batch_folder_is_ours
    from xcheck.sweep.batch import find_jobs, run_batch, write_batch
    from xcheck.values import format_eng

    if args.max_nrmse is not None and not (math.isfinite(args.max_nrmse) and args.max_nrmse >= 0):
        raise XcheckError(f"--max-nrmse {args.max_nrmse}: give a fraction of at least 0, "
                          "e.g. 0.02 for 2 %")
    folder = Path(args.folder)
    find_jobs(folder)  # a bad folder fails here, before any worker starts
    out = Path(args.out) if args.out else Path("reports") / f"batch-{folder.resolve().name}"
    check_output_folder(out, batch_folder_is_ours, "--out folder", hint=BATCH_HINT,
                        force=args.force, inputs=(folder,))
    with progress_bar(sys.stderr.isatty()) as progress:
        entries = run_batch(folder, workers=args.workers, cluster=args.cluster,
                            use_ngspice=not args.no_ngspice, value_label=args.value,
                            progress=progress)
    with replacing_anyway(out, args.force):
        written = write_batch(entries, out, folder=folder, value_label=args.value,
                              max_nrmse=args.max_nrmse)
    bad = 0
    for entry in entries:
        status = entry.status(args.max_nrmse)
        bad += status in (ERROR, FAIL)
        if status == ERROR:
            print(f"{status:8} {entry.name}: {entry.error}")
            continue
        nrmse = f"{100 * entry.nrmse:.3g} %" if math.isfinite(entry.nrmse) else "n/a"
        value = (format_eng(entry.value, entry.unit, 4) if math.isfinite(entry.value)
                 else "n/a")
        print(f"{status:8} {entry.name}: best {entry.best or 'none'}, NRMSE {nrmse}, "
              f"{args.value} {value}")
    print(f"{len(entries)} fixtures, {bad} failed or stopped with an error; "
          f"index: {written / 'index.md'}")
    return 1 if bad else 0
