"""The measured data types: a sampled :class:`Trace` and a cursor :class:`PeakTable`.

Both are frozen records in SI units with read-only arrays. Readers live beside this
module, one per format (:mod:`xcheck.capture.scope_csv`, :mod:`xcheck.capture.peak_table`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Mapping

import numpy as np

from xcheck.capture.clipping import CLIP_RUN
from xcheck.errors import TraceError
from xcheck.values import format_eng

__all__ = [
    "CLIP_RUN",
    "MAX_EXAMPLES",
    "MAX_PEAK_ROWS",
    "MIN_PEAKS",
    "MIN_SAMPLES",
    "ADVISED_TIME_CONSTANTS",
    "MIN_TIME_CONSTANTS",
    "PeakTable",
    "Trace",
    "check_enough_decay",
    "check_enough_ringing",
    "decay_shortfall",
]

#: Fewest rows a waveform may have.
MIN_SAMPLES = 10
#: Fewest extrema a peak table may have (two decrements need three extrema).
MIN_PEAKS = 3
#: Peak tables longer than this are waveforms, not cursor readings.
MAX_PEAK_ROWS = 10_000
#: At most this many examples of one kind of problem are listed in an error.
MAX_EXAMPLES = 5


# --------------------------------------------------------------------------- data types


def _read_only(values: object, dtype: type) -> np.ndarray:
    """A read-only view of ``values`` as an array (no copy when already one), so a
    frozen record's arrays cannot be changed through it by accident."""
    view = np.asarray(values, dtype=dtype).view()
    view.flags.writeable = False
    return view


@dataclass(frozen=True)
class Trace:
    """One measured channel against time, SI units.

    Attributes
    ----------
    time
        Seconds, strictly increasing (read-only array).
    voltage
        Volts (amperes for a current channel), probe attenuation applied when the
        metadata states one (read-only array).
    source
        The file path as given.
    column
        The channel's name as in the header (``"column 2"`` for the second column of a
        file without a header).
    metadata
        Preamble key -> value, as read.
    clipped
        True where the sample sits in a run of at least :data:`CLIP_RUN` samples at the
        record's maximum or minimum (the converter's rails); leave these out of fits.
    resolution
        The quantisation step (V) when the values visibly sit on a grid, else None.
    channels
        Every channel name available in the file (the time column excluded).
    probe_factor
        The probe attenuation the preamble stated and :attr:`voltage` was multiplied by
        (1 when none was applied).
    """

    time: np.ndarray
    voltage: np.ndarray
    source: str
    column: str
    metadata: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    clipped: np.ndarray | None = None
    resolution: float | None = None
    channels: tuple[str, ...] = ()
    probe_factor: float = 1.0

    def __post_init__(self) -> None:
        time = _read_only(self.time, float)
        voltage = _read_only(self.voltage, float)
        if time.shape != voltage.shape or time.ndim != 1:
            raise ValueError("time and voltage must be 1-D arrays of the same length")
        if self.clipped is None:
            clipped = _read_only(np.zeros(time.shape, dtype=bool), bool)
        else:
            clipped = _read_only(self.clipped, bool)
        if clipped.shape != time.shape:
            raise ValueError("clipped must have the same length as time")
        object.__setattr__(self, "time", time)
        object.__setattr__(self, "voltage", voltage)
        object.__setattr__(self, "clipped", clipped)
        object.__setattr__(self, "metadata", MappingProxyType(dict(self.metadata)))
        object.__setattr__(self, "channels", tuple(self.channels))

    @property
    def sample_interval(self) -> float:
        """Median spacing of the time axis (s)."""
        return float(np.median(np.diff(self.time))) if self.time.size > 1 else math.nan

    def __len__(self) -> int:
        return int(self.time.size)


@dataclass(frozen=True)
class PeakTable:
    """Extrema read off scope cursors: time (s), voltage (V), optional uncertainty (V).

    The time origin is arbitrary (the event, the trigger, or wherever the cursor was).
    ``time_resolution`` and ``voltage_resolution`` are the steps of the last digit the
    columns were written with (s, V; the finest over the rows), or None when unknown.
    """

    time: np.ndarray
    voltage: np.ndarray
    uncertainty: np.ndarray | None
    source: str
    time_resolution: float | None = None
    voltage_resolution: float | None = None

    def __post_init__(self) -> None:
        for name in ("time", "voltage", "uncertainty"):
            value = getattr(self, name)
            if value is not None:
                object.__setattr__(self, name, _read_only(value, float))

    def __len__(self) -> int:
        return int(self.time.size)


