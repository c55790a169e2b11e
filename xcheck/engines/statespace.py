"""Linear state-space model of a :class:`~xcheck.circuit.model.Circuit` (normal-tree method).

Any circuit of R, L, C, V and I elements is turned into

    x' = A x + B u,        y = C x + D u

with ``x`` the independent capacitor voltages and inductor currents and ``u`` the source
values (voltage sources first, then current sources; each piecewise constant in time,
see :attr:`~xcheck.circuit.model.Element.timing`). The states are chosen with a *normal
tree* (the classical state-variable method of network theory, e.g. Chua, Desoer & Kuh,
"Linear and Nonlinear Circuits", chapter on state equations, from memory): a spanning
tree that takes voltage sources first, then capacitors, then resistors, then inductors,
and current sources never. Capacitors left out of the tree (capacitor loops) and
inductors forced into it (inductor cut sets, such as two inductors in series) are
dependent and fold into effective capacitance and inductance matrices, so series
inductors or parallel capacitors never produce spurious modes. The resistive part is
eliminated exactly by solving a symmetric positive-definite system.

The wiring is analysed once (:func:`circuit_topology`, networkx) and the matrices are
assembled for a whole batch of element values at once (:func:`assemble`, numpy with a
leading batch axis), which is what makes the exact engine (:mod:`xcheck.engines.exact`)
vectorised over parameter sets. :func:`state_space` is the one-circuit view.

Limitations, each refused with a message: a loop made only of voltage sources (and
capacitors: the charge would redistribute impulsively when a source switches) and a cut
set made only of current sources and inductors (the inductor currents would jump).
"""

from __future__ import annotations

from dataclasses import dataclass

import networkx as nx
import numpy as np
import scipy.linalg

from xcheck.circuit.model import Circuit, Element
from xcheck.errors import SimulationError

#: Preference of each kind for the normal tree (lower goes in first).
_TREE_ORDER = {"V": 0, "C": 1, "R": 2, "L": 3, "I": 4}


@dataclass(frozen=True)
class LinearMap:
    """A quantity written as ``x_coef @ x + u_coef @ u``.

    The coefficients may carry leading batch axes (one row per parameter set).
    """

    x_coef: np.ndarray
    u_coef: np.ndarray

    def __add__(self, other: "LinearMap") -> "LinearMap":
        return LinearMap(self.x_coef + other.x_coef, self.u_coef + other.u_coef)

    def __neg__(self) -> "LinearMap":
        return LinearMap(-self.x_coef, -self.u_coef)

    def scaled(self, factor: float | np.ndarray) -> "LinearMap":
        """This map times ``factor`` (a number, or one number per batch row)."""
        f = np.asarray(factor, dtype=float)[..., None]
        return LinearMap(f * self.x_coef, f * self.u_coef)

    def row(self, index: int) -> "LinearMap":
        """Batch row ``index`` of a batched map."""
        return LinearMap(self.x_coef[index], self.u_coef[index])


@dataclass(frozen=True)
class StateSpace:
    """``x' = a x + b u`` for t > 0, with named states and inputs.

    Attributes
    ----------
    a, b
        State and input matrices (SI units, 1/s and so on).
    u
        Source values (V for voltage sources, A for current sources), in the order of
        ``inputs``, while every source is switched on.
    x0
        State at t = 0+ (charge and flux conserved where initial conditions are
        dependent, e.g. capacitors in parallel; the DC operating point of the ``dc``
        sources when the circuit :attr:`~xcheck.circuit.model.Circuit.starts_settled`).
    states
        Element name of each state (a capacitor voltage or an inductor current).
    inputs
        Element name of each source: voltage sources first, then current sources.
    branch_voltage, branch_current
        For every element, its voltage (first node minus second) and its current
        (from the first node through the element) as a :class:`LinearMap`.
    node_voltage
        For every node, its voltage to ground as a :class:`LinearMap`.
    """

    a: np.ndarray
    b: np.ndarray
    u: np.ndarray
    x0: np.ndarray
    states: tuple[str, ...]
    inputs: tuple[str, ...]
    branch_voltage: dict[str, LinearMap]
    branch_current: dict[str, LinearMap]
    node_voltage: dict[str, LinearMap]

    def voltage_between(self, plus: str, minus: str) -> LinearMap:
        """Voltage of node ``plus`` minus node ``minus`` as a :class:`LinearMap`."""
        for node in (plus, minus):
            if node not in self.node_voltage:
                raise SimulationError(f"node {node!r} is not part of the circuit")
        return self.node_voltage[plus] + (-self.node_voltage[minus])

    def steady_state(self) -> np.ndarray:
        """State the circuit settles to under the constant sources (least squares when
        ``a`` is singular, e.g. a node floating between two series capacitors)."""
        return _steady(self.a, self.b, self.u)


