"""State-space model (normal-tree method) against textbook natural frequencies.

References: series RLC roots s = -alpha +- sqrt(alpha^2 - omega0^2) with alpha = R/2L,
omega0 = 1/sqrt(LC) (Nilsson & Riedel, "Electric Circuits", chapter "Natural and Step
Responses of RLC Circuits", from memory); series inductors add, parallel capacitors
add, charge is conserved when capacitors are connected in parallel (common practice,
no source). Eigenvalues come from LAPACK; 1e-12 relative tolerance allows for its
rounding on these well-conditioned 2x2 to 4x4 problems.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.linalg
import scipy.signal

from xcheck.circuit.model import Circuit, Element
from xcheck.engines.statespace import natural_frequencies, natural_modes, state_space
from xcheck.errors import SimulationError


def _rlc(r=10.0, l=1e-3, c=1e-6, extra=(), split_inductor=False) -> Circuit:
    inductors = (
        (Element("L_a", "L", ("n3", "m"), l / 4), Element("L_b", "L", ("m", "0"), 3 * l / 4))
        if split_inductor
        else (Element("L_1", "L", ("n3", "0"), l),)
    )
    elements = (
        Element("V_sense", "V", ("0", "n1"), 0.0),
        Element("C_1", "C", ("n1", "n2"), c, initial=10.0),
        Element("R_1", "R", ("n2", "n3"), r),
        *inductors,
        *extra,
    )
    return Circuit("rlc", elements, probe=("n1", "n2"), current_sense="V_sense")


def _textbook_roots(r, l, c):
    alpha, omega0 = r / (2 * l), 1 / math.sqrt(l * c)
    root = np.sqrt(complex(alpha**2 - omega0**2))
    return np.sort_complex(np.array([-alpha + root, -alpha - root]))


@pytest.mark.parametrize("r", [1.0, 63.2455532, 300.0])
def test_series_rlc_roots(r: float) -> None:
    got = np.sort_complex(natural_frequencies(_rlc(r=r)))
    np.testing.assert_allclose(got, _textbook_roots(r, 1e-3, 1e-6), rtol=1e-7 if r == 63.2455532 else 1e-12)


def test_series_inductors_give_no_spurious_mode() -> None:
    # Two inductors in series form an inductor cut set: one state, one inductance.
    model = state_space(_rlc(split_inductor=True))
    assert model.a.shape == (2, 2)
    np.testing.assert_allclose(np.sort_complex(scipy.linalg.eigvals(model.a)), _textbook_roots(10.0, 1e-3, 1e-6), rtol=1e-12)


def test_parallel_capacitors_conserve_charge() -> None:
    # 1 uF at 10 V joined directly by 3 uF at 2 V: (1*10 + 3*2)/4 = 4 V at 0+.
    circuit = _rlc(extra=(Element("C_x", "C", ("n1", "n2"), 3e-6, initial=2.0, in_loop=False),))
    model = state_space(circuit)
    assert model.a.shape == (2, 2)
    probe = model.voltage_between("n1", "n2")
    assert float(probe.x_coef @ model.x0) == pytest.approx(4.0, rel=1e-12)
    np.testing.assert_allclose(np.sort_complex(scipy.linalg.eigvals(model.a)), _textbook_roots(10.0, 1e-3, 4e-6), rtol=1e-12)


def test_response_matches_scipy_for_a_loaded_loop() -> None:
    # Probe R and C across the capacitor part (with ESR): compare the model's own
    # matrices, integrated by scipy.signal.lsim, with the same circuit's KCL/KVL written
    # by hand: states v_c (ideal C), v_p (probe C), i (loop).
    c, cp, rp, esr, r, l = 1e-6, 0.1e-6, 1e3, 2.0, 5.0, 1e-3
    circuit = Circuit(
        "loaded",
        (
            Element("V_sense", "V", ("0", "n1"), 0.0),
            Element("R_esr", "R", ("n1", "a"), esr),
            Element("C_1", "C", ("a", "n2"), c, initial=10.0),
            Element("R_1", "R", ("n2", "n3"), r),
            Element("L_1", "L", ("n3", "0"), l, initial=0.0),
            Element("R_p", "R", ("n1", "n2"), rp, in_loop=False),
            Element("C_p", "C", ("n1", "n2"), cp, initial=10.0, in_loop=False),
        ),
        probe=("n1", "n2"),
        current_sense="V_sense",
    )
    # Hand-written: i flows 0 -> n1 in the sense source; it splits into the ESR branch
    # (i_c = (v_p - v_c)/esr), the probe R (v_p/rp) and probe C. KVL round the loop:
    # L di/dt = -(v_p + r i).
    a = np.array(
        [
            [-1 / (esr * c), 1 / (esr * c), 0.0],
            [1 / (esr * cp), -1 / (esr * cp) - 1 / (rp * cp), 1 / cp],
            [0.0, -1 / l, -r / l],
        ]
    )
    t = np.linspace(0, 1e-3, 2001)
    _, y_ref, _ = scipy.signal.lsim((a, np.zeros((3, 1)), np.eye(3), np.zeros((3, 1))), np.zeros(t.size), t, X0=[10, 10, 0])
    model = state_space(circuit)
    probe = model.voltage_between("n1", "n2")
    _, y_mine, _ = scipy.signal.lsim((model.a, np.zeros((3, 1)), probe.x_coef[None, :], np.zeros((1, 1))), np.zeros(t.size), t, X0=model.x0)
    np.testing.assert_allclose(y_mine, y_ref[:, 1], rtol=0, atol=1e-9 * 10)  # both exact integrations
    current = model.branch_current["V_sense"]
    np.testing.assert_allclose(current.x_coef @ model.x0, 0.0, atol=1e-15)


def test_natural_modes_sum_to_the_initial_probe_voltage() -> None:
    modes = natural_modes(_rlc(r=2.0))
    # v(0) = steady + sum of amplitudes: 10 V (the initial capacitor voltage).
    assert complex(modes.steady + np.sum(modes.amplitudes)).real == pytest.approx(10.0, rel=1e-12)
    assert modes.initial == pytest.approx(10.0, rel=1e-15)


def test_step_source_steady_state() -> None:
    circuit = Circuit(
        "step",
        (
            Element("V_step", "V", ("n1", "0"), 12.0),
            Element("R_1", "R", ("n1", "n2"), 1.0),
            Element("L_1", "L", ("n2", "n3"), 1e-3),
            Element("C_1", "C", ("n3", "0"), 1e-6),
            Element("R_leak", "R", ("n3", "0"), 3.0, in_loop=False),
        ),
        probe=("n3", "0"),
    )
    model = state_space(circuit)
    steady = model.voltage_between("n3", "0")
    # Divider 3 / (1 + 3) of 12 V at DC (inductor shorts, capacitor opens).
    assert float(steady.x_coef @ model.steady_state() + steady.u_coef @ model.u) == pytest.approx(9.0, rel=1e-12)


def test_bad_circuits_are_reported() -> None:
    with pytest.raises(SimulationError, match="loop made only of voltage sources"):
        state_space(Circuit("vloop", (Element("V_a", "V", ("n1", "0"), 1.0), Element("V_b", "V", ("n1", "0"), 2.0)), probe=("n1", "0")))
    with pytest.raises(SimulationError, match="not connected to ground"):
        state_space(Circuit("float", (Element("R_a", "R", ("n1", "0"), 1.0), Element("C_b", "C", ("x", "y"), 1e-6)), probe=("n1", "0")))
    with pytest.raises(SimulationError, match=r"R_a = -1\.0 \(expected a positive value\)"):
        state_space(Circuit("neg", (Element("R_a", "R", ("n1", "0"), -1.0),), probe=("n1", "0")))
