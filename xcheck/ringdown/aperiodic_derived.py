"""Series-circuit values implied by the time constants of a response that does not ring.

Series RLC (standard circuit theory, from memory): the natural response solves
``L C v'' + R C v' + v = 0``, whose characteristic roots ``-s1, -s2`` satisfy
``s1 s2 = 1 / (L C)`` and ``s1 + s2 = R / L``. With C known, ``L = 1 / (s1 s2 C)`` and
``R = (s1 + s2) / (s1 s2 C) = (tau1 + tau2) / C``; with L known, ``C = 1 / (s1 s2 L)``
and ``R = (s1 + s2) L``. Critically damped: ``s1 = s2 = s``. A first-order decay is an
RC (``R = tau / C``) or an RL loop (``R = L / tau``): one time constant fixes only one
product.

Uncertainties by the delta method from the estimate's covariance of the decay rates and
the given component's standard error (independent of the trace).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from xcheck.ringdown.aperiodic_result import CRITICALLY_DAMPED, AperiodicEstimate
from xcheck.ringdown.result import Estimate, propagate


@dataclass(frozen=True)
class AperiodicCircuit:
    """Given and implied C (F), L (H) and total series R (ohm); None where not known.

    Attributes
    ----------
    capacitance, inductance, resistance
        Each an :class:`~xcheck.ringdown.result.Estimate` or None.
    notes
        Which component was given and which implied, consistency remarks.
    """

    capacitance: Estimate | None = None
    inductance: Estimate | None = None
    resistance: Estimate | None = None
    notes: tuple[str, ...] = ()

    def to_json(self) -> dict[str, object]:
        """Plain-JSON form, SI units in the keys."""
        data: dict[str, object] = {"notes": list(self.notes)}
        for key, item in (
            ("capacitance_farads", self.capacitance),
            ("inductance_henries", self.inductance),
            ("series_resistance_ohms", self.resistance),
        ):
            if item is not None:
                data[key] = item.to_json()
        return data


def derive_aperiodic_circuit(
    estimate: AperiodicEstimate,
    *,
    capacitance: float | None = None,
    inductance: float | None = None,
    capacitance_stderr: float = 0.0,
    inductance_stderr: float = 0.0,
) -> AperiodicCircuit:
    """Series-circuit values implied by an aperiodic estimate and a known C and/or L.

    Parameters
    ----------
    estimate
        The aperiodic estimate (its decay rates and their covariance are used).
    capacitance, inductance
        A known C (F) and/or L (H).
    capacitance_stderr, inductance_stderr
        Standard errors of the given values (F, H), independent of the trace.

    Returns
    -------
    AperiodicCircuit

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
    rate_rows = [i for i, n in enumerate(names) if n.startswith("decay_rate")]
    if estimate.regime == CRITICALLY_DAMPED:
        rate_rows = rate_rows * 2  # critically damped: s1 = s2 = s, fully correlated
    k = len(rate_rows)
    cov = np.zeros((k + 2, k + 2))
    cov[:k, :k] = np.asarray(estimate.covariance, dtype=float)[np.ix_(rate_rows, rate_rows)]
    cov[k, k] = capacitance_stderr**2
    cov[k + 1, k + 1] = inductance_stderr**2
    x = np.concatenate(
        [np.asarray(estimate.model_parameters)[rate_rows], [capacitance or 1.0, inductance or 1.0]]
    )

    def est(func: Callable[[np.ndarray], float]) -> Estimate:
        value, stderr, _ = propagate(func, x, cov)
        return Estimate(value, stderr, None)

    cap = None if capacitance is None else Estimate(capacitance, capacitance_stderr, None)
    ind = None if inductance is None else Estimate(inductance, inductance_stderr, None)
    res = None
    notes: list[str] = []
    if capacitance is None and inductance is None:
        return AperiodicCircuit(notes=("neither capacitance nor inductance given",))
    if k == 1:
        if capacitance is not None:
            res = est(lambda p: 1.0 / (p[0] * p[1]))
            notes.append(
                "first-order decay with capacitance given: an RC discharge, R = tau / C "
                "(inductance too small to show)"
            )
        else:
            res = est(lambda p: p[0] * p[2])
            notes.append(
                "first-order decay with inductance given: an RL decay, R = L / tau "
                "(capacitance too large to show)"
            )
        return AperiodicCircuit(cap, ind, res, tuple(notes))
    if capacitance is not None and inductance is None:
        ind = est(lambda p: 1.0 / (p[0] * p[1] * p[2]))
        res = est(lambda p: (p[0] + p[1]) / (p[0] * p[1] * p[2]))
        notes.append("capacitance given; inductance and total series resistance implied")
    elif inductance is not None and capacitance is None:
        cap = est(lambda p: 1.0 / (p[0] * p[1] * p[3]))
        res = est(lambda p: (p[0] + p[1]) * p[3])
        notes.append("inductance given; capacitance and total series resistance implied")
    else:
        res = est(lambda p: (p[0] + p[1]) * p[3])
        measured = est(lambda p: math.sqrt(p[0] * p[1]))
        expected = est(lambda p: 1.0 / math.sqrt(p[2] * p[3]))
        spread = math.hypot(measured.stderr, expected.stderr)
        gap = measured.value - expected.value
        notes.append(
            "capacitance and inductance given; resistance from the given inductance"
            + (
                f"; measured omega0 differs from 1/sqrt(LC) by {gap / spread:+.1f} "
                "standard errors"
                if spread > 0
                else ""
            )
        )
    return AperiodicCircuit(cap, ind, res, tuple(notes))
