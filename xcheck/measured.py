"""The measured side of a comparison: read, align and estimate one measurement.

:func:`measure` turns a scope export or a peak table into a :class:`Measured`: the
aligned samples (event at t = 0), the ring-down estimate with its uncertainties and
envelope diagnostics, the alignment findings, and the
:class:`~xcheck.fitting.observation.Observation` candidates are fitted to. A scope export
becomes a :class:`MeasuredTrace`, a peak table a :class:`MeasuredPeaks`.
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from dataclasses import dataclass
from pathlib import Path
from typing import ClassVar

import numpy as np

from xcheck.capture.align import Alignment
from xcheck.fitting.fit import FitResult
from xcheck.fitting.observation import Observation, PeakObservation, TraceObservation
from xcheck.fixture.model import Fixture
from xcheck.ringdown import RingdownEstimate
from xcheck.ringdown.aperiodic_result import AperiodicEstimate
from xcheck.ringdown.from_file import ringdown_from_file
from xcheck.ringdown.result import Estimate
from xcheck.ringdown.peaks import decimal_resolution, rounded_time_sigma
from xcheck.values import format_eng


def display_path(path: str | Path) -> str:
    """``path`` relative to the working folder when it lies below it, else absolute, so
    reports do not carry a machine's home folders needlessly."""
    resolved = Path(path).resolve()
    try:
        return resolved.relative_to(Path.cwd().resolve()).as_posix()
    except ValueError:
        return resolved.as_posix()

#: The fit window ends this many decay time constants after the event: beyond it the
#: ringing is below 1e-4 of its start and only noise is left.
WINDOW_TIME_CONSTANTS = 9.0


@dataclass(frozen=True)
class Envelope:
    """Extrema for the envelope figure (s, V), flagged indices and the fitted decay."""

    times: np.ndarray
    amplitudes: np.ndarray
    flagged: list[int]
    alpha: float
    amplitude0: float


