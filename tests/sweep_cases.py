"""Invented sweeps made from textbook formulas, shared by the sweep tests.

The impedances are recalled circuit theory (from memory):

- a series RLC: Z = R + j omega L + 1 / (j omega C), resonant at
  f0 = 1 / (2 pi sqrt(L C)), with Q = sqrt(L / C) / R and half-power bandwidth R / (2 pi L);
- a capacitor with ESR and ESL is the same series circuit, so its self-resonance is
  1 / (2 pi sqrt(ESL C)) and its impedance there is the ESR.
"""

from __future__ import annotations

import math

import numpy as np

#: An invented series RLC: 2 ohm, 10 uH, 100 nF (f0 about 159 kHz, Q = 5).
RLC = {"R": 2.0, "L": 10e-6, "C": 100e-9}
#: An invented 100 nF capacitor with 50 mohm ESR and 5 nH ESL (self-resonance about 7.1 MHz).
CAPACITOR = {"R": 0.05, "L": 5e-9, "C": 100e-9}


def series_rlc(frequency: np.ndarray, R: float, L: float, C: float) -> np.ndarray:
    """Z = R + j omega L + 1 / (j omega C) (from memory)."""
    omega = 2 * math.pi * np.asarray(frequency, dtype=float)
    return R + 1j * omega * L + 1 / (1j * omega * C)


def resonance(R: float, L: float, C: float) -> tuple[float, float]:
    """f0 = 1 / (2 pi sqrt(L C)) and Q = sqrt(L / C) / R of a series RLC (from memory)."""
    return 1 / (2 * math.pi * math.sqrt(L * C)), math.sqrt(L / C) / R


def log_grid(start: float, stop: float, per_decade: int) -> np.ndarray:
    """Log-spaced frequencies, ``per_decade`` points a decade."""
    decades = math.log10(stop / start)
    return np.logspace(math.log10(start), math.log10(stop), int(round(decades * per_decade)) + 1)


def swept_capacitor_fixture(title: str, nominal: str, *, esl_unknown: bool = True) -> str:
    """An invented capacitor discharged round a 1 ohm loop and swept on its own (its
    ``[swept]`` table: the impedance of C1 alone), its ESR (and ESL) written ``"?"``."""
    esl = 'esl = "?"\n' if esl_unknown else ""
    return (
        f'title = "{title}"\nresponse = "natural"\nloop = ["SW1", "C1", "R1"]\n'
        'probe = "C1"\n[parts.SW1]\nkind = "switch"\n[parts.C1]\nkind = "capacitor"\n'
        f'nominal = "{nominal}"\nesr = "?"\n{esl}initial = "5"\n[parts.R1]\n'
        'kind = "resistor"\nnominal = "1"\n[swept]\nmeasures = "impedance"\npart = "C1"\n'
    )


def noisy(z: np.ndarray, relative: float, seed: int) -> np.ndarray:
    """``z`` times a seeded log-normal error: ``relative`` standard deviation in the
    log-magnitude and the same in the phase (rad)."""
    rng = np.random.default_rng(seed)
    return z * np.exp(relative * rng.standard_normal(z.size)
                      + 1j * relative * rng.standard_normal(z.size))
