"""The three-way comparison: measured versus SPICE versus closed-form theory.

:func:`run_comparison` reads and aligns the measurement, estimates its ring-down,
fits every candidate with the closed-form engine, evaluates each fitted candidate in
ngspice, ranks the candidates by BIC and writes a verdict. It returns a
:class:`Comparison`; rendering is :mod:`xcheck.report.markdown`'s job.
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from xcheck.fitting.candidates import (
    Candidate,
    describe_key,
    meter_uncertainty,
    RingHint,
    build_candidates,
    dc_series_keys,
    series_resistance,
)
from xcheck.circuit.expand import build_circuit
from xcheck.engines.theory import SecondOrder, TheoryNotApplicable, characterise
from xcheck.errors import SimulationError, XcheckError
from xcheck.fitting.fit import FitResult, fit_candidate
from xcheck.fitting.observation import Observation
from xcheck.circuit.parameters import label_key
from xcheck.fixture.model import Fixture
from xcheck.measured import Measured, display_path, measure
from xcheck.fitting.rank import Ranked, rank_by_bic
from xcheck.values import format_eng

#: Engines agree to about 1e-4 of the amplitude (tested); beyond 1e-3 it is a deck,
#: time-step or approximation problem worth a reviewer's attention.
ENGINE_DISAGREEMENT_LIMIT = 1e-3
#: Longest record the fit evaluates (points); longer traces are decimated evenly.
MAX_FIT_POINTS = 20_000

Progress = Callable[[str], None]


@dataclass(frozen=True)
class EngineMetrics:
    """How well one engine's prediction of a fitted candidate matches the measurement."""

    engine: str
    rmse: float
    nrmse: float
    max_error: float
    damped_frequency_error_hz: float
    neper_frequency_error_per_s: float
    aic: float
    bic: float


@dataclass(frozen=True)
class CandidateOutcome:
    """Everything known about one candidate after fitting and simulation."""

    candidate: Candidate
    fit: FitResult
    ranked: Ranked
    theory: EngineMetrics | None = None
    ngspice: EngineMetrics | None = None
    second_order: SecondOrder | None = None
    series_resistance_ohm: float = float("nan")
    engine_disagreement: float = float("nan")
    engine_notes: tuple[str, ...] = ()
    theory_curve: np.ndarray | None = None
    ngspice_curve: np.ndarray | None = None

    @property
    def name(self) -> str:
        return self.candidate.name

    @property
    def failed(self) -> bool:
        return self.fit.failed

    @property
    def engines_disagree(self) -> bool:
        """True when ngspice and theory differ by more than numerical precision."""
        return math.isfinite(self.engine_disagreement) and (
            self.engine_disagreement > ENGINE_DISAGREEMENT_LIMIT
        )


@dataclass(frozen=True)
class InputFile:
    """An input with its checksum, for the report's provenance table."""

    role: str
    path: str
    sha256: str


