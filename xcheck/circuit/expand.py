"""Fixture to circuit: expanding a fixture and one parameter set into primitive elements.

This module owns :func:`build_circuit` and :func:`parameter_problems` and, for the loop
form, the elements inserted where the loop closes. How each part kind is laid out (its
series elements, the elements across it, what it becomes when none is left) and how
each value is bounded are read from the kind's row in :mod:`xcheck.fixture.schema`;
this module keeps no per-kind table. The layout of one part is shared with the node
form (:mod:`xcheck.circuit.layout`); a node-wired fixture is built by
:mod:`xcheck.circuit.nodes`. The data types, naming helpers and topology checks live
in :mod:`xcheck.circuit.model`.

:func:`build_circuit` expands each part of a fixture into primitive elements in series
between the part's two nodes (internal nodes are named from the part, ``C1_a``). The
rows of :data:`~xcheck.fixture.schema.PART_KINDS` are the authority; as written today
they give:

============  ======================================================================
part          elements, first terminal to second
============  ======================================================================
capacitor     [ESL] [ESR] C; ``leakage`` is a resistance across the ideal C only
inductor      L [DCR]; ``parallel_capacitance`` across the whole part
resistor      R [inductance]
switch        closed ``resistance``, or, when absent, a 0 V source (ideal switch)
wire          [resistance] [inductance]; a wire with neither joins its two nodes
============  ======================================================================

Where the loop closes (at ground, before the first part) it inserts, in loop order: the
step source (negative terminal on ground, positive towards the first part) and its
source resistance, the lumped extra loop resistance and inductance when a parameter set
carries them, and a 0 V current-sense source ``V_sense`` when no ideal switch already
senses the loop current. Probe loading sits across the probed part's two nodes. A
current probe (``probe = { current = "L1" }``) puts a 0 V source ``V_probe_L1`` in series
with the probed part, at its first terminal, and names it in
:attr:`~xcheck.circuit.model.Circuit.probe_current`.

A bare wire joins its nodes rather than becoming a 0 V source: it then adds no element
and no equation, cannot form a loop of voltage sources with an ideal switch or the step
source, and both engines see the same, smaller circuit.

Initial conditions: every capacitor starts at its part's ``initial`` voltage (zero when
not given) and every inductance in the loop (inductor parts, ESL, resistor and wire
inductance, extra loop inductance) at the loop's initial current, the ``initial`` of the
inductor parts (zero when none is given). Capacitance across a part (probe capacitance,
inductor self-capacitance) starts at that part's own initial voltage (a capacitor's
``initial``; an inductor's initial current times its DCR), so that nothing jumps at
t = 0.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from xcheck.circuit.layout import (
    start_build,
    _representatives,
    _renamed,
    _series_specs,
    _Work,
    add_probe_loading,
    expand_part,
    insert_current_probe,
)
from xcheck.circuit.model import (
    GROUND,
    Circuit,
    check_topology,
)
from xcheck.circuit.nodes import build_node_circuit
from xcheck.errors import FixtureError
from xcheck.circuit.parameters import (
    LOOP_EXTRA_INDUCTANCE,
    LOOP_EXTRA_RESISTANCE,
    STEP_SOURCE_RESISTANCE,
    STEP_VOLTS,
    ParameterSet,
    missing_values,
)
from xcheck.fixture.schema import (
    PART_KINDS,
    PSEUDO_PARTS,
    ParameterKey,
    key_label,
)

if TYPE_CHECKING:  # pragma: no cover - import for type hints only
    from xcheck.fixture.model import Fixture


# --------------------------------------------------------------------------------------
# Checking a parameter set against a fixture
# --------------------------------------------------------------------------------------


def _value_problem(key: ParameterKey, value: float, lower: str) -> str | None:
    """A problem text when ``value`` breaks the bound ``lower`` ("positive", ...)."""
    if not math.isfinite(value):
        return f"{key_label(key)} is {value!r}; expected a finite number"
    if lower == "positive" and value <= 0:
        return f"{key_label(key)} is {value!r}; expected a value above zero"
    if lower == "non-negative" and value < 0:
        return f"{key_label(key)} is {value!r}; expected zero or more (zero leaves it out)"
    if lower == "non-zero" and value == 0:
        return f"{key_label(key)} is zero; expected a non-zero value"
    return None


def _bound_of(fixture: Fixture, key: ParameterKey) -> str | None:
    """How a key's value is bounded (its schema field's bound), or None when the key
    belongs to nothing."""
    if key[0] in fixture.parts and key[0] not in fixture.loop:
        return None
    if key[0] in fixture.parts and fixture.parts[key[0]].source is not None:
        return None  # a source's values are the fixture's, never a parameter set's
    if key[0] == STEP_VOLTS[0] and fixture.wiring == "nodes":
        return None  # node wiring has no [step]: its sources are parts
    spec = fixture.field_spec(key)
    return None if spec is None else spec.bound


def _fields_of(fixture: Fixture, part: str) -> list[str]:
    if part in fixture.parts:
        return list(PART_KINDS[fixture.parts[part].kind].fields)
    pseudo = PSEUDO_PARTS.get(part)
    return [] if pseudo is None else list(pseudo.fields)


def parameter_problems(fixture: Fixture, parameters: ParameterSet) -> list[str]:
    """Everything that stops ``parameters`` from describing ``fixture``'s circuit.

    Parameters
    ----------
    fixture
        The fixture.
    parameters
        The values to use.

    Returns
    -------
    list of str
        One plain-words problem per missing required value, out-of-range value or key
        that belongs to no part; empty when the circuit can be built.
    """
    problems: list[str] = []
    for part in PSEUDO_PARTS:
        if part in fixture.parts:
            problems.append(
                f"a part is called {part!r}, a name reserved for the {part} settings; "
                "rename the part"
            )
    for key in missing_values(fixture, parameters):
        if key == STEP_VOLTS and fixture.wiring == "nodes":
            continue  # a node-wired step response's sources are parts, not [step]
        problems.append(_missing_text(fixture, key))
    for key, value in parameters.values.items():
        bound = _bound_of(fixture, key)
        if bound is None:
            known = _fields_of(fixture, key[0])
            if key[0] in fixture.parts and fixture.parts[key[0]].source is not None:
                hint = f"{key[0]} is a source; its values are the fixture's excitation"
            elif key[0] == STEP_VOLTS[0] and fixture.wiring == "nodes":
                hint = "node wiring has no [step]; its sources are parts"
            elif known:
                hint = f"{key[0]} takes {', '.join(known)}"
            else:
                hint = "parts in the loop: " + ", ".join(fixture.loop)
            problems.append(f"the value {key_label(key)} belongs to nothing in this fixture ({hint})")
            continue
        problem = _value_problem(key, value, bound)
        if problem:
            problems.append(problem)
    return problems


def _missing_text(fixture: Fixture, key: ParameterKey) -> str:
    name, _ = key
    if key == STEP_VOLTS:
        return "the step source has no voltage: give [step] volts = \"12\" (for example)"
    part = fixture.parts[name]
    own = PART_KINDS[part.kind].fields.get("value")
    quantity = "value" if own is None else own.word
    why = "is written '?'" if "nominal" in part.unknown else "has no value here"
    return (
        f"part {name!r} ({part.kind}): its {quantity} {why} and no measured value is "
        f"given; it must be given (nominal or measured under [parts.{name}]) or fitted"
    )


def _loop_initial_current(fixture: Fixture) -> tuple[float, list[str]]:
    """The loop current at t = 0 from the inductor parts' ``initial``, and problems."""
    stated = [
        (name, fixture.parts[name].initial)
        for name in fixture.loop
        if PART_KINDS[fixture.parts[name].kind].initial_unit == "A"
        and fixture.parts[name].initial is not None
    ]
    values = {float(v) for _, v in stated}
    if len(values) > 1:
        listed = ", ".join(f"{n} = {v!r} A" for n, v in stated)
        return 0.0, [
            f"inductors in one series loop carry one current, but their initial currents "
            f"differ ({listed}); give them the same initial current"
        ]
    return (values.pop() if values else 0.0), []


