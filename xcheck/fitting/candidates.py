"""The model ladder: hypotheses about the physics, built from a fixture.

A :class:`Candidate` is one hypothesis: a :class:`~xcheck.circuit.parameters.ParameterSet` on
the fixture's circuit plus the values a fit may move (:class:`FreeParameter`). The
default ladder climbs from what is printed on the parts to what the measurement needs:

1. ``label``: label values only, no parasitics;
2. ``as-measured``: meter readings (lead zero subtracted) where given, stated
   parasitics, and the DC loop reading (it pins unknown DC resistances, or adds the
   contact and lead resistance nobody itemised);
3. ``extra-loss``: ``as-measured`` plus one fitted lumped series resistance, the damping
   nobody measured;
4. ``all-unknowns``: ``extra-loss`` plus every value written ``"?"`` and the reactive
   value without a measurement (L or C) fitted.

A fixture may add candidates of its own and drop defaults in a ``[candidates]`` table::

    [candidates]
    drop = ["label"]
    [candidates.esr-only]
    base = "as-measured"          # which default to start from
    free = ["C1.esr"]            # values the fit may move
    description = "All unexplained loss is capacitor ESR"
    [candidates.esr-only.set]    # optional fixed values
    "L1.dcr" = "0.12"

A measured value listed in ``free`` is held within three standard uncertainties of its
reading unless the candidate also lists it in ``release``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

from xcheck.errors import FixtureError, ValueParseError
from xcheck.fixture.model import Fixture
from xcheck.circuit.parameters import (
    LOOP_EXTRA_RESISTANCE,
    ORIGIN_MEASURED,
    ParameterKey,
    ParameterSet,
    parameters_from_fixture,
)
from xcheck.fixture.schema import PART_KINDS
from xcheck.values import parse_value

EXTRA_RESISTANCE: ParameterKey = LOOP_EXTRA_RESISTANCE

#: Uncertainty assumed for a two-wire low-ohm reading when the fixture gives none:
#: 1 % of the reading plus 10 mOhm (contact repeatability). Common practice, no source.
METER_RELATIVE_UNCERTAINTY = 0.01
METER_ABSOLUTE_UNCERTAINTY_OHM = 0.010

DEFAULT_NAMES = ("label", "as-measured", "extra-loss", "all-unknowns")


@dataclass(frozen=True)
class FreeParameter:
    """A value a fit may move, with its start and bounds (SI units)."""

    key: ParameterKey
    start: float
    lower: float
    upper: float
    unit: str
    reason: str = ""

    @property
    def label(self) -> str:
        """``"C1.esr"``-style name used in reports."""
        return f"{self.key[0]}.{self.key[1]}"


@dataclass(frozen=True)
class Candidate:
    """One hypothesis: a parameter set and the values a fit may move."""

    name: str
    description: str
    parameters: ParameterSet
    free: tuple[FreeParameter, ...] = ()
    problems: tuple[str, ...] = field(default=())

    @property
    def usable(self) -> bool:
        """False when the candidate cannot even be built (see ``problems``)."""
        return not self.problems


def unit_of(fixture: Fixture, key: ParameterKey) -> str:
    """Canonical unit of a parameter key (``"ohm"``, ``"H"``, ``"F"``, ``"V"``)."""
    part, name = key
    if part == "loop":
        return "H" if name.endswith("inductance") else "ohm"
    if part == "probe":
        return "F" if name == "capacitance" else "ohm"
    if part == "step":
        return "V" if name == "volts" else "ohm"
    row = PART_KINDS[fixture.parts[part].kind]
    if name == "value":
        return row.unit or "ohm"
    return row.parasitics[name]


_FIELD_WORDS = {
    "esr": "ESR",
    "esl": "ESL",
    "leakage": "leakage resistance",
    "dcr": "winding resistance (DCR)",
    "parallel_capacitance": "winding capacitance",
    "inductance": "series inductance",
    "resistance": "resistance",
}
_VALUE_WORDS = {"capacitor": "capacitance", "inductor": "inductance", "resistor": "resistance"}


def describe_key(fixture: Fixture, key: ParameterKey) -> str:
    """Plain words for a parameter key: ``("L1", "value")`` -> ``"L1 inductance"``."""
    part, name = key
    if part == "loop":
        return "extra series loss" if name == "extra_resistance" else "extra series inductance"
    if part in ("probe", "step"):
        return f"{part} {name.replace('_', ' ')}"
    kind = fixture.parts[part].kind if part in fixture.parts else ""
    if name == "value":
        return f"{part} {_VALUE_WORDS.get(kind, 'value')}"
    return f"{part} {_FIELD_WORDS.get(name, name.replace('_', ' '))}"


def dc_series_keys(fixture: Fixture) -> tuple[ParameterKey, ...]:
    """Keys of every series resistance a DC ohmmeter sees round the loop without the
    capacitor: resistor values, winding, switch and wire resistances."""
    keys: list[ParameterKey] = []
    for name in fixture.loop:
        part = fixture.parts[name]
        if part.kind == "resistor":
            keys.append((name, "value"))
        elif part.kind == "inductor":
            keys.append((name, "dcr"))
        elif part.kind in ("switch", "wire"):
            keys.append((name, "resistance"))
    return tuple(keys)


def series_resistance_keys(fixture: Fixture) -> tuple[ParameterKey, ...]:
    """Every key that adds to the loop's series resistance (DC ones, ESR, extra loss)."""
    keys = list(dc_series_keys(fixture))
    keys += [(n, "esr") for n in fixture.loop if fixture.parts[n].kind == "capacitor"]
    keys.append(EXTRA_RESISTANCE)
    return tuple(keys)


