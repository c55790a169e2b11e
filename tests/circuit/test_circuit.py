"""Fixture -> primitive element graph: expansion of parts, the closing chain, initial
conditions, errors, and the topology checks.

These are structural tests: the expected elements follow from the part models written
in xcheck.circuit.expand's table (ESR in series, leakage across the ideal capacitance, ...),
which are the usual lumped models of real parts (common practice, no source). That the
expanded circuit behaves as circuit theory says is checked with ngspice in
tests/test_deck.py. Element values are copies of the fixture's numbers, compared to
1e-15 relative (float identity only).
"""

from __future__ import annotations

from pathlib import Path

import networkx as nx
import pytest

from xcheck.circuit.model import (
    Circuit,
    Element,
    TopologyError,
    check_topology,
    circuit_graph,
    spice_identifier,
    topology_problems,
)
from xcheck.errors import FixtureError, XcheckError
from xcheck.circuit.expand import build_circuit
from xcheck.fixture.model import Fixture, Part, ProbeLoading, StepSource
from xcheck.fixture.reader import load_fixture
from xcheck.circuit.parameters import ORIGIN_FITTED, parameters_from_fixture

EXAMPLES = Path(__file__).resolve().parents[2] / "examples"
COPY = 1e-15  # values copied from the fixture


def fixture_of(parts: list[Part], **fields: object) -> Fixture:
    """A loop fixture of ``parts`` in the order given (invented values)."""
    base: dict[str, object] = dict(
        title="test loop (invented)",
        response="natural",
        loop=tuple(p.name for p in parts),
        probe=parts[1].name if len(parts) > 1 else parts[0].name,
        parts={p.name: p for p in parts},
    )
    base.update(fields)
    return Fixture(**base)  # type: ignore[arg-type]


def ring(**fields: object) -> Fixture:
    """Switch, capacitor with every parasitic, resistor with inductance, inductor."""
    parts = [
        Part("SW1", "switch"),
        Part(
            "C1", "capacitor", nominal=47e-6,
            parasitics={"esr": 0.04, "esl": 20e-9, "leakage": 1e6}, initial=12.0,
        ),
        Part("R1", "resistor", nominal=0.22, parasitics={"inductance": 15e-9}),
        Part("L1", "inductor", nominal=470e-6, parasitics={"dcr": 0.1, "parallel_capacitance": 30e-12}),
    ]
    return fixture_of(parts, **fields)


def build(fixture: Fixture, **updates: float) -> Circuit:
    params = parameters_from_fixture(fixture)
    if updates:
        params = params.with_values({tuple(k.split(".")): v for k, v in updates.items()})  # type: ignore[misc]
    return build_circuit(fixture, params)


def by_name(circuit: Circuit) -> dict[str, Element]:
    return {e.name: e for e in circuit.elements}


def test_capacitor_expansion_and_leakage_across_the_ideal_capacitance() -> None:
    circuit = build(ring())
    e = by_name(circuit)
    esl, esr, cap, leak = e["L_C1_esl"], e["R_C1_esr"], e["C_C1"], e["R_C1_leakage"]
    # [ESL] [ESR] C in series, first terminal to second.
    assert esl.nodes[0] == "n1" and cap.nodes[1] == "n2"
    assert esl.nodes[1] == esr.nodes[0] and esr.nodes[1] == cap.nodes[0]
    assert esl.nodes[1].startswith("C1_") and esr.nodes[1].startswith("C1_")
    # Leakage across the ideal capacitance only, not across ESR or ESL.
    assert leak.nodes == cap.nodes and not leak.in_loop
    assert cap.value == pytest.approx(47e-6, rel=COPY)
    assert (esl.value, esr.value, leak.value) == pytest.approx((20e-9, 0.04, 1e6), rel=COPY)
    assert cap.initial == pytest.approx(12.0, rel=COPY)
    assert (cap.part, cap.role, esr.role) == ("C1", "value", "esr")


