"""``xcheck sweep``'s whole study: which candidates, the grid, Monte Carlo, sensitivities.

:func:`run_sweep` reads and aligns the measurement when there is one
(:func:`xcheck.measured.measure`), picks the candidates (:func:`swept_candidates`: the
label values, and the meter readings when the fixture has any), runs the Monte Carlo
(:mod:`xcheck.sweep.montecarlo`) in an executor and the sensitivities
(:mod:`xcheck.sweep.sensitivity`) here, and returns a :class:`SweepResult` for the
report (:mod:`xcheck.report.sweep_report`).
"""

from __future__ import annotations

import contextlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

import numpy as np

from xcheck.errors import XcheckError
from xcheck.fitting.candidates import Candidate, default_ladder
from xcheck.fixture.model import Fixture
from xcheck.sweep.montecarlo import Grid, MonteCarloResult, Progress, new_seed, run_montecarlo
from xcheck.sweep.sensitivity import CandidateSensitivity, sensitivities
from xcheck.sweep.trials import BAND_POINTS

#: Points of the grid when there is no measurement (from the event to the engine's
#: default stop time).
DEFAULT_POINTS = 1001


@dataclass(frozen=True)
class SweepResult:
    """Everything ``xcheck sweep`` found.

    Attributes
    ----------
    fixture
        The fixture swept.
    measured
        The :class:`~xcheck.measured.Measured` record, or None without a measurement.
    montecarlo
        The Monte Carlo of each candidate.
    sensitivity
        Each candidate's sensitivities and explanations, in the same order.
    inputs
        (role, path as shown, SHA-256) of each input file.
    notes
        Plain-words remarks (candidates left out, values left ideal).
    versions
        Name -> version of the tool and the libraries that made the numbers.
    """

    fixture: Fixture
    measured: Any
    montecarlo: MonteCarloResult
    sensitivity: tuple[CandidateSensitivity, ...]
    inputs: tuple[tuple[str, str, str], ...] = ()
    notes: tuple[str, ...] = ()
    versions: dict[str, str] = field(default_factory=dict)


def swept_candidates(fixture: Fixture) -> tuple[list[Candidate], list[str]]:
    """The ``label`` candidate, and ``as-measured`` when a part or the loop has a meter
    reading; with notes on what was left out.

    Raises
    ------
    XcheckError
        When neither candidate can be built (every value needed written ``"?"``).
    """
    ladder = {c.name: c for c in default_ladder(fixture)}
    wanted = ["label"]
    metered = fixture.loop_reading is not None or any(
        p.measured is not None for p in fixture.parts.values())
    if metered:
        wanted.append("as-measured")
    chosen, notes = [], []
    for name in wanted:
        candidate = ladder[name]
        if candidate.usable:
            chosen.append(candidate)
        else:
            notes.append(f"candidate {name} left out: {'; '.join(candidate.problems)}")
    if not chosen:
        raise XcheckError(
            f"{fixture.source or 'the fixture'}: nothing to sweep: "
            + "; ".join(notes) + ". Give the label value of every part written '?', or "
            "fit the fixture with xcheck compare first")
    for candidate in chosen:
        if candidate.name == "label":
            continue  # label values only, no parasitics, by design
        unknown = sorted(f"{name}.{key}" for name, part in fixture.parts.items()
                         for key in part.unknown
                         if key != "nominal" and (name, key) not in candidate.parameters.values)
        if unknown:
            notes.append(f"in {candidate.name}, values written '?' that no reading pins are "
                         f"left out of the circuit (ideal): {', '.join(unknown)}")
    return chosen, notes


def _grid(fixture: Fixture, candidates: list[Candidate], measured) -> Grid:
    """The measurement's grid (decimated evenly to :data:`BAND_POINTS`), a peak table's
    readings, or without a measurement the engine's default run."""
    if measured is None:
        from xcheck.circuit.expand import build_circuit
        from xcheck.engines.timing import transient_settings

        stop = transient_settings(build_circuit(fixture, candidates[0].parameters)).stop
        return Grid(np.linspace(0.0, stop, DEFAULT_POINTS))
    observation = measured.observation()
    if observation.discrete:
        return Grid(np.asarray(observation.time, float), np.asarray(observation.voltage, float),
                    observation.turning_points(fixture.response))
    step = max(1, int(np.ceil(observation.time.size / BAND_POINTS)))
    times = np.maximum(np.asarray(observation.time[::step], float), 0.0)
    return Grid(times, np.asarray(observation.voltage[::step], float))


