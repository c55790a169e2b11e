"""``xcheck compare FIXTURE (--trace FILE | --peaks FILE | --sweep FILE | --lcr FILE)
[--out DIR] [--max-nrmse X]``; a sweep may come with a trace or peak table (a joint fit,
:mod:`xcheck.commands.compare_sweep`)."""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

from xcheck.compare import run_comparison
from xcheck.errors import XcheckError
from xcheck.interrupts import stop_if_interrupted
from xcheck.fixture.reader import load_fixture
from xcheck.outcome import Comparison
from xcheck.report.markdown import write_report
from xcheck.values import parse_value


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the compare options."""
    parser.add_argument("fixture", help="fixture description (TOML)")
    source = parser.add_mutually_exclusive_group()
    source.add_argument("--trace", help="scope export (CSV, optionally .gz)")
    source.add_argument("--peaks", help="table of extrema read off cursors (CSV)")
    swept = parser.add_mutually_exclusive_group()
    swept.add_argument("--sweep", help="frequency sweep: CSV (magnitude and phase, or real "
                                       "and imaginary parts) or Touchstone .s1p/.s2p; the "
                                       "fixture's [swept] table says what it measured")
    swept.add_argument("--lcr", help="table of LCR-meter readings (frequency, value, ESR, D, "
                                     "Q or phase)")
    parser.add_argument("--column", help="channel of the trace: header name or 0-based index")
    parser.add_argument("--event-time", help="event time in the file's time base, e.g. '1.5m'")
    parser.add_argument("--out", help="report folder (default reports/<fixture name>/)")
    parser.add_argument("--max-nrmse", type=float,
                        help="exit 1 when the best candidate's NRMSE exceeds this fraction (e.g. 0.02)")
    parser.add_argument("--no-ngspice", action="store_true",
                        help="skip the ngspice evaluation (closed form only)")
    parser.add_argument("--keep-all", action="store_true",
                        help="keep peak-table readings flagged as off the envelope (left out by default)")
    parser.add_argument("--quiet", action="store_true", help="no progress lines")
    add_force_argument(parser)


def add_force_argument(parser: argparse.ArgumentParser) -> None:
    """Register ``--force`` (shared by the commands that write a report folder)."""
    parser.add_argument("--force", action="store_true",
                        help="replace the --out folder even when it is not an earlier xcheck "
                             "report (still written whole, then swapped in)")


def check_report_folder(out: Path, force: bool, inputs=()) -> None:
    """Check ``--out`` before the work starts (:func:`xcheck.atomic.check_output_folder`)."""
    from xcheck.atomic import REPORT_HINT, check_output_folder, report_folder_is_ours
    from xcheck.report.summary import SCHEMA

    check_output_folder(out, lambda path: report_folder_is_ours(path, SCHEMA), "--out",
                        hint=REPORT_HINT, force=force, inputs=inputs)


def _column(text: str | None) -> str | int | None:
    if text is None:
        return None
    return int(text) if text.strip().isdigit() else text


def progress_printer(quiet: bool):
    """A progress callback that writes timestamped lines to stderr."""
    start = time.monotonic()

    def say(message: str) -> None:
        stop_if_interrupted()  # between stages: a Ctrl-C a library did not pass on
        if not quiet:
            sys.stderr.write(f"[{time.monotonic() - start:5.1f} s] {message}\n")
            sys.stderr.flush()

    return say


def finish(comparison: Comparison, out: Path, max_nrmse: float | None, say,
           force: bool = False) -> int:
    """Write the report, print the verdict and where it went; return the exit status.
    ``force``: replace ``out`` even when it is not an earlier report (``--force``)."""
    from xcheck.atomic import replacing_anyway

    say("writing the report")
    with replacing_anyway(out, force):
        folder = write_report(comparison, out)
    print(comparison.verdict)
    print(f"report: {folder / 'report.md'}")
    best = comparison.best
    if max_nrmse is not None:
        nrmse = best.theory.nrmse if best is not None and best.theory is not None else float("inf")
        if not nrmse <= max_nrmse:
            print(f"best candidate NRMSE {nrmse:.3%} exceeds --max-nrmse {max_nrmse:.3%}")
            return 1
    return 0


def run(args: argparse.Namespace) -> int:
    """Run the comparison and write the report."""
    say = progress_printer(args.quiet)
    fixture = load_fixture(args.fixture)
    out = Path(args.out) if args.out else Path("reports") / fixture.name
    if args.trace is None and args.peaks is None and args.sweep is None and args.lcr is None:
        raise XcheckError("compare needs a measurement: a trace (--trace), a peak table "
                          "(--peaks), a frequency sweep (--sweep) or LCR-meter readings "
                          "(--lcr); a sweep may come with a trace or peak table")
    check_report_folder(out, args.force,
                        (args.fixture, args.trace, args.peaks, args.sweep, args.lcr))
    event_time = None
    if args.event_time is not None:
        try:
            event_time = parse_value(args.event_time, unit="s")
        except XcheckError as exc:
            raise XcheckError(f"--event-time: {exc}") from None
    if args.sweep is not None or args.lcr is not None:
        from xcheck.commands.compare_sweep import run_sweep

        return run_sweep(args, fixture, out, say, event_time, _column(args.column))
    comparison = run_comparison(
        fixture,
        trace=args.trace,
        peaks=args.peaks,
        column=_column(args.column),
        event_time=event_time,
        use_ngspice=not args.no_ngspice,
        progress=say,
        keep_all=args.keep_all,
    )
    return finish(comparison, out, args.max_nrmse, say, args.force)
