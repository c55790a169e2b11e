"""Monte Carlo over part tolerances: the spread of the waveform, f_d and alpha.

For each candidate swept (:func:`run_montecarlo`), trials draw every varied value from
its distribution (:mod:`xcheck.sweep.tolerances`) and evaluate the circuit, a chunk of
:data:`~xcheck.sweep.trials.CHUNK_TRIALS` trials at a time on the exact engine (or each
trial in ngspice), in whatever executor is given; chunk ``i`` of candidate ``c`` draws
from ``SeedSequence(seed).spawn(...)[c].spawn(...)[i]``, so the numbers depend on the
seed alone, not on the executor, the number of workers or how chunks are grouped into
tasks. Outputs per candidate:

- f_d and alpha of the dominant ring per trial: mean, standard deviation and the
  probabilistically symmetric coverage interval (5 % to 95 % by default);
- the band of the waveform (the same quantiles and the median at each point of the
  measurement's time grid, or of a peak table's readings) from the first
  :data:`~xcheck.sweep.trials.BAND_TRIALS` trials, and the share of measured samples
  inside it (the prediction with the stated values: no gain, offset or time shift is
  fitted, so an instrument's error shows as samples outside);
- worst-case corners (:func:`corners`), on the exact engine.

The number of trials is ``runs`` when given, else JCGM 101's adaptive procedure
(:mod:`xcheck.sweep.adaptive`) watching f_d and alpha.
"""

from __future__ import annotations

import math
import secrets
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from xcheck.engines.exact import ExactEngine
from xcheck.errors import XcheckError
from xcheck.fitting.candidates import Candidate
from xcheck.fixture.model import Fixture
from xcheck.sweep.adaptive import MAX_TRIALS, AdaptiveRun, batch_size, summary
from xcheck.sweep.tolerances import VariedValue
from xcheck.sweep.trials import (
    CHUNK_TRIALS,
    ChunkResult,
    ChunkTask,
    TrialPlan,
    band_chunk,
    build_plan,
    evaluate_exact,
    run_chunks,
)

#: Largest number of varied values whose 2^k corners are all evaluated.
MAX_CORNER_VALUES = 10
#: Relative step of the first-order ranking of corners beyond that.
RANKING_STEP = 1e-4
#: Called with (candidate name, trials done, trials planned or None while adaptive).
Progress = Callable[[str, int, "int | None"], None]


@dataclass(frozen=True)
class Statistics:
    """Mean, standard deviation and coverage interval of one output over the trials."""

    mean: float
    std: float
    low: float
    high: float
    count: int

    @classmethod
    def of(cls, values: np.ndarray, coverage: float) -> "Statistics":
        """The statistics of the finite ``values``."""
        finite = np.asarray(values, float)
        finite = finite[np.isfinite(finite)]
        return cls(*summary(finite, coverage), int(finite.size))


@dataclass(frozen=True)
class Band:
    """The waveform's spread on the grid: quantiles per point, and the measurement.

    Attributes
    ----------
    times
        Grid (s from the event; a peak table's: its readings' times).
    low, median, high
        The (1 - p) / 2, 0.5 and (1 + p) / 2 quantiles of the trials' curves.
    nominal
        The curve at the stated values.
    trials
        Trials the band is made of.
    measured
        The measured samples on the grid, or None.
    """

    times: np.ndarray
    low: np.ndarray
    median: np.ndarray
    high: np.ndarray
    nominal: np.ndarray
    trials: int
    measured: np.ndarray | None = None

    @property
    def inside(self) -> float | None:
        """Share of the measured samples inside the band (None without any, or when
        no trial was drawn)."""
        if self.measured is None or self.trials == 0:
            return None
        ok = np.isfinite(self.low) & np.isfinite(self.high) & np.isfinite(self.measured)
        if not np.any(ok):
            return None
        m = self.measured[ok]
        return float(np.mean((m >= self.low[ok]) & (m <= self.high[ok])))


