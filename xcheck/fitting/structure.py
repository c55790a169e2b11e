"""Topology as a hypothesis: rungs that add a reactive parasitic when the residuals ring.

When even the best candidate leaves residuals well above the noise, and those
residuals carry a damped oscillation clearly apart from the fixture's main ring (found
by the matrix pencil), the circuit is missing a mode: an ESL nobody stated, a winding's
self-capacitance, a probe's capacitance. :func:`second_mode` finds that oscillation;
:func:`structural_rungs` makes one candidate per reactive parasitic the fixture leaves
out, each the best candidate plus that one value, free within the range that puts a
mode near the residuals' frequency against the circuit's other reactances
(omega^2 = 1 / (L C); common practice, no source), and never above
:data:`PARASITIC_SHARE` of the fixture's own inductances or capacitances. The fit's start scan
(:func:`xcheck.fitting.fit._scanned_start`) then finds it within that range, and BIC
judges whether the extra mode is worth its extra value.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from xcheck.circuit.parameters import PROBE_CAPACITANCE, ParameterSet
from xcheck.fitting.candidates import Candidate, FreeParameter, describe_key, unit_of
from xcheck.fixture.model import Fixture
from xcheck.fixture.schema import PART_KINDS, ParameterKey
from xcheck.ringdown.pencil import damped_pairs, matrix_pencil

#: Samples the pencil looks at (its SVD grows with the square of this).
PENCIL_SAMPLES = 1200
#: A parasitic mode rings well above the main ring (its L and C are small): residual
#: oscillations below this multiple of the main ring's frequency are the main ring
#: misfitted, not a missing mode.
ABOVE_MAIN = 1.5
#: A parasitic is at most this fraction of the smallest main inductance or capacitance
#: (a parasitic that large would be a part, and the fixture would name it).
PARASITIC_SHARE = 0.1
#: A residual oscillation counts only when it explains at least this share of the
#: residuals' sum of squares where it was found (a misfitted decay leaves residuals at
#: the main frequency, which a spurious fast pair does not explain).
EXPLAINED_SHARE = 0.3
#: The range of a rung's free value spans this factor either side of the values that
#: put a mode at the residuals' frequency.
RANGE_FACTOR = 10.0


@dataclass(frozen=True)
class ResidualMode:
    """A damped oscillation found in a fit's residuals."""

    omega: float
    alpha: float
    amplitude: float


def second_mode(time: np.ndarray, residuals: np.ndarray, main_omega: float) -> ResidualMode | None:
    """The strongest damped oscillation in ``residuals`` apart from the main ring.

    The pencil (order 6: up to three oscillations) runs on the record's start at full
    rate and on the whole record block-averaged to :data:`PENCIL_SAMPLES`, so that fast
    bursts and slow beats are both seen; each oscillation's amplitude comes from a
    linear least-squares fit of its two quadratures to the residuals it was found in.

    Parameters
    ----------
    time, residuals
        Uniformly spaced samples from the event (s) and the residuals (V).
    main_omega
        The main ring's angular frequency (rad/s), the larger of the measured and the
        fitted one; 0 when neither rings.
    """
    time = np.asarray(time, float)
    residuals = np.asarray(residuals, float)
    if time.size < 50:
        return None
    found: list[ResidualMode] = []
    views = [(time[:PENCIL_SAMPLES], residuals[:PENCIL_SAMPLES])]
    block = time.size // PENCIL_SAMPLES
    if block > 1:
        count = block * PENCIL_SAMPLES
        views.append((time[:count].reshape(-1, block).mean(axis=1),
                      residuals[:count].reshape(-1, block).mean(axis=1)))
    for t, r in views:
        step = float(np.median(np.diff(t)))
        if not step > 0 or t.size < 30:
            continue
        try:
            poles = matrix_pencil(r, step, 6).poles
        except (ValueError, np.linalg.LinAlgError):
            continue
        for alpha, omega in damped_pairs(poles, math.pi / step):
            if main_omega > 0 and omega < ABOVE_MAIN * main_omega:
                continue
            if alpha < 0:
                continue
            decay = np.exp(-alpha * (t - t[0]))
            design = np.column_stack([decay * np.cos(omega * t), decay * np.sin(omega * t)])
            coef, *_ = np.linalg.lstsq(design, r, rcond=None)
            explained = 1.0 - float(np.sum((r - design @ coef) ** 2)) / max(float(np.sum(r**2)), 1e-300)
            if explained >= EXPLAINED_SHARE:
                found.append(ResidualMode(omega, alpha, float(np.hypot(*coef))))
    return max(found, key=lambda m: m.amplitude) if found else None


