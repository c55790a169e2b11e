"""Find the event (switch closure or step) in a measured trace; describe the time before it.

Before the event the probe sees a slowly drifting level: the charged capacitor's voltage
losing charge through leakage and probe loading (natural response), or the output's
offset (step). After it the trace swings far from that level. The event is found in
steps (see :func:`_detect`): the first sample beyond half the largest swing; the start
of the unbroken stretch leading up to it in which the trace stays more than
``THRESHOLD_SIGMA`` noise sigmas from the pre-event line (level, and slope when one is
clearly there; least squares, prediction interval included), the line being fitted
to the samples before the trace's first clear move (so that a short pre-trigger is not
outweighed by the event's first quarter period); and a sub-sample refinement of that
start.

The departure starts gently: a series RLC loop starts with zero current, so the
capacitor voltage leaves its level as ``-(omega0**2 * V0 / 2) * t**2`` (zero slope),
and an LC filter's output leaves its level the same way after a step. So the
threshold crossing lags the event, and the onset is refined by fitting
``A * (t - t0)**p`` (zero before ``t0``) to the early departure, for p = 2 (zero slope),
1 (a kink, e.g. ESR in series with the probed capacitor) and 0 (a jump).

Walking back from the swing, rather than forward from the record's start, keeps
band-limited noise, mains hum and droop before the event from being taken for it.

A long record (more than ``DETECT_SAMPLES`` samples) is searched on its block means
(``DETECT_SAMPLES`` blocks of consecutive samples, each averaged), so that the search
costs the same at any length and its statistical tests (the threshold and the bend
test before the event) keep the power they have on a record of that length: a bend
test on ten million samples sees curvature far below anything that matters. The onset
is then refined on the full-rate samples around the block-mean result (a jump is
placed between two full-rate samples; the curve fits see the window's samples
averaged in blocks again when it holds more than ``ONSET_FIT_SAMPLES``), and the
baseline, droop and noise that :func:`align_trace` reports come from the full-rate
samples as before.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from scipy.optimize import least_squares, minimize_scalar

from xcheck.errors import TraceError
from xcheck.capture.clipping import estimate_resolution
from xcheck.capture.types import MIN_SAMPLES, Trace
from xcheck.quantiles import normal_sf, student_isf

Expect = Literal["natural", "step"]

#: A departure counts when it exceeds this many standard deviations of the prediction.
THRESHOLD_SIGMA = 5.0
#: Fewest samples of baseline a detection may rest on.
MIN_BASELINE = 8
#: The first, robust baseline fit uses at most this many samples (evenly spread).
ROBUST_SAMPLES = 100_000
#: The stretch before the event must not bend by more than this many standard errors.
CURVATURE_T = 6.0
#: A baseline keeps its slope only when the slope is this many standard errors from
#: zero; otherwise the level alone is fitted (see :func:`_detect`).
SLOPE_T = 3.0
#: Samples right before the event left out of the baseline fit (the onset is gradual).
GUARD_SAMPLES = 2
#: The onset fit uses the departure up to this fraction of the largest swing.
ONSET_FRACTION = 0.1
#: ... and at least this many samples after the threshold crossing.
ONSET_MIN_SAMPLES = 3
#: A jump or kink must lower the onset fit's residual sum of squares by this many
#: noise variances to be preferred over a zero-slope start.
ONSET_EVIDENCE = 9.0
#: Records longer than this are searched on this many block means (see the module
#: docstring); the samples of one block are averaged. Shorter records are searched
#: sample by sample. 50 000 samples: the search then takes a few tens of milliseconds.
DETECT_SAMPLES = 50_000
#: The first swing's size is taken over at most this many samples (every k-th of a
#: longer record) and its start searched in chunks of this many.
SWING_SAMPLES = 200_000
#: The onset's curve fits use about this many points at most: a longer window is
#: averaged in blocks first (a jump is still placed between two of its samples).
ONSET_FIT_SAMPLES = 4000


@dataclass(frozen=True)
class Alignment:
    """Where the event is and what the trace did before it (SI units).

    Attributes
    ----------
    event_time
        Seconds, in the file's time base.
    baseline
        Pre-event level (V): the fitted line evaluated at the event time. For a
        natural response the charged voltage (plus any DC offset of the scope), for a
        step the offset. NaN without pre-event samples.
    noise_rms
        Pre-event noise (V): RMS of the residuals from the fitted line, as observed (a
        baseline quieter than one quantisation step can show less than the
        step / sqrt(12) a moving signal carries; a note says so).
    droop_per_s
        Pre-event slope (V/s), e.g. leakage and probe loading discharging the capacitor.
    inverted
        True when the first swing has the wrong sign for the expected event and sign.
    manual
        True when the event time was given rather than found.
    pre_event_samples
        Samples used for the baseline fit.
    notes
        Plain-words remarks (assumptions, doubts).
    """

    event_time: float
    baseline: float
    noise_rms: float
    droop_per_s: float
    inverted: bool
    manual: bool
    pre_event_samples: int
    notes: tuple[str, ...] = ()


@dataclass
class _Line:
    """Least-squares line through the first ``count`` samples (``s_tt`` infinite when
    the slope is held at zero: a level, whose prediction carries no slope error)."""

    t_mean: float
    v_mean: float
    slope: float
    sigma: float
    s_tt: float
    count: int

    def predict(self, t: np.ndarray) -> np.ndarray:
        return self.v_mean + self.slope * (t - self.t_mean)

    def prediction_sd(self, t: np.ndarray, floor: float) -> np.ndarray:
        """Standard deviation of a new sample about the line (textbook prediction
        interval of simple linear regression, e.g. Montgomery & Runger, Applied
        Statistics and Probability for Engineers, ch. 11)."""
        sigma = max(self.sigma, floor)
        return sigma * np.sqrt(1.0 + 1.0 / self.count + (t - self.t_mean) ** 2 / self.s_tt)


def _fit_line(t: np.ndarray, v: np.ndarray, robust: bool = False) -> _Line:
    """Least-squares line; ``robust`` takes the noise from the median absolute residual
    (1.4826 * MAD estimates a Gaussian sigma; Huber, Robust Statistics), so that a few
    samples of an undetected onset at the window's end do not inflate it."""
    t_mean, v_mean = float(t.mean()), float(v.mean())
    dt = t - t_mean
    s_tt = float(np.dot(dt, dt))
    slope = float(np.dot(dt, v - v_mean) / s_tt) if s_tt > 0 else 0.0
    residual = v - v_mean - slope * dt
    if robust:
        sigma = 1.4826 * float(np.median(np.abs(residual)))
    else:
        sigma = float(math.sqrt(np.dot(residual, residual) / max(t.size - 2, 1)))
    return _Line(t_mean, v_mean, slope, sigma, s_tt if s_tt > 0 else 1.0, t.size)