@dataclass(frozen=True)
class Measured(ABC):
    """One measurement, aligned and estimated.

    Attributes
    ----------
    kind
        ``"trace"`` or ``"peaks"`` (a class attribute: the word summary.json uses).
    source
        The file as given.
    time, voltage
        Samples from the event (s, V), or the extrema of a peak table.
    excluded
        Samples left out of fits (clipped), as a boolean mask over ``time``.
    uncertainty
        Per-reading uncertainty of a peak table (V), or None.
    estimate
        The ring-down estimate, or for a trace that settles without ringing the
        aperiodic one (time constants; ``aperiodic`` is then True).
    alignment
        Event time, baseline, noise, droop and inversion (traces only).
    findings
        Plain-words findings worth a place in the verdict (clipping, inversion, an
        envelope that is not one exponential, flagged extrema).
    notes
        Every remark, for the report's measured-side section.
    """

    kind: ClassVar[str]
    source: str
    time: np.ndarray
    voltage: np.ndarray
    excluded: np.ndarray
    uncertainty: np.ndarray | None
    estimate: RingdownEstimate | AperiodicEstimate
    alignment: Alignment | None
    findings: tuple[str, ...]
    notes: tuple[str, ...] = ()
    time_resolution: float | None = None
    #: The instrument's noise (V): the pre-event scatter, with the converter's
    #: quantisation (q^2 / 12) where the baseline hides it; None without a baseline.
    instrument_noise: float | None = None
    #: The probe attenuation a trace's preamble stated and its values were multiplied
    #: by (1 when none was applied).
    probe_factor: float = 1.0

    @property
    def aperiodic(self) -> bool:
        """True when the measurement settles without ringing."""
        return bool(getattr(self.estimate, "aperiodic", False))

    @property
    def damped_frequency_hz(self) -> Estimate:
        """f_d estimate (Hz) with standard error; 0 for a response that does not ring."""
        if self.aperiodic:
            return Estimate(0.0, 0.0)
        return self.estimate.damped_frequency

    @property
    def neper_frequency_per_s(self) -> Estimate:
        """alpha estimate (1/s) with standard error. For a response that does not ring,
        half the sum of its decay rates (s1 + s2 = 2 zeta omega0 = 2 alpha for a
        second-order circuit, standard circuit theory, from memory; the rates' standard
        errors combined as if independent), or its one decay rate (first order)."""
        if not self.aperiodic:
            return self.estimate.neper_frequency
        rates = self.estimate.decay_rates
        if self.estimate.regime == "overdamped" and len(rates) == 2:
            return Estimate(0.5 * (rates[0].value + rates[1].value),
                            0.5 * math.hypot(rates[0].stderr, rates[1].stderr))
        return Estimate(rates[0].value, rates[0].stderr)

    @property
    def natural_angular_frequency(self) -> float:
        """omega0 (rad/s): from the ring (sqrt(alpha^2 + omega_d^2)) or from the decay
        rates (sqrt(s1 s2)); 0 when a first-order response does not give it."""
        if self.aperiodic:
            value = self.estimate.natural_angular_frequency
            return value.value if value is not None else 0.0
        return math.hypot(self.estimate.neper_frequency.value,
                          2 * math.pi * self.estimate.damped_frequency.value)

    @property
    def time_scale(self) -> float:
        """A period-like time (s) that bounds the fit's time shift: the ring period, or
        2 pi over omega0 (2 pi times the time constant of a first-order response)."""
        if not self.aperiodic:
            return 1.0 / self.estimate.damped_frequency.value
        omega0 = self.natural_angular_frequency
        if omega0 > 0:
            return 2 * math.pi / omega0
        return 2 * math.pi * self.estimate.time_constants[0].value

    @property
    def fit_end(self) -> float:
        """Time after the event (s) beyond which only noise is left:
        :data:`WINDOW_TIME_CONSTANTS` decay time constants (the slowest, when the
        response does not ring)."""
        if self.aperiodic:
            return WINDOW_TIME_CONSTANTS * self.estimate.time_constants[0].value
        alpha = max(self.estimate.neper_frequency.value, 0.0)
        return WINDOW_TIME_CONSTANTS / alpha if alpha > 0 else math.inf

    @property
    def initial_volts(self):
        """Model value at the event (V) with standard error."""
        return self.estimate.initial_volts

    @property
    def event_size(self) -> float:
        """Size of the event (V) that NRMSE is relative to: the swing from the value at
        the event to the level the ring settles at (V0 for a ring-down, the step for a
        step). Measured, unlike the engines' reference voltage (the circuit's largest
        stated voltage, which sets their accuracy target)."""
        est = self.estimate
        return abs(est.initial_volts.value - est.offset.value)

    @abstractmethod
    def observation(self, max_points: int = 20_000) -> Observation:
        """What candidates are fitted to, decimated evenly to at most ``max_points``."""

    @abstractmethod
    def misfit_ratio(self, fit: FitResult) -> float:
        """How far the fit misses, in units of the measurement's own error (see the
        subclasses); call only when ``fit.n > fit.k``."""

    def envelope(self) -> Envelope | None:
        """Extrema magnitudes about the fitted offset, for the envelope figure; None
        for a response that does not ring."""
        if self.aperiodic:
            return None
        est = self.estimate
        offset = est.offset.value
        return Envelope(np.asarray(est.extrema_time, float),
                        np.asarray(est.extrema_value, float) - offset,
                        list(est.flagged_extrema), est.neper_frequency.value,
                        float(est.envelope_at(np.array([0.0]))[0]))


