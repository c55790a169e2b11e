"""The frequency-domain data types: a measured :class:`FrequencySweep` and :class:`LcrReadings`.

A sweep is complex values against frequency, SI units, frozen, with read-only arrays,
like :class:`~xcheck.capture.types.Trace`. It says what it holds (``quantity``): an
impedance in ohms, or a transfer function (dimensionless, V/V, A/A, or A/V and V/A for
a transadmittance or transimpedance gain).

LCR-meter readings become a :class:`FrequencySweep` of impedance as well, because the
impedance is what a model predicts and what every later step (resonances, fits)
compares with; the meter's equivalent circuit (a series or parallel C, L or R) is an
interpretation of that impedance, not a measurement of its own. :class:`LcrReadings`
keeps the numbers as the meter displayed them beside that sweep (the primary value,
ESR, D, Q or phase, and the circuit), because a meter's accuracy is specified on those
numbers and a report should quote them as read.

Readers live beside this module, one per format: :mod:`xcheck.capture.sweep_csv`,
:mod:`xcheck.capture.touchstone`, :mod:`xcheck.capture.lcr_table`. Resonances are found
by :mod:`xcheck.capture.resonance`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Mapping

import numpy as np

from xcheck.errors import TraceError

__all__ = [
    "LCR_PRIMARY",
    "LCR_SECONDARY",
    "MAX_FREQUENCY_HZ",
    "MAX_LCR_ROWS",
    "MAX_SWEEP_POINTS",
    "MIN_SWEEP_POINTS",
    "QUANTITY_UNITS",
    "SWEEP_MAX_BYTES",
    "SWEEP_VALUE_LIMIT",
    "FrequencySweep",
    "LcrReadings",
    "SweepError",
]

#: Fewest points a swept measurement (CSV, Touchstone) may have: a resonance or a slope
#: needs three. An LCR table may hold a single reading.
MIN_SWEEP_POINTS = 3
#: Most points accepted in one sweep (far beyond a network or impedance analyser's
#: largest sweep, about 100 000 points).
MAX_SWEEP_POINTS = 1_000_000
#: Most rows accepted in an LCR-meter table (readings are typed or logged one by one).
MAX_LCR_ROWS = 10_000
#: Largest sweep file read, on disk and (for gzip) decompressed.
SWEEP_MAX_BYTES = 64 * 2**20
#: Highest frequency accepted (Hz): 1 THz, far above any bench impedance measurement, so a
#: value above it is a wrong unit or column.
MAX_FREQUENCY_HZ = 1e12
#: Largest magnitude accepted (ohms, or the transfer function's unit): beyond the
#: insulation resistance of any bench part, so a larger value is a wrong unit or column.
SWEEP_VALUE_LIMIT = 1e15

#: What a sweep may hold, and the units each quantity may be in (``"1"``: dimensionless).
QUANTITY_UNITS: Mapping[str, tuple[str, ...]] = MappingProxyType(
    {"impedance": ("ohm",), "transfer": ("1", "V/V", "A/A", "A/V", "V/A")}
)
#: What an LCR meter's primary reading may be, and its SI unit.
LCR_PRIMARY: Mapping[str, str] = MappingProxyType(
    {"capacitance": "F", "inductance": "H", "impedance magnitude": "ohm"}
)
#: What its secondary reading may be, and the unit (``"1"``: dimensionless, phase in rad).
LCR_SECONDARY: Mapping[str, str] = MappingProxyType(
    {"resistance": "ohm", "D": "1", "Q": "1", "phase": "rad"}
)


class SweepError(TraceError):
    """A measured frequency sweep or LCR table cannot be used; ``problems`` lists why.

    A :class:`~xcheck.errors.TraceError` (a measurement that cannot be used), worded
    for a sweep in its summary line.
    """

    subject = "frequency sweep"


def _read_only(values: object, dtype: type) -> np.ndarray:
    """A read-only view of ``values`` as an array of ``dtype``."""
    view = np.asarray(values, dtype=dtype).view()
    view.flags.writeable = False
    return view


def _error_array(values: object, size: int, name: str) -> np.ndarray | None:
    """``values`` (None, a scalar or one value a point) as a read-only array, checked."""
    if values is None:
        return None
    array = np.broadcast_to(np.asarray(values, dtype=float), (size,)).copy()
    if not np.all(np.isfinite(array)) or np.any(array < 0):
        raise ValueError(f"{name} must be finite and non-negative")
    return _read_only(array, float)


@dataclass(frozen=True)
class FrequencySweep:
    """Complex values measured against frequency, SI units.

    Attributes
    ----------
    frequency
        Hz, positive, strictly increasing (read-only array).
    value
        The complex values (read-only array): ohms for an impedance, the unit in
        ``unit`` for a transfer function.
    quantity
        ``"impedance"`` or ``"transfer"`` (keys of :data:`QUANTITY_UNITS`).
    unit
        ``"ohm"`` for an impedance; ``"1"``, ``"V/V"``, ``"A/A"``, ``"A/V"`` or ``"V/A"``
        for a transfer function.
    source
        The file path as given.
    relative_error
        Standard error of ``abs(value)`` relative to it, one a point, or None when not
        stated (read-only array).
    phase_error
        Standard error of the phase (rad), one a point, or None when not stated.
    notes
        Remarks a reader made that are not errors (a phase in degrees that looks like
        radians, a sweep read in reverse order, how values were converted).
    label
        What was read, in words (``"'|Z| (ohm)' and 'phase (deg)'"``, ``"S11"``).
    metadata
        Preamble key -> value, as read (empty when the format has none).
    """

    frequency: np.ndarray
    value: np.ndarray
    quantity: str
    unit: str
    source: str
    relative_error: np.ndarray | None = None
    phase_error: np.ndarray | None = None
    notes: tuple[str, ...] = ()
    label: str = ""
    metadata: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))

    def __post_init__(self) -> None:
        frequency = _read_only(self.frequency, float)
        value = _read_only(self.value, complex)
        if frequency.ndim != 1 or frequency.shape != value.shape or frequency.size < 1:
            raise ValueError("frequency and value must be 1-D arrays of the same, non-zero length")
        if not (np.all(np.isfinite(frequency)) and np.all(np.isfinite(value))):
            raise ValueError("frequency and value must be finite")
        if frequency[0] <= 0 or np.any(np.diff(frequency) <= 0):
            raise ValueError("frequency must be positive and strictly increasing")
        if self.quantity not in QUANTITY_UNITS:
            raise ValueError(f"quantity must be one of {sorted(QUANTITY_UNITS)}, got {self.quantity!r}")
        if self.unit not in QUANTITY_UNITS[self.quantity]:
            raise ValueError(
                f"a {self.quantity} is in {QUANTITY_UNITS[self.quantity]}, got {self.unit!r}"
            )
        object.__setattr__(self, "frequency", frequency)
        object.__setattr__(self, "value", value)
        object.__setattr__(
            self, "relative_error", _error_array(self.relative_error, frequency.size, "relative_error")
        )
        object.__setattr__(
            self, "phase_error", _error_array(self.phase_error, frequency.size, "phase_error")
        )
        object.__setattr__(self, "notes", tuple(self.notes))
        object.__setattr__(self, "metadata", MappingProxyType(dict(self.metadata)))

    @property
    def omega(self) -> np.ndarray:
        """Angular frequency (rad/s)."""
        return 2 * math.pi * self.frequency

    @property
    def magnitude(self) -> np.ndarray:
        """``abs(value)``."""
        return np.abs(self.value)

    @property
    def phase(self) -> np.ndarray:
        """Phase of each value (rad, within ±pi)."""
        return np.angle(self.value)

    def __len__(self) -> int:
        return int(self.frequency.size)


@dataclass(frozen=True)
class LcrReadings:
    """LCR-meter readings as displayed, and the impedance they stand for.

    Attributes
    ----------
    sweep
        The readings converted to complex impedance (quantity ``"impedance"``), what
        every later step uses; its notes say how they were converted.
    primary
        ``"capacitance"``, ``"inductance"`` or ``"impedance magnitude"``.
    primary_values
        The primary readings in SI units (F, H or ohm), frequency order.
    secondary
        ``"resistance"`` (ESR or Rs for a series circuit, Rp for a parallel one), ``"D"``
        (dissipation factor), ``"Q"`` or ``"phase"`` (rad).
    secondary_values
        The secondary readings (ohm, dimensionless or rad), frequency order.
    circuit
        The meter's equivalent circuit: ``"series"`` or ``"parallel"``.
    """

    sweep: FrequencySweep
    primary: str
    primary_values: np.ndarray
    secondary: str
    secondary_values: np.ndarray
    circuit: str

    def __post_init__(self) -> None:
        if self.sweep.quantity != "impedance":
            raise ValueError("LCR readings stand for an impedance")
        if self.primary not in LCR_PRIMARY or self.secondary not in LCR_SECONDARY:
            raise ValueError(f"unknown reading kinds {self.primary!r}, {self.secondary!r}")
        if self.circuit not in ("series", "parallel"):
            raise ValueError(f"circuit must be 'series' or 'parallel', got {self.circuit!r}")
        for name in ("primary_values", "secondary_values"):
            values = _read_only(getattr(self, name), float)
            if values.shape != self.sweep.frequency.shape:
                raise ValueError(f"{name} must have one value a frequency")
            object.__setattr__(self, name, values)

    @property
    def source(self) -> str:
        """The file path as given."""
        return self.sweep.source

    def __len__(self) -> int:
        return len(self.sweep)
