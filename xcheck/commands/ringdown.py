"""``xcheck ringdown TRACE``: frequency and decay of a measured ring-down, with uncertainties.

The file is read, aligned and estimated by :func:`xcheck.ringdown.from_file.ringdown_from_file`
(with ``--peaks`` it is a table of extrema read off cursors); the figure is
:func:`xcheck.report.figures.ringdown_figure`. This module holds the arguments, the calls
and the printing.

Prints the table (value +- standard error, Cramér-Rao bound) in engineering notation,
the envelope findings and notes; writes a PNG (the trace with the fitted model; the
extrema on a logarithmic axis with the fitted envelope, flagged extrema marked) and,
with ``--json``, the numbers in SI units. A trace that settles without ringing
(overdamped, critically damped, first order) gets its time constants, omega0 and zeta
instead, and its own figure (:func:`xcheck.report.aperiodic_figure.aperiodic_figure`).
Exit status 2 on bad input.
"""

from __future__ import annotations

import argparse
import json
import math
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from xcheck.atomic import (
    json_is_ours,
    png_is_ours,
    refuse_foreign,
    write_file_atomically,
    write_text_atomically,
)
from xcheck.errors import ValueParseError, XcheckError
from xcheck.report.aperiodic_figure import aperiodic_figure
from xcheck.report.figures import ringdown_figure
from xcheck.report.ringdown_json import ringdown_json
from xcheck.ringdown import (
    AperiodicCircuit,
    AperiodicEstimate,
    DerivedCircuit,
    Estimate,
    RingdownEstimate,
    derive_aperiodic_circuit,
    derive_circuit,
)
from xcheck.ringdown.from_file import FileRingdown, ringdown_from_file
from xcheck.values import format_eng, parse_value

if TYPE_CHECKING:
    from xcheck.capture.align import Alignment

#: Folder (relative to the current directory) the PNG goes to without ``--out``.
DEFAULT_ROOT = Path("reports")
PNG_NAME = "ringdown.png"
#: Keys an earlier ``--json`` result holds: only such a file is replaced.
JSON_KEYS = ("damped_frequency_hz", "neper_frequency_per_s")
#: The same for the result of a trace that did not ring.
APERIODIC_JSON_KEYS = ("regime", "time_constants_s")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the ``ringdown`` subcommand's arguments."""
    parser.add_argument(
        "trace",
        type=Path,
        metavar="TRACE",
        help="waveform file (CSV, optionally .gz) or, with --peaks, a peak table",
    )
    parser.add_argument(
        "--column", default=None, help="channel to use: header name (e.g. 'ch1') or 0-based index"
    )
    parser.add_argument(
        "--time-column",
        default=None,
        help="time (or sample-number) column, by name or 0-based index",
    )
    parser.add_argument(
        "--peaks", action="store_true", help="TRACE is a table of extrema read off scope cursors"
    )
    parser.add_argument(
        "--json",
        type=Path,
        metavar="FILE",
        default=None,
        help="also write the numbers to FILE (JSON, SI units)",
    )
    parser.add_argument(
        "--force",
        action="store_true",
        help="replace the --out and --json files even when xcheck did not write them "
        "(each still written whole, then renamed into place)",
    )
    parser.add_argument(
        "--out",
        type=Path,
        metavar="PNG",
        default=None,
        help="figure to write (default: reports/<trace name>/ringdown/ringdown.png)",
    )
    parser.add_argument(
        "--event-time",
        default=None,
        metavar="T",
        help="event time in the file's time base, e.g. '1.5m' (default: found from the trace)",
    )
    parser.add_argument(
        "--expect",
        choices=("natural", "step"),
        default="natural",
        help="what the event is: a charged capacitor released (natural) or a step "
        "(default natural)",
    )
    parser.add_argument(
        "--modes", type=int, default=1, metavar="N", help="damped sinusoids to fit (default 1)"
    )
    parser.add_argument(
        "--capacitance",
        default=None,
        metavar="C",
        help="known loop capacitance, e.g. '47u': reports the implied L and series R",
    )
    parser.add_argument(
        "--inductance",
        default=None,
        metavar="L",
        help="known loop inductance, e.g. '10u': reports the implied C and series R",
    )
    parser.add_argument(
        "--capacitance-stderr", default="0", metavar="dC", help="standard error of --capacitance"
    )
    parser.add_argument(
        "--inductance-stderr", default="0", metavar="dL", help="standard error of --inductance"
    )


