"""Seeded synthetic events for the comparison tests (invented scenarios).

The captures are integrated by scipy.signal.lsim (xcheck.demo.synth), independently of the
closed-form engine the fit uses.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from xcheck.demo.synth import ScopeCapture, capture_trace, peak_table, write_capture_csv

#: Hidden extra series loss in the "lossy jig" case (ohms).
HIDDEN_EXTRA = 0.35

LOSSY_JIG_TOML = '''\
title = "Lossy jig ring-down (invented example)"
response = "natural"
loop = ["SW1", "C1", "R1", "L1"]
probe = "C1"

[parts.SW1]
kind = "switch"
resistance = "5m"

[parts.C1]
kind = "capacitor"
nominal = "10u"
measured = "10.2u"
esr = "20m"
initial = "12"

[parts.R1]
kind = "resistor"
nominal = "1"
measured = { reading = "1.06", leads = "0.06" }

[parts.L1]
kind = "inductor"
nominal = "220u"
measured = "215u"

[loop_reading]
reading = "1.065"
leads = "0.06"
'''

#: The same jig with two loss sources nobody measured, written "?".
UNSEPARABLE_TOML = LOSSY_JIG_TOML.replace('esr = "20m"', 'esr = "?"').replace(
    'measured = "215u"', 'measured = "215u"\ndcr = "?"').replace(
    '[loop_reading]\nreading = "1.065"\nleads = "0.06"\n', '')


def lossy_capture(seed: int, noise: float = 0.01) -> ScopeCapture:
    """The lossy jig's true event: stated parts plus HIDDEN_EXTRA in series."""
    return ScopeCapture(
        resistance=1.0 + 0.005 + 0.020 + HIDDEN_EXTRA,
        inductance=215e-6,
        capacitance=10.2e-6,
        esr=0.020,
        initial_volts=12.0,
        sample_interval=0.5e-6,
        pre_event=0.5e-3,
        duration=2.0e-3,
        noise_volts=noise,
        bits=8,
        full_scale=(-10.0, 14.0),
        seed=seed,
    )


def write_trace(folder: Path, seed: int, noise: float = 0.01) -> Path:
    """Write the lossy jig's capture as a scope CSV; return its path."""
    time, volts = capture_trace(lossy_capture(seed, noise))
    return write_capture_csv(folder / f"lossy_{seed}.csv", time, volts)


def write_peaks(folder: Path, seed: int) -> Path:
    """Write the first ten extrema of the same event as read off cursors (ms, V)."""
    table = peak_table(lossy_capture(seed), count=10, time_origin=-0.37e-3,
                       cursor_volts=0.01, cursor_seconds=2e-7)
    lines = ["time [ms],value [V],uncertainty [V]"]
    lines += [f"{t * 1e3:.6f},{v:.4f},0.01" for t, v in table]
    path = folder / f"lossy_peaks_{seed}.csv"
    path.write_text("\n".join(lines) + "\n", encoding="ascii")
    return path


def hidden_truth_series_resistance() -> float:
    """Total series resistance of the true event (ohms)."""
    return float(np.sum([1.0, 0.005, 0.020, HIDDEN_EXTRA]))