@dataclass(frozen=True)
class Corner:
    """One worst-case corner: each varied value's factor, and the ring there."""

    factors: tuple[float, ...]
    frequency: float
    alpha: float


@dataclass(frozen=True)
class Corners:
    """The worst-case corners of one candidate.

    Attributes
    ----------
    method
        ``"all"`` (every value at either extreme, 2^k corners) or ``"first-order"``
        (the corners a first-order ranking picks for each extreme of f_d and alpha).
    count
        Corners evaluated.
    frequency_low, frequency_high, alpha_low, alpha_high
        The corners where f_d and alpha are lowest and highest.
    envelope_low, envelope_high
        The lowest and highest curve over the corners at each grid point.
    """

    method: str
    count: int
    frequency_low: Corner
    frequency_high: Corner
    alpha_low: Corner
    alpha_high: Corner
    envelope_low: np.ndarray
    envelope_high: np.ndarray


@dataclass(frozen=True)
class AdaptiveRecord:
    """How the adaptive procedure ended: batches of ``batch`` trials, whether f_d and
    alpha became stable, and each one's numerical tolerance (Hz, 1/s)."""

    batches: int
    batch: int
    converged: bool
    tolerance: dict[str, float]


@dataclass(frozen=True)
class CandidateSweep:
    """One candidate's Monte Carlo."""

    candidate: str
    description: str
    varied: tuple[VariedValue, ...]
    trials: int
    frequency: Statistics
    alpha: Statistics
    nominal_frequency: float
    nominal_alpha: float
    band: Band
    corners: Corners | None
    adaptive: AdaptiveRecord | None

    @property
    def no_ring(self) -> int:
        """Trials in which no mode rang (their f_d and alpha are left out)."""
        return self.trials - self.frequency.count


@dataclass(frozen=True)
class MonteCarloResult:
    """Every candidate's Monte Carlo, and how the trials were drawn."""

    seed: int
    engine: str
    coverage: float
    digits: int
    runs: int | None
    candidates: tuple[CandidateSweep, ...]


@dataclass(frozen=True)
class Grid:
    """Where the curves are evaluated: times (s from the event), the measured samples
    there (or None), and a peak table's turning-point numbers (or None)."""

    times: np.ndarray
    measured: np.ndarray | None = None
    turning: np.ndarray | None = None


def new_seed() -> int:
    """A fresh seed (64 random bits), to be recorded."""
    return secrets.randbits(64)


def run_montecarlo(fixture: Fixture, candidates: Sequence[Candidate], grid: Grid, executor,
                   *, seed: int, runs: int | None = None, engine: str = "exact",
                   digits: int = 2, coverage: float = 0.90,
                   chunks_per_task: int | None = None,
                   progress: Progress | None = None) -> MonteCarloResult:
    """Monte Carlo of each candidate's varied values.

    Parameters
    ----------
    fixture
        The fixture (its ``[spread]`` table says how tolerances vary).
    candidates
        The candidates to sweep; candidate ``c`` draws from seed stream ``c``.
    grid
        Where the curves are evaluated (:class:`Grid`).
    executor
        Runs the chunks (``map(function, tasks, progress)``, results in task order;
        :func:`xcheck.sweep.executors.open_executor`).
    seed
        The seed of every draw (:func:`new_seed` for a fresh one).
    runs
        Trials per candidate; None for JCGM 101's adaptive procedure.
    engine
        ``"exact"`` or ``"ngspice"`` (each trial one ngspice run).
    digits
        Significant digits the adaptive procedure asks of u(f_d) and u(alpha).
    coverage
        Coverage probability of the intervals and the band (0.90: 5 % to 95 %).
    chunks_per_task
        Chunks one task evaluates (default: the chunks spread evenly over the
        executor's workers); changes nothing in the numbers.
    progress
        See :data:`Progress`.

    Returns
    -------
    MonteCarloResult
    """
    if runs is not None and runs < 2:
        raise XcheckError(f"--runs {runs}: give at least 2 trials")
    if engine not in ("exact", "ngspice"):
        raise XcheckError(f"--engine {engine}: use exact or ngspice")
    swept = []
    for stream, candidate in enumerate(candidates):
        plan = build_plan(fixture, candidate, stream, grid.times, grid.turning, engine)
        swept.append(_sweep_one(plan, candidate, grid, executor, seed, runs, digits, coverage,
                                chunks_per_task, progress))
    return MonteCarloResult(seed, engine, coverage, digits, runs, tuple(swept))


