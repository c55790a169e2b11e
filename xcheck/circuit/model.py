"""Primitive element graph shared by every engine.

A :class:`Circuit` is what both the SPICE deck and closed-form theory consume, so the
two always describe the same physics. Elements are R, L, C, V (independent voltage
source, also used at 0 V as an ideal switch, a loop current sense and a current probe)
and I (independent current source) between named nodes; ground is ``"0"``.

This module owns the data types (:class:`Element`, :class:`Circuit`), the naming
helpers shared with the deck writer (:func:`spice_identifier`, :class:`UniqueNames`),
the graph view (:func:`circuit_graph`) and the topology checks
(:func:`topology_problems`, :func:`check_topology`). Expanding a fixture into a circuit
(:func:`~xcheck.circuit.expand.build_circuit`, :func:`~xcheck.circuit.expand.parameter_problems`, the
series layouts) lives in :mod:`xcheck.circuit.expand`, :mod:`xcheck.circuit.layout` and
:mod:`xcheck.circuit.nodes`.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Literal

import networkx as nx
from networkx.utils import UnionFind

from xcheck.errors import FixtureError


ElementKind = Literal["R", "L", "C", "V", "I"]


@dataclass(frozen=True)
class Element:
    """One primitive element.

    Attributes
    ----------
    name
        Unique identifier made only of letters, digits and underscores, starting with
        the SPICE letter of its kind (``"C_C1"``, ``"R_C1_esr"``).
    kind
        ``"R"`` (ohms), ``"L"`` (henries), ``"C"`` (farads), ``"V"`` (volts) or ``"I"``
        (amperes, an independent current source).
    nodes
        (first node, second node); for C the initial voltage is first minus second,
        for L, V and I the current flows from the first node through the element to
        the second (SPICE's convention: ``I1 a b 1`` takes 1 A out of node ``a``).
    value
        SI value.
    initial
        Initial condition (V across a C, A through an L) or None.
    part
        Fixture part it belongs to, or a pseudo-part (``"probe"``, ``"step"``, ``"loop"``).
    role
        ``"value"`` for the part's own element, else the parasitic or pseudo field.
    origin
        Where the value came from (see :mod:`xcheck.circuit.parameters`).
    """

    name: str
    kind: ElementKind
    nodes: tuple[str, str]
    value: float
    initial: float | None = None
    part: str = ""
    role: str = "value"
    origin: str = ""
    #: False for elements across a part rather than in series with the loop
    #: (capacitor leakage, inductor self-capacitance, probe loading).
    in_loop: bool = True
    #: Sources only (V, I): when the source holds ``value``. ``"dc"``: always, also
    #: before t = 0 (the circuit starts at its DC operating point when
    #: :attr:`Circuit.starts_settled`); ``"step"``: from ``t_on`` on; ``"pulse"``: for
    #: ``t_on <= t < t_off``. Outside those times the source is 0 (a V source a short,
    #: an I source open).
    timing: Literal["dc", "step", "pulse"] = "dc"
    #: Switch-on time of a step or pulse (s, >= 0).
    t_on: float = 0.0
    #: Switch-off time of a pulse (s, > ``t_on``); None otherwise.
    t_off: float | None = None

    def source_value(self, time: float) -> float:
        """The source's value at ``time`` (s, t >= 0); 0 where it is switched off."""
        if self.timing == "dc":
            return self.value
        if time < self.t_on:
            return 0.0
        if self.t_off is not None and time >= self.t_off:
            return 0.0
        return self.value


@dataclass(frozen=True)
class Circuit:
    """A linear circuit with a probe, ready for any engine.

    Attributes
    ----------
    title
        Free text (sanitised before it reaches a deck).
    elements
        Elements in deterministic order (loop order, then parallel elements).
    probe
        (plus node, minus node) of the measured voltage.
    response
        ``"natural"`` or ``"step"``.
    current_sense
        Name of a 0 V source in the loop whose current is the loop current, or None.
        Its nodes follow the loop order, so its SPICE branch current is the loop
        current in the direction the loop is written.
    ground
        The reference node.
    source
        Where the circuit came from (the fixture file), for messages and deck headers.
    probe_current
        Name of a 0 V source whose current (first node through it to the second) is
        the probed signal (a current probe), or None for a voltage probe between the
        ``probe`` nodes. With a current probe, engines put amperes where they would
        put the probe voltage.
    starts_settled
        True when every capacitor and inductor starts at the DC operating point of
        the sources with ``timing == "dc"`` (their ``initial`` values are then
        ignored); False when each starts at its ``initial`` (0 when None).
    """

    title: str
    elements: tuple[Element, ...]
    probe: tuple[str, str]
    response: str = "natural"
    current_sense: str | None = None
    ground: str = field(default="0")
    source: str = ""
    probe_current: str | None = None
    starts_settled: bool = False

    @property
    def probe_unit(self) -> str:
        """``"A"`` for a current probe, else ``"V"``."""
        return "A" if self.probe_current is not None else "V"

    @property
    def nodes(self) -> tuple[str, ...]:
        """Every node, in order of first appearance."""
        seen: dict[str, None] = {}
        for element in self.elements:
            for node in element.nodes:
                seen.setdefault(node, None)
        return tuple(seen)

    def element(self, name: str) -> Element:
        """The element called ``name``.

        Raises
        ------
        KeyError
            When there is no such element.
        """
        for item in self.elements:
            if item.name == name:
                return item
        raise KeyError(name)


class TopologyError(FixtureError):
    """The circuit's wiring would leave ngspice without a unique solution, or makes
    no sense (a floating node, no ground, a loop of voltage sources)."""

    subject = "circuit"


GROUND = "0"

#: Names ngspice treats specially as nodes: ``0`` and its global alias ``gnd``.
RESERVED_NODE_NAMES = ("0", "gnd")

_NOT_IDENT = re.compile(r"[^A-Za-z0-9_]+")
#: Longest identifier kept (fixture part names are at most 32 characters).
MAX_IDENTIFIER = 64


def spice_identifier(text: str, prefix: str = "x") -> str:
    """``text`` reduced to ASCII letters, digits and underscores, starting with a letter.

    Parameters
    ----------
    text
        Any string (a part name, a node name).
    prefix
        Letter(s) put in front when the reduced text does not start with a letter, and
        used alone when nothing is left.

    Returns
    -------
    str
        At most :data:`MAX_IDENTIFIER` characters; it cannot contain white space, a
        line break, a comment or a quote.
    """
    ident = _NOT_IDENT.sub("_", str(text)).strip("_")
    if not ident:
        return prefix
    if not ident[0].isalpha():
        ident = f"{prefix}_{ident}"
    return ident[:MAX_IDENTIFIER]


class UniqueNames:
    """Hands out names that are unique ignoring case, as SPICE compares them."""

    def __init__(self, reserved: tuple[str, ...] = ()) -> None:
        self._used = {name.lower() for name in reserved}

    def take(self, base: str) -> str:
        """``base``, or ``base_2``, ``base_3``, ... when it is already taken."""
        name, count = base, 2
        while name.lower() in self._used:
            name, count = f"{base}_{count}", count + 1
        self._used.add(name.lower())
        return name


# --------------------------------------------------------------------------------------
# Graph and topology checks
# --------------------------------------------------------------------------------------

_NAME_RE = re.compile(r"[A-Za-z][A-Za-z0-9_]*")


def circuit_graph(circuit: Circuit) -> nx.MultiGraph:
    """The circuit as a multigraph: nodes are circuit nodes, edges are elements.

    Parameters
    ----------
    circuit
        Any circuit.

    Returns
    -------
    networkx.MultiGraph
        One edge per element, keyed by the element name, with attributes ``element``
        (the :class:`Element`) and ``kind``; the ground node carries ``ground=True``.
    """
    graph = nx.MultiGraph(title=circuit.title)
    for node in circuit.nodes:
        graph.add_node(node, ground=node == circuit.ground)
    for element in circuit.elements:
        graph.add_edge(*element.nodes, key=element.name, element=element, kind=element.kind)
    return graph


def topology_problems(circuit: Circuit) -> list[str]:
    """Everything that would make the circuit singular or meaningless in ngspice.

    The transient analysis runs with ``uic`` (no DC operating point), so a node
    reached only through capacitors, or a cut-set of inductors, is solvable: each
    capacitor and inductor becomes a finite companion conductance at every time step.
    What remains singular or meaningless, and is checked here, each problem naming
    the fixture parts involved (:attr:`Element.part`) and how to fix it:

    - no elements, or no ground node;
    - a part of the circuit not connected to ground (its voltages are undefined);
    - a node with fewer than two element terminals (a dangling element carries no
      current and usually means a wiring mistake);
    - an element with both terminals on one node (its part shorted by its own wiring);
    - a loop made only of voltage sources (two sources fixing one voltage: the MNA
      matrix is singular);
    - a loop made only of capacitors and voltage sources, with at least one of each
      (0 V sources included: an ideal switch, a current sense or probe): the
      capacitors' voltages are tied to the sources', and their charge would move in no
      time when a source switches;
    - a cut set made only of inductors and current sources, with at least one current
      source (a current source with no path but through inductors and other current
      sources): the inductor currents are tied to the source's and would jump when it
      switches;
    - element names that are not unique ignoring case (SPICE folds case), do not
      start with their SPICE letter or contain other than letters, digits and ``_``;
    - values that are not finite, or zero, or a negative capacitance or inductance;
    - a probe node, current-sense source or current-probe source that is not in the
      circuit.

    Returns
    -------
    list of str
        Plain-words problems; empty when the circuit is fine.
    """
    problems: list[str] = []
    if not circuit.elements:
        return ["the circuit has no elements"]
    graph = circuit_graph(circuit)
    seen: dict[str, str] = {}
    for element in circuit.elements:
        name = element.name
        if not _NAME_RE.fullmatch(name) or name[0].upper() != element.kind:
            problems.append(
                f"element name {name!r} must start with {element.kind!r} and contain only "
                "letters, digits and underscores"
            )
        if name.lower() in seen:
            problems.append(
                f"element names {seen[name.lower()]!r} and {name!r} are the same to SPICE, "
                "which ignores case"
            )
        seen.setdefault(name.lower(), name)
        if element.nodes[0] == element.nodes[1]:
            problems.append(
                f"{name} has both terminals on node {element.nodes[0]!r}"
                f"{_of_parts([element])}, so it is shorted by its own wiring; connect its "
                "second terminal to another node"
            )
        value = element.value
        if not math.isfinite(value):
            problems.append(f"{name} has the value {value!r}; expected a finite number")
        elif element.kind in ("L", "C") and value <= 0:
            problems.append(f"{name} has the value {value!r}; expected a positive value")
        elif element.kind == "R" and value == 0:
            problems.append(f"{name} is a zero resistance; leave it out instead")
        if element.initial is not None and not math.isfinite(element.initial):
            problems.append(f"{name} has the initial condition {element.initial!r}")
    if circuit.ground not in graph:
        problems.append(
            f"no element touches the ground node {circuit.ground!r}: connect the reference "
            "terminal of one part to ground"
        )
    else:
        for component in nx.connected_components(graph):
            if circuit.ground not in component:
                members = [d["element"] for _, _, d in graph.edges(component, data=True)]
                problems.append(
                    "nodes " + ", ".join(sorted(component)) + " are not connected to ground"
                    f"{_of_parts(members)}; connect them to the rest of the circuit or "
                    "remove them"
                )
    for node in graph.nodes:
        if graph.degree(node) < 2:
            members = [d["element"] for _, _, d in graph.edges(node, data=True)]
            problems.append(
                f"node {node!r} has only one element terminal "
                f"({', '.join(k for _, _, k in graph.edges(node, keys=True))}): it floats"
                f"{_of_parts(members)}; connect another part to it"
            )
    problems += _source_loops(circuit)
    problems += _current_source_cuts(circuit)
    for node in circuit.probe:
        if node not in graph:
            problems.append(f"the probe node {node!r} is not in the circuit")
    names = {e.name: e for e in circuit.elements}
    if circuit.current_sense is not None:
        sense = names.get(circuit.current_sense)
        if sense is None or sense.kind != "V":
            problems.append(
                f"the current sense {circuit.current_sense!r} is not a voltage source "
                "of the circuit"
            )
    if circuit.probe_current is not None:
        meter = names.get(circuit.probe_current)
        if meter is None or meter.kind != "V" or meter.value != 0:
            problems.append(
                f"the current probe {circuit.probe_current!r} is not a 0 V source of the "
                "circuit"
            )
    return problems


def _of_parts(elements: list[Element]) -> str:
    """`` (part C1)`` / `` (parts C1 and V1)`` for the fixture parts of ``elements``."""
    names = list(dict.fromkeys(e.part for e in elements if e.part))
    if not names:
        return ""
    listed = names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1]
    return f" ({'part' if len(names) == 1 else 'parts'} {listed})"