def series_resistance(fixture: Fixture, parameters: ParameterSet) -> float:
    """Total series loop resistance (ohms) a parameter set implies."""
    return float(sum(parameters.get(k, 0.0) or 0.0 for k in series_resistance_keys(fixture)))


def measured_bounds(fixture: Fixture, key: ParameterKey) -> tuple[float, float, float] | None:
    """Start and bounds (measured value +/- 3 standard uncertainties) for a part value
    that a meter measured, or None when it was not measured.

    Resistances use :func:`meter_uncertainty` of the reading; measured L and C use 1 %
    of the value (a typical handheld LCR meter; common practice, no source).
    """
    part = fixture.parts.get(key[0])
    if part is None or key[1] != "value" or part.measured is None:
        return None
    value = part.measured
    if part.kind == "resistor":
        sigma = meter_uncertainty(part.meter.reading if part.meter else value)
    else:
        sigma = 0.01 * abs(value)
    return value, max(value - 3 * sigma, 0.0), value + 3 * sigma


def meter_uncertainty(reading: float) -> float:
    """Assumed standard uncertainty (ohms) of a two-wire low-ohm reading."""
    return METER_RELATIVE_UNCERTAINTY * abs(reading) + METER_ABSOLUTE_UNCERTAINTY_OHM


def _unknown_keys(fixture: Fixture) -> list[ParameterKey]:
    keys: list[ParameterKey] = []
    for name in fixture.loop:
        for field_name in sorted(fixture.parts[name].unknown):
            keys.append((name, "value" if field_name == "nominal" else field_name))
    return keys


def _apply_loop_reading(
    fixture: Fixture, parameters: ParameterSet
) -> tuple[ParameterSet, list[str]]:
    """Use the DC loop reading: pin one unknown DC resistance, or add the remainder."""
    notes: list[str] = []
    if fixture.loop_reading is None:
        return parameters, notes
    total = fixture.loop_reading.value
    dc_keys = dc_series_keys(fixture)
    known = sum(parameters.get(k, 0.0) or 0.0 for k in dc_keys if k in parameters.values)
    unknown = [k for k in dc_keys if k in _unknown_keys(fixture)]
    remainder = total - known
    sigma = meter_uncertainty(fixture.loop_reading.reading)
    if len(unknown) == 1 and remainder > 0:
        parameters = parameters.with_values({unknown[0]: remainder}, ORIGIN_MEASURED + " (DC loop reading)")
        notes.append(f"{unknown[0][0]}.{unknown[0][1]} set from the DC loop reading")
    elif remainder > sigma:
        parameters = parameters.with_values(
            {EXTRA_RESISTANCE: remainder}, "DC loop reading minus itemised resistances"
        )
        notes.append("contact and lead resistance taken from the DC loop reading")
    elif remainder < -2 * sigma:
        notes.append(
            "the itemised DC resistances add up to more than the loop reading "
            f"({known:.4g} ohm vs {total:.4g} ohm): a reading or a label value is off"
        )
    return parameters, notes


