"""Circuits beyond the single series loop, each with state equations written by hand.

Every case gives a :class:`Circuit` (what the engines simulate) and the matrices of
x' = A x + B u, y = C x + D u derived here from Kirchhoff's laws and the element
laws (common practice, no source), independently of xcheck's normal-tree builder, so
``scipy.signal.lsim`` on them is an outside reference. Values are invented. Inputs
are piecewise constant: ``u_of(t)`` gives the input vector just after time t.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from xcheck.circuit.model import Circuit, Element


@dataclass(frozen=True)
class HandCase:
    """One circuit and its hand-derived state equations."""

    name: str
    circuit: Circuit
    a: np.ndarray
    b: np.ndarray
    c: np.ndarray
    d: np.ndarray
    x0: np.ndarray
    u_of: Callable[[float], np.ndarray]
    stop: float
    #: Times at which an input switches (sample grids include them).
    switches: tuple[float, ...] = ()


def _none(_t: float) -> np.ndarray:
    return np.zeros(1)


def parallel_rlc(r: float = 200.0, l: float = 1e-3, c: float = 1e-6, v0: float = 10.0) -> HandCase:
    """C, R and L all between node ``top`` and ground; C charged to v0.
    C v' = -v/R - i_L,  L i_L' = v;  y = v."""
    circuit = Circuit("parallel RLC", (
        Element("C_C1", "C", ("top", "0"), c, initial=v0, part="C1"),
        Element("R_R1", "R", ("top", "0"), r, part="R1"),
        Element("L_L1", "L", ("top", "0"), l, initial=0.0, part="L1"),
    ), probe=("top", "0"))
    a = np.array([[-1 / (r * c), -1 / c], [1 / l, 0.0]])
    period = 2 * math.pi * math.sqrt(l * c)
    return HandCase("parallel RLC", circuit, a, np.zeros((2, 1)), np.array([[1.0, 0.0]]),
                    np.zeros((1, 1)), np.array([v0, 0.0]), _none, 8 * period)


def esl_probe(c: float = 1e-6, esr: float = 0.05, esl: float = 40e-9, cp: float = 2e-9,
              r1: float = 0.5, l1: float = 20e-6, v0: float = 12.0) -> HandCase:
    """A charged capacitor with ESR and ESL (a-b-c-0), a probe capacitance across its
    terminals (a-0) and the discharge loop R1, L1 (a-d-0): fourth order.
    i1 (a through ESL, ESR into C): L_esl i1' = v_p - R_esr i1 - v_c;  C v_c' = i1;
    i2 (a through R1, L1 to 0): L1 i2' = v_p - R1 i2;  Cp v_p' = -i1 - i2;  y = v_p."""
    circuit = Circuit("capacitor with ESL and probe capacitance", (
        Element("L_C1_esl", "L", ("a", "b"), esl, initial=0.0, part="C1", role="esl"),
        Element("R_C1_esr", "R", ("b", "c"), esr, part="C1", role="esr"),
        Element("C_C1", "C", ("c", "0"), c, initial=v0, part="C1"),
        Element("C_probe", "C", ("a", "0"), cp, initial=v0, part="probe", role="capacitance"),
        Element("R_R1", "R", ("a", "d"), r1, part="R1"),
        Element("L_L1", "L", ("d", "0"), l1, initial=0.0, part="L1"),
    ), probe=("a", "0"))
    # x = [v_c, v_p, i1, i2]
    a = np.array([
        [0.0, 0.0, 1 / c, 0.0],
        [0.0, 0.0, -1 / cp, -1 / cp],
        [-1 / esl, 1 / esl, -esr / esl, 0.0],
        [0.0, 1 / l1, 0.0, -r1 / l1],
    ])
    period = 2 * math.pi * math.sqrt(l1 * c)
    return HandCase("ESL and probe capacitance", circuit, a, np.zeros((4, 1)),
                    np.array([[0.0, 1.0, 0.0, 0.0]]), np.zeros((1, 1)),
                    np.array([v0, v0, 0.0, 0.0]), _none, 4 * period)


def lc_filter_damped(e: float = 24.0, rs: float = 0.05, l: float = 10e-6, cf: float = 22e-6,
                     rd: float = 0.7, cd: float = 100e-6) -> HandCase:
    """A step of e volts through Rs into L (in-a-out), Cf at out, and a damping leg
    Rd + Cd from out to ground.  x = [i_L, v_cf, v_cd]:
    L i' = e - Rs i - v_cf;  Cf v_cf' = i - (v_cf - v_cd)/Rd;  Cd v_cd' = (v_cf - v_cd)/Rd."""
    circuit = Circuit("LC filter with damping leg", (
        Element("V_step", "V", ("in", "0"), e, part="V1", role="volts", timing="step"),
        Element("R_V1_source", "R", ("in", "a"), rs, part="V1", role="source_resistance"),
        Element("L_L1", "L", ("a", "out"), l, initial=0.0, part="L1"),
        Element("C_C1", "C", ("out", "0"), cf, initial=0.0, part="C1"),
        Element("R_Rd", "R", ("out", "m"), rd, part="Rd"),
        Element("C_Cd", "C", ("m", "0"), cd, initial=0.0, part="Cd"),
    ), probe=("out", "0"), response="step")
    a = np.array([
        [-rs / l, -1 / l, 0.0],
        [1 / cf, -1 / (rd * cf), 1 / (rd * cf)],
        [0.0, 1 / (rd * cd), -1 / (rd * cd)],
    ])
    b = np.array([[1 / l], [0.0], [0.0]])
    period = 2 * math.pi * math.sqrt(l * cf)
    return HandCase("LC filter with damping leg", circuit, a, b, np.array([[0.0, 1.0, 0.0]]),
                    np.zeros((1, 1)), np.zeros(3), lambda t: np.array([e]), 12 * period)


