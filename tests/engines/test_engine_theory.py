"""Closed-form engine against textbook formulas and scipy.signal.

References:
- Nilsson & Riedel, "Electric Circuits", chapter "Natural and Step Responses of RLC
  Circuits" (series RLC: overdamped A1 e^{s1 t} + A2 e^{s2 t}, underdamped
  e^{-alpha t}(B1 cos wd t + B2 sin wd t), critically damped e^{-alpha t}(D1 t + D2),
  alpha = R/(2L), omega0 = 1/sqrt(LC)), and chapter "Response of First-Order RL and RC
  Circuits" -- from memory.
- Hayt & Kemmerly, "Engineering Circuit Analysis", chapters on the RLC circuit and on
  frequency response (zeta = alpha/omega0, Q = omega0 L / R = 1/(2 zeta) for the series
  loop) -- from memory.
- scipy.signal.lsim / scipy.signal.step on the state equations written here from KVL and
  KCL: an independent library solution (matrix exponential), not our formulas.

Tolerances: two double-precision evaluations of the same closed form differ by rounding
only (~1e-14 relative), so 1e-10 of the signal scale is used; scipy's lsim integrates
exactly for constant input and was seen to agree to ~3e-13 of the scale over 2e4 steps,
so 1e-10 of the scale leaves a wide margin while still catching any formula error.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal

from xcheck.circuit.model import Circuit, Element
from xcheck.errors import SimulationError
from xcheck.engines.theory import (
    TheoryNotApplicable,
    characterise,
    rc_response,
    rl_response,
    second_order,
    series_rlc_response,
    simulate_theory,
)

L_, C_ = 1e-3, 1e-6  # 1 mH, 1 uF: omega0 = 31.6 krad/s, characteristic impedance 31.6 ohm
Z0 = math.sqrt(L_ / C_)
TIGHT = 1e-10  # relative to the signal scale, see module docstring


def _resistance(zeta: float) -> float:
    return 2 * zeta * Z0  # zeta = (R / 2L) / omega0 = R / (2 Z0)


def _time(zeta: float, points: int = 20001) -> np.ndarray:
    omega0 = 1 / math.sqrt(L_ * C_)
    alpha = zeta * omega0
    if zeta < 1:
        stop = 10 * 2 * math.pi / omega0
    else:  # ten time constants of the slow root
        slow = omega0**2 / (alpha + math.sqrt(max(alpha**2 - omega0**2, 0.0)))
        stop = 10 / slow
    return np.linspace(0.0, stop, points)


def _lsim(t, r, l, c, v0, i0, e=0.0, rp=math.inf):
    """scipy.signal.lsim on x = [v, i]: C v' = i - v/Rp, L i' = E - R i - v (KVL/KCL)."""
    g = 0.0 if math.isinf(rp) else 1 / rp
    a = np.array([[-g / c, 1 / c], [-1 / l, -r / l]])
    b = np.array([[0.0], [1 / l]])
    _, y, _ = scipy.signal.lsim((a, b, np.eye(2), np.zeros((2, 1))), np.full(t.size, e), t, X0=[v0, i0])
    return y[:, 0], y[:, 1]


# ---------------------------------------------------------------- textbook formulas


@pytest.mark.parametrize("zeta", [0.01, 0.1, 0.5, 1.0, 2.0, 5.0])
def test_natural_response_matches_textbook_forms(zeta: float) -> None:
    # Nilsson & Riedel, series RLC natural response (from memory), solved for the loop
    # current with i(0) = I0 and di/dt(0) = -(R I0 + V0)/L (KVL at t = 0+).
    r, v0, i0 = _resistance(zeta), 10.0, 0.05
    t = _time(zeta)
    alpha, omega0 = r / (2 * L_), 1 / math.sqrt(L_ * C_)
    di0 = -(r * i0 + v0) / L_
    if zeta < 1:
        wd = math.sqrt(omega0**2 - alpha**2)
        b1, b2 = i0, (di0 + alpha * i0) / wd
        expected = np.exp(-alpha * t) * (b1 * np.cos(wd * t) + b2 * np.sin(wd * t))
    elif zeta == 1:
        d2, d1 = i0, di0 + alpha * i0
        expected = np.exp(-alpha * t) * (d1 * t + d2)
    else:
        root = math.sqrt(alpha**2 - omega0**2)
        s1, s2 = -alpha + root, -alpha - root
        a2 = (di0 - s1 * i0) / (s2 - s1)
        a1 = i0 - a2
        expected = a1 * np.exp(s1 * t) + a2 * np.exp(s2 * t)
    got = series_rlc_response(t, r, L_, C_, v0=v0, i0=i0)
    scale = v0 / Z0
    np.testing.assert_allclose(got.current, expected, rtol=0, atol=TIGHT * scale)
    # The capacitor voltage must satisfy i = C dv/dt; check KVL instead, exactly:
    # L di/dt + R i + v = 0 for the natural response.
    kvl = L_ * got.current_rate + r * got.current + got.capacitor_voltage
    np.testing.assert_allclose(kvl, 0.0, atol=TIGHT * v0)


@pytest.mark.parametrize("zeta", [0.05, 1.0, 3.0])
def test_step_response_capacitor_voltage_matches_textbook(zeta: float) -> None:
    # Nilsson & Riedel, series RLC step response (from memory): v = Vf + natural form,
    # with v(0) = V0, dv/dt(0) = I0/C.
    r, v0, i0, e = _resistance(zeta), -2.0, 0.01, 12.0
    t = _time(zeta)
    alpha, omega0 = r / (2 * L_), 1 / math.sqrt(L_ * C_)
    x0, dx0 = v0 - e, i0 / C_
    if zeta < 1:
        wd = math.sqrt(omega0**2 - alpha**2)
        natural = np.exp(-alpha * t) * (x0 * np.cos(wd * t) + (dx0 + alpha * x0) / wd * np.sin(wd * t))
    elif zeta == 1:
        natural = np.exp(-alpha * t) * ((dx0 + alpha * x0) * t + x0)
    else:
        root = math.sqrt(alpha**2 - omega0**2)
        s1, s2 = -alpha + root, -alpha - root
        a2 = (dx0 - s1 * x0) / (s2 - s1)
        natural = (x0 - a2) * np.exp(s1 * t) + a2 * np.exp(s2 * t)
    got = series_rlc_response(t, r, L_, C_, v0=v0, i0=i0, step_volts=e)
    np.testing.assert_allclose(got.capacitor_voltage, e + natural, rtol=0, atol=TIGHT * e)


def test_first_order_rc_and_rl_match_textbook() -> None:
    # Nilsson & Riedel, first-order RC and RL responses (from memory):
    # v = Vf + (V0 - Vf) e^{-t/RC}; i = E/R + (I0 - E/R) e^{-tR/L}.
    t = np.linspace(0, 5e-3, 1001)
    rc = rc_response(t, 1e3, 1e-6, v0=5.0, step_volts=1.0)
    np.testing.assert_allclose(rc.capacitor_voltage, 1 + 4 * np.exp(-t / 1e-3), rtol=1e-13)
    np.testing.assert_allclose(rc.current, (1 - rc.capacitor_voltage) / 1e3, rtol=1e-13)
    rl = rl_response(t, 10.0, 10e-3, i0=0.3, step_volts=2.0)
    np.testing.assert_allclose(rl.current, 0.2 + 0.1 * np.exp(-t / 1e-3), rtol=1e-13)
    np.testing.assert_allclose(rl.current_rate, -0.1 / 1e-3 * np.exp(-t / 1e-3), rtol=1e-12)


def test_rc_with_leakage_matches_thevenin_form() -> None:
    # Thevenin equivalent seen by C (common practice, no source): E Rp/(R+Rp) through
    # R || Rp, so tau = C R Rp / (R + Rp).
    t = np.linspace(0, 2e-3, 501)
    got = rc_response(t, 1e3, 1e-6, v0=0.0, step_volts=10.0, shunt_resistance=3e3)
    tau, final = 1e-6 * 750.0, 7.5
    np.testing.assert_allclose(got.capacitor_voltage, final * (1 - np.exp(-t / tau)), rtol=1e-12, atol=1e-14)


# ---------------------------------------------------------------- scipy.signal reference


@pytest.mark.parametrize(
    "zeta", [0.001, 0.3, 1 - 1e-9, 1 - 1e-6, 1.0, 1 + 1e-12, 1 + 1e-6, 1.5, 50.0]
)
def test_against_scipy_lsim_all_regimes(zeta: float) -> None:
    # Near critical damping the formulas must neither cancel nor switch branches badly.
    r, v0, i0, e = _resistance(zeta), 10.0, 0.05, 3.0
    t = _time(zeta)
    v_ref, i_ref = _lsim(t, r, L_, C_, v0, i0, e)
    got = series_rlc_response(t, r, L_, C_, v0=v0, i0=i0, step_volts=e)
    np.testing.assert_allclose(got.capacitor_voltage, v_ref, rtol=0, atol=TIGHT * v0)
    np.testing.assert_allclose(got.current, i_ref, rtol=0, atol=TIGHT * v0 / Z0)


def test_very_strong_damping_against_high_precision_textbook_form() -> None:
    # zeta = 1e4: the roots differ by 4e8 in ratio. scipy's lsim loses ~1e-8 here (its
    # matrix exponential of a stiff matrix), so the reference is the textbook overdamped
    # form A1 e^{s1 t} + A2 e^{s2 t} evaluated with 50 significant digits (stdlib
    # decimal). Agreement to 1e-13 of V0 shows no cancellation or overflow.
    from decimal import Decimal, getcontext

    getcontext().prec = 50
    zeta, v0, i0, e = 1e4, 10.0, 0.05, 3.0
    r = _resistance(zeta)
    l, c, rd = Decimal(L_), Decimal(C_), Decimal(r)
    alpha, omega0_sq = rd / (2 * l), 1 / (l * c)
    root = (alpha * alpha - omega0_sq).sqrt()
    s1, s2 = -alpha + root, -alpha - root
    x0, dx0 = Decimal(v0) - Decimal(e), Decimal(i0) / c
    a2 = (dx0 - s1 * x0) / (s2 - s1)
    a1 = x0 - a2
    times = [0.0, 1e-9, 1e-6, 1e-3, 0.1, 1.0, 5.0]
    expected = [float(Decimal(e) + a1 * (s1 * Decimal(t)).exp() + a2 * (s2 * Decimal(t)).exp()) for t in times]
    got = series_rlc_response(np.array(times), r, L_, C_, v0=v0, i0=i0, step_volts=e)
    np.testing.assert_allclose(got.capacitor_voltage, expected, rtol=0, atol=1e-13 * v0)


@pytest.mark.parametrize("zeta", [0.2, 1.0, 4.0])
def test_parallel_resistance_across_capacitor_against_lsim(zeta: float) -> None:
    # Characteristic polynomial s^2 + (R/L + 1/(Rp C)) s + (1 + R/Rp)/(LC) follows from
    # the same state equations scipy integrates here.
    r, rp = _resistance(zeta), 80.0
    t = _time(zeta)
    v_ref, i_ref = _lsim(t, r, L_, C_, 8.0, -0.02, 5.0, rp)
    got = series_rlc_response(t, r, L_, C_, v0=8.0, i0=-0.02, step_volts=5.0, shunt_resistance=rp)
    np.testing.assert_allclose(got.capacitor_voltage, v_ref, rtol=0, atol=TIGHT * 8.0)
    np.testing.assert_allclose(got.current, i_ref, rtol=0, atol=TIGHT * 8.0 / Z0)
    order = second_order(r, L_, C_, rp)
    roots = np.sort_complex(np.roots([1, r / L_ + 1 / (rp * C_), (1 + r / rp) / (L_ * C_)]))
    # alpha and omega0 reproduce the polynomial's roots (relative 1e-9: root finding).
    mine = np.sort_complex(np.roots([1, 2 * order.alpha, order.omega0**2]))
    np.testing.assert_allclose(mine, roots, rtol=1e-9)


def test_unit_step_response_against_scipy_transfer_function() -> None:
    # v_C / E = 1 / (L C s^2 + R C s + 1) for the series loop (Hayt & Kemmerly, from
    # memory); scipy.signal.step evaluates it independently.
    r = _resistance(0.3)
    t = _time(0.3, 4001)
    _, expected = scipy.signal.step(([1.0], [L_ * C_, r * C_, 1.0]), T=t)
    got = series_rlc_response(t, r, L_, C_, step_volts=1.0)
    np.testing.assert_allclose(got.capacitor_voltage, expected, rtol=0, atol=1e-9)


def test_current_rate_is_derivative_of_current() -> None:
    # Central differences of i against the closed-form di/dt (numerical calculus,
    # common practice): error ~ h^2 i''' / 6, below 1e-6 of the scale at this grid.
    t = _time(0.2, 200001)
    got = series_rlc_response(t, _resistance(0.2), L_, C_, v0=10.0, i0=0.1)
    numeric = np.gradient(got.current, t)
    scale = np.max(np.abs(got.current_rate))
    np.testing.assert_allclose(numeric[1:-1], got.current_rate[1:-1], rtol=0, atol=1e-6 * scale)


def test_parameters_broadcast_over_sets() -> None:
    t = _time(0.5, 2001)
    rs = np.array([[_resistance(z)] for z in (0.1, 1.0, 3.0)])
    together = series_rlc_response(t, rs, L_, C_, v0=10.0, i0=0.0)
    for k in range(3):
        alone = series_rlc_response(t, float(rs[k, 0]), L_, C_, v0=10.0, i0=0.0)
        # Same arithmetic apart from the where() selection: equal to rounding.
        np.testing.assert_allclose(together.capacitor_voltage[k], alone.capacitor_voltage, rtol=1e-13, atol=1e-13)


def test_characteristic_numbers_match_textbook_definitions() -> None:
    # Hayt & Kemmerly (from memory): alpha = R/2L, omega0 = 1/sqrt(LC), zeta = alpha/omega0,
    # omega_d = sqrt(omega0^2 - alpha^2), Q = omega0 L / R = 1/(2 zeta).
    r = 5.0
    order = second_order(r, L_, C_)
    assert order.alpha == pytest.approx(r / (2 * L_), rel=1e-15)  # one division
    assert order.omega0 == pytest.approx(1 / math.sqrt(L_ * C_), rel=1e-15)
    assert order.zeta == pytest.approx(order.alpha / order.omega0, rel=1e-15)
    assert order.omega_d == pytest.approx(math.sqrt(order.omega0**2 - order.alpha**2), rel=1e-14)
    assert order.q == pytest.approx(order.omega0 * L_ / r, rel=1e-14)
    assert order.q == pytest.approx(1 / (2 * order.zeta), rel=1e-14)
    assert order.f_d == pytest.approx(order.omega_d / (2 * math.pi), rel=1e-15)
    assert order.regime == "underdamped"
    assert second_order(2 * Z0, L_, C_).regime == "critically damped"
    assert second_order(3 * Z0, L_, C_).regime == "overdamped"
    assert second_order(3 * Z0, L_, C_).omega_d == 0.0  # defined as zero without ringing
    assert second_order(0.0, L_, C_).q == math.inf


# ---------------------------------------------------------------- circuits


def _loop(*elements: Element, probe=("n1", "n2"), sense="V_sense", title="test loop") -> Circuit:
    return Circuit(title, tuple(elements), probe=probe, current_sense=sense)


def _series_rlc_circuit(r=4.0, v0=10.0, i0=0.0, esr=0.0, esl=0.0, leak=None, extra=()) -> Circuit:
    parts = [
        Element("V_sense", "V", ("0", "n1"), 0.0),
        Element("L_esl", "L", ("n1", "a"), esl, initial=i0) if esl else None,
        Element("R_esr", "R", ("a" if esl else "n1", "b"), esr) if esr else None,
        Element("C_C1", "C", ("b" if esr else ("a" if esl else "n1"), "n2"), C_, initial=v0),
        Element("R_R1", "R", ("n2", "n3"), r),
        Element("L_L1", "L", ("n3", "0"), L_, initial=i0),
    ]
    elements = [p for p in parts if p is not None]
    if leak is not None:
        cap = elements[[e.name for e in elements].index("C_C1")]
        elements.append(Element("R_leak", "R", cap.nodes, leak, in_loop=False))
    return _loop(*elements, *extra)


def test_probe_across_part_with_esr_and_esl_against_lsim() -> None:
    # Probe = v_C + R_esr i + L_esl di/dt for a series loop (KVL); reference: scipy on the
    # reduced loop's state equations plus L di/dt = -(R i + v) (KVL).
    esr, esl, i0 = 0.5, 20e-6, 0.02
    circuit = _series_rlc_circuit(esr=esr, esl=esl, i0=i0)
    t = np.linspace(0, 2e-3, 4001)
    got = simulate_theory(circuit, t)
    r_total, l_total = 4.0 + esr, L_ + esl
    v, i = _lsim(t, r_total, l_total, C_, 10.0, i0)
    di = -(r_total * i + v) / l_total
    np.testing.assert_allclose(got.probe_voltage, v + esr * i + esl * di, rtol=0, atol=TIGHT * 10)
    np.testing.assert_allclose(got.loop_current, i, rtol=0, atol=TIGHT * 10 / Z0)
    assert got.engine == "theory"


def test_leakage_across_the_capacitor_is_exact() -> None:
    circuit = _series_rlc_circuit(r=2.0, leak=200.0)
    order = characterise(circuit)
    assert order.shunt_resistance == pytest.approx(200.0, rel=1e-15)  # taken as given
    t = np.linspace(0, 2e-3, 2001)
    v, _ = _lsim(t, 2.0, L_, C_, 10.0, 0.0, 0.0, 200.0)
    np.testing.assert_allclose(simulate_theory(circuit, t).probe_voltage, v, rtol=0, atol=TIGHT * 10)
    assert all("neglects" not in note for note in simulate_theory(circuit, t).notes)


def test_series_capacitors_share_the_charge() -> None:
    # Two capacitors in series, each with its own initial voltage; probe across the
    # second. Reference: scipy on the three state equations (v1, v2, i) from KVL.
    c1, c2, r = 2e-6, 1e-6, 3.0
    circuit = _loop(
        Element("V_sense", "V", ("0", "n1"), 0.0),
        Element("C_a", "C", ("n1", "m"), c1, initial=4.0),
        Element("C_b", "C", ("m", "n2"), c2, initial=6.0),
        Element("R_1", "R", ("n2", "n3"), r),
        Element("L_1", "L", ("n3", "0"), L_, initial=0.0),
        probe=("m", "n2"),
    )
    a = np.array([[0, 0, 1 / c1], [0, 0, 1 / c2], [-1 / L_, -1 / L_, -r / L_]])
    t = np.linspace(0, 1e-3, 2001)
    _, y, _ = scipy.signal.lsim((a, np.zeros((3, 1)), np.eye(3), np.zeros((3, 1))), np.zeros(t.size), t, X0=[4, 6, 0])
    np.testing.assert_allclose(simulate_theory(circuit, t).probe_voltage, y[:, 1], rtol=0, atol=TIGHT * 10)


def test_probe_polarity_and_current_direction() -> None:
    circuit = _series_rlc_circuit()
    reversed_probe = Circuit(circuit.title, circuit.elements, probe=("n2", "n1"), current_sense="V_sense")
    t = np.linspace(0, 1e-4, 11)
    a, b = simulate_theory(circuit, t), simulate_theory(reversed_probe, t)
    np.testing.assert_allclose(b.probe_voltage, -a.probe_voltage, rtol=0, atol=1e-15)
    assert a.probe_voltage[0] == pytest.approx(10.0, rel=1e-12)  # V0 at t = 0
    # The charged capacitor drives current backwards round the loop as written
    # (out of its first terminal): the loop current starts negative.
    assert a.loop_current[5] < 0
    flipped = Circuit(
        circuit.title,
        (Element("V_sense", "V", ("n1", "0"), 0.0),) + circuit.elements[1:],
        probe=circuit.probe,
        current_sense="V_sense",
    )
    np.testing.assert_allclose(simulate_theory(flipped, t).loop_current, -a.loop_current, rtol=1e-12, atol=1e-15)


def test_first_order_circuits() -> None:
    rc = _loop(
        Element("V_sense", "V", ("0", "n1"), 0.0),
        Element("C_1", "C", ("n1", "n2"), 1e-6, initial=5.0),
        Element("R_1", "R", ("n2", "0"), 1e3),
    )
    order = characterise(rc)
    assert order.regime == "first order"
    assert order.time_constant == pytest.approx(1e-3, rel=1e-14)  # tau = RC
    t = np.linspace(0, 5e-3, 11)
    np.testing.assert_allclose(simulate_theory(rc, t).probe_voltage, 5 * np.exp(-t / 1e-3), rtol=1e-12)
    rl = _loop(
        Element("V_step", "V", ("n1", "0"), 2.0),
        Element("R_1", "R", ("n1", "n2"), 10.0),
        Element("L_1", "L", ("n2", "0"), 10e-3, initial=0.0),
        probe=("n2", "0"),
        sense=None,
    )
    # Probe across L: L di/dt = E e^{-tR/L} (Nilsson & Riedel, RL step, from memory).
    np.testing.assert_allclose(simulate_theory(rl, t).probe_voltage, 2 * np.exp(-t / 1e-3), rtol=1e-12)


def test_small_probe_capacitance_is_neglected_with_a_note() -> None:
    circuit = _series_rlc_circuit(esr=0.1, extra=(Element("C_probe", "C", ("n1", "n2"), 10e-12, initial=10.0, in_loop=False),))
    waveform = simulate_theory(circuit, np.linspace(0, 1e-3, 101))
    note = next(n for n in waveform.notes if "neglects" in n)
    assert "C_probe" in note and "relative" in note


def test_large_winding_capacitance_is_not_applicable() -> None:
    circuit = _series_rlc_circuit(extra=(Element("C_wind", "C", ("n3", "0"), 0.5e-6, initial=0.0, in_loop=False),))
    with pytest.raises(TheoryNotApplicable, match=r"neglect C_wind.*use the ngspice prediction"):
        simulate_theory(circuit, np.linspace(0, 1e-3, 11))
    assert issubclass(TheoryNotApplicable, SimulationError)


def test_circuits_that_do_not_reduce() -> None:
    two_branches = _loop(
        Element("V_sense", "V", ("0", "n1"), 0.0),
        Element("C_1", "C", ("n1", "n2"), C_, initial=1.0),
        Element("R_1", "R", ("n2", "0"), 1.0),
        Element("L_1", "L", ("n2", "0"), L_),
    )
    with pytest.raises(TheoryNotApplicable, match="do not form one series loop"):
        characterise(two_branches)
    mismatched = _loop(
        Element("V_sense", "V", ("0", "n1"), 0.0),
        Element("L_a", "L", ("n1", "n2"), L_, initial=0.1),
        Element("R_1", "R", ("n2", "n3"), 1.0),
        Element("L_b", "L", ("n3", "0"), L_, initial=0.2),
    )
    with pytest.raises(TheoryNotApplicable, match="different currents"):
        characterise(mismatched)
    no_loss = _loop(
        Element("V_step", "V", ("n1", "0"), 1.0),
        Element("C_1", "C", ("n1", "0"), C_),
        probe=("n1", "0"),
        sense=None,
    )
    with pytest.raises(TheoryNotApplicable, match="zero time"):
        characterise(no_loss)


def test_pure_function_of_inputs() -> None:
    circuit = _series_rlc_circuit(esr=0.2)
    t = np.linspace(0, 1e-3, 101)
    before = t.copy()
    first = simulate_theory(circuit, t).probe_voltage
    second = simulate_theory(circuit, t).probe_voltage
    assert np.array_equal(first, second)  # deterministic, bit for bit
    assert np.array_equal(t, before)  # input untouched
    with pytest.raises(ValueError, match="times >= 0"):
        simulate_theory(circuit, np.array([-1.0, 0.0]))
