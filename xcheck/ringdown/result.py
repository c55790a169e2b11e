"""Result records of the ring-down estimators and the delta-method helper they share.

Every quantity is an SI float: seconds, volts, radians, 1/s (neper frequency), rad/s
(angular frequency), Hz. Formatting for people happens in the command and report modules.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

#: Order of the rows and columns of :attr:`RingdownEstimate.covariance`.
PARAMETER_NAMES: tuple[str, ...] = (
    "neper_frequency",
    "angular_frequency",
    "amplitude",
    "phase",
    "offset",
)


@dataclass(frozen=True)
class Estimate:
    """One estimated quantity.

    Attributes
    ----------
    value
        Best estimate, SI units.
    stderr
        Standard error: the estimate's standard deviation as reported, including the
        inflation for correlated residuals and, for few points, the coverage factor.
    crb
        Square root of the Cramér-Rao bound of the same quantity for the sampled model
        under white Gaussian noise of the noise level used; None where no such bound
        applies (peak tables, quantities depending on a component value given by hand).
    """

    value: float
    stderr: float
    crb: float | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "value", float(self.value))
        object.__setattr__(self, "stderr", float(self.stderr))
        if self.crb is not None:
            object.__setattr__(self, "crb", float(self.crb))

    def to_json(self) -> dict[str, float | None]:
        """``{"value": ..., "stderr": ..., "crb": ...}`` with plain floats."""
        return {
            "value": float(self.value),
            "stderr": float(self.stderr),
            "crb": None if self.crb is None else float(self.crb),
        }


@dataclass(frozen=True)
class ModeEstimate:
    """One damped sinusoid ``A exp(-alpha t) cos(omega_d t + phi)`` of a multi-mode fit."""

    neper_frequency: Estimate
    angular_frequency: Estimate
    damped_frequency: Estimate
    amplitude: Estimate
    phase: Estimate

    def to_json(self) -> dict[str, dict[str, float | None]]:
        """The mode's parameters, SI units, keyed like :meth:`RingdownEstimate.to_json`."""
        return {
            "neper_frequency_per_s": self.neper_frequency.to_json(),
            "angular_frequency_rad_per_s": self.angular_frequency.to_json(),
            "damped_frequency_hz": self.damped_frequency.to_json(),
            "amplitude_volts": self.amplitude.to_json(),
            "phase_rad": self.phase.to_json(),
        }


@dataclass(frozen=True)
class EnvelopeDiagnostics:
    """Whether the extrema decay as one exponential, and which of them do not.

    Attributes
    ----------
    exponential
        True when, after setting aside isolated outliers, the log-amplitudes of the
        extrema follow a straight line within their uncertainties (no significant
        curvature, no run of deviating extrema).
    flagged
        0-based indices (time order) of the extrema that deviate from the robust line.
    deviations
        Deviation of every extremum from the robust line, in standard errors.
    pattern
        ``"none"``, ``"isolated"``, ``"tail_high"``, ``"tail_low"``, ``"head_low"``,
        ``"head_high"``, ``"curved"``, ``"scattered"`` or ``"too_few"``.
    findings
        Plain-words sentences: what was seen and what usually causes it.
    robust_neper_frequency
        Decay rate (1/s) of the robust line through the log-amplitudes.
    curvature_t
        t-statistic of the quadratic term of the log-envelope (None when not tested).
    """

    exponential: bool
    flagged: list[int]
    deviations: np.ndarray
    pattern: str
    findings: list[str]
    robust_neper_frequency: float
    curvature_t: float | None = None

    def to_json(self) -> dict[str, object]:
        """Plain-JSON form."""
        return {
            "exponential": bool(self.exponential),
            "flagged_extrema": [int(i) for i in self.flagged],
            "deviations_stderr": [float(x) for x in self.deviations],
            "pattern": self.pattern,
            "findings": list(self.findings),
            "robust_neper_frequency_per_s": float(self.robust_neper_frequency),
            "curvature_t": None if self.curvature_t is None else float(self.curvature_t),
        }


