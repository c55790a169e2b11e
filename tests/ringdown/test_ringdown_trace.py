"""estimate_ringdown on seeded synthetic traces with known alpha, f_d, V0 and offset.

Signals come from scipy.signal.lsim of the series-RLC state equations (an independent
matrix-exponential solution) or from the textbook closed form of the capacitor voltage,
v(t) = V0 exp(-alpha t) (cos(omega_d t) + (alpha/omega_d) sin(omega_d t)) with
alpha = R/(2L), omega_d = sqrt(1/(LC) - alpha^2) (series-RLC natural response, e.g.
Nilsson & Riedel, Electric Circuits, from memory).

"Recovered" means within 3 reported standard errors (a 3-sigma band misses with
probability 0.3 % per number if the standard errors are right; the seeds are fixed, so
a pass is reproducible, and the Monte Carlo file checks the standard errors themselves).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal

from xcheck.errors import TraceError
from xcheck.ringdown import RingdownEstimate, derive_circuit, estimate_ringdown
from xcheck.ringdown.crb import damped_sinusoid_crb

R, L, C, V0 = 0.35, 15e-6, 2.2e-6, 9.0
ALPHA = R / (2 * L)
OMEGA = math.sqrt(1 / (L * C) - ALPHA**2)
FREQ = OMEGA / (2 * math.pi)


def lsim_ringdown(t: np.ndarray, v0: float = V0) -> np.ndarray:
    """Capacitor voltage by scipy.signal.lsim: x = [v_C, i], i = -C dv/dt, v_C = L di/dt + R i."""
    system = scipy.signal.StateSpace(
        [[0.0, -1.0 / C], [1.0 / L, -R / L]], [[0.0], [0.0]], [[1.0, 0.0]], [[0.0]]
    )
    return scipy.signal.lsim(system, np.zeros_like(t), t, X0=[v0, 0.0])[1]


def time_axis(samples: int = 3000, per_period: float = 40.0) -> np.ndarray:
    return np.arange(samples) * (1.0 / FREQ / per_period)


def assert_recovered(
    est: RingdownEstimate,
    *,
    alpha: float = ALPHA,
    freq: float = FREQ,
    v0: float = V0,
    offset: float = 0.0,
    k: float = 3.0,
) -> None:
    for name, got, true in (
        ("alpha", est.neper_frequency, alpha),
        ("f_d", est.damped_frequency, freq),
        ("v(0)", est.initial_volts, v0),
        ("offset", est.offset, offset),
    ):
        assert (
            abs(got.value - true) <= k * got.stderr
        ), f"{name}: {got.value} vs {true} (stderr {got.stderr})"


def test_white_noise_with_offset_recovered_and_at_the_bound() -> None:
    rng = np.random.default_rng(101)
    t = time_axis()
    v = lsim_ringdown(t) + 0.25 + rng.normal(0.0, 0.03, t.size)
    est = estimate_ringdown(t, v, noise_sigma=0.03)
    assert_recovered(est, v0=V0 + 0.25, offset=0.25)
    # White noise of the stated level: the standard errors are the Cramér-Rao bound at
    # the estimate (Kay 1993, eq. 3.31), allowing the sandwich's sampling wobble (5 %).
    assert est.neper_frequency.stderr == pytest.approx(est.neper_frequency.crb, rel=0.05)
    assert est.damped_frequency.stderr == pytest.approx(est.damped_frequency.crb, rel=0.05)
    assert est.envelope_exponential and est.flagged_extrema == []
    data = est.to_json()
    for key in ("damped_frequency_hz", "neper_frequency_per_s", "initial_volts"):
        assert set(data[key]) >= {"value", "stderr"}
    assert data["damped_frequency_hz"]["value"] == pytest.approx(
        est.damped_frequency.value, rel=1e-15
    )
    assert data["envelope_exponential"] is True and data["flagged_extrema"] == []
    # initial_volts is the model at t = 0: A cos(phi) + offset.
    assert est.initial_volts.value == pytest.approx(
        est.amplitude.value * math.cos(est.phase.value) + est.offset.value, rel=1e-12
    )
    assert float(est.model(np.array([0.0]))[0]) == pytest.approx(est.initial_volts.value, rel=1e-12)


def test_eight_bit_quantisation() -> None:
    # 8 bits over +-10 V: q = 78 mV, four times the analogue noise, so the error budget
    # adds q^2/12 (uniform quantisation error, common practice).
    rng = np.random.default_rng(102)
    t = time_axis()
    q = 20.0 / 256
    v = np.round((lsim_ringdown(t) + rng.normal(0.0, 0.02, t.size)) / q) * q
    est = estimate_ringdown(t, v, noise_sigma=0.02, resolution=q)
    assert_recovered(est)
    assert est.noise_sigma == pytest.approx(math.hypot(0.02, q / math.sqrt(12)), rel=1e-12)
    assert "q^2/12" in est.noise_source


def test_clipped_samples_are_excluded_and_counted() -> None:
    # The first three swings exceed a +-5 V range; the clipped samples are left out.
    rng = np.random.default_rng(103)
    t = time_axis()
    v = np.clip(lsim_ringdown(t) + rng.normal(0.0, 0.02, t.size), -5.0, 5.0)
    clipped = np.abs(v) >= 5.0
    assert clipped.sum() > 20
    est = estimate_ringdown(t, v, noise_sigma=0.02, exclude=clipped)
    assert est.samples_excluded == int(clipped.sum())
    assert est.samples_used == t.size - int(clipped.sum())
    assert_recovered(est)
    # Using the clipped samples instead must go wrong: the check can fail.
    bad = estimate_ringdown(t, v, noise_sigma=0.02)
    assert abs(bad.initial_volts.value - V0) > 3 * bad.initial_volts.stderr


def test_pre_event_droop_aligned_then_estimated() -> None:
    # A charged capacitor drooping 40 V/s through leakage before the switch closes at
    # t = 0; xcheck.capture.align finds the event and the droop, then the ring-down is estimated.
    from xcheck.capture.align import align_trace
    from xcheck.capture.types import Trace

    rng = np.random.default_rng(104)
    step = 1.0 / FREQ / 40
    t = np.arange(-800, 3000) * step
    droop = 40.0
    before = t < 0
    v = np.concatenate([V0 - droop * t[before], lsim_ringdown(t[~before])])
    v = v + rng.normal(0.0, 0.02, t.size)
    aligned, alignment = align_trace(Trace(t, v, "invented droop", "ch1"), expect="natural")
    # Least-squares slope: sd = sigma / sqrt(sum (t - mean)^2) (textbook line fit); 4 sd.
    pre = t[t < 0]
    slope_sd = 0.02 / math.sqrt(np.sum((pre - pre.mean()) ** 2))
    assert abs(alignment.droop_per_s + droop) <= 4 * slope_sd
    est = estimate_ringdown(aligned.time, aligned.voltage, noise_sigma=alignment.noise_rms)
    # The event time is found to within a fraction of a sample; v(0) of the RLC form
    # is flat at t = 0 (zero current), alpha and f_d do not depend on the origin.
    assert_recovered(est)


def test_glitch_at_one_extremum_is_flagged_and_left_out() -> None:
    rng = np.random.default_rng(105)
    t = time_axis()
    clean = lsim_ringdown(t)
    v = clean + rng.normal(0.0, 0.02, t.size)
    k = 7  # the 7th half period: extremum index 6 (t = 0 is on the record's edge)
    centre = int(round(k * math.pi / OMEGA / (t[1] - t[0])))
    v[centre - 2 : centre + 3] += 0.6 * np.sign(clean[centre])
    est = estimate_ringdown(t, v, noise_sigma=0.02)
    assert est.flagged_extrema == [k - 1]
    assert est.extrema_time[k - 1] == pytest.approx(k * math.pi / OMEGA, abs=2 * (t[1] - t[0]))
    assert est.envelope.pattern == "isolated" and est.envelope_exponential
    assert est.excludes_flagged and est.alternate is not None and not est.alternate.excludes_flagged
    assert_recovered(est)
    assert any("glitch" in f for f in est.envelope.findings)


def test_two_modes() -> None:
    # Main ring-down plus a faster, smaller mode (a second resonance), closed form.
    rng = np.random.default_rng(106)
    t = time_axis()
    second = 0.8 * np.exp(-3 * ALPHA * t) * np.cos(2 * math.pi * 4.3 * FREQ * t + 1.0)
    v = lsim_ringdown(t) + second + rng.normal(0.0, 0.02, t.size)
    est = estimate_ringdown(t, v, noise_sigma=0.02, modes=2)
    assert_recovered(est, v0=V0 + 0.8 * math.cos(1.0))
    (mode,) = est.extra_modes
    assert abs(mode.neper_frequency.value - 3 * ALPHA) <= 3 * mode.neper_frequency.stderr
    assert abs(mode.damped_frequency.value - 4.3 * FREQ) <= 3 * mode.damped_frequency.stderr


def test_long_record_is_fitted_on_block_means_at_the_bound() -> None:
    # 400 000 samples (1000 per period): block means of 2 samples (exactly corrected),
    # still at the Cramér-Rao bound of all samples within 5 % (block averaging of a
    # slowly varying signal loses almost no information).
    rng = np.random.default_rng(107)
    t = np.arange(400_000) * (1.0 / FREQ / 1000)
    v = lsim_ringdown(t) + rng.normal(0.0, 0.05, t.size)
    est = estimate_ringdown(t, v, noise_sigma=0.05)
    assert any("means of" in n for n in est.notes)
    assert_recovered(est)
    theta = np.array([ALPHA, OMEGA, V0, V0 * ALPHA / OMEGA, 0.0])
    bound = damped_sinusoid_crb(t, theta, 0.05)
    assert est.neper_frequency.stderr == pytest.approx(math.sqrt(bound[0, 0]), rel=0.05)


def test_derived_circuit_from_trace_recovers_l_and_r() -> None:
    rng = np.random.default_rng(108)
    t = time_axis()
    est = estimate_ringdown(t, lsim_ringdown(t) + rng.normal(0.0, 0.03, t.size), noise_sigma=0.03)
    derived = derive_circuit(est, capacitance=C, capacitance_stderr=0.01 * C)
    assert abs(derived.inductance.value - L) <= 3 * derived.inductance.stderr
    assert abs(derived.resistance.value - R) <= 3 * derived.resistance.stderr
    assert (
        abs(derived.quality_factor.value - math.sqrt(L / C) / R)
        <= 3 * derived.quality_factor.stderr
    )


def test_too_short_record_says_how_much_was_found() -> None:
    t = time_axis(samples=40)  # one period: one extremum inside it (at half a period)
    with pytest.raises(
        TraceError,
        match=r"found only one extremum .*\(about 1\.\d periods .* at least 1\.5 periods are needed",
    ):
        estimate_ringdown(t, lsim_ringdown(t), source="short.csv")


def test_noise_only_record_is_refused() -> None:
    rng = np.random.default_rng(109)
    t = time_axis()
    with pytest.raises(TraceError, match=r"noise\.csv: .* periods of ringing above the noise"):
        estimate_ringdown(t, rng.normal(0.0, 0.05, t.size), source="noise.csv")


def test_malformed_arrays_report_every_problem() -> None:
    t = time_axis(samples=200)
    v = lsim_ringdown(t)
    t_bad = t.copy()
    t_bad[50] = t_bad[49]
    v_bad = v.copy()
    v_bad[10] = np.nan
    with pytest.raises(
        TraceError,
        match=r"2 problems.*not finite \(first at sample 10\).*does not increase at sample 50",
    ):
        estimate_ringdown(t_bad, v_bad)
    with pytest.raises(TraceError, match="1-D arrays of one length"):
        estimate_ringdown(t, v[:-1])
    with pytest.raises(TraceError, match="exclusion mask has shape"):
        estimate_ringdown(t, v, exclude=np.zeros(3, dtype=bool))
    with pytest.raises(ValueError, match="modes must be 1 or more"):
        estimate_ringdown(t, v, modes=0)
