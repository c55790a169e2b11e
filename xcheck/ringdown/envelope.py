"""Is the decay one exponential? Robust line through the log-amplitudes of the extrema.

The extrema of ``A exp(-alpha t) cos(omega_d t + phi)`` have magnitudes
``A (omega_d / omega0) exp(-alpha t)``, so ``log|extremum - offset|`` is a straight line
in time. A robust fit (Theil-Sen start, :func:`xcheck.ringdown.robust_line.theil_sen`; then
scipy.optimize.least_squares with the soft-L1 loss) is not dragged by single bad points;
each extremum's deviation from it is expressed in standard errors and the ones beyond a
Bonferroni-style threshold (1 % family-wise, common practice) are flagged. A weighted
quadratic through the unflagged points tests for curvature (decay rate changing with
amplitude). The pattern of deviations is named with its usual causes.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.optimize import least_squares

from xcheck.quantiles import normal_isf, student_isf
from xcheck.ringdown.reading_misses import MissTest
from xcheck.ringdown.result import EnvelopeDiagnostics
from xcheck.ringdown.robust_line import theil_sen
from xcheck.values import format_eng

#: Family-wise false-flag probability for the outlier test, and the two-sided level of
#: the curvature test (common practice, no source).
FAMILY_LEVEL = 0.01
CURVATURE_LEVEL = 0.01

_ISOLATED_CAUSE = {
    "peaks": "a misread cursor or a mistyped value",
    "trace": "a glitch, spike or burst of interference at that instant",
}


def _mad_scale(x: np.ndarray) -> float:
    """1.4826 x median absolute deviation: the normal-consistent robust spread."""
    return 1.4826 * float(np.median(np.abs(x - np.median(x))))


def diagnose_envelope(
    times: np.ndarray,
    amplitudes: np.ndarray,
    sigmas: np.ndarray | None = None,
    *,
    relative: bool = False,
    kind: str = "trace",
    misses: MissTest | None = None,
) -> EnvelopeDiagnostics:
    """Test whether extrema decay as one exponential and flag those that do not.

    Parameters
    ----------
    times
        Extremum times (s), increasing.
    amplitudes
        Extremum magnitudes measured from the offset (V), positive.
    sigmas
        Standard deviation of each magnitude (V). None means equal, unknown errors.
    relative
        True when ``sigmas`` give only the relative size of the errors and their common
        scale is unknown (cursor readings without stated uncertainty).
    kind
        ``"trace"`` or ``"peaks"``: only changes the wording of likely causes.
    misses
        A peak table's leave-one-out test (:func:`xcheck.ringdown.reading_misses.reading_misses`):
        when given, its deviations and flags replace this function's own outlier test,
        and its sentences (each reading's miss in percent and standard errors, or what
        so few readings cannot rule out) replace the per-extremum ones.

    Returns
    -------
    EnvelopeDiagnostics
        Flags (0-based, time order), deviations in standard errors, pattern, findings.

    Notes
    -----
    Known errors: deviations from the robust line in standard errors, threshold from the
    normal distribution. Unknown scale: externally studentised (leave-one-out)
    residuals of the weighted straight line, which follow Student's t with n - 3
    degrees of freedom for normal errors (Belsley, Kuh & Welsch, Regression
    Diagnostics, 1980, from memory), so one bad point cannot hide itself by inflating
    the scale it is judged against.
    """
    t = np.asarray(times, dtype=float)
    amp = np.asarray(amplitudes, dtype=float)
    n = len(t)
    known = sigmas is not None and not relative
    if n < (3 if known else 4) or np.any(amp <= 0):
        rate = (
            float(-np.polyfit(t, np.log(np.abs(amp)), 1)[0])
            if n >= 2 and np.all(amp > 0)
            else math.nan
        )
        return EnvelopeDiagnostics(
            exponential=True,
            flagged=[],
            deviations=np.zeros(n),
            pattern="too_few",
            findings=[
                f"only {n} usable extrema: too few to test whether the decay is one "
                f"exponential ({3 if known else 4} or more are needed"
                + ("" if known else " when the reading uncertainty is not stated")
                + ")"
            ],
            robust_neper_frequency=rate,
        )
    y = np.log(amp)
    tc = t - t.mean()
    slope0, intercept0 = theil_sen(y, tc)
    # Errors on the log scale are sigma / amplitude. The amplitude is taken from the
    # robust line, not from each noisy point: weights computed from the points
    # themselves favour the ones noise pushed up and bend the fit at the quiet end.
    smooth = np.exp(intercept0 + slope0 * tc)
    s_y = (
        np.ones(n)
        if sigmas is None
        else np.maximum(np.asarray(sigmas, dtype=float) / smooth, 1e-12)
    )
    scale = 1.0 if known else max(_mad_scale((y - (intercept0 + slope0 * tc)) / s_y), 1e-9)

    def resid(p: np.ndarray) -> np.ndarray:
        return (y - (p[0] + p[1] * tc)) / (s_y * scale)

    jac = -np.column_stack([np.ones(n), tc]) / (s_y * scale)[:, None]
    fit = least_squares(resid, [intercept0, slope0], jac=lambda p: jac, loss="soft_l1", f_scale=1.0)
    if known:
        # Deviations measured on the amplitude scale, where the errors are Gaussian; on
        # the log scale a low extremum near the noise would look more extreme than an
        # equally high one.
        z = (amp - np.exp(fit.x[0] + fit.x[1] * tc)) / np.asarray(sigmas, dtype=float)
        if n >= 6:
            z = z / max(1.0, _mad_scale(z))
        threshold = max(3.0, float(normal_isf(FAMILY_LEVEL / (2 * n))))
    else:
        z = _deleted_residuals(tc, y, s_y)
        threshold = max(3.0, float(student_isf(FAMILY_LEVEL / (2 * n), n - 3)))
    flagged = [int(i) for i in np.flatnonzero(np.abs(z) > threshold)]
    if misses is not None and len(misses.misses) == n:
        z = np.array([m.deviation for m in misses.misses])
        flagged = misses.flagged
        threshold = misses.threshold
    good = np.ones(n, dtype=bool)
    good[flagged] = False
    curvature_t, curved = _curvature(tc[good], y[good], s_y[good], known)
    pattern = _pattern(flagged, z, n, curved, curvature_t)
    findings = _findings(pattern, flagged, z, n, curvature_t, threshold, kind,
                         None if misses is None or len(misses.misses) != n else misses.findings)
    if pattern != "none" and good.sum() >= 6:
        early, late = _halves(t[good], y[good], s_y[good])
        findings.append(
            f"decay rate from the first half of the extrema {format_eng(early, '/s')}, "
            f"from the second half {format_eng(late, '/s')}"
        )
    exponential = pattern in ("none", "isolated")
    return EnvelopeDiagnostics(
        exponential=exponential,
        flagged=flagged,
        deviations=z,
        pattern=pattern,
        findings=findings,
        robust_neper_frequency=float(-fit.x[1]),
        curvature_t=curvature_t,
    )


def _halves(t: np.ndarray, y: np.ndarray, s: np.ndarray) -> tuple[float, float]:
    """Decay rates (1/s) of weighted lines through the first and the second half."""
    half = len(t) // 2
    early = -np.polyfit(t[:half], y[:half], 1, w=1.0 / s[:half])[0]
    late = -np.polyfit(t[half:], y[half:], 1, w=1.0 / s[half:])[0]
    return float(early), float(late)


def _deleted_residuals(x: np.ndarray, y: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Externally studentised residuals of the weighted line ``y = c0 + c1 x``.

    For each point the line is fitted to the others; the point's deviation from that
    line is divided by its predicted standard deviation, with the error scale estimated
    from the others only.
    """
    n = len(x)
    out = np.empty(n)
    design = np.column_stack([np.ones(n), x]) / s[:, None]
    target = y / s
    for i in range(n):
        rest = np.arange(n) != i
        coef, *_ = np.linalg.lstsq(design[rest], target[rest], rcond=None)
        r = target[rest] - design[rest] @ coef
        s2 = float(r @ r) / (n - 1 - 2)
        inv = np.linalg.inv(design[rest].T @ design[rest])
        row = design[i]
        var = s2 * (1.0 + float(row @ inv @ row))
        out[i] = (target[i] - row @ coef) / math.sqrt(max(var, 1e-300))
    return out


