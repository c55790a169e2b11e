"""Exact frequency response of a circuit from its state space, for many value sets at once.

With the state space of :mod:`xcheck.engines.statespace`,

    x' = A x + B u,        y = C x + D u,

a sinusoidal input ``u_k = U e^{j w t}`` on one source (every other source zero) gives,
once settled, ``y = H(jw) U`` with

    H(jw) = C (jw I - A)^-1 B[:, k] + D[k].

:func:`response_matrix` evaluates this for a batch of matrices and an array of
frequencies by solving the stacked systems ``(jw I - A) x = B[:, k]`` with
``numpy.linalg.solve`` (LU with partial pivoting for each frequency and value set; no
explicit inverse).

Two quantities are offered, each as a :class:`FrequencyEngine` (one wiring, analysed
once, any batch of element values):

- a **transfer function** (:meth:`FrequencyEngine.transfer`) from a named source element
  of the circuit (a V or I element: a step source, a voltage source part, or a 0 V
  source such as a current sense) to the circuit's probe (a voltage, or a current with a
  current probe). Units: V/V, A/V (siemens), V/A (ohms) or A/A.
- a **driving-point impedance** (:meth:`FrequencyEngine.impedance`) between two nodes:
  a 1 A current source is added that drives current into the first node and out of the
  second, and the response is the voltage of the first node minus the second (ohms).
  Where the nodes are joined to the rest only through inductors (a cut set the
  state-space assembly refuses for a current source), a 1 V source is added instead
  and the impedance is the reciprocal of the current it drives: the same function.

AC rules (the same for the ngspice ``.ac`` deck of :mod:`xcheck.engines.ac_deck`):

- Superposition: the driven source has unit amplitude; every other independent source
  is zero, a voltage source a short and a current source open. So 0 V sources (an ideal
  switch, a loop current sense, a current probe) are shorts, as in the transient.
- Switches are in the state they hold after t = 0, which is the only state the
  circuit describes: a fixture's switch closes at t = 0 and becomes its closed
  resistance (or a 0 V source), so the sweep is the natural response's circuit.
- Source timing (step, pulse, delay), initial conditions and a settled start do not
  enter: the response is the linear circuit's steady state at each frequency.

Frequencies come in hertz (``w = 2 pi f``); responses are complex, in the SI unit of
:attr:`FrequencyEngine.unit`.

Limitations, refused with :class:`~xcheck.errors.SimulationError` by the state-space
assembly: an impedance whose nodes are joined to the rest only through inductors *and*
closed by a loop of only capacitors (neither drive can be assembled), and a circuit
with a loop of only voltage sources and capacitors, or a cut set of only current
sources and inductors, of its own.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
from numpy.typing import ArrayLike

from xcheck.circuit.model import Circuit, Element, UniqueNames
from xcheck.engines.statespace import (
    BatchModel,
    LinearMap,
    Topology,
    _check_values,
    assemble,
    circuit_topology,
    element_values,
)
from xcheck.errors import SimulationError

#: Name of the 1 A current source added for an impedance (SPICE letter first; a
#: ``_2`` suffix and so on when the circuit already has an element of that name).
INJECTION_NAME = "I_xcheck_ac"
#: Largest number of complex entries of the stacked ``(jw I - A)`` matrices solved in
#: one piece (bounds memory for long sweeps on large batches: 4e6 entries is 64 MB).
CHUNK_ENTRIES = 4_000_000


def response_matrix(
    a: np.ndarray,
    b: np.ndarray,
    c: np.ndarray,
    d: np.ndarray,
    frequencies: ArrayLike,
) -> np.ndarray:
    """``H(j 2 pi f) = c (j 2 pi f I - a)^-1 b + d`` for a batch of single-input,
    single-output systems.

    Parameters
    ----------
    a
        ``(batch, n, n)`` state matrices (1/s).
    b
        ``(batch, n)`` input columns.
    c
        ``(batch, n)`` output rows.
    d
        ``(batch,)`` feedthrough.
    frequencies
        Frequencies in Hz, any shape that flattens to ``(n_f,)``; finite and >= 0.

    Returns
    -------
    numpy.ndarray
        ``(batch, n_f)`` complex response.

    Raises
    ------
    SimulationError
        When a frequency is negative or not finite, or the source drives a natural
        frequency ``j 2 pi f`` that lies on the sweep (an undamped mode at its
        resonance, or a capacitor with no DC path at f = 0). Where the matrix is
        exactly singular only in a mode the source cannot excite (the charge of a node
        floating between two capacitors, at f = 0), the least-squares solution is
        used.
    """
    f = np.asarray(frequencies, dtype=float).reshape(-1)
    if not np.all(np.isfinite(f)) or np.any(f < 0):
        raise SimulationError(
            "frequencies must be finite and non-negative (Hz); got "
            f"{f[~(np.isfinite(f) & (f >= 0))][:3].tolist()}"
        )
    a = np.asarray(a, dtype=float)
    n_batch, n_x = a.shape[0], a.shape[-1]
    d = np.asarray(d, dtype=float).reshape(n_batch)
    out = np.empty((n_batch, f.size), dtype=complex)
    out[:] = d[:, None]
    if n_x == 0 or f.size == 0:
        return out
    b = np.asarray(b, dtype=float).reshape(n_batch, n_x)
    c = np.asarray(c, dtype=float).reshape(n_batch, n_x)
    s = 2j * np.pi * f
    eye = np.eye(n_x)
    per_frequency = n_batch * n_x * n_x
    step = max(1, CHUNK_ENTRIES // max(per_frequency, 1))
    rhs = b[:, None, :, None].astype(complex)
    for start in range(0, f.size, step):
        chunk = s[start:start + step]
        matrices = chunk[None, :, None, None] * eye - a[:, None, :, :]
        stacked = np.broadcast_to(rhs, (n_batch, chunk.size, n_x, 1))
        try:
            x = np.linalg.solve(matrices, stacked)
        except np.linalg.LinAlgError:
            x = _solve_singular(matrices, stacked)
        out[:, start:start + step] += np.einsum("bn,bfn->bf", c.astype(complex), x[..., 0])
    return out


def _solve_singular(matrices: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """Solve each system of a stack where at least one is exactly singular: the
    regular ones by LU, the singular ones by least squares when the drive reaches no
    singular mode (a mode the source cannot excite, such as the charge of a node
    floating between two capacitors at f = 0), else SimulationError."""
    x = np.empty(rhs.shape, dtype=complex)
    for index in np.ndindex(*matrices.shape[:-2]):
        m, b = matrices[index], rhs[index]
        try:
            x[index] = np.linalg.solve(m, b)
            continue
        except np.linalg.LinAlgError:
            pass
        solution, *_ = np.linalg.lstsq(m, b, rcond=None)
        scale = np.linalg.norm(m) * np.linalg.norm(solution) + np.linalg.norm(b)
        if np.linalg.norm(m @ solution - b) > 1e-10 * scale:
            raise SimulationError(
                "the source drives a natural frequency of the circuit that lies on the "
                "sweep (an undamped mode at its resonance, or a capacitor with no DC "
                "path at f = 0); start the sweep above 0 Hz or add the parts' losses"
            )
        x[index] = solution
    return x


@dataclass(frozen=True)
class FrequencyEngine:
    """One circuit's wiring with one drive and one output, swept for any batch of
    element values.

    Build it with :meth:`transfer` or :meth:`impedance`; do not call the constructor.

    Attributes
    ----------
    circuit
        The circuit as given (without the source an impedance adds).
    quantity
        ``"transfer"`` or ``"impedance"``.
    source
        Element name of the driven source in :attr:`swept` (for an impedance the
        added source).
    output
        What is read: ``"probe"`` (the circuit's probe), ``"nodes"`` (the voltage
        between :attr:`nodes` per ampere driven: an impedance) or ``"admittance"``
        (the current the added 1 V source drives into the first node; the response
        is its reciprocal, an impedance).
    nodes
        (plus, minus) nodes of an impedance; the probe nodes for a transfer function.
    unit
        Unit of the response: ``"V/V"``, ``"A/V"``, ``"ohm"`` (V/A) or ``"A/A"``.
    swept
        The circuit the state space is built from: :attr:`circuit`, with the added
        source last for an impedance.
    """

    circuit: Circuit
    quantity: str
    source: str
    output: str
    nodes: tuple[str, str]
    unit: str
    swept: Circuit
    _topology: Topology = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        _check_values(self.swept)
        object.__setattr__(self, "_topology", circuit_topology(self.swept))

    @classmethod
    def transfer(cls, circuit: Circuit, source: str) -> "FrequencyEngine":
        """The transfer function from ``source`` to the circuit's probe.

        Parameters
        ----------
        circuit
            The circuit (e.g. from :func:`xcheck.circuit.expand.build_circuit`).
        source
            A V or I element's name (``"V_V1"``), or a fixture part name (``"V1"``,
            ``"step"``) with exactly one V or I element.

        Returns
        -------
        FrequencyEngine

        Raises
        ------
        SimulationError
            When ``source`` names no source of the circuit, or the circuit has no
            unique solution.
        """
        element = source_element(circuit, source)
        output_unit = circuit.probe_unit
        input_unit = "V" if element.kind == "V" else "A"
        unit = "ohm" if (output_unit, input_unit) == ("V", "A") else f"{output_unit}/{input_unit}"
        return cls(circuit, "transfer", element.name, "probe", tuple(circuit.probe), unit,
                   circuit)

    @classmethod
    def impedance(cls, circuit: Circuit, plus: str, minus: str) -> "FrequencyEngine":
        """The impedance seen between nodes ``plus`` and ``minus``: the voltage
        ``v(plus) - v(minus)`` per ampere driven into ``plus`` and out of ``minus``,
        with every source of the circuit zero.

        A 1 A current source is added between the nodes. Where that source would form
        a cut set with only inductors (the nodes are joined to the rest only through
        inductors, which the state-space assembly refuses), a 1 V source is added
        instead and the impedance is the reciprocal of the current it drives into
        ``plus``: the same driving-point function.

        Parameters
        ----------
        circuit
            The circuit.
        plus, minus
            Two different nodes of the circuit (ground is ``circuit.ground``).

        Returns
        -------
        FrequencyEngine
            Its :attr:`swept` circuit holds the added source as its last element.

        Raises
        ------
        SimulationError
            When a node is not in the circuit, the two are the same, or neither drive
            gives a circuit with a unique solution (see the module's limitations).
        """
        swept = with_injection(circuit, plus, minus)
        try:
            return cls(circuit, "impedance", swept.elements[-1].name, "nodes",
                       (plus, minus), "ohm", swept)
        except SimulationError as by_current:
            swept = with_injection(circuit, plus, minus, kind="V")
            try:
                return cls(circuit, "impedance", swept.elements[-1].name, "admittance",
                           (plus, minus), "ohm", swept)
            except SimulationError:
                raise by_current from None

    @property
    def names(self) -> tuple[str, ...]:
        """Element names of :attr:`swept` in the column order of a batch of values."""
        return tuple(e.name for e in self._topology.elements)

    def index_of(self, name: str) -> int:
        """Column of element ``name`` in a batch of values."""
        try:
            return self.names.index(name)
        except ValueError:
            raise SimulationError(f"no element {name!r} in circuit {self.circuit.title!r}") from None

    def defaults(self, batch: int = 1) -> np.ndarray:
        """``(batch, n_elements)`` element values (SI units), each row the circuit's."""
        return element_values(self._topology, batch)[0]

    def model(self, values: ArrayLike | None = None) -> BatchModel:
        """The batch's state-space matrices (the circuit's values when None)."""
        if values is None:
            values = self.defaults()
        values = np.atleast_2d(np.asarray(values, dtype=float))
        if values.ndim != 2 or values.shape[-1] != len(self.names):
            raise SimulationError(
                f"a batch of values needs {len(self.names)} columns ({', '.join(self.names)}), "
                f"got shape {values.shape}"
            )
        return assemble(self._topology, values, np.zeros_like(values))

    def output_map(self, model: BatchModel) -> LinearMap:
        """The batched map of the output: the probe, the impedance's node voltage, or
        the current the added 1 V source drives into the first node."""
        circuit = self.swept
        if self.output == "probe" and circuit.probe_current is not None:
            return model.current[self.index_of(circuit.probe_current)]
        if self.output == "admittance":  # element current runs plus -> minus inside it
            return -model.current[self.index_of(self.source)]
        plus, minus = self.nodes
        for node in (plus, minus):
            if node not in model.node_voltage:
                raise SimulationError(f"node {node!r} is not part of the circuit")
        return model.node_voltage[plus] + (-model.node_voltage[minus])

    def matrices(self, values: ArrayLike | None = None) -> tuple[np.ndarray, ...]:
        """The single-input, single-output ``(A, B, C, D)`` of every batch row:
        ``(batch, n, n)``, ``(batch, n, 1)``, ``(batch, 1, n)``, ``(batch, 1, 1)``.

        Their transfer function is the response, except with :attr:`output`
        ``"admittance"``, where it is the admittance (S) whose reciprocal the
        response is.
        """
        model = self.model(values)
        k = [self._topology.elements[i].name for i in self._topology.inputs].index(self.source)
        out = self.output_map(model)
        return (model.a, model.b[:, :, k:k + 1], out.x_coef[:, None, :],
                out.u_coef[:, k, None, None])

    def response(self, frequencies: ArrayLike, values: ArrayLike | None = None) -> np.ndarray:
        """The complex response at ``frequencies`` for every row of ``values``.

        Parameters
        ----------
        frequencies
            Frequencies in Hz (finite, >= 0).
        values
            ``(batch, n_elements)`` element values in the column order of
            :attr:`names` (for an impedance the added source's column is included,
            its value does not matter); None: the circuit's own values.

        Returns
        -------
        numpy.ndarray
            ``(batch, n_f)`` complex, in :attr:`unit` (an infinite impedance, where
            the driven current is exactly zero, is ``inf``).
        """
        a, b, c, d = self.matrices(values)
        return self.from_matrices(response_matrix(a, b[..., 0], c[:, 0, :], d[:, 0, 0],
                                                  frequencies))

    def from_matrices(self, h: np.ndarray) -> np.ndarray:
        """The response from the transfer function of :meth:`matrices`: ``h`` itself,
        or its reciprocal when :attr:`output` is ``"admittance"`` (``inf`` where the
        driven current is exactly zero)."""
        if self.output == "admittance":
            with np.errstate(divide="ignore", invalid="ignore"):
                return np.where(h == 0, np.inf + 0j, 1 / np.where(h == 0, 1, h))
        return h


def with_injection(circuit: Circuit, plus: str, minus: str, kind: str = "I") -> Circuit:
    """``circuit`` with a unit source added last, between ``plus`` and ``minus``:
    a 1 A current source (``kind="I"``, :data:`INJECTION_NAME`) driving current into
    ``plus`` and out of ``minus``, or a 1 V source (``kind="V"``) holding ``plus`` 1 V
    above ``minus``.

    Raises
    ------
    SimulationError
        When a node is not in the circuit, or the two are the same.
    """
    known = set(circuit.nodes) | {circuit.ground}
    missing = [n for n in (plus, minus) if n not in known]
    if missing:
        raise SimulationError(
            f"circuit {circuit.title!r}: node(s) {missing} are not in the circuit; "
            f"its nodes are {sorted(known)}"
        )
    if plus == minus:
        raise SimulationError(
            f"circuit {circuit.title!r}: an impedance needs two different nodes, got "
            f"{plus!r} twice"
        )
    # SPICE's sign: an I source's current flows from its first node through it to the
    # second, so (minus, plus) drives 1 A into ``plus``; a V source's first node is +.
    nodes = (minus, plus) if kind == "I" else (plus, minus)
    base = INJECTION_NAME if kind == "I" else "V" + INJECTION_NAME[1:]
    name = UniqueNames(tuple(e.name for e in circuit.elements)).take(base)
    injection = Element(name, kind, nodes, 1.0, part="ac",
                        role="injection", origin="AC drive")
    return replace(circuit, elements=(*circuit.elements, injection))


def source_element(circuit: Circuit, source: str) -> Element:
    """The V or I element ``source`` names: an element name, or a fixture part name
    (a pseudo-part such as ``"step"`` too) with exactly one V or I element.

    Raises
    ------
    SimulationError
        When nothing, or more than one source, matches.
    """
    sources = [e for e in circuit.elements if e.kind in ("V", "I")]
    for element in sources:
        if element.name == source:
            return element
    of_part = [e for e in sources if e.part == source]
    if len(of_part) == 1:
        return of_part[0]
    listed = ", ".join(f"{e.name} (part {e.part})" for e in sources) or "none"
    if of_part:
        raise SimulationError(
            f"circuit {circuit.title!r}: part {source!r} has several sources "
            f"({', '.join(e.name for e in of_part)}); name one element"
        )
    raise SimulationError(
        f"circuit {circuit.title!r}: {source!r} is not a source of the circuit; its "
        f"sources are: {listed}"
    )


def transfer_function(circuit: Circuit, source: str, frequencies: ArrayLike) -> np.ndarray:
    """The transfer function from ``source`` to the probe at ``frequencies`` (Hz).

    Parameters
    ----------
    circuit
        The circuit.
    source
        Source element or part name (see :func:`source_element`).
    frequencies
        Hz, finite and >= 0.

    Returns
    -------
    numpy.ndarray
        ``(n_f,)`` complex, in :attr:`FrequencyEngine.unit` (V/V for a voltage
        source and a voltage probe).
    """
    return FrequencyEngine.transfer(circuit, source).response(frequencies)[0]


def impedance(circuit: Circuit, plus: str, minus: str, frequencies: ArrayLike) -> np.ndarray:
    """The impedance between nodes ``plus`` and ``minus`` at ``frequencies`` (Hz).

    Parameters
    ----------
    circuit
        The circuit; its sources are zero (voltage sources shorts, current sources
        open).
    plus, minus
        The two nodes.
    frequencies
        Hz, finite and >= 0.

    Returns
    -------
    numpy.ndarray
        ``(n_f,)`` complex ohms.
    """
    return FrequencyEngine.impedance(circuit, plus, minus).response(frequencies)[0]
