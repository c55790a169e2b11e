"""``xcheck simulate FIXTURE [--out DIR]``: predict a fixture's waveform two ways.

Builds the circuit from the values the fixture states (measured where given, else the
label; parasitics written ``"?"`` are left out and listed), runs ngspice and the closed
form, and writes into DIR (default ``reports/<fixture name>/simulate/``):

- ``prediction.csv``: ``time_s,ngspice_probe_V,theory_probe_V`` and, when the loop
  current is known, ``ngspice_current_A,theory_current_A``; the closed form is
  evaluated on ngspice's own time points. Without a closed form only the ngspice
  columns are written.
- ``overlay.png``: both probe voltages and their difference against time.

It prints alpha, omega0, f_d, zeta and Q and the largest difference between the two
engines. Each file is written atomically (a temporary file, then a rename).
"""

from __future__ import annotations

import argparse
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from xcheck.circuit.model import Circuit
from xcheck.engines.ngspice import simulate_ngspice
from xcheck.engines.theory import SecondOrder, TheoryNotApplicable, characterise, simulate_theory
from xcheck.atomic import PNG_METADATA, png_is_ours, write_atomically
from xcheck.errors import XcheckError
from xcheck.circuit.expand import build_circuit
from xcheck.fixture.model import Fixture
from xcheck.fixture.reader import load_fixture
from xcheck.circuit.parameters import parameters_from_fixture
from xcheck.values import format_eng
from xcheck.engines.waveform import Waveform

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


def default_folder(fixture_path: Path) -> Path:
    """Where the outputs for ``fixture_path`` go without ``--out``."""
    return DEFAULT_ROOT / fixture_path.stem / "simulate"


@dataclass(frozen=True)
class Prediction:
    """Both engines' predictions for one circuit.

    Attributes
    ----------
    ngspice
        ngspice's waveform.
    theory
        The closed form on ngspice's time points, or None when it does not apply.
    order
        The reduced loop's characteristic numbers, or None.
    why_no_theory
        Why the closed form does not apply ("" when it does).
    reference
        The voltage differences are relative to (initial capacitor voltage or step), V.
    """

    ngspice: Waveform
    theory: Waveform | None
    order: SecondOrder | None
    why_no_theory: str
    reference: float

    @property
    def largest_difference(self) -> tuple[float, float] | None:
        """(largest |ngspice - theory| in V, time at which it occurs in s), or None."""
        if self.theory is None:
            return None
        gap = np.abs(self.ngspice.probe_voltage - self.theory.probe_voltage)
        k = int(np.argmax(gap))
        return float(gap[k]), float(self.ngspice.time[k])


def reference_voltage(circuit: Circuit, waveform: Waveform) -> float:
    """The step's voltage for a step response, else the largest initial capacitor
    voltage; the largest probe voltage when both are zero."""
    sources = [abs(e.value) for e in circuit.elements if e.kind == "V" and e.value]
    if circuit.response == "step" and sources:
        return max(sources)
    initial = [abs(e.initial) for e in circuit.elements if e.kind == "C" and e.initial]
    if initial:
        return max(initial)
    peak = float(np.max(np.abs(waveform.probe_voltage))) if waveform.time.size else 0.0
    return peak if peak > 0 else 1.0


def predict(circuit: Circuit) -> Prediction:
    """Run ngspice and, where it applies, the closed form on ngspice's time points."""
    spice = simulate_ngspice(circuit)
    try:
        order = characterise(circuit)
        theory = simulate_theory(circuit, spice.time)
        why = ""
    except TheoryNotApplicable as exc:
        order, theory, why = None, None, str(exc)
    return Prediction(spice, theory, order, why, reference_voltage(circuit, spice))


def run(args: argparse.Namespace) -> int:
    """Simulate, write the CSV and PNG, print the summary; return 0."""
    fixture_path = Path(args.fixture)
    fixture = load_fixture(fixture_path)
    circuit = build_circuit(fixture, parameters_from_fixture(fixture))
    prediction = predict(circuit)
    folder = Path(args.out) if args.out is not None else default_folder(fixture_path)
    if folder.exists() and not folder.is_dir():
        raise XcheckError(f"{folder}: exists and is not a folder; give --out a folder name")
    csv_path = folder / CSV_NAME
    png_path = folder / PNG_NAME
    _refuse_foreign(csv_path, png_path)
    write_atomically(csv_path, lambda tmp: write_csv(tmp, prediction))
    write_atomically(png_path, lambda tmp: write_overlay(tmp, prediction, circuit.title))
    sys.stdout.write(summary_text(fixture, prediction, [csv_path, png_path]))
    return 0


def _written_by_xcheck(csv_path: Path) -> bool:
    try:
        with open(csv_path, encoding="utf-8", errors="replace") as handle:
            return handle.readline().startswith("time_s,ngspice_probe_V")
    except OSError:
        return False