@dataclass(frozen=True)
class Comparison:
    """Result of a three-way comparison, ready for :mod:`xcheck.report.markdown`."""

    fixture: Fixture
    measured: Measured
    observation: Observation
    outcomes: tuple[CandidateOutcome, ...]
    verdict: str
    inputs: tuple[InputFile, ...]
    loop_findings: tuple[str, ...] = ()
    seeds: dict[str, int] = field(default_factory=dict)
    ngspice_version: str = ""

    @property
    def best(self) -> CandidateOutcome | None:
        """The top-ranked candidate, or None when every candidate failed."""
        ranked = [o for o in self.outcomes if o.ranked.rank == 1]
        return ranked[0] if ranked else None

    def outcome(self, name: str) -> CandidateOutcome:
        """The outcome of the candidate called ``name``."""
        for item in self.outcomes:
            if item.name == name:
                return item
        raise KeyError(name)


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

    Returns
    -------
    Comparison
    """
    say = progress or (lambda _message: None)
    if (trace is None) == (peaks is None):
        raise XcheckError("give exactly one measurement: a trace (--trace) or a peak table (--peaks)")
    say("reading and aligning the measurement")
    measured = measure(fixture, trace=trace, peaks=peaks, column=column, event_time=event_time)
    observation = measured.observation(max_points=MAX_FIT_POINTS)
    alpha = measured.neper_frequency_per_s.value
    omega_d = 2 * math.pi * measured.damped_frequency_hz.value
    candidates = build_candidates(fixture, RingHint(math.hypot(alpha, omega_d)))
    fits: list[FitResult] = []
    for index, candidate in enumerate(candidates, 1):
        say(f"fitting candidate {index}/{len(candidates)}: {candidate.name}")
        fits.append(fit_candidate(fixture, candidate, observation))
    ranking = rank_by_bic(
        [f.candidate for f in fits], [f.bic for f in fits], [f.failed for f in fits]
    )
    by_name = {r.name: r for r in ranking}
    outcomes = []
    version = ""
    for index, (candidate, fit) in enumerate(zip(candidates, fits), 1):
        if use_ngspice and not fit.failed:
            say(f"ngspice run {index}/{len(candidates)}: {candidate.name}")
        outcome = _evaluate(fixture, candidate, fit, by_name[candidate.name], measured,
                            observation, use_ngspice)
        outcomes.append(outcome)
    if use_ngspice:
        version = _ngspice_version()
    ordered = sorted(outcomes, key=lambda o: (o.ranked.rank is None, o.ranked.rank or 0))
    inputs = ([InputFile("fixture", display_path(fixture.source), sha256_of(fixture.source))]
              if fixture.source else [])
    measurement_path = trace if trace is not None else peaks
    inputs.append(InputFile("trace" if trace is not None else "peak table",
                            display_path(measurement_path), sha256_of(measurement_path)))
    loop_findings = tuple(_loop_findings(fixture, ordered))
    verdict = write_verdict(fixture, measured, ordered, loop_findings)
    return Comparison(fixture, measured, observation, tuple(ordered), verdict, tuple(inputs),
                      loop_findings, {}, version)


def _ngspice_version() -> str:
    try:
        from xcheck.engines.ngspice import ngspice_version

        return ngspice_version()
    except (XcheckError, ImportError, OSError):
        return "unavailable"


def _evaluate(
    fixture: Fixture,
    candidate: Candidate,
    fit: FitResult,
    ranked: Ranked,
    measured: Measured,
    obs: Observation,
    use_ngspice: bool,
) -> CandidateOutcome:
    if fit.failed or fit.parameters is None:
        return CandidateOutcome(candidate, fit, ranked)
    circuit = build_circuit(fixture, fit.parameters)
    notes: list[str] = []
    try:
        second = characterise(circuit)
    except TheoryNotApplicable as exc:
        second = None
        notes.append(str(exc))
    theory_curve = fit.model
    ring = (second.omega_d / (2 * math.pi), second.alpha) if second and second.omega_d > 0 else None
    theory_metrics = _metrics("theory", obs, theory_curve, fit, measured, ring)
    ngspice_metrics = None
    ngspice_curve = None
    disagreement = float("nan")
    if use_ngspice:
        try:
            ngspice_curve, disagreement = _ngspice_curve(circuit, fit, obs)
            ngspice_metrics = _metrics("ngspice", obs, ngspice_curve, fit, measured,
                                       obs.ring(ngspice_curve))
        except SimulationError as exc:
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
    )


def _ngspice_curve(circuit, fit: FitResult, obs: Observation) -> tuple[np.ndarray, float]:
    """ngspice's prediction with the fit's nuisance values applied, and its largest
    difference from theory relative to the prediction's amplitude."""
    from xcheck.engines.ngspice import simulate_ngspice

    return obs.engine_curve(circuit, fit.nuisance,
                            lambda stop: simulate_ngspice(circuit, stop_time=stop))


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
        # closed-form BIC.
        chi2 = float(np.sum((error / obs.sigmas) ** 2))
        _, aic, bic = obs.criteria(chi2, error.size, fit.k)
    f_err = a_err = float("nan")
    if ring is not None:
        f_err = ring[0] - measured.damped_frequency_hz.value
        a_err = ring[1] - measured.neper_frequency_per_s.value
    amplitude = measured.event_size or float(np.ptp(obs.voltage)) or 1.0
    return EngineMetrics(engine, rmse, rmse / amplitude, float(np.max(np.abs(error))),
                         f_err, a_err, float(aic), float(bic))


