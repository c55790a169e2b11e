"""Decks of node-wired fixtures: current sources, PULSE for switched sources, a settled
start's ic= values, current probes; and ngspice running them against circuit theory.

References outside xcheck:

- SPICE's independent-source syntax ``Vname n+ n- dc V``, ``Iname n+ n- ...`` and
  ``PULSE(V1 V2 TD TR TF PW)``, and its sign conventions (a current source drives its
  current from its first node through itself to its second; a voltage source's branch
  current enters its first node): ngspice manual, chapter on independent sources (from
  memory), and ngspice itself, which runs the decks.
- Parallel RLC driven by a current step (hand derivation from Kirchhoff's current law,
  as in any circuits text's chapter on second-order step responses, from memory): with
  alpha = 1/(2RC), w0 = 1/sqrt(LC), wd = sqrt(w0^2 - alpha^2) and tau the time since
  the step, v = I0/(C wd) e^(-alpha tau) sin(wd tau) and
  i_L = I0 (1 - e^(-alpha tau) (cos(wd tau) + alpha/wd sin(wd tau))).
- An LC filter with a load: state equations written here by hand and integrated by
  ``scipy.signal.lsim``.
- The characteristic polynomial of the parallel RLC, L C s^2 + (L/R) s + 1, solved by
  ``numpy.roots``, for the deck's rise and fall time.
- The DC operating point of the settled filter by hand: the inductor a short, the
  capacitor open.

Tolerances of the ngspice runs: 2e-4 of the response's scale. The deck's automatic step
aims at 1e-4 of it (xcheck.engines.timing) and ngspice's own truncation error is of that
order; a wiring, sign, delay or initial-state mistake is off by the order of the whole
signal.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
import scipy.signal

from xcheck.circuit.expand import build_circuit
from xcheck.circuit.model import Circuit, Element
from xcheck.circuit.parameters import parameters_from_fixture
from xcheck.engines.deck import EDGE_FRACTION, deck_names, pulse_values, write_deck
from xcheck.engines.ngspice import simulate_ngspice
from xcheck.fixture.reader import parse_fixture_text

R_TANK, L_TANK, C_TANK, I_STEP, DELAY = 300.0, 1e-3, 1e-6, 10e-3, 10e-6

TANK = f'''\
version = 2
title = "Parallel tank hit by a current step (invented example)"
response = "step"
probe = {{probe}}

[parts.I1]
kind = "current_source"
amps = "10m"
delay = "10u"
nodes = ["0", "top"]

[parts.C1]
kind = "capacitor"
nominal = "1u"
nodes = ["top", "0"]

[parts.R1]
kind = "resistor"
nominal = "300"
nodes = ["top", "gnd"]

[parts.L1]
kind = "inductor"
nominal = "1m"
nodes = ["top", "0"]
'''

E, RS, LF, RL, CF, RC, RLOAD, TD = 24.0, 0.05, 10e-6, 15e-3, 100e-6, 30e-3, 4.7, 20e-6

FILTER = '''\
version = 2
title = "LC filter behind a bench supply switched on at 20 us (invented example)"
response = "step"
probe = ["out", "0"]

[parts.V1]
kind = "voltage_source"
volts = "24"
source_resistance = "50m"
delay = "20u"
nodes = ["in", "0"]

[parts.L1]
kind = "inductor"
nominal = "10u"
dcr = "15m"
nodes = ["in", "out"]

[parts.C1]
kind = "capacitor"
nominal = "100u"
esr = "30m"
nodes = ["out", "0"]

[parts.R1]
kind = "resistor"
nominal = "4.7"
nodes = ["out", "0"]
'''

SETTLED = '''\
version = 2
title = "Settled LC filter, load step at 100 us (invented example)"
response = "step"
probe = ["out", "0"]

[parts.V1]
kind = "voltage_source"
volts = "12"
source_resistance = "0.1"
waveform = "dc"
nodes = ["in", "0"]

[parts.L1]
kind = "inductor"
nominal = "4.7u"
dcr = "20m"
nodes = ["in", "out"]

[parts.C1]
kind = "capacitor"
nominal = "47u"
esr = "10m"
nodes = ["out", "0"]

[parts.R1]
kind = "resistor"
nominal = "6"
nodes = ["out", "0"]

[parts.I1]
kind = "current_source"
amps = "1"
delay = "100u"
nodes = ["out", "0"]
'''


def circuit_of(text: str) -> Circuit:
    fixture = parse_fixture_text(text, "x.toml")
    return build_circuit(fixture, parameters_from_fixture(fixture))


def numbers(line: str) -> list[float]:
    """The numbers inside a line's PULSE( ... )."""
    inner = re.search(r"PULSE\(([^)]*)\)", line)
    assert inner, line
    return [float(v) for v in inner.group(1).split()]


