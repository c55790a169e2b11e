"""Laying one fixture part out as primitive elements, shared by both wiring forms.

This module owns the mutable state of one circuit build (:class:`_Work`: unique names,
the elements made so far, nodes joined by bare wires) and the layout of a part between
two nodes from its row in :data:`xcheck.fixture.schema.PART_KINDS`: its series elements
first terminal to second (internal nodes named from the part, ``C1_a``), the elements
across it, what it becomes when no element is left (an ideal switch's 0 V source, a
bare wire's join), a source part's V or I element and series resistance, the 0 V
source a current probe inserts, and the probe loading. The loop form
(:mod:`xcheck.circuit.expand`) and the node form (:mod:`xcheck.circuit.nodes`) differ
only in where parts sit and what is inserted where the loop closes.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING

from networkx.utils import UnionFind

from xcheck.circuit.model import (
    GROUND,
    RESERVED_NODE_NAMES,
    Element,
    UniqueNames,
    spice_identifier,
)
from xcheck.circuit.parameters import PROBE_CAPACITANCE, PROBE_RESISTANCE, ParameterSet
from xcheck.fixture.schema import PART_KINDS, UNIT_LETTER

if TYPE_CHECKING:  # pragma: no cover - import for type hints only
    from xcheck.fixture.model import Fixture, Part


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


def start_build(fixture: Fixture) -> tuple[_Work, tuple[tuple[str, str, str], ...], dict[str, str]]:
    """A new build's state, the fixture's connections, and each fixture node's circuit
    node (ground kept as ``"0"``, the others reduced to SPICE identifiers, unique
    ignoring case), for either wiring form."""
    work = _Work(nodes=UniqueNames(RESERVED_NODE_NAMES), names=UniqueNames())
    connections = fixture.connections()
    node_map = {GROUND: GROUND}
    work.order[GROUND] = 0
    for _, first, second in connections:
        for node in (first, second):
            if node not in node_map:
                node_map[node] = work.node(spice_identifier(node, "n"))
    return work, connections, node_map


def _series_specs(part: Part, parameters: ParameterSet, current: float) -> list[_Spec]:
    """The series elements of a passive part (its row's layout), those with a value only."""
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


def expand_part(
    work: _Work, part: Part, parameters: ParameterSet, a: str, b: str, current: float
) -> tuple[float, str | None]:
    """Lay a passive part out between nodes ``a`` and ``b``.

    Returns
    -------
    tuple
        The voltage across the part at t = 0 (first minus second terminal) and, when
        the part became a 0 V source (an ideal switch), that source's name.
    """
    row = PART_KINDS[part.kind]
    ident = spice_identifier(part.name, "p")
    specs = _series_specs(part, parameters, current)
    at_zero = _voltage_at_zero(specs, current)
    if not specs and row.ideal is not None:  # e.g. a switch without resistance
        element = work.add(
            "V", f"V_{ident}", a, b, 0.0, part=part.name, role=row.ideal.role,
            origin=row.ideal.origin,
        )
        return at_zero, element.name
    if not specs:  # e.g. a wire with neither resistance nor inductance
        work.merges.union(a, b)
        return at_zero, None
    inner = [work.node(f"{ident}_{chr(ord('a') + k)}") for k in range(len(specs) - 1)]
    ends = [a, *inner, b]
    own: tuple[Element, _Spec] | None = None
    for k, spec in enumerate(specs):
        base = f"{spec.letter}_{ident}_{spec.role}" if spec.tagged else f"{spec.letter}_{ident}"
        element = work.add(
            spec.letter, base, ends[k], ends[k + 1], spec.value,
            initial=spec.initial, part=part.name, role=spec.role, origin=spec.origin,
        )
        if spec.role == "value":
            own = (element, spec)
    _across(part, parameters, work, (a, b), at_zero, own, current)
    return at_zero, None


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


def source_origin(part: Part) -> str:
    """Plain words for a source's waveform (deck comments; sanitised there)."""
    setting = part.source
    assert setting is not None
    if setting.waveform == "dc":
        return "dc, on since before time zero"
    if setting.waveform == "step":
        return f"step from {setting.delay:g} s"
    return f"pulse from {setting.delay:g} s for {setting.width:g} s"


def expand_source(work: _Work, part: Part, a: str, b: str, current: float) -> float:
    """Lay a source part out between ``a`` and ``b``: its V or I element at the first
    terminal, then a voltage source's series resistance. Returns the voltage across it
    just before t = 0 (a current source's is not known: 0)."""
    setting = part.source
    row = PART_KINDS[part.kind]
    assert setting is not None and row.source is not None
    letter = row.source.letter
    ident = spice_identifier(part.name, "p")
    timing = {"timing": setting.waveform, "t_on": setting.delay, "t_off": setting.t_off}
    if letter == "I":
        work.add("I", f"I_{ident}", a, b, setting.value, part=part.name,
                 role=row.source.amplitude, origin=source_origin(part), **timing)
        return 0.0
    resistance = setting.resistance
    end = work.node(f"{ident}_a") if resistance else b
    work.add("V", f"V_{ident}", a, end, setting.value, part=part.name,
             role=row.source.amplitude, origin=source_origin(part), **timing)
    if resistance:
        work.add("R", f"R_{ident}_source_resistance", end, b, resistance, part=part.name,
                 role="source_resistance", origin="as stated")
    before = setting.value if setting.waveform == "dc" else 0.0
    return before + current * resistance


def insert_current_probe(work: _Work, name: str, a: str) -> tuple[str, str]:
    """A 0 V source from ``a`` to a new node, in series with part ``name`` (which then
    starts at the new node): its current, first node to second, is the part's.
    Returns the source's name and the new node."""
    ident = spice_identifier(name, "p")
    inner = work.node(f"{ident}_probe")
    element = work.add(
        "V", f"V_probe_{ident}", a, inner, 0.0, part=name, role="current_probe",
        origin="inserted to read the probed current",
    )
    return element.name, inner


def add_probe_loading(
    work: _Work, parameters: ParameterSet, span: tuple[str, str], v0: float
) -> None:
    """Probe resistance and capacitance across the probe's two nodes; the capacitance
    starts at ``v0``, the voltage across them at t = 0."""
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
