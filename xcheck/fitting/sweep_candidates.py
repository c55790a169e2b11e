"""The model ladder for a frequency sweep: lumped values, then losses that grow with
frequency.

A sweep resolves what one ring-down cannot (a capacitor's ESR and ESL and its
capacitance separately, an inductor's winding capacitance), so its ladder is:

1. ``label`` and ``as-measured``, as for a time capture (nothing fitted);
2. ``lumped``: the values of the measured circuit's capacitors and inductors and the
   parasitics of its parts (ESR, ESL, winding resistance and capacitance), and every
   ``"?"`` value there, fitted;
3. on top of ``lumped``, one frequency-dependent loss at a time
   (:mod:`xcheck.fitting.frequency_laws`): skin effect on each fitted series
   resistance, a fitted power of frequency on it, and a dielectric loss tangent on
   each capacitor.

Values outside the measured circuit (another part when the sweep measured one part
alone, the loop's extra loss) are never free: the sweep says nothing about them.
Start values come from the sweep where one part alone was measured (its reactance at
the lowest and highest frequencies, its resistance at the lowest), else from the
stated values or small typical ones.
"""

from __future__ import annotations

import math
import numpy as np

from xcheck.capture.sweep_types import FrequencySweep
from xcheck.circuit.parameters import ParameterKey, ParameterSet
from xcheck.engines.swept import swept_circuit
from xcheck.fitting.candidates import Candidate, FreeParameter, default_ladder, describe_key
from xcheck.fitting.frequency_laws import (
    FrequencyLaw,
    loss_tangent_law,
    power_law,
    skin_law,
)
from xcheck.fixture.model import Fixture
from xcheck.fixture.schema import PART_KINDS
from xcheck.fixture.swept_table import SweptSetting

#: Fields freed in ``lumped`` per part kind (those the kind has), in this order.
LUMPED_FIELDS: dict[str, tuple[str, ...]] = {
    "capacitor": ("value", "esr", "esl"),
    "inductor": ("value", "dcr", "parallel_capacitance"),
    "resistor": ("inductance",),
    "wire": ("resistance", "inductance"),
}
#: Start values of a parasitic the fixture and the sweep leave open (typical small
#: values of bench parts; common practice, no source).
TYPICAL_START: dict[str, float] = {"esr": 0.01, "esl": 5e-9, "dcr": 0.05,
                                   "parallel_capacitance": 10e-12, "inductance": 10e-9,
                                   "resistance": 0.01}
#: A free value may grow to this many times its stated or typical size.
SPAN = 1e3
#: Where a parasitic the fixture leaves out starts, as a fraction of its typical size:
#: small enough that the start is the as-measured circuit to about 1e-5 of any response
#: (a thousandth was not: 5 pH of ESL moved a 30 mOhm ESR branch by 1 % at 10 MHz).
ABSENT_START = 1e-6
#: Where a frequency law's coefficient starts (the lumped circuit, to the same degree).
LAW_START = 1e-9
#: Largest value a free parasitic may take, by unit (far beyond any bench part).
UPPER: dict[str, float] = {"ohm": 1e6, "H": 10.0, "F": 1.0}


def _sweep_starts(sweep: FrequencySweep, part_kind: str) -> dict[str, float]:
    """Start values read off a sweep of one part alone (see the module docstring)."""
    f = np.asarray(sweep.frequency, float)
    z = np.asarray(sweep.value, complex)
    w = 2 * math.pi * f
    starts: dict[str, float] = {}
    if part_kind == "capacitor":
        if z[0].imag < 0:
            starts["value"] = -1.0 / (w[0] * z[0].imag)
        if z[-1].imag > 0:
            starts["esl"] = z[-1].imag / w[-1]
        # At the |Z| minimum the reactances cancel or are smallest: Re Z is the ESR there
        # (elsewhere the noise of a large reactance swamps the real part).
        starts["esr"] = float(z[int(np.argmin(np.abs(z)))].real)
    elif part_kind == "inductor":
        if z[0].imag > 0:
            starts["value"] = z[0].imag / w[0]
        starts["dcr"] = max(float(z[0].real), 1e-6)
        peak = int(np.argmax(np.abs(z)))
        if 0 < peak < f.size - 1 and "value" in starts:
            starts["parallel_capacitance"] = 1.0 / (w[peak] ** 2 * starts["value"])
    return {k: v for k, v in starts.items() if math.isfinite(v) and v > 0}