@dataclass(frozen=True)
class RingHint:
    """What the measurement says before any fit: undamped angular frequency (rad/s).

    It gives start values for an inductance or capacitance written ``"?"``, from
    omega0^2 = 1 / (L C).
    """

    omega0: float


def default_ladder(fixture: Fixture, hint: RingHint | None = None) -> list[Candidate]:
    """The four default candidates for ``fixture`` (see the module docstring).

    Parameters
    ----------
    fixture
        The fixture description.
    hint
        The measured ring, for start values of unknown L or C.
    """
    label_set = parameters_from_fixture(fixture, use_measured=False, include_parasitics=False)
    measured_set = parameters_from_fixture(fixture, use_measured=True, include_parasitics=True)
    measured_set, loop_notes = _apply_loop_reading(fixture, measured_set)
    candidates = [
        _checked(fixture, "label", "label values only, no parasitics", label_set, ()),
        _checked(
            fixture,
            "as-measured",
            "meter readings where given, stated parasitics"
            + (", DC loop reading" if fixture.loop_reading else ""),
            measured_set,
            (),
        ),
    ]
    extra = _extra_loss_parameter(fixture, measured_set)
    candidates.append(
        _checked(
            fixture,
            "extra-loss",
            "as measured plus one fitted lumped series loss",
            measured_set,
            (extra,),
        )
    )
    free = ([extra] + _unknown_free(fixture, measured_set, hint)
            + _reactive_free(fixture, measured_set, hint))
    if len(_dedupe(free)) == 1:
        # Nothing is unknown and both reactive values are measured: this rung would
        # repeat "extra-loss" exactly, so the ladder stops there.
        return candidates
    candidates.append(
        _checked(
            fixture,
            "all-unknowns",
            "extra loss, every '?' value and the unmeasured reactive value fitted",
            measured_set,
            tuple(_dedupe(free)),
        )
    )
    return candidates


def _dedupe(free: list[FreeParameter]) -> list[FreeParameter]:
    seen: set[ParameterKey] = set()
    out = []
    for item in free:
        if item.key not in seen:
            seen.add(item.key)
            out.append(item)
    return out


def _extra_loss_parameter(fixture: Fixture, parameters: ParameterSet) -> FreeParameter:
    present = series_resistance(fixture, parameters)
    start = parameters.get(EXTRA_RESISTANCE, 0.0) or 0.0
    # The stated losses may be overestimated: allow the extra loss to go negative, but
    # never so far that the total series resistance becomes negative.
    lower = start - 0.999 * present if present > 0 else 0.0
    return FreeParameter(
        EXTRA_RESISTANCE,
        start=start,
        lower=lower,
        upper=max(10.0 * present, 10.0),
        unit="ohm",
        reason="damping nobody measured",
    )


def _unknown_free(fixture: Fixture, parameters: ParameterSet,
                  hint: RingHint | None = None) -> list[FreeParameter]:
    free = []
    dc_keys = set(dc_series_keys(fixture))
    for key in _unknown_keys(fixture):
        unit = unit_of(fixture, key)
        start, lower, upper = _guess(fixture, key, unit, parameters, hint)
        if key in dc_keys and fixture.loop_reading is not None:
            bound = fixture.loop_reading.value + 2 * meter_uncertainty(fixture.loop_reading.reading)
            upper = max(min(upper, bound), lower * 2 or 1e-6)
        free.append(FreeParameter(key, start, lower, upper, unit, reason="written '?'"))
    return free


