"""``xcheck compare FIXTURE --sweep FILE [--trace FILE | --peaks FILE]``: the frequency
comparison, alone or fitted jointly with a time capture.

Called by :mod:`xcheck.commands.compare` when ``--sweep`` or ``--lcr`` is given: reads
the sweep (Touchstone by its suffix, an LCR-meter table with ``--lcr``, else a CSV
sweep), runs :func:`xcheck.frequency_compare.run_frequency_comparison` and writes the
report folder (:mod:`xcheck.report.frequency_report`).
"""

from __future__ import annotations

import argparse
import math
from pathlib import Path
from typing import Callable



def run_sweep(args: argparse.Namespace, fixture, out: Path, say: Callable[[str], None],
              event_time: float | None, column) -> int:
    """Run the frequency comparison the arguments ask for and write its report.

    Returns
    -------
    int
        0, or 1 when ``--max-nrmse`` is given and the best candidate's RMS log-ratio
        error (a relative error of the magnitude) exceeds it.
    """
    from xcheck.atomic import replacing_anyway
    from xcheck.compare import sha256_of
    from xcheck.frequency_compare import read_sweep_file, run_frequency_comparison
    from xcheck.measured import display_path, measure
    from xcheck.report.frequency_report import write_frequency_report

    path = args.lcr if getattr(args, "lcr", None) else args.sweep
    say("reading the sweep")
    if getattr(args, "lcr", None):
        from xcheck.capture.lcr_table import read_lcr_table

        sweep = read_lcr_table(path).sweep
    else:
        setting = fixture.swept
        sweep = read_sweep_file(path, setting.connection if setting is not None else None)
    inputs = [("fixture", display_path(fixture.source), sha256_of(fixture.source)),
              ("sweep", display_path(path), sha256_of(path))]
    timed = None
    if args.trace is not None or args.peaks is not None:
        say("reading and aligning the time capture")
        measured = measure(fixture, trace=args.trace, peaks=args.peaks, column=column,
                           event_time=event_time, keep_all=args.keep_all)
        timed = measured.observation(max_points=20_000)
        capture = args.trace if args.trace is not None else args.peaks
        inputs.append(("trace" if args.trace is not None else "peak table",
                       display_path(capture), sha256_of(capture)))
    comparison = run_frequency_comparison(fixture, sweep, timed=timed,
                                          use_ngspice=not args.no_ngspice, progress=say)
    say("writing the report")
    with replacing_anyway(out, getattr(args, "force", False)):
        folder = write_frequency_report(comparison, out, inputs=inputs)
    from xcheck.report.frequency_report import frequency_verdict

    print(frequency_verdict(comparison))
    print(f"report: {folder / 'report.md'}")
    best = comparison.best
    if best is None:
        return 1
    if args.max_nrmse is not None and not best.rms_log_error <= args.max_nrmse:
        error = best.rms_log_error
        shown = f"{100 * error:.3g} %" if math.isfinite(error) else "undefined"
        print(f"the best candidate's RMS error {shown} exceeds --max-nrmse "
              f"{100 * args.max_nrmse:.3g} %")
        return 1
    return 0
