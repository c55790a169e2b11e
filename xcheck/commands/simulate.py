"""``xcheck simulate FIXTURE [--out DIR]``: predict a fixture's waveform two ways.

Builds the circuit from the values the fixture states (measured where given, else the
label; parasitics written ``"?"`` are left out and listed), runs ngspice and the exact
state-space engine, and writes into DIR (default ``reports/<fixture name>/simulate/``):

- ``prediction.csv``: ``time_s,ngspice_probe_V,theory_probe_V`` (``_A`` for a current
  probe) and, when the loop current is known, ``ngspice_current_A,theory_current_A``;
  the theory columns are the exact engine on ngspice's own time points.
- ``overlay.png``: both probe signals and their difference against time.

It prints the natural modes (frequency, damping, share of the response, the parts that
make each), alpha, omega0, f_d, zeta and Q where the circuit reduces to a textbook loop
(with the closed form's difference from the exact engine), and the largest difference
between the two engines. Each file is written atomically (a temporary file, then a rename), and only
over files an earlier ``xcheck simulate`` wrote. The prediction is
:func:`xcheck.engines.predict.predict_fixture`, the figure
:func:`xcheck.report.figures.prediction_figure`; this module holds the arguments, the
calls and the printing.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from xcheck.atomic import (
    csv_is_ours,
    png_is_ours,
    refuse_foreign,
    replacing_anyway,
    require_folder,
    require_writable,
    write_file_atomically,
)
from xcheck.engines.predict import CSV_HEADER_START, Prediction, predict_fixture, write_csv
from xcheck.fixture.model import Fixture
from xcheck.fixture.reader import load_fixture
from xcheck.report.figures import prediction_figure
from xcheck.values import format_eng

#: Folder (relative to the current directory) the outputs go to without ``--out``.
DEFAULT_ROOT = Path("reports")
CSV_NAME = "prediction.csv"
PNG_NAME = "overlay.png"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the ``simulate`` subcommand's arguments."""
    parser.add_argument("fixture", type=Path, metavar="FIXTURE", help="fixture file (TOML)")
    parser.add_argument(
        "--out",
        type=Path,
        metavar="DIR",
        default=None,
        help="folder for prediction.csv and overlay.png "
        "(default: reports/<fixture name>/simulate/)",
    )
    parser.add_argument(
        "--force",
        action="store_true",
        help="replace prediction.csv and overlay.png in the --out folder even when xcheck "
        "did not write them (each still written whole, then renamed into place)",
    )


def default_folder(fixture_path: Path) -> Path:
    """Where the outputs for ``fixture_path`` go without ``--out``."""
    return DEFAULT_ROOT / fixture_path.stem / "simulate"


def run(args: argparse.Namespace) -> int:
    """Simulate, write the CSV and PNG, print the summary; return 0."""
    fixture_path = Path(args.fixture)
    fixture = load_fixture(fixture_path)
    folder = Path(args.out) if args.out is not None else default_folder(fixture_path)
    csv_path = folder / CSV_NAME
    png_path = folder / PNG_NAME
    require_folder(folder, "--out")  # all checked before the simulation runs
    require_writable(csv_path, "--out")
    refuse_foreign(csv_path, _csv_is_ours, "--out folder", force=args.force)
    refuse_foreign(png_path, png_is_ours, "--out folder", force=args.force)
    prediction = predict_fixture(fixture)
    with replacing_anyway(csv_path, args.force), replacing_anyway(png_path, args.force):
        write_file_atomically(csv_path, lambda tmp: write_csv(tmp, prediction))
        write_file_atomically(
            png_path, lambda tmp: prediction_figure(tmp, prediction, prediction.title)
        )
    sys.stdout.write(summary_text(fixture, prediction, [csv_path, png_path]))
    return 0


def _csv_is_ours(path: Path) -> bool:
    return csv_is_ours(path, CSV_HEADER_START)


def summary_text(fixture: Fixture, prediction: Prediction, written: list[Path]) -> str:
    """The lines ``xcheck simulate`` prints."""
    lines = [f"{fixture.title}"]
    unknown = prediction.left_out
    if unknown:
        lines.append(
            "  not known (written '?'), so left out of both predictions: " + ", ".join(unknown)
        )
    if prediction.modes:
        lines.append("  natural modes (exact state space):")
        lines += [f"    {mode.sentence()}" for mode in prediction.modes]
    order = prediction.order
    if order is None:
        lines.append(f"  no closed form: {prediction.why_no_theory}")
    elif order.regime == "first order":
        lines.append("  closed form: first-order loop")
        lines.append(f"    time constant  {format_eng(order.time_constant, 's')}")
        lines.append(f"    alpha          {format_eng(order.alpha, 'Np/s')}")
    else:
        lines.append(f"  closed form: {order.regime} series RLC loop")
        lines += [
            f"    alpha (decay rate)           {format_eng(order.alpha, 'Np/s')}",
            f"    omega0 (undamped frequency)  {format_eng(order.omega0, 'rad/s')}",
            "    f_d (ringing frequency)      "
            + (format_eng(order.f_d, "Hz") if order.f_d > 0 else "none (no ringing)"),
            f"    zeta (damping ratio)         {order.zeta:.4g}",
            f"    Q (quality factor)           {order.q:.4g}",
        ]
    if prediction.closed_form_gap is not None:
        lines.append(f"    closed form vs exact engine: {prediction.closed_form_gap:.2e} of "
                     f"{format_eng(prediction.reference, prediction.unit)}")
    gap = prediction.largest_difference
    if gap is not None:
        size, when = gap
        lines.append(
            f"  largest difference between ngspice and theory: {format_eng(size, prediction.unit)} at "
            f"t = {format_eng(when, 's')} ({size / prediction.reference:.2e} of "
            f"{format_eng(prediction.reference, prediction.unit)})"
        )
    for note in (prediction.ngspice.notes + (prediction.theory.notes if prediction.theory else ())):
        lines.append(f"  note: {note}")
    lines.append("  wrote " + ", ".join(str(p) for p in written))
    return "\n".join(lines) + "\n"