@dataclass(frozen=True)
class RingdownEstimate:
    """Frequency, decay and amplitude of a ring-down, with uncertainties.

    The model is ``v(t) = A exp(-alpha t) cos(omega_d t + phi) + offset`` (plus further
    modes when asked for), which is exactly the capacitor voltage of a series RLC
    ring-down.

    Attributes
    ----------
    neper_frequency, angular_frequency, damped_frequency
        alpha (1/s), omega_d (rad/s) and f_d = omega_d / (2 pi) (Hz) of the main mode.
    amplitude, phase, offset
        A (V), phi (rad) and the offset (V).
    initial_volts
        The model's value at t = 0, ``A cos(phi) + offset`` summed over all modes.
    covariance, crb_covariance
        Covariance of (alpha, omega_d, A, phi, offset) in :data:`PARAMETER_NAMES` order
        as reported, and the Cramér-Rao bound of the same (None for peak tables).
    model_parameters
        ``[alpha_1, omega_1, a_1, b_1, ..., offset]`` of
        ``sum exp(-alpha t) (a cos(omega t) + b sin(omega t)) + offset``; see :meth:`model`.
    extrema_time, extrema_value
        The extrema used for the envelope (s, V, time order).
    noise_sigma
        Standard deviation of one sample's noise used for the uncertainties (V).
    noise_source
        Where ``noise_sigma`` came from, in words.
    samples_used, samples_excluded
        Samples (or readings) in the fit, and samples left out (clipped, excluded).
    effective_samples
        Samples corrected for correlation of the residuals, N / (1 + 2 sum rho_k).
    residual_rms
        RMS of the fit residuals (V).
    envelope
        The envelope diagnostics.
    method
        Which estimator produced this, in words.
    notes
        Remarks in plain words (fallbacks, scalings, warnings).
    extra_modes
        Further modes of a multi-mode fit, largest amplitude first.
    alternate
        The estimate made the other way regarding flagged extrema (all data when the
        main estimate leaves them out, and vice versa); None when nothing was flagged.
    excludes_flagged
        True when this estimate leaves the flagged extrema out.
    success
        False when the optimiser did not report convergence (values then doubtful).
    """

    neper_frequency: Estimate
    angular_frequency: Estimate
    damped_frequency: Estimate
    amplitude: Estimate
    phase: Estimate
    offset: Estimate
    initial_volts: Estimate
    covariance: np.ndarray
    crb_covariance: np.ndarray | None
    model_parameters: np.ndarray
    extrema_time: np.ndarray
    extrema_value: np.ndarray
    noise_sigma: float
    noise_source: str
    samples_used: int
    samples_excluded: int
    effective_samples: float
    residual_rms: float
    envelope: EnvelopeDiagnostics
    method: str
    notes: tuple[str, ...] = ()
    extra_modes: tuple[ModeEstimate, ...] = ()
    alternate: RingdownEstimate | None = None
    excludes_flagged: bool = False
    success: bool = True
    parameter_names: tuple[str, ...] = field(default=PARAMETER_NAMES)

    @property
    def regime(self) -> str:
        """``"underdamped"``: the record rings (an aperiodic estimate names its own regime)."""
        return "underdamped"

    @property
    def aperiodic(self) -> bool:
        """False: a ringing estimate (an ``AperiodicEstimate`` says True)."""
        return False

    @property
    def envelope_exponential(self) -> bool:
        """True when the extrema decay as one exponential (see :class:`EnvelopeDiagnostics`)."""
        return self.envelope.exponential

    @property
    def flagged_extrema(self) -> list[int]:
        """0-based indices (time order) of extrema off the exponential envelope."""
        return list(self.envelope.flagged)

    def model(self, time: np.ndarray) -> np.ndarray:
        """The fitted model evaluated at ``time`` (s), in volts."""
        from xcheck.ringdown.nls import damped_model

        return damped_model(np.asarray(time, dtype=float), self.model_parameters)

    def envelope_at(self, time: np.ndarray) -> np.ndarray:
        """Amplitude of the main mode's extrema at ``time``: ``A omega_d/omega0 exp(-alpha t)``.

        At every extremum of ``A exp(-alpha t) cos(omega_d t + phi)`` the cosine equals
        ``omega_d / omega0`` in magnitude, so the extrema lie on this curve.
        """
        alpha = self.neper_frequency.value
        omega = self.angular_frequency.value
        ratio = omega / math.hypot(alpha, omega)
        return self.amplitude.value * ratio * np.exp(-alpha * np.asarray(time, dtype=float))

    def to_json(self) -> dict[str, object]:
        """Machine-readable form, SI units (keys carry the unit)."""
        data: dict[str, object] = {
            "regime": self.regime,
            "aperiodic": False,
            "damped_frequency_hz": self.damped_frequency.to_json(),
            "neper_frequency_per_s": self.neper_frequency.to_json(),
            "angular_frequency_rad_per_s": self.angular_frequency.to_json(),
            "initial_volts": self.initial_volts.to_json(),
            "amplitude_volts": self.amplitude.to_json(),
            "phase_rad": self.phase.to_json(),
            "offset_volts": self.offset.to_json(),
            "envelope_exponential": bool(self.envelope_exponential),
            "flagged_extrema": self.flagged_extrema,
            "envelope": self.envelope.to_json(),
            "extrema": {
                "time_s": [float(x) for x in self.extrema_time],
                "value_volts": [float(x) for x in self.extrema_value],
            },
            "noise_sigma_volts": float(self.noise_sigma),
            "noise_source": self.noise_source,
            "samples_used": int(self.samples_used),
            "samples_excluded": int(self.samples_excluded),
            "effective_samples": float(self.effective_samples),
            "residual_rms_volts": float(self.residual_rms),
            "method": self.method,
            "notes": list(self.notes),
            "excludes_flagged_extrema": bool(self.excludes_flagged),
            "success": bool(self.success),
            "parameter_names": list(self.parameter_names),
            "covariance": np.asarray(self.covariance, dtype=float).tolist(),
        }
        if self.extra_modes:
            data["extra_modes"] = [mode.to_json() for mode in self.extra_modes]
        if self.alternate is not None:
            alt = self.alternate.to_json()
            for key in ("alternate", "extrema", "envelope", "covariance", "parameter_names",
                        "regime", "aperiodic"):
                alt.pop(key, None)
            data["alternate"] = alt
        return data