def _steady(a: np.ndarray, b: np.ndarray, u: np.ndarray) -> np.ndarray:
    if a.size == 0:
        return np.zeros(0)
    solution, *_ = np.linalg.lstsq(a, -b @ u, rcond=None)
    return solution


@dataclass(frozen=True)
class Topology:
    """What the wiring alone decides: the normal tree and its fundamental loops.

    Attributes
    ----------
    elements
        The circuit's elements, in order (their values are a batch's defaults).
    groups
        Element indices by role: ``tv``, ``tc``, ``tr``, ``tl`` (tree sources,
        capacitors, resistors, inductors) and ``lc``, ``lr``, ``ll``, ``li`` (link
        capacitors, resistors, inductors, current sources).
    loops
        Fundamental loop matrix: link voltage = ``loops[:, l] @ tree voltages``.
    tree, links
        Element indices in the tree and among the links.
    node_paths
        For each node, the (tree element index, sign) path down to ground.
    """

    elements: tuple[Element, ...]
    groups: dict[str, list[int]]
    loops: np.ndarray
    tree: list[int]
    links: list[int]
    node_paths: dict[str, list[tuple[int, float]]]

    @property
    def inputs(self) -> list[int]:
        """Source element indices in input order: voltage sources, then current sources."""
        return self.groups["tv"] + self.groups["li"]

    @property
    def state_ids(self) -> list[int]:
        """Element index of each state: tree capacitors, then link inductors."""
        return self.groups["tc"] + self.groups["ll"]

    def block(self, rows: str, cols: str) -> np.ndarray:
        """The loop matrix entries between tree group ``rows`` and link group ``cols``."""
        tree_pos = {e: k for k, e in enumerate(self.tree)}
        link_pos = {e: k for k, e in enumerate(self.links)}
        r = [tree_pos[i] for i in self.groups[rows]]
        c = [link_pos[i] for i in self.groups[cols]]
        if not (r and c):
            return np.zeros((len(r), len(c)))
        return self.loops[np.ix_(r, c)]