@dataclass(frozen=True)
class MeasuredTrace(Measured):
    """A scope export, aligned so that the event is at t = 0."""

    kind: ClassVar[str] = "trace"

    def observation(self, max_points: int = 20_000) -> TraceObservation:
        """The samples from the event to :data:`WINDOW_TIME_CONSTANTS` decay time
        constants after it, clipped samples left out, decimated evenly to at most
        ``max_points``; the effective sample count scaled to the share kept."""
        period = self.time_scale
        end = min(self.time[-1], self.fit_end)
        window = (self.time <= end) & ~self.excluded
        index = np.flatnonzero(window)
        step = max(1, int(math.ceil(index.size / max_points)))
        index = index[::step]
        share = index.size * step / max(self.estimate.samples_used, 1)
        n_eff = float(min(index.size, self.estimate.effective_samples * share))
        return TraceObservation(self.time[index], self.voltage[index],
                                float(self.estimate.noise_sigma), period, max(n_eff, 2.0))

    def misfit_ratio(self, fit: FitResult) -> float:
        """The fit's residual RMS over the pre-event noise (1 when the model explains
        the trace down to the noise). The instrument's noise is the pre-event line's
        scatter where the record has one (the estimate's noise level can be its own
        residuals, which an unmodelled second mode inflates)."""
        noise = self.estimate.noise_sigma
        if self.instrument_noise:
            noise = self.instrument_noise
        return fit.rmse / noise if noise > 0 else float("inf")


@dataclass(frozen=True)
class MeasuredPeaks(Measured):
    """A table of extrema read off cursors; its time origin is its first reading."""

    kind: ClassVar[str] = "peaks"

    def observation(self, max_points: int = 20_000) -> PeakObservation:
        """Every reading but those left out (``excluded``: flagged as misread; a table
        is never decimated, ``max_points`` is not used), with the stated uncertainties
        or else the estimate's noise, and the scatter of the extremum times."""
        period = 1.0 / self.estimate.damped_frequency.value
        sigma = (self.uncertainty if self.uncertainty is not None
                 else np.full(self.voltage.shape, self.estimate.noise_sigma))
        kept = ~self.excluded
        return PeakObservation(self.time[kept], self.voltage[kept], sigma[kept], period,
                               time_sigma=_time_scatter(self.time, period, self.time_resolution),
                               first_time=float(self.time[0]) if not kept[0] else None)

    def misfit_ratio(self, fit: FitResult) -> float:
        """sqrt(reduced chi-square) of the fit (1 when the readings scatter as their
        stated errors say); the chi-square is the BIC less its k ln n penalty, since a
        peak table's deviance is its chi-square."""
        return math.sqrt(max(fit.bic - fit.k * math.log(fit.n), 0.0) / (fit.n - fit.k))


def _time_scatter(time: np.ndarray, period: float, resolution: float | None = None) -> float:
    """Standard deviation (s) of extremum times: their scatter about equal half-period
    spacing, but no less than rounding them to their last written digit leaves (see
    :func:`xcheck.ringdown.peaks.rounded_time_sigma`) nor 1e-4 period. Times rounded
    coarsely can fall on an exact lattice and scatter not at all. ``resolution`` is the
    reading step as written in the file (s); None works it out from the numbers."""
    k = np.rint((time - time[0]) / (period / 2))
    if resolution is None:
        resolution = decimal_resolution(time) or 0.0
    rounding, _ = rounded_time_sigma(time, k, resolution)
    if time.size < 4:
        return max(period * 1e-3, rounding)
    coeffs = np.polyfit(k, time, 1)
    residual = time - np.polyval(coeffs, k)
    return max(float(np.std(residual, ddof=2)), period * 1e-4, rounding)


def _expected_sign(fixture: Fixture) -> int | None:
    """The sign of the event's excursion the fixture predicts, as the alignment counts
    it: the step's, or the probed part's initial voltage; otherwise (a node-pair or
    current probe, a source part, a part with no initial value) from the exact engine
    on the stated values (None when they do not build a circuit)."""
    part = fixture.probed_part
    if fixture.response == "step" and fixture.step is not None:
        return int(np.sign(fixture.step.volts)) or None
    if part is not None and part.initial:
        return int(np.sign(part.initial))
    from xcheck.circuit.expand import build_circuit
    from xcheck.circuit.parameters import parameters_from_fixture
    from xcheck.errors import XcheckError

    try:
        circuit = build_circuit(fixture, parameters_from_fixture(fixture))
        return _predicted_sign(circuit)
    except (XcheckError, ValueError, np.linalg.LinAlgError):
        return None


