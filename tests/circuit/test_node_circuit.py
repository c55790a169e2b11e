"""Node-wired fixtures -> primitive elements: the same layouts as the loop form, sources,
current probes, the lumped extras, series-chain initial currents and node names.

These are structural tests, as in tests/circuit/test_circuit.py: the expected elements
follow from the lumped part models in the schema rows (common practice, no source) and
from Kirchhoff's current law for series chains (any circuits text, from memory). That
the circuits behave as circuit theory says is checked with ngspice in
tests/engines/test_deck_sources.py. Values are copies of the fixture's numbers,
compared to 1e-15 relative (float identity only).
"""

from __future__ import annotations

import pytest

from xcheck.circuit.expand import build_circuit
from xcheck.circuit.model import Circuit, Element
from xcheck.circuit.parameters import ParameterSet, parameters_from_fixture
from xcheck.errors import FixtureError
from xcheck.fixture.model import Fixture
from xcheck.fixture.reader import parse_fixture_text

COPY = 1e-15

PARTS = '''
[parts.SW1]
kind = "switch"
{sw1}
[parts.C1]
kind = "capacitor"
nominal = "47u"
esr = "40m"
esl = "20n"
leakage = "1meg"
initial = "12"
{c1}
[parts.R1]
kind = "resistor"
nominal = "0.22"
inductance = "15n"
{r1}
[parts.L1]
kind = "inductor"
nominal = "470u"
dcr = "0.1"
parallel_capacitance = "30p"
initial = "2"
{l1}
[probe_loading]
resistance = "10meg"
capacitance = "11p"
'''

LOOP = 'title = "ring (invented example)"\nresponse = "natural"\nprobe = "C1"\n' \
       'loop = ["SW1", "C1", "R1", "L1"]\n' + PARTS.format(sw1="", c1="", r1="", l1="")
NODES = 'version = 2\ntitle = "ring (invented example)"\nresponse = "natural"\nprobe = "C1"\n' \
        + PARTS.format(sw1='nodes = ["0", "n1"]', c1='nodes = ["n1", "n2"]',
                       r1='nodes = ["n2", "n3"]', l1='nodes = ["n3", "gnd"]')


def build(text: str, updates: dict | None = None) -> Circuit:
    fixture = parse_fixture_text(text, "x.toml")
    params = parameters_from_fixture(fixture)
    if updates:
        params = params.with_values(updates)
    return build_circuit(fixture, params)


def by_name(circuit: Circuit) -> dict[str, Element]:
    return {e.name: e for e in circuit.elements}


def node_fixture(body: str, probe: str = '["out", "0"]', response: str = "step") -> str:
    return (f'version = 2\ntitle = "node check (invented example)"\nresponse = "{response}"\n'
            f"probe = {probe}\n{body}")


FILTER = '''
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
'''


# --------------------------------------------------------------------------------------
# The node form lays parts out as the loop form does
# --------------------------------------------------------------------------------------


def test_a_node_wired_series_loop_gives_the_loop_forms_circuit() -> None:
    loop, nodes = build(LOOP), build(NODES)
    # Same elements (names, nodes, values, initial states, origins) in the same order.
    assert nodes.elements == loop.elements
    assert nodes.probe == loop.probe == ("n1", "n2")
    # Every inductance carries the one series current, 2 A, in both forms.
    for name in ("L_L1", "L_C1_esl", "L_R1_inductance"):
        assert by_name(nodes)[name].initial == pytest.approx(2.0, rel=COPY)
    # The one difference: node wiring has no loop current to sense.
    assert loop.current_sense == "V_SW1" and nodes.current_sense is None
    assert (nodes.probe_current, nodes.starts_settled) == (None, False)


def test_a_voltage_source_is_a_v_element_and_its_series_resistance() -> None:
    circuit = build(node_fixture(FILTER))
    e = by_name(circuit)
    source, inner = e["V_V1"], e["R_V1_source_resistance"]
    # First terminal positive, then the source resistance towards the second terminal.
    assert source.nodes == ("in", "V1_a") and inner.nodes == ("V1_a", "0")
    assert source.value == pytest.approx(24.0, rel=COPY)
    assert (source.timing, source.t_on, source.t_off) == ("step", pytest.approx(20e-6, rel=COPY), None)
    assert (source.part, source.role) == ("V1", "volts")
    assert inner.value == pytest.approx(0.05, rel=COPY) and inner.role == "source_resistance"
    assert [x.name for x in circuit.elements] == [
        "V_V1", "R_V1_source_resistance", "L_L1", "R_L1_dcr", "R_C1_esr", "C_C1",
    ]
    assert circuit.probe == ("out", "0") and circuit.response == "step"