def _free_value(fixture: Fixture, key: ParameterKey, parameters: ParameterSet,
                start: float | None) -> FreeParameter:
    spec = fixture.field_spec(key)
    unit = spec.unit if spec is not None else "ohm"
    stated = parameters.get(key)
    typical = TYPICAL_START.get(key[1], 1.0)
    if start is not None:
        value, size = start, (start if key[1] == "value" else max(start, typical))
    elif stated:
        value, size = stated, stated
    else:
        # A parasitic the fixture does not state starts all but absent (the start is then
        # the as-measured circuit), free to grow to SPAN times a typical size.
        value, size = typical * ABSENT_START, typical
    # Bounded to SPAN times its size: the fit's variables are scaled by the size (not by
    # a bound decades away, which would leave a nanohenry ESL a rounding error).
    upper = min(UPPER.get(unit, math.inf), SPAN * float(size))
    return FreeParameter(key, float(value), 0.0, upper, unit, "the sweep resolves it")


def sweep_ladder(fixture: Fixture, setting: SweptSetting,
                 sweep: FrequencySweep) -> tuple[list[Candidate], dict[str, tuple[FrequencyLaw, ...]]]:
    """The candidates for a sweep and each candidate's frequency laws.

    Returns
    -------
    (candidates, laws)
        The candidates in ladder order; ``laws[name]`` the frequency laws of the
        candidate called ``name`` (empty for the lumped ones).
    """
    base = {c.name: c for c in default_ladder(fixture)}
    measured = base["as-measured"].parameters
    circuit, _ = swept_circuit(fixture, _with_parasitics(fixture, measured, setting), setting)
    parts_in = [p for p in fixture.parts if any(e.part == p for e in circuit.elements)]
    starts = (_sweep_starts(sweep, fixture.parts[setting.part].kind)
              if setting.part is not None else {})
    free: list[FreeParameter] = []
    for name in parts_in:
        kind = fixture.parts[name].kind
        for field_name in LUMPED_FIELDS.get(kind, ()):
            if field_name not in PART_KINDS[kind].fields:
                continue
            key = (name, field_name)
            free.append(_free_value(fixture, key, measured,
                                    starts.get(field_name) if setting.part == name else None))
    candidates = [base["label"], base["as-measured"]]
    laws: dict[str, tuple[FrequencyLaw, ...]] = {"label": (), "as-measured": ()}
    if not free:
        return candidates, laws
    lumped = Candidate("lumped", "the measured parts' values and parasitics fitted "
                       "(lumped, constant with frequency)", measured, tuple(free))
    candidates.append(lumped)
    laws["lumped"] = ()
    reference = float(math.sqrt(sweep.frequency[0] * sweep.frequency[-1]))
    for item in free:
        part, role = item.key
        kind = fixture.parts[part].kind
        if item.unit != "ohm" or kind not in ("capacitor", "inductor"):
            continue
        words = describe_key(fixture, item.key)
        for law, label, extra in (
            (skin_law(part, role), f"skin-{part}-{role}",
             (FreeParameter((part, "skin"), LAW_START, 0.0, 1.0, "ohm/sqrt(Hz)",
                            "a loss that grows as sqrt(f)"),)),
            (power_law(part, role, reference), f"power-{part}-{role}",
             (FreeParameter((part, "loss_coefficient"), LAW_START, 0.0, 1e3, "ohm",
                            "a loss that grows as a fitted power of f"),
              FreeParameter((part, "loss_exponent"), 0.5, 0.0, 3.0, "1",
                            "a loss that grows as a fitted power of f"))),
        ):
            description = (f"lumped, with {words} growing as sqrt(f) (skin effect)"
                           if law.kind == "skin" else
                           f"lumped, with {words} growing as a fitted power of f")
            candidates.append(Candidate(label, description, measured, lumped.free + extra))
            laws[label] = (law,)
        if kind == "capacitor" and role == "esr":
            label = f"loss-tangent-{part}"
            candidates.append(Candidate(
                label, f"lumped, with a constant dielectric loss tangent of {part}", measured,
                lumped.free + (FreeParameter((part, "loss_tangent"), LAW_START, 0.0, 1.0, "1",
                                             "a constant dissipation factor"),)))
            laws[label] = (loss_tangent_law(part),)
    return candidates, laws


def _with_parasitics(fixture: Fixture, parameters: ParameterSet,
                     setting: SweptSetting) -> ParameterSet:
    """``parameters`` with every lumped field present (a placeholder where none is
    set), so the measured circuit holds each element a candidate may free."""
    updates = {}
    for name, part in fixture.parts.items():
        for field_name in LUMPED_FIELDS.get(part.kind, ()):
            if field_name in PART_KINDS[part.kind].fields and not parameters.get((name, field_name)):
                updates[(name, field_name)] = TYPICAL_START.get(field_name, 1.0)
    return parameters.with_values(updates, "placeholder") if updates else parameters