# --------------------------------------------------------------------------------------
# Building the circuit
# --------------------------------------------------------------------------------------


def build_circuit(fixture: Fixture, parameters: ParameterSet) -> Circuit:
    """Expand a fixture and one parameter set into primitive elements.

    Parameters
    ----------
    fixture
        The validated fixture (its wiring comes from :meth:`Fixture.connections`).
    parameters
        Which value each element takes and where it came from; a parasitic absent
        from the set (or zero) is left out.

    Returns
    -------
    Circuit
        Elements in deterministic order: the elements where the loop closes (step
        source, extra loop elements, current sense), the parts in loop order, then the
        elements across parts (leakage, self-capacitance, probe loading). The circuit
        has passed :func:`check_topology`.

    Raises
    ------
    FixtureError
        When a required value is missing ("must be given or fitted"), a value is out
        of range or belongs to no part, inductors in the loop start with different
        currents, or the probe sits across a wire with neither resistance nor
        inductance. Every problem is listed.
    TopologyError
        When the wiring cannot be simulated (see :func:`check_topology`).
    """
    source = str(fixture.source) if fixture.source is not None else fixture.name
    problems = parameter_problems(fixture, parameters)
    if fixture.wiring == "nodes":
        if problems:
            raise FixtureError(source, problems)
        return build_node_circuit(fixture, parameters, source)
    current, more = _loop_initial_current(fixture)
    problems += more
    if problems:
        raise FixtureError(source, problems)

    work, connections, node_map = start_build(fixture)

    has_ideal_switch = any(
        PART_KINDS[fixture.parts[name].kind].ideal is not None
        and not _series_specs(fixture.parts[name], parameters, current)
        for name in fixture.loop
    )
    chain_end = _closing_chain(fixture, parameters, work, current, not has_ideal_switch)
    sense = work.sense
    probe_current = None
    spans: dict[str, tuple[str, str]] = {}
    at_zero: dict[str, float] = {}
    closed = False
    for name, first, second in connections:
        part = fixture.parts[name]
        a, b = node_map[first], node_map[second]
        if not closed and first == GROUND:
            a, closed = chain_end, True
        if fixture.probe_kind == "current" and name == fixture.probe:
            probe_current, a = insert_current_probe(work, name, a)
        spans[name] = (a, b)
        at_zero[name], ideal = expand_part(work, part, parameters, a, b, current)
        sense = sense or ideal

    assert fixture.probe is not None  # the loop form probes a part
    if fixture.probe_kind != "current":
        add_probe_loading(work, parameters, spans[fixture.probe], at_zero[fixture.probe])
    rep = _representatives(work)
    probe = tuple(rep(n) for n in spans[fixture.probe])
    if probe[0] == probe[1] and fixture.probe_kind != "current":
        raise FixtureError(
            source,
            [
                f"the probe is across {fixture.probe!r}, a wire with neither resistance "
                "nor inductance, so it would always read 0 V; give the wire a resistance "
                "or inductance, or probe another part"
            ],
        )
    elements = tuple(_renamed(e, rep) for e in (*work.loop, *work.across))
    circuit = Circuit(
        title=fixture.title,
        elements=elements,
        probe=(probe[0], probe[1]),
        response=fixture.response,
        current_sense=sense,
        source=source,
        probe_current=probe_current,
    )
    check_topology(circuit)
    return circuit


