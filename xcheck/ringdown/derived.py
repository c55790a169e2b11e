"""Circuit quantities implied by a ring-down estimate, with propagated uncertainties.

Series RLC natural response (any circuit-theory text, e.g. the natural response of the
series RLC circuit in Nilsson & Riedel, Electric Circuits, from memory):
``alpha = R / (2 L)``, ``omega0 = 1 / sqrt(L C)``, ``omega_d = sqrt(omega0^2 - alpha^2)``.
Hence ``omega0 = sqrt(alpha^2 + omega_d^2)``, ``zeta = alpha / omega0``,
``Q = omega0 / (2 alpha)``; with C known ``L = 1 / (omega0^2 C)``, with L known
``C = 1 / (omega0^2 L)``, and in both cases the total series resistance ``R = 2 alpha L``.

Uncertainties by the delta method from the estimate's covariance of (alpha, omega_d)
and the given component's standard error (independent of the trace). The Cramér-Rao
bound is carried through the same gradients with the component taken as exact.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from xcheck.ringdown.result import Estimate, RingdownEstimate, propagate


@dataclass(frozen=True)
class DerivedCircuit:
    """Quantities of the equivalent series RLC, each an :class:`Estimate` (SI units).

    Attributes
    ----------
    neper_frequency
        alpha (1/s).
    angular_frequency
        omega_d (rad/s).
    damped_frequency
        f_d (Hz).
    natural_angular_frequency
        omega0 = sqrt(alpha^2 + omega_d^2) (rad/s).
    natural_frequency
        f0 = omega0 / (2 pi) (Hz).
    damping_ratio
        zeta = alpha / omega0.
    quality_factor
        Q = omega0 / (2 alpha).
    capacitance, inductance, resistance
        Given or implied C (F), L (H) and total series resistance R (ohm); None when
        neither C nor L was given.
    notes
        Which component was given and which implied, consistency remarks.
    """

    neper_frequency: Estimate
    angular_frequency: Estimate
    damped_frequency: Estimate
    natural_angular_frequency: Estimate
    natural_frequency: Estimate
    damping_ratio: Estimate
    quality_factor: Estimate
    capacitance: Estimate | None = None
    inductance: Estimate | None = None
    resistance: Estimate | None = None
    notes: tuple[str, ...] = ()

    def to_json(self) -> dict[str, object]:
        """Plain-JSON form, SI units in the keys."""
        data: dict[str, object] = {
            "neper_frequency_per_s": self.neper_frequency.to_json(),
            "angular_frequency_rad_per_s": self.angular_frequency.to_json(),
            "damped_frequency_hz": self.damped_frequency.to_json(),
            "natural_angular_frequency_rad_per_s": self.natural_angular_frequency.to_json(),
            "natural_frequency_hz": self.natural_frequency.to_json(),
            "damping_ratio": self.damping_ratio.to_json(),
            "quality_factor": self.quality_factor.to_json(),
            "notes": list(self.notes),
        }
        for key, item in (
            ("capacitance_farads", self.capacitance),
            ("inductance_henries", self.inductance),
            ("series_resistance_ohms", self.resistance),
        ):
            if item is not None:
                data[key] = item.to_json()
        return data


def derive_circuit(
    estimate: RingdownEstimate,
    *,
    capacitance: float | None = None,
    inductance: float | None = None,
    capacitance_stderr: float = 0.0,
    inductance_stderr: float = 0.0,
) -> DerivedCircuit:
    """Series-RLC quantities implied by a ring-down estimate.

    Parameters
    ----------
    estimate
        The ring-down estimate (its alpha, omega_d and their covariance are used).
    capacitance, inductance
        A known C (F) and/or L (H). With C the inductance is implied; with L the
        capacitance; with both, R comes from the given L and the notes compare the
        measured omega0 with ``1 / sqrt(L C)``.
    capacitance_stderr, inductance_stderr
        Standard errors of the given values (F, H), treated as independent of the trace.

    Returns
    -------
    DerivedCircuit
        Every quantity with its propagated standard error.

    Raises
    ------
    ValueError
        When a given component value is not positive or a standard error is negative.
    """
    for name, value in (("capacitance", capacitance), ("inductance", inductance)):
        if value is not None and not (value > 0 and math.isfinite(value)):
            raise ValueError(f"{name} must be a positive finite number, got {value!r}")
    if capacitance_stderr < 0 or inductance_stderr < 0:
        raise ValueError("standard errors must not be negative")
    names = list(estimate.parameter_names)
    ia, iw = names.index("neper_frequency"), names.index("angular_frequency")
    sub = np.ix_([ia, iw], [ia, iw])
    cov2 = np.asarray(estimate.covariance, dtype=float)[sub]
    crb2 = None if estimate.crb_covariance is None else np.asarray(estimate.crb_covariance)[sub]
    # Variables: alpha, omega_d, C, L (component variances independent of the trace).
    x = np.array(
        [
            estimate.neper_frequency.value,
            estimate.angular_frequency.value,
            capacitance or 1.0,
            inductance or 1.0,
        ]
    )
    cov = np.zeros((4, 4))
    cov[:2, :2] = cov2
    cov[2, 2] = capacitance_stderr**2
    cov[3, 3] = inductance_stderr**2
    crb = None
    if crb2 is not None:
        crb = np.zeros((4, 4))
        crb[:2, :2] = crb2

    def est(func: Callable[[np.ndarray], float]) -> Estimate:
        value, stderr, bound = propagate(func, x, cov, crb)
        return Estimate(value, stderr, bound)

    def omega0(p: np.ndarray) -> float:
        return math.hypot(p[0], p[1])

    notes: list[str] = []
    cap = ind = res = None
    if capacitance is not None:
        cap = Estimate(capacitance, capacitance_stderr, None)
    if inductance is not None:
        ind = Estimate(inductance, inductance_stderr, None)
    if capacitance is not None and inductance is None:
        ind = est(lambda p: 1.0 / (omega0(p) ** 2 * p[2]))
        res = est(lambda p: 2.0 * p[0] / (omega0(p) ** 2 * p[2]))
        notes.append("capacitance given; inductance and total series resistance implied")
    elif inductance is not None and capacitance is None:
        cap = est(lambda p: 1.0 / (omega0(p) ** 2 * p[3]))
        res = est(lambda p: 2.0 * p[0] * p[3])
        notes.append("inductance given; capacitance and total series resistance implied")
    elif inductance is not None and capacitance is not None:
        res = est(lambda p: 2.0 * p[0] * p[3])
        expected = est(lambda p: 1.0 / math.sqrt(p[2] * p[3]))
        measured = est(omega0)
        gap = measured.value - expected.value
        spread = math.hypot(measured.stderr, expected.stderr)
        notes.append(
            "capacitance and inductance given; resistance from the given inductance; "
            f"measured omega0 differs from 1/sqrt(LC) by {gap / spread:+.1f} standard errors"
            if spread > 0
            else "capacitance and inductance given; resistance from the given inductance"
        )
    return DerivedCircuit(
        neper_frequency=est(lambda p: p[0]),
        angular_frequency=est(lambda p: p[1]),
        damped_frequency=est(lambda p: p[1] / (2.0 * math.pi)),
        natural_angular_frequency=est(omega0),
        natural_frequency=est(lambda p: omega0(p) / (2.0 * math.pi)),
        damping_ratio=est(lambda p: p[0] / omega0(p)),
        quality_factor=est(lambda p: omega0(p) / (2.0 * p[0])),
        capacitance=cap,
        inductance=ind,
        resistance=res,
        notes=tuple(notes),
    )
