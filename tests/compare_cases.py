"""Seeded synthetic events for the comparison tests (invented scenarios).

The captures are integrated by scipy.signal.lsim (xcheck.demo.synth), independently of the
closed-form engine the fit uses. The committed fixture descriptions live in tests/data/,
one copy each; :func:`data_text` reads one and :func:`variant` derives a variant of it.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from xcheck.demo.synth import ScopeCapture, capture_trace, peak_table, write_capture_csv

#: Hidden extra series loss in the "lossy jig" case (ohms).
HIDDEN_EXTRA = 0.35

#: Folder of the committed test data (invented fixture descriptions).
DATA = Path(__file__).parent / "data"


def data_text(name: str) -> str:
    """Text of ``tests/data/<name>``, one of the committed invented fixtures."""
    return (DATA / name).read_text(encoding="utf-8")


def variant(text: str, *edits: tuple[str, str]) -> str:
    """``text`` with each ``(old, new)`` replacement made; each ``old`` must occur once,
    so that a variant cannot silently equal its base."""
    for old, new in edits:
        if text.count(old) != 1:
            raise ValueError(f"{old!r} occurs {text.count(old)} times in the base text, not once")
        text = text.replace(old, new)
    return text


LOSSY_JIG_TOML = data_text("lossy_jig.toml")

#: The same jig with two loss sources nobody measured, written "?".
UNSEPARABLE_TOML = variant(
    LOSSY_JIG_TOML,
    ('esr = "20m"', 'esr = "?"'),
    ('measured = "215u"', 'measured = "215u"\ndcr = "?"'),
    ('[loop_reading]\nreading = "1.065"\nleads = "0.06"\n', ""),
)


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