def test_inductor_resistor_and_switch_expansion() -> None:
    circuit = build(ring())
    e = by_name(circuit)
    # Inductor: L then DCR; self-capacitance across the whole part (n3 to ground).
    assert e["L_L1"].nodes[0] == "n3" and e["R_L1_dcr"].nodes[1] == "0"
    assert e["L_L1"].nodes[1] == e["R_L1_dcr"].nodes[0]
    assert e["C_L1_parallel_capacitance"].nodes == ("n3", "0")
    # Resistor: R then its inductance.
    assert e["R_R1"].nodes[0] == "n2" and e["L_R1_inductance"].nodes[1] == "n3"
    # A switch without resistance is a 0 V source and senses the loop current.
    switch = e["V_SW1"]
    assert switch.kind == "V" and switch.nodes == ("0", "n1")
    assert switch.value == pytest.approx(0.0, abs=0.0)
    assert circuit.current_sense == "V_SW1"
    assert "V_sense" not in e


def test_deterministic_order_loop_then_parallel() -> None:
    circuit = build(ring(probe_loading=ProbeLoading(10e6, 11e-12)))
    names = [e.name for e in circuit.elements]
    assert names == [
        "V_SW1", "L_C1_esl", "R_C1_esr", "C_C1", "R_R1", "L_R1_inductance", "L_L1",
        "R_L1_dcr", "R_C1_leakage", "C_L1_parallel_capacitance", "R_probe", "C_probe",
    ]
    assert [e.in_loop for e in circuit.elements] == [True] * 8 + [False] * 4
    assert build(ring(probe_loading=ProbeLoading(10e6, 11e-12))) == circuit


def test_probe_loading_across_the_probed_part_starts_at_its_voltage() -> None:
    circuit = build(ring(probe_loading=ProbeLoading(10e6, 11e-12)))
    e = by_name(circuit)
    assert circuit.probe == ("n1", "n2")
    assert e["R_probe"].nodes == circuit.probe and e["C_probe"].nodes == circuit.probe
    # In parallel with a capacitor charged to 12 V, the probe capacitance holds 12 V too.
    assert e["C_probe"].initial == pytest.approx(12.0, rel=COPY)


def test_closed_switch_resistance_and_inserted_current_sense() -> None:
    fixture = ring()
    parts = dict(fixture.parts)
    parts["SW1"] = Part("SW1", "switch", parasitics={"resistance": 5e-3})
    circuit = build(fixture_of([parts[n] for n in fixture.loop]))
    e = by_name(circuit)
    assert e["R_SW1"].value == pytest.approx(5e-3, rel=COPY)
    # No ideal switch: a 0 V sense source where the loop closes, in loop direction.
    sense = e["V_sense"]
    assert circuit.current_sense == "V_sense"
    assert sense.nodes[0] == "0" and e["R_SW1"].nodes[0] == sense.nodes[1]
    assert circuit.elements[0] is sense


def test_step_source_where_the_loop_closes() -> None:
    fixture = ring(response="step", step=StepSource(24.0, 0.05))
    circuit = build(fixture)
    e = by_name(circuit)
    source, inner = e["V_step"], e["R_step_source"]
    # Negative terminal on ground, positive towards the first part.
    assert source.nodes[1] == "0"
    assert inner.nodes[0] == source.nodes[0] and inner.nodes[1] == e["V_SW1"].nodes[0]
    assert source.value == pytest.approx(24.0, rel=COPY)
    assert [x.name for x in circuit.elements[:3]] == ["V_step", "R_step_source", "V_SW1"]
    # The step response starts from what the fixture says (C1 charged to 12 V here).
    assert e["C_C1"].initial == pytest.approx(12.0, rel=COPY)


def test_extra_loop_elements_in_series_and_zero_ones_left_out() -> None:
    circuit = build(ring(), **{"loop.extra_resistance": 0.3, "loop.extra_inductance": 0.0})
    e = by_name(circuit)
    extra = e["R_loop_extra"]
    assert extra.value == pytest.approx(0.3, rel=COPY) and extra.origin == ORIGIN_FITTED
    assert extra.nodes[0] == "0" and extra.nodes[1] == e["V_SW1"].nodes[0]
    assert "L_loop_extra" not in e
    # A fitted correction may be negative (stated losses overestimated).
    assert by_name(build(ring(), **{"loop.extra_resistance": -0.01}))["R_loop_extra"].value < 0


def test_inductor_initial_current_is_the_loop_current() -> None:
    fixture = ring()
    parts = dict(fixture.parts)
    parts["L1"] = Part("L1", "inductor", nominal=470e-6, parasitics={"dcr": 0.1}, initial=2.0)
    circuit = build(fixture_of([parts[n] for n in fixture.loop]), **{"loop.extra_inductance": 1e-9})
    e = by_name(circuit)
    # Every series inductance carries the one loop current at t = 0.
    for name in ("L_L1", "L_C1_esl", "L_R1_inductance", "L_loop_extra"):
        assert e[name].initial == pytest.approx(2.0, rel=COPY), name