def run_sweep(fixture: Fixture, *, trace: str | Path | None = None,
              peaks: str | Path | None = None, runs: int | None = None,
              seed: int | None = None, engine: str = "exact", workers: int | None = None,
              cluster: str | None = None, digits: int = 2, executor=None,
              chunks_per_task: int | None = None,
              progress: Progress | None = None,
              stage: Callable[[str], None] | None = None) -> SweepResult:
    """Monte Carlo and sensitivities of the fixture's label (and as-measured) values.

    Parameters
    ----------
    fixture
        The fixture.
    trace, peaks
        At most one measurement: a scope export or a peak table.
    runs
        Trials per candidate; None for JCGM 101's adaptive procedure. Required with
        ``engine="ngspice"`` (the adaptive procedure needs 2 x 10^4 trials or more).
    seed
        The seed; None draws a fresh one (recorded in the result).
    engine
        ``"exact"`` or ``"ngspice"``.
    workers, cluster
        Passed to :func:`xcheck.sweep.executors.open_executor` (ignored when
        ``executor`` is given).
    digits
        Significant digits the adaptive procedure asks of u(f_d) and u(alpha).
    executor
        An executor to use instead of opening one.
    chunks_per_task
        See :func:`xcheck.sweep.montecarlo.run_montecarlo`.
    progress, stage
        Called with Monte Carlo progress, and with a line of text as each stage starts.

    Returns
    -------
    SweepResult
    """
    from xcheck.compare import sha256_of
    from xcheck.measured import display_path, measure

    say = stage or (lambda _text: None)
    if trace is not None and peaks is not None:
        raise XcheckError("give at most one measurement: a trace (--trace) or a peak table "
                          "(--peaks)")
    if engine == "ngspice" and runs is None:
        raise XcheckError("--engine ngspice needs --runs N: the adaptive number of trials "
                          "is 2 x 10^4 or more, each one an ngspice run; give e.g. --runs 500, "
                          "or use --engine exact")
    if not 1 <= digits <= 3:
        raise XcheckError(f"--digits {digits}: give 1, 2 or 3 significant digits")
    if seed is not None and not 0 <= seed < 2**128:
        raise XcheckError(f"--seed {seed}: give a whole number from 0 to 2^128 - 1")
    measured = None
    inputs = []
    if fixture.source is not None:
        inputs.append(("fixture", display_path(fixture.source), sha256_of(fixture.source)))
    if trace is not None or peaks is not None:
        say("reading and aligning the measurement")
        measured = measure(fixture, trace=trace, peaks=peaks)
        path = trace if trace is not None else peaks
        inputs.append(("trace" if trace is not None else "peak table", display_path(path),
                       sha256_of(path)))
    candidates, notes = swept_candidates(fixture)
    grid = _grid(fixture, candidates, measured)
    seed = new_seed() if seed is None else int(seed)
    with contextlib.ExitStack() as stack:
        if executor is None:
            from xcheck.sweep.executors import open_executor

            executor = stack.enter_context(open_executor(workers, cluster))
        say("Monte Carlo over the tolerances")
        montecarlo = run_montecarlo(fixture, candidates, grid, executor, seed=seed, runs=runs,
                                    engine=engine, digits=digits,
                                    chunks_per_task=chunks_per_task, progress=progress)
    say("sensitivities")
    observation = measured.observation() if measured is not None else None
    found = tuple(sensitivities(fixture, c, observation, measured) for c in candidates)
    return SweepResult(fixture, measured, montecarlo, found, tuple(inputs), tuple(notes),
                       _versions(engine))


def _versions(engine: str) -> dict[str, str]:
    """Versions of xcheck, ngspice (when it ran the trials), numpy, scipy and Python."""
    from xcheck.report.summary import library_versions

    ngspice = ""
    if engine == "ngspice":
        from xcheck.engines.ngspice import ngspice_version

        try:
            ngspice = ngspice_version()
        except XcheckError:
            ngspice = "unavailable"
    return library_versions(ngspice)