def _value(option: str, text: str | None, unit: str) -> float | None:
    if text is None:
        return None
    try:
        return parse_value(text, unit=unit)
    except ValueParseError as exc:
        raise XcheckError(f"{option}: {exc}") from None


def _index_or_name(text: str | None) -> str | int | None:
    if text is None:
        return None
    return int(text) if text.strip().lstrip("-").isdigit() else text


def run(args: argparse.Namespace) -> int:
    """Read, align, estimate, print, write the figure (and JSON); return 0."""
    if args.modes < 1:
        raise XcheckError(f"--modes: expected 1 or more damped sinusoids, got {args.modes}")
    event_time = _value("--event-time", args.event_time, "s")
    capacitance = _value("--capacitance", args.capacitance, "F")
    inductance = _value("--inductance", args.inductance, "H")
    c_err = _value("--capacitance-stderr", args.capacitance_stderr, "F") or 0.0
    l_err = _value("--inductance-stderr", args.inductance_stderr, "H") or 0.0
    for option, number in (("--capacitance", capacitance), ("--inductance", inductance)):
        if number is not None and number <= 0:
            raise XcheckError(f"{option}: expected a positive value, got {number!r}")
    if c_err < 0 or l_err < 0:
        raise XcheckError(
            "--capacitance-stderr/--inductance-stderr: expected zero or a positive value"
        )
    result = ringdown_from_file(
        args.trace,
        peaks=args.peaks,
        column=_index_or_name(args.column),
        time_column=_index_or_name(args.time_column),
        event_time=event_time,
        expect=args.expect,
        modes=args.modes,
        allow_aperiodic=True,
    )
    estimate = result.estimate
    derived: DerivedCircuit | AperiodicCircuit | None = None
    if capacitance is not None or inductance is not None:
        derive = derive_aperiodic_circuit if estimate.aperiodic else derive_circuit
        derived = derive(
            estimate,  # type: ignore[arg-type]
            capacitance=capacitance,
            inductance=inductance,
            capacitance_stderr=c_err,
            inductance_stderr=l_err,
        )
    png = args.out or DEFAULT_ROOT / args.trace.name.split(".")[0] / "ringdown" / PNG_NAME
    refuse_foreign(png, png_is_ours, "--out", force=args.force)
    if args.json is not None:
        refuse_foreign(args.json, _json_is_ours, "--json", force=args.force)
    figure = aperiodic_figure if estimate.aperiodic else ringdown_figure
    write_file_atomically(
        png,
        lambda tmp: figure(
            tmp,
            estimate,  # type: ignore[arg-type]
            result.time,
            result.voltage,
            result.excluded,
            title=str(args.trace),
        ),
    )
    written = [png]
    if args.json is not None:
        text = json.dumps(ringdown_json(result, derived), indent=2, allow_nan=False)
        write_text_atomically(args.json, text + "\n", option="--json")
        written.append(args.json)
    if isinstance(estimate, AperiodicEstimate):
        assert derived is None or isinstance(derived, AperiodicCircuit)
        print(aperiodic_text(estimate, derived, _context_lines(result), written))
    else:
        assert derived is None or isinstance(derived, DerivedCircuit)
        print(summary_text(estimate, derived, _context_lines(result), written))
    return 0


def _json_is_ours(path: Path) -> bool:
    """True when ``path`` holds an earlier ``xcheck ringdown --json`` result (of a ringing
    or a non-ringing trace)."""
    return json_is_ours(path, keys=JSON_KEYS) or json_is_ours(path, keys=APERIODIC_JSON_KEYS)


def _context_lines(result: FileRingdown) -> list[str]:
    if result.alignment is None:
        return [f"peak table {result.source_name}: {len(result.time)} extrema"]
    clipped = int(np.sum(result.excluded))
    return _alignment_lines(result.source_name, result.column, result.alignment, clipped)


