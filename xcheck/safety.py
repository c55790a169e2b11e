"""Stored energy and voltage of a fixture, and the caution reports must carry.

Thresholds (common practice, no single source): DC voltages above about 60 V are
treated as hazardous by common electrical safety standards and lab practice, and a
capacitor storing more than roughly 10 to 20 J can injure even at lower voltage;
xcheck cautions from 10 J. These are reminders, not a safety assessment.
"""

from __future__ import annotations

from dataclasses import dataclass

from xcheck.fixture.model import Fixture
from xcheck.fixture.schema import PART_KINDS
from xcheck.values import format_eng

HAZARDOUS_VOLTS = 60.0
HAZARDOUS_JOULES = 10.0

CAUTION = (
    "Stored energy can hurt. A charged capacitor holds E = CV²/2 after the supply is off, "
    "and a capacitor that was discharged can recover voltage by dielectric absorption. DC "
    "voltages above about 60 V, or stored energy above roughly 10 to 20 J, are treated as "
    "hazardous by common safety standards and lab practice. Discharge through a suitable "
    "resistor, verify zero volts with a meter you have just checked on a known source, and "
    "short the terminals before touching. This tool does not assess safety: follow your "
    "local codes, your lab's rules and licensed practice."
)


@dataclass(frozen=True)
class SafetyAssessment:
    """Largest voltage and stored energy the fixture states, and whether to caution."""

    max_volts: float
    stored_energy_joules: float
    hazardous: bool
    reasons: tuple[str, ...]


def _settled_energy(fixture: Fixture) -> float:
    """Energy (J) the capacitors and inductors hold once every source part is on and
    the circuit has settled (C V^2 / 2 and L I^2 / 2 at the DC operating point); 0
    when the stated values do not build a circuit."""
    from xcheck.circuit.expand import build_circuit
    from xcheck.circuit.parameters import parameters_from_fixture
    from xcheck.engines.statespace import state_space
    from xcheck.errors import XcheckError

    try:
        circuit = build_circuit(fixture, parameters_from_fixture(fixture))
        model = state_space(circuit)
        settled = model.steady_state()
    except (XcheckError, ValueError, ArithmeticError):
        return 0.0
    energy = 0.0
    for element in circuit.elements:
        if element.kind == "C":
            m = model.branch_voltage[element.name]
        elif element.kind == "L":
            m = model.branch_current[element.name]
        else:
            continue
        level = float(m.x_coef @ settled + m.u_coef @ model.u)
        energy += 0.5 * element.value * level**2
    return energy


def assess(fixture: Fixture) -> SafetyAssessment:
    """Assess the voltages and stored energy stated in ``fixture``.

    Parameters
    ----------
    fixture
        The fixture description.

    Returns
    -------
    SafetyAssessment
        ``hazardous`` is True above 60 V or 10 J (common practice, no source).
    """
    volts = 0.0
    energy = 0.0
    for part in fixture.parts.values():
        if part.initial is None:
            continue
        value = part.measured if part.measured is not None else part.nominal
        # A stored-energy part's ``initial`` is a voltage (C: E = C V^2 / 2) or a current
        # (L: E = L I^2 / 2), as its schema row says.
        initial_unit = PART_KINDS[part.kind].initial_unit
        if initial_unit == "V":
            volts = max(volts, abs(part.initial))
        if value and initial_unit in ("V", "A"):
            energy += 0.5 * value * part.initial**2
    if fixture.step is not None:
        volts = max(volts, abs(fixture.step.volts))
    sources = [p for p in fixture.parts.values() if p.source is not None]
    for part in sources:
        if PART_KINDS[part.kind].source.unit == "V":
            volts = max(volts, abs(part.source.value))
    if sources:
        energy = max(energy, _settled_energy(fixture))
    reasons = []
    if volts > HAZARDOUS_VOLTS:
        reasons.append(f"{format_eng(volts, 'V')} exceeds about 60 V DC")
    if energy > HAZARDOUS_JOULES:
        reasons.append(f"{format_eng(energy, 'J')} stored exceeds roughly 10 J")
    return SafetyAssessment(volts, energy, bool(reasons), tuple(reasons))
