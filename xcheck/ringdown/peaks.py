"""Ring-down estimate from a table of extrema read off scope cursors.

Model of what was read. The capacitor voltage of a series RLC released with zero loop
current is ``v(t) = c + V0 exp(-alpha t) (cos(omega_d t) + (alpha/omega_d) sin(omega_d t))``;
its extrema are where the current ``i ~ exp(-alpha t) sin(omega_d t)`` is zero, i.e.
exactly at ``t_k = t0 + k pi / omega_d``, with values ``c + V0 (-1)^k exp(-alpha (t_k - t0))``
(any circuit-theory text on the series RLC natural response; derivation in the
docstring above). So the readings are fitted jointly:

* times: ``t_k = t0 + k h`` with ``h = pi / omega_d`` (k counts half periods; a table of
  maxima only steps k by 2);
* values: ``v_k = c + B (-1)^k exp(-alpha (t0 + k h - t_first))``,

by weighted least squares (scipy.optimize.least_squares), each block weighted by its
standard deviation: the given reading uncertainties for the values, the scatter of the
times about a straight line for the times (cursor time readings carry no stated
uncertainty). Neither is taken below the rounding of the numbers as written: a reading
rounded to a step ``r`` errs by up to ``r / 2``, uniformly, so by ``r / sqrt(12)``
standard deviation (the usual model of rounding, common practice).

Rounded times of an equally spaced lattice do not err independently: times read at
0.1 ms off a ring whose half period is 0.495 ms all fall on an exact 0.5 ms lattice,
their rounding errors growing by 0.005 ms a reading, and they scatter not at all about
a line. So the half periods consistent with every time to within half a step are
found as well (two linear programs, scipy.optimize.linprog; the readings are then
interval-censored, and any lattice through all the intervals is as good as another),
and the half period's standard error is taken as at least that range's width /
sqrt(12) (a uniform distribution over it). Where a standard deviation is estimated
from the residuals of few points,
the standard errors are multiplied by the Student t quantile at the one-sigma coverage
(0.8413) for those degrees of freedom (the coverage-factor practice of the ISO Guide to
the Expression of Uncertainty in Measurement, from memory), so that +-1 stderr keeps its
68 % meaning; given uncertainties that the scatter exceeds are scaled up by the Birge
ratio sqrt(chi^2 / dof) (common practice).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import replace

import numpy as np
from scipy.optimize import least_squares, linprog

from xcheck.errors import TraceError
from xcheck.fitting.stats import covariance_from_jacobian
from xcheck.quantiles import student_ppf
from xcheck.ringdown.envelope import diagnose_envelope
from xcheck.ringdown.reading_misses import reading_misses
from xcheck.ringdown.result import (
    EnvelopeDiagnostics,
    Estimate,
    RingdownEstimate,
    gradient,
    wrap_phase,
)

#: One-sigma coverage probability of the normal distribution, 0.5 (1 + erf(1/sqrt 2)).
ONE_SIGMA = 0.8413447460685429
#: Largest alpha * |t0| accepted: the model is extrapolated to t = 0 by exp(alpha t0).
MAX_EXTRAPOLATION = 50.0
#: Decimal resolution is sought down to this many significant digits of the largest
#: value; finer than that, float rounding blurs the grid and the reading error is
#: negligible anyway.
RESOLUTION_DIGITS = 9


def decimal_resolution(values: np.ndarray) -> float | None:
    """The reading resolution of numbers written in decimal: the coarsest power of ten
    of which every value is a whole multiple.

    Parameters
    ----------
    values
        Readings in SI units, as converted from text (a decimal unit prefix keeps the
        grid decimal: 0.5 ms is 5e-4 s).

    Returns
    -------
    float or None
        The step (same unit), e.g. 1e-4 for times written to 0.1 ms. None when no value
        is finite and non-zero, or the values carry more than
        :data:`RESOLUTION_DIGITS` significant digits (full-precision numbers).

    Notes
    -----
    Trailing zeros are invisible here ("0.50" reads as 0.5), so a column whose every
    entry ends in a written zero gets a step ten times too coarse; the text itself
    (:attr:`xcheck.capture.scope_csv.PeakTable.time_resolution`) tells them apart.
    """
    x = np.asarray(values, dtype=float).ravel()
    x = np.abs(x[np.isfinite(x) & (x != 0)])
    if x.size == 0:
        return None
    top = math.floor(math.log10(float(x.max())))
    for exponent in range(top, top - RESOLUTION_DIGITS, -1):
        q = x / 10.0**exponent
        if np.all(np.abs(q - np.round(q)) <= np.maximum(1e-6, 1e-12 * q)):
            return 10.0**exponent
    return None


def estimate_from_peaks(
    time: np.ndarray,
    voltage: np.ndarray,
    uncertainty: np.ndarray | None = None,
    *,
    source: str = "peak table",
    fit_offset: bool | None = None,
    time_resolution: float | None = None,
    voltage_resolution: float | None = None,
    reading_floor: float = 0.0,
) -> RingdownEstimate:
    """Estimate frequency, decay and amplitude from extrema readings.

    Parameters
    ----------
    time
        Times of the extrema (s), increasing; the origin may be arbitrary.
    voltage
        Values read at the extrema (V).
    uncertainty
        Standard uncertainty of each value (V), or None to use the scatter about the fit.
    source
        Name of the input for error messages.
    fit_offset
        Fit the level the ringing settles to. Default: yes when the readings alternate
        and there are at least 4, or they do not alternate and there are at least 5;
        otherwise the offset is held at 0 V.
    time_resolution, voltage_resolution
        Step of the last digit the times (s) and values (V) were written with
        (:attr:`xcheck.capture.scope_csv.PeakTable.time_resolution` gives it from the text).
        Default: inferred from the numbers (:func:`decimal_resolution`); 0 turns the
        floor off. Their rounding, ``resolution / sqrt(12)`` standard deviation, is the
        least error the times and values are taken to carry.
    reading_floor
        Known least standard error of a value (V) besides its rounding, e.g. the scope's
        vertical accuracy (:attr:`xcheck.fixture.scope_table.ScopeSetting.reading_floor`).
        With few readings the envelope test judges each reading against at least this
        (:mod:`xcheck.ringdown.reading_misses`).

    Returns
    -------
    RingdownEstimate
        Estimates with standard errors (``crb`` None: the Cramér-Rao bound is defined
        for a sampled trace), the readings as extrema, envelope diagnostics.

    Raises
    ------
    TraceError
        Fewer than 3 readings, non-finite or non-increasing times, non-positive
        uncertainties, or spacings that are not whole half periods.
    """
    t, v, u = _validated(time, voltage, uncertainty, source)
    k, alternating = _lattice(t, v, source)
    resolution = _rounding(t, v, time_resolution, voltage_resolution, source)
    n = len(t)
    if fit_offset is None:
        fit_offset = n >= (4 if alternating else 5)
    if alternating and not fit_offset and (np.all(v > 0) or np.all(v < 0)):
        raise TraceError(
            source,
            [
                f"the {n} readings alternate about a level away from 0 V "
                f"({float(np.min(v)):.6g} V to {float(np.max(v)):.6g} V); fitting that level "
                "as well needs at least 4 readings: read further extrema off the trace"
            ],
        )
    notes: list[str] = []
    if not fit_offset:
        notes.append(f"offset held at 0 V ({n} readings are too few to fit it as well)")
    if not alternating:
        notes.append(
            "readings do not alternate: taken as one extremum per period (maxima or minima only)"
        )
    start = _start(t, v, k, fit_offset)
    diag_offset = _robust_offset(t, v, u, k, start, fit_offset)
    sign = np.sign(start[3]) * np.where(k % 2 == 0, 1.0, -1.0)
    amplitude = np.maximum(sign * (v - diag_offset), 1e-300)
    if not (math.isfinite(reading_floor) and reading_floor >= 0):
        raise TraceError(source, [f"the reading floor is {reading_floor!r}; give a standard "
                                  "error >= 0 V"])
    misses = reading_misses(t, v, sign, u, math.hypot(resolution[1] / math.sqrt(12.0),
                                                        reading_floor), fit_offset,
                            floor_stated=reading_floor > 0)
    # Without stated uncertainties, cursor readings are taken to err by about the same
    # number of volts at every extremum (relative weights, unknown scale).
    envelope = diagnose_envelope(
        t, amplitude, u if u is not None else np.ones(n), relative=u is None, kind="peaks",
        misses=misses,
    )
    every = np.ones(n, dtype=bool)
    main = _estimate(
        t, v, u, k, every, start, fit_offset, alternating, notes, envelope, source, resolution
    )
    if not envelope.flagged or n - len(envelope.flagged) < 3:
        return main
    kept = every.copy()
    kept[envelope.flagged] = False
    cleaned = _estimate(
        t,
        v,
        u,
        k,
        kept,
        start,
        fit_offset and int(kept.sum()) >= (4 if alternating else 5),
        alternating,
        notes + [f"readings {envelope.flagged} left out"],
        envelope,
        source,
        resolution,
    )
    if envelope.pattern == "isolated":
        return replace(
            cleaned,
            excludes_flagged=True,
            notes=cleaned.notes
            + ("main estimate leaves the flagged readings out; 'alternate' keeps them",),
            alternate=main,
        )
    return replace(
        main,
        notes=main.notes
        + ("flagged readings kept (systematic pattern); 'alternate' leaves them out",),
        alternate=replace(cleaned, excludes_flagged=True),
    )


def _validated(
    time: np.ndarray, voltage: np.ndarray, uncertainty: np.ndarray | None, source: str
) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    t = np.asarray(time, dtype=float).ravel()
    v = np.asarray(voltage, dtype=float).ravel()
    problems = []
    if t.shape != v.shape:
        raise TraceError(source, [f"{len(t)} times but {len(v)} values; give one value per time"])
    if len(t) < 3:
        problems.append(
            f"only {len(t)} extrema in the table; at least 3 are needed (more give smaller "
            "uncertainties): read further extrema off the trace"
        )
    for name, arr in (("time", t), ("value", v)):
        bad = ~np.isfinite(arr)
        if bad.any():
            problems.append(f"{name} in row {int(np.argmax(bad)) + 1} is not a finite number")
    if len(t) > 1 and np.all(np.isfinite(t)) and np.any(np.diff(t) <= 0):
        i = int(np.argmax(np.diff(t) <= 0))
        problems.append(
            f"time does not increase from row {i + 1} to row {i + 2} "
            f"({float(t[i]):.9g}, {float(t[i + 1]):.9g}); "
            "list the extrema in time order, each once"
        )
    u = None
    if uncertainty is not None:
        u = np.asarray(uncertainty, dtype=float).ravel()
        if u.shape != t.shape:
            problems.append(f"{len(u)} uncertainties for {len(t)} readings; give one per reading")
        elif np.any(~np.isfinite(u) | (u <= 0)):
            i = int(np.argmax(~np.isfinite(u) | (u <= 0)))
            problems.append(
                f"uncertainty in row {i + 1} is {float(u[i]):g}; it must be a positive number"
            )
    if problems:
        raise TraceError(source, problems)
    return t, v, u


def _rounding(
    t: np.ndarray,
    v: np.ndarray,
    time_resolution: float | None,
    voltage_resolution: float | None,
    source: str,
) -> tuple[float, float]:
    """Reading resolutions (s, V) of the times and values, 0 when none."""
    problems = [
        f"the {name} resolution is {value!r}; give a step >= 0 (0: no floor) or None"
        for name, value in (("time", time_resolution), ("voltage", voltage_resolution))
        if value is not None and not (math.isfinite(value) and value >= 0)
    ]
    if problems:
        raise TraceError(source, problems)
    if time_resolution is None:
        time_resolution = decimal_resolution(t) or 0.0
    if voltage_resolution is None:
        voltage_resolution = decimal_resolution(v) or 0.0
    return float(time_resolution), float(voltage_resolution)


def rounded_time_sigma(
    time: np.ndarray, k: np.ndarray, resolution: float
) -> tuple[float, tuple[float, float] | None]:
    """Least standard deviation to give each extremum time, read to ``resolution``.

    Parameters
    ----------
    time
        Extremum times (s) as read.
    k
        Half-period count of each (whole numbers, increasing).
    resolution
        Step of the last written digit of the times (s); 0 for none.

    Returns
    -------
    (float, tuple or None)
        The standard deviation (s): ``resolution / sqrt(12)``, raised when the times
        fit a range of equally spaced lattices wider than that implies, to the value
        that gives a straight-line fit of time against ``k`` a slope (half period)
        standard error of that range's width / sqrt(12). And the range (smallest and
        largest half period, s) when it set the value, else None.
    """
    if not resolution > 0:
        return 0.0, None
    sigma = resolution / math.sqrt(12.0)
    kf = np.asarray(k, dtype=float)
    if kf.size < 3:
        return sigma, None
    span = _half_period_range(np.asarray(time, dtype=float), kf, resolution)
    if span is None:
        return sigma, None
    # Simple linear regression: slope standard error = sigma / sqrt(sum (k - mean)^2).
    spread = math.sqrt(float(np.sum((kf - kf.mean()) ** 2)))
    from_span = (span[1] - span[0]) / math.sqrt(12.0) * spread
    return (from_span, span) if from_span > sigma else (sigma, None)


def _half_period_range(
    t: np.ndarray, k: np.ndarray, resolution: float
) -> tuple[float, float] | None:
    """Smallest and largest half period ``h`` (s) for which some ``t0`` puts every
    ``t0 + k h`` within ``resolution / 2`` of its reading; None when no lattice does
    (the times err by more than their rounding).

    Two linear programs in units of the resolution (scipy.optimize.linprog, HiGHS):
    minimise and maximise ``h`` subject to ``|t0 + k h - t_k| <= 1/2``.
    """
    x = (t - t[0]) / resolution
    kf = k.astype(float)
    rows = np.column_stack((np.ones_like(kf), kf))
    a_ub = np.vstack((rows, -rows))
    b_ub = np.concatenate((x + 0.5, 0.5 - x))
    bounds = [(None, None), (None, None)]
    ends = []
    for sign in (1.0, -1.0):
        found = linprog([0.0, sign], A_ub=a_ub, b_ub=b_ub, bounds=bounds, method="highs")
        if found.status != 0:
            return None
        ends.append(float(found.x[1]) * resolution)
    return ends[0], max(ends[1], ends[0])


def _lattice(t: np.ndarray, v: np.ndarray, source: str) -> tuple[np.ndarray, bool]:
    """Half-period count of every reading, and whether the readings alternate."""
    d = np.diff(t)
    ref = float(np.median(d))
    ratio = d / ref
    steps = np.round(ratio)
    off = np.abs(ratio - steps)
    if np.any(steps < 1) or np.any(off > 0.25):
        i = int(np.argmax((steps < 1) | (off > 0.25)))
        raise TraceError(
            source,
            [
                f"rows {i + 1} and {i + 2} are {float(d[i]):.6g} s apart, {ratio[i]:.2f} times "
                "the usual "
                f"spacing {ref:.6g} s; extrema of one ring-down are whole half periods apart: "
                "check for a missing, extra or misplaced row"
            ],
        )
    dv = np.sign(np.diff(v))
    changes = int(np.sum(dv[1:] != dv[:-1]))
    alternating = changes * 2 > len(dv) - 1
    k = np.concatenate(([0], np.cumsum(steps))).astype(int)
    if not alternating:
        k = 2 * k
    return k, alternating


def _geometric_offset(v: np.ndarray, k: np.ndarray) -> float:
    """Median over equally spaced triples of the level a geometric sequence tends to.

    For ``v_j = c + B q^j``: ``c = (v0 v2 - v1^2) / (v0 + v2 - 2 v1)`` (Aitken's formula).
    """
    found = []
    for j in range(len(v) - 2):
        if k[j + 1] - k[j] == k[j + 2] - k[j + 1]:
            den = v[j] + v[j + 2] - 2.0 * v[j + 1]
            if den != 0:
                found.append((v[j] * v[j + 2] - v[j + 1] ** 2) / den)
    return float(np.median(found)) if found else 0.0


def _start(t: np.ndarray, v: np.ndarray, k: np.ndarray, fit_offset: bool) -> np.ndarray:
    """Starting ``[t0, h, alpha, B, c]`` from a line through the times and log-values."""
    h, t0 = np.polyfit(k, t, 1)
    c = _geometric_offset(v, k) if fit_offset else 0.0
    mag = np.abs(v - c)
    if np.any(mag <= 0):
        c, mag = 0.0, np.abs(v)
    mag = np.maximum(mag, 1e-300)
    tau = t0 + k * h
    slope, icpt = np.polyfit(tau - t[0], np.log(mag), 1)
    sign = math.copysign(1.0, v[0] - c)
    return np.array([t0, h, -slope, sign * math.exp(icpt), c])


def _values_model(p: np.ndarray, k: np.ndarray, t_first: float) -> np.ndarray:
    t0, h, alpha, b, c = p
    tau = t0 + k * h
    # Clipped exponent: trial steps of the optimiser may try absurd decay rates.
    decay = np.exp(np.clip(-alpha * (tau - t_first), -700.0, 700.0))
    return c + b * np.where(k % 2 == 0, 1.0, -1.0) * decay


def _robust_offset(
    t: np.ndarray,
    v: np.ndarray,
    u: np.ndarray | None,
    k: np.ndarray,
    start: np.ndarray,
    fit_offset: bool,
) -> float:
    """Offset of a soft-L1 fit of the values (not dragged by one bad reading)."""
    if not fit_offset:
        return 0.0
    scale = (
        u if u is not None else np.full(len(v), max(1e-3 * np.max(np.abs(v - start[4])), 1e-300))
    )

    def resid(q: np.ndarray) -> np.ndarray:
        return (v - _values_model(np.array([start[0], start[1], *q]), k, t[0])) / scale

    fit = least_squares(resid, start[2:], loss="soft_l1", f_scale=1.0, x_scale="jac")
    return float(fit.x[2])


def _estimate(
    t: np.ndarray,
    v: np.ndarray,
    u: np.ndarray | None,
    k: np.ndarray,
    use: np.ndarray,
    start: np.ndarray,
    fit_offset: bool,
    alternating: bool,
    notes: list[str],
    envelope: EnvelopeDiagnostics,
    source: str,
    resolution: tuple[float, float] = (0.0, 0.0),
) -> RingdownEstimate:
    """Joint weighted fit of the readings in ``use``; covariance; transform to the model.

    ``resolution`` holds the reading resolutions (s, V) of the times and values as
    written; their rounding sets floors on the time scatter and the value uncertainties.
    """
    notes = list(notes)
    tt, vv, kk = t[use], v[use], k[use]
    uu = None if u is None else u[use]
    n = len(tt)
    free = [0, 1, 2, 3] + ([4] if fit_offset else [])
    n_values = 3 if fit_offset else 2
    p = start.copy()
    if not fit_offset:
        p[4] = 0.0
    h, t0 = np.polyfit(kk, tt, 1)
    p[0], p[1] = t0, h
    dof_t = n - 2
    s_t = math.sqrt(float(np.sum((tt - (t0 + kk * h)) ** 2)) / dof_t)
    res_t, res_v = resolution
    root12 = math.sqrt(12.0)
    round_v = res_v / root12
    round_t, span = rounded_time_sigma(tt, kk, res_t)
    if round_t > s_t:
        notes.append(
            f"the times lie within {s_t:.3g} s (rms) of equal spacing, closer than rounding "
            f"them to their last written digit ({res_t:.3g} s) allows; their standard "
            f"deviation is taken as {round_t:.3g} s"
            + (
                f" (equally spaced lattices through every time to within half that step "
                f"have half periods from {span[0]:.6g} s to {span[1]:.6g} s: the half "
                "period's standard error is taken as that width / sqrt(12))"
                if span is not None
                else f" ({res_t:.3g} s / sqrt(12))"
            )
        )
    s_t = max(s_t, round_t, 1e-9 * abs(h))

    value_free = [i for i in free if i >= 2]

    def value_resid(q: np.ndarray) -> np.ndarray:
        full = p.copy()
        full[value_free] = q
        return vv - _values_model(full, kk, t[0])

    dof_v = n - n_values
    if uu is None:
        pre = least_squares(value_resid, p[value_free], x_scale="jac", method="lm")
        scatter = math.sqrt(2.0 * pre.cost / max(dof_v, 1))
        s_v = np.full(n, max(scatter, round_v, 1e-12 * np.max(np.abs(vv))))
        floored = round_v > scatter
    else:
        s_v = np.maximum(uu, round_v)
        floored = bool(np.any(uu < round_v))
    if floored:
        notes.append(
            "the values are taken to err by at least the rounding of their last written "
            f"digit ({round_v * math.sqrt(12.0):.3g} V / sqrt(12) = {round_v:.3g} V)"
        )

    def joint(q: np.ndarray) -> np.ndarray:
        full = p.copy()
        full[free] = q
        r_t = (tt - (full[0] + kk * full[1])) / s_t
        r_v = (vv - _values_model(full, kk, t[0])) / s_v
        return np.concatenate([r_t, r_v])

    fit = least_squares(
        joint, p[free], x_scale="jac", method="lm", xtol=1e-14, ftol=1e-14, gtol=1e-14
    )
    r_v = fit.fun[n:]
    factor_v = 1.0
    residual_based_v = uu is None
    if uu is not None and dof_v > 0:
        birge2 = float(np.sum(r_v**2)) / dof_v
        if birge2 > 1.0:
            factor_v = math.sqrt(birge2)
            residual_based_v = True
            notes.append(
                f"the readings scatter {factor_v:.2f} times their stated uncertainties (Birge "
                "ratio); uncertainties scaled up accordingly"
            )
    jac = fit.jac.copy()
    jac[n:] /= factor_v
    cov_free = covariance_from_jacobian(jac)
    k_t = float(student_ppf(ONE_SIGMA, max(dof_t, 1)))
    k_v = float(student_ppf(ONE_SIGMA, max(dof_v, 1))) if residual_based_v else 1.0
    coverage = np.array([k_t, k_t, k_v, k_v, k_v])[free]
    cov_free = cov_free * np.outer(coverage, coverage)
    notes.append(
        f"standard errors include Student-t coverage factors {k_t:.2f} (times, {dof_t} dof)"
        + (f" and {k_v:.2f} (values, {dof_v} dof)" if residual_based_v else "")
    )
    p_hat = p.copy()
    p_hat[free] = fit.x
    cov_p = np.zeros((5, 5))
    cov_p[np.ix_(free, free)] = cov_free
    t0, h, alpha, b, c = p_hat
    if alpha * abs(t0) > MAX_EXTRAPOLATION and alpha * t0 > 0:
        raise TraceError(
            source,
            [
                f"the first extremum is at {float(t0):.6g} s, {alpha * t0:.0f} decay times "
                "after t = 0; "
                "the amplitude at t = 0 cannot be extrapolated that far: give times relative "
                "to the event or to the first extremum"
            ],
        )
    funcs = _quantities(p_hat, t[0])
    values = np.array([f(p_hat) for f in funcs])
    grads = np.array([gradient(f, p_hat, cov_p) for f in funcs])
    cov_q = grads @ cov_p @ grads.T

    def est(i: int) -> Estimate:
        return Estimate(float(values[i]), math.sqrt(max(cov_q[i, i], 0.0)), None)

    two_pi = 2.0 * math.pi
    amp, phase = values[2], values[3]
    theta = np.array([alpha, math.pi / h, amp * math.cos(phase), -amp * math.sin(phase), c])
    resid_v = r_v * s_v
    return RingdownEstimate(
        neper_frequency=est(0),
        angular_frequency=est(1),
        damped_frequency=Estimate(values[1] / two_pi, math.sqrt(cov_q[1, 1]) / two_pi, None),
        amplitude=est(2),
        phase=Estimate(wrap_phase(values[3]), math.sqrt(cov_q[3, 3]), None),
        offset=est(4),
        initial_volts=est(5),
        covariance=cov_q[:5, :5],
        crb_covariance=None,
        model_parameters=theta,
        extrema_time=t.copy(),
        extrema_value=v.copy(),
        noise_sigma=float(np.median(s_v) * factor_v),
        noise_source=(
            "scatter of the readings about the fit"
            if uu is None
            else "stated reading uncertainties"
            + (" (scaled by the Birge ratio)" if factor_v > 1 else "")
        ),
        samples_used=n,
        samples_excluded=int(len(t) - n),
        effective_samples=float(n),
        residual_rms=float(np.sqrt(np.mean(resid_v**2))),
        envelope=envelope,
        method=(
            "peak table: series-RLC extrema t_k = t0 + k pi/omega_d, "
            "v_k = c + B (-1)^k exp(-alpha t_k), joint weighted least squares"
        ),
        notes=tuple(notes),
        success=bool(fit.success),
    )


def _quantities(p: np.ndarray, t_first: float) -> list[Callable[[np.ndarray], float]]:
    """alpha, omega_d, A, phi, offset, initial volts of ``A exp(-alpha t) cos(omega t + phi) + c``.

    The extrema model is the capacitor voltage ``c + B0 exp(-alpha (t - t0))
    (cos(omega (t - t0)) + (alpha/omega) sin(omega (t - t0)))`` with ``B0`` the signed
    extremum at ``t0``; written as a damped cosine about t = 0 its complex amplitude is
    ``B0 exp(alpha t0) (1 - j alpha/omega) exp(-j omega t0)``.
    """

    def phasor(q: np.ndarray) -> complex:
        t0, h, alpha, b, _ = q
        omega = math.pi / h
        b0 = b * math.exp(-alpha * (t0 - t_first))
        return (
            b0
            * math.exp(alpha * t0)
            * complex(1.0, -alpha / omega)
            * complex(math.cos(omega * t0), -math.sin(omega * t0))
        )

    hat = phasor(p)
    phase0 = math.atan2(hat.imag, hat.real)
    return [
        lambda q: q[2],
        lambda q: math.pi / q[1],
        lambda q: abs(phasor(q)),
        lambda q: phase0 + float(np.angle(phasor(q) / hat)),
        lambda q: q[4],
        lambda q: phasor(q).real + q[4],
    ]