def _level_only(line: _Line, t: np.ndarray, v: np.ndarray) -> _Line:
    """The same samples described by their mean level alone (slope zero)."""
    residual = v - line.v_mean
    sigma = float(math.sqrt(np.dot(residual, residual) / max(t.size - 1, 1)))
    return _Line(line.t_mean, line.v_mean, 0.0, sigma, math.inf, line.count)


def _slope_matters(line: _Line) -> bool:
    """True when the fitted slope is more than ``SLOPE_T`` standard errors from zero
    (the t-test on a regression slope; standard error sigma / sqrt(Stt))."""
    return abs(line.slope) * math.sqrt(line.s_tt) > SLOPE_T * max(line.sigma, np.finfo(float).tiny)


def _threshold(count: int) -> float:
    """Multiple of the estimated prediction sd with the same one-sided tail probability
    as ``THRESHOLD_SIGMA`` Gaussian sigmas, allowing for sigma estimated from ``count``
    samples (Student's t with count - 2 degrees of freedom; :mod:`xcheck.quantiles`)."""
    dof = max(count - 2, 1)
    if dof > 1000:
        return THRESHOLD_SIGMA
    return float(student_isf(normal_sf(THRESHOLD_SIGMA), dof))


def _floor(resolution: float | None, v: np.ndarray) -> float:
    """Smallest departure worth believing: 1.5 quantisation steps, or rounding."""
    scale = float(np.max(np.abs(v))) if v.size else 1.0
    return max(1.5 * (resolution or 0.0), 1e-12 * scale, np.finfo(float).tiny)


