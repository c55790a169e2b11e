"""Linear state-space model of a :class:`~xcheck.circuit.model.Circuit` (normal-tree method).

Any circuit of R, L, C and DC V elements is turned into

    x' = A x + B u,        y = C x + D u

with ``x`` the independent capacitor voltages and inductor currents and ``u`` the source
voltages (constant for t > 0). The states are chosen with a *normal tree* (the classical
state-variable method of network theory, e.g. Chua, Desoer & Kuh, "Linear and Nonlinear
Circuits", chapter on state equations, from memory): a spanning tree that takes voltage
sources first, then capacitors, then resistors, then inductors. Capacitors left out of
the tree (capacitor loops) and inductors forced into it (inductor cut sets, such as two
inductors in series) are dependent and fold into effective capacitance and inductance
matrices, so series inductors or parallel capacitors never produce spurious modes. The
resistive part is eliminated exactly by solving a symmetric positive-definite system.

This module owns the model only; the eigenvalues of ``A`` are the circuit's natural
frequencies (used to choose the transient time step), and a future exact engine can
integrate the same model. Limitations: a loop made only of voltage sources is rejected;
for a loop of capacitors and sources the impulsive charge redistribution at the instant
a source is switched in is not modelled (such circuits do not arise from a series loop).
"""

from __future__ import annotations

from dataclasses import dataclass

import networkx as nx
import numpy as np
import scipy.linalg

from xcheck.circuit.model import Circuit, Element
from xcheck.errors import SimulationError

#: Preference of each kind for the normal tree (lower goes in first).
_TREE_ORDER = {"V": 0, "C": 1, "R": 2, "L": 3}


@dataclass(frozen=True)
class LinearMap:
    """A quantity written as ``x_coef @ x + u_coef @ u``."""

    x_coef: np.ndarray
    u_coef: np.ndarray

    def __add__(self, other: "LinearMap") -> "LinearMap":
        return LinearMap(self.x_coef + other.x_coef, self.u_coef + other.u_coef)

    def __neg__(self) -> "LinearMap":
        return LinearMap(-self.x_coef, -self.u_coef)

    def scaled(self, factor: float) -> "LinearMap":
        """This map times ``factor``."""
        return LinearMap(factor * self.x_coef, factor * self.u_coef)