def _alignment_lines(source: str, column: str, a: Alignment, clipped: int) -> list[str]:
    lines = [f"trace {source}, channel {column}"]
    how = "given" if a.manual else "found"
    lines.append(
        f"event at {format_eng(a.event_time, 's', 4)} ({how}); pre-event level "
        f"{format_eng(a.baseline, 'V')}, noise {format_eng(a.noise_rms, 'V')} rms, "
        f"droop {format_eng(a.droop_per_s, 'V')}/s"
    )
    if a.inverted:
        lines.append(
            "the first swing has the opposite sign to the one expected: inverted probe or channel?"
        )
    if clipped:
        lines.append(f"{clipped} clipped samples after the event are left out of the fit")
    lines += list(a.notes)
    return lines


def _digits(value: float, stderr: float) -> int:
    """Significant digits that show ``value`` down to two digits of its standard error."""
    if not (math.isfinite(value) and math.isfinite(stderr)) or value == 0 or stderr <= 0:
        return 4
    return int(
        min(max(math.floor(math.log10(abs(value))) - math.floor(math.log10(stderr)) + 2, 3), 12)
    )


def _row(label: str, item: Estimate | None, unit: str) -> list[str] | None:
    if item is None:
        return None
    value = format_eng(item.value, unit, _digits(item.value, item.stderr))
    err = format_eng(item.stderr, unit, 2) if math.isfinite(item.stderr) else "n/a"
    crb = format_eng(item.crb, unit, 2) if item.crb is not None else "-"
    return [label, value, "± " + err, crb]


def table_rows(estimate: RingdownEstimate, derived: DerivedCircuit | None) -> list[list[str]]:
    """Rows of the printed table: quantity, value, standard error, sqrt(Cramér-Rao bound)."""
    rows = [
        _row("damped frequency f_d", estimate.damped_frequency, "Hz"),
        _row("neper frequency alpha", estimate.neper_frequency, "Np/s"),
        _row("angular frequency omega_d", estimate.angular_frequency, "rad/s"),
        _row("initial voltage v(0)", estimate.initial_volts, "V"),
        _row("amplitude A", estimate.amplitude, "V"),
        _row("phase phi", estimate.phase, "rad"),
        _row("offset", estimate.offset, "V"),
    ]
    for i, mode in enumerate(estimate.extra_modes, 2):
        rows += [
            _row(f"mode {i}: f_d", mode.damped_frequency, "Hz"),
            _row(f"mode {i}: alpha", mode.neper_frequency, "Np/s"),
            _row(f"mode {i}: amplitude", mode.amplitude, "V"),
        ]
    if derived is not None:
        rows += [
            _row("natural frequency f0", derived.natural_frequency, "Hz"),
            _row("damping ratio zeta", derived.damping_ratio, ""),
            _row("quality factor Q", derived.quality_factor, ""),
            _row("capacitance C", derived.capacitance, "F"),
            _row("inductance L", derived.inductance, "H"),
            _row("series resistance R", derived.resistance, "ohm"),
        ]
    return [r for r in rows if r is not None]


def summary_text(
    estimate: RingdownEstimate,
    derived: DerivedCircuit | None,
    context: list[str],
    written: list[Path],
) -> str:
    """Everything ``xcheck ringdown`` prints."""
    header = ["quantity", "value", "std. error", "CRB"]
    rows = table_rows(estimate, derived)
    widths = [max(len(r[i]) for r in rows + [header]) for i in range(4)]
    lines = list(context)
    lines.append(f"method: {estimate.method}")
    lines.append(
        f"samples used {estimate.samples_used}, excluded {estimate.samples_excluded}, "
        f"effective {estimate.effective_samples:.0f}; "
        f"noise {format_eng(estimate.noise_sigma, 'V')} "
        f"({estimate.noise_source}); residual rms {format_eng(estimate.residual_rms, 'V')}"
    )
    lines.append("")
    lines.append("  ".join(h.ljust(w) for h, w in zip(header, widths)))
    for r in rows:
        lines.append("  ".join(c.ljust(w) for c, w in zip(r, widths)))
    lines.append("(CRB: square root of the Cramér-Rao bound for white noise of the stated level)")
    lines.append("")
    verdict = "one exponential" if estimate.envelope_exponential else "NOT one exponential"
    lines.append(f"envelope: {verdict}; flagged extrema: {estimate.flagged_extrema or 'none'}")
    lines += ["  " + f for f in estimate.envelope.findings]
    if estimate.alternate is not None:
        alt = estimate.alternate
        which = "with" if estimate.excludes_flagged else "without"
        lines.append(
            f"  {which} the flagged extrema: f_d {format_eng(alt.damped_frequency.value, 'Hz', 6)} "
            f"± {format_eng(alt.damped_frequency.stderr, 'Hz', 2)}, alpha "
            f"{format_eng(alt.neper_frequency.value, 'Np/s', 5)} "
            f"± {format_eng(alt.neper_frequency.stderr, 'Np/s', 2)}"
        )
    for note in estimate.notes + (derived.notes if derived else ()):
        lines.append(f"note: {note}")
    if not estimate.success:
        lines.append("warning: the fit did not converge cleanly; treat the numbers with doubt")
    lines.append("wrote " + ", ".join(str(p) for p in written))
    return "\n".join(lines)