def test_an_ideal_voltage_source_and_a_pulse() -> None:
    text = node_fixture(FILTER.replace('source_resistance = "50m"\n', "").replace(
        'delay = "20u"', 'waveform = "pulse"\ndelay = "2u"\nwidth = "5u"'))
    source = by_name(build(text))["V_V1"]
    assert source.nodes == ("in", "0")
    assert (source.timing, source.t_on, source.t_off) == (
        "pulse", pytest.approx(2e-6, rel=COPY), pytest.approx(7e-6, rel=COPY))


def test_a_current_source_and_a_settled_start() -> None:
    body = FILTER.replace('delay = "20u"', 'waveform = "dc"') + '''
[parts.I1]
kind = "current_source"
amps = "1.5"
delay = "1m"
nodes = ["out", "0"]
'''
    circuit = build(node_fixture(body))
    load = by_name(circuit)["I_I1"]
    # SPICE sign: the current leaves "out" through the source into ground.
    assert load.kind == "I" and load.nodes == ("out", "0")
    assert load.value == pytest.approx(1.5, rel=COPY)
    assert (load.timing, load.t_on) == ("step", pytest.approx(1e-3, rel=COPY))
    assert by_name(circuit)["V_V1"].timing == "dc"
    assert circuit.starts_settled is True


def test_current_probe_inserts_a_0v_source_in_series_in_both_forms() -> None:
    circuit = build(node_fixture(FILTER, probe='{ current = "L1" }'))
    e = by_name(circuit)
    meter = e["V_probe_L1"]
    # At L1's first terminal: its current, first node to second, is L1's.
    assert meter.kind == "V" and meter.value == 0.0
    assert meter.nodes == ("in", "L1_probe") and e["L_L1"].nodes[0] == "L1_probe"
    assert (meter.part, meter.role) == ("L1", "current_probe")
    assert circuit.probe_current == "V_probe_L1" and circuit.probe_unit == "A"
    loop = build("version = 2\n" + LOOP.replace('probe = "C1"', 'probe = { current = "L1" }')
                 .replace('[probe_loading]\nresistance = "10meg"\ncapacitance = "11p"\n', ""))
    names = [x.name for x in loop.elements]
    assert loop.probe_current == "V_probe_L1"
    assert names.index("V_probe_L1") == names.index("L_L1") - 1  # right before L1
    assert by_name(loop)["V_probe_L1"].nodes == ("n3", "L1_probe")


def test_lumped_extras_sit_in_series_with_the_loss_part() -> None:
    extras = {("loop", "extra_resistance"): 0.3, ("loop", "extra_inductance"): 5e-9}
    e = by_name(build(node_fixture(FILTER), extras))
    # The first inductor in file order (Fixture.loss_part), at its first terminal.
    assert e["R_loop_extra"].nodes == ("in", "loop_r")
    assert e["L_loop_extra"].nodes == ("loop_r", "loop_l")
    assert e["L_L1"].nodes[0] == "loop_l"
    assert e["R_loop_extra"].value == pytest.approx(0.3, rel=COPY)
    no_inductor = FILTER.replace('kind = "inductor"\nnominal = "10u"\ndcr = "15m"',
                                 'kind = "resistor"\nnominal = "1"')
    e = by_name(build(node_fixture(no_inductor), extras))
    assert e["R_loop_extra"].nodes[0] == "out" and e["R_C1_esr"].nodes[0] == "loop_l"