def _guess(
    fixture: Fixture,
    key: ParameterKey,
    unit: str,
    parameters: ParameterSet,
    hint: RingHint | None = None,
) -> tuple[float, float, float]:
    """Start and bounds for an unknown value: positive, spanning four decades."""
    current = parameters.get(key)
    if current and current > 0:
        return current, current / 100.0, current * 100.0
    part = fixture.parts.get(key[0])
    if key[1] == "value" and part is not None and part.nominal:
        return part.nominal, part.nominal / 10.0, part.nominal * 10.0
    if key[1] == "value" and part is not None and hint is not None and hint.omega0 > 0:
        other = _other_reactance(fixture, parameters, part.kind)
        if other:
            start = 1.0 / (hint.omega0**2 * other)
            return start, start / 10.0, start * 10.0
    typical = {"ohm": 0.1, "H": 1e-8, "F": 1e-12}.get(unit, 1.0)
    return typical, 0.0, typical * 1e3


def _other_reactance(fixture: Fixture, parameters: ParameterSet, kind: str) -> float | None:
    """Series total of the other reactive kind (C for an inductor, L for a capacitor)."""
    other_kind = "capacitor" if kind == "inductor" else "inductor" if kind == "capacitor" else None
    values = [parameters.get((n, "value")) for n in fixture.loop
              if fixture.parts[n].kind == other_kind]
    values = [v for v in values if v]
    if not values:
        return None
    if other_kind == "capacitor":
        return 1.0 / sum(1.0 / v for v in values)
    return float(sum(values))


def _reactive_free(fixture: Fixture, parameters: ParameterSet,
                   hint: RingHint | None = None) -> list[FreeParameter]:
    """The L or C without a measurement: the ring frequency may contradict its label.

    Bounds span a factor of three either side of the label and, when the measured ring
    implies a value outside that, twice that value too (a wrong label must not pin the
    fit against a bound).
    """
    free = []
    for name in fixture.loop:
        part = fixture.parts[name]
        if part.kind not in ("capacitor", "inductor") or part.measured is not None:
            continue
        value = parameters.get((name, "value"))
        if not value:
            continue  # written "?": already free
        lower, upper = value / 3.0, value * 3.0
        other = _other_reactance(fixture, parameters, part.kind)
        if hint is not None and hint.omega0 > 0 and other:
            implied = 1.0 / (hint.omega0**2 * other)
            lower, upper = min(lower, implied / 2.0), max(upper, implied * 2.0)
        free.append(
            FreeParameter(
                (name, "value"),
                start=value,
                lower=lower,
                upper=upper,
                unit=unit_of(fixture, (name, "value")),
                reason="no measurement; the ring frequency tests its label value",
            )
        )
    return free


def _checked(
    fixture: Fixture,
    name: str,
    description: str,
    parameters: ParameterSet,
    free: tuple[FreeParameter, ...],
) -> Candidate:
    free_keys = {f.key for f in free}
    problems = []
    for key in _required_value_keys(fixture):
        if key not in parameters.values and key not in free_keys:
            problems.append(f"{key[0]} has no value (written '?') and this candidate does not fit it")
    start = parameters.with_values({f.key: f.start for f in free}, "fit start") if free else parameters
    return Candidate(name, description, start, free, tuple(problems))


def _required_value_keys(fixture: Fixture) -> list[ParameterKey]:
    return [
        (n, "value") for n in fixture.loop if PART_KINDS[fixture.parts[n].kind].needs_nominal
    ]


def build_candidates(fixture: Fixture, hint: RingHint | None = None) -> list[Candidate]:
    """Default ladder plus the fixture's own ``[candidates]``, minus dropped defaults.

    Raises
    ------
    FixtureError
        When the ``[candidates]`` table is malformed (all problems reported together).
    """
    ladder = default_ladder(fixture, hint)
    spec = fixture.extras.get("candidates")
    if spec is None:
        return ladder
    source = str(fixture.source or "fixture")
    problems: list[str] = []
    if not isinstance(spec, Mapping):
        raise FixtureError(source, ["candidates must be a table, e.g. [candidates.my-model]"])
    by_name = {c.name: c for c in ladder}
    drop = spec.get("drop", [])
    if not isinstance(drop, list) or not all(isinstance(d, str) for d in drop):
        problems.append("candidates.drop must be a list of candidate names")
        drop = []
    for d in drop:
        if d not in by_name:
            problems.append(f"candidates.drop names {d!r}; the defaults are {', '.join(DEFAULT_NAMES)}")
    custom: list[Candidate] = []
    for name, body in spec.items():
        if name == "drop":
            continue
        made = _custom_candidate(fixture, name, body, by_name, problems)
        if made is not None:
            custom.append(made)
    if problems:
        raise FixtureError(source, problems)
    return [c for c in ladder if c.name not in drop] + custom


