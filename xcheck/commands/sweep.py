"""``xcheck sweep FIXTURE [--trace FILE | --peaks FILE] [--runs N] [--workers N |
--cluster ADDRESS] [--seed S] [--engine exact|ngspice] [--out DIR]``.

Monte Carlo over the fixture's tolerances and meter readings (:mod:`xcheck.sweep`),
the sensitivities of f_d, alpha and the fit residual, and which value's tolerance could
explain the measurement; the report goes to ``reports/<name>-sweep/`` by default.
"""

from __future__ import annotations

import argparse
import contextlib
import sys
from collections.abc import Iterator
from pathlib import Path

from xcheck.errors import XcheckError


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the sweep options."""
    parser.add_argument("fixture", help="fixture description (TOML)")
    source = parser.add_mutually_exclusive_group()
    source.add_argument("--trace", help="scope export to compare the band with (CSV, optionally .gz)")
    source.add_argument("--peaks", help="table of extrema read off cursors (CSV)")
    parser.add_argument("--runs", type=int,
                        help="trials per candidate (default: as many as JCGM 101's adaptive "
                             "procedure needs)")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int,
                       help="local worker processes (default: the CPUs available; 1 runs here)")
    where.add_argument("--cluster", metavar="ADDRESS",
                       help="run on a Dask scheduler instead, e.g. tcp://10.0.0.5:8786")
    parser.add_argument("--seed", type=int, help="seed of the draws (default: a fresh one, "
                                                 "recorded in the report)")
    parser.add_argument("--engine", choices=("exact", "ngspice"), default="exact",
                        help="evaluate each trial on the exact engine (default) or in ngspice")
    parser.add_argument("--digits", type=int, default=2,
                        help="significant digits the adaptive procedure asks of the standard "
                             "uncertainties of f_d and alpha (default 2)")
    parser.add_argument("--out", help="report folder (default reports/<fixture name>-sweep/)")
    parser.add_argument("--force", action="store_true",
                        help="replace the --out folder even when it is not an earlier sweep "
                             "(still written whole, then swapped in)")


@contextlib.contextmanager
def _progress(enabled: bool) -> Iterator:
    """A rich progress bar on stderr when ``enabled``; yields (trials, stage) callbacks."""
    if not enabled:
        yield None, None
        return
    from rich.console import Console
    from rich.progress import (BarColumn, MofNCompleteColumn, Progress, TextColumn,
                               TimeElapsedColumn)

    with Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                  TimeElapsedColumn(), console=Console(stderr=True), transient=True) as bar:
        task = bar.add_task("starting", total=None)

        def trials(candidate: str, done: int, total: int | None) -> None:
            bar.update(task, description=f"Monte Carlo: {candidate}", completed=done,
                       total=total)

        def stage(text: str) -> None:
            bar.update(task, description=text)

        yield trials, stage


def run(args: argparse.Namespace) -> int:
    """Run the sweep, write its folder, print the explanations and where they went."""
    from xcheck.atomic import check_output_folder, replacing_anyway
    from xcheck.fixture.reader import load_fixture
    from xcheck.report.sweep_report import SWEEP_HINT, sweep_folder_is_ours, write_sweep_report
    from xcheck.sweep.study import run_sweep

    if args.runs is not None and args.runs < 2:
        raise XcheckError(f"--runs {args.runs}: give at least 2 trials, e.g. --runs 2000")
    if args.seed is not None and args.seed < 0:
        raise XcheckError(f"--seed {args.seed}: give a whole number of at least 0")
    fixture = load_fixture(args.fixture)
    out = Path(args.out) if args.out else Path("reports") / f"{fixture.name}-sweep"
    check_output_folder(out, sweep_folder_is_ours, "--out folder", hint=SWEEP_HINT,
                        force=args.force, inputs=(args.fixture, args.trace, args.peaks))
    with _progress(sys.stderr.isatty()) as (trials, stage):
        result = run_sweep(fixture, trace=args.trace, peaks=args.peaks, runs=args.runs,
                           seed=args.seed, engine=args.engine, workers=args.workers,
                           cluster=args.cluster, digits=args.digits, progress=trials,
                           stage=stage)
    with replacing_anyway(out, args.force):
        folder = write_sweep_report(result, out)
    for sweep, found in zip(result.montecarlo.candidates, result.sensitivity):
        inside = sweep.band.inside
        share = f", {100 * inside:.3g} % of the measured samples inside the band" \
            if inside is not None else ""
        print(f"{sweep.candidate}: {sweep.trials} trials{share}. {found.sentence}".rstrip())
    print(f"seed {result.montecarlo.seed}; report: {folder / 'report.md'}")
    return 0