def _level_before(circuit) -> float:
    """The probe's reading before the event: only the charged capacitors hold a
    voltage and no current flows (the loop is still open), so a voltage probe reads
    the capacitor voltages along a path between its nodes (through a capacitor where
    one joins the same two nodes) and a current probe reads 0."""
    import networkx as nx

    if circuit.probe_current is not None:
        return 0.0
    graph = nx.Graph()
    for element in circuit.elements:
        a, b = element.nodes
        here = graph.get_edge_data(a, b)
        if here is None or (element.kind == "C" and here["element"].kind != "C"):
            graph.add_edge(a, b, element=element)
    plus, minus = circuit.probe
    path = nx.shortest_path(graph, plus, minus)
    level = 0.0
    for here, there in zip(path[:-1], path[1:]):
        element = graph[here][there]["element"]
        if element.kind == "C" and element.initial:
            level += element.initial if element.nodes == (here, there) else -element.initial
    return level


def _predicted_sign(circuit) -> int | None:
    """From the exact response: the first swing away from the level before the event
    (its largest excursion within the dominant ring's first half period, or five
    time constants of a response that does not ring). A natural response counts the
    start above the level it swings towards, so a downward first swing is positive."""
    from xcheck.engines.exact import ExactEngine, dominant_ring

    engine = ExactEngine(circuit)
    model = engine.model()
    poles = np.linalg.eigvals(model.a[0])
    slowest = float(np.min(-poles.real)) if poles.size else 0.0
    if not slowest > 0:
        return None
    ring = dominant_ring(engine, model)
    span = math.pi / ring[0] if ring is not None else 5.0 / slowest
    before = 0.0 if circuit.response == "step" or circuit.starts_settled else _level_before(circuit)
    if circuit.starts_settled:
        before = float(engine.signal(np.array([0.0]), model)[0, 0])
    early = engine.signal(np.linspace(0.0, span, 401), model)[0] - before
    first = float(early[np.argmax(np.abs(early))])
    sign = int(np.sign(first))
    return (sign if circuit.response == "step" else -sign) or None