def floor_digits(value: float, digits: int = 3) -> float:
    """``value`` rounded down to ``digits`` significant digits (the deck's rounding)."""
    exponent = math.floor(math.log10(value)) - digits + 1
    return math.floor(value / 10**exponent) * 10**exponent


# --------------------------------------------------------------------------------------
# Deck text
# --------------------------------------------------------------------------------------


def test_current_source_and_delayed_step_as_pulse() -> None:
    circuit = circuit_of(TANK.format(probe='["top", "0"]'))
    deck = write_deck(circuit).splitlines()
    stop = float(deck[-2].split()[2])
    (line,) = [x for x in deck if x.startswith("I_I1 ")]
    # SPICE order: from node 0 through the source into node top (current into top).
    assert line.startswith("I_I1 0 top PULSE(") and line.endswith("; I1 current, step from 1e-05 s")
    # Rise and fall: 1e-5 of the shortest natural period 2 pi / max|s|, s the roots of
    # L C s^2 + (L/R) s + 1 (numpy); both rounded down to 3 digits as the deck does.
    roots = np.roots([L_TANK * C_TANK, L_TANK / R_TANK, 1.0])
    period = floor_digits(2 * math.pi / float(np.max(np.abs(roots))))
    edge = floor_digits(EDGE_FRACTION * period)
    v1, v2, td, tr, tf, pw = numbers(line)
    assert (v1, v2) == (0.0, pytest.approx(I_STEP, rel=1e-15))
    assert (tr, tf) == (pytest.approx(edge, rel=1e-12), pytest.approx(edge, rel=1e-12))
    assert td == pytest.approx(DELAY - edge / 2, rel=1e-12)  # the edge centred on 10 us
    assert pw >= stop  # the step stays on for the whole run
    assert any(x.startswith("* switched sources: PULSE with rise and fall") for x in deck)
    assert "ampere" in deck[4]


def test_pulse_and_zero_delay_forms() -> None:
    def element(**timing: object) -> Element:
        return Element("V_V1", "V", ("a", "0"), 5.0, part="V1", **timing)  # type: ignore[arg-type]

    edge, stop = 1e-9, 1e-3
    # A pulse on from 2 us for 10 us: edges centred on 2 us and 12 us.
    v1, v2, td, tr, tf, pw = pulse_values(element(timing="pulse", t_on=2e-6, t_off=12e-6), edge, stop)
    assert (v1, v2, tr, tf) == (0.0, 5.0, edge, edge)
    assert td + tr / 2 == pytest.approx(2e-6, rel=1e-12)
    assert td + tr + pw + tf / 2 == pytest.approx(12e-6, rel=1e-12)
    # A pulse on from t = 0 starts at its value (like a DC value under uic) and falls.
    assert pulse_values(element(timing="pulse", t_on=0.0, t_off=3e-6), edge, stop) == (
        5.0, 0.0, pytest.approx(3e-6 - edge / 2, rel=1e-12), edge, edge, stop)
    # A step at t = 0 stays a DC value, as the loop form's [step] source always was.
    circuit = Circuit("c", (element(timing="step"), Element("R_R1", "R", ("a", "b"), 1.0),
                            Element("C_C1", "C", ("b", "0"), 1e-6)), ("b", "0"))
    line = next(x for x in write_deck(circuit, stop_time=1e-3).splitlines() if x.startswith("V_V1"))
    assert line.startswith("V_V1 a 0 dc 5e+00 ;")


