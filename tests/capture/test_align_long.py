"""Event detection on long records: searched on block means, refined at full rate.

Reference signals (invented scenarios): the underdamped series-RLC responses with zero
initial current, from the textbook solution of the second-order loop equation (e.g.
Nilsson & Riedel, Electric Circuits, "natural and step response of RLC circuits";
from memory):

- natural, capacitor voltage: v(t) = V0 e^(-a t) (cos wd t + (a / wd) sin wd t)
- step, capacitor voltage:   v(t) = Vs [1 - e^(-a t) (cos wd t + (a / wd) sin wd t)]

A record of ``LONG`` samples is searched on means of ``BLOCK`` consecutive samples.
Its "short version" is the same record at a ``BLOCK`` times lower rate, made here
with numpy (each group of ``BLOCK`` samples averaged, what a scope's averaging
("high resolution") acquisition does; common practice, no source), so both searches
see the same block means and differ only in what the long record's full-rate
refinement adds. The per-sample noise is ``SIGMA * sqrt(BLOCK)``, so a block mean
carries ``SIGMA`` (the variance of a mean of independent samples, textbook).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from xcheck.capture.align import DETECT_SAMPLES, align_trace
from xcheck.capture.types import Trace

RECORD = 4e-3
PRE = 1e-3
LONG = 2_000_000
BLOCK = math.ceil(LONG / DETECT_SAMPLES)  # 40 with DETECT_SAMPLES = 50 000
SHORT_STEP = RECORD / LONG * BLOCK  # 80 ns: the block-mean grid
F, ALPHA, V0, SIGMA = 5e3, 1500.0, 10.0, 0.02
LEAK_TAU = 0.05  # pre-event droop: the charged capacitor leaking (exponential)


def long_record(seed: int, kind: str) -> tuple[Trace, float]:
    """A seeded LONG-sample record of one event and the planted event time (s)."""
    rng = np.random.default_rng(seed)
    step = RECORD / LONG
    t = np.arange(LONG) * step - PRE
    event = (0.3 + rng.uniform(0.0, 1.0)) * SHORT_STEP  # anywhere inside a block
    x = t - event
    xp = np.clip(x, 0.0, None)
    wd = 2 * math.pi * F
    decay = np.exp(-ALPHA * xp) * (np.cos(wd * xp) + ALPHA / wd * np.sin(wd * xp))
    if kind == "natural":
        clean = np.where(x < 0, V0 * np.exp(-x / LEAK_TAU), V0 * decay)
    else:
        clean = np.where(x < 0, 0.0, V0 * (1.0 - decay))
    noisy = clean + SIGMA * math.sqrt(BLOCK) * rng.standard_normal(LONG)
    return Trace(t, noisy, "long capture (invented)", "CH1"), event


def short_version(trace: Trace) -> Trace:
    """The same record at a BLOCK times lower rate (means of BLOCK samples)."""
    t = trace.time.reshape(-1, BLOCK).mean(axis=1)
    v = trace.voltage.reshape(-1, BLOCK).mean(axis=1)
    return Trace(t, v, "short capture (invented)", "CH1")


@pytest.mark.parametrize("kind", ["natural", "step"])
@pytest.mark.parametrize("seed", [1, 2])
def test_long_record_finds_the_event_where_its_short_version_does(kind, seed):
    trace, planted = long_record(seed, kind)
    short = short_version(trace)
    assert short.time.size <= DETECT_SAMPLES  # the short one is searched sample by sample
    _, found_short = align_trace(short, expect=kind, expected_sign=+1)
    _, found_long = align_trace(trace, expect=kind, expected_sign=+1)
    # Same event within one sample of the block-mean grid: the search is the same and
    # the full-rate refinement only moves the onset within it (measured while building
    # this: at most 0.2 of a block over 20 seeds).
    difference = (found_long.event_time - found_short.event_time) / SHORT_STEP
    assert abs(difference) <= 1.0, f"long and short differ by {difference:.2f} blocks"
    # Against the planted time: the zero-slope onset model leaves out the t^3 and t^4
    # terms of the response, so it dates the start early by about 0.17 % of a period
    # (340 ns here, see tests/capture/test_align.py), with a scatter of about 50 ns
    # (both measured over 20 seeds while building this: -160 to -340 ns). 6 grid
    # samples (480 ns) still fails for the errors that matter: the 5-sigma threshold
    # crossing itself lags by about 4.5 us (10 V (wd t)^2 / 2 = 0.1 V), 56 samples.
    for found in (found_short, found_long):
        error = (found.event_time - planted) / SHORT_STEP
        assert abs(error) <= 6.0, f"event off by {error:.2f} grid samples"
        assert not found.inverted
    assert any(f"means of {BLOCK} consecutive samples" in n for n in found_long.notes)
    assert not any("consecutive samples" in n for n in found_short.notes)
    # The baseline, droop and noise come from the full-rate samples: the per-sample
    # noise is SIGMA sqrt(BLOCK), within 4 standard errors of a sample standard
    # deviation (sigma / sqrt(2 (N - 1)), textbook large-sample result). The natural
    # record's leak bends the 1 ms before the event by 0.5 V0 / tau^2 * x^2, 2 mV at
    # most, whose misfit by a line (about 0.15 mV rms) adds a relative 1e-6 to the
    # noise variance: negligible.
    count = found_long.pre_event_samples
    expected = SIGMA * math.sqrt(BLOCK)
    assert found_long.noise_rms == pytest.approx(expected, rel=4 / math.sqrt(2 * (count - 1)))


def test_abrupt_step_in_a_long_record_is_dated_between_full_rate_samples():
    # A first-order step (no inductance): the trace jumps between two samples. The
    # block-mean search sees the jump smeared over one block; the refinement must find
    # the gap itself, so the event is the midpoint of that gap (within half a
    # full-rate sample of the planted time: 1/80 of a block).
    rng = np.random.default_rng(12)
    step = RECORD / LONG
    t = np.arange(LONG) * step
    event = (LONG / 3 + 0.4) * step
    volts = np.where(t < event, 0.0, np.exp(-(t - event) / 1e-4)) + 0.01 * rng.standard_normal(LONG)
    _, found = align_trace(Trace(t, volts, "jump (invented)", "CH1"), expect="step")
    assert abs(found.event_time - event) <= 0.5 * step
    assert any("jump" in note for note in found.notes)
    assert any("consecutive samples" in note for note in found.notes)


@pytest.mark.parametrize("kind, sign", [("natural", 1), ("natural", -1), ("step", 1), ("step", -1)])
def test_first_swing_sign_on_a_long_record(kind: str, sign: int) -> None:
    # A natural response starting from +V0 first swings down (towards zero), a step
    # of +Vs first rises (textbook responses above). On a LONG-sample record the
    # swing's size is taken on every 10th sample and its start searched in chunks;
    # the sign must still come out right, and a wrong expected sign must be reported
    # as an inverted probe.
    trace, _ = long_record(7, kind)
    if sign < 0:
        trace = Trace(trace.time, -trace.voltage, trace.source, trace.column)
    _, right = align_trace(trace, expect=kind, expected_sign=sign)
    _, wrong = align_trace(trace, expect=kind, expected_sign=-sign)
    assert not right.inverted
    assert wrong.inverted
