"""Resonances in a sweep of complex values: where ``|Z|`` or ``|H|`` has a minimum or maximum.

Pure functions of (frequency in Hz, complex values), so measured sweeps and model
curves are treated alike.

- **Finding.** Local extrema of the magnitude in dB (20 log10) that stand out by at
  least ``min_prominence_db`` (scipy.signal.find_peaks' prominence); the first and last
  points are never extrema.
- **Frequency.** A parabola in log-frequency through the three points around the
  extremum, fitted to ``|v|**2`` at a minimum and ``|v|**-2`` at a maximum: a
  second-order resonance is symmetric in log-frequency (the series RLC reactance is
  2 omega0 L sinh(ln(omega / omega0))), and ``|Z|**2`` is then a parabola in it up to
  fourth-order terms (derived here, no source).
- **Q, two ways.** From the half-power (-3 dB) bandwidth: the frequencies on either
  side where the magnitude has moved by 10 log10(2) dB from the extremum (a factor of
  sqrt 2), interpolated linearly in log-frequency on sqrt(p - 1), p the power ratio to
  the extremum (straight for a second-order resonance); Q = f0 / (f_high - f_low),
  exact for a series RLC's impedance minimum. From the phase slope: Q = (f0 / 2) |dphi/df|
  at f0, which holds for any second-order resonance (for the series RLC,
  dphi/domega = 2 L / R at omega0); the slope is read from the three points nearest f0
  through tan(phi - phi(f0)) = ±Q (f / f0 - f0 / f), the second-order phase made linear,
  with phi(f0) interpolated in the unwrapped phase. The bandwidth is preferred when both half-power
  points lie in the sweep; otherwise the phase slope is used. :class:`Resonance` says
  which.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.signal import find_peaks

__all__ = [
    "HALF_POWER_DB",
    "Resonance",
    "find_resonances",
    "half_power_frequencies",
    "phase_slope_q",
    "refine_extremum",
]

#: The half-power level: 10 log10(2) dB, a factor of sqrt(2) in magnitude.
HALF_POWER_DB = 10 * math.log10(2)


@dataclass(frozen=True)
class Resonance:
    """One resonance of a sweep.

    Attributes
    ----------
    frequency
        Hz, refined by the parabola in log-frequency.
    magnitude
        ``abs(value)`` at ``frequency`` (the parabola's vertex, linear units).
    kind
        ``"minimum"`` or ``"maximum"`` of the magnitude.
    index
        The sweep point nearest the extremum (0-based).
    q
        The quality factor, by ``q_method``; None when neither way gives one.
    q_method
        ``"-3 dB bandwidth"``, ``"phase slope"`` or None.
    q_bandwidth, q_phase
        Q by each way, None where it cannot be had (a half-power point outside the
        sweep; a phase that does not change).
    bandwidth
        The half-power frequencies (low, high) in Hz, or None.
    """

    frequency: float
    magnitude: float
    kind: str
    index: int
    q: float | None
    q_method: str | None
    q_bandwidth: float | None
    q_phase: float | None
    bandwidth: tuple[float, float] | None


def _checked(frequency: object, values: object) -> tuple[np.ndarray, np.ndarray]:
    f = np.asarray(frequency, dtype=float)
    v = np.asarray(values, dtype=complex)
    if f.ndim != 1 or f.shape != v.shape or f.size < 3:
        raise ValueError("frequency and values must be 1-D arrays of the same length, at least 3")
    if not (np.all(np.isfinite(f)) and np.all(np.isfinite(v))):
        raise ValueError("frequency and values must be finite")
    if f[0] <= 0 or np.any(np.diff(f) <= 0):
        raise ValueError("frequency must be positive and strictly increasing")
    return f, v


def _decibels(values: np.ndarray) -> np.ndarray:
    magnitude = np.abs(values)
    tiny = np.finfo(float).tiny
    return 20 * np.log10(np.maximum(magnitude, tiny))


def refine_extremum(frequency: object, values: object, index: int) -> tuple[float, float]:
    """Frequency and magnitude of the extremum near point ``index``, by a parabola.

    Parameters
    ----------
    frequency
        Hz, positive, increasing.
    values
        Complex values.
    index
        A point that is a local extremum of the magnitude, not the first or last.

    Returns
    -------
    frequency, magnitude
        The vertex of the parabola through points ``index - 1 .. index + 1`` in
        (log-frequency, ``|v|**2``) for a minimum, (log-frequency, ``|v|**-2``) for a
        maximum, as Hz and magnitude; point ``index`` itself when the three points lie
        on a line or the vertex falls outside them. Near a second-order resonance
        ``|Z|**2 / R**2 = 1 + 4 Q**2 sinh(u)**2`` with u the log-frequency from f0,
        so that parabola is exact to order u**4.
    """
    f, v = _checked(frequency, values)
    if not 0 < index < f.size - 1:
        raise ValueError("index must be an interior point")
    x = np.log(f[index - 1 : index + 2])
    power = np.abs(v[index - 1 : index + 2]) ** 2
    minimum = power[1] <= power[0] and power[1] <= power[2]
    with np.errstate(divide="ignore"):
        y = power if minimum else 1 / power
    if not np.all(np.isfinite(y)):
        return float(f[index]), float(abs(v[index]))
    scale = float(y[1]) if y[1] > 0 else 1.0
    a, b, c = np.polyfit(x - x[1], y / scale, 2)
    if a <= 0:
        return float(f[index]), float(abs(v[index]))
    vertex = -b / (2 * a)
    if not (x[0] - x[1] <= vertex <= x[2] - x[1]):
        return float(f[index]), float(abs(v[index]))
    level = (c - b * b / (4 * a)) * scale
    if level <= 0:
        return float(math.exp(x[1] + vertex)), 0.0 if minimum else float(abs(v[index]))
    magnitude = math.sqrt(level) if minimum else 1 / math.sqrt(level)
    return float(math.exp(x[1] + vertex)), float(magnitude)


def _crossing(x: np.ndarray, y: np.ndarray, i: int, step: int, target: float) -> float | None:
    """Where rising ``y`` reaches ``target`` walking from point ``i`` by ``step``, in ``x``
    (linear interpolation); None when the sweep ends first or ``y`` turns back down
    (a neighbouring resonance)."""
    k = i
    while 0 <= k + step < x.size:
        nxt = k + step
        if y[nxt] >= target:
            t = (target - y[k]) / (y[nxt] - y[k])
            return float(x[k] + t * (x[nxt] - x[k]))
        if y[nxt] < y[k]:
            return None
        k = nxt
    return None


def half_power_frequencies(
    frequency: object, values: object, index: int, kind: str, level_db: float | None = None
) -> tuple[float, float] | None:
    """The half-power frequencies on either side of the extremum at point ``index``.

    Parameters
    ----------
    frequency
        Hz, positive, increasing.
    values
        Complex values.
    index
        The extremum's point.
    kind
        ``"minimum"`` (the magnitude rises by :data:`HALF_POWER_DB` at the half-power
        points) or ``"maximum"`` (it falls by that much).
    level_db
        The extremum's level in dB (default: point ``index``'s; pass the refined level).

    Returns
    -------
    tuple of float or None
        (low, high) in Hz, interpolated linearly in log-frequency (see the comment in
        the code for the quantity interpolated); None when
        either lies outside the sweep or beyond a neighbouring resonance.
    """
    f, v = _checked(frequency, values)
    if kind not in ("minimum", "maximum"):
        raise ValueError(f"kind must be 'minimum' or 'maximum', got {kind!r}")
    # The power ratio to the extremum, p = |v|**2 / |v0|**2 at a minimum (its inverse at a
    # maximum), is 1 + 4 Q**2 sinh(u)**2 for a second-order resonance (u: log-frequency
    # from f0), so sqrt(p - 1) = 2 Q |sinh u| is nearly straight in log-frequency on each
    # side; the half-power points are where it reaches 1 (derived here, no source).
    x = np.log(f)
    db = _decibels(v)
    level = db[index] if level_db is None else level_db
    with np.errstate(over="ignore"):  # far from the extremum: inf, still past the target
        ratio = 10 ** ((db - level) / 10) if kind == "minimum" else 10 ** ((level - db) / 10)
    y = np.sqrt(np.maximum(ratio - 1, 0.0))
    if y[index] >= 1:
        return None  # the sweep is too coarse: its nearest point is already past half power
    low = _crossing(x, y, index, -1, 1.0)
    high = _crossing(x, y, index, +1, 1.0)
    if low is None or high is None:
        return None
    return math.exp(low), math.exp(high)


def phase_slope_q(frequency: object, values: object, f0: float) -> float | None:
    """Q = (f0 / 2) |dphi/df| at ``f0``, from the unwrapped phase (see the module notes).

    Parameters
    ----------
    frequency
        Hz, positive, increasing.
    values
        Complex values.
    f0
        The resonance frequency (Hz), inside the sweep.

    Returns
    -------
    float or None
        The quality factor; None when the phase does not change there, or turns by a
        quarter cycle or more between the points nearest ``f0`` (too coarse a sweep).
    """
    f, v = _checked(frequency, values)
    if not f[0] <= f0 <= f[-1]:
        raise ValueError("f0 must lie inside the sweep")
    phase = np.unwrap(np.angle(v))
    centre = int(np.clip(np.searchsorted(f, f0), 1, f.size - 2))
    if f0 - f[centre - 1] < f[centre] - f0:
        centre = max(centre - 1, 1)
    pick = slice(centre - 1, centre + 2)
    # A second-order resonance has tan(phi - phi(f0)) = ±Q (f / f0 - f0 / f), whose slope
    # in f at f0 is the phase slope's (f0 / 2) dphi/df; fitting it through the three
    # nearest points reads that slope without the arctangent's curvature (derived here,
    # no source).
    reference = float(np.interp(f0, f, phase))
    offset = phase[pick] - reference
    if np.any(np.abs(offset) >= math.pi / 2):
        return None  # the phase turns by a quarter cycle between points: too coarse
    u = np.tan(offset)
    x = f[pick] / f0 - f0 / f[pick]
    # A straight line (the intercept takes up the interpolated phi(f0)'s small error).
    (_intercept, slope), *_rest = np.linalg.lstsq(np.column_stack((np.ones(3), x)), u, rcond=None)
    q = abs(float(slope))
    return q if q > 0 else None


def find_resonances(
    frequency: object, values: object, *, kind: str = "both", min_prominence_db: float = 3.0
) -> tuple[Resonance, ...]:
    """The resonances of a sweep, lowest frequency first.

    Parameters
    ----------
    frequency
        Hz, positive, strictly increasing.
    values
        Complex values (an impedance, a transfer function).
    kind
        ``"minimum"``, ``"maximum"`` or ``"both"``: which extrema of the magnitude.
    min_prominence_db
        How far (dB) an extremum must stand out from its surroundings.

    Returns
    -------
    tuple of Resonance
        Refined frequency, magnitude and Q of each (see the module notes).
    """
    f, v = _checked(frequency, values)
    if kind not in ("minimum", "maximum", "both"):
        raise ValueError(f"kind must be 'minimum', 'maximum' or 'both', got {kind!r}")
    db = _decibels(v)
    found: list[tuple[int, str]] = []
    if kind in ("maximum", "both"):
        found += [(int(i), "maximum") for i in find_peaks(db, prominence=min_prominence_db)[0]]
    if kind in ("minimum", "both"):
        found += [(int(i), "minimum") for i in find_peaks(-db, prominence=min_prominence_db)[0]]
    out = []
    for index, which in sorted(found):
        f0, magnitude = refine_extremum(f, v, index)
        level = 20 * math.log10(magnitude) if magnitude > 0 else float(db[index])
        band = half_power_frequencies(f, v, index, which, level)
        q_bandwidth = f0 / (band[1] - band[0]) if band is not None else None
        q_phase = phase_slope_q(f, v, f0)
        if q_bandwidth is not None:
            q, method = q_bandwidth, "-3 dB bandwidth"
        elif q_phase is not None:
            q, method = q_phase, "phase slope"
        else:
            q, method = None, None
        out.append(Resonance(f0, magnitude, which, index, q, method, q_bandwidth, q_phase, band))
    return tuple(out)
