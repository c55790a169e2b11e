"""Fixture to circuit: expanding a fixture and one parameter set into primitive elements.

This module owns :func:`build_circuit` and :func:`parameter_problems` and the elements
inserted where the loop closes. How each part kind is laid out (its series elements,
the elements across it, what it becomes when none is left) and how each value is
bounded are read from the kind's row in :mod:`xcheck.fixture.schema`; this module
keeps no per-kind table. The data types, naming helpers and topology checks it uses
live in :mod:`xcheck.circuit.model`.

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
senses the loop current. Probe loading sits across the probed part's two nodes.

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
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING

from networkx.utils import UnionFind

from xcheck.circuit.model import (
    GROUND,
    RESERVED_NODE_NAMES,
    Circuit,
    Element,
    UniqueNames,
    check_topology,
    spice_identifier,
)
from xcheck.errors import FixtureError
from xcheck.circuit.parameters import (
    LOOP_EXTRA_INDUCTANCE,
    LOOP_EXTRA_RESISTANCE,
    PROBE_CAPACITANCE,
    PROBE_RESISTANCE,
    STEP_SOURCE_RESISTANCE,
    STEP_VOLTS,
    ParameterSet,
    missing_values,
)
from xcheck.fixture.schema import (
    PART_KINDS,
    PSEUDO_PARTS,
    UNIT_LETTER,
    ParameterKey,
    key_label,
)

if TYPE_CHECKING:  # pragma: no cover - import for type hints only
    from xcheck.fixture.model import Fixture, Part


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
        problems.append(_missing_text(fixture, key))
    for key, value in parameters.values.items():
        bound = _bound_of(fixture, key)
        if bound is None:
            known = _fields_of(fixture, key[0])
            if known:
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


@dataclass
class _Work:
    """Mutable state of one build: names, elements, node merges."""

    nodes: UniqueNames
    names: UniqueNames
    loop: list[Element] = field(default_factory=list)
    across: list[Element] = field(default_factory=list)
    merges: UnionFind = field(default_factory=UnionFind)
    order: dict[str, int] = field(default_factory=dict)
    sense: str | None = None

    def node(self, base: str) -> str:
        name = self.nodes.take(base)
        self.order[name] = len(self.order)
        return name

    def add(self, kind: str, base: str, a: str, b: str, value: float, **info: object) -> Element:
        element = Element(self.names.take(base), kind, (a, b), float(value), **info)  # type: ignore[arg-type]
        (self.loop if element.in_loop else self.across).append(element)
        return element


@dataclass(frozen=True)
class _Spec:
    """One series element of a part: its layout slot, value, origin and initial state."""

    role: str
    letter: str
    tagged: bool
    value: float
    origin: str
    initial: float | None


def _series_specs(part: Part, parameters: ParameterSet, current: float) -> list[_Spec]:
    """The series elements of a part (its row's layout), those with a value only."""
    specs = []
    for slot in PART_KINDS[part.kind].series:
        key = (part.name, slot.role)
        value = parameters.get(key)
        if value is None or value == 0:
            continue
        initial: float | None = None
        if slot.letter == "C":
            initial = float(part.initial or 0.0)
        elif slot.letter == "L":
            initial = current
        specs.append(
            _Spec(slot.role, slot.letter, slot.tagged, value,
                  parameters.origins.get(key, ""), initial)
        )
    return specs


def _voltage_at_zero(specs: list[_Spec], current: float) -> float:
    """Voltage across a run of series elements at t = 0: the loop current through its
    resistances plus its capacitors' initial voltages (inductances taken as 0 V, so that
    a capacitance across them starts without a jump)."""
    voltage = current * sum(s.value for s in specs if s.letter == "R")
    for spec in specs:
        if spec.letter == "C":
            voltage += spec.initial or 0.0
    return voltage


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
    current, more = _loop_initial_current(fixture)
    problems += more
    if problems:
        raise FixtureError(source, problems)

    work = _Work(nodes=UniqueNames(RESERVED_NODE_NAMES), names=UniqueNames())
    connections = fixture.connections()
    node_map = {GROUND: GROUND}
    work.order[GROUND] = 0
    for _, first, second in connections:
        for node in (first, second):
            if node not in node_map:
                node_map[node] = work.node(spice_identifier(node, "n"))

    has_ideal_switch = any(
        PART_KINDS[fixture.parts[name].kind].ideal is not None
        and not _series_specs(fixture.parts[name], parameters, current)
        for name in fixture.loop
    )
    chain_end = _closing_chain(fixture, parameters, work, current, not has_ideal_switch)
    sense = work.sense
    spans: dict[str, tuple[str, str]] = {}
    at_zero: dict[str, float] = {}
    closed = False
    for name, first, second in connections:
        part = fixture.parts[name]
        row = PART_KINDS[part.kind]
        a, b = node_map[first], node_map[second]
        if not closed and first == GROUND:
            a, closed = chain_end, True
        spans[name] = (a, b)
        ident = spice_identifier(name, "p")
        specs = _series_specs(part, parameters, current)
        at_zero[name] = _voltage_at_zero(specs, current)
        if not specs and row.ideal is not None:  # e.g. a switch without resistance
            element = work.add(
                "V", f"V_{ident}", a, b, 0.0, part=name, role=row.ideal.role,
                origin=row.ideal.origin,
            )
            sense = sense or element.name
            continue
        if not specs:  # e.g. a wire with neither resistance nor inductance
            work.merges.union(a, b)
            continue
        inner = [work.node(f"{ident}_{chr(ord('a') + k)}") for k in range(len(specs) - 1)]
        ends = [a, *inner, b]
        own: tuple[Element, _Spec] | None = None
        for k, spec in enumerate(specs):
            base = f"{spec.letter}_{ident}_{spec.role}" if spec.tagged else f"{spec.letter}_{ident}"
            element = work.add(
                spec.letter, base, ends[k], ends[k + 1], spec.value,
                initial=spec.initial, part=name, role=spec.role, origin=spec.origin,
            )
            if spec.role == "value":
                own = (element, spec)
        _across(part, parameters, work, (a, b), at_zero[name], own, current)

    _probe_loading(fixture, parameters, work, spans, at_zero)
    rep = _representatives(work)
    probe = tuple(rep(n) for n in spans[fixture.probe])
    if probe[0] == probe[1]:
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
            role="volts", origin=parameters.origins.get(STEP_VOLTS, ""),
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


def _across(
    part: Part,
    parameters: ParameterSet,
    work: _Work,
    span: tuple[str, str],
    span_v0: float,
    own: tuple[Element, _Spec] | None,
    current: float,
) -> None:
    """The part's parallel elements (its row's ``parallel``), in row order: each across
    the part's own element (a capacitor's leakage across the ideal capacitance) or the
    whole part (an inductor's self-capacitance). A capacitance starts at the voltage
    across what it bridges, so that nothing jumps at t = 0."""
    row = PART_KINDS[part.kind]
    for role, across in row.parallel.items():
        key = (part.name, role)
        value = parameters.get(key)
        if not value:
            continue
        if across == "value":
            if own is None:
                continue
            nodes, v0 = own[0].nodes, _voltage_at_zero([own[1]], current)
        else:
            nodes, v0 = span, span_v0
        letter = UNIT_LETTER[row.fields[role].unit]
        work.add(
            letter, f"{letter}_{spice_identifier(part.name, 'p')}_{role}", *nodes, value,
            initial=v0 if letter == "C" else None, part=part.name, role=role,
            origin=parameters.origins.get(key, ""), in_loop=False,
        )


def _probe_loading(
    fixture: Fixture,
    parameters: ParameterSet,
    work: _Work,
    spans: dict[str, tuple[str, str]],
    at_zero: dict[str, float],
) -> None:
    """Probe resistance and capacitance across the probed part's two nodes."""
    span = spans[fixture.probe]
    v0 = at_zero[fixture.probe]
    for key, letter in ((PROBE_RESISTANCE, "R"), (PROBE_CAPACITANCE, "C")):
        value = parameters.get(key)
        if value:
            work.add(
                letter, f"{letter}_probe", *span, value, part="probe", role=key[1],
                origin=parameters.origins.get(key, ""), in_loop=False,
                initial=v0 if letter == "C" else None,
            )


def _representatives(work: _Work) -> Callable[[str], str]:
    """Node -> the node it is merged into (ground first, else the earliest named)."""
    groups: dict[str, str] = {}
    for group in work.merges.to_sets():
        best = min(group, key=lambda n: (n != GROUND, work.order.get(n, 1 << 30)))
        for node in group:
            groups[node] = best
    return lambda node: groups.get(node, node)


def _renamed(element: Element, rep: Callable[[str], str]) -> Element:
    nodes = (rep(element.nodes[0]), rep(element.nodes[1]))
    if nodes == element.nodes:
        return element
    return replace(element, nodes=nodes)