def _sweep_one(plan: TrialPlan, candidate: Candidate, grid: Grid, executor, seed: int,
               runs: int | None, digits: int, coverage: float,
               chunks_per_task: int | None, progress: Progress | None) -> CandidateSweep:
    engine = ExactEngine(plan.circuit)
    k = plan.model.size
    f0, a0, c0 = evaluate_exact(plan, engine, np.ones((1, k)))
    nominal_curve = np.asarray(c0[0], float)
    results: list[ChunkResult] = []
    adaptive = None
    say = progress or (lambda *_: None)
    if k and runs is not None:
        sizes = [min(CHUNK_TRIALS, runs - start) for start in range(0, runs, CHUNK_TRIALS)]
        results = _map_chunks(plan, executor, seed, list(enumerate(sizes)), chunks_per_task,
                              lambda done: say(plan.candidate, done, runs))
    elif k:
        results, adaptive = _adaptive(plan, executor, seed, digits, coverage, chunks_per_task,
                                      say)
    results.sort(key=lambda r: r.index)
    frequency = np.concatenate([r.frequency for r in results]) if results else np.empty(0)
    alpha = np.concatenate([r.alpha for r in results]) if results else np.empty(0)
    band = _band(results, grid, nominal_curve, coverage)
    corners = _corners(plan, engine) if k else None
    return CandidateSweep(plan.candidate, candidate.description, plan.model.varied,
                          int(frequency.size), Statistics.of(frequency, coverage),
                          Statistics.of(alpha, coverage), float(f0[0]), float(a0[0]), band,
                          corners, adaptive)


def _map_chunks(plan: TrialPlan, executor, seed: int, chunks: list[tuple[int, int]],
                chunks_per_task: int | None, done: Callable[[int], None]) -> list[ChunkResult]:
    """Run ``chunks`` in tasks of ``chunks_per_task`` on ``executor``."""
    workers = max(int(getattr(executor, "workers", 1) or 1), 1)
    per = chunks_per_task or max(1, math.ceil(len(chunks) / workers))
    tasks = [ChunkTask(plan, seed, tuple(chunks[i:i + per])) for i in range(0, len(chunks), per)]
    trials = [sum(n for _, n in task.chunks) for task in tasks]
    before = _started_trials(chunks)

    def report(finished: int, _total: int) -> None:
        done(before + sum(trials[:finished]))

    out: list[ChunkResult] = []
    for result in executor.map(run_chunks, tasks, report):
        if not isinstance(result, list):  # a TaskError: the worker's failure
            raise XcheckError(f"candidate {plan.candidate}: a Monte Carlo task failed: {result}")
        out.extend(result)
    return out


def _started_trials(chunks: list[tuple[int, int]]) -> int:
    """Trials of the chunks before the first of ``chunks`` (adaptive batches are full)."""
    return chunks[0][0] * CHUNK_TRIALS if chunks else 0


