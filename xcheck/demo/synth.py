"""Synthetic scope captures of a series-RLC event, for the demo, tests and benchmarks.

The waveform is integrated with :func:`scipy.signal.lsim` from the circuit's state
equations, independently of xcheck's own engines, so a test that fits a synthetic
capture checks xcheck against scipy rather than against itself. Everything is seeded;
the seed travels with the result.

State equations of the loop (capacitor voltage v across the ideal C, loop current i
in loop order; common practice, no source)::

    C dv/dt = i - v / R_leak            (leakage in parallel with the ideal C)
    L di/dt = -v - R i                  (R = every series resistance, ESR included)

for a natural response; for a step the source adds ``+ V_step`` to the second
equation. The probe reads the capacitor part: v + ESR * i.
"""

from __future__ import annotations

import gzip
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
from scipy import signal


@dataclass(frozen=True)
class ScopeCapture:
    """Settings of an invented series-RLC event and the scope that records it (SI)."""

    resistance: float
    inductance: float
    capacitance: float
    esr: float = 0.0
    leakage: float = float("inf")
    probe_resistance: float = float("inf")
    initial_volts: float = 12.0
    step_volts: float = 0.0
    sample_interval: float = 1e-6
    pre_event: float = 0.0
    duration: float = 5e-3
    noise_volts: float = 0.0
    offset_volts: float = 0.0
    bits: int | None = None
    full_scale: tuple[float, float] | None = None
    seed: int = 0

    def with_(self, **changes: object) -> "ScopeCapture":
        """A copy with ``changes`` applied."""
        return replace(self, **changes)  # type: ignore[arg-type]


def clean_waveform(capture: ScopeCapture, time: np.ndarray) -> np.ndarray:
    """Noise-free probe voltage at ``time`` (s from the event), before and after it."""
    parallel = 1.0 / capture.leakage + 1.0 / capture.probe_resistance
    c, l, r = capture.capacitance, capture.inductance, capture.resistance
    a = np.array([[-parallel / c, 1.0 / c], [-1.0 / l, -r / l]])
    b = np.array([[0.0], [1.0 / l]])
    out = np.array([[1.0, capture.esr]])
    system = signal.StateSpace(a, b, out, np.zeros((1, 1)))
    after = time >= 0
    volts = np.empty_like(time, dtype=float)
    if capture.step_volts:
        volts[~after] = 0.0
        x0 = np.zeros(2)
        drive = np.full(int(after.sum()), capture.step_volts)
    else:
        # Before the event the open loop only droops through leakage and probe loading.
        tau = capture.capacitance / parallel if parallel > 0 else np.inf
        volts[~after] = capture.initial_volts * np.exp(-time[~after] / tau)
        x0 = np.array([capture.initial_volts, 0.0])
        drive = np.zeros(int(after.sum()))
    t_after = time[after]
    if t_after.size:
        level = capture.step_volts or 0.0
        start = float(t_after[0])
        if start > 0:  # the grid misses t = 0: carry the state from 0 to the first sample
            _, _, states = signal.lsim(system, np.full(2, level), np.array([0.0, start]), X0=x0)
            x0 = states[-1]
        _, y, _ = signal.lsim(system, drive, t_after - start, X0=x0)
        volts[after] = np.atleast_1d(y)
    return volts


def capture_trace(capture: ScopeCapture) -> tuple[np.ndarray, np.ndarray]:
    """Time (s) and recorded voltage (V) with noise, offset, quantisation and clipping.

    Returns
    -------
    time, volts
        The record starts ``pre_event`` seconds before the event.
    """
    rng = np.random.default_rng(capture.seed)
    count = int(round((capture.pre_event + capture.duration) / capture.sample_interval)) + 1
    time = -capture.pre_event + capture.sample_interval * np.arange(count)
    # Put the event exactly on a sample so the analytic state at t = 0 is used.
    time = np.round(time / capture.sample_interval) * capture.sample_interval
    volts = clean_waveform(capture, time) + capture.offset_volts
    volts = volts + rng.normal(0.0, capture.noise_volts, size=count) if capture.noise_volts else volts
    if capture.bits is not None:
        low, high = capture.full_scale or (float(volts.min()), float(volts.max()))
        lsb = (high - low) / (2**capture.bits - 1)
        volts = low + lsb * np.clip(np.round((volts - low) / lsb), 0, 2**capture.bits - 1)
    return time, volts


def write_capture_csv(path: str | Path, time: np.ndarray, volts: np.ndarray,
                      preamble: dict[str, str] | None = None, digits: int = 6) -> Path:
    """Write a scope-style CSV (optional preamble, header ``time [s],CH1 [V]``).

    A ``.gz`` suffix writes it gzip-compressed (fixed mtime, so the bytes are
    reproducible).
    """
    path = Path(path)
    lines = [f"{key},{value}" for key, value in (preamble or {}).items()]
    lines.append("time [s],CH1 [V]")
    body = "\n".join(f"{t:.9e},{v:.{digits}g}" for t, v in zip(time, volts))
    text = "\n".join(lines) + "\n" + body + "\n"
    if path.suffix == ".gz":
        with open(path, "wb") as raw, gzip.GzipFile(fileobj=raw, mode="wb", mtime=0,
                                                     filename="") as handle:
            handle.write(text.encode("ascii"))
    else:
        path.write_text(text, encoding="ascii")
    return path


def peak_table(capture: ScopeCapture, *, count: int = 10, time_origin: float = 0.0,
               cursor_volts: float = 0.0, cursor_seconds: float = 0.0) -> np.ndarray:
    """Extrema of the clean waveform as read off cursors, with seeded reading errors.

    Returns
    -------
    ndarray, shape (n, 2)
        Time (s, from ``time_origin``) and voltage (V) of the first ``count`` extrema
        after the event.
    """
    rng = np.random.default_rng(capture.seed)
    omega0_sq = 1.0 / (capture.inductance * capture.capacitance)
    alpha = capture.resistance / (2 * capture.inductance)
    omega_d = np.sqrt(max(omega0_sq - alpha**2, 0.0))
    span = (count + 1) * np.pi / omega_d
    fine = np.linspace(0.0, span, 200_001)
    volts = clean_waveform(capture, fine)
    from scipy.signal import find_peaks

    highs, _ = find_peaks(volts)
    lows, _ = find_peaks(-volts)
    index = np.sort(np.concatenate([[0], highs, lows]))[:count]
    times = fine[index] + rng.normal(0.0, cursor_seconds, index.size) if cursor_seconds else fine[index]
    values = volts[index] + rng.normal(0.0, cursor_volts, index.size) if cursor_volts else volts[index]
    return np.column_stack([times - time_origin, values])