def _loop_findings(fixture: Fixture, outcomes: list[CandidateOutcome]) -> list[str]:
    """How much series loss the best fit needs beyond the DC loop reading."""
    findings: list[str] = []
    best = next((o for o in outcomes if o.ranked.rank == 1), None)
    if best is None or best.fit.parameters is None:
        return findings
    total = best.series_resistance_ohm
    if fixture.loop_reading is not None:
        dc = fixture.loop_reading.value
        esr = sum(best.fit.parameters.get((n, "esr"), 0.0) or 0.0 for n in fixture.loop
                  if fixture.parts[n].kind == "capacitor")
        beyond = total - dc - esr
        sigma = meter_uncertainty(fixture.loop_reading.reading)
        head = (f"The DC loop reading accounts for {format_eng(dc, 'ohm')} of the "
                f"{format_eng(total, 'ohm')} series resistance the best candidate needs, and "
                f"stated ESR for {format_eng(esr, 'ohm')}")
        if beyond > 2 * sigma:
            findings.append(
                f"{head}, leaving {format_eng(beyond, 'ohm')} of loss beyond what DC "
                "measurements explain (AC loss: skin and proximity effect, core loss, "
                "dielectric loss, contact resistance that changed)."
            )
        elif beyond < -2 * sigma:
            findings.append(
                f"{head}: together {format_eng(-beyond, 'ohm')} MORE than the ringing shows. "
                "A stated ESR or the loop reading is too high (check the lead zero and the "
                "contacts during the reading), or the capacitor was not at the temperature "
                "or frequency its ESR was stated for."
            )
        else:
            findings.append(
                f"{head}: together they explain the damping within the loop reading's "
                f"uncertainty (about {format_eng(sigma, 'ohm')})."
            )
    else:
        dc_known = sum(best.fit.parameters.get(k, 0.0) or 0.0 for k in dc_series_keys(fixture))
        findings.append(
            f"Itemised DC resistances add up to {format_eng(dc_known, 'ohm')}; the best "
            f"candidate needs {format_eng(total, 'ohm')} in all. A DC loop reading "
            "([loop_reading]) would show how much of it is beyond DC."
        )
    return findings


def _sentence(text: str) -> str:
    text = text.strip()
    if not text:
        return text
    text = text[0].upper() + text[1:]
    return text if text[-1] in ".!?" else text + "."


def _against_label(fixture: Fixture, value) -> str:
    """'' or ' (label 470 µH: -3.8 %, inside its 10 % tolerance)' for a part's own value."""
    part_name, field_name = value.key
    part = fixture.parts.get(part_name)
    if part is None or field_name != "value" or not part.nominal:
        return ""
    change = value.value / part.nominal - 1.0
    text = f" (label {format_eng(part.nominal, value.unit)}: {change:+.1%}"
    if part.tolerance is not None:
        inside = abs(change) <= part.tolerance
        text += f", {'inside' if inside else 'OUTSIDE'} its {part.tolerance:.0%} tolerance"
    return text + ")"


def _degeneracy_sentences(fixture: Fixture, outcome: CandidateOutcome) -> list[str]:
    sentences = []
    for group in outcome.fit.degeneracies:
        names = [describe_key(fixture, label_key(m)) for m in group.members]
        if group.combination == "sum" and math.isfinite(group.value):
            sentences.append(
                f"In '{outcome.name}' the data determine only the sum {' + '.join(names)} = "
                f"{format_eng(group.value, group.unit)} ± {format_eng(group.stderr, group.unit)}, "
                "not the parts separately"
            )
        elif group.combination == "product" and math.isfinite(group.value):
            sentences.append(
                f"In '{outcome.name}' the data determine only the product {' × '.join(names)} "
                f"= {group.value:.4g} {group.unit} (± {group.stderr:.2g}), not the values separately"
            )
        else:
            sentences.append(
                f"In '{outcome.name}' {', '.join(names)} trade against each other (correlation "
                "beyond 0.999): this measurement pins only a combination of them, so each one's "
                "standard error is large"
            )
    return sentences


