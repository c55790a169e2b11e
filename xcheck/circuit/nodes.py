"""Node-wired fixture to circuit: each part between its two named nodes.

:func:`build_node_circuit` is what :func:`xcheck.circuit.expand.build_circuit` calls for
a fixture wired by nodes (``Fixture.wiring == "nodes"``, format version 2). Each part is
laid out between its two nodes exactly as in a loop (:mod:`xcheck.circuit.layout`: the
same series elements from the schema rows, the same elements across); source parts
become a V or I element with their ``timing``, ``t_on`` and ``t_off`` (a voltage
source followed by its series ``source_resistance``). In file order, for each part:

1. a current probe's 0 V source ``V_probe_<part>`` at the probed part's first terminal
   (its current, first node to second, is the probed signal:
   :attr:`~xcheck.circuit.model.Circuit.probe_current`);
2. for :attr:`~xcheck.fixture.model.Fixture.loss_part` (the first inductor in file
   order, else the first capacitor), the model ladder's lumped extra resistance
   ``R_loop_extra`` and inductance ``L_loop_extra``, in series at its first terminal:
   node wiring has no one loop for them to close;
3. the part's own elements;

then every element across a part, then the probe loading across the probe's two nodes.
There is no loop current: :attr:`~xcheck.circuit.model.Circuit.current_sense` is None.
A switch part is closed for the whole run (its closed resistance, or a 0 V source), and
before t = 0 too when the circuit starts settled: in node wiring a step or pulse source
is what switches something on.

Node names reach the deck as :func:`~xcheck.circuit.model.spice_identifier` makes them
(``1`` becomes ``n_1``), unique ignoring case; a part's internal nodes never take a name
the fixture uses.

Initial conditions. Parts joined end to end through nodes no third part touches form a
series chain and carry one current: every inductance of the chain (inductor parts, ESL,
resistor and wire inductance, the extra inductance) starts at the current the chain's
inductor parts state (each part's ``initial``, first terminal to second; zero when none
does), and stated currents that disagree are an error naming the inductors. Capacitors
start at their ``initial`` voltage; capacitance across a part or a probe starts at the
voltage across what it bridges. A fixture with a ``"dc"`` source starts settled
(:attr:`~xcheck.circuit.model.Circuit.starts_settled`): the engines then start every
capacitor and inductor at the DC operating point instead.
"""

from __future__ import annotations

from collections import defaultdict
from typing import TYPE_CHECKING

import networkx as nx

from xcheck.circuit.layout import (
    start_build,
    _representatives,
    _renamed,
    _Work,
    add_probe_loading,
    expand_part,
    expand_source,
    insert_current_probe,
)
from xcheck.circuit.model import (
    Circuit,
    check_topology,
    spice_identifier,
)
from xcheck.circuit.parameters import LOOP_EXTRA_INDUCTANCE, LOOP_EXTRA_RESISTANCE, ParameterSet
from xcheck.errors import FixtureError
from xcheck.fixture.schema import PART_KINDS

if TYPE_CHECKING:  # pragma: no cover - import for type hints only
    from xcheck.fixture.model import Fixture


def build_node_circuit(fixture: Fixture, parameters: ParameterSet, source: str) -> Circuit:
    """Expand a node-wired fixture and one (already checked) parameter set.

    Parameters
    ----------
    fixture
        A fixture with ``wiring == "nodes"``.
    parameters
        Values for the passive parts and the lumped extras, checked by
        :func:`xcheck.circuit.expand.parameter_problems`.
    source
        The fixture's name in messages.

    Returns
    -------
    Circuit
        Elements in the order described in the module docstring; it has passed
        :func:`~xcheck.circuit.model.check_topology`.

    Raises
    ------
    FixtureError
        When inductors in one series chain state different initial currents, or the
        probe's two nodes are joined by a bare wire (it would always read 0 V).
    TopologyError
        When the wiring cannot be simulated (see
        :func:`~xcheck.circuit.model.topology_problems`).
    """
    currents, problems = chain_currents(fixture)
    if problems:
        raise FixtureError(source, problems)
    work, connections, node_map = start_build(fixture)

    loss = fixture.loss_part
    probe_current = None
    spans: dict[str, tuple[str, str]] = {}
    branch_v0: dict[str, float] = {}
    for name, first, second in connections:
        part = fixture.parts[name]
        a, b = node_map[first], node_map[second]
        current = currents[name]
        extra = 0.0
        if fixture.probe_kind == "current" and name == fixture.probe:
            probe_current, a = insert_current_probe(work, name, a)
        if name == loss:
            a, extra = _extras(work, parameters, a, current)
        spans[name] = (a, b)
        if part.source is not None:
            branch_v0[name] = extra + expand_source(work, part, a, b, current)
        else:
            branch_v0[name] = extra + expand_part(work, part, parameters, a, b, current)[0]

    if fixture.probe_kind == "nodes":
        assert fixture.probe_nodes is not None
        plus, minus = fixture.probe_nodes
        span = (node_map[plus], node_map[minus])
        v0 = _path_voltage(fixture, branch_v0, plus, minus)
    else:
        assert fixture.probe is not None
        span = spans[fixture.probe]
        v0 = branch_v0[fixture.probe]
    if fixture.probe_kind != "current":
        add_probe_loading(work, parameters, span, v0)
    rep = _representatives(work)
    probe = (rep(span[0]), rep(span[1]))
    if probe[0] == probe[1] and fixture.probe_kind != "current":
        where = (
            f"across {fixture.probe!r}" if fixture.probe is not None
            else f"between the nodes {fixture.probe_nodes[0]!r} and "  # type: ignore[index]
            f"{fixture.probe_nodes[1]!r}"  # type: ignore[index]
        )
        raise FixtureError(source, [
            f"the probe is {where}, which a wire with neither resistance nor inductance "
            "joins into one node, so it would always read 0 V; give the wire a resistance "
            "or inductance, or probe elsewhere"
        ])
    circuit = Circuit(
        title=fixture.title,
        elements=tuple(_renamed(e, rep) for e in (*work.loop, *work.across)),
        probe=probe,
        response=fixture.response,
        current_sense=None,
        source=source,
        probe_current=probe_current,
        starts_settled=fixture.starts_settled,
    )
    check_topology(circuit)
    return circuit