def _parse_key(fixture: Fixture, text: object, where: str, problems: list[str]) -> ParameterKey | None:
    if not isinstance(text, str) or "." not in text:
        problems.append(f"{where}: {text!r} should be 'PART.FIELD', e.g. 'C1.esr' or 'loop.extra_resistance'")
        return None
    part, field_name = text.split(".", 1)
    if part == "loop" and field_name in ("extra_resistance", "extra_inductance"):
        return (part, field_name)
    if part not in fixture.parts:
        problems.append(f"{where}: no part {part!r} in this fixture (parts: {', '.join(fixture.loop)})")
        return None
    row = PART_KINDS[fixture.parts[part].kind]
    allowed = (["value"] if row.unit else []) + list(row.parasitics)
    if field_name not in allowed:
        problems.append(f"{where}: a {row.kind} has no {field_name!r}; use one of {', '.join(allowed)}")
        return None
    return (part, field_name)


def _custom_candidate(
    fixture: Fixture,
    name: str,
    body: object,
    by_name: dict[str, Candidate],
    problems: list[str],
) -> Candidate | None:
    where = f"candidates.{name}"
    if not isinstance(body, Mapping):
        problems.append(f"{where} must be a table with base, free, description and optional set")
        return None
    unknown_keys = set(body) - {"base", "free", "description", "set", "release"}
    if unknown_keys:
        problems.append(f"{where}: unknown keys {sorted(unknown_keys)}; allowed: base, free, "
                        "description, set, release")
    base_name = body.get("base", "as-measured")
    if base_name not in by_name:
        problems.append(f"{where}.base is {base_name!r}; use one of {', '.join(DEFAULT_NAMES)}")
        return None
    base = by_name[base_name]
    parameters = base.parameters
    settings = body.get("set", {})
    if not isinstance(settings, Mapping):
        problems.append(f"{where}.set must be a table of 'PART.FIELD' = value")
        settings = {}
    updates = {}
    for text, raw in settings.items():
        key = _parse_key(fixture, text, f"{where}.set", problems)
        if key is None:
            continue
        try:
            updates[key] = parse_value(raw, unit=unit_of(fixture, key))
        except ValueParseError as exc:
            problems.append(f"{where}.set.{text}: {exc}")
    parameters = parameters.with_values(updates, "set by candidate") if updates else parameters
    free_list = body.get("free", [])
    if not isinstance(free_list, list):
        problems.append(f"{where}.free must be a list such as [\"C1.esr\"]")
        free_list = []
    release = body.get("release", [])
    if not isinstance(release, list) or not all(isinstance(r, str) for r in release):
        problems.append(f"{where}.release must be a list such as [\"R1.value\"]")
        release = []
    free = []
    for text in free_list:
        key = _parse_key(fixture, text, f"{where}.free", problems)
        if key is None:
            continue
        unit = unit_of(fixture, key)
        if key == EXTRA_RESISTANCE:
            free.append(_extra_loss_parameter(fixture, parameters))
            continue
        start, lower, upper = _guess(fixture, key, unit, parameters)
        reason = f"free in {name}"
        held = measured_bounds(fixture, key)
        if held is not None and text not in release:
            start, lower, upper = held
            reason += "; held within its measurement uncertainty (list it in release to free it)"
        free.append(FreeParameter(key, start, lower, upper, unit, reason=reason))
    description = str(body.get("description", f"fixture's own candidate based on {base_name}"))
    return _checked(fixture, name, description, parameters, tuple(free))