def coupled_tanks(c1: float = 1e-6, c2: float = 1.5e-6, cc: float = 0.2e-6, l1: float = 1e-3,
                  l2: float = 0.8e-3, r1: float = 400.0, r2: float = 500.0,
                  v0: float = 5.0) -> HandCase:
    """Two parallel tanks (R1 L1 C1 at a, R2 L2 C2 at b) coupled by Cc (a-b); C1 and Cc
    charged to v0. The capacitors C1, Cc, C2 form a loop, so x = [v_a, v_b, i1, i2]:
    E x' = F x with E = [[C1+Cc, -Cc], [-Cc, C2+Cc]] on the voltages (KCL at a and b),
    L1 i1' = v_a, L2 i2' = v_b;  y = v_b."""
    circuit = Circuit("two coupled tanks", (
        Element("C_C1", "C", ("a", "0"), c1, initial=v0, part="C1"),
        Element("R_R1", "R", ("a", "0"), r1, part="R1"),
        Element("L_L1", "L", ("a", "0"), l1, initial=0.0, part="L1"),
        Element("C_Cc", "C", ("a", "b"), cc, initial=v0, part="Cc"),
        Element("C_C2", "C", ("b", "0"), c2, initial=0.0, part="C2"),
        Element("R_R2", "R", ("b", "0"), r2, part="R2"),
        Element("L_L2", "L", ("b", "0"), l2, initial=0.0, part="L2"),
    ), probe=("b", "0"))
    e = np.array([[c1 + cc, -cc], [-cc, c2 + cc]])
    f = np.array([[-1 / r1, 0.0, -1.0, 0.0], [0.0, -1 / r2, 0.0, -1.0]])
    top = np.linalg.solve(e, f)
    a = np.vstack([top, [1 / l1, 0, 0, 0], [0, 1 / l2, 0, 0]])
    period = 2 * math.pi * math.sqrt(l1 * c1)
    return HandCase("two coupled tanks", circuit, a, np.zeros((4, 1)),
                    np.array([[0.0, 1.0, 0.0, 0.0]]), np.zeros((1, 1)),
                    np.array([v0, 0.0, 0.0, 0.0]), _none, 10 * period)


def overdamped_discharge(c: float = 10e-6, r: float = 36.0, l: float = 1e-3,
                         v0: float = 48.0) -> HandCase:
    """A capacitor dumped through R and L, zeta = (R/2) sqrt(C/L) = 1.8.
    x = [v_c, i]: C v_c' = -i; L i' = v_c - R i; y = v_c."""
    circuit = Circuit("overdamped discharge", (
        Element("C_C1", "C", ("p", "0"), c, initial=v0, part="C1"),
        Element("R_R1", "R", ("p", "q"), r, part="R1"),
        Element("L_L1", "L", ("q", "0"), l, initial=0.0, part="L1"),
    ), probe=("p", "0"))
    a = np.array([[0.0, -1 / c], [1 / l, -r / l]])
    slow = (r / (2 * l)) - math.sqrt((r / (2 * l)) ** 2 - 1 / (l * c))
    return HandCase("overdamped discharge", circuit, a, np.zeros((2, 1)),
                    np.array([[1.0, 0.0]]), np.zeros((1, 1)), np.array([v0, 0.0]),
                    _none, 10 / slow)