def test_settled_start_writes_the_dc_operating_point_as_ic() -> None:
    circuit = circuit_of(SETTLED)
    assert circuit.starts_settled
    deck = write_deck(circuit).splitlines()
    assert "* starts settled: each ic is the DC operating point of the dc sources, computed by xcheck" in deck
    ic = {x.split()[0]: float(x.split("ic=")[1].split()[0]) for x in deck if "ic=" in x}
    # By hand: L a short, C open, the load step off: i_L = 12 / (0.1 + 0.02 + 6) and the
    # capacitor holds the load's voltage. 1e-9: a 2x2 solve of well-scaled numbers.
    current = 12.0 / (0.1 + 0.02 + 6.0)
    assert ic["L_L1"] == pytest.approx(current, rel=1e-9)
    assert ic["C_C1"] == pytest.approx(6.0 * current, rel=1e-9)
    assert "V_V1 in V1_a dc 1.2e+01" in "\n".join(deck)


def test_current_probe_reads_the_0v_source_branch() -> None:
    circuit = circuit_of(TANK.format(probe='{ current = "L1" }'))
    names = deck_names(circuit)
    assert names.probe_current == "V_probe_L1"
    assert names.probe_current_vector == "v_probe_l1#branch"
    deck = write_deck(circuit).splitlines()
    assert deck[3] == (
        "* response: step; probe: i(V_probe_L1), first node to second; loop current: not sensed"
    )
    assert "V_probe_L1 top L1_probe dc 0 ; L1 current probe (0 V source in series), inserted to read the probed current" in deck


_ALLOWED_LINE = re.compile(
    r"\* [A-Za-z0-9 _.,:()/+%;=-]*"
    r"|[RLCVI][A-Za-z0-9_]* [A-Za-z0-9_]+ [A-Za-z0-9_]+ "
    r"(dc [-+.e0-9]+|PULSE\([-+.e0-9 ]+\)|[-+.e0-9]+( ic=[-+.e0-9]+)?)"
    r"( ; [A-Za-z0-9 _.,:()/+%-]*)?"
    r"|\.options [a-z0-9_=+.\- ]+|\.tran [-+.e0-9 ]+ uic|\.end"
)


def test_hostile_names_on_sources_cannot_add_lines() -> None:
    evil = "x\n.control\nshell touch /tmp/x\n.endc\n+ R9 1 0 1 ; $ {}"
    circuit = Circuit(
        title=evil,
        elements=(
            Element(f"I{evil}", "I", ("0", f"n{evil}"), 1e-3, part=evil, role=evil,
                    origin=evil, timing="step", t_on=1e-6),
            Element(f"V{evil}", "V", (f"n{evil}", "m"), 0.0, part=evil, role=evil, origin=evil),
            Element(f"R{evil}", "R", ("m", "0"), 1e3, part=evil),
            Element(f"C{evil}", "C", ("m", "0"), 1e-9, part=evil),
        ),
        probe=(f"n{evil}", "0"), probe_current=f"V{evil}", source=evil,
    )
    deck = write_deck(circuit, stop_time=1e-4)
    for line in deck.splitlines():
        assert _ALLOWED_LINE.fullmatch(line), line
    assert [x.split()[0] for x in deck.splitlines() if x.startswith(".")] == [".options", ".tran", ".end"]
    assert re.fullmatch(r"[a-z0-9_]+#branch", deck_names(circuit).probe_current_vector or "")


# --------------------------------------------------------------------------------------
# ngspice against circuit theory
# --------------------------------------------------------------------------------------


