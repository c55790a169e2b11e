"""A frequency sweep as something candidates are fitted to, alone or with a time capture.

:class:`SweepObservation` compares a candidate's exact frequency response
(:class:`~xcheck.fitting.sweep_model.SweepModel`) with a measured sweep through the
complex log ratio ``ln(H_model / H_measured)``: its real part is the error of the
log-magnitude (a relative error of |H|), its imaginary part the phase error (rad,
wrapped to +-pi). Each is divided by the point's standard error: the stated one, else
:data:`ASSUMED_RELATIVE_ERROR` for both (a relative error on a log-magnitude scale, the
default the issue asks for; the noise level is then profiled from the residuals, so the
assumed size sets only the relative weight of the points, as for a scope trace). There
are no nuisance values: an impedance analyser or LCR meter is calibrated at its
terminals (common practice, no source).

Standard errors of a sweep are rarely stated; when they are (``relative_error`` and
``phase_error`` of :class:`~xcheck.capture.sweep_types.FrequencySweep`), ``-2 ln L`` is
chi-square, else the profiled ``n ln(chi2 / n)`` (:func:`xcheck.fitting.stats.profiled_deviance`).

:class:`JointObservation` fits one candidate to a time capture (a trace or a peak
table) and a sweep at once: the residual vector is both, and ``-2 ln L`` the sum of
both measurements' (their errors are independent), so AIC and BIC weigh the two
together. A frequency law's loss enters the time capture at the ring frequency the
ring-down estimate measured (:meth:`JointModel.time_values`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import ClassVar, Sequence

import numpy as np

from xcheck.capture.sweep_types import FrequencySweep
from xcheck.circuit.model import Circuit
from xcheck.errors import XcheckError
from xcheck.fitting import stats
from xcheck.fitting.frequency_laws import FrequencyLaw, law_keys
from xcheck.fitting.observation import Criteria, Nuisance, Observation, Residuals, Simulate
from xcheck.fitting.sweep_model import SweepModel
from xcheck.fixture.swept_table import SweptSetting

#: Relative standard error of |H| (and phase error in rad) assumed when the sweep
#: states none: 1 %, a typical impedance analyser's basic accuracy (common practice,
#: no source). With errors not stated the noise level is profiled, so this only sets
#: the points' relative weights.
ASSUMED_RELATIVE_ERROR = 0.01


def log_ratio(model: np.ndarray, measured: np.ndarray) -> np.ndarray:
    """``ln(model / measured)``: log-magnitude error + j phase error (wrapped)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.log(np.abs(model) / np.abs(measured)) + 1j * np.angle(model / measured)


