"""Ring-down estimate from a sampled trace: the whole chain in one function.

1. Extrema refined between samples and the logarithmic decrement: first guess, and a
   check that at least about 1.5 periods of ringing rise above the noise.
2. Matrix pencil (Hua & Sarkar 1990) on a block-averaged stretch of the record:
   starting poles, and more than one mode when asked for.
3. Nonlinear least squares of ``A exp(-alpha t) cos(omega_d t + phi) + offset`` on every
   usable sample (block means for very long records, with the exact block-mean
   correction). Standard errors from ``s^2 (J^T J)^-1``; when the residuals are
   correlated (effective sample count ``N_eff = N / (1 + 2 sum rho_k)`` below N) from the
   autocorrelation-consistent sandwich covariance, never below the white-noise ones.
4. Cramér-Rao bound of the same model at the estimate, from ``J^T J / sigma^2`` over
   all usable samples (Kay 1993, vol. 1, eq. 3.31).
5. Envelope diagnostics; when isolated extrema are flagged, the fit is repeated without
   the samples around them and both estimates are kept.

A uniformly sampled record far finer than the ringing needs (more than
:data:`PREAVERAGE_PER_PERIOD` samples per period of the rough frequency, and more than
:data:`PREAVERAGED_SAMPLES` samples) is first averaged in blocks (:func:`preaverage_block`),
and the whole chain runs on the block means with the noise scaled by 1/sqrt(block);
the counts, noise level and residual RMS are then given per sample again. A block of a
few thousandths of a period changes nothing the estimate can resolve: the mean of
``exp(s t)`` over a block of length h is ``exp(s t_c)`` times ``1 + (s h)^2 / 24 + ...``
(the factor :func:`xcheck.ringdown.nls.unblock` divides out), under 1e-6 here; poles,
and so frequency and decay, are unchanged. The Cramér-Rao bound is then that of the
block means at their noise level: the same as from every sample for white noise, and for
noise correlated within a block (which the residual check finds) the block means'
larger scatter.

A record whose extrema show too little ringing is handed to
:func:`xcheck.ringdown.aperiodic.analyse_aperiodic`: when it settles without ringing
(overdamped, critically damped or first order) its time constants are the estimate
(``allow_aperiodic=True``) or the refusal says so; otherwise the refusal says how much
ringing was found and what helps.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np

from xcheck.errors import TraceError
from xcheck.fitting.stats import covariance_from_jacobian
from xcheck.ringdown.aperiodic import NOISE_ADVICE, analyse_aperiodic, not_ringing_problem
from xcheck.ringdown.aperiodic_result import AperiodicEstimate
from xcheck.ringdown.checks import Shortfall, ringing_shortfall, too_little_ringing, validated
from xcheck.ringdown.crb import damped_sinusoid_crb
from xcheck.ringdown.envelope import diagnose_envelope
from xcheck.ringdown.extrema import (
    find_extrema,
    log_decrement,
    noise_from_smoothing,
    refine_with_model,
    rough_frequency,
    sample_step,
    uniformly_sampled,
)
from xcheck.ringdown.nls import (
    at_least,
    block_means,
    fit_damped,
    given_noise,
    linear_amplitudes,
    mode_count,
    model_chunked,
    residual_correlation,
    sandwich_covariance,
    unblock,
)
from xcheck.ringdown.pencil import damped_pairs, matrix_pencil
from xcheck.ringdown.result import (
    EnvelopeDiagnostics,
    Estimate,
    ModeEstimate,
    RingdownEstimate,
    estimate_from,
    gradient,
    wrap_phase,
)

#: Above this many usable samples the fit runs on block means.
MAX_FIT_SAMPLES = 200_000
#: Extrema enter the envelope test while the fitted envelope is this many times their
#: standard deviation (twice the detection threshold).
ENVELOPE_SNR = 10.0
#: Samples handed to the matrix pencil at most (its SVD grows with the cube).
PENCIL_SAMPLES = 200
#: Records sampled more finely than this (samples per period of the rough frequency)
#: are averaged in blocks before the estimate ...
PREAVERAGE_PER_PERIOD = 2000
#: ... down to no fewer block means than this.
PREAVERAGED_SAMPLES = 100_000


def preaverage_block(samples: int, samples_per_period: float) -> int:
    """Samples per block of the averaging before the estimate (1: none).

    At most ``samples_per_period / PREAVERAGE_PER_PERIOD`` (so each block is under
    1/2000 of a period and the block-mean factor ``1 + (s h)^2 / 24`` stays below
    about 1e-6) and at most ``samples / PREAVERAGED_SAMPLES`` (so at least that many
    block means remain, whatever the rough frequency got wrong).

    Parameters
    ----------
    samples
        Samples in the record.
    samples_per_period
        Samples per period of the rough frequency.

    Returns
    -------
    int
        The block length (samples).
    """
    if not math.isfinite(samples_per_period):
        return 1
    return max(1, min(int(samples_per_period // PREAVERAGE_PER_PERIOD),
                      samples // PREAVERAGED_SAMPLES))


@dataclass(frozen=True)
class _Fit:
    """One least-squares fit in sample-level parameters, time measured from ``t_ref``."""

    theta: np.ndarray  # [alpha, omega, a, b]*M + [offset], time origin t_ref
    cov: np.ndarray
    crb: np.ndarray
    t_ref: float
    sigma: float
    noise_source: str
    n_used: int
    n_eff: float
    residual_rms: float
    success: bool
    notes: tuple[str, ...]


def estimate_ringdown(
    time: np.ndarray,
    voltage: np.ndarray,
    *,
    noise_sigma: float | None = None,
    exclude: np.ndarray | None = None,
    modes: int = 1,
    resolution: float | None = None,
    source: str = "trace",
    allow_aperiodic: bool = False,
    preaverage: bool = True,
    extremum_resolution: float | None = None,
) -> RingdownEstimate | AperiodicEstimate:
    """Estimate frequency, decay, amplitude and offset of a ring-down trace.

    Parameters
    ----------
    time
        Sample times (s), strictly increasing, the event at t = 0 (the model's
        amplitude and ``initial_volts`` refer to t = 0).
    voltage
        Samples (V).
    noise_sigma
        Per-sample noise (V), e.g. from the pre-event baseline; None to use the fit
        residuals. When the residuals scatter significantly more, they are used instead
        and a note says so.
    exclude
        Boolean mask of samples to leave out (clipped, known glitches); counted in
        ``samples_excluded``.
    modes
        Number of damped sinusoids; the largest-amplitude one is reported as the main
        mode, the others in ``extra_modes``.
    resolution
        Converter step (LSB) q (V). When q exceeds ``noise_sigma`` the quantisation
        error variance q^2/12 (uniform-error model, common practice) is added.
    source
        Name of the input for error messages.
    allow_aperiodic
        True to accept a record that settles without ringing and return its
        :class:`~xcheck.ringdown.aperiodic_result.AperiodicEstimate`; False (the
        default, for callers that need a frequency) refuses it with a message that says
        what it is.
    preaverage
        True (the default) to average a very finely sampled record in blocks first
        (see the module notes and :func:`preaverage_block`); False estimates from every
        sample.
    extremum_resolution
        The converter step whose rounding error q/sqrt(12) is added to each extremum's
        uncertainty (near a turning point it does not average down); None: the same as
        ``resolution``. Block means pass the samples' step here and none as
        ``resolution``, their noise level already holding the quantisation.

    Returns
    -------
    RingdownEstimate or AperiodicEstimate
        Estimates with standard errors and Cramér-Rao bounds, extrema, diagnostics; the
        aperiodic estimate (``estimate.aperiodic`` is True) only when allowed.

    Raises
    ------
    TraceError
        Malformed arrays; fewer than about 1.5 periods of ringing above the noise (and
        no aperiodic decay, or one not allowed); a non-ringing record spanning fewer
        than two time constants of its decay.
    ValueError
        ``modes`` below 1.
    """
    if modes < 1:
        raise ValueError(f"modes must be 1 or more, got {modes}")
    t, v, keep = validated(time, voltage, exclude, source)
    notes: list[str] = []
    step = sample_step(t)
    uniform = uniformly_sampled(t, step)
    if not uniform:
        notes.append(
            "sampling is not uniform: the pencil runs on an interpolated copy, no block averaging"
        )
    filled = v if keep.all() else np.interp(t, t[keep], v[keep])
    freq0 = rough_frequency(t, filled, step)
    period0 = 1.0 / freq0
    given = noise_sigma is not None and noise_sigma > 0 and math.isfinite(noise_sigma)
    if noise_sigma is not None and not given:
        notes.append(
            f"noise level {noise_sigma} V is not a positive number; the residuals are used"
        )
    block = preaverage_block(len(t), period0 / step) if uniform and preaverage else 1
    if block > 1:
        return _preaveraged(
            t, v, keep, block, noise_sigma=float(noise_sigma) if given else None,
            modes=modes, resolution=resolution, source=source,
            allow_aperiodic=allow_aperiodic, notes=notes,
        )
    v_in = v[keep]
    sigma0 = float(noise_sigma) if given else noise_from_smoothing(filled, period0 / step)
    if resolution:
        sigma0 = math.hypot(sigma0, resolution / math.sqrt(12.0))
    offset0 = float(np.median(v_in))
    first = find_extrema(
        t, v, period=period0, offset=offset0, noise_sigma=sigma0, keep=keep, step=step
    )
    short = ringing_shortfall(t, first, freq0)
    if short is not None:
        return _not_ringing(
            t, v, keep, short, given=noise_sigma if given else None, resolution=resolution,
            notes=notes, source=source, allow=allow_aperiodic,
        )
    rates_ld = None
    if len(first) >= 2:
        alpha_ld, omega_ld = log_decrement(first.time, first.value - offset0)
        rates_ld = [(alpha_ld, omega_ld)]
    rates_mp = _pencil_rates(t, v, keep, uniform, period0, modes, rates_ld, step)
    if rates_mp is None:
        notes.append("matrix pencil gave no usable poles; started from the logarithmic decrement")
    noise = float(noise_sigma) if given else None
    fit = _fit(t, v, keep, rates_mp, rates_ld, modes, noise, resolution, uniform, step, source)
    at_extrema = resolution if extremum_resolution is None else extremum_resolution
    main = _assemble(t, v, keep, fit, notes, source_kind="trace", resolution=at_extrema)
    if not main.envelope.flagged:
        return main
    period = 2.0 * math.pi / main.angular_frequency.value
    near = np.zeros(len(t), dtype=bool)
    for i in main.envelope.flagged:
        near |= np.abs(t - main.extrema_time[i]) < period / 4.0
    start = [(main.model_parameters[4 * m], main.model_parameters[4 * m + 1]) for m in range(modes)]
    refit = _fit(
        t, v, keep & ~near, start, rates_ld, modes, noise, resolution, uniform, step, source
    )
    cleaned = _assemble(
        t,
        v,
        keep & ~near,
        refit,
        notes + [f"{int(near.sum())} samples around the flagged extrema left out"],
        source_kind="trace",
        resolution=at_extrema,
        envelope=main.envelope,
        extrema=(main.extrema_time, main.extrema_value),
    )
    return _pair(main, cleaned)


def _preaveraged(
    t: np.ndarray,
    v: np.ndarray,
    keep: np.ndarray,
    block: int,
    *,
    noise_sigma: float | None,
    modes: int,
    resolution: float | None,
    source: str,
    allow_aperiodic: bool,
    notes: list[str],
) -> RingdownEstimate | AperiodicEstimate:
    """The estimate made from means of ``block`` samples, given per sample again.

    Blocks touching an excluded sample are left out, and so are the samples after the
    last whole block. A given noise level (with the quantisation variance q^2/12 when
    the step q exceeds it, as for single samples) is divided by sqrt(block), as
    averaging white noise does; noise correlated over a few samples (a bandwidth limit)
    shows in the fit's residual check, which then uses the block means' own scatter.
    See :func:`_per_sample` for what is given per sample afterwards.
    """
    n_blocks = len(t) // block
    tb, vb = (x[: n_blocks * block].reshape(n_blocks, block).mean(axis=1) for x in (t, v))
    keep_b = keep[: n_blocks * block].reshape(n_blocks, block).all(axis=1)
    given = None if noise_sigma is None else given_noise(noise_sigma, resolution)
    sigma = None if given is None else given[0] / math.sqrt(block)
    found = estimate_ringdown(
        tb, vb, noise_sigma=sigma, exclude=~keep_b, modes=modes, resolution=None,
        source=source, allow_aperiodic=allow_aperiodic, preaverage=False,
        extremum_resolution=resolution,
    )
    excluded = len(t) - int(keep.sum())
    dropped = len(t) - block * int(keep_b.sum()) - excluded
    note = (
        f"averaged in blocks of {block} samples before the estimate (the record has "
        f"{len(t)} samples; {int(keep_b.sum())} block means used); counts, noise level and "
        "residual RMS are given per sample"
        + (f"; {dropped} further samples, in blocks holding an excluded sample or after the "
           "last whole block, are not in the fit" if dropped else "")
    )
    rows = slice(None, None, max(1, len(t) // SCATTER_SAMPLES))
    sample_t, sample_v = t[rows][keep[rows]], v[rows][keep[rows]]
    return _per_sample(found, block, tuple(notes) + (note,), excluded=excluded, given=given,
                       scatter=(sample_t, sample_v))


#: Samples (every k-th of a long record) on which a pre-averaged estimate's per-sample
#: residual RMS is measured: its relative standard error is about 1/sqrt(2 N), 7e-4.
SCATTER_SAMPLES = 1_000_000

#: Counts in the notes of an estimate made on block means, rescaled to samples.
_COUNTED_NOTES = (
    re.compile(r"^(\d+)( samples around the flagged extrema)"),
    re.compile(r"(fitted on means of )(\d+)( samples)"),
    re.compile(r"(: )(\d+)( effective of )(\d+)( (?:samples|block means))"),
)


def _rescaled_note(note: str, block: int) -> str:
    """``note`` with its counts of block means given in samples (``block`` each)."""
    note = _COUNTED_NOTES[0].sub(lambda m: f"{int(m.group(1)) * block}{m.group(2)}", note)
    note = _COUNTED_NOTES[1].sub(
        lambda m: f"{m.group(1)}{int(m.group(2)) * block}{m.group(3)}", note)
    return _COUNTED_NOTES[2].sub(
        lambda m: f"{m.group(1)}{int(m.group(2)) * block}{m.group(3)}"
                  f"{int(m.group(4)) * block} samples", note)


def _per_sample(
    found: RingdownEstimate | AperiodicEstimate,
    block: int,
    notes: tuple[str, ...],
    *,
    excluded: int,
    given: tuple[float, str] | None,
    scatter: tuple[np.ndarray, np.ndarray],
) -> RingdownEstimate | AperiodicEstimate:
    """An estimate made on block means, with its counts and noise given per sample.

    Counts are multiplied by ``block`` (``samples_excluded`` is the caller's excluded
    samples). The residual RMS is measured on single samples (``scatter``: every k-th
    usable sample of the record) with the estimate's own model, so it holds whatever
    the noise's correlation. The noise level is the given one per sample (``given``:
    the level and its words from :func:`xcheck.ringdown.nls.given_noise`) when the fit
    kept it, else the per-sample residual RMS (at least the given level), as for an
    estimate from every sample.
    """
    residual = float(np.sqrt(np.mean((scatter[1] - found.model(scatter[0])) ** 2)))
    source = found.noise_source
    if given is None:
        noise = residual
    elif source.startswith("given"):
        noise, source = given
    else:
        noise = max(given[0], residual)
    changes = dict(
        noise_sigma=noise,
        noise_source=source,
        samples_used=int(found.samples_used) * block,
        samples_excluded=excluded,
        effective_samples=found.effective_samples * block,
        residual_rms=residual,
        notes=notes + tuple(_rescaled_note(note, block) for note in found.notes),
    )
    alternate = getattr(found, "alternate", None)
    if alternate is not None:
        changes["alternate"] = _per_sample(alternate, block, notes, excluded=excluded,
                                           given=given, scatter=scatter)
    return replace(found, **changes)


def _pair(with_all: RingdownEstimate, without: RingdownEstimate) -> RingdownEstimate:
    """Main estimate and alternate: without the flagged extrema when they are isolated."""
    if with_all.envelope.pattern == "isolated":
        return replace(
            without,
            excludes_flagged=True,
            notes=without.notes
            + ("main estimate leaves the flagged extrema out; 'alternate' keeps them",),
            alternate=replace(with_all, alternate=None),
        )
    return replace(
        with_all,
        notes=with_all.notes
        + ("flagged extrema kept (systematic pattern); 'alternate' leaves them out",),
        alternate=replace(without, alternate=None, excludes_flagged=True),
    )


def _not_ringing(
    t: np.ndarray,
    v: np.ndarray,
    keep: np.ndarray,
    short: Shortfall,
    *,
    given: float | None,
    resolution: float | None,
    notes: list[str],
    source: str,
    allow: bool,
) -> AperiodicEstimate:
    """The aperiodic estimate of a record with too little ringing, or the right refusal."""
    outcome = analyse_aperiodic(
        t, v, keep, noise_sigma=given, resolution=resolution, notes=tuple(notes)
    )
    if outcome.kind == "noise":
        problem = too_little_ringing(
            short,
            finding="; nor does a decay toward a settled level stand out from the noise"
            + outcome.problem,
            advice=NOISE_ADVICE,
        )
    elif outcome.kind == "underdamped":
        problem = too_little_ringing(
            short,
            finding=f"; {outcome.problem}: the response rings, but the record shows too "
            "little of the ringing",
        )
    elif outcome.kind == "short":
        problem = outcome.problem
    elif allow:
        assert outcome.estimate is not None
        return outcome.estimate
    else:
        assert outcome.estimate is not None
        problem = not_ringing_problem(outcome.estimate)
    raise TraceError(source, [problem])


def _pencil_rates(
    t: np.ndarray,
    v: np.ndarray,
    keep: np.ndarray,
    uniform: bool,
    period: float,
    modes: int,
    rates_ld: list[tuple[float, float]] | None,
    step: float,
) -> list[tuple[float, float]] | None:
    """Starting (alpha, omega) pairs from the matrix pencil, largest amplitude first."""
    if not uniform:
        grid = np.arange(t[0], t[-1], step)
        v = np.interp(grid, t[keep], v[keep])
        t, keep = grid, np.ones(len(grid), dtype=bool)
    per_period = period / step
    block = max(1, int(per_period // 12))
    span = period * 60.0
    if rates_ld and rates_ld[0][0] > 0:
        span = min(span, max(2.0 * period, 4.0 / rates_ld[0][0]))
    n_window = min(len(t), int(span / step) + 1, PENCIL_SAMPLES * block)
    ok = keep[:n_window]
    lo, hi = _longest_run(ok)
    if (hi - lo) // block < 4 * (2 * modes + 1):
        return None
    y_t, y_v = block_means(t[lo:hi], v[lo:hi], ok[lo:hi], block)
    try:
        found = matrix_pencil(y_v, step * block, 2 * modes + 1)
    except ValueError:
        return None
    pairs = damped_pairs(found.poles, math.pi / (step * block))
    if len(pairs) < modes:
        return None
    theta = linear_amplitudes(y_t - y_t[0], y_v, pairs)
    size = [math.hypot(theta[4 * m + 2], theta[4 * m + 3]) for m in range(len(pairs))]
    order = np.argsort(size)[::-1][:modes]
    return [pairs[i] for i in order]


def _longest_run(mask: np.ndarray) -> tuple[int, int]:
    """Start and end (exclusive) of the longest run of True."""
    padded = np.concatenate(([False], mask, [False])).astype(int)
    edges = np.flatnonzero(np.diff(padded))
    starts, ends = edges[::2], edges[1::2]
    if len(starts) == 0:
        return 0, 0
    i = int(np.argmax(ends - starts))
    return int(starts[i]), int(ends[i])


def _fit(
    t: np.ndarray,
    v: np.ndarray,
    keep: np.ndarray,
    rates_mp: list[tuple[float, float]] | None,
    rates_ld: list[tuple[float, float]] | None,
    modes: int,
    noise_sigma: float | None,
    resolution: float | None,
    uniform: bool,
    step: float,
    source: str,
) -> _Fit:
    """Least squares from the best start, noise level, covariance and bound."""
    notes: list[str] = []
    t_ref = float(t[keep][0])
    ts = t - t_ref
    n_in = int(keep.sum())
    block = 1
    if uniform and n_in > MAX_FIT_SAMPLES:
        per_period = (
            2.0 * math.pi / max(r[1] for r in (rates_mp or rates_ld or [(0.0, 1.0 / step)])) / step
        )
        block = max(1, min(math.ceil(n_in / MAX_FIT_SAMPLES), int(per_period // 20)))
    if block > 1:
        tf, vf = block_means(ts, v, keep, block)
        notes.append(
            f"fitted on means of {block} samples (exact block-mean model correction applied)"
        )
    else:
        tf, vf = ts[keep], v[keep]
    best = None
    for rates in (rates_mp, _padded(rates_ld, modes)):
        if rates is None:
            continue
        trial = fit_damped(tf, vf, linear_amplitudes(tf, vf, rates))
        plausible = all(trial.theta[4 * m + 1] > 0 for m in range(modes))
        if best is None or (plausible and (trial.cost < best[0].cost or not best[1])):
            best = (trial, plausible)
        if trial.success and plausible:
            break
    if best is None:
        raise TraceError(
            source,
            ["no starting values could be found for the fit; the record may hold no ringing"],
        )
    fit, plausible = best
    theta_fit = _sorted_modes(fit.theta)
    jac_fit = _reordered_jacobian(fit.jacobian, fit.theta, theta_fit)
    # Block-mean parameters -> sample-level parameters (identity when block == 1).
    theta = unblock(theta_fit, block, step)
    t_in = ts[keep]
    resid_full = v[keep] - model_chunked(t_in, theta)
    p = len(theta)
    rms = float(np.sqrt(np.mean(resid_full**2)))
    s_sample = float(np.sqrt(np.sum(resid_full**2) / max(n_in - p, 1)))
    s_fit = float(np.sqrt(np.sum(fit.residuals**2) / max(len(tf) - p, 1)))
    rho, n_eff_fit = residual_correlation(fit.residuals)
    if noise_sigma is not None:
        sigma, noise_source = given_noise(noise_sigma, resolution)
        sigma_fit = sigma / math.sqrt(block)
        if s_fit > sigma_fit * (1.0 + 3.0 / math.sqrt(2.0 * n_eff_fit)):
            notes.append(
                f"the residuals scatter {s_fit / sigma_fit:.2f} times the given noise level "
                "(model misfit, extra noise or correlation within averaging blocks); the "
                "residual scatter is used for the uncertainties"
            )
            sigma_fit = s_fit
            sigma = max(sigma, s_sample)
            noise_source = "fit residuals (larger than the given noise level)"
    else:
        sigma, sigma_fit, noise_source = s_sample, s_fit, "fit residuals"
    naive = sigma_fit**2 * covariance_from_jacobian(jac_fit)
    cov_fit = at_least(sandwich_covariance(jac_fit, rho, sigma_fit), naive)
    if n_eff_fit < 0.95 * len(tf):
        widen = np.sqrt(np.diag(cov_fit) / np.diag(naive))
        notes.append(
            f"residuals are correlated: {n_eff_fit:.0f} effective of {len(tf)} "
            f"{'block means' if block > 1 else 'samples'}; standard errors from the "
            f"autocorrelation-consistent (sandwich) covariance, {widen.min():.2f} to "
            f"{widen.max():.2f} times the white-noise ones"
        )
    if block > 1:
        umap = _jacobian_of(lambda q: unblock(q, block, step), theta_fit, cov_fit)
        cov = umap @ cov_fit @ umap.T
    else:
        cov = cov_fit
    crb = damped_sinusoid_crb(t_in, theta, sigma)
    if not fit.success or not plausible:
        notes.append(f"the optimiser did not converge cleanly: {fit.message}")
    return _Fit(
        theta=theta,
        cov=cov,
        crb=crb,
        t_ref=t_ref,
        sigma=sigma,
        noise_source=noise_source,
        n_used=n_in,
        n_eff=n_eff_fit * block,
        residual_rms=rms,
        success=bool(fit.success and plausible),
        notes=tuple(notes),
    )


def _padded(
    rates: list[tuple[float, float]] | None, modes: int
) -> list[tuple[float, float]] | None:
    """Log-decrement start for ``modes`` modes: extra modes start at multiples of it."""
    if rates is None:
        return None
    alpha, omega = rates[0]
    return [(alpha * (m + 1), omega * (m + 1)) for m in range(modes)]


def _sorted_modes(theta: np.ndarray) -> np.ndarray:
    """Modes in order of falling amplitude ``hypot(a, b)``."""
    blocks = [theta[4 * m : 4 * m + 4] for m in range(mode_count(theta))]
    blocks.sort(key=lambda b: -math.hypot(b[2], b[3]))
    return np.concatenate(blocks + [theta[-1:]])


def _reordered_jacobian(jac: np.ndarray, before: np.ndarray, after: np.ndarray) -> np.ndarray:
    """Columns of ``jac`` permuted like the mode blocks from ``before`` to ``after``."""
    modes = mode_count(before)
    order = []
    for m in range(modes):
        match = next(
            k
            for k in range(modes)
            if np.array_equal(before[4 * k : 4 * k + 4], after[4 * m : 4 * m + 4])
        )
        order += list(range(4 * match, 4 * match + 4))
    order.append(len(before) - 1)
    return jac[:, order]


def _jacobian_of(
    func: Callable[[np.ndarray], np.ndarray], x: np.ndarray, cov: np.ndarray
) -> np.ndarray:
    """Central-difference Jacobian of a vector function (rows: outputs)."""
    return np.array([gradient(lambda p, i=i: float(func(p)[i]), x, cov) for i in range(len(x))])


def _quantities(theta_ref: np.ndarray, t_ref: float) -> list[Callable[[np.ndarray], float]]:
    """Functions of the fitted parameters: main mode (alpha, omega, A, phi, offset),
    initial volts, then (alpha, omega, A, phi) of every further mode. Amplitude and phase
    refer to t = 0 (the fit's origin is ``t_ref``)."""
    modes = mode_count(theta_ref)

    def z_abs(p: np.ndarray, m: int) -> complex:
        alpha, omega, a, b = p[4 * m : 4 * m + 4]
        return complex(a, -b) * np.exp(-complex(-alpha, omega) * t_ref)

    hats = [z_abs(theta_ref, m) for m in range(modes)]

    def mode_funcs(m: int) -> list[Callable[[np.ndarray], float]]:
        phase0 = math.atan2(hats[m].imag, hats[m].real)
        return [
            lambda p: p[4 * m],
            lambda p: p[4 * m + 1],
            lambda p: abs(z_abs(p, m)),
            lambda p: phase0 + float(np.angle(z_abs(p, m) / hats[m])),
        ]

    funcs = mode_funcs(0) + [lambda p: p[-1]]
    funcs.append(lambda p: sum(z_abs(p, m).real for m in range(modes)) + p[-1])
    for m in range(1, modes):
        funcs += mode_funcs(m)
    return funcs


def _assemble(
    t: np.ndarray,
    v: np.ndarray,
    keep: np.ndarray,
    fit: _Fit,
    notes: list[str],
    *,
    source_kind: str,
    resolution: float | None = None,
    envelope: EnvelopeDiagnostics | None = None,
    extrema: tuple[np.ndarray, np.ndarray] | None = None,
) -> RingdownEstimate:
    """RingdownEstimate from a fit: delta-method transforms, extrema and diagnostics."""
    funcs = _quantities(fit.theta, fit.t_ref)
    grads = np.array([gradient(f, fit.theta, fit.cov) for f in funcs])
    values = np.array([f(fit.theta) for f in funcs])
    cov_q = grads @ fit.cov @ grads.T
    crb_q = grads @ fit.crb @ grads.T
    alpha, omega = values[0], values[1]
    offset = values[4]
    two_pi = 2.0 * math.pi
    freq = Estimate(
        omega / two_pi, math.sqrt(cov_q[1, 1]) / two_pi, math.sqrt(crb_q[1, 1]) / two_pi
    )
    extra = []
    for m in range(1, mode_count(fit.theta)):
        base = 6 + 4 * (m - 1)
        e = [estimate_from(values, cov_q, crb_q, base + k) for k in range(4)]
        extra.append(
            ModeEstimate(
                neper_frequency=e[0],
                angular_frequency=e[1],
                damped_frequency=Estimate(
                    e[1].value / two_pi, e[1].stderr / two_pi, (e[1].crb or 0.0) / two_pi
                ),
                amplitude=e[2],
                phase=Estimate(wrap_phase(e[3].value), e[3].stderr, e[3].crb),
            )
        )
    theta_abs = np.array(fit.theta, dtype=float)
    for m in range(mode_count(fit.theta)):
        a_m, b_m = theta_abs[4 * m + 2 : 4 * m + 4]
        z = complex(a_m, -b_m) * np.exp(
            -complex(-theta_abs[4 * m], theta_abs[4 * m + 1]) * fit.t_ref
        )
        theta_abs[4 * m + 2], theta_abs[4 * m + 3] = z.real, -z.imag
    if extrema is None:
        inflation = math.sqrt(max(fit.n_used / fit.n_eff, 1.0))
        located = find_extrema(
            t, v, period=two_pi / omega, offset=offset, noise_sigma=fit.sigma * inflation, keep=keep
        )
        ext = refine_with_model(
            t,
            v,
            located,
            alpha=alpha,
            omega=omega,
            offset=offset,
            noise_sigma=fit.sigma * inflation,
            keep=keep,
        )
        # Only extrema the fitted envelope puts well clear of the noise: near the floor
        # the ones that were found are those noise pushed up (selection bias), which
        # would fake a slowing decay. The cut uses the smooth model, not the points.
        envelope_model = values[2] * omega / math.hypot(alpha, omega) * np.exp(-alpha * ext.time)
        clear = envelope_model >= ENVELOPE_SNR * ext.sigma
        if len(clear) and not clear.all():
            clear[np.argmin(clear) :] = False
        ext_time, ext_value = ext.time[clear], ext.value[clear]
        ext_sigma = ext.sigma[clear]
        if resolution:
            # Near a turning point the signal changes by less than one converter step
            # over many samples, so they all round the same way: the extremum's
            # quantisation error does not average down and is about q / sqrt(12)
            # (uniform rounding error; common practice, no source).
            ext_sigma = np.hypot(ext_sigma, resolution / math.sqrt(12.0))
        if envelope is None:
            envelope = diagnose_envelope(
                ext_time, ext.sign[clear] * (ext_value - offset), ext_sigma, kind=source_kind
            )
    else:
        ext_time, ext_value = extrema
    assert envelope is not None
    main_idx = [0, 1, 2, 3, 4]
    return RingdownEstimate(
        neper_frequency=estimate_from(values, cov_q, crb_q, 0),
        angular_frequency=estimate_from(values, cov_q, crb_q, 1),
        damped_frequency=freq,
        amplitude=estimate_from(values, cov_q, crb_q, 2),
        phase=Estimate(wrap_phase(values[3]), math.sqrt(cov_q[3, 3]), math.sqrt(crb_q[3, 3])),
        offset=estimate_from(values, cov_q, crb_q, 4),
        initial_volts=estimate_from(values, cov_q, crb_q, 5),
        covariance=cov_q[np.ix_(main_idx, main_idx)],
        crb_covariance=crb_q[np.ix_(main_idx, main_idx)],
        model_parameters=theta_abs,
        extrema_time=np.asarray(ext_time),
        extrema_value=np.asarray(ext_value),
        noise_sigma=fit.sigma,
        noise_source=fit.noise_source,
        samples_used=fit.n_used,
        samples_excluded=int(len(t) - fit.n_used),
        effective_samples=fit.n_eff,
        residual_rms=fit.residual_rms,
        envelope=envelope,
        method="trace: extrema and log decrement, matrix pencil, nonlinear least squares",
        notes=tuple(notes) + fit.notes,
        extra_modes=tuple(extra),
        success=fit.success,
    )