def _missing_reactive_keys(fixture: Fixture, parameters: ParameterSet) -> list[ParameterKey]:
    """Reactive parasitics the fixture's parts could carry but this parameter set lacks."""
    keys: list[ParameterKey] = []
    for name, part in fixture.parts.items():
        row = PART_KINDS[part.kind]
        if row.source is not None:
            continue
        for role, spec in row.fields.items():
            if role == "value" or spec.unit not in ("H", "F"):
                continue
            key = (name, role)
            if parameters.get(key) or role in part.unknown:
                continue
            keys.append(key)
    if fixture.probe_kind != "current" and not parameters.get(PROBE_CAPACITANCE):
        keys.append(PROBE_CAPACITANCE)
    return keys


def structural_rungs(fixture: Fixture, base: Candidate, fitted: ParameterSet,
                     mode: ResidualMode, reactances: tuple[list[float], list[float]]) -> list[Candidate]:
    """One candidate per reactive parasitic ``base`` leaves out, free near ``mode``.

    Parameters
    ----------
    fixture
        The fixture.
    base
        The candidate the rungs extend (the best so far): its free values stay free,
        started at their fitted values ``fitted``.
    mode
        The residuals' oscillation.
    reactances
        (inductances in H, capacitances in F) of the base's fitted circuit: the values
        a new element could ring against.
    """
    inductances, capacitances = reactances
    rungs = []
    start_set = fitted
    kept = tuple(
        FreeParameter(f.key, float(start_set.get(f.key, f.start) or f.start), f.lower, f.upper,
                      f.unit, f.reason)
        for f in base.free
    )
    w2 = mode.omega**2 + mode.alpha**2
    missing = _missing_reactive_keys(fixture, base.parameters)
    main_l = [v for n, p in fixture.parts.items() if PART_KINDS[p.kind].unit == "H"
              for v in [fitted.get((n, "value"))] if v]
    main_c = [v for n, p in fixture.parts.items() if PART_KINDS[p.kind].unit == "F"
              for v in [fitted.get((n, "value"))] if v]
    l_cap = PARASITIC_SHARE * min(main_l) if main_l else 1e-3
    c_cap = PARASITIC_SHARE * min(main_c) if main_c else 1e-3
    units = {key: unit_of(fixture, key) for key in missing}
    for key_l in (k for k in missing if units[k] == "H"):
        for key_c in (k for k in missing if units[k] == "F"):
            # Both missing: they ring together, L C = 1 / omega^2, each within a wide
            # range (a nanohenry to a hundred microhenries, or the matching capacitance).
            l_lo, l_hi = 1e-10, max(min(1e-3, l_cap), 1e-9)
            c_lo, c_hi = 1.0 / (w2 * l_hi), min(1.0 / (w2 * l_lo), c_cap)
            if not c_hi > c_lo:
                continue
            l0 = math.sqrt(l_lo * l_hi)
            free = kept + (
                FreeParameter(key_l, l0, l_lo, l_hi, "H", reason="a mode the residuals carry"),
                FreeParameter(key_c, 1.0 / (w2 * l0), c_lo, c_hi, "F",
                              reason="a mode the residuals carry"),
            )
            words = f"{describe_key(fixture, key_l)} and {describe_key(fixture, key_c)}"
            rungs.append(Candidate(
                f"{base.name}+{key_l[0]}.{key_l[1]}+{key_c[0]}.{key_c[1]}",
                f"{base.name} plus a fitted {words}: the residuals ring at "
                f"{mode.omega / (2 * math.pi):.4g} Hz, a mode the circuit lacks",
                base.parameters.with_values({key_l: l0, key_c: 1.0 / (w2 * l0)}, "fit start"),
                free,
                scan_pairs=((len(kept), len(kept) + 1, 1.0 / w2),),
            ))
    for key in missing:
        unit = units[key]
        partners = capacitances if unit == "H" else inductances
        partners = [p for p in partners if p > 0]
        if not partners:
            continue
        values = [1.0 / (w2 * p) for p in partners]
        lower, upper = min(values) / RANGE_FACTOR, max(values) * RANGE_FACTOR
        upper = min(upper, l_cap if unit == "H" else c_cap)
        if not upper > lower:
            continue
        start = math.sqrt(lower * upper)
        free = kept + (FreeParameter(key, start, lower, upper, unit,
                                     reason="a mode the residuals carry"),)
        words = describe_key(fixture, key)
        rungs.append(Candidate(
            f"{base.name}+{key[0]}.{key[1]}",
            f"{base.name} plus a fitted {words}: the residuals ring at "
            f"{mode.omega / (2 * math.pi):.4g} Hz, a mode the circuit lacks",
            base.parameters.with_values({key: start}, "fit start"),
            free,
        ))
    return rungs
