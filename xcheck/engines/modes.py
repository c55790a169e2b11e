"""A circuit's natural modes, each with its share of the probed response and the
parts that make it.

A mode is an eigenvalue ``s = -alpha + j omega_d`` of the state matrix (a conjugate
pair counts once). Its *share* is its amplitude in the probed signal over the sum of
all modes' amplitudes (for the circuit's own excitation). The parts that make it are
found from where the mode keeps its energy: on the mode's shape (its eigenvector),
every capacitance stores C |v|^2 / 2 and every inductance L |i|^2 / 2 at the peak
(common practice, no source); the elements holding most of it are the mode's makers,
so that a 3 MHz mode of a capacitor's ESL against a capacitance across an inductor is
named by those two elements, not by the states the normal tree happened to choose.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from xcheck.circuit.model import Circuit, Element
from xcheck.engines.exact import ExactEngine

#: Elements holding at least this share of a mode's energy are named as its makers.
MAKER_SHARE = 0.15
_KIND_WORDS = {"C": "capacitance", "L": "inductance"}


@dataclass(frozen=True)
class NamedMode:
    """One natural mode of a circuit (a conjugate pair counted once).

    Attributes
    ----------
    frequency_hz
        Damped frequency omega_d / (2 pi); 0 for a mode that does not ring.
    alpha
        Decay rate -Re(s) (1/s).
    zeta
        Damping ratio alpha / |s|.
    share
        Fraction of the probed response's summed mode amplitudes (0 to 1).
    makers
        Words for the elements that hold most of its energy, largest first.
    """

    frequency_hz: float
    alpha: float
    zeta: float
    share: float
    makers: tuple[str, ...]

    @property
    def rings(self) -> bool:
        """True for an oscillating mode."""
        return self.frequency_hz > 0

    def sentence(self) -> str:
        """Plain words: ``"mode at 3 MHz (zeta 0.02, 12 % of the response) from C1 esl
        and L1 parallel capacitance"``."""
        from xcheck.values import format_eng

        what = (f"mode at {format_eng(self.frequency_hz, 'Hz')}" if self.rings
                else f"non-ringing mode with time constant {format_eng(1 / self.alpha, 's')}"
                if self.alpha > 0 else "non-decaying mode")
        made = " and ".join(self.makers) if self.makers else "the circuit as a whole"
        return (f"{what} (zeta {self.zeta:.3g}, {100 * self.share:.3g} % of the response) "
                f"from {made}")


def element_words(element: Element) -> str:
    """Default words for an element: its part and role (``"C1 esl"``), or the part and
    its kind for the part's own element (``"C1 capacitance"``)."""
    if element.role == "value":
        return f"{element.part} {_KIND_WORDS.get(element.kind, element.kind)}"
    return f"{element.part} {element.role.replace('_', ' ')}"


def natural_modes_named(circuit: Circuit,
                        describe: Callable[[Element], str] | None = None) -> tuple[NamedMode, ...]:
    """The natural modes of ``circuit``, largest share first.

    Parameters
    ----------
    circuit
        The circuit; its probe defines the shares.
    describe
        Words for an element (default :func:`element_words`); callers that know the
        fixture pass its own words (``"C1 series inductance (ESL)"``).

    Returns
    -------
    tuple of NamedMode
        One per real eigenvalue or conjugate pair.
    """
    words = describe or element_words
    engine = ExactEngine(circuit)
    model = engine.model()
    a = model.a[0]
    if a.size == 0:
        return ()
    lam, vec = np.linalg.eig(a)
    lam, vec = lam.astype(complex), vec.astype(complex)
    out_map = engine.output_map(model)
    with np.errstate(all="ignore"):
        coefficients = np.linalg.lstsq(vec, model.x0[0].astype(complex), rcond=None)[0]
        drive = model.b[0] @ (model.u[0] * engine.schedule.on[0])
        forced = np.linalg.lstsq(vec, drive.astype(complex), rcond=None)[0]
        coefficients = coefficients + np.where(lam != 0, forced / np.where(lam == 0, 1, lam), 0)
        amplitude = np.abs(out_map.x_coef[0] @ vec * coefficients)
    amplitude = np.where(np.isfinite(amplitude), amplitude, 0.0)
    elements = engine.topology.elements
    modes = []
    for k, pole in enumerate(lam):
        if pole.imag < 0:
            continue  # the conjugate of a mode already counted
        share = amplitude[k] * (2.0 if pole.imag > 0 else 1.0)
        energy = []
        for index, element in enumerate(elements):
            if element.kind == "C":
                value = model.voltage[index].x_coef[0] @ vec[:, k]
            elif element.kind == "L":
                value = model.current[index].x_coef[0] @ vec[:, k]
            else:
                continue
            energy.append((element.value * abs(value) ** 2 / 2.0, element))
        total = sum(e for e, _ in energy) or 1.0
        ranked = sorted(energy, key=lambda item: -item[0])
        makers = tuple(dict.fromkeys(words(el) for e, el in ranked if e / total >= MAKER_SHARE))
        size = abs(pole)
        modes.append(NamedMode(
            frequency_hz=float(abs(pole.imag) / (2 * math.pi)),
            alpha=float(-pole.real),
            zeta=float(-pole.real / size) if size > 0 else 1.0,
            share=float(share),
            makers=makers,
        ))
    total_share = sum(m.share for m in modes) or 1.0
    modes = [NamedMode(m.frequency_hz, m.alpha, m.zeta, m.share / total_share, m.makers)
             for m in modes]
    return tuple(sorted(modes, key=lambda m: -m.share))