def _tank_closed_form(t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    alpha = 1 / (2 * R_TANK * C_TANK)
    wd = math.sqrt(1 / (L_TANK * C_TANK) - alpha**2)
    tau = np.clip(t - DELAY, 0.0, None)
    decay = np.exp(-alpha * tau)
    v = I_STEP / (C_TANK * wd) * decay * np.sin(wd * tau)
    i = I_STEP * (1 - decay * (np.cos(wd * tau) + alpha / wd * np.sin(wd * tau)))
    return v, i


@pytest.mark.ngspice
def test_ngspice_parallel_tank_current_step_matches_closed_form() -> None:
    voltage = simulate_ngspice(circuit_of(TANK.format(probe='["top", "0"]')), stop_time=1e-3)
    v_book, _ = _tank_closed_form(voltage.time)
    scale = float(np.max(np.abs(v_book)))
    assert voltage.time[-1] == pytest.approx(1e-3, rel=1e-9)
    assert np.max(np.abs(voltage.probe_voltage - v_book)) <= 2e-4 * scale
    # Nothing before the delay: the current source is off until 10 us.
    before = voltage.time < DELAY - 1e-8
    assert before.sum() > 10 and np.max(np.abs(voltage.probe_voltage[before])) <= 2e-4 * scale
    # The same tank watched with a current probe through L1: the branch current of the
    # inserted 0 V source, first node (top) to second, is i_L.
    current = simulate_ngspice(circuit_of(TANK.format(probe='{ current = "L1" }')), stop_time=1e-3)
    _, i_book = _tank_closed_form(current.time)
    assert np.max(np.abs(current.probe_voltage - i_book)) <= 2e-4 * I_STEP
    assert current.probe_voltage[-1] > 0.5 * I_STEP  # sign: the source's current ends in L1


@pytest.mark.ngspice
def test_ngspice_delayed_step_into_lc_filter_matches_lsim() -> None:
    circuit = circuit_of(FILTER)
    stop = 1e-3
    spice = simulate_ngspice(circuit, stop_time=stop)
    # Hand-written state equations, x = [i_L, v_C], u = [supply volts]; with
    # k = R_load / (R_load + ESR): v_out = k v_C + k ESR i_L,
    # L i_L' = u - (Rs + DCR + k ESR) i_L - k v_C,  C v_C' = k (i_L - v_C / R_load).
    k = RLOAD / (RLOAD + RC)
    a = np.array([[-(RS + RL + k * RC) / LF, -k / LF], [k / CF, -k / (RLOAD * CF)]])
    b = np.array([[1 / LF], [0.0]])
    c = np.array([[k * RC, k]])
    grid = np.linspace(0.0, stop, 50001)  # 20 ns steps; 20 us is step 1000
    u = np.where(grid >= TD - 1e-12, E, 0.0)
    _, y, _ = scipy.signal.lsim((a, b, c, np.zeros((1, 1))), u, grid, interp=False)
    reference = np.interp(spice.time, grid, y)
    scale = max(E, float(np.max(np.abs(y))))
    assert np.max(np.abs(spice.probe_voltage - reference)) <= 2e-4 * scale
    assert float(np.max(y)) > 1.2 * E * RLOAD / (RLOAD + RS + RL)  # it does ring (overshoot)


@pytest.mark.ngspice
def test_ngspice_settled_start_stays_at_its_operating_point_until_the_load_step() -> None:
    circuit = circuit_of(SETTLED)
    spice = simulate_ngspice(circuit, stop_time=2e-3)
    current = 12.0 / (0.1 + 0.02 + 6.0)
    before = spice.time < 100e-6 - 1e-8
    # A wrong ic= would ring at once, by volts; settled, the output stays flat to the
    # solver's tolerance (reltol 1e-6; measured 1e-15) before the step.
    assert before.sum() > 10
    assert np.max(np.abs(spice.probe_voltage[before] - 6.0 * current)) <= 1e-6 * 12.0
    # After the 1 A load step, the new DC point by hand: (12 - v) / 0.12 = v / 6 + 1.
    # 1.9 ms is over 20 time constants of the slowest mode, so it has settled to the
    # solver's tolerance.
    final = (12.0 - 0.12) / (1 + 0.12 / 6.0)
    assert spice.probe_voltage[-1] == pytest.approx(final, abs=1e-6 * 12.0)