def current_probe(c: float = 2.2e-6, r: float = 1.5, l: float = 47e-6, v0: float = 20.0) -> HandCase:
    """A series RLC ring-down watched with a current probe through L.
    x = [v_c, i] with i from node p through R, L back to the capacitor:
    C v_c' = -i;  L i' = v_c - R i;  y = i."""
    circuit = Circuit("current probe on a series loop", (
        Element("C_C1", "C", ("p", "0"), c, initial=v0, part="C1"),
        Element("V_probe", "V", ("p", "s"), 0.0, part="probe", role="current"),
        Element("R_R1", "R", ("s", "q"), r, part="R1"),
        Element("L_L1", "L", ("q", "0"), l, initial=0.0, part="L1"),
    ), probe=("p", "0"), probe_current="V_probe")
    a = np.array([[0.0, -1 / c], [1 / l, -r / l]])
    period = 2 * math.pi * math.sqrt(l * c)
    return HandCase("current probe", circuit, a, np.zeros((2, 1)), np.array([[0.0, 1.0]]),
                    np.zeros((1, 1)), np.array([v0, 0.0]), _none, 10 * period)


def snubbed_switch(e: float = 48.0, r_load: float = 12.0, l_stray: float = 2e-6,
                   r_sn: float = 10.0, c_sn: float = 4.7e-9) -> HandCase:
    """A switch carrying a load current opens at t = 0; the load current, flowing in the
    stray inductance, turns into an RC snubber across the switch.
    x = [i, v_c]: L i' = E - (R_load + R_sn) i - v_c;  C v_c' = i;
    y = v_switch = R_sn i + v_c (the voltage across the snubber, hence the switch)."""
    i0 = e / r_load
    circuit = Circuit("RC snubber across an opening switch", (
        Element("V_supply", "V", ("s", "0"), e, part="V1", role="volts", timing="dc"),
        Element("R_load", "R", ("s", "a"), r_load, part="Rload"),
        Element("L_stray", "L", ("a", "sw"), l_stray, initial=i0, part="Ls"),
        Element("R_sn", "R", ("sw", "m"), r_sn, part="Rsn"),
        Element("C_sn", "C", ("m", "0"), c_sn, initial=0.0, part="Csn"),
    ), probe=("sw", "0"))
    a = np.array([[-(r_load + r_sn) / l_stray, -1 / l_stray], [1 / c_sn, 0.0]])
    b = np.array([[1 / l_stray], [0.0]])
    period = 2 * math.pi * math.sqrt(l_stray * c_sn)
    return HandCase("snubbed switch", circuit, a, b, np.array([[r_sn, 1.0]]), np.zeros((1, 1)),
                    np.array([i0, 0.0]), lambda t: np.array([e]), 10 * period)


def pulsed_series(e: float = 5.0, r: float = 20.0, l: float = 100e-6, c: float = 10e-9,
                  delay: float = 2e-6, width: float = 10e-6) -> HandCase:
    """A pulse of e volts (from ``delay`` for ``width``) into a series R, L, C.
    x = [i, v_c]: L i' = u - R i - v_c; C v_c' = i; y = v_c."""
    circuit = Circuit("pulse into a series RLC", (
        Element("V_pulse", "V", ("in", "0"), e, part="V1", role="volts", timing="pulse",
                t_on=delay, t_off=delay + width),
        Element("R_R1", "R", ("in", "a"), r, part="R1"),
        Element("L_L1", "L", ("a", "out"), l, initial=0.0, part="L1"),
        Element("C_C1", "C", ("out", "0"), c, initial=0.0, part="C1"),
    ), probe=("out", "0"), response="step")
    a = np.array([[-r / l, -1 / l], [1 / c, 0.0]])
    b = np.array([[1 / l], [0.0]])

    def u_of(t: float) -> np.ndarray:
        return np.array([e if delay <= t < delay + width else 0.0])

    return HandCase("pulsed series RLC", circuit, a, b, np.array([[0.0, 1.0]]), np.zeros((1, 1)),
                    np.zeros(2), u_of, 3 * (delay + width), (delay, delay + width))