def _refuse_foreign(csv_path: Path, png_path: Path) -> None:
    """Replace earlier simulate output only: never a file xcheck did not write."""
    csv_ok = not csv_path.exists() or _written_by_xcheck(csv_path)
    png_ok = not png_path.exists() or png_is_ours(png_path)
    if csv_ok and png_ok:
        return
    raise XcheckError(
        f"{csv_path.parent}: holds {CSV_NAME} or {PNG_NAME} that an earlier "
        "'xcheck simulate' did not write; nothing was written. Choose another --out folder "
        "or move those files away."
    )


def _unknown_parasitics(fixture: Fixture) -> list[str]:
    return [
        f"{name} {key}"
        for name in fixture.loop
        for key in sorted(fixture.parts[name].unknown)
        if key != "nominal"
    ]


def summary_text(fixture: Fixture, prediction: Prediction, written: list[Path]) -> str:
    """The lines ``xcheck simulate`` prints."""
    lines = [f"{fixture.title}"]
    unknown = _unknown_parasitics(fixture)
    if unknown:
        lines.append(
            "  not known (written '?'), so left out of both predictions: " + ", ".join(unknown)
        )
    order = prediction.order
    if order is None:
        lines.append(f"  closed form does not apply: {prediction.why_no_theory}")
        lines.append("  written: the ngspice prediction only")
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
    gap = prediction.largest_difference
    if gap is not None:
        size, when = gap
        lines.append(
            f"  largest difference between ngspice and theory: {format_eng(size, 'V')} at "
            f"t = {format_eng(when, 's')} ({size / prediction.reference:.2e} of "
            f"{format_eng(prediction.reference, 'V')})"
        )
    for note in (prediction.ngspice.notes + (prediction.theory.notes if prediction.theory else ())):
        lines.append(f"  note: {note}")
    lines.append("  wrote " + ", ".join(str(p) for p in written))
    return "\n".join(lines) + "\n"


def columns(prediction: Prediction) -> dict[str, np.ndarray]:
    """CSV columns (SI units in the names), in order."""
    spice, theory = prediction.ngspice, prediction.theory
    data = {"time_s": spice.time, "ngspice_probe_V": spice.probe_voltage}
    if theory is not None:
        data["theory_probe_V"] = theory.probe_voltage
    if spice.loop_current is not None:
        data["ngspice_current_A"] = spice.loop_current
        if theory is not None and theory.loop_current is not None:
            data["theory_current_A"] = theory.loop_current
    return data


def write_csv(path: Path, prediction: Prediction) -> None:
    """Write the prediction as CSV: a plain header line, then full-precision rows
    (formatted by pyarrow, which writes the shortest text that reads back exactly)."""
    import pyarrow as pa
    import pyarrow.csv as pacsv

    data = columns(prediction)
    table = pa.table({name: pa.array(np.asarray(v, dtype=float)) for name, v in data.items()})
    with open(path, "wb") as handle:
        handle.write((",".join(data) + "\n").encode("ascii"))
        pacsv.write_csv(table, handle, write_options=pacsv.WriteOptions(include_header=False))


def write_overlay(path: Path, prediction: Prediction, title: str) -> None:
    """PNG: both probe voltages (solid and dashed) and, below, their difference."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.ticker import EngFormatter

    spice, theory = prediction.ngspice, prediction.theory
    rows = 2 if theory is not None else 1
    figure, axes = plt.subplots(rows, 1, figsize=(8, 5.5 if rows == 2 else 4), sharex=True,
                                squeeze=False, height_ratios=[3, 1.4][:rows])
    top = axes[0][0]
    top.plot(spice.time, spice.probe_voltage, color="black", linestyle="-", linewidth=1.6,
             label="ngspice (circuit simulation)")
    if theory is not None:
        top.plot(theory.time, theory.probe_voltage, color="0.55", linestyle="--",
                 linewidth=1.4, label="closed-form theory")
    top.set_ylabel("probe voltage (V)")
    top.set_title(title, fontsize=10)
    top.legend(loc="best", frameon=False)
    top.yaxis.set_major_formatter(EngFormatter(unit="V"))
    if theory is not None:
        bottom = axes[1][0]
        bottom.plot(spice.time, theory.probe_voltage - spice.probe_voltage, color="black",
                    linestyle=":", linewidth=1.2, label="theory minus ngspice")
        bottom.set_ylabel("difference (V)")
        bottom.yaxis.set_major_formatter(EngFormatter(unit="V"))
        bottom.legend(loc="best", frameon=False)
    axes[-1][0].set_xlabel("time since t = 0 (s)")
    axes[-1][0].xaxis.set_major_formatter(EngFormatter(unit="s"))
    for row in axes:
        row[0].grid(True, linestyle=":", linewidth=0.6, color="0.75")
    figure.tight_layout()
    figure.savefig(path, dpi=120, format="png", metadata=PNG_METADATA)
    plt.close(figure)