def test_series_chains_carry_one_initial_current() -> None:
    body = '''
[parts.C1]
kind = "capacitor"
nominal = "1u"
esl = "10n"
nodes = ["a", "0"]
[parts.L1]
kind = "inductor"
nominal = "1m"
initial = "2"
nodes = ["a", "b"]
[parts.L2]
kind = "inductor"
nominal = "1m"
initial = "-2"
nodes = ["0", "b"]
'''
    e = by_name(build(node_fixture(body, probe='"C1"', response="natural")))
    # L2 is wired the other way round, so -2 A in its direction is L1's 2 A; C1's ESL,
    # first terminal a to ground, carries the current back: -2 A.
    assert e["L_L1"].initial == pytest.approx(2.0, rel=COPY)
    assert e["L_L2"].initial == pytest.approx(-2.0, rel=COPY)
    assert e["L_C1_esl"].initial == pytest.approx(-2.0, rel=COPY)
    clash = body.replace('initial = "-2"', 'initial = "2"')
    with pytest.raises(FixtureError, match=r"L1 and L2 are in series, so they carry one current "
                       r"at t = 0, but their initial currents differ \(L1 = 2\.0 A, L2 = 2\.0 A "
                       r"\(wired the other way round\)\)"):
        build(node_fixture(clash, probe='"C1"', response="natural"))


def test_node_names_become_unique_safe_identifiers() -> None:
    body = '''
[parts.V1]
kind = "voltage_source"
volts = "1"
nodes = ["1", "0"]
[parts.R1]
kind = "resistor"
nominal = "1"
nodes = ["1", "C1_a"]
[parts.C1]
kind = "capacitor"
nominal = "1u"
esr = "1m"
nodes = ["C1_a", "n_1"]
[parts.R2]
kind = "resistor"
nominal = "1"
nodes = ["n_1", "0"]
'''
    circuit = build(node_fixture(body, probe='["1", "n_1"]'))
    e = by_name(circuit)
    # "1" becomes n_1; the fixture's own n_1 then takes n_1_2; C1's internal node does
    # not take the fixture's C1_a.
    assert e["V_V1"].nodes == ("n_1", "0")
    assert e["R_R1"].nodes == ("n_1", "C1_a")
    assert e["R_C1_esr"].nodes == ("C1_a", "C1_a_2") and e["C_C1"].nodes == ("C1_a_2", "n_1_2")
    assert circuit.probe == ("n_1", "n_1_2")
    assert len({n.lower() for n in circuit.nodes}) == len(circuit.nodes)


def test_probe_loading_across_two_nodes_starts_at_their_voltage() -> None:
    body = '''
[parts.C1]
kind = "capacitor"
nominal = "1u"
initial = "5"
nodes = ["top", "0"]
[parts.L1]
kind = "inductor"
nominal = "1m"
nodes = ["top", "0"]
[parts.R1]
kind = "resistor"
nominal = "100"
nodes = ["top", "0"]
[probe_loading]
resistance = "1meg"
capacitance = "10p"
'''
    for probe, volts in (('["top", "0"]', 5.0), ('["0", "top"]', -5.0)):
        e = by_name(build(node_fixture(body, probe=probe, response="natural")))
        plus_minus = tuple(n for n in probe.strip("[]").replace('"', "").split(", "))
        assert e["C_probe"].nodes == e["R_probe"].nodes == plus_minus
        # In parallel with C1 at 5 V (KVL along C1), in the probe's own sense.
        assert e["C_probe"].initial == pytest.approx(volts, rel=COPY)


def test_a_probe_across_a_bare_wire_is_an_error() -> None:
    body = FILTER.replace('nodes = ["out", "0"]', 'nodes = ["x", "0"]') + (
        '[parts.W1]\nkind = "wire"\nnodes = ["out", "x"]\n')
    with pytest.raises(FixtureError, match=r"the probe is between the nodes 'out' and 'x', which "
                       r"a wire with neither resistance nor inductance joins into one node"):
        build(node_fixture(body, probe='["out", "x"]'))


def test_a_parameter_set_cannot_set_a_source_or_the_step() -> None:
    fixture: Fixture = parse_fixture_text(node_fixture(FILTER), "x.toml")
    params = parameters_from_fixture(fixture)
    assert not [k for k in params.values if k[0] in ("V1", "step")]  # the fixture's own
    bad = params.with_values({("V1", "source_resistance"): 1.0, ("step", "volts"): 5.0})
    with pytest.raises(FixtureError) as caught:
        build_circuit(fixture, bad)
    text = " | ".join(caught.value.problems)
    assert "V1.source_resistance belongs to nothing in this fixture (V1 is a source" in text
    assert "step.volts belongs to nothing in this fixture (node wiring has no [step]" in text
    assert isinstance(params, ParameterSet)
