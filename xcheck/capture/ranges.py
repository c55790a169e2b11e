"""The range a measured time axis and channel must lie in, whatever the file says.

A time column near 1e300 s, samples 1e-300 s apart or readings that span 1e-320 V are
finite numbers, but no instrument records them and the estimators' arithmetic
(sums of squares of times, reciprocals of the sample interval, the decay fit)
overflows or loses every digit on them. They are a wrong unit, a damaged file or a
column that is not what it seems, so the readers (:mod:`xcheck.capture.scope_csv`,
:mod:`xcheck.capture.peak_table`) refuse them with the row named, using these checks.
The bounds are far outside anything measured (common practice, no source): a record
of 30 000 years, a sample interval of a femtosecond, a signal smaller than a femtovolt.
"""

from __future__ import annotations

import numpy as np

__all__ = ["CHANNEL_FLOOR", "MIN_TIME_STEP", "TIME_LIMIT", "span_problem",
           "time_range_problem"]

#: Largest magnitude of a time (s): about 30 000 years, beyond any clock a capture
#: could be stamped with (an epoch time in seconds is about 2e9).
TIME_LIMIT = 1e12
#: Smallest step between two times (s): one femtosecond, far below any digitiser's
#: sample interval or a cursor's resolution.
MIN_TIME_STEP = 1e-15
#: Smallest span of the readings (V or A): below any instrument's resolution.
CHANNEL_FLOOR = 1e-15


def time_range_problem(time: np.ndarray) -> tuple[int, str] | None:
    """The first row of ``time`` (seconds, increasing) out of range, and why.

    Parameters
    ----------
    time
        The times in seconds, already checked to be finite and strictly increasing.

    Returns
    -------
    tuple of (int, str) or None
        The row's index and the reason, worded to follow ``"line N: "``; None when
        every time is within :data:`TIME_LIMIT` and every step at least
        :data:`MIN_TIME_STEP`.
    """
    beyond = np.flatnonzero(np.abs(time) > TIME_LIMIT)
    if beyond.size:
        row = int(beyond[0])
        return row, (f"the time {time[row]:.6g} s is beyond ±{TIME_LIMIT:.0e} s, longer ago "
                     "than any capture; check the time column's unit and the metadata")
    steps = np.diff(time)
    close = np.flatnonzero(steps < MIN_TIME_STEP)
    if close.size:
        row = int(close[0]) + 1
        return row, (f"the time {time[row]:.6g} s is only {steps[row - 1]:.3g} s after the "
                     f"row before, less than {MIN_TIME_STEP:.0e} s, finer than any "
                     "instrument samples; check the time column's unit and the metadata")
    return None


def span_problem(values: np.ndarray, unit: str = "V") -> str | None:
    """Why the readings ``values`` span too little to hold a signal, or None.

    Parameters
    ----------
    values
        The readings in SI units, finite.
    unit
        Their unit, for the message.

    Returns
    -------
    str or None
        The reason (for example ``"the readings span only 2e-320 V, ..."``) when
        ``max - min`` is below :data:`CHANNEL_FLOOR`, else None.
    """
    span = float(np.max(values) - np.min(values)) if values.size else 0.0
    if span >= CHANNEL_FLOOR:
        return None
    return (f"the readings span only {span:.3g} {unit}, less than {CHANNEL_FLOOR:.0e} "
            f"{unit}, below any instrument's resolution; check the column and its unit")