def circuit_topology(circuit: Circuit) -> Topology:
    """Analyse the wiring of ``circuit`` once (networkx).

    Raises
    ------
    SimulationError
        When the circuit is not connected to ground, holds an element of unknown kind,
        a loop of only voltage sources and capacitors containing a source, or a cut set
        of only current sources and inductors containing a current source.
    """
    elements = circuit.elements
    unknown = [e.name for e in elements if e.kind not in _TREE_ORDER]
    if unknown:
        raise SimulationError(f"circuit {circuit.title!r}: unknown element kind in {unknown}")
    graph = nx.MultiGraph()
    graph.add_node(circuit.ground)
    for index, element in enumerate(elements):
        graph.add_edge(*element.nodes, key=index, weight=_TREE_ORDER[element.kind])
    if not nx.is_connected(graph):
        parts = [sorted(c) for c in nx.connected_components(graph) if circuit.ground not in c]
        raise SimulationError(
            f"circuit {circuit.title!r}: nodes {parts} are not connected to ground "
            f"{circuit.ground!r}; every part must be in one connected circuit"
        )
    tree_edges = nx.minimum_spanning_edges(graph, algorithm="kruskal", keys=True, data=False)
    tree_ids = sorted(key for _, _, key in tree_edges)
    tree_set = set(tree_ids)
    link_ids = [i for i in range(len(elements)) if i not in tree_set]
    for i in link_ids:
        if elements[i].kind == "V":
            raise SimulationError(
                f"circuit {circuit.title!r}: source {elements[i].name} closes a loop made "
                "only of voltage sources; such a circuit has no unique solution"
            )
    for i in tree_ids:
        if elements[i].kind == "I":
            raise SimulationError(
                f"circuit {circuit.title!r}: current source {elements[i].name} forms a cut "
                "set with no path for its current but other current sources; such a "
                "circuit has no unique solution"
            )
    tree = nx.Graph()
    tree.add_nodes_from(graph.nodes)
    for i in tree_ids:
        tree.add_edge(*elements[i].nodes, element=i)

    tree_pos = {e: k for k, e in enumerate(tree_ids)}
    loops = np.zeros((len(tree_ids), len(link_ids)))
    for col, i in enumerate(link_ids):
        first, second = elements[i].nodes
        path = nx.shortest_path(tree, first, second)
        for here, there in zip(path[:-1], path[1:]):
            t = tree[here][there]["element"]
            loops[tree_pos[t], col] = 1.0 if elements[t].nodes == (here, there) else -1.0

    def group(ids: list[int], kind: str) -> list[int]:
        return [i for i in ids if elements[i].kind == kind]

    groups = {f"t{k.lower()}": group(tree_ids, k) for k in "VCRL"}
    groups.update({f"l{k.lower()}": group(link_ids, k) for k in "CRLI"})
    node_paths: dict[str, list[tuple[int, float]]] = {}
    for node in tree.nodes:
        path = nx.shortest_path(tree, node, circuit.ground)
        node_paths[node] = [
            (tree[h][t]["element"], 1.0 if elements[tree[h][t]["element"]].nodes == (h, t) else -1.0)
            for h, t in zip(path[:-1], path[1:])
        ]
    topology = Topology(elements, groups, loops, tree_ids, link_ids, node_paths)
    _check_degenerate(circuit, topology)
    return topology


def _check_degenerate(circuit: Circuit, top: Topology) -> None:
    """Refuse a capacitor-source loop or an inductor-current-source cut set."""
    elements = top.elements
    d_vc = top.block("tv", "lc")
    for col, i in enumerate(top.groups["lc"]):
        if np.any(d_vc[:, col]):
            names = [elements[top.groups["tv"][r]].name for r in np.flatnonzero(d_vc[:, col])]
            raise SimulationError(
                f"circuit {circuit.title!r}: capacitor {elements[i].name} closes a loop of "
                f"only capacitors and voltage sources ({', '.join(names)}); its charge would "
                "jump when a source switches: add the source's or the capacitor's series "
                "resistance"
            )
    d_li = top.block("tl", "li")
    for col, i in enumerate(top.groups["li"]):
        if np.any(d_li[:, col]):
            names = [elements[top.groups["tl"][r]].name for r in np.flatnonzero(d_li[:, col])]
            raise SimulationError(
                f"circuit {circuit.title!r}: current source {elements[i].name} forms a cut "
                f"set with only inductors ({', '.join(names)}); their current would jump when "
                "the source switches: add a resistance across the source"
            )


@dataclass(frozen=True)
class BatchModel:
    """State-space matrices for a batch of element values (leading axis: the batch).

    Attributes
    ----------
    a, b
        ``(batch, n, n)`` and ``(batch, n, m)``.
    u
        ``(batch, m)`` source values while switched on.
    x0
        ``(batch, n)`` state at t = 0+.
    voltage, current
        Per element index, its branch voltage and current as batched
        :class:`LinearMap` (coefficients ``(batch, n)`` and ``(batch, m)``).
    node_voltage
        Per node, its voltage to ground as a batched :class:`LinearMap`.
    """

    a: np.ndarray
    b: np.ndarray
    u: np.ndarray
    x0: np.ndarray
    voltage: dict[int, LinearMap]
    current: dict[int, LinearMap]
    node_voltage: dict[str, LinearMap]