def _closing_chain(
    fixture: Fixture, parameters: ParameterSet, work: _Work, current: float, sense: bool
) -> str:
    """Elements where the loop closes, from ground in loop order; returns the end node.

    ``sense`` adds the 0 V current-sense source ``V_sense`` last, right before the
    first part.
    """
    node = GROUND
    if fixture.response == "step":
        plus = work.node("step_p")
        work.add(
            "V", "V_step", plus, node, parameters.values[STEP_VOLTS], part="step",
            role="volts", origin=parameters.origins.get(STEP_VOLTS, ""), timing="step",
        )
        node = plus
    extras = (
        (STEP_SOURCE_RESISTANCE, "R", "R_step_source", "step_r"),
        (LOOP_EXTRA_RESISTANCE, "R", "R_loop_extra", "loop_r"),
        (LOOP_EXTRA_INDUCTANCE, "L", "L_loop_extra", "loop_l"),
    )
    for key, letter, base, node_base in extras:
        value = parameters.get(key)
        if key == STEP_SOURCE_RESISTANCE and fixture.response != "step":
            continue
        if not value:
            continue
        following = work.node(node_base)
        work.add(
            letter, base, node, following, value, part=key[0], role=key[1],
            origin=parameters.origins.get(key, ""),
            initial=current if letter == "L" else None,
        )
        node = following
    if sense:
        following = work.node("sense")
        work.sense = work.add(
            "V", "V_sense", node, following, 0.0, part="loop", role="sense",
            origin="inserted to measure the loop current",
        ).name
        node = following
    return node
