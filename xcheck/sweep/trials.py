"""Monte Carlo trials: what one worker computes for a run of fixed-size chunks.

A :class:`TrialPlan` is everything a worker needs for one candidate, all of it
picklable: the candidate's circuit at its stated values, the element columns each
varied value scales (every variation is a factor, :mod:`xcheck.sweep.tolerances`), how
the initial conditions move with those factors, the time grid and the distribution.
:func:`run_chunks` (a module-level function, so any executor can ship it) evaluates a
:class:`ChunkTask`: for each chunk it draws that chunk's factors from its own seed,
``numpy.random.SeedSequence(seed, spawn_key=(stream, chunk))``, which is the child
``SeedSequence(seed).spawn(...)[stream].spawn(...)[chunk]``, and evaluates them alone.
A chunk's numbers therefore depend only on the seed, the candidate's stream and the
chunk's index, never on which worker ran it or which chunks shared its task.

The initial conditions are affine in the varied values (an initial voltage across a
part is the loop's initial current times its resistances plus its capacitors' initial
voltages, :mod:`xcheck.circuit.layout`), so the plan stores their change per unit
factor and checks the affine prediction against a rebuilt circuit once, when it is made
(:func:`build_plan`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from xcheck.circuit.expand import build_circuit
from xcheck.circuit.model import Circuit
from xcheck.engines.exact import ExactEngine, turning_points
from xcheck.engines.statespace import BatchModel
from xcheck.errors import SimulationError, XcheckError
from xcheck.fitting.candidates import Candidate
from xcheck.fixture.model import Fixture
from xcheck.sweep.tolerances import ToleranceModel, tolerance_model

#: Trials in one chunk (one call of the exact engine).
CHUNK_TRIALS = 1000
#: The waveform band is taken from the first this many trials (their curves are kept).
BAND_TRIALS = 10_000
#: Points of the measurement's time grid the band is drawn on (evenly picked).
BAND_POINTS = 2000
#: Largest relative disagreement tolerated between the plan's affine prediction of a
#: varied circuit and the circuit rebuilt with the same values.
PLAN_CHECK = 1e-9


@dataclass(frozen=True)
class TrialPlan:
    """One candidate's trials, ready for a worker.

    Attributes
    ----------
    candidate
        The candidate's name.
    stream
        Its index in the seed tree (the first spawn key).
    circuit
        The circuit at the stated values.
    model
        The varied values and their correlation.
    columns
        Per varied value, the element columns (indices into ``circuit.elements``) its
        factor scales.
    initial_slopes
        ``(k, n_elements)``: change of each element's initial condition per unit change
        of each factor.
    times
        Where the curves are evaluated (s from the event).
    turning
        For a peak table: the turning-point number of each reading (the curve is then
        the turning points' values); None otherwise.
    engine
        ``"exact"`` or ``"ngspice"``.
    """

    candidate: str
    stream: int
    circuit: Circuit
    model: ToleranceModel
    columns: tuple[tuple[int, ...], ...]
    initial_slopes: np.ndarray
    times: np.ndarray
    turning: np.ndarray | None = None
    engine: str = "exact"

    def element_values(self, factors: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``(n, n_elements)`` element values and initial conditions for ``factors``
        (``(n, k)``)."""
        factors = np.atleast_2d(np.asarray(factors, dtype=float))
        base = np.array([e.value for e in self.circuit.elements], dtype=float)
        start = np.array([e.initial or 0.0 for e in self.circuit.elements], dtype=float)
        values = np.repeat(base[None, :], factors.shape[0], axis=0)
        for k, cols in enumerate(self.columns):
            values[:, list(cols)] *= factors[:, k:k + 1]
        initials = start[None, :] + (factors - 1.0) @ self.initial_slopes
        return values, initials


@dataclass(frozen=True)
class ChunkTask:
    """Chunks of one plan for one worker: ``(chunk index, trials)`` pairs."""

    plan: TrialPlan
    seed: int
    chunks: tuple[tuple[int, int], ...]


@dataclass(frozen=True)
class ChunkResult:
    """One chunk's trials: damped frequency (Hz) and neper frequency (1/s) of the
    dominant ring (nan where no mode rings), and the curves when the chunk is among
    the band's (``(n, len(times))`` float32, else None)."""

    index: int
    frequency: np.ndarray
    alpha: np.ndarray
    curves: np.ndarray | None = None


def chunk_seed(seed: int, stream: int, index: int) -> np.random.SeedSequence:
    """The seed of chunk ``index`` of stream ``stream`` (see the module docstring)."""
    return np.random.SeedSequence(seed, spawn_key=(stream, index))


def band_chunk(index: int) -> bool:
    """True when chunk ``index`` is among the band's trials."""
    return index * CHUNK_TRIALS < BAND_TRIALS


def build_plan(fixture: Fixture, candidate: Candidate, stream: int, times: np.ndarray,
               turning: np.ndarray | None = None, engine: str = "exact") -> TrialPlan:
    """The :class:`TrialPlan` of one candidate.

    Raises
    ------
    XcheckError
        When the candidate cannot be built, or a varied value changes the circuit in a
        way a factor on its elements does not describe (never seen; the message says so).
    """
    model = tolerance_model(fixture, candidate.parameters)
    circuit = build_circuit(fixture, candidate.parameters)
    base = np.array([e.value for e in circuit.elements], dtype=float)
    start = np.array([e.initial or 0.0 for e in circuit.elements], dtype=float)
    columns = []
    slopes = np.zeros((model.size, base.size))
    for k, item in enumerate(model.varied):
        columns.append(tuple(i for i, e in enumerate(circuit.elements)
                             if (e.part, e.role) == item.key))
        values, initials = _rebuilt(fixture, candidate, {item.key: 2.0 * item.value}, circuit)
        slopes[k] = initials - start
    plan = TrialPlan(candidate.name, stream, circuit, model, tuple(columns), slopes,
                     np.asarray(times, dtype=float),
                     None if turning is None else np.asarray(turning, dtype=int), engine)
    trial = np.full((1, model.size), 1.37)
    values, initials = _rebuilt(fixture, candidate,
                                {v.key: 1.37 * v.value for v in model.varied}, circuit)
    want_values, want_initials = plan.element_values(trial)
    scale = np.maximum(np.abs(values), 1e-300)
    moved = np.max(np.abs(want_values[0] - values) / scale, initial=0.0)
    reference = max(float(np.max(np.abs(initials), initial=0.0)), 1e-300)
    drift = np.max(np.abs(want_initials[0] - initials), initial=0.0) / reference
    if moved > PLAN_CHECK or drift > PLAN_CHECK:
        raise XcheckError(
            f"candidate {candidate.name}: varying {', '.join(v.label for v in model.varied)} "
            "changes the circuit in a way a factor on their elements does not describe, so "
            "the sweep cannot vary them; please report this fixture")
    return plan


def _rebuilt(fixture: Fixture, candidate: Candidate, updates: dict,
             reference: Circuit) -> tuple[np.ndarray, np.ndarray]:
    """Element values and initial conditions of the candidate rebuilt with ``updates``,
    checked to have the same elements as ``reference``."""
    circuit = build_circuit(fixture, candidate.parameters.with_values(updates, "sweep"))
    if [e.name for e in circuit.elements] != [e.name for e in reference.elements]:
        raise XcheckError(
            f"candidate {candidate.name}: varying {', '.join(map(str, updates))} changes the "
            "circuit's elements, so the sweep cannot vary it; please report this fixture")
    return (np.array([e.value for e in circuit.elements], dtype=float),
            np.array([e.initial or 0.0 for e in circuit.elements], dtype=float))


def batched_ring(engine: ExactEngine, model: BatchModel) -> tuple[np.ndarray, np.ndarray]:
    """``(omega_d, alpha)`` arrays (rad/s, 1/s) of each row's dominant ringing mode,
    nan where no mode rings: :func:`xcheck.engines.exact.dominant_ring` for every row
    of a batch (the same weights: each mode's share of the probed signal at t = 0+)."""
    n_batch = model.a.shape[0]
    if model.a.shape[1] == 0:
        return np.full(n_batch, np.nan), np.full(n_batch, np.nan)
    lam, vec = np.linalg.eig(model.a)
    lam, vec = lam.astype(complex), vec.astype(complex)
    out_map = engine.output_map(model)
    drive = model.b @ (model.u * engine.schedule.on[0])[..., None]
    with np.errstate(all="ignore"):
        inverse = np.linalg.pinv(vec)
        z0 = (inverse @ model.x0.astype(complex)[..., None])[..., 0]
        w0 = (inverse @ drive.astype(complex))[..., 0]
        reach = np.abs(np.einsum("bx,bxk->bk", out_map.x_coef.astype(complex), vec))
        weight = reach * np.abs(z0 + np.where(lam != 0, w0 / np.where(lam == 0, 1, lam), 0))
    ringing = np.abs(lam.imag) > 1e-9 * np.abs(lam)
    weight = np.where(ringing & np.isfinite(weight), weight, -1.0)
    best = np.argmax(weight, axis=1)
    chosen = lam[np.arange(n_batch), best]
    rings = np.any(ringing, axis=1)
    return (np.where(rings, np.abs(chosen.imag), np.nan),
            np.where(rings, -chosen.real, np.nan))


def evaluate_exact(plan: TrialPlan, engine: ExactEngine, factors: np.ndarray,
                   curves: bool = True) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """Frequency (Hz), alpha (1/s) and, when asked, curves of a batch of factors on the
    exact engine."""
    values, initials = plan.element_values(factors)
    model = engine.model(values, initials)
    omega, alpha = batched_ring(engine, model)
    out = None
    if curves:
        if plan.turning is None:
            out = engine.signal(np.maximum(plan.times, 0.0), model)
        else:
            out = _turning_values(plan, engine, values, initials, omega)
    return omega / (2 * math.pi), alpha, out


def _turning_values(plan: TrialPlan, engine: ExactEngine, values: np.ndarray,
                    initials: np.ndarray, omega: np.ndarray) -> np.ndarray:
    """Each row's turning-point values at the readings' numbers (nan where it does not
    ring)."""
    assert plan.turning is not None
    count = int(plan.turning.max()) + 1
    out = np.full((values.shape[0], plan.turning.size), np.nan)
    for row in range(values.shape[0]):
        if not np.isfinite(omega[row]):
            continue
        model = engine.model(values[row:row + 1], initials[row:row + 1])
        try:
            _, points = turning_points(engine, model, count, plan.circuit.response)
        except SimulationError:
            continue
        out[row] = points[plan.turning]
    return out


def run_chunks(task: ChunkTask) -> list[ChunkResult]:
    """Evaluate every chunk of ``task`` (see the module docstring); runs in a worker."""
    plan = task.plan
    engine = ExactEngine(plan.circuit)
    results = []
    for index, count in task.chunks:
        rng = np.random.default_rng(chunk_seed(task.seed, plan.stream, index))
        factors = plan.model.draw(rng, count)
        keep = band_chunk(index)
        if plan.engine == "ngspice":
            frequency, alpha, curves = evaluate_ngspice(plan, engine, factors, keep)
        else:
            frequency, alpha, curves = evaluate_exact(plan, engine, factors, keep)
        results.append(ChunkResult(index, frequency, alpha,
                                   None if curves is None else curves.astype(np.float32)))
    return results


def evaluate_ngspice(plan: TrialPlan, engine: ExactEngine, factors: np.ndarray,
                     curves: bool = True) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """As :func:`evaluate_exact`, each trial one ngspice run: the curve from ngspice's
    waveform (linear interpolation, or its turning points near the exact engine's for
    a peak table), f_d and alpha estimated from it as a measurement would be."""
    from xcheck.engines.ngspice import simulate_ngspice
    from xcheck.ringdown.extrema import extrema_near

    values, initials = plan.element_values(factors)
    omega, _ = batched_ring(engine, engine.model(values, initials))
    n = values.shape[0]
    width = plan.times.size if plan.turning is None else plan.turning.size
    frequency, alpha = np.full(n, np.nan), np.full(n, np.nan)
    out = np.full((n, width), np.nan)
    for row in range(n):
        circuit = _circuit_with(plan.circuit, values[row], initials[row])
        if plan.turning is None:
            stop = float(np.max(plan.times)) * 1.0001
        elif np.isfinite(omega[row]):
            stop = (int(plan.turning.max()) + 1.5) * math.pi / omega[row]
        else:
            continue
        wave = simulate_ngspice(circuit, stop_time=stop)
        frequency[row], alpha[row] = _estimated_ring(wave.time, wave.probe_voltage, stop)
        if plan.turning is None:
            out[row] = wave.at(np.maximum(plan.times, 0.0))
        else:
            half = math.pi / omega[row]
            targets = np.arange(int(plan.turning.max()) + 1) * half
            level = 0.0
            if circuit.response == "step":
                level = float(wave.probe_voltage[-1])
            _, points = extrema_near(wave.time, wave.probe_voltage, targets, half / 4, level)
            if plan.turning.min() == 0:
                points[0] = float(wave.probe_voltage[0])
            out[row] = points[plan.turning]
    return frequency, alpha, out if curves else None


def _circuit_with(circuit: Circuit, values: np.ndarray, initials: np.ndarray) -> Circuit:
    """``circuit`` with its elements' values and (where they hold one) initials."""
    elements = tuple(
        replace(e, value=float(v), initial=(e.initial if e.initial is None and i == 0
                                            else float(i)))
        for e, v, i in zip(circuit.elements, values, initials))
    return replace(circuit, elements=elements)


def _estimated_ring(time: np.ndarray, volts: np.ndarray, stop: float) -> tuple[float, float]:
    """f_d (Hz) and alpha (1/s) estimated from a noise-free waveform resampled on a
    uniform grid (nan when it does not ring)."""
    from xcheck.ringdown import estimate_ringdown

    grid = np.linspace(0.0, stop, 4001)
    curve = np.interp(grid, time, volts)
    amplitude = float(np.max(np.abs(curve - np.mean(curve)))) or 1.0
    try:
        est = estimate_ringdown(grid, curve, noise_sigma=1e-6 * amplitude)
    except (XcheckError, ValueError, np.linalg.LinAlgError):
        return float("nan"), float("nan")
    return est.damped_frequency.value, est.neper_frequency.value