def _curvature(
    tc: np.ndarray, y: np.ndarray, s_y: np.ndarray, known: bool
) -> tuple[float | None, bool]:
    """t-statistic of the quadratic term of a weighted parabola through log-amplitudes."""
    m = len(tc)
    if m < (4 if known else 5):
        return None, False
    coef, cov = np.polyfit(tc, y, 2, w=1.0 / s_y, cov="unscaled")
    chi2 = float(np.sum(((y - np.polyval(coef, tc)) / s_y) ** 2))
    dof = m - 3
    birge = max(1.0, chi2 / dof)
    se = math.sqrt(cov[0, 0] * birge)
    t_value = float(coef[0] / se) if se > 0 else 0.0
    if known:
        critical = float(normal_isf(CURVATURE_LEVEL / 2))
    else:
        critical = float(student_isf(CURVATURE_LEVEL / 2, dof))
    return t_value, abs(t_value) > critical


def _end_run(flags: set[int], indices: range) -> list[int]:
    run = []
    for i in indices:
        if i not in flags:
            break
        run.append(i)
    return run


def _pattern(
    flagged: list[int], z: np.ndarray, n: int, curved: bool, curvature_t: float | None
) -> str:
    flags = set(flagged)
    tail = _end_run(flags, range(n - 1, -1, -1))
    head = _end_run(flags, range(n))
    if len(tail) >= 2 and len(tail) < n:
        return "tail_high" if np.mean(z[tail]) > 0 else "tail_low"
    if len(head) >= 2 and len(head) < n:
        return "head_high" if np.mean(z[head]) > 0 else "head_low"
    if curved:
        return "curved"
    if not flagged:
        return "none"
    adjacent = any(b - a == 1 for a, b in zip(flagged, flagged[1:]))
    if not adjacent and len(flagged) <= max(1, n // 5):
        return "isolated"
    return "scattered"


def _findings(
    pattern: str,
    flagged: list[int],
    z: np.ndarray,
    n: int,
    curvature_t: float | None,
    threshold: float,
    kind: str,
    miss_findings: tuple[str, ...] | None = None,
) -> list[str]:
    worst = int(np.argmax(np.abs(z)))
    out = [
        f"{n} extrema tested against one exponential; the largest deviation is "
        f"{z[worst]:+.1f} standard errors at extremum {worst} (flag threshold {threshold:.1f})"
    ]
    if miss_findings is not None:
        out.extend(miss_findings)
    else:
        for i in flagged:
            side = "above" if z[i] > 0 else "below"
            out.append(f"extremum {i} lies {abs(z[i]):.1f} standard errors {side} the exponential")
    if pattern == "none" and not miss_findings:
        out.append("the decay is one exponential within the uncertainties")
    elif pattern == "isolated":
        which = ", ".join(str(i) for i in flagged)
        out.append(
            f"isolated deviation at extremum {which} while its neighbours follow the "
            f"exponential: usually {_ISOLATED_CAUSE.get(kind, _ISOLATED_CAUSE['trace'])}; "
            "the estimate is given without and with it"
        )
    elif pattern == "tail_high":
        out.append(
            "the last extrema lie above the exponential: usually an offset error (baseline "
            "not where the ringing settles), the noise floor or converter resolution "
            "reached, or a second, slower-decaying mode"
        )
    elif pattern == "tail_low":
        out.append(
            "the last extrema lie below the exponential: usually the offset set too far "
            "toward them, or a loss that does not shrink with amplitude (a threshold or "
            "hysteresis-like loss) speeding up the late decay"
        )
    elif pattern == "head_low":
        out.append(
            "the first extrema lie below the exponential: usually clipped or limited peaks "
            "(converter rails, probe or amplifier range) or an event that was not a clean "
            "step (switch bounce, slow closure)"
        )
    elif pattern == "head_high":
        out.append(
            "the first extrema lie above the exponential (faster decay at large amplitude): "
            "usually amplitude-dependent loss such as magnetic core loss rising with flux, "
            "a nonlinear element (diode, varistor, spark gap) or ESR changing with current "
            "or temperature"
        )
    elif pattern == "curved":
        if curvature_t is not None and curvature_t > 0:
            out.append(
                f"the log-envelope curves upward (decay slows as amplitude falls, curvature "
                f"t = {curvature_t:.1f}): usually amplitude-dependent loss (core loss, a "
                "nonlinear element, ESR changing with current) or an offset or noise floor "
                "lifting the late extrema"
            )
        else:
            out.append(
                f"the log-envelope curves downward (decay speeds up as amplitude falls, "
                f"curvature t = {curvature_t:.1f}): usually a loss that does not scale with "
                "amplitude (hysteresis-like, constant energy per cycle) or an offset error"
            )
    elif pattern == "scattered":
        out.append(
            "several extrema deviate without a clear pattern: the stated uncertainties are "
            "probably too small (noise underestimated, interference, readings of uneven care)"
        )
    return out