def current_step_tank(i_step: float = 0.1, r: float = 300.0, l: float = 1e-3,
                      c: float = 1e-6, delay: float = 1e-5) -> HandCase:
    """A current step of i_step amperes (from ``delay``) into a parallel RLC tank; the
    source takes current out of ground and pushes it into node ``top``.
    x = [v, i_L]: C v' = u - v/R - i_L;  L i_L' = v;  y = v."""
    circuit = Circuit("current step into a parallel tank", (
        Element("I_I1", "I", ("0", "top"), i_step, part="I1", role="amps", timing="step",
                t_on=delay),
        Element("C_C1", "C", ("top", "0"), c, initial=0.0, part="C1"),
        Element("R_R1", "R", ("top", "0"), r, part="R1"),
        Element("L_L1", "L", ("top", "0"), l, initial=0.0, part="L1"),
    ), probe=("top", "0"), response="step")
    a = np.array([[-1 / (r * c), -1 / c], [1 / l, 0.0]])
    b = np.array([[1 / c], [0.0]])
    period = 2 * math.pi * math.sqrt(l * c)

    def u_of(t: float) -> np.ndarray:
        return np.array([i_step if t >= delay else 0.0])

    return HandCase("current step into a tank", circuit, a, b, np.array([[1.0, 0.0]]),
                    np.zeros((1, 1)), np.zeros(2), u_of, 8 * period, (delay,))


def settled_filter_load_step(e: float = 12.0, rs: float = 0.1, l: float = 4.7e-6,
                             c: float = 47e-6, r_load: float = 6.0, i_step: float = 1.0) -> HandCase:
    """An LC filter fed from a DC supply, settled, then a load current step at t = 0.
    x = [i_L, v]: L i_L' = e - Rs i_L - v;  C v' = i_L - v/R_load - u_i;  y = v.
    Starts at the DC operating point: i_L = e / (Rs + R_load), v = R_load i_L."""
    circuit = Circuit("settled LC filter, load step", (
        Element("V_supply", "V", ("in", "0"), e, part="V1", role="volts", timing="dc"),
        Element("R_source", "R", ("in", "a"), rs, part="V1", role="source_resistance"),
        Element("L_L1", "L", ("a", "out"), l, part="L1"),
        Element("C_C1", "C", ("out", "0"), c, part="C1"),
        Element("R_load", "R", ("out", "0"), r_load, part="Rload"),
        Element("I_load", "I", ("out", "0"), i_step, part="I1", role="amps", timing="step"),
    ), probe=("out", "0"), response="step", starts_settled=True)
    a = np.array([[-rs / l, -1 / l], [1 / c, -1 / (r_load * c)]])
    b = np.array([[1 / l, 0.0], [0.0, -1 / c]])
    i0 = e / (rs + r_load)
    period = 2 * math.pi * math.sqrt(l * c)
    return HandCase("settled filter, load step", circuit, a, b, np.array([[0.0, 1.0]]),
                    np.zeros((1, 2)), np.array([i0, r_load * i0]),
                    lambda t: np.array([e, i_step]), 10 * period)


#: Every case, for parametrised tests.
ALL_CASES = (
    parallel_rlc, esl_probe, lc_filter_damped, coupled_tanks, overdamped_discharge,
    current_probe, snubbed_switch, pulsed_series, current_step_tank, settled_filter_load_step,
)
#: Cases with only elements every deck writer version handles (no I, no pulse/delay).
PLAIN_CASES = (
    parallel_rlc, esl_probe, lc_filter_damped, coupled_tanks, overdamped_discharge,
    current_probe, snubbed_switch,
)


def sample_times(case: HandCase, count: int = 2001) -> np.ndarray:
    """A uniform grid over the case's run (lsim needs one) on which every switching
    time falls (the cases' switching times are multiples of the first)."""
    step = case.stop / (count - 1)
    if case.switches:
        first = min(case.switches)
        step = first / math.ceil(first / step)
    return step * np.arange(int(round(case.stop / step)) + 1)


def reference_response(case: HandCase, times: np.ndarray) -> np.ndarray:
    """``scipy.signal.lsim`` on the hand-derived matrices, zero-order hold between the
    samples (exact for inputs that switch only at sample times)."""
    from scipy import signal

    # The input held over [t_k, t_k+1) is its value in the middle of the interval.
    middle = times + 0.5 * (times[1] - times[0])
    inputs = np.array([case.u_of(float(t)) for t in middle])
    system = signal.StateSpace(case.a, case.b, case.c, case.d)
    _, y, _ = signal.lsim(system, inputs, times, X0=case.x0, interp=False)
    return np.asarray(y, float).reshape(-1)