#: Residuals beyond this multiple of the noise mean no candidate explains the data.
MISFIT_LIMIT = 3.0


def _misfit(best: CandidateOutcome, measured: Measured) -> float | None:
    """Residual RMS over noise (trace) or sqrt(reduced chi-square) (peaks) of the best
    candidate, when it exceeds :data:`MISFIT_LIMIT`; else None."""
    fit = best.fit
    if fit.residuals is None or fit.n <= fit.k:
        return None
    if measured.kind == "trace":
        noise = measured.estimate.noise_sigma
        ratio = fit.rmse / noise if noise > 0 else float("inf")
    else:
        ratio = math.sqrt(max(fit.bic - fit.k * math.log(fit.n), 0.0) / (fit.n - fit.k))
    return ratio if ratio > MISFIT_LIMIT else None


def write_verdict(fixture: Fixture, measured: Measured, outcomes: list[CandidateOutcome],
                  loop_findings: tuple[str, ...]) -> str:
    """One paragraph a reviewer can read: best candidate, the fitted extra, how much
    worse the as-measured model does, and the measured-side findings."""
    best = next((o for o in outcomes if o.ranked.rank == 1), None)
    if best is None:
        return ("No candidate could be fitted to this measurement; see each candidate's "
                "reason below.")
    parts = []
    misfit = _misfit(best, measured)
    if misfit is not None:
        parts.append(
            f"NO candidate explains this measurement within its noise: the best, "
            f"'{best.name}', leaves residuals {misfit:.1f} times the noise. Check that the "
            "fixture describes this capture (natural or step response, the probed part, "
            "probe polarity and attenuation, the channel) before reading the numbers below"
        )
    lead = "The closest candidate" if misfit is not None else (
        "The best explanation of the measurement")
    parts.append(f"{lead} is candidate '{best.name}' ({best.candidate.description})")
    if best.theory is not None:
        parts[-1] += f", NRMSE {best.theory.nrmse:.2%}"
    parts[-1] += "."
    for value in best.fit.fitted:
        if any(value.label in d.members and d.combination in ("sum", "product")
               for d in best.fit.degeneracies):
            continue
        parts.append(
            f"Fitted {describe_key(fixture, value.key)} = {format_eng(value.value, value.unit)} ± "
            f"{format_eng(value.stderr, value.unit)}{_against_label(fixture, value)}."
        )
    parts.extend(_degeneracy_sentences(fixture, best))
    for other in outcomes:
        if other is best or other.failed or other.ranked.evidence != "not distinguishable":
            continue
        parts.append(
            f"Candidate '{other.name}' explains the measurement as well "
            f"(ΔBIC = {other.ranked.delta_bic:.1f}, not distinguishable)"
        )
        parts.extend(_degeneracy_sentences(fixture, other))
    as_measured = next((o for o in outcomes if o.name == "as-measured"), None)
    if as_measured is not None and as_measured is not best:
        if as_measured.failed:
            parts.append(f"The as-measured model could not be fitted ({as_measured.fit.message}).")
        else:
            parts.append(
                f"The as-measured model does worse by ΔBIC = {as_measured.ranked.delta_bic:.1f} "
                f"({as_measured.ranked.evidence} evidence against it)"
                + (f", NRMSE {as_measured.theory.nrmse:.2%}" if as_measured.theory else "")
                + "."
            )
    parts.extend(loop_findings)
    parts.extend(measured.findings)
    parts = [_sentence(p) for p in parts]
    if best.engines_disagree:
        parts.append(
            f"Warning: ngspice and theory differ by {best.engine_disagreement:.2%} of the "
            "amplitude for this candidate, more than numerical precision."
        )
    return " ".join(parts)
