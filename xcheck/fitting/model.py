"""What a fit drives: one candidate's circuit on the exact engine, by its free values.

:class:`CandidateModel` builds the candidate's circuit once, with every free value
present (a free value that starts at zero would leave its element out), and from then
on only changes element values in the exact engine's batch
(:class:`~xcheck.engines.exact.ExactEngine`): no networkx, no rebuilding, any linear
fixture. An element belongs to the free value whose key is its ``(part, role)``.

Some element values are not free values themselves but follow from them (the initial
voltage of a capacitance across a part carrying the loop's initial current through a
fitted resistance): when a second build with other free values shows such a
dependence, the model rebuilds the circuit at every evaluation instead (slower, same
answers).
"""

from __future__ import annotations

import numpy as np

from xcheck.circuit.expand import build_circuit
from xcheck.circuit.model import Circuit
from xcheck.circuit.parameters import ParameterSet
from xcheck.engines.exact import ExactEngine, dominant_ring, turning_points
from xcheck.fitting.candidates import Candidate, FreeParameter
from xcheck.fixture.model import Fixture


def _placeholder(free: FreeParameter) -> float:
    """A non-zero value inside the free value's bounds, so that its element exists."""
    if free.start:
        return float(free.start)
    for guess in (0.5 * (free.lower + free.upper), 0.5 * free.upper, 1.0):
        if np.isfinite(guess) and guess > 0:
            return float(guess)
    return 1.0


class CandidateModel:
    """The exact engine for one candidate's free values, counting its evaluations.

    Parameters
    ----------
    fixture, candidate
        Where the circuit comes from.
    free
        The values the fit moves, in the order of the fit's vector.
    """

    def __init__(self, fixture: Fixture, candidate: Candidate,
                 free: tuple[FreeParameter, ...]) -> None:
        self.fixture = fixture
        self.response = fixture.response
        self.candidate = candidate
        self.free = free
        self.evaluations = 0
        #: Fixed values changed for a sensitivity (key -> SI value); see :meth:`nudged`.
        self.overrides: dict[tuple[str, str], float] = {}
        base = np.array([_placeholder(f) for f in free], float)
        circuit = self.circuit(base)
        self.engine = ExactEngine(circuit)
        self._columns = [
            [k for k, e in enumerate(self.engine.topology.elements) if (e.part, e.role) == f.key]
            for f in free
        ]
        self._values, self._initials = self.engine.defaults(1)
        self.rebuilds = not self._same_wiring(circuit, self.circuit(base * 1.37 + 1e-30))

    def parameters(self, physical: np.ndarray) -> ParameterSet:
        """The candidate's parameter set with ``physical`` free values."""
        base = self.candidate.parameters
        if self.overrides:
            base = base.with_values(dict(self.overrides), "nudged for a sensitivity")
        return base.with_values(
            {f.key: float(v) for f, v in zip(self.free, physical)}
        )

    def nudged(self, key: tuple[str, str], value: float) -> "CandidateModel":
        """This model with the fixed value ``key`` set to ``value`` (SI), for a
        sensitivity; returns self, so ``model.nudged(k, v)`` then ``model.shape(...)``.
        :meth:`restore` undoes it."""
        self.overrides = {key: float(value)}
        return self

    def restore(self) -> None:
        """Undo :meth:`nudged`."""
        self.overrides = {}

    def _fixed_values(self) -> np.ndarray:
        """The engine's default values with the overrides applied."""
        values = self._values.copy()
        for key, value in self.overrides.items():
            cols = [k for k, e in enumerate(self.engine.topology.elements) if (e.part, e.role) == key]
            values[0, cols] = value
        return values

    def circuit(self, physical: np.ndarray) -> Circuit:
        """The candidate's circuit with ``physical`` free values."""
        return build_circuit(self.fixture, self.parameters(physical))

    def _same_wiring(self, first: Circuit, second: Circuit) -> bool:
        """True when only the free values' elements differ between two builds."""
        owned = {k for cols in self._columns for k in cols}
        if len(first.elements) != len(second.elements):
            return False
        for k, (a, b) in enumerate(zip(first.elements, second.elements)):
            if (a.name, a.nodes, a.initial) != (b.name, b.nodes, b.initial):
                return False
            if k not in owned and a.value != b.value:
                return False
        return True

    def _batch(self, physical: np.ndarray) -> tuple[ExactEngine, object]:
        """The engine and its state-space model for one set of free values."""
        self.evaluations += 1
        if self.rebuilds:
            engine = ExactEngine(self.circuit(physical))
            return engine, engine.model()
        values = self._fixed_values()
        for cols, value in zip(self._columns, physical):
            values[0, cols] = value
        return self.engine, self.engine.model(values, self._initials)

    def shape(self, physical: np.ndarray, times: np.ndarray) -> np.ndarray:
        """Unscaled probed signal at ``times`` (s from the event; earlier times read
        as the event itself)."""
        engine, model = self._batch(physical)
        return engine.signal(np.maximum(times, 0.0), model)[0]

    def shapes(self, physicals: np.ndarray, times: np.ndarray) -> np.ndarray:
        """``(batch, len(times))`` unscaled probed signals for a batch of free values
        (``(batch, n_free)``), in one call of the exact engine."""
        physicals = np.atleast_2d(np.asarray(physicals, dtype=float))
        times = np.maximum(times, 0.0)
        self.evaluations += physicals.shape[0]
        if self.rebuilds:
            return np.stack([ExactEngine(self.circuit(p)).response(times)[0] for p in physicals])
        values = np.repeat(self._fixed_values(), physicals.shape[0], axis=0)
        for k, cols in enumerate(self._columns):
            values[:, cols] = physicals[:, k:k + 1]
        initials = np.repeat(self._initials, physicals.shape[0], axis=0)
        return self.engine.response(times, values, initials)

    def extrema(self, physical: np.ndarray, count: int) -> tuple[np.ndarray, np.ndarray]:
        """Times (from the event) and values of the first ``count`` turning points of
        the dominant ring, the event itself being turning point 0."""
        engine, model = self._batch(physical)
        return turning_points(engine, model, count, self.response)

    def ring(self, physical: np.ndarray) -> tuple[float, float] | None:
        """(omega_d in rad/s, alpha in 1/s) of the dominant ringing mode, or None."""
        engine, model = self._batch(physical)
        return dominant_ring(engine, model)
