"""The three-way comparison: measured versus SPICE versus circuit theory (the exact state space).

:func:`run_comparison` reads and aligns the measurement, estimates its ring-down,
fits every candidate with the exact state-space engine, evaluates each fitted candidate in
ngspice, ranks the candidates by BIC and writes a verdict. It returns a
:class:`~xcheck.outcome.Comparison` (the records are in :mod:`xcheck.outcome`, the
verdict's words in :mod:`xcheck.verdict`); rendering is :mod:`xcheck.report`'s job.
"""

from __future__ import annotations

import hashlib
import math
from pathlib import Path
from typing import Callable

import numpy as np

from xcheck.fitting.candidates import (
    Candidate,
    RingHint,
    build_candidates,
    describe_key,
    series_resistance,
)
from xcheck.circuit.expand import build_circuit
from xcheck.engines.exact import ExactEngine, dominant_ring
from xcheck.engines.modes import natural_modes_named
from xcheck.engines.ngspice import INSTALL_WAYS, NgspiceUnavailable, ngspice_status
from xcheck.engines.theory import TheoryNotApplicable, characterise
from xcheck.errors import SimulationError, XcheckError
from xcheck.fitting.next_measurement import next_measurements
from xcheck.fitting.fit import FitResult, fit_candidate
from xcheck.fitting.observation import Observation
from xcheck.fixture.model import Fixture
from xcheck.measured import Measured, display_path, measure
from xcheck.fitting.rank import Ranked, rank_by_bic
from xcheck.outcome import CandidateOutcome, Comparison, EngineMetrics, Finding, InputFile
from xcheck.fitting.structure import second_mode, structural_rungs
from xcheck.fixture.plausibility import implausible_values
from xcheck.sanity import sanity_findings
from xcheck.verdict import MISFIT_LIMIT, write_loop_findings, write_verdict

#: Longest record the fit evaluates (points); longer traces are decimated evenly.
MAX_FIT_POINTS = 20_000

Progress = Callable[[str], None]


