"""The exact engine: a linear circuit's response from its state space, for many value
sets at once.

For t >= 0 every source is piecewise constant (on from ``t_on``, off from ``t_off``,
see :class:`~xcheck.circuit.model.Element`), so the state is, exactly,

    x(t) = e^{A t} x0 + sum_j phi(t - tau_j) B du_j,    phi(s) = int_0^s e^{A r} dr,

with ``du_j`` the change of the source vector at switching time ``tau_j`` (the sources'
values at t = 0+ count as the change at tau_0 = 0). Written on the eigenvectors
``A = V diag(lambda) V^-1`` this is a sum of exponentials, ``phi`` becoming
``expm1(lambda s) / lambda`` (``s`` where lambda = 0), evaluated for a whole batch of
A matrices with numpy's stacked ``eig``. Where the eigenvectors are ill-conditioned
(near-repeated roots, critical damping) a value set is integrated instead with the
matrix exponential of the augmented matrix ``[[A, B u], [0, 0]]`` (``scipy.linalg.expm``),
stepped from time point to time point, which stays exact at repeated roots.

:class:`ExactEngine` holds one wiring (analysed once with networkx) and evaluates any
batch of element values on it: this is what the fit and the benchmarks drive.
:func:`simulate_exact` is the one-circuit view, a :class:`~xcheck.engines.waveform.Waveform`
like the other engines return.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg

from xcheck.circuit.model import Circuit, Element
from xcheck.engines.statespace import (
    BatchModel,
    LinearMap,
    Topology,
    _check_values,
    assemble,
    circuit_topology,
    element_values,
)
from xcheck.engines.waveform import Waveform
from xcheck.errors import SimulationError

#: Largest condition number of a value set's eigenvector matrix for the modal sum; the
#: sum's rounding error is about this times the machine epsilon (1e6 * 2.2e-16 ~ 2e-10
#: of the response), beyond it the matrix exponential takes over.
MODAL_CONDITION_LIMIT = 1e6
#: Largest batch evaluated in one piece (bounds the (batch, time, state) arrays).
CHUNK_ELEMENTS = 4_000_000


@dataclass(frozen=True)
class Schedule:
    """When the sources switch: times ``tau_j`` (s) and the on/off pattern after each.

    Attributes
    ----------
    times
        Switching times, the first 0 (t = 0+), strictly increasing.
    on
        ``(len(times), n_inputs)``: 1 where an input is on after that time, else 0.
    """

    times: np.ndarray
    on: np.ndarray

    def pattern_at(self, times: np.ndarray) -> np.ndarray:
        """``(len(times), n_inputs)`` on/off pattern at each time (s)."""
        index = np.searchsorted(self.times, times, side="right") - 1
        return self.on[np.clip(index, 0, None)]


def source_schedule(top: Topology) -> Schedule:
    """The switching times of the circuit's sources and which are on after each."""
    inputs = [top.elements[i] for i in top.inputs]
    taus = {0.0}
    for element in inputs:
        if element.timing in ("step", "pulse") and element.t_on > 0:
            taus.add(float(element.t_on))
        if element.timing == "pulse" and element.t_off is not None:
            taus.add(float(element.t_off))
    times = np.array(sorted(taus))
    on = np.array([[1.0 if _is_on(e, t) else 0.0 for e in inputs] for t in times])
    on = on.reshape(times.size, len(inputs))
    return Schedule(times, on)


def _is_on(element: Element, time: float) -> bool:
    """True when ``element`` (a source) holds its value just after ``time``."""
    if element.timing == "dc":
        return True
    if time < element.t_on:
        return False
    return element.t_off is None or time < element.t_off