def _extras(
    work: _Work, parameters: ParameterSet, a: str, current: float
) -> tuple[str, float]:
    """The lumped extra resistance and inductance in series from ``a``; returns the
    node after them and the voltage across them at t = 0."""
    node, voltage = a, 0.0
    for key, letter, base, node_base in (
        (LOOP_EXTRA_RESISTANCE, "R", "R_loop_extra", "loop_r"),
        (LOOP_EXTRA_INDUCTANCE, "L", "L_loop_extra", "loop_l"),
    ):
        value = parameters.get(key)
        if not value:
            continue
        following = work.node(node_base)
        work.add(
            letter, base, node, following, value, part=key[0], role=key[1],
            origin=parameters.origins.get(key, ""),
            initial=current if letter == "L" else None,
        )
        if letter == "R":
            voltage += current * value
        node = following
    return node, voltage


def chain_currents(fixture: Fixture) -> tuple[dict[str, float], list[str]]:
    """Each part's current at t = 0 (first terminal to second) from the series chains.

    Two parts meeting at a node no other part touches carry one current (Kirchhoff's
    current law); a chain's current is what its inductor parts' ``initial`` state, zero
    when none does.

    Returns
    -------
    tuple
        Part -> current (A), and the problems (inductors of one chain that disagree).
    """
    parent: dict[str, tuple[str, float]] = {}

    def find(part: str) -> tuple[str, float]:
        """The chain's root and the sign with which ``part`` carries the root's current."""
        sign = 1.0
        while part in parent:  # parent[p] = (q, f): p carries f times q's current
            part, factor = parent[part]
            sign *= factor
        return part, sign

    terminals: dict[str, list[tuple[str, float]]] = defaultdict(list)
    for name, first, second in fixture.connections():
        terminals[first].append((name, -1.0))  # the current leaves the node into the part
        terminals[second].append((name, 1.0))  # and arrives at its second node
    for ends in terminals.values():
        if len(ends) != 2:
            continue
        (p1, s1), (p2, s2) = ends
        (r1, g1), (r2, g2) = find(p1), find(p2)
        if r1 != r2:  # s1 i1 + s2 i2 = 0 with i1 = g1 i_r1, i2 = g2 i_r2
            parent[r2] = (r1, -s1 * s2 * g1 * g2)

    stated: dict[str, list[tuple[str, float, float]]] = defaultdict(list)
    for name in fixture.loop:
        part = fixture.parts[name]
        if PART_KINDS[part.kind].initial_unit == "A" and part.initial is not None:
            root, sign = find(name)
            stated[root].append((name, float(part.initial), sign * float(part.initial)))
    chain_value: dict[str, float] = {}
    problems = []
    for root, entries in stated.items():
        values = {v for _, _, v in entries}
        if len(values) > 1:
            first_sign = find(entries[0][0])[1]
            listed = ", ".join(
                f"{n} = {v!r} A" + ("" if find(n)[1] == first_sign else " (wired the other way round)")
                for n, v, _ in entries
            )
            names = [n for n, _, _ in entries]
            problems.append(
                f"{', '.join(names[:-1])} and {names[-1]} are in series, so they carry one "
                f"current at t = 0, but their initial currents differ ({listed}); give "
                "them one current (each inductor's initial is the current from its first "
                "terminal to its second)"
            )
        chain_value[root] = entries[0][2]
    currents = {}
    for name in fixture.loop:
        root, sign = find(name)
        currents[name] = sign * chain_value.get(root, 0.0)
    return currents, problems


def _path_voltage(fixture: Fixture, branch_v0: dict[str, float], plus: str, minus: str) -> float:
    """Voltage from ``plus`` to ``minus`` at t = 0 along the shortest path of parts (a
    current source's voltage is not known, so no path goes through one); 0 when none."""
    graph = nx.MultiGraph()
    ends = {}
    for name, first, second in fixture.connections():
        ends[name] = (first, second)
        spec = PART_KINDS[fixture.parts[name].kind].source
        if spec is None or spec.letter == "V":
            graph.add_edge(first, second, key=name)
    try:
        path = nx.shortest_path(graph, plus, minus)
    except (nx.NetworkXNoPath, nx.NodeNotFound):
        return 0.0
    voltage = 0.0
    for here, there in zip(path[:-1], path[1:]):
        name = sorted(graph[here][there])[0]
        sign = 1.0 if ends[name] == (here, there) else -1.0
        voltage += sign * branch_v0[name]
    return voltage
