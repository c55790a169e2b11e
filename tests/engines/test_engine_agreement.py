"""ngspice against the closed form, with the deck's automatic time step.

Requirement: for series RLC natural and step responses with zeta from 0.01 to 5, the
largest |ngspice - theory| over at least ten periods (underdamped) or ten time
constants of the slow root (critical, overdamped) is at most 1e-4 of the initial
voltage or the step. ngspice is the independent reference here (its trapezoidal
integrator knows nothing of our formulas); the closed form itself is checked against
textbooks and scipy in test_engine_theory.py. All runs share one ngspice child process.

The loop current is held to 1e-4 of V0 / sqrt(L/C), the current scale of a series RLC
loop (peak current of an undamped loop charged to V0; Nilsson & Riedel, "Electric
Circuits", chapter "Natural and Step Responses of RLC Circuits", from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from xcheck.circuit.model import Circuit, Element
from xcheck.engines.ngspice import simulate_ngspice
from xcheck.engines.theory import characterise, simulate_theory

pytestmark = pytest.mark.ngspice  # skipped, with the install hint, without libngspice

L_, C_ = 1e-3, 1e-6
Z0 = math.sqrt(L_ / C_)
V0, STEP = 10.0, 12.0
AGREEMENT = 1e-4


def _stop(zeta: float) -> float:
    omega0 = 1 / math.sqrt(L_ * C_)
    alpha = zeta * omega0
    if zeta < 1:
        return 10 * 2 * math.pi / math.sqrt(omega0**2 - alpha**2)  # ten periods
    slow = omega0**2 / (alpha + math.sqrt(alpha**2 - omega0**2))
    return 10 / slow  # ten time constants of the slow root


def _natural(zeta: float) -> Circuit:
    return Circuit(
        f"series RLC natural response, zeta {zeta}",
        (
            Element("V_sense", "V", ("0", "n1"), 0.0, part="loop", role="sense"),
            Element("C_C1", "C", ("n1", "n2"), C_, initial=V0, part="C1"),
            Element("R_R1", "R", ("n2", "n3"), 2 * zeta * Z0, part="R1"),
            Element("L_L1", "L", ("n3", "0"), L_, initial=0.0, part="L1"),
        ),
        probe=("n1", "n2"),
        response="natural",
        current_sense="V_sense",
    )


def _step(zeta: float) -> Circuit:
    return Circuit(
        f"series RLC step response, zeta {zeta}",
        (
            Element("V_step", "V", ("s", "0"), STEP, part="step", role="volts"),
            Element("V_sense", "V", ("s", "n1"), 0.0, part="loop", role="sense"),
            Element("R_R1", "R", ("n1", "n2"), 2 * zeta * Z0, part="R1"),
            Element("L_L1", "L", ("n2", "n3"), L_, initial=0.0, part="L1"),
            Element("C_C1", "C", ("n3", "0"), C_, initial=0.0, part="C1"),
        ),
        probe=("n3", "0"),
        response="step",
        current_sense="V_sense",
    )


def _largest_gaps(circuit: Circuit, stop: float) -> tuple[float, float, np.ndarray]:
    spice = simulate_ngspice(circuit, stop_time=stop)
    theory = simulate_theory(circuit, spice.time)
    voltage = float(np.max(np.abs(spice.probe_voltage - theory.probe_voltage)))
    current = float(np.max(np.abs(spice.loop_current - theory.loop_current)))
    return voltage, current, spice.time


ZETAS = [0.01, 0.1, 0.5, 1.0, 2.0, 5.0]


@pytest.mark.parametrize("zeta", ZETAS)
def test_natural_response_agrees(zeta: float) -> None:
    circuit = _natural(zeta)
    expected_regime = "underdamped" if zeta < 1 else ("critically damped" if zeta == 1 else "overdamped")
    assert characterise(circuit).regime == expected_regime
    voltage, current, time = _largest_gaps(circuit, _stop(zeta))
    assert time[-1] >= _stop(zeta) * (1 - 1e-9)  # the whole required span was compared
    assert voltage <= AGREEMENT * V0
    assert current <= AGREEMENT * V0 / Z0


@pytest.mark.parametrize("zeta", ZETAS)
def test_step_response_agrees(zeta: float) -> None:
    voltage, current, _ = _largest_gaps(_step(zeta), _stop(zeta))
    assert voltage <= AGREEMENT * STEP
    assert current <= AGREEMENT * STEP / Z0


def _parasitic_loop(second_capacitor: bool) -> Circuit:
    """Probe across a capacitor part with ESL and ESR (v_C + R i + L di/dt) and an
    initial loop current; then either leakage across the ideal capacitance or a second
    capacitor in series (the closed form treats leakage exactly with one capacitor)."""
    tail = (
        (Element("L_L1", "L", ("n3", "n4"), L_, initial=0.05),
         Element("C_C2", "C", ("n4", "0"), 4 * C_, initial=-2.0))
        if second_capacitor
        else (Element("L_L1", "L", ("n3", "0"), L_, initial=0.05),
              Element("R_leak", "R", ("b", "n2"), 2e3, in_loop=False))
    )
    return Circuit(
        "parasitics",
        (
            Element("V_sense", "V", ("0", "n1"), 0.0),
            Element("L_esl", "L", ("n1", "a"), 20e-9, initial=0.05),
            Element("R_esr", "R", ("a", "b"), 0.05),
            Element("C_C1", "C", ("b", "n2"), C_, initial=V0),
            Element("R_R1", "R", ("n2", "n3"), 1.5),
            *tail,
        ),
        probe=("n1", "n2"),
        current_sense="V_sense",
    )


@pytest.mark.parametrize("second_capacitor", [False, True])
def test_parasitics_initial_current_leakage_series_capacitors_agree(second_capacitor: bool) -> None:
    circuit = _parasitic_loop(second_capacitor)
    order = characterise(circuit)
    stop = 10 * 2 * math.pi / order.omega_d
    voltage, current, _ = _largest_gaps(circuit, stop)
    assert voltage <= AGREEMENT * V0
    assert current <= AGREEMENT * V0 / Z0


def test_first_order_loops_agree() -> None:
    rc = Circuit(
        "rc",
        (
            Element("V_step", "V", ("s", "0"), STEP),
            Element("R_1", "R", ("s", "n1"), 100.0),
            Element("C_1", "C", ("n1", "0"), C_, initial=1.0),
        ),
        probe=("n1", "0"),
        response="step",
    )
    spice = simulate_ngspice(rc, stop_time=1e-3)  # ten time constants
    gap = np.max(np.abs(spice.probe_voltage - simulate_theory(rc, spice.time).probe_voltage))
    assert gap <= AGREEMENT * STEP