@dataclass(frozen=True)
class StateSpace:
    """``x' = a x + b u`` for t > 0, with named states and inputs.

    Attributes
    ----------
    a, b
        State and input matrices (SI units, 1/s and so on).
    u
        Source values in volts, in the order of ``inputs``.
    x0
        State at t = 0+ (charge and flux conserved where initial conditions are
        dependent, e.g. capacitors in parallel).
    states
        Element name of each state (a capacitor voltage or an inductor current).
    inputs
        Element name of each voltage source.
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
        if self.a.size == 0:
            return np.zeros(0)
        rhs = -self.b @ self.u
        solution, *_ = np.linalg.lstsq(self.a, rhs, rcond=None)
        return solution


def state_space(circuit: Circuit) -> StateSpace:
    """Build the state-space model of ``circuit``.

    Parameters
    ----------
    circuit
        Linear circuit of R, L, C and V elements; V elements hold their value for t > 0.

    Returns
    -------
    StateSpace
        Matrices, initial state and maps from state and inputs to every branch quantity.

    Raises
    ------
    SimulationError
        When the circuit is not connected to ground, has non-positive R, L or C values,
        or voltage sources forming a loop.
    """
    elements = circuit.elements
    _check_values(circuit)
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
    tree = nx.Graph()
    tree.add_nodes_from(graph.nodes)
    for i in tree_ids:
        tree.add_edge(*elements[i].nodes, element=i)

    # Fundamental loop matrix entries: link voltage = sum_t d[t, l] * tree voltage.
    tree_pos = {e: k for k, e in enumerate(tree_ids)}
    d = np.zeros((len(tree_ids), len(link_ids)))
    for col, i in enumerate(link_ids):
        first, second = elements[i].nodes
        path = nx.shortest_path(tree, first, second)
        for here, there in zip(path[:-1], path[1:]):
            t = tree[here][there]["element"]
            d[tree_pos[t], col] = 1.0 if elements[t].nodes == (here, there) else -1.0

    def group(ids: list[int], kind: str) -> list[int]:
        return [i for i in ids if elements[i].kind == kind]

    tv, tc, tr, tl = (group(tree_ids, k) for k in "VCRL")
    lc, lr, ll = (group(link_ids, k) for k in "CRL")

    def block(rows: list[int], cols: list[int]) -> np.ndarray:
        r = [tree_pos[i] for i in rows]
        c = [link_ids.index(i) for i in cols]
        return d[np.ix_(r, c)] if r and c else np.zeros((len(rows), len(cols)))

    def diag(ids: list[int]) -> np.ndarray:
        return np.diag([elements[i].value for i in ids]) if ids else np.zeros((0, 0))

    n_c, n_l, n_u = len(tc), len(ll), len(tv)
    n_x = n_c + n_l
    # Effective capacitance of the tree capacitors (link capacitors folded in) and
    # effective inductance of the link inductors (tree inductors folded in).
    d_cc, d_cr, d_cl = block(tc, lc), block(tc, lr), block(tc, ll)
    # block(tv, lc) is not needed: a link capacitor in a loop with a source draws
    # C du/dt, which is zero for the constant (DC, switched at t = 0) sources used here.
    d_vr, d_vl = block(tv, lr), block(tv, ll)
    d_rr, d_rl, d_ll = block(tr, lr), block(tr, ll), block(tl, ll)
    cap = diag(tc) + d_cc @ diag(lc) @ d_cc.T
    ind = diag(ll) + d_ll.T @ diag(tl) @ d_ll

    # Resistive part: (R_link + D_rr^T R_tree D_rr) i_lr = D_vr^T u + D_cr^T v_c - D_rr^T R_tree D_rl i_l
    r_tree = diag(tr)
    k_mat = diag(lr) + d_rr.T @ r_tree @ d_rr
    sel_c = np.hstack([np.eye(n_c), np.zeros((n_c, n_l))])
    sel_l = np.hstack([np.zeros((n_l, n_c)), np.eye(n_l)])
    if lr:
        rhs_x = d_cr.T @ sel_c - d_rr.T @ r_tree @ d_rl @ sel_l
        rhs_u = d_vr.T
        i_lr = LinearMap(np.linalg.solve(k_mat, rhs_x), np.linalg.solve(k_mat, rhs_u))
    else:
        i_lr = LinearMap(np.zeros((0, n_x)), np.zeros((0, n_u)))
    v_tr = LinearMap(
        -r_tree @ d_rr @ i_lr.x_coef - r_tree @ d_rl @ sel_l,
        -r_tree @ d_rr @ i_lr.u_coef,
    )
    # Capacitor equations: cap v_c' = -(D_cr i_lr + D_cl i_l)
    dvc_x = -np.linalg.solve(cap, d_cr @ i_lr.x_coef + d_cl @ sel_l) if n_c else np.zeros((0, n_x))
    dvc_u = -np.linalg.solve(cap, d_cr @ i_lr.u_coef) if n_c else np.zeros((0, n_u))
    # Inductor equations: ind i_l' = D_vl^T u + D_cl^T v_c + D_rl^T v_tr
    if n_l:
        dil_x = np.linalg.solve(ind, d_cl.T @ sel_c + d_rl.T @ v_tr.x_coef)
        dil_u = np.linalg.solve(ind, d_vl.T + d_rl.T @ v_tr.u_coef)
    else:
        dil_x, dil_u = np.zeros((0, n_x)), np.zeros((0, n_u))
    a = np.vstack([dvc_x, dil_x]).reshape(n_x, n_x)
    b = np.vstack([dvc_u, dil_u]).reshape(n_x, n_u)

    # Every branch voltage and current as a map of (x, u).
    voltage: dict[int, LinearMap] = {}
    current: dict[int, LinearMap] = {}
    unit_u = np.eye(n_u)
    for k, i in enumerate(tv):
        voltage[i] = LinearMap(np.zeros(n_x), unit_u[k])
    for k, i in enumerate(tc):
        voltage[i] = LinearMap(sel_c[k], np.zeros(n_u))
    for k, i in enumerate(tr):
        voltage[i] = LinearMap(v_tr.x_coef[k], v_tr.u_coef[k])
    for k, i in enumerate(tl):  # v = L di/dt with i = -D_ll i_l
        row = -elements[i].value * d_ll[k]
        voltage[i] = LinearMap(row @ dil_x, row @ dil_u)
    for k, i in enumerate(ll):
        current[i] = LinearMap(sel_l[k], np.zeros(n_u))
    for k, i in enumerate(lr):
        current[i] = LinearMap(i_lr.x_coef[k], i_lr.u_coef[k])
    for k, i in enumerate(lc):  # i = C dv/dt with v = D_cc^T v_c (sources constant for t > 0)
        row = elements[i].value * d_cc[:, k]
        current[i] = LinearMap(row @ dvc_x, row @ dvc_u)
    for col, i in enumerate(link_ids):
        voltage[i] = _sum_maps(
            [voltage[t].scaled(d[tree_pos[t], col]) for t in tree_ids if d[tree_pos[t], col]],
            n_x, n_u,
        )
    for t in tree_ids:  # KCL over the fundamental cut set: i_t = -sum_l d[t, l] i_l
        row = d[tree_pos[t]]
        current[t] = -_sum_maps(
            [current[i].scaled(row[col]) for col, i in enumerate(link_ids) if row[col]],
            n_x, n_u,
        )
    for i, element in enumerate(elements):
        if element.kind == "R" and i in tree_set:
            current[i] = voltage[i].scaled(1.0 / element.value)
        elif element.kind == "R":
            voltage[i] = current[i].scaled(element.value)

    node_voltage: dict[str, LinearMap] = {}
    for node in tree.nodes:
        path = nx.shortest_path(tree, node, circuit.ground)
        maps = []
        for here, there in zip(path[:-1], path[1:]):
            t = tree[here][there]["element"]
            sign = 1.0 if elements[t].nodes == (here, there) else -1.0
            maps.append(voltage[t].scaled(sign))
        node_voltage[node] = _sum_maps(maps, n_x, n_u)

    x0 = _initial_state(elements, tc, lc, ll, tl, d_cc, d_ll, cap, ind)
    return StateSpace(
        a=a,
        b=b,
        u=np.array([elements[i].value for i in tv], dtype=float),
        x0=x0,
        states=tuple(elements[i].name for i in tc + ll),
        inputs=tuple(elements[i].name for i in tv),
        branch_voltage={elements[i].name: voltage[i] for i in range(len(elements))},
        branch_current={elements[i].name: current[i] for i in range(len(elements))},
        node_voltage=node_voltage,
    )


def _sum_maps(maps: list[LinearMap], n_x: int, n_u: int) -> LinearMap:
    total = LinearMap(np.zeros(n_x), np.zeros(n_u))
    for item in maps:
        total = total + item
    return total


def _initial_state(
    elements: tuple[Element, ...],
    tc: list[int],
    lc: list[int],
    ll: list[int],
    tl: list[int],
    d_cc: np.ndarray,
    d_ll: np.ndarray,
    cap: np.ndarray,
    ind: np.ndarray,
) -> np.ndarray:
    """State at 0+: charge on the capacitor cut sets and flux round the inductor loops
    are conserved, which for consistent initial conditions returns them unchanged."""

    def initial(ids: list[int]) -> np.ndarray:
        return np.array([elements[i].initial or 0.0 for i in ids], dtype=float)

    def values(ids: list[int]) -> np.ndarray:
        return np.array([elements[i].value for i in ids], dtype=float)

    parts = []
    if tc:
        charge = values(tc) * initial(tc) + d_cc @ (values(lc) * initial(lc))
        parts.append(np.linalg.solve(cap, charge))
    if ll:
        flux = values(ll) * initial(ll) - d_ll.T @ (values(tl) * initial(tl))
        parts.append(np.linalg.solve(ind, flux))
    return np.concatenate(parts) if parts else np.zeros(0)


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
        elif element.kind != "V" and not (np.isfinite(element.value) and element.value > 0):
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
    probe = model.voltage_between(*circuit.probe)
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