def aperiodic_rows(
    estimate: AperiodicEstimate, derived: AperiodicCircuit | None
) -> list[list[str]]:
    """Rows of the printed table of a trace that did not ring (same columns)."""
    two = len(estimate.time_constants) == 2
    rows: list[list[str] | None] = []
    for i, (tau, rate) in enumerate(zip(estimate.time_constants, estimate.decay_rates), 1):
        which = ("", "") if not two else (f"{i}", " (slow)" if i == 1 else " (fast)")
        rows.append(_row(f"time constant tau{which[0]}{which[1]}", tau, "s"))
        rows.append(_row(f"decay rate s{which[0]} = 1/tau{which[0]}", rate, "/s"))
    rows += [
        _row("natural frequency omega0", estimate.natural_angular_frequency, "rad/s"),
        _row("natural frequency f0", estimate.natural_frequency, "Hz"),
        _row("damping ratio zeta", estimate.damping_ratio, ""),
        _row("settled level", estimate.settled_level, "V"),
        _row("initial voltage v(0)", estimate.initial_volts, "V"),
    ]
    for i, amp in enumerate(estimate.amplitudes, 1):
        rows.append(_row(f"amplitude A{i}" if two else "amplitude A", amp, "V"))
    rows.append(_row("ramp B of (A + B t)", estimate.ramp, "V/s"))
    if derived is not None:
        rows += [
            _row("capacitance C", derived.capacitance, "F"),
            _row("inductance L", derived.inductance, "H"),
            _row("series resistance R", derived.resistance, "ohm"),
        ]
    return [r for r in rows if r is not None]


def aperiodic_text(
    estimate: AperiodicEstimate,
    derived: AperiodicCircuit | None,
    context: list[str],
    written: list[Path],
) -> str:
    """Everything ``xcheck ringdown`` prints for a trace that settles without ringing."""
    header = ["quantity", "value", "std. error", "CRB"]
    rows = aperiodic_rows(estimate, derived)
    widths = [max(len(r[i]) for r in rows + [header]) for i in range(4)]
    lines = list(context)
    lines.append(f"method: {estimate.method}")
    lines.append(
        f"samples used {estimate.samples_used}, excluded {estimate.samples_excluded}, "
        f"effective {estimate.effective_samples:.0f}; "
        f"noise {format_eng(estimate.noise_sigma, 'V')} "
        f"({estimate.noise_source}); residual rms {format_eng(estimate.residual_rms, 'V')}"
    )
    lines.append(
        f"no ringing: the response is {estimate.regime}; the record spans "
        f"{estimate.span_time_constants:.1f} time constants of the slowest decay"
    )
    lines.append("")
    lines.append("  ".join(h.ljust(w) for h, w in zip(header, widths)))
    for r in rows:
        lines.append("  ".join(c.ljust(w) for c, w in zip(r, widths)))
    lines.append("(CRB: square root of the Cramér-Rao bound for white noise of the stated level)")
    lines.append("")
    scores = ", ".join(
        f"{name} {value:.1f}" for name, value in estimate.information_criteria.items()
    )
    lines.append(f"model selection, BIC (lowest wins among the decays): {scores}")
    free = estimate.second_order_damping_ratio
    if free is not None and estimate.regime == "critically damped":
        lines.append(
            f"the free second-order fit gives zeta = {free.value:.4g} ± {free.stderr:.2g}"
        )
    for note in estimate.notes + (derived.notes if derived else ()):
        lines.append(f"note: {note}")
    if not estimate.success:
        lines.append("warning: the fit did not converge cleanly; treat the numbers with doubt")
    lines.append("wrote " + ", ".join(str(p) for p in written))
    return "\n".join(lines)