@dataclass(frozen=True)
class SweepObservation(Observation):
    """A measured frequency sweep.

    ``time`` holds the frequencies twice and ``voltage`` the measured log-magnitude
    (ln |H|) then the phase (rad), so that the fit's "readings minus model" is the
    log-ratio error; the model's prediction (:attr:`Residuals.predicted`) is returned
    the same way.

    Attributes
    ----------
    sweep
        The measurement.
    setting
        What the sweep measured (the fixture's ``[swept]`` table).
    laws
        The frequency-dependent losses of the candidate fitted (none by default).
    stated
        True when the sweep states its standard errors.
    """

    sweep: FrequencySweep = field(default=None)  # type: ignore[assignment]
    setting: SweptSetting = field(default=None)  # type: ignore[assignment]
    laws: tuple[FrequencyLaw, ...] = ()
    stated: bool = False

    discrete: ClassVar[bool] = True

    @classmethod
    def of(cls, sweep: FrequencySweep, setting: SweptSetting,
           laws: Sequence[FrequencyLaw] = ()) -> "SweepObservation":
        """The observation of ``sweep`` as ``setting`` describes it."""
        f = np.asarray(sweep.frequency, float)
        stated = sweep.relative_error is not None or sweep.phase_error is not None
        rel = (np.asarray(sweep.relative_error, float) if sweep.relative_error is not None
               else np.full(f.size, ASSUMED_RELATIVE_ERROR))
        phase = (np.asarray(sweep.phase_error, float) if sweep.phase_error is not None
                 else rel)
        # A stated zero error would give an infinite weight: a floor of 1e-6.
        sigma = np.maximum(np.concatenate([rel, phase]), 1e-6)
        voltage = np.concatenate([np.log(np.abs(sweep.value)), np.angle(sweep.value)])
        return cls(time=np.concatenate([f, f]), voltage=voltage, sigma=sigma,
                   period=math.nan, sweep=sweep, setting=setting, laws=tuple(laws),
                   stated=stated)

    def with_laws(self, laws: Sequence[FrequencyLaw]) -> "SweepObservation":
        """The same sweep, fitted with ``laws``."""
        return replace(self, laws=tuple(laws))

    @property
    def frequency(self) -> np.ndarray:
        """The sweep's frequencies (Hz)."""
        return np.asarray(self.sweep.frequency, float)

    def fit_model(self, fixture, candidate, free) -> SweepModel:
        return SweepModel(fixture, candidate, free, self.setting, self.laws)

    def residuals(self, model, start: np.ndarray) -> Residuals:
        f = self.frequency
        measured = np.asarray(self.sweep.value, complex)
        sigma = self.sigmas
        empty = np.zeros(0)

        def predicted(physical: np.ndarray, nuisance: np.ndarray) -> np.ndarray:
            error = log_ratio(model.frequency_response(physical, f), measured)
            return self.voltage + np.concatenate([error.real, error.imag])

        def weighted(physical: np.ndarray, nuisance: np.ndarray) -> np.ndarray:
            error = log_ratio(model.frequency_response(physical, f), measured)
            return np.concatenate([error.real, error.imag]) / sigma

        return Residuals(weighted, predicted, (), start=empty, lower=empty, upper=empty,
                         si_scale=empty, si_origin=empty)

    def sample_count(self, n: int) -> float:
        return float(n)

    def deviance(self, chi2: float, n: int, n_effective: float) -> float:
        return chi2 if self.stated else stats.profiled_deviance(chi2, n, n_effective)

    def engine_curve(self, circuit: Circuit, nuisance: Nuisance,
                     simulate: Simulate) -> tuple[np.ndarray, float]:
        raise XcheckError("a sweep's ngspice leg is its .ac analysis "
                          "(xcheck.sweep_compare), not a transient run")

    def ring(self, curve: np.ndarray) -> tuple[float, float] | None:
        return None  # a sweep shows resonances, not a ring (xcheck.capture.resonance)


class JointModel:
    """A time model and a sweep model driven by the same free values."""

    def __init__(self, time_model, sweep_model: SweepModel, keep: np.ndarray,
                 laws: Sequence[FrequencyLaw], ring_frequency: float) -> None:
        self.time_model = time_model
        self.sweep_model = sweep_model
        self.response = time_model.response
        self.keep = keep
        self.laws = tuple(laws)
        self.ring_frequency = ring_frequency
        self.free = sweep_model.free

    @property
    def evaluations(self) -> int:
        return self.time_model.evaluations + self.sweep_model.evaluations

    def time_values(self, physical: np.ndarray) -> np.ndarray:
        """The time model's free values: the law coefficients left out, each law's loss
        at the ring frequency added to its target (when the target is free)."""
        physical = np.asarray(physical, float)
        out = physical[self.keep].copy()
        if self.laws:
            looked_up = self.sweep_model.parameters(physical).values
            kept = [f.key for f, k in zip(self.free, self.keep) if k]
            for law in self.laws:
                if law.target in kept:
                    out[kept.index(law.target)] += float(
                        law.added(np.array([self.ring_frequency]), looked_up)[0])
        return out

    def parameters(self, physical: np.ndarray):
        return self.sweep_model.parameters(physical)

    def nudged(self, key, value: float) -> "JointModel":
        self.time_model.nudged(key, value)
        self.sweep_model.nudged(key, value)
        return self

    def restore(self) -> None:
        self.time_model.restore()
        self.sweep_model.restore()

    def shape(self, physical: np.ndarray, times: np.ndarray) -> np.ndarray:
        return self.time_model.shape(self.time_values(physical), times)

    def extrema(self, physical: np.ndarray, count: int):
        return self.time_model.extrema(self.time_values(physical), count)

    def frequency_response(self, physical: np.ndarray, frequencies: np.ndarray) -> np.ndarray:
        return self.sweep_model.frequency_response(physical, frequencies)


