"""The result record of a response that settles without ringing (SI floats throughout).

A record that does not ring is estimated as a sum of real exponentials about the level it
settles at (:func:`xcheck.ringdown.aperiodic.estimate_aperiodic`). Its decay rates
``s1 < s2`` (1/s) are the magnitudes of the real natural frequencies of a second-order
circuit, whose characteristic polynomial is ``s^2 + 2 zeta omega0 s + omega0^2``:
hence ``omega0 = sqrt(s1 s2)`` and ``zeta = (s1 + s2) / (2 sqrt(s1 s2))`` (for a series
RLC ``1 / sqrt(L C)`` and ``(R / 2) sqrt(C / L)``; standard circuit theory, from memory).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType

import numpy as np

from xcheck.ringdown.result import Estimate, RingdownEstimate

OVERDAMPED = "overdamped"
CRITICALLY_DAMPED = "critically damped"
FIRST_ORDER = "first order"
#: Regimes an :class:`AperiodicEstimate` can report.
REGIMES = (OVERDAMPED, CRITICALLY_DAMPED, FIRST_ORDER)

#: Names of :attr:`AperiodicEstimate.model_parameters` (and the covariance's rows), by regime.
PARAMETER_NAMES: Mapping[str, tuple[str, ...]] = MappingProxyType(
    {
        OVERDAMPED: ("settled_level", "amplitude_1", "decay_rate_1", "amplitude_2", "decay_rate_2"),
        CRITICALLY_DAMPED: ("settled_level", "amplitude", "ramp", "decay_rate"),
        FIRST_ORDER: ("settled_level", "amplitude", "decay_rate"),
    }
)


def aperiodic_model(regime: str, time: np.ndarray, params: np.ndarray) -> np.ndarray:
    """Evaluate the model of ``regime`` with physical parameters (see :data:`PARAMETER_NAMES`).

    ``v_inf + A1 exp(-s1 t) + A2 exp(-s2 t)`` (overdamped), ``v_inf + (A + B t) exp(-s t)``
    (critically damped) or ``v_inf + A exp(-s t)`` (first order), ``t`` in seconds.
    """
    t = np.asarray(time, dtype=float)
    p = np.asarray(params, dtype=float)
    if regime == OVERDAMPED:
        level, a1, s1, a2, s2 = p
        return level + a1 * np.exp(np.clip(-s1 * t, -745, 700)) + a2 * np.exp(
            np.clip(-s2 * t, -745, 700)
        )
    if regime == CRITICALLY_DAMPED:
        level, a, b, s = p
        return level + (a + b * t) * np.exp(np.clip(-s * t, -745, 700))
    if regime == FIRST_ORDER:
        level, a, s = p
        return level + a * np.exp(np.clip(-s * t, -745, 700))
    raise ValueError(f"unknown regime {regime!r}; expected one of {', '.join(REGIMES)}")


@dataclass(frozen=True)
class AperiodicEstimate:
    """Time constants of a response that settles without ringing, with uncertainties.

    Attributes
    ----------
    regime
        ``"overdamped"`` (two real exponentials), ``"critically damped"``
        (``(A + B t) exp(-t / tau)``: the two time constants cannot be told apart) or
        ``"first order"`` (one exponential: a second term is not supported by the data).
    time_constants
        tau_i (s), slowest first: two for overdamped, one otherwise.
    decay_rates
        s_i = 1 / tau_i (1/s), the magnitudes of the real natural frequencies, same order.
    amplitudes
        A_i (V) at t = 0, one per exponential; the A of ``(A + B t)`` when critically damped.
    ramp
        B (V/s) of the critically damped form; None otherwise.
    natural_angular_frequency, natural_frequency
        omega0 = sqrt(s1 s2) (rad/s; ``1 / tau`` when critically damped) and
        f0 = omega0 / (2 pi) (Hz); None for a first-order response.
    damping_ratio
        zeta = (s1 + s2) / (2 sqrt(s1 s2)). Critically damped: 1 by the chosen model, with
        the standard error of the free second-order fit's zeta. None for first order.
    second_order_damping_ratio
        zeta of the free second-order fit (overdamped when above 1), so a reader of a
        critically damped result can see how close to 1 the data put it; None for a
        first-order response (whose second rate the data do not fix) or when that fit
        failed.
    settled_level
        v_inf (V), the level the response settles at.
    initial_volts
        The model at t = 0 (V).
    span_time_constants
        The fitted record's span in units of the slowest time constant.
    model_parameters
        Physical parameters (:data:`PARAMETER_NAMES` of the regime); see :meth:`model`.
    covariance
        Their covariance as reported.
    parameter_names
        Names of ``model_parameters`` in order.
    noise_sigma, noise_source
        Per-sample noise used for the uncertainties (V) and where it came from.
    samples_used, samples_excluded, effective_samples
        Samples fitted, left out (clipped, excluded), and corrected for correlation.
    residual_rms
        RMS of the fit residuals (V).
    information_criteria
        BIC of every model tried (``"constant"``, ``"first order"``, ``"critically
        damped"``, ``"second order"``); the lowest among the last three is the regime.
    method, notes, success
        How it was made, remarks in plain words, and False when the optimiser did not
        report convergence.
    """

    regime: str
    time_constants: tuple[Estimate, ...]
    decay_rates: tuple[Estimate, ...]
    amplitudes: tuple[Estimate, ...]
    ramp: Estimate | None
    natural_angular_frequency: Estimate | None
    natural_frequency: Estimate | None
    damping_ratio: Estimate | None
    second_order_damping_ratio: Estimate | None
    settled_level: Estimate
    initial_volts: Estimate
    span_time_constants: float
    model_parameters: np.ndarray
    covariance: np.ndarray
    noise_sigma: float
    noise_source: str
    samples_used: int
    samples_excluded: int
    effective_samples: float
    residual_rms: float
    information_criteria: Mapping[str, float] = field(
        default_factory=lambda: MappingProxyType({})
    )
    method: str = "trace: no ringing; sums of real exponentials by least squares, model by BIC"
    notes: tuple[str, ...] = ()
    success: bool = True

    def __post_init__(self) -> None:
        if self.regime not in REGIMES:
            raise ValueError(f"regime must be one of {', '.join(REGIMES)}, got {self.regime!r}")
        object.__setattr__(
            self, "information_criteria", MappingProxyType(dict(self.information_criteria))
        )

    @property
    def aperiodic(self) -> bool:
        """Always True (a :class:`~xcheck.ringdown.result.RingdownEstimate` says False)."""
        return True

    @property
    def parameter_names(self) -> tuple[str, ...]:
        """Names of :attr:`model_parameters` and of the covariance's rows."""
        return PARAMETER_NAMES[self.regime]

    @property
    def offset(self) -> Estimate:
        """The settled level under the name the ringing estimate uses for it."""
        return self.settled_level

    def model(self, time: np.ndarray) -> np.ndarray:
        """The fitted model at ``time`` (s), in volts."""
        return aperiodic_model(self.regime, time, self.model_parameters)

    def terms(self, time: np.ndarray) -> list[np.ndarray]:
        """Each term of the model about the settled level at ``time`` (s), in volts."""
        t = np.asarray(time, dtype=float)
        p = self.model_parameters
        if self.regime == OVERDAMPED:
            return [p[1] * np.exp(np.clip(-p[2] * t, -745, 700)),
                    p[3] * np.exp(np.clip(-p[4] * t, -745, 700))]
        return [self.model(t) - p[0]]

    def to_json(self) -> dict[str, object]:
        """Machine-readable form, SI units (keys carry the unit)."""

        def opt(item: Estimate | None) -> dict[str, float | None] | None:
            return None if item is None else item.to_json()

        return {
            "regime": self.regime,
            "aperiodic": True,
            "time_constants_s": [e.to_json() for e in self.time_constants],
            "decay_rates_per_s": [e.to_json() for e in self.decay_rates],
            "amplitudes_volts": [e.to_json() for e in self.amplitudes],
            "ramp_volts_per_s": opt(self.ramp),
            "natural_angular_frequency_rad_per_s": opt(self.natural_angular_frequency),
            "natural_frequency_hz": opt(self.natural_frequency),
            "damping_ratio": opt(self.damping_ratio),
            "second_order_damping_ratio": opt(self.second_order_damping_ratio),
            "settled_level_volts": self.settled_level.to_json(),
            "initial_volts": self.initial_volts.to_json(),
            "record_span_time_constants": float(self.span_time_constants),
            "noise_sigma_volts": float(self.noise_sigma),
            "noise_source": self.noise_source,
            "samples_used": int(self.samples_used),
            "samples_excluded": int(self.samples_excluded),
            "effective_samples": float(self.effective_samples),
            "residual_rms_volts": float(self.residual_rms),
            "bic": {k: float(v) for k, v in self.information_criteria.items()},
            "method": self.method,
            "notes": list(self.notes),
            "success": bool(self.success),
            "parameter_names": list(self.parameter_names),
            "model_parameters": [float(x) for x in self.model_parameters],
            "covariance": np.asarray(self.covariance, dtype=float).tolist(),
        }


#: What a trace estimate is: ringing (``regime == "underdamped"``) or aperiodic.
ResponseEstimate = RingdownEstimate | AperiodicEstimate