def propagate(
    func: Callable[[np.ndarray], float],
    x: np.ndarray,
    cov: np.ndarray,
    crb: np.ndarray | None = None,
) -> tuple[float, float, float | None]:
    """Delta-method propagation of a covariance through a scalar function.

    The gradient is taken by central differences. Returns the value, its standard
    deviation ``sqrt(g^T cov g)`` and, when ``crb`` is given, ``sqrt(g^T crb g)``, the
    bound of the transformed quantity (Kay 1993, vol. 1, sec. 3.8: the Cramér-Rao bound
    of a function of the parameters transforms with its gradient).
    """
    x = np.asarray(x, dtype=float)
    value = float(func(x))
    grad = gradient(func, x, cov)
    var = float(grad @ cov @ grad)
    bound = None if crb is None else math.sqrt(max(float(grad @ crb @ grad), 0.0))
    return value, math.sqrt(max(var, 0.0)), bound


def gradient(func: Callable[[np.ndarray], float], x: np.ndarray, cov: np.ndarray) -> np.ndarray:
    """Central-difference gradient of ``func`` at ``x``, steps scaled to the uncertainties."""
    x = np.asarray(x, dtype=float)
    scale = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    steps = 1e-4 * scale
    fallback = 1e-7 * np.maximum(np.abs(x), 1e-30)
    steps = np.where(steps > 0, steps, fallback)
    grad = np.empty_like(x)
    for i, h in enumerate(steps):
        up = x.copy()
        down = x.copy()
        up[i] += h
        down[i] -= h
        grad[i] = (func(up) - func(down)) / (2.0 * h)
    return grad


def transform(
    funcs: list[Callable[[np.ndarray], float]],
    x: np.ndarray,
    cov: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """Vector form of :func:`propagate`: values and full covariance ``G cov G^T``."""
    x = np.asarray(x, dtype=float)
    values = np.array([float(f(x)) for f in funcs])
    grads = np.array([gradient(f, x, cov) for f in funcs])
    return values, grads @ cov @ grads.T


def estimate_from(values: np.ndarray, cov: np.ndarray, crb: np.ndarray | None, i: int) -> Estimate:
    """The :class:`Estimate` of entry ``i`` of a vector with covariance (and bound)."""
    bound = None if crb is None else math.sqrt(max(float(crb[i, i]), 0.0))
    return Estimate(float(values[i]), math.sqrt(max(float(cov[i, i]), 0.0)), bound)


def wrap_phase(phi: float) -> float:
    """Phase wrapped into (-pi, pi]."""
    wrapped = math.remainder(phi, 2.0 * math.pi)
    return math.pi if wrapped == -math.pi else wrapped
