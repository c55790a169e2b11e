"""Extrema of a ringing trace, refined between samples, and the logarithmic decrement.

These give the first guess of frequency and decay and the points of the envelope
diagnostics. Peak picking is :func:`xcheck.ringdown.signal_basics.spaced_peaks` (a
running-maximum search, not scipy.signal, whose import alone costs half a second); each
peak is refined by a local
least-squares parabola over about a quarter period (numpy.polyfit), whose vertex gives a
time between samples and a value with the noise of many samples averaged.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from xcheck.ringdown.signal_basics import cubic_smoother_residual, spaced_peaks, strongest_line


@dataclass(frozen=True)
class Extrema:
    """Alternating extrema in time order.

    Attributes
    ----------
    time, value
        Vertex time (s) and value (V) of each extremum.
    sigma
        Standard deviation of each value from the local fit (V).
    sign
        +1 for a maximum, -1 for a minimum.
    """

    time: np.ndarray
    value: np.ndarray
    sigma: np.ndarray
    sign: np.ndarray

    def __len__(self) -> int:
        return len(self.time)


def sample_step(time: np.ndarray) -> float:
    """Median sample interval (s)."""
    return float(np.median(np.diff(time)))


def uniformly_sampled(time: np.ndarray, step: float) -> bool:
    """True when every sample interval is within 1e-3 of ``step`` (the median one).

    Computed in place on one array of intervals (a long record makes no further
    temporaries).
    """
    if len(time) < 2:
        return True
    spread = np.diff(time)
    spread -= step
    np.abs(spread, out=spread)
    return bool(spread.max() <= 1e-3 * step)


def noise_from_smoothing(voltage: np.ndarray, samples_per_period: float) -> float:
    """Robust per-sample noise estimate from the residual of a Savitzky-Golay smoother.

    A cubic over a quarter period follows a sinusoid closely, so the residual is mostly
    noise; its median absolute deviation (times 1.4826, the normal-consistency factor,
    common practice) is corrected for the share of the noise the smoother keeps
    (``1 - h0``, ``h0`` its centre coefficient).
    """
    v = np.asarray(voltage, dtype=float)[:2_000_000]
    window = int(max(7, min(samples_per_period / 4.0, len(v) // 2)))
    window += 1 - window % 2
    if window >= len(v):
        return float(np.std(v))
    resid, centre = cubic_smoother_residual(v, window)
    mad = 1.4826 * float(np.median(np.abs(resid - np.median(resid))))
    return mad / math.sqrt(max(1.0 - centre, 1e-6))


def rough_frequency(time: np.ndarray, voltage: np.ndarray, step: float | None = None) -> float:
    """Frequency (Hz) of the strongest periodogram bin above 1/record.

    ``step`` is the sample interval (s) when the caller knows it (else the median one).

    Long records are averaged in blocks to at most 2**18 points first (the peak of a
    ring-down lies far below the block rate in any sensible capture).
    """
    v = np.asarray(voltage, dtype=float)
    step = sample_step(time) if step is None else step
    block = max(1, math.ceil(len(v) / 2**18))
    if block > 1:
        n = len(v) // block
        v = v[: n * block].reshape(n, block).mean(axis=1)
        step *= block
    v = v - float(np.mean(v))
    nfft = 1 << max(12, (8 * len(v) - 1).bit_length())
    nfft = min(nfft, 1 << 22)
    # Rectangular window: a ring-down is strongest at the very start, where a tapered
    # window would suppress it.
    return strongest_line(v, step, nfft, 1.0 / (step * len(v)))


def find_extrema(
    time: np.ndarray,
    voltage: np.ndarray,
    *,
    period: float,
    offset: float,
    noise_sigma: float,
    keep: np.ndarray | None = None,
    min_snr: float = 5.0,
    step: float | None = None,
) -> Extrema:
    """Alternating maxima and minima of a ringing trace, refined between samples.

    Parameters
    ----------
    time, voltage
        The trace (s, V), uniformly sampled.
    period
        Approximate oscillation period (s); peaks closer than 0.7 period are merged.
    offset
        Level the trace rings around (V).
    noise_sigma
        Per-sample noise (V); extrema whose distance from ``offset`` is under
        ``min_snr`` times the refined value's uncertainty end the ringing.
    keep
        Samples allowed in the refinement windows (clipped samples excluded); an
        extremum whose window touches an excluded sample is skipped.
    min_snr
        Significance threshold, see ``noise_sigma``.
    step
        The sample interval (s) when the caller knows it; None takes the median one.

    Returns
    -------
    Extrema
        From the first extremum to the last one above the noise.
    """
    t = np.asarray(time, dtype=float)
    v = np.asarray(voltage, dtype=float)
    ok = np.ones(len(t), dtype=bool) if keep is None else np.asarray(keep, dtype=bool)
    step = sample_step(t) if step is None else step
    per_period = max(period / step, 2.0)
    half = max(1, int(round(per_period / 8.0)))
    distance = max(1, int(0.7 * per_period))
    y = np.where(ok, v - offset, 0.0)
    floor = min_snr * noise_sigma / math.sqrt(2 * half + 1)
    candidates: list[tuple[int, int]] = []
    for sign in (1, -1):
        peaks = spaced_peaks(sign * y, distance)
        candidates += [(int(i), sign) for i in peaks]
    candidates.sort()
    uniform = uniformly_sampled(t, step)
    design = np.vander(np.arange(-half, half + 1, dtype=float), 3)
    unscaled = np.linalg.inv(design.T @ design)
    kept: list[tuple[float, float, float, int]] = []
    for index, sign in candidates:
        if sign * y[index] > 0.5 * floor:  # else far inside the noise: no need to refine
            refined = _refine(
                t,
                v,
                ok,
                index,
                half,
                sign,
                noise_sigma,
                step,
                (design, unscaled) if uniform else None,
            )
            if refined is None:
                continue  # window clipped, off the record, or not an extremum after all
            item = (*refined, sign)
        else:
            item = (float(t[index]), float(v[index]), float(noise_sigma), sign)
        # Two maxima (or minima) in a row closer than 3/4 period are one extremum seen
        # twice; further apart, the extremum between them was skipped (e.g. clipped).
        if kept and kept[-1][3] == sign and item[0] - kept[-1][0] < 0.75 * period:
            if sign * (item[1] - offset) > sign * (kept[-1][1] - offset):
                kept[-1] = item
            continue
        if kept and item[0] <= kept[-1][0] + 0.25 * period:
            continue  # not after the previous extremum by a sensible part of a period
        size = sign * (item[1] - offset)
        if size <= 0:
            continue  # a bump on the wrong side of the offset (noise in a trough): not an extremum
        if size < min_snr * max(item[2], floor / min_snr):
            if not kept:
                continue  # noise bumps before the first clear extremum (e.g. on the first edge)
            break  # the ringing has sunk into the noise
        kept.append(item)
    arr = np.array(kept, dtype=float).reshape(-1, 4)
    return Extrema(arr[:, 0], arr[:, 1], arr[:, 2], arr[:, 3].astype(int))


def parabola_vertex(c2: float, c1: float, c0: float, var_c1: float = 0.0) -> tuple[float, float]:
    """Position and value of the vertex of ``c2 x^2 + c1 x + c0``.

    ``x* = -c1 / (2 c2)`` and ``c0 - c1^2 / (4 c2)``; ``var_c1`` (the variance of a
    fitted ``c1``) is taken out of ``c1^2``, which noise would otherwise inflate.
    """
    return -c1 / (2.0 * c2), c0 - (c1 * c1 - var_c1) / (4.0 * c2)


def extrema_near(time: np.ndarray, volts: np.ndarray, targets: np.ndarray,
                 halfwidth: float, level: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """Turning points of a noise-free waveform (a simulator's) near expected times.

    For each target time the sample farthest from ``level`` within ``halfwidth`` is taken and
    refined by the parabola through it and its two neighbours (interpolation, not a
    least-squares fit: there is no noise to average); the refinement is kept when its
    vertex lies within the three samples' span. Where no sample lies within
    ``halfwidth`` the waveform is interpolated linearly at the target.

    Parameters
    ----------
    time, volts
        The waveform (s, V); the time points need not be uniform.
    targets
        Expected times of the turning points (s).
    halfwidth
        Search half-width around each target (s).
    level
        The level the waveform oscillates about (V): 0 for a natural response, the
        settled value for a step, where a trough is still above zero and the largest
        magnitude in its window would be the window's edge.

    Returns
    -------
    tuple of numpy.ndarray
        Times (s) and values (V) of the turning points, one per target.
    """
    out_t = np.empty(targets.size)
    out_v = np.empty(targets.size)
    for i, target in enumerate(targets):
        window = np.flatnonzero(np.abs(time - target) <= halfwidth)
        if window.size == 0:
            out_t[i], out_v[i] = target, float(np.interp(target, time, volts))
            continue
        j = window[np.argmax(np.abs(volts[window] - level))]
        out_t[i], out_v[i] = time[j], volts[j]
        if 0 < j < time.size - 1:
            t3, v3 = time[j - 1:j + 2], volts[j - 1:j + 2]
            a, b, c = np.polyfit(t3 - t3[1], v3, 2)
            if a != 0:
                dt, value = parabola_vertex(a, b, c)
                if abs(dt) <= (t3[2] - t3[0]):
                    out_t[i], out_v[i] = t3[1] + dt, value
    return out_t, out_v


def _refine(
    t: np.ndarray,
    v: np.ndarray,
    ok: np.ndarray,
    peak: int,
    half: int,
    sign: int,
    sigma: float,
    step: float,
    shared: tuple[np.ndarray, np.ndarray] | None,
) -> tuple[float, float, float] | None:
    """Vertex of the least-squares parabola through the samples around one peak.

    Least squares over the ``2 half + 1`` samples centred on the peak (positions in
    units of the sample step). When the vertex falls outside the window (noise moved
    the highest sample off the true extremum) the window is moved to the vertex and the
    fit repeated, twice at most and never more than ``half`` samples away from the peak.
    None when that fails, when the parabola opens the wrong
    way (not an extremum), or when the window holds an excluded sample or runs off the
    record. ``shared`` holds the design matrix and ``(X^T X)^-1`` of a uniform window
    (None for non-uniform sampling). Returns (time, value, standard deviation of the
    value).
    """
    centre = peak
    for _ in range(3):
        lo, hi = centre - half, centre + half + 1
        if lo < 0 or hi > len(t) or not ok[lo:hi].all():
            break
        if shared is not None:
            design, cov = shared
            c2, c1, c0 = cov @ (design.T @ v[lo:hi])
        else:
            (c2, c1, c0), cov = np.polyfit(
                (t[lo:hi] - t[centre]) / step, v[lo:hi], 2, cov="unscaled"
            )
        if sign * c2 >= 0:
            break
        # The noise's share of c1^2 (its variance) is taken out of the vertex value:
        # otherwise small extrema in noise come out systematically too large.
        var_c1 = float(cov[1, 1]) * sigma**2
        vertex, value = parabola_vertex(c2, c1, c0, var_c1)
        if abs(vertex) <= half:
            grad = np.array([c1 * c1 / (4.0 * c2 * c2), -c1 / (2.0 * c2), 1.0])
            var = float(grad @ cov @ grad) * sigma**2
            return float(t[centre] + vertex * step), float(value), math.sqrt(max(var, 0.0))
        centre += int(round(vertex))
        if abs(centre - peak) > half:
            break  # wandering off towards another extremum: not this one
    return None


def refine_with_model(
    time: np.ndarray,
    voltage: np.ndarray,
    found: Extrema,
    *,
    alpha: float,
    omega: float,
    offset: float,
    noise_sigma: float,
    keep: np.ndarray | None = None,
) -> Extrema:
    """Extrema re-measured with the fitted ring-down's own shape instead of a parabola.

    Around each extremum (half a period, centred on it) the samples are fitted by linear
    least squares with ``offset + exp(-alpha (t - t_k)) (p cos(omega (t - t_k)) +
    q sin(omega (t - t_k)))``, alpha and omega fixed at the global fit: only the local
    amplitude and phase are free, so a glitch or a changed decay still shows, while the
    parabola's shape error (which depends on where the samples fall, up to ~1 % at
    12 samples per period) is gone. The extremum of that local curve is where
    ``tan(omega (t - t_k) + phi) = -alpha / omega``; its magnitude is
    ``A (omega / omega0) exp(-alpha (t - t_k))``. Extrema whose window holds an excluded
    sample or runs off the record are dropped.
    """
    t = np.asarray(time, dtype=float)
    v = np.asarray(voltage, dtype=float)
    ok = np.ones(len(t), dtype=bool) if keep is None else np.asarray(keep, dtype=bool)
    quarter = 0.25 * 2.0 * math.pi / omega
    ratio = omega / math.hypot(alpha, omega)
    rows = []
    for tk, sign in zip(found.time, found.sign):
        lo, hi = np.searchsorted(t, tk - quarter), np.searchsorted(t, tk + quarter, side="right")
        if lo == 0 or hi >= len(t) or hi - lo < 4 or not ok[lo:hi].all():
            continue
        x = t[lo:hi] - tk
        decay = np.exp(-alpha * x)
        basis = np.column_stack([decay * np.cos(omega * x), decay * np.sin(omega * x)])
        coef, *_ = np.linalg.lstsq(basis, v[lo:hi] - offset, rcond=None)
        p, q = coef
        amp = math.hypot(p, q)
        phi = math.atan2(-q, p)
        # Extremum of A exp(-alpha x) cos(omega x + phi) nearest to x = 0.
        base = -math.atan2(alpha, omega) - phi
        shift = base + math.pi * round(-base / math.pi)
        x_star = shift / omega
        value = sign * amp * ratio * math.exp(-alpha * x_star)
        # Delta method for the value: d|value|/d(p, q) with x_star treated as fixed
        # (it is a stationary point, so its own error enters only at second order).
        cov = np.linalg.inv(basis.T @ basis) * noise_sigma**2
        grad = np.array([p, q]) / max(amp, 1e-300) * ratio * math.exp(-alpha * x_star)
        rows.append((tk + x_star, offset + value, math.sqrt(float(grad @ cov @ grad)), sign))
    arr = np.array(rows, dtype=float).reshape(-1, 4)
    return Extrema(arr[:, 0], arr[:, 1], arr[:, 2], arr[:, 3].astype(int))


def log_decrement(times: np.ndarray, amplitudes: np.ndarray) -> tuple[float, float]:
    """Decay rate and damped angular frequency from successive extrema.

    Successive extrema of ``A exp(-alpha t) cos(omega_d t + phi)`` are half a period
    ``pi / omega_d`` apart and their magnitudes fall by ``exp(-alpha pi / omega_d)``
    each (the logarithmic decrement per period is ``delta = alpha T_d``, common
    textbook result). ``alpha`` is the least-squares slope of ``log|amplitude|`` against
    time, ``omega_d`` is ``pi`` over the least-squares spacing; the half-period count of
    each extremum is its distance from the first in median spacings, so a skipped
    extremum (clipped) leaves a gap rather than a wrong count.

    Parameters
    ----------
    times
        Extremum times (s), consecutive half periods.
    amplitudes
        Extremum values measured from the offset (V).

    Returns
    -------
    tuple of float
        ``(alpha, omega_d)`` in 1/s and rad/s.
    """
    t = np.asarray(times, dtype=float)
    mag = np.abs(np.asarray(amplitudes, dtype=float))
    if len(t) < 2:
        raise ValueError("the logarithmic decrement needs at least two extrema")
    k = np.round((t - t[0]) / float(np.median(np.diff(t))))
    spacing = np.polyfit(k, t, 1)[0] if len(t) > 2 else t[1] - t[0]
    slope = np.polyfit(t, np.log(mag), 1)[0]
    return float(-slope), float(math.pi / spacing)