@dataclass(frozen=True)
class JointObservation(Observation):
    """A time capture and a sweep fitted together (see the module docstring).

    Attributes
    ----------
    timed
        The trace or peak-table observation.
    swept
        The sweep observation.
    """

    timed: Observation = field(default=None)  # type: ignore[assignment]
    swept: SweepObservation = field(default=None)  # type: ignore[assignment]

    discrete: ClassVar[bool] = True

    @classmethod
    def of(cls, timed: Observation, swept: SweepObservation) -> "JointObservation":
        """Both measurements as one."""
        return cls(time=np.concatenate([timed.time, swept.time]),
                   voltage=np.concatenate([timed.voltage, swept.voltage]),
                   sigma=np.concatenate([timed.sigmas, swept.sigmas]),
                   period=timed.period, timed=timed, swept=swept)

    def fit_model(self, fixture, candidate, free) -> JointModel:
        laws = self.swept.laws
        coefficients = law_keys(laws)
        keep = np.array([f.key not in coefficients for f in free], bool)
        time_free = tuple(f for f, k in zip(free, keep) if k)
        time_model = self.timed.fit_model(fixture, candidate, time_free)
        ring = 1.0 / self.timed.period if self.timed.period > 0 else 0.0
        return JointModel(time_model, self.swept.fit_model(fixture, candidate, free), keep,
                          laws, ring)

    def residuals(self, model: JointModel, start: np.ndarray) -> Residuals:
        first = self.timed.residuals(_TimeView(model), start)
        second = self.swept.residuals(model, start)

        def predicted(physical: np.ndarray, nuisance: np.ndarray) -> np.ndarray:
            return np.concatenate([first.predicted(physical, nuisance),
                                   second.predicted(physical, nuisance[:0])])

        def weighted(physical: np.ndarray, nuisance: np.ndarray) -> np.ndarray:
            return np.concatenate([first.weighted(physical, nuisance),
                                   second.weighted(physical, nuisance[:0])])

        return Residuals(weighted, predicted, first.names, first.start, first.lower,
                         first.upper, first.si_scale, first.si_origin)

    def sample_count(self, n: int) -> float:
        m = self.swept.time.size
        return self.timed.sample_count(n - m) + self.swept.sample_count(m)

    def deviance(self, chi2: float, n: int, n_effective: float) -> float:
        raise XcheckError("a joint fit's deviance needs its residuals split by measurement")

    def criteria(self, chi2: float, n: int, k: int,
                 weighted: np.ndarray | None = None) -> Criteria:
        if weighted is None:
            raise XcheckError("a joint fit's criteria need its residuals")
        m = self.swept.time.size
        parts = ((self.timed, weighted[:n - m]), (self.swept, weighted[n - m:]))
        n_effective = 0.0
        deviance = 0.0
        for obs, block in parts:
            size = block.size
            n_block = obs.sample_count(size)
            n_effective += n_block
            deviance += obs.deviance(float(block @ block), size, n_block)
        return Criteria(n_effective, stats.aic(deviance, k),
                        stats.bic(deviance, k, n_effective))

    def engine_curve(self, circuit: Circuit, nuisance: Nuisance,
                     simulate: Simulate) -> tuple[np.ndarray, float]:
        return self.timed.engine_curve(circuit, nuisance, simulate)

    def ring(self, curve: np.ndarray) -> tuple[float, float] | None:
        return self.timed.ring(curve)


class _TimeView:
    """The joint model as the time observation sees it (its ``shape``/``extrema``
    take the joint free values)."""

    def __init__(self, model: JointModel) -> None:
        self._model = model
        self.response = model.response

    def shape(self, physical: np.ndarray, times: np.ndarray) -> np.ndarray:
        return self._model.shape(physical, times)

    def extrema(self, physical: np.ndarray, count: int):
        return self._model.extrema(physical, count)