def element_values(top: Topology, batch: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """Each element's value and initial condition, repeated ``batch`` times."""
    values = np.array([e.value for e in top.elements], dtype=float)
    initials = np.array([e.initial or 0.0 for e in top.elements], dtype=float)
    return np.tile(values, (batch, 1)), np.tile(initials, (batch, 1))


def assemble(top: Topology, values: np.ndarray, initials: np.ndarray,
             settled: bool = False) -> BatchModel:
    """State-space matrices for every row of ``values``.

    Parameters
    ----------
    top
        The wiring (:func:`circuit_topology`).
    values, initials
        ``(batch, n_elements)`` element values (SI units) and initial conditions (V
        across a capacitor, A through an inductor).
    settled
        Start at the DC operating point of the ``dc`` sources instead of ``initials``.

    Returns
    -------
    BatchModel
    """
    values = np.atleast_2d(np.asarray(values, dtype=float))
    initials = np.atleast_2d(np.asarray(initials, dtype=float))
    n_batch = values.shape[0]
    g = top.groups
    tv, tc, tr, tl = g["tv"], g["tc"], g["tr"], g["tl"]
    lc, lr, ll, li = g["lc"], g["lr"], g["ll"], g["li"]
    n_c, n_l, n_u = len(tc), len(ll), len(tv) + len(li)
    n_x = n_c + n_l
    eye = np.eye

    def diag(ids: list[int]) -> np.ndarray:
        out = np.zeros((n_batch, len(ids), len(ids)))
        if ids:
            out[:, np.arange(len(ids)), np.arange(len(ids))] = values[:, ids]
        return out

    def t(m: np.ndarray) -> np.ndarray:
        return np.swapaxes(m, -1, -2)

    d_cc, d_cr, d_cl, d_ci = (top.block("tc", k) for k in ("lc", "lr", "ll", "li"))
    d_vr, d_vl = top.block("tv", "lr"), top.block("tv", "ll")
    d_rr, d_rl, d_ri = (top.block("tr", k) for k in ("lr", "ll", "li"))
    d_ll = top.block("tl", "ll")
    cap = diag(tc) + d_cc @ diag(lc) @ d_cc.T
    ind = diag(ll) + d_ll.T @ diag(tl) @ d_ll
    # Inputs: u = [voltage sources, current sources]; selectors pick each kind.
    sel_v = np.hstack([eye(len(tv)), np.zeros((len(tv), len(li)))])
    sel_i = np.hstack([np.zeros((len(li), len(tv))), eye(len(li))])
    sel_c = np.hstack([eye(n_c), np.zeros((n_c, n_l))])
    sel_l = np.hstack([np.zeros((n_l, n_c)), eye(n_l)])

    # Resistive part: (R_link + D_rr^T R_tree D_rr) i_lr
    #   = D_vr^T u_v + D_cr^T v_c - D_rr^T R_tree (D_rl i_l + D_ri i_s)
    r_tree = diag(tr)
    if lr:
        k_mat = diag(lr) + d_rr.T @ r_tree @ d_rr
        rhs_x = d_cr.T @ sel_c - d_rr.T @ r_tree @ d_rl @ sel_l
        rhs_u = d_vr.T @ sel_v - d_rr.T @ r_tree @ d_ri @ sel_i
        i_lr = LinearMap(
            np.linalg.solve(k_mat, np.broadcast_to(rhs_x, (n_batch, *rhs_x.shape[-2:]))),
            np.linalg.solve(k_mat, np.broadcast_to(rhs_u, (n_batch, *rhs_u.shape[-2:]))),
        )
    else:
        i_lr = LinearMap(np.zeros((n_batch, 0, n_x)), np.zeros((n_batch, 0, n_u)))
    # Tree resistor voltages: v = -R_tree (D_rr i_lr + D_rl i_l + D_ri i_s).
    v_tr = LinearMap(-r_tree @ (d_rr @ i_lr.x_coef + d_rl @ sel_l),
                     -r_tree @ (d_rr @ i_lr.u_coef + d_ri @ sel_i))
    # Capacitor equations: cap v_c' = -(D_cr i_lr + D_cl i_l + D_ci i_s)
    if n_c:
        dvc_x = -np.linalg.solve(cap, d_cr @ i_lr.x_coef + d_cl @ sel_l)
        dvc_u = -np.linalg.solve(cap, d_cr @ i_lr.u_coef + d_ci @ sel_i)
    else:
        dvc_x, dvc_u = np.zeros((n_batch, 0, n_x)), np.zeros((n_batch, 0, n_u))
    # Inductor equations: ind i_l' = D_vl^T u_v + D_cl^T v_c + D_rl^T v_tr
    if n_l:
        dil_x = np.linalg.solve(ind, d_cl.T @ sel_c + d_rl.T @ v_tr.x_coef)
        dil_u = np.linalg.solve(ind, d_vl.T @ sel_v + d_rl.T @ v_tr.u_coef)
    else:
        dil_x, dil_u = np.zeros((n_batch, 0, n_x)), np.zeros((n_batch, 0, n_u))
    a = np.concatenate([dvc_x, dil_x], axis=1).reshape(n_batch, n_x, n_x)
    b = np.concatenate([dvc_u, dil_u], axis=1).reshape(n_batch, n_x, n_u)
    u = values[:, top.inputs] if n_u else np.zeros((n_batch, 0))

    voltage, current = _branch_maps(top, values, dict(
        sel_v=sel_v, sel_i=sel_i, sel_c=sel_c, sel_l=sel_l, v_tr=v_tr, i_lr=i_lr,
        dil_x=dil_x, dil_u=dil_u, dvc_x=dvc_x, dvc_u=dvc_u, d_ll=d_ll, d_cc=d_cc))
    node_voltage = {}
    for node, path in top.node_paths.items():
        total = LinearMap(np.zeros((n_batch, n_x)), np.zeros((n_batch, n_u)))
        for index, sign in path:
            total = total + voltage[index].scaled(sign)
        node_voltage[node] = total
    if settled:
        dc = np.array([top.elements[i].timing == "dc" for i in top.inputs], dtype=float)
        x0 = np.stack([_steady(a[k], b[k], u[k] * dc) for k in range(n_batch)]) if n_x else np.zeros((n_batch, 0))
    else:
        x0 = _initial_state(top, values, initials, cap, ind, d_cc, d_ll)
    return BatchModel(a, b, u, x0, voltage, current, node_voltage)


def _branch_maps(top: Topology, values: np.ndarray, m: dict) -> tuple[dict, dict]:
    """Every branch voltage and current as a batched map of (x, u)."""
    g = top.groups
    n_batch = values.shape[0]
    n_x = m["sel_c"].shape[1]
    n_u = m["sel_v"].shape[1]

    def fixed(x: np.ndarray, u: np.ndarray) -> LinearMap:
        return LinearMap(np.broadcast_to(x, (n_batch, n_x)).copy(),
                         np.broadcast_to(u, (n_batch, n_u)).copy())

    voltage: dict[int, LinearMap] = {}
    current: dict[int, LinearMap] = {}
    for k, i in enumerate(g["tv"]):
        voltage[i] = fixed(np.zeros(n_x), m["sel_v"][k])
    for k, i in enumerate(g["tc"]):
        voltage[i] = fixed(m["sel_c"][k], np.zeros(n_u))
    for k, i in enumerate(g["tr"]):
        voltage[i] = LinearMap(m["v_tr"].x_coef[:, k], m["v_tr"].u_coef[:, k])
    for k, i in enumerate(g["tl"]):  # v = L di/dt with i = -D_ll i_l
        row = -values[:, i, None] * m["d_ll"][k]
        voltage[i] = LinearMap(np.einsum("bj,bjx->bx", row, m["dil_x"]),
                               np.einsum("bj,bju->bu", row, m["dil_u"]))
    for k, i in enumerate(g["ll"]):
        current[i] = fixed(m["sel_l"][k], np.zeros(n_u))
    for k, i in enumerate(g["li"]):
        current[i] = fixed(np.zeros(n_x), m["sel_i"][k])
    for k, i in enumerate(g["lr"]):
        current[i] = LinearMap(m["i_lr"].x_coef[:, k], m["i_lr"].u_coef[:, k])
    for k, i in enumerate(g["lc"]):  # i = C dv/dt with v = D_cc^T v_c
        row = values[:, i, None] * m["d_cc"][:, k]
        current[i] = LinearMap(np.einsum("bj,bjx->bx", row, m["dvc_x"]),
                               np.einsum("bj,bju->bu", row, m["dvc_u"]))
    zero = LinearMap(np.zeros((n_batch, n_x)), np.zeros((n_batch, n_u)))
    for col, i in enumerate(top.links):
        total = zero
        for pos, t in enumerate(top.tree):
            if top.loops[pos, col]:
                total = total + voltage[t].scaled(top.loops[pos, col])
        voltage[i] = total
    for pos, t in enumerate(top.tree):  # KCL over the fundamental cut set
        total = zero
        for col, i in enumerate(top.links):
            if top.loops[pos, col]:
                total = total + current[i].scaled(top.loops[pos, col])
        current[t] = -total
    for i, element in enumerate(top.elements):
        if element.kind == "R" and i in g["tr"]:
            with np.errstate(divide="ignore", invalid="ignore"):
                current[i] = voltage[i].scaled(1.0 / values[:, i])
        elif element.kind == "R":
            voltage[i] = current[i].scaled(values[:, i])
    return voltage, current


def _initial_state(top: Topology, values: np.ndarray, initials: np.ndarray,
                   cap: np.ndarray, ind: np.ndarray, d_cc: np.ndarray,
                   d_ll: np.ndarray) -> np.ndarray:
    """State at 0+: charge on the capacitor cut sets and flux round the inductor loops
    are conserved, which for consistent initial conditions returns them unchanged."""
    g = top.groups
    parts = []
    if g["tc"]:
        charge = (values[:, g["tc"]] * initials[:, g["tc"]]
                  + (values[:, g["lc"]] * initials[:, g["lc"]]) @ d_cc.T)
        parts.append(np.linalg.solve(cap, charge[..., None])[..., 0])
    if g["ll"]:
        flux = (values[:, g["ll"]] * initials[:, g["ll"]]
                - (values[:, g["tl"]] * initials[:, g["tl"]]) @ d_ll)
        parts.append(np.linalg.solve(ind, flux[..., None])[..., 0])
    return np.concatenate(parts, axis=1) if parts else np.zeros((values.shape[0], 0))


def state_space(circuit: Circuit) -> StateSpace:
    """Build the state-space model of ``circuit``.

    Parameters
    ----------
    circuit
        Linear circuit of R, L, C, V and I elements; sources hold their value while
        switched on.

    Returns
    -------
    StateSpace
        Matrices, initial state and maps from state and inputs to every branch quantity.

    Raises
    ------
    SimulationError
        When the circuit is not connected to ground, has non-positive R, L or C values,
        voltage sources forming a loop, or a degenerate loop or cut set.
    """
    _check_values(circuit)
    top = circuit_topology(circuit)
    values, initials = element_values(top)
    batch = assemble(top, values, initials, circuit.starts_settled)
    names = [e.name for e in top.elements]
    return StateSpace(
        a=batch.a[0],
        b=batch.b[0],
        u=batch.u[0],
        x0=batch.x0[0],
        states=tuple(names[i] for i in top.state_ids),
        inputs=tuple(names[i] for i in top.inputs),
        branch_voltage={names[i]: m.row(0) for i, m in batch.voltage.items()},
        branch_current={names[i]: m.row(0) for i, m in batch.current.items()},
        node_voltage={n: m.row(0) for n, m in batch.node_voltage.items()},
    )


def probe_map(model: StateSpace, circuit: Circuit) -> LinearMap:
    """The probed signal of ``circuit`` as a map of (x, u): the voltage between the
    probe nodes, or the current through :attr:`Circuit.probe_current`."""
    if circuit.probe_current is not None:
        if circuit.probe_current not in model.branch_current:
            raise SimulationError(f"the current probe {circuit.probe_current!r} is not an element")
        return model.branch_current[circuit.probe_current]
    return model.voltage_between(*circuit.probe)


def initial_conditions(circuit: Circuit) -> dict[str, float]:
    """Every capacitor's voltage and every inductor's current at t = 0+ (V, A), by
    element name: the stated initial values made consistent (charge and flux
    conserved), or the DC operating point when the circuit starts settled."""
    model = state_space(circuit)
    out: dict[str, float] = {}
    for element in circuit.elements:
        if element.kind == "C":
            m = model.branch_voltage[element.name]
        elif element.kind == "L":
            m = model.branch_current[element.name]
        else:
            continue
        out[element.name] = float(m.x_coef @ model.x0 + m.u_coef @ model.u)
    return out


def _check_values(circuit: Circuit) -> None:
    problems = []
    for element in circuit.elements:
        if element.kind not in _TREE_ORDER:
            problems.append(f"{element.name} has unknown kind {element.kind!r}")
        elif element.kind == "R" and element.role == "extra_resistance" and (
            np.isfinite(element.value) and element.value != 0
        ):
            # A fitted lumped correction may be negative (the stated losses were too
            # high); the loop's total resistance is checked by whoever fits it.
            continue
        elif element.kind not in ("V", "I") and not (np.isfinite(element.value) and element.value > 0):
            problems.append(f"{element.name} = {element.value!r} (expected a positive value)")
        elif not np.isfinite(element.value):
            problems.append(f"{element.name} = {element.value!r} (expected a finite value)")
    if problems:
        raise SimulationError(f"circuit {circuit.title!r}: " + "; ".join(problems))


@dataclass(frozen=True)
class NaturalModes:
    """Natural frequencies of a circuit and their weight in the probe voltage.

    Attributes
    ----------
    poles
        Complex natural frequencies s_k (1/s); a conjugate pair is one ringing mode.
    amplitudes
        Complex amplitude of each mode in the probe voltage, so that for t > 0
        ``v(t) = steady + sum_k amplitudes[k] * exp(poles[k] * t)`` (volts). Amplitudes
        of nearly coincident poles (near critical damping) are large and cancel; see
        :func:`natural_modes`.
    steady
        Probe voltage the circuit settles to (V).
    initial
        Probe voltage at t = 0+ (V).
    """

    poles: np.ndarray
    amplitudes: np.ndarray
    steady: float
    initial: float


def natural_modes(circuit: Circuit) -> NaturalModes:
    """Natural frequencies of ``circuit`` and their amplitudes in the probe voltage.

    Parameters
    ----------
    circuit
        The circuit; its ``probe`` nodes define the output.

    Returns
    -------
    NaturalModes
        Poles from the eigenvalues of the state matrix; amplitudes from the initial
        state projected on the eigenvectors. At exactly repeated poles the eigenvector
        basis is defective and the amplitudes are not finite: callers that need a
        bound should clip them (the response itself stays finite).
    """
    model = state_space(circuit)
    probe = probe_map(model, circuit)
    steady_state = model.steady_state()
    steady = float(probe.x_coef @ steady_state + probe.u_coef @ model.u)
    initial = float(probe.x_coef @ model.x0 + probe.u_coef @ model.u)
    if model.a.size == 0:
        return NaturalModes(np.zeros(0, complex), np.zeros(0, complex), steady, initial)
    poles, vectors = scipy.linalg.eig(model.a)
    with np.errstate(all="ignore"):
        coefficients = np.linalg.lstsq(vectors, (model.x0 - steady_state).astype(complex), rcond=None)[0]
        amplitudes = (probe.x_coef @ vectors) * coefficients
    return NaturalModes(poles, amplitudes, steady, initial)


def natural_frequencies(circuit: Circuit) -> np.ndarray:
    """Natural frequencies s_k (1/s) of ``circuit``: eigenvalues of its state matrix."""
    model = state_space(circuit)
    if model.a.size == 0:
        return np.zeros(0, complex)
    return scipy.linalg.eigvals(model.a)