def _robust_line(t: np.ndarray, v: np.ndarray) -> _Line:
    """Line through samples of which a minority may belong to the event: least squares
    with the soft-L1 loss (scipy.optimize.least_squares), scale from the median
    absolute residual of the plain fit."""
    stride = max(1, t.size // ROBUST_SAMPLES)  # a first guess: a subset is plenty
    t, v = t[::stride], v[::stride]
    plain = _fit_line(t, v, robust=True)
    # A flat (clipped) stretch has sigma 0; scale**2 must stay a normal float.
    scale = max(plain.sigma, _floor(None, v), math.sqrt(np.finfo(float).tiny))
    x = t - plain.t_mean

    def residual(p: np.ndarray) -> np.ndarray:
        return v - p[0] - p[1] * x

    def jacobian(p: np.ndarray) -> np.ndarray:
        return -np.column_stack((np.ones_like(x), x))

    fit = least_squares(
        residual, [plain.v_mean, plain.slope], jac=jacobian, loss="soft_l1", f_scale=scale
    )
    level, slope = fit.x
    sigma = 1.4826 * float(np.median(np.abs(residual(fit.x))))
    line = _Line(
        plain.t_mean, float(level), float(slope), sigma, plain.s_tt * stride, plain.count * stride
    )
    if _slope_matters(line):
        return line
    flat = least_squares(
        lambda p: v - p[0], [level], jac=lambda p: -np.ones((x.size, 1)),
        loss="soft_l1", f_scale=scale,
    )
    sigma = 1.4826 * float(np.median(np.abs(v - flat.x[0])))
    return _Line(plain.t_mean, float(flat.x[0]), 0.0, sigma, math.inf, line.count)


class _NoEvent(Exception):
    """Why no event could be found (the message completes a sentence)."""


def _bends(t: np.ndarray, v: np.ndarray, floor: float) -> bool:
    """True when ``v`` bends: the quadratic term of a least-squares parabola is more
    than ``CURVATURE_T`` standard errors from zero (a t-test on one coefficient of a
    linear regression). A pre-event stretch is a line plus noise."""
    x = t - t.mean()
    x = x / max(float(np.max(np.abs(x))), np.finfo(float).tiny)
    basis = np.column_stack((np.ones_like(x), x, x * x))
    coef, *_ = np.linalg.lstsq(basis, v, rcond=None)
    residual = v - basis @ coef
    sigma = math.sqrt(float(np.dot(residual, residual)) / max(t.size - 3, 1))
    sigma = max(sigma, floor / 1.5 / math.sqrt(12.0))  # quantisation noise at least
    unscaled = np.linalg.inv(basis.T @ basis)
    return abs(coef[2]) > CURVATURE_T * sigma * math.sqrt(unscaled[2, 2])


@dataclass(frozen=True)
class _Onset:
    """One onset fit: the start time, the power that fitted best, the index (on the
    fit's own grid) where the departure reached the fit's upper level, and the largest
    departure after the first sample beyond the threshold."""

    time: float
    power: int
    end: int
    swing: float


@dataclass(frozen=True)
class _Found:
    """The result of a search on one grid: the onset, the baseline line and the first
    sample beyond the threshold it was fitted from (index on that grid)."""

    onset: _Onset
    line: _Line
    first: int


def _detect(trace: Trace, floor: float, step: float) -> tuple[float, int, int]:
    """Refined event time, onset power and the block length the search used (1 when
    it ran on every sample); raises :class:`_NoEvent` saying why not.

    Records of up to ``DETECT_SAMPLES`` samples are searched directly
    (:func:`_search`); longer ones on their block means, then refined on the full-rate
    samples (:func:`_refine`).
    """
    t, v = trace.time, trace.voltage
    block = math.ceil(t.size / DETECT_SAMPLES)
    if block <= 1:
        found = _search(t, v, floor, step)
        return found.onset.time, found.onset.power, 1
    tb, vb = block_means(t, v, block)
    found = _search(tb, vb, floor, block * step)
    event, power = _refine(t, v, tb, found, block, step, floor)
    return event, power, block


def block_means(t: np.ndarray, v: np.ndarray, block: int) -> tuple[np.ndarray, np.ndarray]:
    """Means of ``block`` consecutive samples (the last, shorter block too).

    Parameters
    ----------
    t, v
        Sample times (s) and values (V), of equal length.
    block
        Samples per block (at least 1).

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        Each block's mean time and mean value. For white noise a block mean's
        standard deviation is the samples' over sqrt(block) (common practice, no
        source).
    """
    n = t.size
    whole = (n // block) * block
    tb = t[:whole].reshape(-1, block).mean(axis=1)
    vb = v[:whole].reshape(-1, block).mean(axis=1)
    if whole < n:
        tb = np.append(tb, t[whole:].mean())
        vb = np.append(vb, v[whole:].mean())
    return tb, vb


def _refine(
    t: np.ndarray, v: np.ndarray, tb: np.ndarray, found: _Found, block: int, step: float,
    floor: float,
) -> tuple[float, int]:
    """Onset time and power on the full-rate samples, from a search on block means.

    The noise is the full-rate samples' scatter about the block-mean baseline line (at
    most ``ROBUST_SAMPLES`` of them, evenly spread). The first full-rate departure is
    found as in :func:`_search`, walking back through the samples beyond the threshold
    from the end of the first departing block (at most two blocks back). The onset fit
    then runs on a window from as far before that as the block-mean fit looked (and at
    least two blocks before its onset) to two blocks past where that fit ended. The
    work is set by the number of blocks in the window, not by the record's length.
    """
    width = block * step
    onset, line = found.onset, found.line
    pre_end = int(np.searchsorted(t, onset.time - (GUARD_SAMPLES + 1) * width))
    stride = max(1, pre_end // ROBUST_SAMPLES)
    pre_t, pre_v = t[:pre_end:stride], v[:pre_end:stride]
    residual = pre_v - line.predict(pre_t)
    sigma = max(math.sqrt(float(np.dot(residual, residual)) / max(pre_t.size - 2, 1)), floor)
    line = _Line(line.t_mean, line.v_mean, line.slope, sigma, line.s_tt * block,
                 line.count * block)
    # The first full-rate sample beyond the threshold on the swing's side.
    lo_i = int(np.searchsorted(t, tb[max(found.first - 2, 0)]))
    hi_i = min(int(np.searchsorted(t, tb[found.first] + 0.5 * width, side="right")),
               t.size - 2)
    near_t = t[lo_i : hi_i + 1]
    departure = v[lo_i : hi_i + 1] - line.predict(near_t)
    side = np.sign(departure[-1]) or 1.0
    limit = np.maximum(_threshold(line.count) * line.prediction_sd(near_t, floor), floor)
    inside = np.flatnonzero(side * departure <= limit)
    first = lo_i + (int(inside[-1]) + 1 if inside.size else 0)
    end = min(int(np.searchsorted(t, tb[onset.end] + 0.5 * width, side="right")) + 2 * block,
              t.size - 1)
    end = min(max(end, first + ONSET_MIN_SAMPLES + 1), t.size - 1)
    span = max(end - first, block)
    before = int(np.searchsorted(t, onset.time - 2.0 * width))
    start = max(0, min(first - 4 * span - 8, before))
    window = t[start : end + 1]
    refined = _onset(window, v[start : end + 1] - line.predict(window), first - start,
                     sigma, swing=onset.swing)
    return refined.time, refined.power


def _search(t: np.ndarray, v: np.ndarray, floor: float, step: float) -> _Found:
    """Refined event time and onset power on one grid of samples; raises
    :class:`_NoEvent` saying why not.

    1. Coarse: the first sample beyond half the largest excursion from the starting
       level (the median of the first samples). Noise, hum and droop before the event
       are far smaller than the response, so this lands on the event's first swing.
    2. Rough: walk back from the coarse point to where the trace comes within ten
       noise sigmas of the starting level (:func:`_rough_end`). The half-swing point
       lies about a quarter period into a ring-down, which can be far more samples
       than a 5-10 % pre-trigger holds; the rough point lies only a few sigmas in.
    3. Fine: fit the baseline over everything before the rough point (robustly, as
       the event's start is included), then walk back from the coarse point while the
       trace stays beyond the threshold on the swing's side: where that stretch
       begins is the departure.
    4. Refine the onset below one sample and refit the baseline on everything before
       it; repeat until the fitted stretch stays the same. The baseline is a line when
       its slope is more than ``SLOPE_T`` standard errors from zero on the first such
       stretch, else a level: extrapolating a slope fitted to a short stretch past its
       end multiplies its noise (the prediction variance of a line grows with the
       squared distance from the stretch's middle), and the onset fit looks well past
       the end.
    5. Check that the stretch just before the onset is straight (no bend): otherwise
       the baseline has swallowed the start of the event, which happens when the
       record holds too little time before it.
    """
    level = float(np.median(v[: 2 * MIN_BASELINE]))
    excursion = np.abs(v - level)
    swing = float(excursion.max())
    # Sample-to-sample noise (1.4826 * MAD of first differences / sqrt 2): only a
    # swing well beyond it can be an event.
    jitter = 1.4826 * float(np.median(np.abs(np.diff(v) - np.median(np.diff(v))))) / math.sqrt(2)
    if swing <= 2.0 * THRESHOLD_SIGMA * max(jitter, floor):
        raise _NoEvent(
            f"the trace never leaves its starting level by more than {2 * THRESHOLD_SIGMA:g} "
            "times its sample-to-sample noise"
        )
    coarse = int(np.argmax(excursion > 0.5 * swing))
    if coarse < MIN_BASELINE + GUARD_SAMPLES:
        raise _NoEvent(
            f"the trace is already moving within its first {coarse + 1} samples, so there "
            "is no level before the event to start from"
        )
    wander = 1.4826 * float(np.median(np.abs(v[: 2 * MIN_BASELINE] - level)))
    rough = _rough_end(v, level, coarse, 2.0 * THRESHOLD_SIGMA * max(jitter, wander, floor))
    if rough < MIN_BASELINE + GUARD_SAMPLES:
        rough = coarse  # the start level drifted past the margin: fall back to the swing
    line = _robust_line(t[:rough], v[:rough])
    sloped: bool | None = None
    result: _Found | None = None
    for _ in range(20):
        departure = v[: coarse + 1] - line.predict(t[: coarse + 1])
        side = np.sign(departure[coarse])
        limit = np.maximum(
            _threshold(line.count) * line.prediction_sd(t[: coarse + 1], floor), floor
        )
        if side * departure[coarse] <= limit[coarse]:
            raise _NoEvent(
                "the largest swing cannot be told apart from the level before it (too "
                "little record before the event, or a level that wanders as much as the "
                "swing)"
            )
        inside = np.flatnonzero(side * departure <= limit)
        first = int(inside[-1]) + 1 if inside.size else 0
        if first < MIN_BASELINE:
            break
        result = _Found(_onset(t, v - line.predict(t), first, max(line.sigma, floor)),
                        line, first)
        end = int(np.searchsorted(t, result.onset.time - GUARD_SAMPLES * step))
        if end < MIN_BASELINE or end == line.count:
            break
        line = _fit_line(t[:end], v[:end])
        if sloped is None:
            # Decided once, on the first stretch that ends at a fitted onset (the
            # longest clean one): deciding again on each shorter stretch lets a slope
            # that noise made look real pull the onset earlier, which shortens the
            # stretch and steepens the slope further.
            sloped = _slope_matters(line)
        if not sloped:
            line = _level_only(line, t[:end], v[:end])
    end = int(np.searchsorted(t, result.onset.time - GUARD_SAMPLES * step)) if result else 0
    if result is None or end < MIN_BASELINE:
        raise _NoEvent(
            f"fewer than {MIN_BASELINE} samples lie before the event's first departure"
        )
    rise = max(coarse - end, MIN_BASELINE // 2)
    near = slice(max(0, end - 4 * rise), end)
    if _bends(t[near], v[near], floor):
        raise _NoEvent(
            "the samples just before the detected start bend away from a straight "
            "baseline, so the start of the event cannot be told apart from the level "
            "before it (too little time before the event, or a slow start)"
        )
    return result


def _rough_end(v: np.ndarray, level: float, coarse: int, margin: float) -> int:
    """End (exclusive) of the window for the first baseline fit: one past the last
    sample before ``coarse`` that lies within ``margin`` of the starting ``level`` on
    the swing's side.

    The half-swing point lies about a quarter period into a ring-down; a baseline
    fitted up to it would hold that much of the event, which outweighs a short
    pre-trigger (a robust fit tolerates a minority of outliers, not a majority).
    Walking back from ``coarse`` through the unbroken departure stops where the trace
    comes back within ``margin`` of the level, a few noise sigmas into the event, so
    the window holds only the event's small, early part. Noise before the event
    cannot lengthen the walk (it stops at the first sample inside the margin); a droop
    towards the swing can only shorten the window.
    """
    side = np.sign(v[coarse] - level)
    inside = np.flatnonzero(side * (v[:coarse] - level) <= margin)
    return int(inside[-1]) + 1 if inside.size else 0


def _onset(
    t: np.ndarray, d: np.ndarray, first: int, sigma: float, swing: float | None = None
) -> _Onset:
    """Refined onset time and the power (0, 1, 2) of the departure that fitted best.

    The zero-slope start (power 2) is what both expected events give in the ideal
    circuit, so a jump or a kink must beat it by a clear margin: a drop in the residual
    sum of squares of more than ``ONSET_EVIDENCE * sigma**2`` (a likelihood-ratio
    difference of 9, "three sigma", for Gaussian noise).

    ``swing`` is the largest departure after ``first`` when ``d`` holds only a window
    of the record (the refinement of a block-mean search); None takes it from ``d``.
    """
    threshold = THRESHOLD_SIGMA * sigma
    n = t.size
    if swing is None:
        swing = float(np.max(np.abs(d[first:])))
    level = min(max(ONSET_FRACTION * swing, 4.0 * threshold), 0.5 * swing)
    beyond = np.flatnonzero(np.abs(d[first:]) >= level)
    end = first + (int(beyond[0]) if beyond.size else n - 1 - first)
    end = min(max(end, first + ONSET_MIN_SAMPLES), n - 1)
    span = end - first
    start = max(0, first - max(4 * span, 8))
    # The curve fits see at most about 2 * ONSET_FIT_SAMPLES points: block means of
    # the window when it is longer (averaging keeps the information that striding
    # would throw away; a block mean's variance is sigma**2 / block).
    block = max(1, (end - start) // ONSET_FIT_SAMPLES)
    if block > 1:
        tw, dw = block_means(t[start : end + 1], d[start : end + 1], block)
    else:
        tw, dw = t[start : end + 1], d[start : end + 1]
    step = float(np.median(np.diff(t[max(0, first - 4) : first + 4])))
    lo = max(t[start], t[first] - 2.0 * (t[end] - t[first]) - 2.0 * step)
    hi = t[first]

    def rss(t0: float, power: int) -> float:
        x = np.clip(tw - t0, 0.0, None)
        basis = (x > 0).astype(float) if power == 0 else x**power
        norm = float(np.dot(basis, basis))
        if norm == 0:
            return float(np.dot(dw, dw))
        amplitude = float(np.dot(basis, dw)) / norm
        residual = dw - amplitude * basis
        return float(np.dot(residual, residual))

    fits: dict[int, tuple[float, float]] = {0: (math.inf, hi)}
    # A jump sits between two samples: try each gap, take the midpoint. For a jump
    # the best amplitude is the mean of the samples after it, so the residual sum of
    # squares is sum(d^2) - S^2 / c, S and c the sum and count of the samples after
    # the gap (least squares on one indicator column): every gap at once, from
    # cumulative sums over the window's samples (each sample, not block means, so the
    # gap is found to one sample).
    k = np.arange(max(start, 1), first + 1)
    mids = 0.5 * (t[k - 1] + t[k])
    mids = mids[(lo - step <= mids) & (mids <= hi)]
    if mids.size:
        ts, ds = t[start : end + 1], d[start : end + 1]
        tail = np.concatenate((np.cumsum(ds[::-1])[::-1], [0.0]))
        after = np.searchsorted(ts, mids, side="right")
        count = ts.size - after
        total = float(np.dot(ds, ds))
        values = total - tail[after] ** 2 / np.maximum(count, 1)
        best = float(mids[int(np.argmin(values))])
        fits[0] = (rss(best, 0), best)
    grid = np.linspace(lo, hi, 201)
    for power in (1, 2):
        values = np.array([rss(g, power) for g in grid])
        k = int(np.argmin(values))
        a, b = grid[max(k - 1, 0)], grid[min(k + 1, grid.size - 1)]
        if b > a:
            result = minimize_scalar(
                rss, bounds=(a, b), args=(power,), method="bounded",
                options={"xatol": 1e-4 * step},
            )
            fits[power] = (float(result.fun), float(result.x))
        else:
            fits[power] = (float(values[k]), float(grid[k]))
    margin = ONSET_EVIDENCE * sigma**2 / block
    power = min((0, 1), key=lambda p: fits[p][0])
    if fits[power][0] >= fits[2][0] - margin:
        power = 2
    return _Onset(fits[power][1], power, end, swing)


def align_trace(
    trace: Trace,
    *,
    event_time: float | None = None,
    expect: Expect = "natural",
    expected_sign: int | None = None,
) -> tuple[Trace, Alignment]:
    """Find the event in ``trace`` and return the trace from the event on, t = 0 at it.

    Parameters
    ----------
    trace
        A trace as read (its own time base, pre-trigger samples included).
    event_time
        The event time (s, in the file's time base) when known; skips the detection.
    expect
        ``"natural"``: a charged capacitor rings down towards zero from its level.
        ``"step"``: the probe sits at a level (zero or an offset), then a step response
        rises with overshoot.
    expected_sign
        +1 or -1: the sign the fixture gives the initial capacitor voltage (natural) or
        the step (step). When given, ``inverted`` reports a disagreement.

    Returns
    -------
    (Trace, Alignment)
        The samples at and after the event with time measured from it (voltage and
        clipping marks unchanged: the offset is reported, not removed), and the
        alignment record.

    Raises
    ------
    TraceError
        When no event can be found, the given event time lies outside the record, or
        too few samples follow the event.
    """
    if expect not in ("natural", "step"):
        raise ValueError(f"expect must be 'natural' or 'step', got {expect!r}")
    if expected_sign not in (None, 1, -1):
        raise ValueError(f"expected_sign must be +1, -1 or None, got {expected_sign!r}")
    t, v = trace.time, trace.voltage
    notes: list[str] = []
    resolution = trace.resolution or estimate_resolution(v)
    floor = _floor(resolution, v)
    step = float(np.median(np.diff(t)))
    manual = event_time is not None
    if manual:
        event = float(event_time)
        if not (t[0] <= event <= t[-1]):
            raise TraceError(
                trace.source,
                [
                    f"the event time {event:.9g} s lies outside the record "
                    f"({t[0]:.9g} s to {t[-1]:.9g} s); give a time inside it, in the "
                    "file's time base"
                ],
            )
    else:
        try:
            event, power, block = _detect(trace, floor, step)
        except _NoEvent as reason:
            raise TraceError(
                trace.source,
                [
                    f"no event found in column '{trace.column}': {reason}; give the event "
                    "time by hand (in the file's time base; the record starts at "
                    f"{t[0]:.9g} s), or check the channel and the trigger position"
                ],
            ) from None
        notes.append(
            "event found where the trace leaves the pre-event line; onset refined by a "
            + {0: "jump", 1: "linear start", 2: "zero-slope (quadratic) start"}[power]
            + " fitted to the first part of the swing"
        )
        if block > 1:
            notes.append(
                f"the event was searched on means of {block} consecutive samples "
                f"({math.ceil(t.size / block)} blocks) and its onset refined on the "
                "full-rate samples around it"
            )

    # The times increase strictly (the reader checks), so "before" and "after" are
    # slices: views, not copies of a long record.
    pre = slice(0, int(np.searchsorted(t, event - GUARD_SAMPLES * step, side="left")))
    count = pre.stop
    if count >= 3:
        line = _fit_line(t[pre], v[pre])
        baseline = float(line.predict(np.array([event]))[0])
        droop, noise = line.slope, line.sigma
        if resolution and noise < 0.5 * resolution / math.sqrt(12.0):
            # Quantisation error is uniform over one step (variance step^2 / 12, the
            # usual model of a quantiser) once the signal moves; a quieter baseline
            # hides it by sitting in one or two codes.
            notes.append(
                f"the baseline varies less than one quantisation step ({noise:.3g} V rms "
                f"measured); a moving signal carries about step / sqrt(12) = "
                f"{resolution / math.sqrt(12.0):.3g} V rms of quantisation noise"
            )
    else:
        line = None
        baseline = droop = noise = math.nan
        notes.append(
            "fewer than 3 samples before the event: no baseline, droop or noise estimate "
            "(capture some time before the trigger)"
        )

    after = slice(int(np.searchsorted(t, event, side="left")), None)
    following = t.size - after.start
    if following < MIN_SAMPLES:
        raise TraceError(
            trace.source,
            [
                f"only {following} samples follow the event at {event:.9g} s; "
                f"at least {MIN_SAMPLES} are needed: move the trigger earlier in the record"
            ],
        )
    swing = _first_swing(t, v, event, line, noise, floor)
    inverted = False
    if swing == 0:
        notes.append("the first swing after the event is within the noise: its sign is unknown")
    else:
        observed = -swing if expect == "natural" else swing
        direction = "down" if swing < 0 else "up"
        if expected_sign is not None and observed != expected_sign:
            inverted = True
            notes.append(
                f"the first swing goes {direction}, which for a {expect} response with a "
                f"{'positive' if expected_sign > 0 else 'negative'} "
                f"{'initial voltage' if expect == 'natural' else 'step'} means the probe or "
                "channel is inverted (ground lead on the other terminal, or an inverted "
                "channel setting)"
            )
    if line is not None and swing != 0:
        _level_notes(expect, baseline, swing, v, after, noise, notes)
    _clipping_note(trace, pre, after, notes)

    shifted = Trace(
        time=t[after] - event,
        voltage=v[after],
        source=trace.source,
        column=trace.column,
        metadata=trace.metadata,
        clipped=trace.clipped[after],
        resolution=trace.resolution,
        channels=trace.channels,
    )
    return shifted, Alignment(
        event_time=event,
        baseline=baseline,
        noise_rms=noise,
        droop_per_s=droop,
        inverted=inverted,
        manual=manual,
        pre_event_samples=count,
        notes=tuple(notes),
    )


def _first_swing(
    t: np.ndarray, v: np.ndarray, event: float, line: _Line | None, noise: float, floor: float
) -> int:
    """Sign (+1, -1, or 0 when unclear) of the trace's first clear move after the event.

    The largest departure sets the level a clear move must pass (``ONSET_FRACTION`` of
    it, at least the noise threshold); it is taken over every sample of a record of up
    to ``SWING_SAMPLES`` after the event, else over every k-th sample (k the record
    over ``SWING_SAMPLES``), which can only lower the level a little. The first
    sample beyond the level is then searched chunk by chunk from the event, so the
    work does not grow with the record when the move comes early, as it does.
    """
    start = int(np.searchsorted(t, event, side="left"))
    t_after, v_after = t[start:], v[start:]

    def departure(times: np.ndarray, volts: np.ndarray) -> np.ndarray:
        if line is not None:
            return volts - line.predict(times)
        return volts - v_after[0]

    limit = THRESHOLD_SIGMA * max(noise, floor) if line is not None else floor
    stride = max(1, math.ceil(t_after.size / SWING_SAMPLES))
    swing = float(np.max(np.abs(departure(t_after[::stride], v_after[::stride]))))
    level = max(limit, ONSET_FRACTION * swing)
    for lo in range(0, t_after.size, SWING_SAMPLES):
        chunk = departure(t_after[lo : lo + SWING_SAMPLES], v_after[lo : lo + SWING_SAMPLES])
        beyond = np.flatnonzero(np.abs(chunk) > level)
        if beyond.size:
            return int(np.sign(chunk[beyond[0]]))
    return 0


def _level_notes(
    expect: str,
    baseline: float,
    swing: int,
    v: np.ndarray,
    after: slice,
    noise: float,
    notes: list[str],
) -> None:
    post = v[after]
    size = max(float(np.max(post)) - baseline, baseline - float(np.min(post)))
    if expect == "natural":
        if abs(baseline) < 0.1 * size:
            notes.append(
                "the level before the event is close to zero, but a natural response starts "
                "from the charged voltage: check that the channel was DC-coupled, or whether "
                "this is a step response"
            )
        elif np.sign(baseline) == swing:
            notes.append(
                "the first swing moves away from zero, not towards it as a discharging "
                "capacitor would: the level before the event may carry a large DC offset"
            )
    elif abs(baseline) > max(0.01 * size, 5.0 * noise):
        notes.append(
            f"the level before the step is {baseline:.6g} V, not zero: a DC offset of the "
            "channel or the source (the fit takes its own offset)"
        )


def _clipping_note(trace: Trace, pre: slice, after: slice, notes: list[str]) -> None:
    clipped_pre = int(np.count_nonzero(trace.clipped[pre]))
    clipped_after = int(np.count_nonzero(trace.clipped[after]))
    if clipped_pre and clipped_pre >= 0.5 * pre.stop:
        notes.append(
            f"{clipped_pre} samples before the event sit at the record's extreme value: "
            "either the capture clipped (widen the vertical range) or the baseline is "
            "quieter than one quantisation step; the samples at that value after the event "
            f"({clipped_after}) are marked clipped and left out of fits either way"
        )
    elif clipped_after:
        notes.append(
            f"{clipped_after} samples after the event are clipped (runs at the record's "
            "extreme value); they are left out of fits"
        )