def test_inductors_with_different_initial_currents_are_rejected() -> None:
    parts = [
        Part("C1", "capacitor", nominal=1e-6, initial=1.0),
        Part("L1", "inductor", nominal=1e-3, initial=1.0),
        Part("L2", "inductor", nominal=1e-3, initial=2.0),
    ]
    with pytest.raises(FixtureError, match=r"initial currents differ \(L1 = 1.0 A, L2 = 2.0 A\)"):
        build(fixture_of(parts))


def test_bare_wire_joins_its_nodes() -> None:
    parts = [
        Part("W1", "wire"),
        Part("C1", "capacitor", nominal=1e-6, initial=5.0),
        Part("W2", "wire", parasitics={"resistance": 0.01, "inductance": 1e-7}),
        Part("L1", "inductor", nominal=1e-3),
        Part("W3", "wire"),
    ]
    circuit = build(fixture_of(parts))
    e = by_name(circuit)
    assert "W1" not in {x.part for x in circuit.elements}
    # W3 joins L1's end to ground; W1 joins the sense source to C1.
    assert e["L_L1"].nodes[1] == "0"
    assert e["V_sense"].nodes[1] == e["C_C1"].nodes[0]
    assert e["R_W2"].nodes[1] == e["L_W2"].nodes[0]
    assert circuit.probe == e["C_C1"].nodes


def test_probe_on_a_bare_wire_is_an_error() -> None:
    parts = [Part("C1", "capacitor", nominal=1e-6, initial=5.0), Part("W1", "wire"),
             Part("R1", "resistor", nominal=1.0)]
    with pytest.raises(FixtureError, match=r"across 'W1'.*always read 0 V"):
        build(fixture_of(parts, probe="W1"))


def test_missing_required_value_must_be_given_or_fitted() -> None:
    parts = [Part("C1", "capacitor", nominal=1e-6, initial=5.0),
             Part("L1", "inductor", unknown=frozenset({"nominal"})),
             Part("R1", "resistor", unknown=frozenset({"nominal"}))]
    fixture = fixture_of(parts, source=Path("jig.toml"))
    with pytest.raises(FixtureError, match=r"jig.toml: 2 problems") as caught:
        build(fixture)
    assert caught.value.problems[0].startswith("part 'L1' (inductor): its inductance is written '?'")
    assert "must be given (nominal or measured under [parts.L1]) or fitted" in caught.value.problems[0]
    assert "part 'R1' (resistor): its resistance" in caught.value.problems[1]
    # Once fitted, it builds.
    params = parameters_from_fixture(fixture).with_values({("L1", "value"): 1e-3, ("R1", "value"): 2.0})
    assert by_name(build_circuit(fixture, params))["L_L1"].value == pytest.approx(1e-3, rel=COPY)


def test_bad_parameter_values_are_all_reported() -> None:
    fixture = ring()
    params = parameters_from_fixture(fixture).with_values(
        {("C1", "value"): -1e-6, ("C1", "leakage"): 0.0, ("R1", "dcr"): 1.0,
         ("nowhere", "value"): 1.0, ("L1", "dcr"): float("nan")}
    )
    with pytest.raises(FixtureError, match="5 problems") as caught:
        build_circuit(fixture, params)
    text = " | ".join(caught.value.problems)
    assert "C1.value is -1e-06; expected a value above zero" in text
    assert "C1.leakage is 0.0; expected a value above zero" in text
    assert "R1.dcr belongs to nothing in this fixture (R1 takes value, inductance)" in text
    assert "nowhere.value belongs to nothing" in text
    assert "L1.dcr is nan; expected a finite number" in text


def test_part_names_become_safe_unique_identifiers() -> None:
    # SPICE ignores case: parts "x" and "X" must not both become R_x.
    parts = [Part("C1", "capacitor", nominal=1e-6, initial=1.0),
             Part("x", "resistor", nominal=1.0), Part("X", "resistor", nominal=2.0)]
    names = [e.name for e in build(fixture_of(parts)).elements]
    assert len({n.lower() for n in names}) == len(names)
    assert spice_identifier("C1 .control\nshell") == "C1_control_shell"
    assert spice_identifier("9lives", "p") == "p_9lives"
    assert spice_identifier("...", "n") == "n"


