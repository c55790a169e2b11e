"""The embedded demo: an invented fixture and the synthetic capture shipped with it.

The capture is made by :mod:`xcheck.demo.synth` (scipy's ``lsim``) from the *hidden truth*
below, which differs from what the fixture states: the inductor is 452 µH rather than
its 470 µH label, its winding resistance is 180 mΩ, the contacts add 30 mΩ at DC and
the loop has 90 mΩ of AC loss nobody itemised. An 8-bit scope with 20 mV of noise and
a 2 ms pre-trigger records it, so the droop through the bleeder shows before the event.
Nothing here describes a real product; the scenario is invented.
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

from xcheck.demo.synth import ScopeCapture, capture_trace, write_capture_csv

#: Seed of the demo capture's noise (recorded in the demo report).
DEMO_SEED = 20261202

#: Hidden truth of the invented demo event (SI units).
HIDDEN = {
    "capacitance": 49.1e-6,
    "inductance": 452e-6,
    "resistor": 0.233,
    "switch": 0.005,
    "winding_dcr": 0.180,
    "contact_dc": 0.030,
    "esr": 0.040,
    "ac_loss": 0.090,
    "leakage": 20e3,
    "probe_resistance": 10e6,
}

DEMO_CAPTURE = ScopeCapture(
    resistance=sum(HIDDEN[k] for k in ("resistor", "switch", "winding_dcr", "contact_dc", "esr", "ac_loss")),
    inductance=HIDDEN["inductance"],
    capacitance=HIDDEN["capacitance"],
    esr=HIDDEN["esr"],
    leakage=HIDDEN["leakage"],
    probe_resistance=HIDDEN["probe_resistance"],
    initial_volts=12.0,
    sample_interval=1e-6,
    pre_event=2e-3,
    duration=10e-3,
    noise_volts=0.02,
    bits=8,
    full_scale=(-10.0, 14.0),
    seed=DEMO_SEED,
)

PREAMBLE = {
    "Record": "invented demo capture - bench jig K7",
    "Sample interval": "1e-06",
    "Vertical units": "V",
}


def demo_folder() -> Path:
    """Folder holding the shipped demo fixture and capture."""
    return Path(str(resources.files("xcheck") / "demo"))


def demo_fixture_path() -> Path:
    """Path of the shipped demo fixture (TOML)."""
    return demo_folder() / "fixture.toml"


def demo_trace_path() -> Path:
    """Path of the shipped demo capture (gzip CSV)."""
    return demo_folder() / "trace.csv.gz"


def write_demo_trace(path: str | Path) -> Path:
    """Regenerate the demo capture into ``path`` (the shipped file was made this way)."""
    time, volts = capture_trace(DEMO_CAPTURE)
    return write_capture_csv(path, time, volts, PREAMBLE)


if __name__ == "__main__":  # regenerate the shipped file: python -m xcheck.demo.data
    write_demo_trace(demo_trace_path())
