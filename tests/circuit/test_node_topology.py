"""Topology checks that node wiring makes possible, on built circuits and at the CLI.

References (circuit theory, from memory, e.g. Chua, Desoer & Kuh, "Linear and Nonlinear
Circuits", chapter on state equations): a loop made only of capacitors and voltage
sources ties the capacitor voltages to the sources' (a "capacitor-source loop"), and a
cut set made only of inductors and current sources ties the inductor currents to the
sources' (an "inductor-current-source cut set"); both make the state equations
degenerate and a switching source impulsive. Each problem must name the fixture parts
involved and say how to fix it; ``xcheck deck`` exits 2 with one paragraph.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from xcheck.circuit.model import Circuit, Element, TopologyError, check_topology, topology_problems

SUPPLY_ACROSS_CAPACITOR = '''\
version = 2
title = "supply straight onto a capacitor (invented example)"
response = "step"
probe = "C1"
[parts.V1]
kind = "voltage_source"
volts = "5"
nodes = ["a", "0"]
[parts.C1]
kind = "capacitor"
nominal = "1u"
nodes = ["a", "0"]
[parts.R1]
kind = "resistor"
nominal = "10"
nodes = ["a", "0"]
'''

SOURCE_INTO_INDUCTOR = '''\
version = 2
title = "current source into an inductor alone (invented example)"
response = "step"
probe = ["top", "0"]
[parts.I1]
kind = "current_source"
amps = "10m"
nodes = ["0", "top"]
[parts.L1]
kind = "inductor"
nominal = "1m"
nodes = ["top", "mid"]
[parts.C1]
kind = "capacitor"
nominal = "1u"
nodes = ["mid", "0"]
[parts.L2]
kind = "inductor"
nominal = "1m"
nodes = ["top", "0"]
'''

SWITCH_ACROSS_CHARGED_CAPACITOR = '''\
version = 2
title = "ideal switch across a charged capacitor (invented example)"
response = "natural"
probe = "C1"
[parts.C1]
kind = "capacitor"
nominal = "1u"
initial = "5"
nodes = ["a", "0"]
[parts.SW1]
kind = "switch"
nodes = ["a", "0"]
'''

CASES = [
    ("capacitor-source-loop", SUPPLY_ACROSS_CAPACITOR,
     r"V_V1, C_C1 form a loop made only of capacitors and voltage sources \(parts V1 and C1\): "
     r"the capacitors' voltages are tied to the sources'.*put a resistance in the loop \(a "
     r"source_resistance, or a capacitor's esr\)"),
    ("inductor-current-source-cut", SOURCE_INTO_INDUCTOR,
     r"I_I1 has no path for its current but through L_L1, L_L2, a cut set made only of "
     r"inductors and current sources \(parts I1, L1 and L2\).*put a resistor or capacitor "
     r"across the current source"),
    ("ideal-switch-across-capacitor", SWITCH_ACROSS_CHARGED_CAPACITOR,
     r"V_SW1, C_C1 form a loop made only of capacitors and voltage sources \(parts SW1 and C1\)"),
]


@pytest.mark.parametrize(("text", "match"), [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_degenerate_wiring_is_refused_at_the_cli(
    text: str, match: str, write_toml, tmp_path: Path, printed
) -> None:
    from xcheck.cli import main

    path = write_toml(text, "bad.toml")
    out = tmp_path / "bad.cir"
    assert main(["deck", str(path), "--out", str(out)]) == 2
    captured = printed()
    assert not out.exists()
    assert captured.err.startswith("xcheck: ") and "Traceback" not in captured.err
    assert "1 problem in this circuit" in captured.err
    assert "\n\n" not in captured.raw_err.strip()
    assert re.search(match, captured.err), captured.err


def test_the_fixes_the_messages_suggest_work(write_toml, tmp_path: Path) -> None:
    from xcheck.cli import main

    fixed = [
        SUPPLY_ACROSS_CAPACITOR.replace('volts = "5"', 'volts = "5"\nsource_resistance = "0.1"'),
        SOURCE_INTO_INDUCTOR + '[parts.R9]\nkind = "resistor"\nnominal = "1k"\nnodes = ["0", "top"]\n',
    ]
    for index, text in enumerate(fixed):
        path = write_toml(text, f"fixed{index}.toml")
        assert main(["deck", str(path), "--out", str(tmp_path / f"fixed{index}.cir")]) == 0


def _circuit(*elements: Element, probe=("a", "0"), probe_current=None) -> Circuit:
    return Circuit("t", elements, probe, source="unit test", probe_current=probe_current)


def test_problems_name_the_fixture_parts() -> None:
    circuit = _circuit(
        Element("V_V1", "V", ("a", "0"), 1.0, part="V1", role="volts"),
        Element("R_R1", "R", ("a", "b"), 1.0, part="R1"),
        Element("R_R2", "R", ("c", "c"), 1.0, part="R2"),
        Element("V_SW1", "V", ("a", "0"), 0.0, part="SW1"),
        Element("C_C5", "C", ("x", "y"), 1e-6, part="C5"),
        Element("R_R5", "R", ("y", "x"), 1.0, part="R5"),
    )
    text = " | ".join(topology_problems(circuit))
    assert "node 'b' has only one element terminal (R_R1): it floats (part R1); connect" in text
    assert "R_R2 has both terminals on node 'c' (part R2), so it is shorted by its own wiring" in text
    assert "V_SW1 closes a loop made only of voltage sources (part SW1)" in text
    assert "nodes x, y are not connected to ground (parts C5 and R5); connect them" in text


def test_a_current_probe_must_be_a_0v_source() -> None:
    base = (Element("V_V1", "V", ("a", "0"), 1.0, part="V1"), Element("R_R1", "R", ("a", "0"), 1.0))
    assert topology_problems(_circuit(*base, probe_current="V_V1")) == [
        "the current probe 'V_V1' is not a 0 V source of the circuit"
    ]
    with pytest.raises(TopologyError, match="the current probe 'V_nope'"):
        check_topology(_circuit(*base, probe_current="V_nope"))


def test_capacitor_loops_without_a_source_and_inductor_cuts_without_one_are_fine() -> None:
    # Two capacitors in parallel, two inductors in series: dependent states, no source
    # tied to them; the state-space builder folds them (tests/engines/test_exact.py).
    circuit = _circuit(
        Element("V_V1", "V", ("a", "0"), 1.0, part="V1"),
        Element("R_R1", "R", ("a", "b"), 1.0, part="R1"),
        Element("C_C1", "C", ("b", "0"), 1e-6, part="C1"),
        Element("C_C2", "C", ("b", "0"), 1e-6, part="C2"),
        Element("L_L1", "L", ("b", "m"), 1e-3, part="L1"),
        Element("L_L2", "L", ("m", "0"), 1e-3, part="L2"),
        Element("I_I1", "I", ("0", "b"), 1e-3, part="I1"),
    )
    assert topology_problems(circuit) == []
