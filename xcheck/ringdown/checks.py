"""Input checks of the trace estimators and the words of their refusals.

:func:`validated` turns the arrays into floats and reports every problem of them at
once. :func:`ringing_shortfall` measures how much ringing the extrema show and
:func:`too_little_ringing` says, in one sentence, what was found, what is needed and what
helps; the record that does not ring at all has its own sentences in
:mod:`xcheck.ringdown.aperiodic` and :func:`xcheck.capture.types.decay_shortfall`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from xcheck.errors import TraceError
from xcheck.ringdown.extrema import Extrema
from xcheck.values import format_eng

#: Periods of ringing above the noise needed for an estimate.
MIN_PERIODS = 1.5


def validated(
    time: np.ndarray, voltage: np.ndarray, exclude: np.ndarray | None, source: str
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Arrays as float and the mask of usable samples, every problem reported together.

    Raises
    ------
    TraceError
        Arrays of different shapes, a mask of the wrong shape, values that are not
        finite, times that do not increase, or fewer than 16 usable samples.
    """
    t = np.asarray(time, dtype=float)
    v = np.asarray(voltage, dtype=float)
    problems: list[str] = []
    if t.ndim != 1 or v.ndim != 1 or t.shape != v.shape:
        raise TraceError(
            source,
            [
                "time and voltage must be 1-D arrays of one length, got shapes "
                f"{t.shape} and {v.shape}"
            ],
        )
    keep = np.ones(len(t), dtype=bool)
    if exclude is not None:
        ex = np.asarray(exclude, dtype=bool)
        if ex.shape != t.shape:
            problems.append(
                f"the exclusion mask has shape {ex.shape}, the trace {t.shape}; "
                "pass one flag per sample"
            )
        else:
            keep = ~ex
    bad_t = ~np.isfinite(t)
    if bad_t.any():
        problems.append(
            f"{int(bad_t.sum())} time values are not finite (first at sample "
            f"{int(np.argmax(bad_t))}); remove or repair them"
        )
    bad_v = ~np.isfinite(v) & keep
    if bad_v.any():
        problems.append(
            f"{int(bad_v.sum())} voltage values are not finite (first at sample "
            f"{int(np.argmax(bad_v))}); remove them or mark them excluded"
        )
    if len(t) > 1 and not bad_t.any():
        d = np.diff(t)
        if np.any(d <= 0):
            i = int(np.argmax(d <= 0))
            problems.append(
                f"time does not increase at sample {i + 1} ({float(t[i]):.9g} then "
                f"{float(t[i + 1]):.9g}); times must be strictly increasing"
            )
    if int(keep.sum()) < 16:
        problems.append(
            f"only {int(keep.sum())} usable samples; a ring-down estimate needs at least 16 "
            "(and 1.5 periods of ringing)"
        )
    if problems:
        raise TraceError(source, problems)
    return t, v, keep


@dataclass(frozen=True)
class Shortfall:
    """How much ringing the extrema show, when it is not enough.

    Attributes
    ----------
    periods
        Periods from the record's start to half a period after the last extremum.
    extrema
        Extrema above the noise.
    frequency
        The strongest spectral frequency (Hz).
    span
        The record's span (s).
    sank
        True when the record goes on for more than a period after the last extremum:
        the ringing sank into the noise, so a longer record would not show more of it.
    """

    periods: float
    extrema: int
    frequency: float
    span: float
    sank: bool


def ringing_shortfall(t: np.ndarray, ext: Extrema, freq: float) -> Shortfall | None:
    """None when about 1.5 periods of ringing (two or more extrema) rise above the noise."""
    period = 1.0 / freq
    end = min(float(t[-1]), float(ext.time[-1]) + period / 2.0) if len(ext) else float(t[0])
    periods = (end - float(t[0])) * freq
    if periods >= MIN_PERIODS - 0.05 and len(ext) >= 2:
        return None
    sank = len(ext) >= 2 and float(t[-1]) - float(ext.time[-1]) > period
    return Shortfall(periods, len(ext), freq, float(t[-1] - t[0]), sank)


def too_little_ringing(short: Shortfall, *, finding: str = "", advice: str = "") -> str:
    """The refusal of a record with too little ringing, as one sentence.

    Parameters
    ----------
    short
        What the extrema showed.
    finding
        A further finding (e.g. a second-order fit's damping ratio), starting with "; ".
    advice
        What helps, replacing the default advice (a longer record, or lower noise when
        the ringing sank into the noise before the record ended).
    """
    freq = format_eng(short.frequency, "Hz")
    span = format_eng(short.span, "s")
    if short.extrema >= 2:
        found = (
            f"found about {short.periods:.1f} periods of ringing above the noise "
            f"({short.extrema} extrema, strongest frequency about {freq}) in a record of {span}"
        )
    else:
        record = short.span * short.frequency
        which, share = (
            ("no extremum", "no periods")
            if short.extrema == 0
            else ("only one extremum", "fewer than 0.5 periods")
        )
        length = (
            f"about {record:.1f} periods of the strongest frequency, {freq}"
            if record < 10
            else f"strongest frequency about {freq}"
        )
        found = (
            f"found {which} above the noise in a record of {span} ({length}), so {share} "
            "of ringing above the noise"
        )
    if not advice:
        if short.sank:
            advice = (
                "the ringing sinks into the noise well before the record ends, so a longer "
                "record will not help: lower the noise (averaging, a more sensitive range), "
                "check the column and the event time, or read the extrema into a peak table"
            )
        else:
            advice = (
                "capture a longer record (slower timebase), check the column and the event "
                "time, or read the extrema into a peak table"
            )
    return (
        f"{found}; at least {MIN_PERIODS} periods are needed (two or more extrema) to "
        f"estimate frequency and decay{finding}: {advice}"
    )
