"""Frequency-dependent losses: resistances whose value changes along a sweep.

A lumped circuit has one value per element; some losses grow with frequency and a sweep
shows it. Each :class:`FrequencyLaw` adds to one resistance element (its ``target``,
a part's ESR or winding resistance) an amount that depends on frequency, through
coefficients a fit may move:

- ``"skin"``: ``R(f) = R0 + k sqrt(f)``, k in ohm per root hertz. A conductor's AC
  resistance grows as the square root of frequency once the skin depth is below its
  radius (Terman, "Radio Engineers' Handbook", skin effect, from memory);
- ``"power"``: ``R(f) = R0 + k (f / f_ref)^p``, k in ohms at the reference frequency
  (the sweep's geometric centre, so k and p are nearly uncorrelated), p fitted
  (skin effect gives 1/2, proximity effect and core loss more; common practice, no
  source);
- ``"loss_tangent"``: a capacitor's dielectric loss as a series resistance
  ``tan(delta) / (2 pi f C)`` added to its ESR (the series-equivalent of a constant
  dissipation factor D = tan(delta) = omega C R_s; IEC 60384-1's definition of the
  tangent of the loss angle, from memory).

The coefficient keys are ``(part, "skin")``, ``(part, "loss_coefficient")`` with
``(part, "loss_exponent")``, and ``(part, "loss_tangent")``: fit values, not fixture
fields, so a circuit is always built without them and the law applied afterwards to the
element values (:func:`apply_laws`, the response of a frequency engine with them).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal, Mapping, Sequence

import numpy as np

from xcheck.circuit.parameters import ParameterKey
from xcheck.engines.frequency import FrequencyEngine
from xcheck.engines.swept import paired_response

LawKind = Literal["skin", "power", "loss_tangent"]

#: Words and units of each coefficient role, for reports.
COEFFICIENT_WORDS: Mapping[str, tuple[str, str]] = {
    "skin": ("skin-effect coefficient", "ohm/sqrt(Hz)"),
    "loss_coefficient": ("frequency-dependent loss at the reference frequency", "ohm"),
    "loss_exponent": ("exponent of the frequency-dependent loss", "1"),
    "loss_tangent": ("dielectric loss tangent", "1"),
}


@dataclass(frozen=True)
class FrequencyLaw:
    """One resistance element that changes with frequency.

    Attributes
    ----------
    kind
        ``"skin"``, ``"power"`` or ``"loss_tangent"``.
    target
        The (part, role) of the resistance the law adds to (``("C1", "esr")``).
    coefficient
        The key of the law's coefficient (k, or tan(delta)).
    exponent
        The key of p for ``"power"``; None otherwise.
    capacitance
        The (part, role) of the capacitance of a ``"loss_tangent"`` (``("C1",
        "value")``); None otherwise.
    reference
        f_ref of ``"power"`` (Hz).
    """

    kind: LawKind
    target: ParameterKey
    coefficient: ParameterKey
    exponent: ParameterKey | None = None
    capacitance: ParameterKey | None = None
    reference: float = 1.0

    @property
    def keys(self) -> tuple[ParameterKey, ...]:
        """The law's own coefficient keys (never fixture fields)."""
        return (self.coefficient,) + ((self.exponent,) if self.exponent else ())

    def added(self, frequencies: np.ndarray, values: Mapping[ParameterKey, np.ndarray | float]
              ) -> np.ndarray:
        """The resistance the law adds at ``frequencies`` (ohms), for coefficient and
        capacitance values looked up in ``values`` (scalars or one per frequency)."""
        f = np.asarray(frequencies, dtype=float)
        # A coefficient a fit merged away (undetermined, at zero) adds nothing.
        k = np.asarray(values.get(self.coefficient, 0.0), dtype=float)
        if self.kind == "skin":
            return k * np.sqrt(f)
        if self.kind == "power":
            assert self.exponent is not None
            p = np.asarray(values.get(self.exponent, 0.0), dtype=float)
            return k * (f / self.reference) ** p
        assert self.capacitance is not None
        c = np.asarray(values[self.capacitance], dtype=float)
        with np.errstate(divide="ignore"):
            return np.where(f > 0, k / (2.0 * math.pi * np.maximum(f, 1e-300) * c), np.inf)


def law_keys(laws: Sequence[FrequencyLaw]) -> frozenset[ParameterKey]:
    """Every coefficient key of ``laws``."""
    return frozenset(k for law in laws for k in law.keys)


def skin_law(part: str, role: str) -> FrequencyLaw:
    """``R(f) = R0 + k sqrt(f)`` on ``part``'s ``role`` resistance."""
    return FrequencyLaw("skin", (part, role), (part, "skin"))


def power_law(part: str, role: str, reference: float) -> FrequencyLaw:
    """``R(f) = R0 + k (f / reference)^p`` on ``part``'s ``role`` resistance."""
    return FrequencyLaw("power", (part, role), (part, "loss_coefficient"),
                        exponent=(part, "loss_exponent"), reference=float(reference))


def loss_tangent_law(part: str) -> FrequencyLaw:
    """A constant dielectric loss tangent of capacitor ``part``, added to its ESR."""
    return FrequencyLaw("loss_tangent", (part, "esr"), (part, "loss_tangent"),
                        capacitance=(part, "value"))


def element_keys(engine: FrequencyEngine) -> list[ParameterKey]:
    """The (part, role) of each column of ``engine``'s element values."""
    return [(e.part, e.role) for e in (engine.swept.element(n) for n in engine.names)]


def apply_laws(engine: FrequencyEngine, values: np.ndarray, laws: Sequence[FrequencyLaw],
               frequencies: np.ndarray, looked_up: Mapping[ParameterKey, float],
               keys: Sequence[ParameterKey] | None = None) -> np.ndarray:
    """``engine``'s response at ``frequencies`` with each law's loss added to its target.

    Parameters
    ----------
    engine
        The frequency engine of the measured circuit.
    values
        ``(1, n_elements)`` element values (SI).
    laws
        The frequency-dependent losses; none gives the plain response.
    frequencies
        Hz.
    looked_up
        The law coefficients and capacitances by key (a parameter set's values).
    keys
        :func:`element_keys` of ``engine`` when already known (a fit's hot path).

    Returns
    -------
    numpy.ndarray
        The complex response, one value a frequency.
    """
    f = np.asarray(frequencies, dtype=float)
    if not laws:
        return engine.response(f, values)[0]
    keys = element_keys(engine) if keys is None else keys
    rows = np.repeat(np.atleast_2d(values), f.size, axis=0)
    for law in laws:
        cols = [k for k, key in enumerate(keys) if key == law.target]
        rows[:, cols] += law.added(f, looked_up)[:, None]
    return paired_response(engine, rows, f)
