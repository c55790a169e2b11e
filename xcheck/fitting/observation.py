"""What candidates are fitted to: one class per kind of measurement.

Everything that depends on what was measured lives on the observation, so the fit and
the comparison never ask which kind they hold:

- its **residuals** (:meth:`Observation.residuals`): how the exact engine's prediction is
  compared with the readings, with the nuisance values this kind of measurement needs
  so that no candidate loses merely because of the instrument. A trace fits ``gain``
  (probe attenuation or vertical-scale error and the true initial voltage;
  dimensionless), ``offset`` (the channel's DC offset, V) and ``shift`` (error in the
  event time, s); a peak table fits the ``amplitude`` scale (dimensionless) and the
  ``time_origin`` (s) of the first extremum's model time in the table's time base;
- its **statistics** (:meth:`Observation.criteria`): the likelihood behind AIC and BIC
  and the effective sample count BIC uses;
- its **engine curve** (:meth:`Observation.engine_curve`): how a simulator's waveform
  (ngspice's) is turned into predicted readings, with the fitted nuisance values;
- its **ring** (:meth:`Observation.ring`): frequency and decay of an engine's
  prediction, where the measurement gives them.
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from dataclasses import dataclass
from typing import Callable, ClassVar, Mapping, NamedTuple, Protocol

import numpy as np

from xcheck.circuit.model import Circuit
from xcheck.engines.exact import ExactEngine, dominant_ring, simulate_exact
from xcheck.engines.waveform import Waveform
from xcheck.errors import XcheckError
from xcheck.fitting import stats
from xcheck.ringdown import estimate_ringdown
from xcheck.ringdown.extrema import extrema_near

#: Runs an engine up to a stop time (s) and returns its waveform.
Simulate = Callable[[float], Waveform]
#: Fitted nuisance values by name: (value, standard error), SI units.
Nuisance = Mapping[str, tuple[float, float]]


class FitModel(Protocol):
    """The exact engine as the fit drives it, for one candidate's free values
    (:class:`xcheck.fitting.model.CandidateModel`)."""

    #: ``"natural"`` or ``"step"``: which turning point a peak table starts at.
    response: str

    def shape(self, physical: np.ndarray, times: np.ndarray) -> np.ndarray:
        """Unscaled probe voltage at ``times`` (s from the event)."""

    def extrema(self, physical: np.ndarray, count: int) -> tuple[np.ndarray, np.ndarray]:
        """Times (s from the event) and probe voltages of the first ``count`` turning
        points, the event itself being turning point 0."""


@dataclass(frozen=True)
class Residuals:
    """An observation's residuals for one candidate, with its nuisance values.

    The optimiser works on nuisance values in scaled units (order one); ``si_scale``
    and ``si_origin`` turn them into SI values (``value * scale + origin``).

    Attributes
    ----------
    weighted
        ``(physical free values, scaled nuisance values) -> residuals / sigma``.
    predicted
        ``(physical free values, scaled nuisance values) -> predicted voltages`` at
        the observation's readings (V).
    names
        Nuisance value names, in order.
    start, lower, upper
        Start values and bounds of the scaled nuisance values.
    si_scale, si_origin
        Per nuisance value: SI units per scaled unit, and the SI value at 0.
    """

    weighted: Callable[[np.ndarray, np.ndarray], np.ndarray]
    predicted: Callable[[np.ndarray, np.ndarray], np.ndarray]
    names: tuple[str, ...]
    start: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    si_scale: np.ndarray
    si_origin: np.ndarray

    def in_si(self, scaled: np.ndarray, stderr: np.ndarray) -> dict[str, tuple[float, float]]:
        """Fitted nuisance values and their standard errors (scaled units) in SI units."""
        return {
            name: (float(v * f + o), float(s * abs(f)))
            for name, v, s, f, o in zip(self.names, scaled, stderr, self.si_scale, self.si_origin)
        }


class Criteria(NamedTuple):
    """Information criteria of a fit and the sample count BIC used."""

    n_effective: float
    aic: float
    bic: float


@dataclass(frozen=True)
class Observation(ABC):
    """Readings a candidate is fitted to.

    Attributes
    ----------
    time, voltage
        Seconds and volts.
    sigma
        Standard deviation of each voltage reading (V), scalar or per reading.
    period
        Ring period from the ring-down estimate (s); bounds the time shift and numbers
        the extrema of a peak table.
    """

    time: np.ndarray
    voltage: np.ndarray
    sigma: float | np.ndarray
    period: float

    #: True when the readings are isolated points (drawn as markers), not a record.
    discrete: ClassVar[bool]

    @property
    def sigmas(self) -> np.ndarray:
        """``sigma`` for every reading (V)."""
        return np.broadcast_to(np.asarray(self.sigma, float), self.voltage.shape)

    @abstractmethod
    def residuals(self, model: FitModel, start: np.ndarray) -> Residuals:
        """The residuals of ``model``, nuisance start values taken at ``start`` (the
        physical free values the fit starts from)."""

    @abstractmethod
    def sample_count(self, n: int) -> float:
        """Effective number of independent residuals among ``n`` (BIC's sample count)."""

    @abstractmethod
    def deviance(self, chi2: float, n: int, n_effective: float) -> float:
        """``-2 ln L`` up to a constant, from the weighted residual sum of squares."""

    def fit_model(self, fixture, candidate, free):
        """The model the fit drives for ``candidate``'s ``free`` values: the exact
        engine's time response (:class:`xcheck.fitting.model.CandidateModel`); a sweep
        returns its frequency response instead."""
        from xcheck.fitting.model import CandidateModel

        return CandidateModel(fixture, candidate, free)

    def criteria(self, chi2: float, n: int, k: int,
                 weighted: np.ndarray | None = None) -> Criteria:
        """AIC and BIC of ``n`` residuals with weighted sum of squares ``chi2`` and ``k``
        fitted values (see :mod:`xcheck.fitting.stats`); ``weighted`` (the residuals
        themselves) lets a joint observation split them by measurement."""
        n_effective = self.sample_count(n)
        deviance = self.deviance(chi2, n, n_effective)
        return Criteria(n_effective, stats.aic(deviance, k), stats.bic(deviance, k, n_effective))

    @abstractmethod
    def engine_curve(self, circuit: Circuit, nuisance: Nuisance,
                     simulate: Simulate) -> tuple[np.ndarray, float]:
        """An engine's prediction of the readings with the fitted ``nuisance`` values
        applied, and the largest difference of its waveform from the exact engine
        relative to the exact response's amplitude.

        Parameters
        ----------
        circuit
            The fitted candidate's circuit.
        nuisance
            The fit's nuisance values (:attr:`xcheck.fitting.fit.FitResult.nuisance`).
        simulate
            Runs the engine on ``circuit`` up to a stop time (s).
        """

    @abstractmethod
    def ring(self, curve: np.ndarray) -> tuple[float, float] | None:
        """f_d (Hz) and alpha (1/s) of an engine's prediction ``curve`` of the readings,
        estimated as the measurement was; None when this kind of reading does not
        give them or the curve does not ring."""


@dataclass(frozen=True)
class TraceObservation(Observation):
    """Samples of a record from the event at t = 0.

    Attributes
    ----------
    n_effective
        Effective number of independent samples (oversampled, correlated noise carries
        less information than its sample count suggests).
    """

    n_effective: float

    discrete: ClassVar[bool] = False

    def residuals(self, model: FitModel, start: np.ndarray) -> Residuals:
        time, voltage, sigma = self.time, self.voltage, self.sigmas
        shape0 = model.shape(start, time)
        # Linear least squares for gain and offset at the start values.
        design = np.column_stack([shape0, np.ones(time.size)])
        (gain0, offset0), *_ = np.linalg.lstsq(design, voltage, rcond=None)
        if not np.isfinite(gain0) or gain0 == 0:
            gain0 = 1.0
        amplitude = float(np.max(np.abs(voltage - offset0))) or 1.0
        max_shift = 0.25 * self.period
        shift_scale = self.period * 1e-3

        def predicted(physical: np.ndarray, nuisance: np.ndarray) -> np.ndarray:
            gain, offset, shift = nuisance[0], nuisance[1] * amplitude, nuisance[2] * shift_scale
            return gain * model.shape(physical, time - shift) + offset

        def weighted(physical: np.ndarray, nuisance: np.ndarray) -> np.ndarray:
            return (predicted(physical, nuisance) - voltage) / sigma

        return Residuals(
            weighted, predicted, ("gain", "offset", "shift"),
            start=np.array([gain0, offset0 / amplitude, 0.0]),
            lower=np.array([-np.inf, -np.inf, -max_shift / shift_scale]),
            upper=np.array([np.inf, np.inf, max_shift / shift_scale]),
            si_scale=np.array([1.0, amplitude, shift_scale]),
            si_origin=np.zeros(3),
        )

    def sample_count(self, n: int) -> float:
        return float(min(self.n_effective, n))

    def deviance(self, chi2: float, n: int, n_effective: float) -> float:
        # The noise level is profiled from the residuals (robust to a mis-stated sigma
        # on long records).
        return stats.profiled_deviance(chi2, n, n_effective)

    def engine_curve(self, circuit: Circuit, nuisance: Nuisance,
                     simulate: Simulate) -> tuple[np.ndarray, float]:
        times = np.maximum(self.time - nuisance["shift"][0], 0.0)
        wave = simulate(float(times[-1]) * 1.0001)
        raw = wave.at(times)
        theory = simulate_exact(circuit, times).probe_voltage
        amplitude = float(np.max(np.abs(theory))) or 1.0
        curve = nuisance["gain"][0] * raw + nuisance["offset"][0]
        return curve, float(np.max(np.abs(raw - theory)) / amplitude)

    def ring(self, curve: np.ndarray) -> tuple[float, float] | None:
        # Noise-free, so the estimate's own errors are negligible.
        amplitude = float(np.max(np.abs(curve - np.mean(curve)))) or 1.0
        try:
            est = estimate_ringdown(self.time, curve, noise_sigma=1e-6 * amplitude)
        except (XcheckError, ValueError, np.linalg.LinAlgError):
            return None
        return est.damped_frequency.value, est.neper_frequency.value


@dataclass(frozen=True)
class PeakObservation(Observation):
    """Extrema read off a record (a peak table); the time origin may be arbitrary.

    Attributes
    ----------
    time_sigma
        Standard deviation of the extremum times (s); 0 for a thousandth of a period.
    """

    time_sigma: float = 0.0
    #: Time of the table's first reading (s) when readings were left out before it,
    #: so that the kept readings keep their turning-point numbers; None: ``time[0]``.
    first_time: float | None = None

    discrete: ClassVar[bool] = True

    @property
    def n_effective(self) -> float:
        """Number of readings (each extremum is read independently)."""
        return float(self.time.size)

    def turning_points(self, response: str) -> np.ndarray:
        """Number each reading by the half-periods since the first, which is turning
        point 0 (the event itself) for a natural response and 1 (the first overshoot)
        for a step."""
        first = 1 if response == "step" else 0
        half = self.period / 2.0
        origin = self.time[0] if self.first_time is None else self.first_time
        return first + np.rint((self.time - origin) / half).astype(int)

    def residuals(self, model: FitModel, start: np.ndarray) -> Residuals:
        time, voltage, sigma = self.time, self.voltage, self.sigmas
        index = self.turning_points(model.response)
        count = int(index.max()) + 1
        time_sigma = self.time_sigma if self.time_sigma > 0 else self.period * 1e-3
        t_model0, v_model0 = model.extrema(start, count)
        ratio = voltage / np.where(v_model0[index] != 0, v_model0[index], 1.0)
        amplitude0 = float(np.median(ratio))
        # The table's time base is arbitrary: the first reading fixes where the event
        # was, within a little over half a period either way (the amplitude's sign
        # absorbs a reading numbered one turning point off).
        origin0 = float(time[0] - t_model0[index[0]])
        period = self.period

        def extrema(physical: np.ndarray, nuisance: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
            t_model, v_model = model.extrema(physical, count)
            return t_model[index] + origin0 + nuisance[1] * time_sigma, nuisance[0] * v_model[index]

        def predicted(physical: np.ndarray, nuisance: np.ndarray) -> np.ndarray:
            return extrema(physical, nuisance)[1]

        def weighted(physical: np.ndarray, nuisance: np.ndarray) -> np.ndarray:
            t_pred, v_pred = extrema(physical, nuisance)
            return np.concatenate([(v_pred - voltage) / sigma, (t_pred - time) / time_sigma])

        return Residuals(
            weighted, predicted, ("amplitude", "time_origin"),
            start=np.array([amplitude0, 0.0]),
            lower=np.array([-np.inf, -0.6 * period / time_sigma]),
            upper=np.array([np.inf, 0.6 * period / time_sigma]),
            si_scale=np.array([1.0, time_sigma]),
            si_origin=np.array([0.0, origin0]),
        )

    def sample_count(self, n: int) -> float:
        return float(n)

    def deviance(self, chi2: float, n: int, n_effective: float) -> float:
        # A handful of readings with stated (or estimated) errors: profiling the
        # variance from so few would hide a bad fit, so -2 ln L = chi^2 + const.
        return chi2

    def engine_curve(self, circuit: Circuit, nuisance: Nuisance,
                     simulate: Simulate) -> tuple[np.ndarray, float]:
        # The engine's turning points, numbered from the event as the fit numbers the
        # readings, scaled by the fitted amplitude.
        engine = ExactEngine(circuit)
        model = engine.model()
        ring = dominant_ring(engine, model)
        if ring is None:
            raise XcheckError("the fitted candidate does not ring, so it has no turning points")
        omega_d, alpha = ring
        index = self.turning_points(circuit.response)
        half = math.pi / omega_d
        count = int(index.max()) + 1
        wave = simulate((count + 0.5) * half)
        t_theory = np.arange(count) * half
        # The exact response on the engine's own time points, its turning points found the
        # same way: where the probed part has series resistance (ESR) a turning point is
        # not exactly at a multiple of the half period, so like is compared with like.
        dense = engine.signal(wave.time, model)[0]
        # The level the ring settles to: the exact response long after the event (60
        # time constants, e^-60 ~ 1e-26 of the swing left); 0 for a natural response.
        level = 0.0
        if circuit.response == "step" and alpha > 0:
            level = float(engine.signal(np.array([60.0 / alpha]), model)[0, 0])
        _, v_engine = extrema_near(wave.time, wave.probe_voltage, t_theory, half / 4, level)
        _, theory = extrema_near(wave.time, dense, t_theory, half / 4, level)
        if index[0] == 0:
            v_engine[0] = float(wave.probe_voltage[0])  # the event itself: the first sample
            theory[0] = float(dense[0])
        amplitude = float(np.max(np.abs(theory))) or 1.0
        curve = nuisance["amplitude"][0] * v_engine[index]
        # Engines compared where the readings are, not at turning points nobody read.
        return curve, float(np.max(np.abs(v_engine[index] - theory[index])) / amplitude)

    def ring(self, curve: np.ndarray) -> tuple[float, float] | None:
        return None