class ExactEngine:
    """One circuit's wiring, evaluated exactly for any batch of element values.

    Parameters
    ----------
    circuit
        The circuit; its element values are the defaults of every batch row.

    Raises
    ------
    SimulationError
        When the circuit has no unique solution (see
        :func:`~xcheck.engines.statespace.circuit_topology`).
    """

    def __init__(self, circuit: Circuit) -> None:
        _check_values(circuit)
        self.circuit = circuit
        self.topology = circuit_topology(circuit)
        self.schedule = source_schedule(self.topology)
        self.names = tuple(e.name for e in self.topology.elements)
        self._index = {name: k for k, name in enumerate(self.names)}
        self._cached_modes: tuple[BatchModel, _Modes] | None = None

    def index_of(self, name: str) -> int:
        """Column of element ``name`` in a batch of values."""
        return self._index[name]

    def defaults(self, batch: int = 1) -> tuple[np.ndarray, np.ndarray]:
        """``(batch, n_elements)`` default values and initial conditions."""
        return element_values(self.topology, batch)

    def model(self, values: np.ndarray | None = None,
              initials: np.ndarray | None = None) -> BatchModel:
        """The batch's state-space matrices (defaults where an argument is None)."""
        batch = 1 if values is None else np.atleast_2d(values).shape[0]
        default_values, default_initials = self.defaults(batch)
        values = default_values if values is None else np.atleast_2d(values)
        initials = default_initials if initials is None else np.atleast_2d(initials)
        return assemble(self.topology, values, initials, self.circuit.starts_settled)

    def output_map(self, model: BatchModel, signal: str = "probe") -> LinearMap:
        """The batched map of ``signal``: ``"probe"`` (the probed voltage or current)
        or ``"loop_current"`` (the current-sense source's current)."""
        circuit = self.circuit
        if signal == "loop_current":
            if circuit.current_sense is None:
                raise SimulationError("this circuit has no current sense")
            return model.current[self.index_of(circuit.current_sense)]
        if circuit.probe_current is not None:
            return model.current[self.index_of(circuit.probe_current)]
        plus, minus = circuit.probe
        for node in (plus, minus):
            if node not in model.node_voltage:
                raise SimulationError(f"node {node!r} is not part of the circuit")
        return model.node_voltage[plus] + (-model.node_voltage[minus])

    def states(self, times: np.ndarray, model: BatchModel) -> np.ndarray:
        """``(batch, len(times), n_states)`` exact states at ``times`` (s, >= 0)."""
        n_batch, n_x = model.x0.shape
        identity = np.broadcast_to(np.eye(n_x), (n_batch, n_x, n_x))
        return self._projected(times, model, identity)

    def _projected(self, times: np.ndarray, model: BatchModel,
                   project: np.ndarray) -> np.ndarray:
        """``(batch, len(times), q)``: the states at ``times`` times ``project``
        (``(batch, n_states, q)``), without forming the states where the modal sum
        applies."""
        times = np.asarray(times, dtype=float)
        if np.any(times < 0) or not np.all(np.isfinite(times)):
            raise SimulationError("the exact engine evaluates finite times t >= 0 only")
        n_batch, n_x = model.x0.shape
        out = np.zeros((n_batch, times.size, project.shape[-1]))
        if n_x == 0:
            return out
        modes = self._modes(model)
        rows = np.flatnonzero(modes.good)
        step = max(1, CHUNK_ELEMENTS // max(1, times.size * n_x))
        for start in range(0, rows.size, step):
            chunk = rows[start:start + step]
            out[chunk] = _modal_sum(times, modes, chunk, project[chunk])
        for row in np.flatnonzero(~modes.good):
            out[row] = self._stepped(times, model, row) @ project[row]
        return out

    def _modes(self, model: BatchModel) -> "_Modes":
        """The modal decomposition of ``model`` (kept for the last model asked, which a
        fit asks again for each derivative and turning point)."""
        cached = self._cached_modes
        if cached is not None and cached[0] is model:
            return cached[1]
        modes = _decompose(model, self.schedule, len(self.topology.inputs))
        self._cached_modes = (model, modes)
        return modes

    def _stepped(self, times: np.ndarray, model: BatchModel, row: int) -> np.ndarray:
        """Matrix-exponential stepping for one ill-conditioned value set."""
        a, b, u = model.a[row], model.b[row], model.u[row]
        n_x = a.shape[0]
        order = np.argsort(times, kind="stable")
        taus = self.schedule.times
        cache: dict[tuple[int, float], np.ndarray] = {}

        def propagator(segment: int, span: float) -> np.ndarray:
            key = (segment, float(f"{span:.13e}"))
            if key not in cache:
                augmented = np.zeros((n_x + 1, n_x + 1))
                augmented[:n_x, :n_x] = a
                augmented[:n_x, n_x] = b @ (u * self.schedule.on[segment])
                cache[key] = scipy.linalg.expm(augmented * span)
            return cache[key]

        state = np.append(model.x0[row], 1.0)
        now, segment = 0.0, 0
        out = np.empty((times.size, n_x))
        for k in order:
            target = times[k]
            while segment + 1 < taus.size and taus[segment + 1] <= target:
                state = propagator(segment, taus[segment + 1] - now) @ state
                now, segment = taus[segment + 1], segment + 1
            if target > now:
                state = propagator(segment, target - now) @ state
                now = target
            out[k] = state[:n_x]
        return out

    def inputs_at(self, times: np.ndarray, model: BatchModel) -> np.ndarray:
        """``(batch, len(times), n_inputs)`` source values at ``times``."""
        pattern = self.schedule.pattern_at(np.asarray(times, dtype=float))
        return model.u[:, None, :] * pattern[None, :, :]

    def signal(self, times: np.ndarray, model: BatchModel, signal: str = "probe",
               derivative: int = 0) -> np.ndarray:
        """``(batch, len(times))`` exact ``signal`` (see :meth:`output_map`) or its
        ``derivative``-th time derivative (sources constant between switching times).
        """
        return self.signals(times, model, signal, (derivative,))[..., 0]

    def signals(self, times: np.ndarray, model: BatchModel, signal: str = "probe",
                derivatives: tuple[int, ...] = (0,)) -> np.ndarray:
        """``(batch, len(times), len(derivatives))``: ``signal`` and its time
        derivatives of the given orders, from one modal evaluation."""
        out_map = self.output_map(model, signal)
        row, u_row = out_map.x_coef, out_map.u_coef  # y = row x + u_row u
        rows, u_rows = [], []
        for order in range(max(derivatives) + 1):
            if order in derivatives:
                rows.append(row)
                u_rows.append(u_row)
            # d/dt (r x + q u) = r A x + r B u between switching times (u constant).
            row, u_row = np.einsum("bx,bxj->bj", row, model.a), np.einsum("bx,bxu->bu", row, model.b)
        order_index = sorted(derivatives)
        project = np.stack(rows, axis=2)  # (batch, n, q) in increasing order
        values = self._projected(times, model, project)
        # The sources' direct part: one number per value set and switching segment.
        times = np.asarray(times, dtype=float)
        segment = np.clip(np.searchsorted(self.schedule.times, times, side="right") - 1, 0, None)
        for q, u_q in enumerate(u_rows):
            direct = (u_q * model.u) @ self.schedule.on.T  # (batch, segments)
            values[:, :, q] += direct[:, segment]
        return values[:, :, [order_index.index(d) for d in derivatives]]

    def response(self, times: np.ndarray, values: np.ndarray | None = None,
                 initials: np.ndarray | None = None, signal: str = "probe") -> np.ndarray:
        """``(batch, len(times))`` probed signal for a batch of element values.

        Parameters
        ----------
        times
            Seconds from the event, >= 0, any order.
        values, initials
            ``(batch, n_elements)`` element values and initial conditions in the
            column order of :attr:`names`; the circuit's own where None.
        signal
            ``"probe"`` or ``"loop_current"``.
        """
        return self.signal(times, self.model(values, initials), signal)

    def poles(self, values: np.ndarray | None = None) -> np.ndarray:
        """``(batch, n_states)`` natural frequencies (1/s)."""
        return np.linalg.eigvals(self.model(values).a)


@dataclass(frozen=True)
class _Modes:
    """A batch's modal decomposition, one member of each conjugate pair kept.

    ``lam`` (batch, k) roots; ``vec`` (batch, n, k) their eigenvectors; ``factor``
    (batch, k) 2 for a pair, 1 for a real root, 0 for padding; ``good`` (batch,) rows
    whose eigenvectors are well conditioned; ``coefficient``, ``constant``, ``ramp``
    (batch, k) the response's terms e^{lam t}, 1 and t from t = 0 on; ``later`` the
    (switching time, weight) of each later source change.
    """

    lam: np.ndarray
    vec: np.ndarray
    factor: np.ndarray
    good: np.ndarray
    coefficient: np.ndarray
    constant: np.ndarray
    ramp: np.ndarray
    later: tuple[tuple[float, np.ndarray], ...]


def _decompose(model: BatchModel, schedule: Schedule, n_inputs: int) -> _Modes:
    """Eigen-decompose every row of ``model`` and express its response on the modes."""
    lam, vec = np.linalg.eig(model.a)
    lam, vec = lam.astype(complex), vec.astype(complex)  # real when nothing rings
    with np.errstate(all="ignore"):
        condition = np.linalg.cond(vec)
    good = np.isfinite(condition) & (condition < MODAL_CONDITION_LIMIT)
    # Solve only with the good rows' eigenvectors (the others are stepped instead).
    safe_vec = np.where(good[:, None, None], vec, np.eye(vec.shape[1]))
    solve = np.linalg.solve
    coefficient = solve(safe_vec, model.x0.astype(complex)[..., None])[..., 0]
    # For lambda != 0, phi(s) w = (e^{lambda s} - 1) w / lambda: the switch-on at t = 0
    # folds into the coefficient of e^{lambda t}, a constant remains; a zero root (a
    # node floating between capacitors) integrates to s w instead.
    constant = np.zeros_like(coefficient)
    ramp = np.zeros_like(coefficient)
    zero = lam == 0
    safe = np.where(zero, 1.0, lam)
    later = []
    previous = np.zeros(n_inputs)
    for tau, pattern in zip(schedule.times, schedule.on):
        change, previous = pattern - previous, pattern
        if not np.any(change):
            continue
        du = model.u * change
        w = solve(safe_vec, (model.b @ du[..., None]).astype(complex))[..., 0]
        if tau == 0:
            coefficient = coefficient + np.where(zero, 0.0, w / safe)
            constant = constant - np.where(zero, 0.0, w / safe)
            ramp = ramp + np.where(zero, w, 0.0)
        else:
            later.append((float(tau), w))
    # One member of each conjugate pair: the states are real, so a pair contributes
    # twice the real part of one member.
    keep, factor = _one_per_pair(lam)

    def kept(x: np.ndarray) -> np.ndarray:
        return np.take_along_axis(x, keep, 1)

    return _Modes(kept(lam), np.take_along_axis(vec, keep[:, None, :], 2), factor, good,
                  kept(coefficient), kept(constant), kept(ramp),
                  tuple((tau, kept(w)) for tau, w in later))


def _modal_sum(times: np.ndarray, modes: _Modes, rows: np.ndarray,
               project: np.ndarray) -> np.ndarray:
    """``(len(rows), len(times), q)``: the modal sum projected by ``project``."""
    lam = modes.lam[rows]
    weight = np.einsum("bjk,bjq->bqk", modes.vec[rows], project.astype(complex))
    weight = weight * modes.factor[rows][:, None, :]

    def weighted(x: np.ndarray) -> np.ndarray:
        return x[rows][:, None, :] * weight  # (batch, q, k)

    # Re(g e^{lambda t}) summed over modes (see _oscillations), and the constant and
    # ramp terms summed over the modes once.
    out = _oscillations(lam, weighted(modes.coefficient), times)
    out += np.real(np.sum(weighted(modes.constant), axis=2))[:, None, :]
    ramp = modes.ramp[rows]
    if np.any(ramp):
        out += np.real(np.sum(weighted(modes.ramp), axis=2))[:, None, :] * times[None, :, None]
    zero = lam == 0
    safe = np.where(zero, 1.0, lam)
    for tau, w_all in modes.later:
        w = w_all[rows]
        s = np.clip(times - tau, 0.0, None)
        # phi(s) w = (e^{lambda s} - 1) w / lambda, or s w at a zero root.
        h = np.where(zero, 0.0, w / safe)[:, None, :] * weight
        out += _oscillations(lam, h, s) - np.real(np.sum(h, axis=2))[:, None, :]
        ramp_w = np.where(zero, w, 0.0)
        if np.any(ramp_w):
            out += np.real(np.sum(ramp_w[:, None, :] * weight, axis=2))[:, None, :] * s[None, :, None]
    return out


def _oscillations(lam: np.ndarray, gain: np.ndarray, times: np.ndarray) -> np.ndarray:
    """``(batch, len(times), q)``: sum over modes k of Re(gain[b, q, k] e^{lam[b, k] t}).

    On a uniform grid t_n = t_0 + n dt (a scope's sampling, perhaps with leading points
    clipped to the same first time) n is split as i m + j with m ~ sqrt(N), so
    e^{lam n dt} = e^{lam (t_0 + i m dt)} e^{lam j dt}: about 2 sqrt(N) exponentials, and
    the sum over modes becomes one small matrix product per output (each entry within a
    few roundings of the direct sum). Elsewhere every entry is exponentiated directly.
    """
    t = np.asarray(times, dtype=float)
    n_batch, n_out = lam.shape[0], gain.shape[1]
    grid = _uniform_grid(t)
    if grid is None:
        powers = np.exp(lam[:, None, :] * t[None, :, None])
        return (np.matmul(powers.real, np.swapaxes(gain.real, 1, 2))
                - np.matmul(powers.imag, np.swapaxes(gain.imag, 1, 2)))
    lead, start, dt, size = grid
    m = int(math.ceil(math.sqrt(size)))
    rows = -(-size // m)
    fine = np.exp(lam[:, :, None] * (dt * np.arange(m))[None, None, :])  # (batch, k, m)
    coarse = np.exp(lam[:, None, :] * (start + dt * m * np.arange(rows))[None, :, None])
    out = np.empty((n_batch, size, n_out))
    for q in range(n_out):
        block = np.matmul(coarse * gain[:, q, None, :], fine).real  # (batch, rows, m)
        out[:, :, q] = block.reshape(n_batch, rows * m)[:, :size]
    if lead > 1:
        out = np.concatenate([np.repeat(out[:, :1], lead - 1, axis=1), out], axis=1)
    return out


#: Fewest time points for which the uniform-grid factorisation pays.
_UNIFORM_MIN_POINTS = 64


def _uniform_grid(t: np.ndarray) -> tuple[int, float, float, int] | None:
    """(leading repeats of the first time, first time of the uniform part, spacing,
    its number of points) when ``t`` is a uniform grid after its leading repeats."""
    if t.size < _UNIFORM_MIN_POINTS:
        return None
    lead = int(np.searchsorted(t, t[0], side="right"))
    tail = t[lead - 1:]
    if tail.size < _UNIFORM_MIN_POINTS:
        return None
    dt = (tail[-1] - tail[0]) / (tail.size - 1)
    if not dt > 0:
        return None
    if np.any(np.abs(tail - (tail[0] + dt * np.arange(tail.size))) > 1e-9 * dt):
        return None
    return lead, float(tail[0]), float(dt), int(tail.size)


def _one_per_pair(lam: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Column indices that keep one member of each conjugate pair (and every real
    root), and the factor each kept column counts with (2 for a pair, else 1).

    Rows may differ in how many roots are complex; every row keeps the same number of
    columns, padded with dropped members at factor 0.
    """
    upper = lam.imag > 0
    lower = lam.imag < 0
    rank = np.where(upper, 0, np.where(lower, 2, 1))
    order = np.argsort(rank, axis=1, kind="stable")
    count = lam.shape[1] - int(np.min(np.sum(lower, axis=1)))
    keep = order[:, :count]
    kept_rank = np.take_along_axis(rank, keep, 1)
    factor = np.where(kept_rank == 0, 2.0, np.where(kept_rank == 1, 1.0, 0.0))
    return keep, factor


def _phi(lam: np.ndarray, s: np.ndarray) -> np.ndarray:
    """``expm1(lam s) / lam``, tending to ``s`` as lam -> 0 (element-wise)."""
    product = lam * s
    with np.errstate(all="ignore"):
        ratio = np.expm1(product) / np.where(lam == 0, 1.0, lam)
    small = np.abs(product) < 1e-8
    return np.where(small, s * (1.0 + product / 2.0), ratio)


def simulate_exact(circuit: Circuit, time: np.ndarray) -> Waveform:
    """The exact response of one circuit at ``time`` (s from the event, >= 0).

    Returns
    -------
    Waveform
        Engine ``"exact"``; ``probe_voltage`` holds the probed signal (A for a current
        probe) and ``loop_current`` the current-sense source's current when the circuit
        has one.
    """
    engine = ExactEngine(circuit)
    model = engine.model()
    time = np.asarray(time, dtype=float)
    probe = engine.signal(time, model)[0]
    current = None
    if circuit.current_sense is not None:
        current = engine.signal(time, model, "loop_current")[0]
    return Waveform(time, probe, current, engine="exact")


def dominant_ring(engine: ExactEngine, model: BatchModel) -> tuple[float, float] | None:
    """(omega_d in rad/s, alpha in 1/s) of the ringing mode that carries the most of the
    probed signal in batch row 0, or None when no mode rings."""
    lam, vec = np.linalg.eig(model.a[0])
    lam, vec = lam.astype(complex), vec.astype(complex)
    if lam.size == 0:
        return None
    out_map = engine.output_map(model)
    with np.errstate(all="ignore"):
        z0 = np.linalg.lstsq(vec, model.x0[0].astype(complex), rcond=None)[0]
        w0 = np.linalg.lstsq(vec, (model.b[0] @ (model.u[0] * engine.schedule.on[0])).astype(complex),
                             rcond=None)[0]
        weight = np.abs(out_map.x_coef[0] @ vec) * np.abs(
            z0 + np.where(lam != 0, w0 / np.where(lam == 0, 1, lam), 0))
    ringing = np.abs(lam.imag) > 1e-9 * np.abs(lam)
    if not np.any(ringing):
        return None
    weight = np.where(ringing & np.isfinite(weight), weight, -1.0)
    k = int(np.argmax(weight))
    return float(abs(lam[k].imag)), float(-lam[k].real)


def turning_points(engine: ExactEngine, model: BatchModel, count: int,
                   response: str) -> tuple[np.ndarray, np.ndarray]:
    """Times and values of the probed signal's first ``count`` turning points of its
    dominant ring in batch row 0: turning point 0 is the event itself (t = 0), point
    ``k`` the extremum nearest ``k`` half periods, located exactly (Newton's method on
    the signal's derivative, which the engine gives exactly).

    Raises
    ------
    SimulationError
        When the circuit does not ring.
    """
    ring = dominant_ring(engine, model)
    if ring is None:
        raise SimulationError("this candidate does not ring (no oscillating mode)")
    omega_d, _ = ring
    half = math.pi / omega_d
    samples = 64
    grid = np.linspace(0.0, (count + 0.5) * half, int((count + 0.5) * samples) + 1)
    values = engine.signal(grid, model)[0]
    level = float(values[-1]) if response == "step" else 0.0
    times = np.zeros(count)
    for k in range(1, count):
        centre = k * half
        window = np.abs(grid - centre) <= half / 4
        if not np.any(window):
            continue
        local = np.flatnonzero(window)
        times[k] = grid[local[np.argmax(np.abs(values[local] - level))]]
    # Newton on the derivative from the grid point (spacing half / 64: quadratic
    # convergence from there; four steps take it to rounding).
    inner = times[1:]
    for _ in range(4):
        if inner.size == 0:
            break
        both = engine.signals(inner, model, derivatives=(1, 2))[0]
        slope, curve = both[:, 0], both[:, 1]
        move = np.where(curve != 0, slope / np.where(curve == 0, 1.0, curve), 0.0)
        inner = np.clip(inner - np.clip(move, -half / 8, half / 8), 0.0, None)
    times[1:] = inner
    return times, engine.signal(times, model)[0]