def sha256_of(path: str | Path) -> str:
    """Hex SHA-256 of a file's bytes."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def run_comparison(
    fixture: Fixture,
    *,
    trace: str | Path | None = None,
    peaks: str | Path | None = None,
    column: str | int | None = None,
    event_time: float | None = None,
    use_ngspice: bool = True,
    progress: Progress | None = None,
    keep_all: bool = False,
) -> Comparison:
    """Compare the fixture's candidate models with one measurement.

    Parameters
    ----------
    fixture
        The fixture description.
    trace, peaks
        Exactly one: a scope export or a table of extrema read off cursors.
    column
        Channel of the trace to use (name or 0-based index).
    event_time
        Manual event time in the file's time base (s), overriding detection.
    use_ngspice
        Evaluate each fitted candidate in ngspice too (the default).
    progress
        Called with a short line of text as each stage starts.
    keep_all
        Keep peak-table readings the ring-down estimate flags (see
        :func:`xcheck.measured.measure`).

    Returns
    -------
    Comparison
    """
    say = progress or (lambda _message: None)
    if (trace is None) == (peaks is None):
        raise XcheckError("give exactly one measurement: a trace (--trace) or a peak table (--peaks)")
    say("reading and aligning the measurement")
    measured = measure(fixture, trace=trace, peaks=peaks, column=column, event_time=event_time,
                       keep_all=keep_all)
    observation = measured.observation(max_points=MAX_FIT_POINTS)
    alpha = measured.neper_frequency_per_s.value
    candidates = build_candidates(fixture, RingHint(measured.natural_angular_frequency))
    fits: list[FitResult] = []
    for index, candidate in enumerate(candidates, 1):
        say(f"fitting candidate {index}/{len(candidates)}: {candidate.name}")
        fits.append(fit_candidate(fixture, candidate, observation))
    rungs = _structural_rungs(fixture, candidates, fits, measured, observation)
    for index, candidate in enumerate(rungs, 1):
        say(f"fitting structural candidate {index}/{len(rungs)}: {candidate.name}")
        fits.append(fit_candidate(fixture, candidate, observation))
    candidates = candidates + rungs
    ranking = rank_by_bic(
        [f.candidate for f in fits], [f.bic for f in fits], [f.failed for f in fits]
    )
    by_name = {r.name: r for r in ranking}
    outcomes = []
    version, skipped = "", None
    if use_ngspice:
        say("starting ngspice")
        version, skipped = ngspice_status()
    for index, (candidate, fit) in enumerate(zip(candidates, fits), 1):
        if use_ngspice and skipped is None and not fit.failed:
            say(f"ngspice run {index}/{len(candidates)}: {candidate.name}")
        outcome = _evaluate(fixture, candidate, fit, by_name[candidate.name], measured,
                            observation, use_ngspice, skipped)
        outcomes.append(outcome)
    ordered = sorted(outcomes, key=lambda o: (o.ranked.rank is None, o.ranked.rank or 0))
    inputs = ([InputFile("fixture", display_path(fixture.source), sha256_of(fixture.source))]
              if fixture.source else [])
    measurement_path = trace if trace is not None else peaks
    inputs.append(InputFile("trace" if trace is not None else "peak table",
                            display_path(measurement_path), sha256_of(measurement_path)))
    loop_findings = tuple(write_loop_findings(fixture, ordered, alpha))
    findings = tuple(Finding("implausible-value", note) for note in implausible_values(fixture))
    findings += tuple(sanity_findings(ordered, measured.damped_frequency_hz.value,
                                      measured.event_size, measured.probe_factor))
    best = next((o for o in ordered if o.ranked.rank == 1 and not o.failed), None)
    steps = next_measurements(fixture, best.fit) if best is not None else ()
    skip_reason = skipped.reason if skipped is not None else ""
    verdict = write_verdict(fixture, measured, ordered, loop_findings, findings, steps,
                            ngspice_skipped=skip_reason)
    return Comparison(fixture, measured, observation, tuple(ordered), verdict, tuple(inputs),
                      loop_findings, {}, version, findings, steps, skip_reason)


def _structural_rungs(fixture: Fixture, candidates: list[Candidate], fits: list[FitResult],
                      measured: Measured, obs: Observation) -> list[Candidate]:
    """Rungs that add a missing mode (:mod:`xcheck.fitting.structure`), when the best
    fit so far misses by more than :data:`~xcheck.verdict.MISFIT_LIMIT` times the noise
    and its residuals ring apart from the main ring; none otherwise."""
    usable = [(c, f) for c, f in zip(candidates, fits) if not f.failed and f.parameters]
    if obs.discrete or not usable:
        return []
    base, fit = min(usable, key=lambda item: item[1].bic)
    if fit.residuals is None or fit.n <= fit.k or measured.misfit_ratio(fit) <= MISFIT_LIMIT:
        return []
    circuit = build_circuit(fixture, fit.parameters)
    engine = ExactEngine(circuit)
    model_ring = dominant_ring(engine, engine.model())
    main = max(2 * math.pi * measured.damped_frequency_hz.value,
               model_ring[0] if model_ring is not None else 0.0)
    mode = second_mode(obs.time, fit.residuals, main)
    if mode is None:
        return []
    inductances = [e.value for e in circuit.elements if e.kind == "L"]
    capacitances = [e.value for e in circuit.elements if e.kind == "C"]
    return structural_rungs(fixture, base, fit.parameters, mode, (inductances, capacitances))


def _evaluate(
    fixture: Fixture,
    candidate: Candidate,
    fit: FitResult,
    ranked: Ranked,
    measured: Measured,
    obs: Observation,
    use_ngspice: bool,
    skipped: NgspiceUnavailable | None = None,
) -> CandidateOutcome:
    if fit.failed or fit.parameters is None:
        return CandidateOutcome(candidate, fit, ranked)
    circuit = build_circuit(fixture, fit.parameters)
    notes: list[str] = []
    try:
        second = characterise(circuit)
    except TheoryNotApplicable as exc:
        # The exact engine is the theory leg; the closed form only adds its formulas
        # to the report where the circuit reduces to a textbook loop.
        second = None
        notes.append(f"no closed form for the report's formulas: {exc}")
    theory_curve = fit.model
    modes = natural_modes_named(
        circuit, lambda e: describe_key(fixture, (e.part, e.role)) if e.part else e.name)
    engine = ExactEngine(circuit)
    dominant = dominant_ring(engine, engine.model())
    ring = (dominant[0] / (2 * math.pi), dominant[1]) if dominant is not None else None
    theory_metrics = _metrics("theory", obs, theory_curve, fit, measured, ring)
    ngspice_metrics = None
    ngspice_curve = None
    disagreement = float("nan")
    ngspice_error = ""
    if use_ngspice and skipped is not None:
        notes.append(f"ngspice leg skipped: ngspice's shared library could not be loaded "
                     f"({skipped.reason.rstrip('.')}); install it: {INSTALL_WAYS}")
    elif use_ngspice:
        try:
            ngspice_curve, disagreement, retried = _ngspice_curve(circuit, fit, obs)
            notes.extend(retried)
            ngspice_metrics = _metrics("ngspice", obs, ngspice_curve, fit, measured,
                                       obs.ring(ngspice_curve))
        except SimulationError as exc:
            ngspice_error = str(exc)
            notes.append(f"ngspice: {exc}")
    return CandidateOutcome(
        candidate,
        fit,
        ranked,
        theory_metrics,
        ngspice_metrics,
        second,
        series_resistance(fixture, fit.parameters),
        disagreement,
        tuple(notes),
        theory_curve,
        ngspice_curve,
        modes,
        ngspice_error,
    )


def _ngspice_curve(circuit, fit: FitResult,
                   obs: Observation) -> tuple[np.ndarray, float, tuple[str, ...]]:
    """ngspice's prediction with the fit's nuisance values applied, its largest
    difference from theory relative to the prediction's amplitude, and the notes of any
    run that had to be repeated on a fresh ngspice child."""
    from xcheck.engines.ngspice import RETRY_NOTE_START, simulate_ngspice

    retried: list[str] = []

    def simulate(stop: float):
        waveform = simulate_ngspice(circuit, stop_time=stop)
        retried.extend(f"ngspice: {note}" for note in waveform.notes
                       if note.startswith(RETRY_NOTE_START))
        return waveform

    curve, disagreement = obs.engine_curve(circuit, fit.nuisance, simulate)
    return curve, disagreement, tuple(retried)


def _metrics(engine: str, obs: Observation, curve: np.ndarray | None, fit: FitResult,
             measured: Measured, ring: tuple[float, float] | None) -> EngineMetrics | None:
    """Fit quality of one engine's prediction; ``ring`` is that engine's (f_d, alpha)."""
    if curve is None:
        return None
    error = obs.voltage - curve
    rmse = float(np.sqrt(np.mean(error**2)))
    if engine == "theory":
        aic, bic = fit.aic, fit.bic
    else:
        # For a peak table these are voltages only (ngspice's extremum times are not
        # refitted): comparable between candidates evaluated by ngspice, not with the
        # exact engine's BIC.
        chi2 = float(np.sum((error / obs.sigmas) ** 2))
        _, aic, bic = obs.criteria(chi2, error.size, fit.k)
    f_err = a_err = float("nan")
    if ring is not None and not measured.aperiodic:
        f_err = ring[0] - measured.damped_frequency_hz.value
        a_err = ring[1] - measured.neper_frequency_per_s.value
    amplitude = measured.event_size or float(np.ptp(obs.voltage)) or 1.0
    return EngineMetrics(engine, rmse, rmse / amplitude, float(np.max(np.abs(error))),
                         f_err, a_err, float(aic), float(bic))