@pytest.mark.parametrize("name", ["film_ringdown", "lc_filter_step"])
def test_example_fixtures_build(name: str) -> None:
    fixture = load_fixture(EXAMPLES / f"{name}.toml")
    circuit = build_circuit(fixture, parameters_from_fixture(fixture))
    assert circuit.source.endswith(f"{name}.toml")
    assert circuit.response == fixture.response and circuit.title == fixture.title
    # Every part with a value or a stated parasitic shows up as an element of its own.
    parts_in_circuit = {e.part for e in circuit.elements}
    for part in fixture.parts.values():
        if part.nominal is not None or part.measured is not None or part.parasitics:
            assert part.name in parts_in_circuit, part.name


# -- graph and topology ----------------------------------------------------------------


def test_circuit_graph_has_one_edge_per_element() -> None:
    circuit = build(ring())
    graph = circuit_graph(circuit)
    assert isinstance(graph, nx.MultiGraph)
    assert graph.number_of_edges() == len(circuit.elements)
    assert set(graph.nodes) == set(circuit.nodes)
    assert graph.nodes["0"]["ground"] is True
    # Leakage and C_C1 are parallel edges between the same two nodes.
    cap = by_name(circuit)["C_C1"]
    assert set(graph[cap.nodes[0]][cap.nodes[1]]) == {"C_C1", "R_C1_leakage"}
    assert nx.is_connected(graph)
    assert topology_problems(circuit) == []


def _rc(*extra: Element, probe: tuple[str, str] = ("1", "0")) -> Circuit:
    base = (
        Element("V_sense", "V", ("0", "1"), 0.0),
        Element("R_1", "R", ("1", "2"), 1.0),
        Element("C_1", "C", ("2", "0"), 1e-6, initial=1.0),
    )
    return Circuit("rc", base + extra, probe, current_sense="V_sense", source="unit test")


def test_topology_accepts_a_closed_loop() -> None:
    assert topology_problems(_rc()) == []
    check_topology(_rc())  # and the raising form agrees


def test_topology_floating_node_and_island() -> None:
    circuit = _rc(
        Element("R_dangling", "R", ("2", "9"), 1.0),
        Element("C_a", "C", ("5", "6"), 1e-9), Element("C_b", "C", ("6", "5"), 1e-9),
    )
    with pytest.raises(TopologyError, match="unit test: 2 problems in this circuit") as caught:
        check_topology(circuit)
    text = " | ".join(caught.value.problems)
    assert "nodes 5, 6 are not connected to ground" in text
    assert "node '9' has only one element terminal (R_dangling): it floats" in text
    assert isinstance(caught.value, XcheckError)


def test_topology_no_ground() -> None:
    circuit = Circuit(
        "no ground",
        (Element("R_1", "R", ("a", "b"), 1.0), Element("C_1", "C", ("b", "a"), 1e-6)),
        ("a", "b"),
    )
    with pytest.raises(TopologyError, match="no element touches the ground node '0'"):
        check_topology(circuit)


def test_topology_voltage_source_loop() -> None:
    # Two sources in parallel: the MNA matrix is singular (ngspice: "singular matrix").
    circuit = _rc(Element("V_twin", "V", ("1", "0"), 0.0))
    with pytest.raises(TopologyError, match="V_twin closes a loop made only of voltage sources"):
        check_topology(circuit)


def test_topology_bad_names_values_and_references() -> None:
    circuit = Circuit(
        "bad",
        (
            Element("V_s", "V", ("0", "1"), 0.0),
            Element("X1", "R", ("1", "2"), 1.0),
            Element("r_dup", "R", ("2", "3"), 0.0),
            Element("R_DUP", "R", ("3", "3"), 1.0),
            Element("C_1", "C", ("3", "0"), -1e-6),
        ),
        ("1", "7"),
        current_sense="R_DUP",
    )
    problems = topology_problems(circuit)
    text = " | ".join(problems)
    assert "element name 'X1' must start with 'R'" in text
    assert "element names 'r_dup' and 'R_DUP' are the same to SPICE" in text
    assert "r_dup is a zero resistance" in text
    assert "R_DUP has both terminals on node '3'" in text
    assert "C_1 has the value -1e-06; expected a positive value" in text
    assert "the probe node '7' is not in the circuit" in text
    assert "the current sense 'R_DUP' is not a voltage source" in text
