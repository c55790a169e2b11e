"""Checks every sweep reader makes on its columns, worded with the file's line numbers.

Used by :mod:`xcheck.capture.sweep_csv`, :mod:`xcheck.capture.touchstone` and
:mod:`xcheck.capture.lcr_table`: frequencies (positive, below
:data:`~xcheck.capture.sweep_types.MAX_FREQUENCY_HZ`, no repeats, in one direction),
magnitudes within :data:`~xcheck.capture.sweep_types.SWEEP_VALUE_LIMIT`, enough
points, and the stated standard errors. Each returns problems as text; the reader
raises them together as one :class:`~xcheck.capture.sweep_types.SweepError`.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from xcheck.capture.sweep_types import MAX_FREQUENCY_HZ, SWEEP_VALUE_LIMIT, SweepError
from xcheck.capture.types import MAX_EXAMPLES

__all__ = [
    "error_arrays",
    "frequency_problems",
    "listed",
    "magnitude_problems",
    "where",
]


def where(lines: Sequence[int] | np.ndarray | None, k: int) -> str:
    """``"line 12"`` for point ``k`` (0-based) when line numbers are known, else ``"point 3"``."""
    return f"line {int(lines[k])}" if lines is not None else f"point {k + 1}"


def listed(items: list[str], total: int) -> str:
    """The first :data:`MAX_EXAMPLES` items joined, and how many more there are."""
    more = f" and {total - len(items)} more" if total > len(items) else ""
    return "; ".join(items) + more


def frequency_problems(
    frequency: np.ndarray, lines: Sequence[int] | np.ndarray | None, label: str
) -> tuple[list[str], bool]:
    """Problems with a frequency column, and whether it falls steadily (to be reversed).

    Parameters
    ----------
    frequency
        The frequencies in Hz, in file order (finite).
    lines
        The line number of each point, or None when the format has none to give.
    label
        The column in words, for the messages.

    Returns
    -------
    problems, reversed
        Problems found (empty when none); True when the frequencies fall strictly from
        point to point (a sweep run downwards, read in reverse).
    """
    problems = []
    bad = np.flatnonzero(~(frequency > 0))
    if bad.size:
        shown = [f"{where(lines, int(k))} reads {frequency[k]:.9g} Hz" for k in bad[:MAX_EXAMPLES]]
        problems.append(
            f"{label} must be above 0 Hz: {listed(shown, bad.size)}; remove a DC point and "
            "check the column's unit"
        )
    high = np.flatnonzero(frequency > MAX_FREQUENCY_HZ)
    if high.size:
        shown = [f"{where(lines, int(k))} reads {frequency[k]:.6g} Hz" for k in high[:MAX_EXAMPLES]]
        problems.append(
            f"{label} goes beyond {MAX_FREQUENCY_HZ:.0e} Hz, the most xcheck accepts: "
            f"{listed(shown, high.size)}; check the column's unit (Hz, kHz, MHz, GHz)"
        )
    steps = np.diff(frequency)
    same = np.flatnonzero(steps == 0)
    if same.size:
        shown = [
            f"{where(lines, int(k) + 1)} repeats the {frequency[k]:.9g} Hz of {where(lines, int(k))}"
            for k in same[:MAX_EXAMPLES]
        ]
        problems.append(
            f"{label} must not repeat a frequency: {listed(shown, same.size)}; keep one "
            "reading per frequency (average repeated readings) or split the sweeps into files"
        )
    rising, falling = int(np.count_nonzero(steps > 0)), int(np.count_nonzero(steps < 0))
    if rising and falling:
        wrong = np.flatnonzero(steps < 0) if rising >= falling else np.flatnonzero(steps > 0)
        word = "falls" if rising >= falling else "rises"
        shown = [
            f"{where(lines, int(k) + 1)} {word} to {frequency[k + 1]:.9g} Hz after "
            f"{frequency[k]:.9g} Hz on {where(lines, int(k))}"
            for k in wrong[:MAX_EXAMPLES]
        ]
        problems.append(
            f"{label} must rise (or fall) steadily from point to point: "
            f"{listed(shown, wrong.size)}; sort the rows by frequency, or save each sweep "
            "in its own file"
        )
    return problems, bool(falling and not rising and not same.size)


def magnitude_problems(
    value: np.ndarray, lines: Sequence[int] | np.ndarray | None, label: str, unit: str
) -> list[str]:
    """A problem when some ``abs(value)`` exceeds :data:`SWEEP_VALUE_LIMIT`."""
    big = np.flatnonzero(np.abs(value) > SWEEP_VALUE_LIMIT)
    if not big.size:
        return []
    shown = [f"{where(lines, int(k))} gives {abs(value[k]):.6g} {unit}" for k in big[:MAX_EXAMPLES]]
    return [
        f"{label} goes beyond {SWEEP_VALUE_LIMIT:.0e} {unit}, the most xcheck accepts: "
        f"{listed(shown, big.size)}; check the column's unit (dB or linear) and the column"
    ]


def error_arrays(
    source: str, size: int, relative_error: object, phase_error: object
) -> tuple[np.ndarray | None, np.ndarray | None]:
    """Stated standard errors as arrays of ``size`` (None where not stated), checked.

    Parameters
    ----------
    source
        The file, for the message.
    size
        Points in the sweep.
    relative_error
        None, one number, or one number a point: the standard error of the magnitude
        relative to it (0.01 for 1 %).
    phase_error
        None, one number, or one number a point: the standard error of the phase (rad).

    Raises
    ------
    SweepError
        When a value is negative, not finite, or the count does not match the sweep.
    """
    out: list[np.ndarray | None] = []
    problems = []
    for name, given in (("relative_error", relative_error), ("phase_error", phase_error)):
        if given is None:
            out.append(None)
            continue
        try:
            array = np.broadcast_to(np.asarray(given, dtype=float), (size,)).copy()
        except (TypeError, ValueError):
            problems.append(
                f"{name} must be one number or one number a point ({size}); got "
                f"{np.size(given)} values"
            )
            out.append(None)
            continue
        if not np.all(np.isfinite(array)) or np.any(array < 0):
            problems.append(f"{name} must be finite and zero or positive")
        out.append(array)
    if problems:
        raise SweepError(source, problems)
    return out[0], out[1]
