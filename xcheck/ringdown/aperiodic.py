"""Estimate of a record that settles without ringing: time constants, omega0 and zeta.

Used by :func:`xcheck.ringdown.estimate_ringdown` when the extrema show too little
ringing, and on its own as :func:`estimate_aperiodic`.

1. Start values: a grid of single decay rates (linear least squares for amplitude and
   level at each), the matrix pencil's poles of a block-averaged copy, and a grid of
   rate pairs (:mod:`xcheck.ringdown.aperiodic_model`).
2. Nonlinear least squares of three nested models about a settled level: first order
   (one exponential), critically damped (``(A + B t) exp(-t / tau)``) and the free
   second order (two real exponentials when its discriminant is positive).
3. The model is chosen by the Bayesian information criterion with the noise level
   profiled from the residuals and the effective sample count (Schwarz 1978, from
   memory; :mod:`xcheck.fitting.stats`): a second exponential is kept only when it
   lowers the BIC (else first order), and two separate time constants only when they
   beat one double root (else critically damped: the data cannot tell them apart).
   A free fit that is significantly oscillatory is not aperiodic; the caller then
   reports too little ringing.
4. Standard errors from the Jacobian, ``s^2 (J^T J)^-1``, or the sandwich covariance
   when the residuals are correlated (never below the white-noise ones), exactly as the
   ringing estimate does; derived quantities by the delta method.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from xcheck.capture.types import MIN_TIME_CONSTANTS, decay_shortfall
from xcheck.errors import TraceError
from xcheck.fitting.stats import bic, covariance_from_jacobian, profiled_deviance
from xcheck.ringdown import aperiodic_model as am
from xcheck.ringdown.aperiodic_result import (
    CRITICALLY_DAMPED,
    FIRST_ORDER,
    OVERDAMPED,
    AperiodicEstimate,
)
from xcheck.ringdown.checks import validated
from xcheck.ringdown.extrema import sample_step, uniformly_sampled
from xcheck.ringdown.nls import (
    at_least,
    block_means,
    given_noise,
    residual_correlation,
    sandwich_covariance,
)
from xcheck.ringdown.result import Estimate, gradient
from xcheck.values import format_eng

#: Above this many usable samples the fit runs on block means.
MAX_FIT_SAMPLES = 50_000
#: Points the start-value searches run on at most (block means).
START_SAMPLES = 400
#: Points handed to the matrix pencil at most.
PENCIL_SAMPLES = 200
#: BIC below the constant's needed before a decay counts as found ("very strong"
#: evidence on Kass & Raftery's 1995 scale, from memory).
SIGNIFICANT_BIC = 10.0
#: The decay must also reach this many noise standard deviations somewhere.
MIN_SNR = 5.0
#: What helps a record in which nothing stands out from the noise.
NOISE_ADVICE = "check the column, the probe, the vertical range and the event time"

_REGIME = {am.FIRST_ORDER: FIRST_ORDER, am.CRITICAL: CRITICALLY_DAMPED, am.SECOND_ORDER: OVERDAMPED}


@dataclass(frozen=True)
class AperiodicOutcome:
    """What the non-ringing analysis found.

    Attributes
    ----------
    kind
        ``"aperiodic"`` (``estimate`` holds the result), ``"noise"`` (no decay stands out
        from the noise), ``"underdamped"`` (the free second-order fit oscillates
        significantly) or ``"short"`` (aperiodic, but the record spans fewer than
        :data:`~xcheck.capture.types.MIN_TIME_CONSTANTS` time constants).
    estimate
        The estimate (``"aperiodic"`` and ``"short"``).
    problem
        ``"short"``: the refusal; ``"underdamped"``: what the second-order fit found
        (damping ratio, natural frequency); ``"noise"``: how far the best decay departs
        from its level, in parentheses (or empty).
    """

    kind: str
    estimate: AperiodicEstimate | None = None
    problem: str = ""


@dataclass(frozen=True)
class _Noise:
    cov: np.ndarray
    crb: np.ndarray
    sigma: float
    source: str
    n_eff: float
    notes: tuple[str, ...]


def estimate_aperiodic(
    time: np.ndarray,
    voltage: np.ndarray,
    *,
    noise_sigma: float | None = None,
    exclude: np.ndarray | None = None,
    resolution: float | None = None,
    source: str = "trace",
) -> AperiodicEstimate:
    """Time constants, omega0 and zeta of a response that settles without ringing.

    Parameters
    ----------
    time
        Sample times (s), strictly increasing, the event at t = 0 (amplitudes and
        ``initial_volts`` refer to t = 0).
    voltage
        Samples (V).
    noise_sigma
        Per-sample noise (V), e.g. from the pre-event baseline; None to use the fit
        residuals (which are used anyway when they scatter significantly more).
    exclude
        Boolean mask of samples to leave out (clipped).
    resolution
        Converter step q (V); above ``noise_sigma`` its q^2/12 is added.
    source
        Name of the input for error messages.

    Returns
    -------
    AperiodicEstimate

    Raises
    ------
    TraceError
        Malformed arrays; no decay above the noise; a response that oscillates; or a
        record spanning fewer than two time constants of its slowest decay.
    """
    t, v, keep = validated(time, voltage, exclude, source)
    outcome = analyse_aperiodic(t, v, keep, noise_sigma=noise_sigma, resolution=resolution)
    if outcome.kind == "aperiodic":
        assert outcome.estimate is not None
        return outcome.estimate
    if outcome.kind == "underdamped":
        raise TraceError(
            source,
            [
                f"the response oscillates ({outcome.problem}), so it is not aperiodic: "
                "estimate it as a ring-down (xcheck.ringdown.estimate_ringdown)"
            ],
        )
    if outcome.kind == "noise":
        raise TraceError(
            source,
            [
                "no decay toward a settled level stands out from the noise"
                f"{outcome.problem}: {NOISE_ADVICE}"
            ],
        )
    raise TraceError(source, [outcome.problem])


def analyse_aperiodic(
    t: np.ndarray,
    v: np.ndarray,
    keep: np.ndarray,
    *,
    noise_sigma: float | None = None,
    resolution: float | None = None,
    notes: tuple[str, ...] = (),
) -> AperiodicOutcome:
    """Fit the three models to the usable samples and say what the record is.

    ``t``, ``v`` and ``keep`` as :func:`xcheck.ringdown.checks.validated` returns them.
    See :class:`AperiodicOutcome` for what ``problem`` holds.
    """
    given = (
        float(noise_sigma)
        if noise_sigma is not None and math.isfinite(noise_sigma) and noise_sigma > 0
        else None
    )
    step = sample_step(t)
    uniform = uniformly_sampled(t, step)
    t_ref = float(t[keep][0])
    ts = t - t_ref
    n_in = int(keep.sum())
    notes = list(notes)
    block = math.ceil(n_in / MAX_FIT_SAMPLES) if uniform and n_in > MAX_FIT_SAMPLES else 1
    if block > 1:
        tf, vf = block_means(ts, v, keep, block)
        notes.append(
            f"fitted on means of {block} samples, the model taken at each block's centre"
        )
    else:
        tf, vf = ts[keep], v[keep]
    every = np.ones(len(tf), dtype=bool)
    tb, vb = block_means(tf, vf, every, max(1, math.ceil(len(tf) / START_SAMPLES)))
    rate0 = am.first_order_rate(tb, vb, step * block)
    scale = 1.0 / rate0  # scaled time u = t / scale: the slowest rate is about one
    u, ub = tf / scale, tb / scale
    pencil = None
    if uniform and bool(keep.all()):
        size = max(1, math.ceil(len(vf) / PENCIL_SAMPLES))
        _, vp = block_means(tf, vf, every, size)
        pencil = am.pencil_rates(vp, size * step * block / scale)
    first = am.fit_candidate(
        am.FIRST_ORDER, u, vf, [am.linear_part(am.FIRST_ORDER, u, vf, (1.0,))]
    ) or am.fit_candidate(
        am.FIRST_ORDER, u, vf, [am.linear_part(am.FIRST_ORDER, u, vf, (r,)) for r in (0.5, 2.0)]
    )
    fits = {
        am.FIRST_ORDER: first,
        am.SECOND_ORDER: am.fit_candidate(
            am.SECOND_ORDER, u, vf, am.second_order_starts(ub, vb, pencil)
        ),
    }
    crit_rates = [1.0] if fits[am.SECOND_ORDER] is None else [
        float(fits[am.SECOND_ORDER].params[0]), 1.0
    ]
    fits[am.CRITICAL] = am.fit_candidate(
        am.CRITICAL, u, vf, [am.linear_part(am.CRITICAL, u, vf, (r,)) for r in crit_rates]
    ) or am.fit_candidate(am.CRITICAL, u, vf, [am.linear_part(am.CRITICAL, u, vf, (2.0,))])
    found = {k: f for k, f in fits.items() if f is not None}
    if not found:
        return AperiodicOutcome("noise", problem=_noise_problem(math.nan))
    order = (am.SECOND_ORDER, am.CRITICAL, am.FIRST_ORDER)
    reference = next(found[k] for k in order if k in found)
    _, n_eff_ref = residual_correlation(reference.residuals)
    n = len(vf)
    floor = n * (1e-13 * float(np.max(np.abs(vf)))) ** 2 + 1e-300

    def score(rss: float, k: int) -> float:
        return bic(profiled_deviance(max(rss, floor), n, n_eff_ref), k, n_eff_ref)

    criteria = {"constant": score(float(np.sum((vf - vf.mean()) ** 2)), 1)}
    for name in (am.FIRST_ORDER, am.CRITICAL, am.SECOND_ORDER):
        if name in found:
            criteria[name] = score(found[name].rss, am.PARAMETER_COUNT[name])
    best = min(found.values(), key=lambda f: criteria[f.name])
    sample_resid = v[keep] - am.model(best.name, ts[keep] / scale, best.params)
    noise = _noise(best, block, given, resolution, sample_resid)
    deviation = float(np.max(np.abs(am.model(best.name, u, best.params) - best.params[-1])))
    snr = deviation / noise.sigma if noise.sigma > 0 else math.inf
    if criteria["constant"] - criteria[best.name] < SIGNIFICANT_BIC or snr < MIN_SNR:
        return AperiodicOutcome("noise", problem=_noise_problem(snr))
    second = found.get(am.SECOND_ORDER)
    zeta_free = None
    if second is not None:
        free = _noise(second, block, given, resolution, None)
        zeta_free = _zeta(second.params, free.cov)
    if best.name == am.SECOND_ORDER and best.params[1] <= 0:
        a, d = float(best.params[0]), float(best.params[1])
        w0 = math.sqrt(a * a - d) / scale
        zeta = zeta_free.value if zeta_free else a / math.sqrt(a * a - d)
        err = (f" ± {zeta_free.stderr:.2g}"
               if zeta_free and 0 < zeta_free.stderr < math.inf else "")
        return AperiodicOutcome(
            "underdamped",
            problem=(
                f"a second-order fit gives damping ratio {zeta:.3g}{err} and natural "
                f"frequency {format_eng(w0 / (2 * math.pi), 'Hz')}"
            ),
        )
    rms = float(np.sqrt(np.mean(sample_resid**2)))
    estimate = _assemble(
        best, noise, scale, t_ref, float(ts[keep][-1]), criteria, zeta_free, rms, n_in,
        len(t), notes,
    )
    tau = estimate.time_constants[0].value
    short = decay_shortfall(float(ts[keep][-1]), tau, minimum_time_constants=MIN_TIME_CONSTANTS)
    if short is not None:
        return AperiodicOutcome("short", estimate, short)
    return AperiodicOutcome("aperiodic", estimate)


def _noise_problem(snr: float) -> str:
    """How far the best fitted decay departs from its level, in words (or nothing)."""
    if not math.isfinite(snr):
        return ""
    return (
        f" (a fitted exponential departs from its level by at most {snr:.1f} noise "
        "standard deviations)"
    )


def not_ringing_problem(estimate: AperiodicEstimate) -> str:
    """The refusal of a non-ringing record by a caller that needs a ringing frequency."""
    taus = " and ".join(format_eng(e.value, "s") for e in estimate.time_constants)
    words = "time constant" if len(estimate.time_constants) == 1 else "time constants"
    zeta = estimate.damping_ratio
    extra = "" if zeta is None else f", damping ratio {zeta.value:.3g}"
    level = format_eng(estimate.settled_level.value, "V")
    kind = {OVERDAMPED: "an overdamped", CRITICALLY_DAMPED: "a critically damped",
            FIRST_ORDER: "a first-order"}[estimate.regime]
    return (
        f"the record does not ring: it settles to {level} as {kind} response "
        f"({words} {taus}{extra}), so it has no ringing "
        "frequency or decay to estimate; 'xcheck ringdown' on this file reports its time "
        "constants, natural frequency and damping ratio"
    )


def _noise(
    fit: am.CandidateFit,
    block: int,
    noise_sigma: float | None,
    resolution: float | None,
    sample_residuals: np.ndarray | None,
) -> _Noise:
    """Noise level, covariance and white-noise bound of one fit (as the ringing fit does)."""
    notes: list[str] = []
    k = len(fit.params)
    n = len(fit.residuals)
    s_fit = math.sqrt(fit.rss / max(n - k, 1))
    resid = fit.residuals if sample_residuals is None else sample_residuals
    s_sample = math.sqrt(float(resid @ resid) / max(len(resid) - k, 1))
    rho, n_eff = residual_correlation(fit.residuals)
    if noise_sigma is not None:
        sigma, source = given_noise(noise_sigma, resolution)
        sigma_fit = sigma / math.sqrt(block)
        if s_fit > sigma_fit * (1.0 + 3.0 / math.sqrt(2.0 * n_eff)):
            notes.append(
                f"the residuals scatter {s_fit / sigma_fit:.2f} times the given noise level "
                "(model misfit or extra noise); the residual scatter is used for the "
                "uncertainties"
            )
            sigma_fit, sigma = s_fit, max(sigma, s_sample)
            source = "fit residuals (larger than the given noise level)"
    else:
        sigma, sigma_fit, source = s_sample, s_fit, "fit residuals"
    naive = sigma_fit**2 * covariance_from_jacobian(fit.jacobian)
    cov = at_least(sandwich_covariance(fit.jacobian, rho, sigma_fit), naive)
    if n_eff < 0.95 * n:
        notes.append(
            f"residuals are correlated: {n_eff:.0f} effective of {n} "
            f"{'block means' if block > 1 else 'samples'}; standard errors from the "
            "autocorrelation-consistent (sandwich) covariance"
        )
    return _Noise(cov, naive, sigma, source, n_eff * block, tuple(notes))


def _zeta(params: np.ndarray, cov: np.ndarray) -> Estimate | None:
    """zeta = a / sqrt(a^2 - d) of the free second-order fit, by the delta method."""
    a, d = float(params[0]), float(params[1])
    if not a * a - d > 0:
        return None

    def zeta(p: np.ndarray) -> float:
        return float(p[0] / math.sqrt(max(p[0] * p[0] - p[1], 1e-300)))

    grad = gradient(zeta, params, cov)
    # An undetermined direction of the free fit has an infinite (or huge) variance:
    # zeta's error is then unknown, never a warning or a NaN.
    with np.errstate(over="ignore", invalid="ignore"):
        variance = float(grad @ cov @ grad)
    if not math.isfinite(variance):
        variance = math.inf
    return Estimate(zeta(params), math.sqrt(max(variance, 0.0)))


def _physical(
    name: str, scale: float, t_ref: float
) -> tuple[list[Callable[[np.ndarray], float]], list[Callable[[np.ndarray], float]]]:
    """Functions of the scaled parameters: the physical model parameters (in
    :data:`~xcheck.ringdown.aperiodic_result.PARAMETER_NAMES` order), then the time
    constants, omega0 and zeta (when defined) and v(0)."""
    back = t_ref / scale  # t = 0 lies at u = -back

    if name == am.FIRST_ORDER:
        params = [
            lambda p: p[2],
            lambda p: p[1] * math.exp(p[0] * back),
            lambda p: p[0] / scale,
        ]
        derived = [lambda p: scale / p[0], lambda p: p[2] + p[1] * math.exp(p[0] * back)]
        return params, derived
    if name == am.CRITICAL:

        def amp(p: np.ndarray) -> float:
            ramp_u = p[2] + p[0] * p[1]
            return (p[1] - ramp_u * back) * math.exp(p[0] * back)

        params = [
            lambda p: p[3],
            amp,
            lambda p: (p[2] + p[0] * p[1]) / scale * math.exp(p[0] * back),
            lambda p: p[0] / scale,
        ]
        derived = [lambda p: scale / p[0], lambda p: p[0] / scale, lambda p: p[3] + amp(p)]
        return params, derived

    def rates(p: np.ndarray) -> tuple[float, float]:
        r = math.sqrt(max(p[1], 0.0))
        return p[0] - r, p[0] + r

    def amps(p: np.ndarray) -> tuple[float, float]:
        s1, s2 = rates(p)
        gap = max(s2 - s1, 1e-300)
        b1 = (p[2] * s2 + p[3]) / gap
        b2 = -(p[2] * s1 + p[3]) / gap
        return b1 * math.exp(s1 * back), b2 * math.exp(s2 * back)

    params = [
        lambda p: p[4],
        lambda p: amps(p)[0],
        lambda p: rates(p)[0] / scale,
        lambda p: amps(p)[1],
        lambda p: rates(p)[1] / scale,
    ]
    derived = [
        lambda p: scale / rates(p)[0],
        lambda p: scale / rates(p)[1],
        lambda p: math.sqrt(max(p[0] * p[0] - p[1], 0.0)) / scale,
        lambda p: p[0] / math.sqrt(max(p[0] * p[0] - p[1], 1e-300)),
        lambda p: p[4] + sum(amps(p)),
    ]
    return params, derived


def _assemble(
    fit: am.CandidateFit,
    noise: _Noise,
    scale: float,
    t_ref: float,
    t_last: float,
    criteria: dict[str, float],
    zeta_free: Estimate | None,
    rms: float,
    n_used: int,
    n_total: int,
    notes: list[str],
) -> AperiodicEstimate:
    """The estimate of the chosen model: delta-method transforms of its covariance."""
    funcs, derived = _physical(fit.name, scale, t_ref)
    every = funcs + derived
    grads = np.array([gradient(f, fit.params, noise.cov) for f in every])
    values = np.array([f(fit.params) for f in every])
    # A root far faster than the sampling (a time constant below one sample) leaves its
    # parameters all but undetermined: their variances overflow to "unknown" (inf).
    with np.errstate(over="ignore", invalid="ignore"):
        cov = np.nan_to_num(grads @ noise.cov @ grads.T, nan=math.inf, posinf=math.inf,
                            neginf=-math.inf)
        crb = np.nan_to_num(grads @ noise.crb @ grads.T, nan=math.inf, posinf=math.inf,
                            neginf=-math.inf)

    def est(i: int) -> Estimate:
        return Estimate(
            values[i],
            math.sqrt(max(float(cov[i, i]), 0.0)),
            math.sqrt(max(float(crb[i, i]), 0.0)),
        )

    m = len(funcs)
    two_pi = 2.0 * math.pi
    regime = _REGIME[fit.name]
    ramp = omega0 = zeta = None
    if fit.name == am.SECOND_ORDER:
        taus, rates, amps = (est(m), est(m + 1)), (est(2), est(4)), (est(1), est(3))
        omega0, zeta, initial = est(m + 2), est(m + 3), est(m + 4)
    elif fit.name == am.CRITICAL:
        taus, rates, amps, ramp = (est(m),), (est(3),), (est(1),), est(2)
        omega0, initial = est(m + 1), est(m + 2)
        zeta = Estimate(1.0, zeta_free.stderr if zeta_free else math.nan, None)
    else:
        taus, rates, amps, initial = (est(m),), (est(2),), (est(1),), est(m + 1)
    freq = None
    if omega0 is not None:
        freq = Estimate(
            omega0.value / two_pi, omega0.stderr / two_pi, (omega0.crb or 0.0) / two_pi
        )
    span = float(t_last) / taus[0].value
    reasons = {
        OVERDAMPED: "two time constants told apart (lower BIC than one double root)",
        CRITICALLY_DAMPED: "the two time constants cannot be told apart (one double root "
        "has the lower BIC)",
        FIRST_ORDER: "a second exponential is not supported by the data (one exponential "
        "has the lowest BIC)",
    }
    all_notes = notes + [f"{regime}: {reasons[regime]}"] + list(noise.notes)
    if not fit.success:
        all_notes.append(f"the optimiser did not converge cleanly: {fit.message}")
    return AperiodicEstimate(
        regime=regime,
        time_constants=taus,
        decay_rates=rates,
        amplitudes=amps,
        ramp=ramp,
        natural_angular_frequency=omega0,
        natural_frequency=freq,
        damping_ratio=zeta,
        second_order_damping_ratio=None if regime == FIRST_ORDER else zeta_free,
        settled_level=est(0),
        initial_volts=initial,
        span_time_constants=span,
        model_parameters=values[:m].copy(),
        covariance=cov[:m, :m].copy(),
        noise_sigma=noise.sigma,
        noise_source=noise.source,
        samples_used=n_used,
        samples_excluded=n_total - n_used,
        effective_samples=float(noise.n_eff),
        residual_rms=rms,
        information_criteria=criteria,
        notes=tuple(all_notes),
        success=fit.success,
    )