def _source_loops(circuit: Circuit) -> list[str]:
    """Loops of only voltage sources, and of only capacitors and voltage sources."""
    problems: list[str] = []
    sources = UnionFind()
    for element in circuit.elements:
        if element.kind == "V" and element.nodes[0] != element.nodes[1]:
            a, b = element.nodes
            if sources[a] == sources[b]:
                problems.append(
                    f"{element.name} closes a loop made only of voltage sources"
                    f"{_of_parts([element])} (the simulation would be singular); put a "
                    "resistance in series with one of them (source_resistance) or remove one"
                )
            sources.union(a, b)
    reported: set[frozenset[str]] = set()
    for element in circuit.elements:
        if element.kind != "V" or element.nodes[0] == element.nodes[1]:
            continue
        others = nx.MultiGraph()
        for other in circuit.elements:
            if other.kind in ("C", "V") and other is not element:
                others.add_edge(*other.nodes, key=other.name, element=other)
        a, b = element.nodes
        if a not in others or b not in others or not nx.has_path(others, a, b):
            continue
        path = nx.shortest_path(others, a, b)
        members = [element] + [
            min((d["element"] for d in others[h][t].values()), key=lambda e: (e.kind != "C", e.name))
            for h, t in zip(path[:-1], path[1:])
        ]
        if all(m.kind == "V" for m in members):
            continue  # a loop of sources alone, reported above
        key = frozenset(m.name for m in members)
        if key in reported:
            continue
        reported.add(key)
        problems.append(
            f"{', '.join(m.name for m in members)} form a loop made only of capacitors and "
            f"voltage sources{_of_parts(members)}: the capacitors' voltages are tied to the "
            "sources' and their charge would move in no time when a source switches; put a "
            "resistance in the loop (a source_resistance, or a capacitor's esr)"
        )
    return problems


