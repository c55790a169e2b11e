"""Predict a fixture's waveform with both engines: ngspice and the exact state space.

:func:`predict_fixture` builds the circuit from the values the fixture states (measured
where given, else the label; parasitics written ``"?"`` are left out and listed), runs
ngspice and the exact engine (:mod:`xcheck.engines.exact`) on ngspice's own time points,
and, where the circuit reduces to a textbook loop, the closed form as the exact
engine's check (its characteristic numbers go into the printout).
:func:`write_csv` writes the result as ``time_s,ngspice_probe_V,theory_probe_V`` and,
when the loop current is known, ``ngspice_current_A,theory_current_A``.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from xcheck.circuit.expand import build_circuit
from xcheck.circuit.model import Circuit
from xcheck.circuit.parameters import parameters_from_fixture
from xcheck.engines.exact import simulate_exact
from xcheck.engines.modes import NamedMode, natural_modes_named
from xcheck.engines.ngspice import simulate_ngspice
from xcheck.engines.theory import SecondOrder, TheoryNotApplicable, characterise, simulate_theory
from xcheck.engines.timing import reference_voltage
from xcheck.engines.waveform import Waveform
from xcheck.fixture.model import Fixture

#: How every prediction CSV starts: an earlier one may be replaced, nothing else.
CSV_HEADER_START = "time_s,ngspice_probe_"


@dataclass(frozen=True)
class Prediction:
    """Both engines' predictions for one circuit.

    Attributes
    ----------
    ngspice
        ngspice's waveform.
    theory
        The exact engine on ngspice's time points (the theory leg).
    order
        The reduced loop's characteristic numbers from the closed form, or None.
    why_no_theory
        Why the closed form does not apply ("" when it does).
    closed_form_gap
        Largest |exact - closed form| over the reference voltage, None without a
        closed form.
    modes
        The circuit's natural modes (see :func:`xcheck.engines.modes.natural_modes_named`).
    reference
        The voltage differences are relative to (initial capacitor voltage or step), V.
    left_out
        ``"PART key"`` of every parasitic the fixture writes ``"?"``, left out of both.
    title
        The circuit's title.
    """

    ngspice: Waveform
    theory: Waveform | None
    order: SecondOrder | None
    why_no_theory: str
    reference: float
    left_out: tuple[str, ...] = ()
    title: str = ""
    closed_form_gap: float | None = None
    modes: tuple[NamedMode, ...] = ()
    #: The probed signal's unit: "V", or "A" for a current probe.
    unit: str = "V"

    @property
    def largest_difference(self) -> tuple[float, float] | None:
        """(largest |ngspice - theory| in :attr:`unit`, time at which it occurs in s),
        or None."""
        if self.theory is None:
            return None
        gap = np.abs(self.ngspice.probe_voltage - self.theory.probe_voltage)
        k = int(np.argmax(gap))
        return float(gap[k]), float(self.ngspice.time[k])

    def columns(self) -> dict[str, np.ndarray]:
        """CSV columns (SI units in the names), in order."""
        spice, theory = self.ngspice, self.theory
        data = {"time_s": spice.time, f"ngspice_probe_{self.unit}": spice.probe_voltage}
        if theory is not None:
            data[f"theory_probe_{self.unit}"] = theory.probe_voltage
        if spice.loop_current is not None:
            data["ngspice_current_A"] = spice.loop_current
            if theory is not None and theory.loop_current is not None:
                data["theory_current_A"] = theory.loop_current
        return data


def predict(circuit: Circuit, left_out: tuple[str, ...] = ()) -> Prediction:
    """Run ngspice and, where it applies, the closed form on ngspice's time points.

    Parameters
    ----------
    circuit
        The circuit both engines simulate.
    left_out
        Parasitics left out of ``circuit``, carried into the result for the record.

    Returns
    -------
    Prediction
    """
    spice = simulate_ngspice(circuit)
    theory = simulate_exact(circuit, spice.time)
    reference = reference_voltage(circuit)
    gap = None
    try:
        order = characterise(circuit)
        closed = simulate_theory(circuit, spice.time)
        why = ""
        gap = float(np.max(np.abs(closed.probe_voltage - theory.probe_voltage))) / reference
    except TheoryNotApplicable as exc:
        order, why = None, str(exc)
    return Prediction(spice, theory, order, why, reference, left_out, circuit.title, gap,
                      natural_modes_named(circuit), circuit.probe_unit)


def unknown_parasitics(fixture: Fixture) -> tuple[str, ...]:
    """``"PART key"`` of every parasitic written ``"?"``, in loop order."""
    return tuple(
        f"{name} {key}"
        for name in fixture.loop
        for key in sorted(fixture.parts[name].unknown)
        if key != "nominal"
    )


def predict_fixture(fixture: Fixture) -> Prediction:
    """Both engines' predictions for the values ``fixture`` states."""
    circuit = build_circuit(fixture, parameters_from_fixture(fixture))
    return predict(circuit, unknown_parasitics(fixture))


def write_csv(path: Path, prediction: Prediction) -> None:
    """Write the prediction as CSV: a plain header line, then full-precision rows
    (formatted by pyarrow, which writes the shortest text that reads back exactly)."""
    import pyarrow as pa
    import pyarrow.csv as pacsv

    data = prediction.columns()
    table = pa.table({name: pa.array(np.asarray(v, dtype=float)) for name, v in data.items()})
    with open(path, "wb") as handle:
        handle.write((",".join(data) + "\n").encode("ascii"))
        pacsv.write_csv(table, handle, write_options=pacsv.WriteOptions(include_header=False))