def measure(
    fixture: Fixture,
    *,
    trace: str | Path | None = None,
    peaks: str | Path | None = None,
    column: str | int | None = None,
    event_time: float | None = None,
    keep_all: bool = False,
) -> Measured:
    """Read, align and estimate one measurement for ``fixture``.

    Parameters
    ----------
    fixture
        Gives the response kind and the expected polarity.
    trace, peaks
        Exactly one of a scope export or a peak table.
    column
        Channel of the trace (name or index).
    event_time
        Manual event time (s, file time base).
    keep_all
        Keep a peak table's readings that the ring-down estimate flags as off the
        envelope (left out of every fit by default, and said so).

    Returns
    -------
    Measured
    """
    found = ringdown_from_file(
        peaks if peaks is not None else trace, peaks=peaks is not None, column=column,
        event_time=event_time, expect=fixture.response, expected_sign=_expected_sign(fixture),
        allow_aperiodic=True,
        reading_floor=fixture.scope.reading_floor if fixture.scope is not None else 0.0,
    )
    estimate = found.estimate
    if found.is_peak_table:
        flagged = _flagged_readings(found.time, estimate) if not keep_all else np.zeros(
            found.time.size, bool)
        findings = list(_envelope_findings(estimate))
        if flagged.any():
            which = ", ".join(f"#{k} (t = {format_eng(found.time[k], 's')})"
                              for k in np.flatnonzero(flagged))
            findings.append(
                f"Reading{'s' if flagged.sum() > 1 else ''} {which} "
                f"{'were' if flagged.sum() > 1 else 'was'} left out of every fit: the ring-down "
                "estimate flags it as off the envelope of the others (a misread cursor?); "
                "--keep-all keeps every reading.")
        return MeasuredPeaks(str(peaks), found.time - found.time[0], found.voltage,
                             flagged, found.uncertainty, estimate, None,
                             tuple(findings), tuple(estimate.envelope.findings),
                             found.time_resolution)
    excluded = np.asarray(found.excluded, bool)
    alignment = found.alignment
    findings = []
    if excluded.any():
        findings.append(
            f"{int(excluded.sum())} samples sat in runs at the record's extreme value (clipping "
            "at the converter's rail, or a quiet level resting on one converter step) and were "
            "left out of every fit."
        )
    if alignment.inverted:
        findings.append("The probe looks inverted: the trace's polarity is opposite to the fixture's.")
    notes = list(alignment.notes)
    if alignment.pre_event_samples > 10:
        notes.append(
            f"Before the event the voltage drifted at {format_eng(alignment.droop_per_s, 'V')}/s "
            "(a charged capacitor droops through leakage and probe loading); pre-event noise "
            f"{format_eng(alignment.noise_rms, 'V')} RMS, baseline {format_eng(alignment.baseline, 'V')}."
        )
    if getattr(estimate, "aperiodic", False):
        notes.extend(estimate.notes)
        findings.append(_aperiodic_finding(estimate))
    else:
        notes.extend(estimate.envelope.findings)
        findings.extend(_envelope_findings(estimate))
    if found.probe_factor != 1.0:
        notes.insert(0, (
            f"The file's preamble states a probe attenuation of {found.probe_factor:g}: its "
            f"values were multiplied by {found.probe_factor:g} (taken as volts at the scope "
            "input). If the export is already scaled to the probe tip, delete that line."))
    instrument = None
    if alignment.pre_event_samples > 10 and math.isfinite(alignment.noise_rms) \
            and alignment.noise_rms > 0:
        instrument = alignment.noise_rms
        if found.resolution and found.resolution > instrument:
            # As the estimator counts it: a quiet baseline sits in one converter code,
            # a moving signal carries about q / sqrt(12) of quantisation noise.
            instrument = math.hypot(instrument, found.resolution / math.sqrt(12.0))
    return MeasuredTrace(str(trace), found.time, found.voltage, excluded, None, estimate,
                         alignment, tuple(findings), tuple(notes),
                         instrument_noise=instrument, probe_factor=found.probe_factor)


def _flagged_readings(time: np.ndarray, estimate: RingdownEstimate) -> np.ndarray:
    """Mask over a peak table's readings of those the estimate flags and leaves out of
    its own main estimate (a flagged pattern it keeps is systematic, not a misreading)."""
    mask = np.zeros(time.size, bool)
    if not getattr(estimate, "excludes_flagged", False):
        return mask
    times = np.asarray(estimate.extrema_time, float)
    for index in estimate.flagged_extrema:
        if 0 <= index < times.size:
            mask |= np.isclose(time, times[index], rtol=0, atol=1e-12 * max(abs(times[index]), 1e-30))
    if mask.sum() > time.size - 3:  # never leave fewer than three readings
        mask[:] = False
    return mask


def _envelope_findings(estimate: RingdownEstimate) -> tuple[str, ...]:
    """Envelope findings for the verdict: only when something deviates."""
    said = estimate.envelope.findings
    if estimate.envelope_exponential and not estimate.flagged_extrema:
        # A peak table too short to tell says so instead (ringdown/reading_misses.py).
        caveats = tuple(f[0].upper() + f[1:] + "." for f in said if f.startswith("with "))
        return caveats or ("The extrema decay as one exponential within their uncertainties.",)
    return tuple(said)


def _aperiodic_finding(estimate: AperiodicEstimate) -> str:
    """The verdict's sentence for a measurement that settles without ringing."""
    taus = " and ".join(f"{format_eng(t.value, 's')} ± {format_eng(t.stderr, 's')}"
                        for t in estimate.time_constants)
    text = f"The measurement does not ring: it settles as a {estimate.regime} response"
    if estimate.regime == "first order":
        return text + f" with time constant {taus}."
    zeta = estimate.damping_ratio
    text += f" with time constant{'s' if len(estimate.time_constants) > 1 else ''} {taus}"
    if zeta is not None:
        text += f" (zeta {zeta.value:.3g} ± {zeta.stderr:.2g})"
    return text + "."
