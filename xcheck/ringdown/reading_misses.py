"""Few cursor readings: how far each one misses the ring-down of the others, and what
so few readings can tell.

With 5 to 10 readings off a scope's cursors and no stated uncertainty, the reading error
must be estimated from the readings themselves; with n - 1 - p degrees of freedom left
(p = 3 fitted values: amplitude, decay and offset) the threshold of a leave-one-out test
grows to about 11 standard errors at 7 readings, so a last reading 60 % below the
envelope can pass. Every reading is compared with the ring-down fitted to the *others*
(a forward search sets a flagged reading aside before the rest are judged), and:

- with stated uncertainties: flagged beyond the normal threshold at a 1 % family-wise
  level over the n readings (Bonferroni; common practice, no source);
- with a stated reading floor (the fixture's ``[scope]`` table: vertical accuracy as a
  fraction of full scale, volts per division, divisions; common practice, no source):
  the error is never taken below the floor, the threshold is the normal one, and the
  reading must also miss by more than the practical threshold :data:`PRACTICAL_MISS`
  of the envelope there;
- with neither: Student's t threshold on the others' scatter, and never a miss below
  :data:`ORDINARY_MISS`.

When a reading misses by more than the practical threshold but the test cannot call it,
the finding says so, with the numbers, instead of calling the decay one exponential.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.optimize import least_squares

from xcheck.quantiles import normal_isf, student_isf
from xcheck.values import format_eng

#: A miss smaller than this fraction of the envelope is never flagged (common practice,
#: no source: about what cursor placement on a trace a few pixels thick gives).
PRACTICAL_MISS = 0.2

#: With the error scale estimated from the readings alone, a miss this small is taken as
#: ordinary cursor work however many standard errors it is (common practice, no source).
ORDINARY_MISS = 0.05

#: Family-wise false-flag probability (common practice, no source).
FAMILY_LEVEL = 0.01


@dataclass(frozen=True)
class ReadingMiss:
    """One reading against the exponential through the others.

    Attributes
    ----------
    index
        0-based position among the readings (time order).
    envelope
        The magnitude the other readings' exponential predicts there (V).
    fraction
        ``(reading - envelope) / envelope``: -0.6 is 60 % low.
    deviation
        The miss in standard errors of reading and prediction together.
    sigma
        The reading error used (V): the larger of the floor and the others' scatter, or
        the stated uncertainty.
    flagged
        True when the miss passes both thresholds.
    prediction_variance
        Variance of the others' prediction there (V^2).
    """

    index: int
    envelope: float
    fraction: float
    deviation: float
    sigma: float
    flagged: bool
    prediction_variance: float = 0.0


@dataclass(frozen=True)
class MissTest:
    """Every reading's miss, the thresholds and what the test could resolve.

    Attributes
    ----------
    misses
        One :class:`ReadingMiss` per reading.
    threshold
        The statistical threshold (standard errors).
    floor
        The reading-error floor used (V); 0 when none was known.
    detectable
        The smallest miss at the last reading, as a fraction of its envelope, that the
        test would flag.
    findings
        Sentences for the report: a flag, or what the test could not rule out.
    """

    misses: tuple[ReadingMiss, ...]
    threshold: float
    floor: float
    detectable: float
    findings: tuple[str, ...]

    @property
    def flagged(self) -> list[int]:
        """0-based indices of the flagged readings."""
        return [m.index for m in self.misses if m.flagged]


def reading_misses(times: np.ndarray, values: np.ndarray, signs: np.ndarray,
                   sigmas: np.ndarray | None = None, floor: float = 0.0,
                   fit_offset: bool = True, floor_stated: bool = False) -> MissTest:
    """Compare every reading with the ring-down fitted to the others.

    Parameters
    ----------
    times
        Reading times (s), increasing.
    values
        The readings as written (V).
    signs
        +1 or -1 per reading: the side of the offset it lies on (alternating for maxima
        and minima).
    sigmas
        Stated standard uncertainty of each reading (V); None when not stated.
    floor
        Known least standard error of a reading (V): rounding of the written digits and
        the scope's accuracy (:attr:`xcheck.fixture.scope_table.ScopeSetting.reading_floor`),
        combined in quadrature.
    fit_offset
        Fit the level the ringing settles to as well (as the estimate does).
    floor_stated
        True when ``floor`` includes an accuracy the user stated (the ``[scope]``
        table), so that it bounds the reading error from below; False when it is the
        rounding of the digits alone.

    Returns
    -------
    MissTest

    Notes
    -----
    For each reading the model ``sign * exp(a - alpha t) + offset`` is fitted to the
    others by least squares; the reading's miss is divided by
    ``sqrt(sigma^2 + var(prediction))``. With the error scale estimated from the others
    (no stated sigmas) this is an externally studentised residual with
    ``n - 1 - p`` degrees of freedom (p = 2 or 3 fitted values; Belsley, Kuh & Welsch,
    Regression Diagnostics, 1980, from memory), tested at Student's t, and a miss
    below :data:`ORDINARY_MISS` is never flagged. With a stated floor the error is
    ``max(floor, scatter)`` and the threshold the normal one, with
    :data:`PRACTICAL_MISS` as the practical threshold: few readings cannot estimate
    their own error, the floor says what it is at least.
    """
    t = np.asarray(times, float)
    v = np.asarray(values, float)
    sign = np.asarray(signs, float)
    n = t.size
    p = 3 if fit_offset else 2
    floor = max(float(floor), 0.0) if math.isfinite(floor) else 0.0
    if n < p + 2:
        return MissTest((), math.inf, floor, math.inf, ())
    stated = None if sigmas is None else np.asarray(sigmas, float)
    normal = float(normal_isf(FAMILY_LEVEL / (2 * n)))
    tc = (t - t.mean()) / max(float(np.ptp(t)), 1e-300)
    # Forward search: a misread reading left in the others' fit drags it and makes its
    # neighbours look off (masking); the worst flagged reading is set aside and the
    # rest judged again, until none is flagged.
    excluded: set[int] = set()
    while True:
        misses = _one_pass(tc, v, sign, stated, floor, fit_offset, excluded, normal,
                           floor_stated)
        if misses is None:
            return MissTest((), math.inf, floor, math.inf, ())
        fresh = [m for m in misses if m.flagged and m.index not in excluded]
        if not fresh or n - len(excluded) - 1 < p + 3:
            break
        excluded.add(max(fresh, key=lambda m: abs(m.deviation)).index)
    found = tuple(replace(m, flagged=m.index in excluded or m.flagged) for m in misses)
    threshold = (normal if stated is not None or floor_stated
                 else float(student_isf(FAMILY_LEVEL / (2 * n), n - 1 - p)))
    last = found[-1]
    total = math.sqrt(last.sigma ** 2 + last.prediction_variance)
    detectable = (max(threshold * total / last.envelope, PRACTICAL_MISS)
                  if last.envelope > 0 else math.inf)
    return MissTest(found, threshold, floor, float(detectable),
                    _findings(found, threshold, float(detectable), n))


def _one_pass(tc: np.ndarray, v: np.ndarray, sign: np.ndarray, stated: np.ndarray | None,
              floor: float, fit_offset: bool, excluded: set[int],
              normal: float, floor_stated: bool) -> list[ReadingMiss] | None:
    """Every reading against the fit to the others, those in ``excluded`` left out too."""
    n = tc.size
    p = 3 if fit_offset else 2
    out = []
    for i in range(n):
        rest = np.array([j != i and j not in excluded for j in range(n)])
        fit = _fit_without(tc[rest], v[rest], sign[rest], None if stated is None else stated[rest],
                           fit_offset, tc[i], sign[i])
        if fit is None:
            return None
        predicted, var_pred, scatter, _level, env = fit
        miss = float(v[i] - predicted)
        sigma = float(stated[i]) if stated is not None else max(floor, scatter)
        z = sign[i] * miss / math.sqrt(max(sigma ** 2 + var_pred, 1e-300))
        fraction = sign[i] * miss / env if env > 0 else math.inf
        if stated is not None:
            flagged = abs(z) > normal
        elif floor_stated:
            flagged = abs(z) > normal and abs(fraction) > PRACTICAL_MISS
        else:
            student = float(student_isf(FAMILY_LEVEL / (2 * n), int(rest.sum()) - p))
            z_scatter = sign[i] * miss / math.sqrt(max(scatter ** 2 + var_pred, 1e-300))
            flagged = abs(z_scatter) > student and abs(fraction) > ORDINARY_MISS
        out.append(ReadingMiss(i, float(env), float(fraction), float(z), float(sigma),
                               bool(flagged), float(var_pred)))
    return out


def _fit_without(tc: np.ndarray, v: np.ndarray, sign: np.ndarray, sigmas: np.ndarray | None,
                 fit_offset: bool, at: float, sign_at: float
                 ) -> tuple[float, float, float, float, float] | None:
    """Least squares of ``sign * exp(a - b tc) + c`` on the given readings.

    Returns the prediction at ``at`` (V), its variance (V^2), the readings' scatter about
    the fit (V, from their residuals and degrees of freedom), and the fitted offset and
    envelope at ``at``; None when the fit fails.
    """
    weight = np.ones_like(v) if sigmas is None else 1.0 / sigmas
    c0 = float(np.median(v)) if fit_offset else 0.0
    mag = np.maximum(sign * (v - c0), 1e-300 + 1e-12 * float(np.max(np.abs(v))))
    slope, intercept = np.polyfit(tc, np.log(mag), 1)
    x0 = np.array([intercept, -slope] + ([c0] if fit_offset else []))

    def model(x: np.ndarray, tt: np.ndarray, ss: np.ndarray) -> np.ndarray:
        return ss * np.exp(np.clip(x[0] - x[1] * tt, -700, 700)) + (x[2] if fit_offset else 0.0)

    def jac(x: np.ndarray, tt: np.ndarray, ss: np.ndarray) -> np.ndarray:
        e = ss * np.exp(np.clip(x[0] - x[1] * tt, -700, 700))
        cols = [e, -tt * e] + ([np.ones_like(tt)] if fit_offset else [])
        return np.column_stack(cols)

    try:
        res = least_squares(lambda x: (model(x, tc, sign) - v) * weight, x0,
                            jac=lambda x: jac(x, tc, sign) * weight[:, None], method="lm")
    except (ValueError, np.linalg.LinAlgError):
        return None
    if not np.all(np.isfinite(res.x)):
        return None
    dof = v.size - x0.size
    resid = res.fun
    scale2 = float(resid @ resid) / dof if sigmas is None and dof > 0 else 1.0
    scatter = math.sqrt(scale2) if sigmas is None else 0.0
    try:
        cov = np.linalg.inv(res.jac.T @ res.jac) * scale2
    except np.linalg.LinAlgError:
        return None
    row = jac(res.x, np.array([at]), np.array([sign_at]))[0]
    predicted = float(model(res.x, np.array([at]), np.array([sign_at]))[0])
    envelope = float(np.exp(np.clip(res.x[0] - res.x[1] * at, -700, 700)))
    with np.errstate(over="ignore", invalid="ignore"):  # far outside the others' span
        variance = float(row @ cov @ row)
    variance = max(variance, 0.0) if math.isfinite(variance) else math.inf
    return predicted, variance, scatter, \
        float(res.x[2]) if fit_offset else 0.0, envelope


def _findings(misses: tuple[ReadingMiss, ...], threshold: float, detectable: float,
              n: int) -> tuple[str, ...]:
    out = []
    for m in misses:
        if m.flagged:
            out.append(
                f"reading {m.index + 1} of {n} lies {abs(m.fraction) * 100:.0f} % "
                f"{'below' if m.fraction < 0 else 'above'} the exponential through the others "
                f"({abs(m.deviation):.1f} standard errors of ±{_volts(m.sigma)}; flag threshold "
                f"{threshold:.1f} and {PRACTICAL_MISS * 100:.0f} %): a misread cursor, a "
                "mistyped value, or a loss that grows as the amplitude falls")
    if any(m.flagged for m in misses):
        return tuple(out)
    worst = max(misses, key=lambda m: abs(m.fraction))
    if abs(worst.fraction) > PRACTICAL_MISS:
        out.append(
            f"with {n} readings a miss of {abs(worst.fraction) * 100:.0f} % at reading "
            f"{worst.index + 1} cannot be ruled out as chance at the error the readings show "
            f"(±{_volts(worst.sigma)}, {abs(worst.deviation):.1f} standard errors against a "
            f"threshold of {threshold:.1f}); if it is not chance, it is a misread cursor or "
            "a loss that grows as the amplitude falls: re-read it, or state the reading error (a "
            "[scope] table in the fixture) so that the test can decide")
    elif detectable > 2 * PRACTICAL_MISS:
        out.append(
            f"with {n} readings, a miss of up to {detectable * 100:.0f} % at the last "
            "reading would pass this test: the decay is one exponential only as far as so "
            "few readings can tell")
    return tuple(out)


def _volts(value: float) -> str:
    return format_eng(value, "V")

