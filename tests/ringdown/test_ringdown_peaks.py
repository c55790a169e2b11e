"""estimate_from_peaks and the envelope diagnostics on invented cursor readings.

Reference model: the capacitor voltage of a series RLC released with zero current has
its extrema exactly at t_k = k pi / omega_d, with values V0 (-1)^k exp(-alpha t_k)
(zero of the loop current i ~ exp(-alpha t) sin(omega_d t); series-RLC natural response,
e.g. Nilsson & Riedel, Electric Circuits, from memory). The extrema used below are
computed from that closed form; one test finds them numerically on a dense
scipy.signal.lsim solution instead, so the model is checked against an independent
solver.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal

from xcheck.errors import TraceError
from xcheck.measured import _time_scatter
from xcheck.ringdown import RingdownEstimate, diagnose_envelope, estimate_from_peaks
from xcheck.ringdown.peaks import decimal_resolution
from xcheck.capture.peak_table import read_peaks

R, L, C, V0 = 0.5, 10e-6, 1e-6, 10.0
ALPHA = R / (2 * L)
OMEGA = math.sqrt(1 / (L * C) - ALPHA**2)
FREQ = OMEGA / (2 * math.pi)


def readings(
    n: int = 12, *, noise: float = 0.0, seed: int = 0, origin: float = 0.0, offset: float = 0.0
) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    k = np.arange(n)
    t = k * math.pi / OMEGA
    v = V0 * (-1.0) ** k * np.exp(-ALPHA * t) + offset + rng.normal(0.0, noise, n) * (noise > 0)
    return t + origin, v


def within(est: RingdownEstimate, value: str, true: float, k: float = 3.0) -> bool:
    item = getattr(est, value)
    return abs(item.value - true) <= k * item.stderr


def test_extrema_of_lsim_solution_fit_the_peak_model() -> None:
    # Find the extrema of a dense scipy.signal.lsim solution by the sign change of the
    # loop current (its second state), then estimate: the model must reproduce alpha and
    # omega_d to the precision of locating the zero crossings (1e-6 of a period) -> 1e-4.
    system = scipy.signal.StateSpace(
        [[0.0, -1.0 / C], [1.0 / L, -R / L]], [[0.0], [0.0]], np.eye(2), [[0.0], [0.0]]
    )
    t = np.linspace(0.0, 6 * 2 * math.pi / OMEGA, 600_001)
    _, _, states = scipy.signal.lsim(system, np.zeros_like(t), t, X0=[V0, 0.0])
    v, i = states[:, 0], states[:, 1]
    zero = np.flatnonzero(np.sign(i[1:]) != np.sign(i[:-1]))
    zero = zero[i[zero] != 0]  # the first sample (i = 0) is the k = 0 extremum itself
    tk = np.concatenate(
        [[0.0], t[zero] - i[zero] * (t[zero + 1] - t[zero]) / (i[zero + 1] - i[zero])]
    )
    vk = np.concatenate([[V0], np.interp(tk[1:], t, v)])
    est = estimate_from_peaks(tk, vk, np.full(tk.size, 1e-4))
    assert est.neper_frequency.value == pytest.approx(ALPHA, rel=1e-4)
    assert est.angular_frequency.value == pytest.approx(OMEGA, rel=1e-6)
    assert est.initial_volts.value == pytest.approx(V0, rel=1e-5)


def test_noisy_readings_recovered_with_stated_uncertainty() -> None:
    t, v = readings(noise=0.02, seed=1)
    est = estimate_from_peaks(t, v, np.full(t.size, 0.02))
    for name, true in (
        ("neper_frequency", ALPHA),
        ("damped_frequency", FREQ),
        ("initial_volts", V0),
        ("offset", 0.0),
    ):
        assert within(est, name, true), name
    assert est.damped_frequency.crb is None  # no Cramér-Rao bound for cursor readings
    assert est.samples_used == 12 and est.flagged_extrema == []
    assert "stated reading uncertainties" in est.noise_source


def test_arbitrary_time_origin_changes_nothing_but_the_phase() -> None:
    # The same readings with the cursor origin moved by 3.3 half periods: alpha and f_d
    # identical to rounding (1e-9), and the model still passes through every reading.
    t, v = readings(noise=0.02, seed=2)
    base = estimate_from_peaks(t, v, np.full(t.size, 0.02))
    moved = estimate_from_peaks(t + 3.3 * math.pi / OMEGA, v, np.full(t.size, 0.02))
    assert moved.neper_frequency.value == pytest.approx(base.neper_frequency.value, rel=1e-9)
    assert moved.damped_frequency.value == pytest.approx(base.damped_frequency.value, rel=1e-9)
    np.testing.assert_allclose(moved.model(t + 3.3 * math.pi / OMEGA), base.model(t), atol=1e-9)


def test_misread_extremum_is_the_one_flagged() -> None:
    # Reading 5 misread by 8 % (a cursor on the wrong gridline), 10 mV reading noise.
    # Seed 4 draws no noise beyond 1.7 sigma: this test is about the planted misread; the
    # rate of false flags on honest noise (about 1 % by design) is measured in benchmarks.
    t, v = readings(noise=0.01, seed=4)
    assert np.max(np.abs(v - readings(seed=4)[1])) < 1.7 * 0.01
    v[5] *= 1.08
    for u in (np.full(t.size, 0.01), None):
        est = estimate_from_peaks(t, v, u)
        assert est.flagged_extrema == [5]
        assert est.envelope.pattern == "isolated" and est.envelope_exponential
        assert est.excludes_flagged and est.samples_used == t.size - 1
        assert est.alternate is not None and est.alternate.samples_used == t.size
        assert within(est, "neper_frequency", ALPHA) and within(est, "initial_volts", V0)
        # Kept, the misread reading widens the scatter: far larger standard errors.
        assert est.alternate.neper_frequency.stderr > 3 * est.neper_frequency.stderr
        assert abs(est.envelope.deviations[5]) > 10
        assert any("misread cursor" in f for f in est.envelope.findings)
    data = est.to_json()
    assert data["flagged_extrema"] == [5] and data["excludes_flagged_extrema"] is True
    assert data["alternate"]["samples_used"] == t.size


def test_maxima_only_table_with_offset() -> None:
    # A step response read at its overshoot maxima only: one reading per period, ringing
    # about a 5 V final value (offset fitted from 7 readings).
    t, v = readings(n=14, noise=0.005, seed=4, offset=5.0)
    est = estimate_from_peaks(t[::2], v[::2], np.full(7, 0.005))
    assert any("one extremum per period" in n for n in est.notes)
    for name, true in (("neper_frequency", ALPHA), ("damped_frequency", FREQ), ("offset", 5.0)):
        assert within(est, name, true), name


def test_few_readings_give_wider_uncertainties() -> None:
    # The same ring-down read 4 and 12 times: without stated uncertainties the short
    # table carries Student-t coverage factors and far larger standard errors.
    t, v = readings(noise=0.02, seed=5)
    long = estimate_from_peaks(t, v)
    short = estimate_from_peaks(t[:4], v[:4])
    assert short.neper_frequency.stderr > 2 * long.neper_frequency.stderr
    assert any("coverage factors 1.32 (times, 2 dof)" in n for n in short.notes)
    assert within(short, "neper_frequency", ALPHA) and within(short, "damped_frequency", FREQ)


@pytest.mark.parametrize(
    ("time", "value", "unc", "pattern"),
    [
        ([0.0, 1.0], [1.0, -0.5], None, r"only 2 extrema in the table; at least 3 are needed"),
        ([0.0, 2.0, 1.0], [1.0, -0.5, 0.3], None, r"time does not increase from row 2 to row 3"),
        ([0.0, 1.0, 2.0], [1.0, float("nan"), 0.3], None, r"value in row 2 is not a finite number"),
        (
            [0.0, 1.0, 2.0],
            [1.0, -0.5, 0.3],
            [0.1, 0.0, 0.1],
            r"uncertainty in row 2 is 0; it must be a positive",
        ),
        (
            [0.0, 1.0, 2.0, 3.5],
            [1.0, -0.5, 0.3, -0.1],
            None,
            r"rows 3 and 4 are 1\.5 s apart, 1\.50 times",
        ),
        (
            [0.0, 1.0, 2.0],
            [5.9, 4.2, 5.6],
            None,
            r"3 readings alternate about a level away from 0 V .* at least 4",
        ),
    ],
)
def test_bad_tables_are_refused_with_the_row(
    time: list[float], value: list[float], unc: list[float] | None, pattern: str
) -> None:
    with pytest.raises(TraceError, match=pattern):
        estimate_from_peaks(
            np.array(time),
            np.array(value),
            None if unc is None else np.array(unc),
            source="cursor.csv",
        )


def test_envelope_patterns_are_named() -> None:
    # Log-amplitudes of invented extrema, 1 % errors, against the patterns' definitions.
    t = np.arange(16) * 1e-5
    sig = np.full(16, 0.01)
    clean = np.exp(-2e4 * t)
    tail = clean + 0.03  # a floor lifting the late extrema
    assert diagnose_envelope(t, clean, sig * clean).pattern == "none"
    found = diagnose_envelope(t, tail, sig * clean)
    assert found.pattern in ("tail_high", "curved") and not found.exponential
    assert any("noise floor" in f or "offset" in f for f in found.findings)
    # Amplitude-dependent loss: decay rate proportional to (1 + amplitude), so the large
    # early extrema fall faster (dA/dt = -a A (1 + A): closed form A/(1+A) = c exp(-a t)).
    c0 = 1.0
    amp = c0 * np.exp(-1e4 * t) / (1 + c0 - c0 * np.exp(-1e4 * t))
    loss = diagnose_envelope(t, amp, 0.002 * amp)
    assert not loss.exponential and loss.curvature_t is not None and loss.curvature_t > 3
    assert any("amplitude-dependent loss" in f for f in loss.findings)
    # ... and the early half decays faster than the late half (rate ~ a (1 + A)).
    assert any(f.startswith("decay rate from the first half") for f in loss.findings)
    few = diagnose_envelope(t[:2], clean[:2], sig[:2])
    assert few.pattern == "too_few" and few.flagged == []


def rounded_table(folder, seed: int, n: int = 12) -> tuple:
    """A seeded cursor table of the module's ring written as text: times in ms to three
    decimals (1 us, a tenth of the 9.97 us half period) after a random cursor origin,
    values to 0.01 V after 10 mV of reading noise; read back with read_peaks."""
    rng = np.random.default_rng(seed)
    t, v = readings(n, noise=0.01, seed=seed, origin=rng.uniform(0.0, 20e-6))
    path = folder / f"rounded_{seed}.csv"
    rows = "\n".join(f"{a * 1e3:.3f},{b:.2f}" for a, b in zip(t, v))
    path.write_text("time [ms],value [V]\n" + rows + "\n", encoding="ascii")
    return read_peaks(path), np.arange(n)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_rounded_cursor_times_are_not_overconfident(tmp_path, seed: int) -> None:
    table, k = rounded_table(tmp_path, seed)
    # The reading resolution as written: the last digit's step (common practice).
    assert table.time_resolution == pytest.approx(1e-6, rel=1e-9)
    assert table.voltage_resolution == pytest.approx(0.01, rel=1e-9)
    est = estimate_from_peaks(
        table.time,
        table.voltage,
        time_resolution=table.time_resolution,
        voltage_resolution=table.voltage_resolution,
    )
    # What the rounding implies on its own: times erring independently and uniformly
    # over one step (sd = step / sqrt(12), common practice) give the half period h a
    # standard error sd / sqrt(sum (k - mean k)^2) (slope of a simple linear
    # regression, e.g. Montgomery & Runger, ch. 11), and f_d = 1 / (2 h) the same
    # relative error.
    h = math.pi / OMEGA
    implied = FREQ * (1e-6 / math.sqrt(12.0)) / (h * math.sqrt(np.sum((k - k.mean()) ** 2)))
    assert est.damped_frequency.stderr >= implied
    # The truth within 3 standard errors (about 99.7 % for a normal error; over 200
    # seeds of this table the largest deviations seen were 1.8 standard errors for f_d
    # and 2.5 for alpha, root-mean-square 1.04 and 1.03).
    assert within(est, "damped_frequency", FREQ)
    assert within(est, "neper_frequency", ALPHA)
    # The rounding errors of an equally spaced lattice drift together (9.97 us is
    # 0.034 us short of ten steps), so the times can lie closer to a line than rounding
    # allows, or err together. Without the floor, these seeds' estimates miss the truth
    # by more than 3 of their standard errors (by 3.6 for seed 0, by 4e7 for seeds 1
    # and 2, whose times fall on an exact 10 us lattice): the check above can fail.
    bare = estimate_from_peaks(table.time, table.voltage, time_resolution=0.0)
    assert not within(bare, "damped_frequency", FREQ)
    # Without stated resolutions the estimator infers them from the numbers; a column
    # whose every entry ends in a written 0 then looks ten times coarser, so the
    # inferred error is never smaller.
    inferred = estimate_from_peaks(table.time, table.voltage)
    assert inferred.damped_frequency.stderr >= 0.999 * est.damped_frequency.stderr


def test_reading_resolution_is_the_last_written_digit(tmp_path) -> None:
    # Common practice, no source: a number written to d decimals was rounded to 10^-d
    # of its unit; a trailing zero counts, as does a unit prefix or exponent.
    path = tmp_path / "cursor.csv"
    path.write_text(
        "time [ms],value [mV]\n0,1200\n0.50,-890.5\n1.00,660\n1.5e0,-492\n", encoding="ascii"
    )
    table = read_peaks(path)
    assert table.time_resolution == pytest.approx(1e-5, rel=1e-9)  # "0.50" ms
    assert table.voltage_resolution == pytest.approx(1e-4, rel=1e-9)  # "-890.5" mV
    path.write_text("time,value\n0,12\n0.5m,-8.9\n1.0m,6.62\n", encoding="ascii")
    table = read_peaks(path)
    assert table.time_resolution == pytest.approx(1e-4, rel=1e-9)  # "0.5m" s
    assert table.voltage_resolution == pytest.approx(0.01, rel=1e-9)  # "6.62" V
    # From numbers alone (no text): the coarsest power of ten they are all multiples of.
    assert decimal_resolution(np.array([0.0, 5e-4, 1e-3, 1.5e-3])) == pytest.approx(1e-4)
    assert decimal_resolution(np.array([12.0, -8.92, 6.6])) == pytest.approx(0.01)
    assert decimal_resolution(np.array([math.pi, math.e])) is None  # full precision


def test_comparison_time_sigma_honours_the_rounding() -> None:
    # A 1010 Hz ring read at 0.1 ms: half period 0.49505 ms, every time rounds onto an
    # exact 0.5 ms lattice, so the times scatter not at all about equal spacing.
    h = 0.5 / 1010.0
    k = np.arange(8)
    time = np.round(k * h / 1e-4) * 1e-4
    assert np.allclose(np.diff(time), 5e-4, rtol=0, atol=1e-15)
    sigma = _time_scatter(time, 1e-3)
    assert sigma >= 1e-4 / math.sqrt(12.0)  # uniform rounding error (common practice)
    # The half period a straight-line fit gives (0.5 ms), against the truth, within 3
    # of its standard errors sigma / sqrt(sum (k - mean k)^2) (simple linear regression).
    slope_se = sigma / math.sqrt(np.sum((k - k.mean()) ** 2))
    assert abs(5e-4 - h) <= 3 * slope_se