def _current_source_cuts(circuit: Circuit) -> list[str]:
    """Current sources whose current has no path but through inductors and current
    sources (a cut set of only those)."""
    joined = UnionFind(circuit.nodes)
    for element in circuit.elements:
        if element.kind not in ("L", "I"):
            joined.union(*element.nodes)
    problems = []
    for element in circuit.elements:
        if element.kind != "I":
            continue
        side = joined[element.nodes[0]]
        if side == joined[element.nodes[1]]:
            continue
        cut = [
            e for e in circuit.elements
            if (joined[e.nodes[0]] == side) != (joined[e.nodes[1]] == side)
        ]
        problems.append(
            f"{element.name} has no path for its current but through "
            f"{', '.join(e.name for e in cut if e is not element) or 'nothing'}, a cut set "
            f"made only of inductors and current sources{_of_parts(cut)}: the inductor "
            "currents would be tied to the source's and jump when it switches; put a "
            "resistor or capacitor across the current source (its output resistance) or "
            "across the inductor"
        )
    return problems


def check_topology(circuit: Circuit) -> None:
    """Raise when the circuit cannot be simulated (see :func:`topology_problems`).

    Raises
    ------
    TopologyError
        Listing every problem, naming the circuit's source.
    """
    problems = topology_problems(circuit)
    if problems:
        raise TopologyError(circuit.source or circuit.title or "circuit", problems)