def check_enough_ringing(trace: Trace, period_s: float, *, minimum_periods: float = 1.5) -> None:
    """Raise unless ``trace`` covers at least ``minimum_periods`` periods of ringing.

    Call it once the period is known (from the estimate): with fewer than about one and
    a half periods neither the frequency nor the decay can be separated from an offset
    (common practice, no source). A record that does not ring at all has no period;
    check it with :func:`check_enough_decay` instead.

    Parameters
    ----------
    trace
        The aligned trace (time from the event).
    period_s
        The ringing period in seconds.
    minimum_periods
        The shortest acceptable record, in periods.

    Raises
    ------
    TraceError
        When the record (from its first sample) is shorter than that.
    """
    if not (period_s > 0 and math.isfinite(period_s)):
        raise ValueError(f"period_s must be a positive number, got {period_s!r}")
    duration = float(trace.time[-1] - trace.time[0]) if len(trace) else 0.0
    periods = duration / period_s
    if periods < minimum_periods:
        raise TraceError(
            trace.source,
            [
                f"the record covers {periods:.2f} periods of the {period_s:.6g} s ringing after "
                f"the event; at least {minimum_periods:g} are needed to tell frequency and "
                "decay apart: capture a longer time window (slower time base)"
            ],
        )


#: Fewest time constants of its slowest decay a record that does not ring must span.
MIN_TIME_CONSTANTS = 2.0
#: Time constants a record that does not ring is advised to span (e^-5 < 1 % left).
ADVISED_TIME_CONSTANTS = 5.0


def decay_shortfall(
    duration_s: float, time_constant_s: float, *, minimum_time_constants: float = MIN_TIME_CONSTANTS
) -> str | None:
    """The problem, in words, of a non-ringing record too short for its decay; else None.

    With fewer than about two time constants the decay is still nearly a straight line
    and cannot be told from the level it settles at: amplitude, time constant and final
    level trade off against one another (common practice, no source). The advice is the
    one that helps such a record: a longer time window, about
    :data:`ADVISED_TIME_CONSTANTS` time constants.

    Parameters
    ----------
    duration_s
        The record's span from the event (s).
    time_constant_s
        The slowest time constant (s), e.g. fitted.
    minimum_time_constants
        The shortest acceptable record, in time constants.
    """
    if not (time_constant_s > 0 and math.isfinite(time_constant_s)):
        raise ValueError(f"time_constant_s must be a positive number, got {time_constant_s!r}")
    spans = duration_s / time_constant_s
    if spans >= minimum_time_constants:
        return None
    advised = ADVISED_TIME_CONSTANTS * time_constant_s
    return (
        f"the record does not ring and covers only {spans:.2f} time constants of its "
        f"slowest decay (time constant about {format_eng(time_constant_s, 's')}) after the "
        f"event; at least {minimum_time_constants:g} are needed to tell the decay from the level it "
        "settles at: capture a longer time window (slower time base), about "
        f"{ADVISED_TIME_CONSTANTS:g} time constants ({format_eng(advised, 's')}) or more"
    )


def check_enough_decay(
    trace: Trace, time_constant_s: float, *, minimum_time_constants: float = MIN_TIME_CONSTANTS
) -> None:
    """Raise unless a record that does not ring spans ``minimum_time_constants`` of its decay.

    The counterpart of :func:`check_enough_ringing` for an overdamped, critically
    damped or first-order response, which has no period; see :func:`decay_shortfall`.

    Parameters
    ----------
    trace
        The aligned trace (time from the event).
    time_constant_s
        The slowest time constant of the decay in seconds.
    minimum_time_constants
        The shortest acceptable record, in time constants.

    Raises
    ------
    TraceError
        When the record (from its first sample) is shorter than that.
    """
    duration = float(trace.time[-1] - trace.time[0]) if len(trace) else 0.0
    problem = decay_shortfall(
        duration, time_constant_s, minimum_time_constants=minimum_time_constants
    )
    if problem is not None:
        raise TraceError(trace.source, [problem])