def _adaptive(plan: TrialPlan, executor, seed: int, digits: int, coverage: float,
              chunks_per_task: int | None, say: Progress) -> tuple[list[ChunkResult],
                                                                    AdaptiveRecord]:
    """Batches until f_d and alpha are stable (JCGM 101 7.9.4) or MAX_TRIALS."""
    per_batch = math.ceil(batch_size(coverage) / CHUNK_TRIALS)
    run = AdaptiveRun(("frequency", "alpha"), coverage, digits)
    results: list[ChunkResult] = []
    batch = 0
    while True:
        chunks = [(batch * per_batch + j, CHUNK_TRIALS) for j in range(per_batch)]
        found = _map_chunks(plan, executor, seed, chunks, chunks_per_task,
                            lambda done: say(plan.candidate, done, None))
        found.sort(key=lambda r: r.index)
        results.extend(found)
        run.add({"frequency": np.concatenate([r.frequency for r in found]),
                 "alpha": np.concatenate([r.alpha for r in found])})
        batch += 1
        if run.done() or batch * per_batch * CHUNK_TRIALS >= MAX_TRIALS:
            break
    record = AdaptiveRecord(batch, per_batch * CHUNK_TRIALS, run.done(),
                            {name: run.tolerance(name) for name in run.names})
    return results, record


def _band(results: list[ChunkResult], grid: Grid, nominal: np.ndarray,
          coverage: float) -> Band:
    curves = [r.curves for r in results if r.curves is not None and band_chunk(r.index)]
    if not curves:
        flat = nominal.copy()
        return Band(grid.times, flat, flat, flat, nominal, 0, grid.measured)
    stack = np.concatenate(curves).astype(float)
    usable = stack[np.any(np.isfinite(stack), axis=1)]
    if usable.shape[0] == 0:
        nan = np.full(nominal.shape, np.nan)
        return Band(grid.times, nan, nan, nan, nominal, 0, grid.measured)
    with warnings.catch_warnings():  # a grid point where no trial rings stays nan
        warnings.simplefilter("ignore", RuntimeWarning)
        low, median, high = np.nanquantile(
            usable, [(1 - coverage) / 2, 0.5, (1 + coverage) / 2], axis=0)
    return Band(grid.times, low, median, high, nominal, int(stack.shape[0]), grid.measured)


def corner_factors(plan: TrialPlan, engine: ExactEngine) -> tuple[str, np.ndarray]:
    """The corners to evaluate: every one for up to :data:`MAX_CORNER_VALUES` varied
    values, else for each extreme of f_d and alpha the corner that a first-order
    ranking picks (each value at the extreme its sensitivity points to)."""
    model = plan.model
    if model.size <= MAX_CORNER_VALUES:
        return "all", model.corners()
    k = model.size
    steps = np.ones((2 * k, k))
    for j in range(k):
        steps[2 * j, j] += RANKING_STEP
        steps[2 * j + 1, j] -= RANKING_STEP
    frequency, alpha, _ = evaluate_exact(plan, engine, steps, curves=False)
    low = np.array([v.extremes[0] for v in model.varied])
    high = np.array([v.extremes[1] for v in model.varied])
    rows = []
    for output in (frequency, alpha):
        rising = (output[0::2] - output[1::2]) > 0
        rows.append(np.where(rising, high, low))
        rows.append(np.where(rising, low, high))
    return "first-order", np.array(rows)


def _corners(plan: TrialPlan, engine: ExactEngine) -> Corners:
    method, factors = corner_factors(plan, engine)
    frequency, alpha, curves = evaluate_exact(plan, engine, factors)

    def at(values: np.ndarray, pick: Callable) -> Corner:
        finite = np.where(np.isfinite(values))[0]
        row = int(finite[pick(values[finite])]) if finite.size else 0
        return Corner(tuple(float(x) for x in factors[row]), float(frequency[row]),
                      float(alpha[row]))

    with warnings.catch_warnings():  # a grid point where no corner rings stays nan
        warnings.simplefilter("ignore", RuntimeWarning)
        low, high = np.nanmin(curves, axis=0), np.nanmax(curves, axis=0)
    return Corners(method, int(factors.shape[0]), at(frequency, np.argmin),
                   at(frequency, np.argmax), at(alpha, np.argmin), at(alpha, np.argmax),
                   low, high)
