"""The synthetic-capture generator (scipy.signal.lsim) against textbook closed forms.

Underdamped series RLC natural response with v(0) = V0, i(0) = 0:
v(t) = V0 exp(-alpha t) (cos wd t + (alpha/wd) sin wd t), alpha = R/2L,
w0 = 1/sqrt(LC), wd = sqrt(w0^2 - alpha^2) (Nilsson & Riedel, "Electric Circuits",
chapter "Natural and Step Responses of RLC Circuits"; from memory).
"""

import numpy as np

from xcheck.demo.synth import ScopeCapture, capture_trace, clean_waveform, peak_table

BASE = ScopeCapture(resistance=0.5, inductance=470e-6, capacitance=47e-6, initial_volts=12.0,
                    sample_interval=1e-6, duration=5e-3)


def _textbook(t, r=0.5, l=470e-6, c=47e-6, v0=12.0):
    alpha = r / (2 * l)
    wd = np.sqrt(1 / (l * c) - alpha**2)
    return v0 * np.exp(-alpha * t) * (np.cos(wd * t) + alpha / wd * np.sin(wd * t))


def test_clean_waveform_matches_textbook_natural_response():
    t = np.linspace(0, 5e-3, 5001)
    # lsim uses the exact matrix exponential for a constant input: agreement to
    # rounding, 1e-9 x V0 leaves a wide margin.
    assert np.max(np.abs(clean_waveform(BASE, t) - _textbook(t))) < 1e-9 * 12


def test_step_response_settles_at_the_step():
    capture = BASE.with_(step_volts=5.0, initial_volts=0.0)
    t = np.linspace(0, 60e-3, 6001)
    v = clean_waveform(capture, t)
    # Textbook: v_C(t) = Vs - Vs exp(-alpha t)(cos + alpha/wd sin) for a step Vs.
    assert np.max(np.abs(v - (5.0 - _textbook(t, v0=5.0)))) < 1e-9 * 5


def test_quantisation_and_noise_are_seeded_and_bounded():
    capture = BASE.with_(noise_volts=0.02, bits=8, full_scale=(-10.0, 14.0), seed=7)
    t1, v1 = capture_trace(capture)
    t2, v2 = capture_trace(capture)
    assert np.array_equal(v1, v2)  # same seed, same capture
    lsb = 24.0 / 255
    codes = (v1 + 10.0) / lsb
    assert np.allclose(codes, np.round(codes), atol=1e-9)  # on the 8-bit grid
    assert v1.min() >= -10.0 - 1e-12 and v1.max() <= 14.0 + 1e-12


def test_peak_table_extrema_are_half_a_damped_period_apart():
    table = peak_table(BASE, count=6)
    alpha = 0.5 / (2 * 470e-6)
    wd = np.sqrt(1 / (470e-6 * 47e-6) - alpha**2)
    # Extrema of the capacitor voltage with i(0) = 0 sit at k*pi/wd (textbook); the
    # 200001-point search grid limits the time resolution to about 3e-8 s.
    assert np.allclose(table[:, 0], np.arange(6) * np.pi / wd, atol=5e-8)
    # |v(t_k)| = V0 exp(-alpha t_k); evaluating the envelope at the grid time instead of
    # the true extremum time costs alpha * 1.5e-8 s ~ 1e-5 relative, hence rtol 2e-5.
    assert np.allclose(np.abs(table[:, 1]), 12 * np.exp(-alpha * table[:, 0]), rtol=2e-5)
