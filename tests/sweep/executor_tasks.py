"""Task functions for the executor tests; importable by worker processes by name."""

from __future__ import annotations

import math
import os

import numpy as np

from xcheck.demo.synth import ScopeCapture, capture_trace


def seeded_capture(seed: int) -> tuple[int, np.ndarray]:
    """(seed, volts) of a small seeded invented series-RLC capture (scipy lsim, 8-bit)."""
    rng = np.random.default_rng(seed)
    capture = ScopeCapture(resistance=float(rng.uniform(0.5, 2.0)), inductance=100e-6,
                           capacitance=float(rng.uniform(5e-6, 20e-6)), sample_interval=2e-6,
                           duration=0.4e-3, noise_volts=0.01, bits=8, seed=seed)
    return seed, capture_trace(capture)[1]


def where(task: int) -> tuple[int, int]:
    """(task, process id that ran it)."""
    return task, os.getpid()


def fails_on_three(task: int) -> int:
    """``task`` squared; raises ValueError for 3."""
    if task == 3:
        raise ValueError("task 3 was told to fail")
    return task * task


def dies_on_five(task: int) -> int:
    """``task`` squared; the process running task 5 exits at once (as a crash would)."""
    if task == 5:
        os._exit(7)
    return task * task


#: The invented series RLC of the ngspice task: 1 mH, 1 uF, 6.32 ohm (zeta 0.1), C at 1 V.
RLC = {"R": 2 * 0.1 * math.sqrt(1e-3 / 1e-6), "L": 1e-3, "C": 1e-6}


def ngspice_ringdown(task: int) -> tuple[int, np.ndarray, np.ndarray]:
    """(process id, time, capacitor voltage) of the invented series RLC run in ngspice."""
    from xcheck.circuit.model import Circuit, Element
    from xcheck.engines.ngspice import simulate_ngspice

    circuit = Circuit(
        "series RLC for the executor tests (invented values)",
        (Element("R_1", "R", ("n1", "n2"), RLC["R"]),
         Element("L_1", "L", ("n2", "0"), RLC["L"], initial=0.0),
         Element("C_1", "C", ("n1", "0"), RLC["C"], initial=1.0)),
        probe=("n1", "0"))
    wave = simulate_ngspice(circuit, stop_time=2e-3)
    return os.getpid(), wave.time, wave.probe_voltage
