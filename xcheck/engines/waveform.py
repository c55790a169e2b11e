"""A predicted or measured waveform on its own time axis (SI units)."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class Waveform:
    """Probe voltage (and loop current, when known) against time.

    Attributes
    ----------
    time
        Seconds from the event (switch closure or step) at t = 0; strictly increasing.
    probe_voltage
        Volts across the probed part, first terminal minus second.
    loop_current
        Amperes round the loop in the order written, or None when not available.
    engine
        Who made it: ``"ngspice"``, ``"theory"``, ``"measured"``, ...
    notes
        Plain-words remarks (approximations made, time step used, ...).
    """

    time: np.ndarray
    probe_voltage: np.ndarray
    loop_current: np.ndarray | None = None
    engine: str = ""
    notes: tuple[str, ...] = field(default=())

    def at(self, times: np.ndarray) -> np.ndarray:
        """Probe voltage linearly interpolated at ``times`` (s)."""
        return np.interp(times, self.time, self.probe_voltage)
