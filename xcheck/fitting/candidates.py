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

A fixture may add candidates of its own and drop defaults in a ``[candidates]`` table
(read and checked with the rest of the fixture by
:mod:`xcheck.fixture.candidates_table`; here its records become candidates)::

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

from xcheck.errors import FixtureError
from xcheck.fixture.candidates_table import DEFAULT_NAMES, CandidateSpec
from xcheck.fixture.model import Fixture
from xcheck.circuit.parameters import (
    LOOP_EXTRA_RESISTANCE,
    ORIGIN_MEASURED,
    ParameterSet,
    parameters_from_fixture,
)
from xcheck.fixture.schema import PART_KINDS, ParameterKey, key_label

EXTRA_RESISTANCE: ParameterKey = LOOP_EXTRA_RESISTANCE

#: Uncertainty assumed for a two-wire low-ohm reading when the fixture gives none:
#: 1 % of the reading plus 10 mOhm (contact repeatability). Common practice, no source.
METER_RELATIVE_UNCERTAINTY = 0.01
METER_ABSOLUTE_UNCERTAINTY_OHM = 0.010


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
        return key_label(self.key)


@dataclass(frozen=True)
class Candidate:
    """One hypothesis: a parameter set and the values a fit may move."""

    name: str
    description: str
    parameters: ParameterSet
    free: tuple[FreeParameter, ...] = ()
    problems: tuple[str, ...] = field(default=())
    #: Pairs of free values (indices into ``free``) whose product the fit's start scan
    #: holds at the given value while it scans the first: an added inductance and
    #: capacitance that must ring together at a frequency the residuals show.
    scan_pairs: tuple[tuple[int, int, float], ...] = ()

    @property
    def usable(self) -> bool:
        """False when the candidate cannot even be built (see ``problems``)."""
        return not self.problems


def unit_of(fixture: Fixture, key: ParameterKey) -> str:
    """Canonical unit of a parameter key (``"ohm"``, ``"H"``, ``"F"``, ``"V"``), from its
    schema field.

    Raises
    ------
    KeyError
        When the key names no field of the fixture's parts or of a pseudo-part.
    """
    spec = fixture.field_spec(key)
    if spec is None:
        raise KeyError(f"{key_label(key)} names no value of this fixture")
    return spec.unit


def describe_key(fixture: Fixture, key: ParameterKey) -> str:
    """Plain words for a parameter key: ``("L1", "value")`` -> ``"L1 inductance"``.

    A part's key reads as its name and its field's words; a pseudo-part's as its
    field's words alone (``"extra series loss"``).
    """
    part, name = key
    spec = fixture.field_spec(key)
    if spec is None:
        return f"{part} {name.replace('_', ' ')}"
    return spec.word if part not in fixture.parts else f"{part} {spec.word}"


def dc_series_keys(fixture: Fixture) -> tuple[ParameterKey, ...]:
    """Keys of every series resistance a DC ohmmeter sees round the loop without the
    capacitor (each kind's ``dc_resistance`` fields: resistor values, winding, switch
    and wire resistances), in loop order."""
    return tuple(
        (name, field_name)
        for name in fixture.loop
        for field_name in PART_KINDS[fixture.parts[name].kind].dc_resistance
    )


def ac_series_keys(fixture: Fixture) -> tuple[ParameterKey, ...]:
    """Keys of the series resistances a DC ohmmeter does not see, which only add loss
    while the loop rings (each kind's ``ac_resistance`` fields: capacitor ESR), in loop
    order."""
    return tuple(
        (name, field_name)
        for name in fixture.loop
        for field_name in PART_KINDS[fixture.parts[name].kind].ac_resistance
    )


def series_resistance_keys(fixture: Fixture) -> tuple[ParameterKey, ...]:
    """Every key that adds to the loop's series resistance: the DC ones, then the AC-only
    ones (ESR), then the extra loss."""
    return (*dc_series_keys(fixture), *ac_series_keys(fixture), EXTRA_RESISTANCE)


def series_resistance(fixture: Fixture, parameters: ParameterSet) -> float:
    """Total series loop resistance (ohms) a parameter set implies."""
    return float(sum(parameters.get(k, 0.0) or 0.0 for k in series_resistance_keys(fixture)))


def measured_bounds(fixture: Fixture, key: ParameterKey) -> tuple[float, float, float] | None:
    """Start and bounds (measured value +/- 3 standard uncertainties) for a part value
    that a meter measured, or None when it was not measured.

    See :func:`measured_uncertainty`.
    """
    sigma = measured_uncertainty(fixture, key)
    if sigma is None:
        return None
    value = fixture.parts[key[0]].measured
    return value, max(value - 3 * sigma, 0.0), value + 3 * sigma


def measured_uncertainty(fixture: Fixture, key: ParameterKey) -> float | None:
    """Standard uncertainty of a part value a meter measured (SI units), or None.

    Resistances use :func:`meter_uncertainty` of the reading; measured L and C use 1 %
    of the value (a typical handheld LCR meter; common practice, no source).
    """
    part = fixture.parts.get(key[0])
    if part is None or key[1] != "value" or part.measured is None:
        return None
    value = part.measured
    if PART_KINDS[part.kind].two_wire:
        return meter_uncertainty(part.meter.reading if part.meter else value)
    return 0.01 * abs(value)


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
        notes.append(f"{key_label(unknown[0])} set from the DC loop reading")
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
    # Bounded at zero by construction: a resistance cannot be negative. When the stated
    # losses already exceed the measured damping, the fit stops at zero and the verdict
    # says so (a value at its bound), rather than a negative resistance winning.
    lower = 0.0
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
        other = _other_reactance(fixture, parameters, PART_KINDS[part.kind].unit)
        if other:
            start = 1.0 / (hint.omega0**2 * other)
            return start, start / 10.0, start * 10.0
    # Nothing stated: a typical parasitic size, free from zero to the largest parasitic
    # a bench fixture plausibly hides (common practice, no source): 100 ohm, 10 uH, 1 uF.
    typical = {"ohm": 0.1, "H": 1e-8, "F": 1e-12}.get(unit, 1.0)
    largest = {"ohm": 100.0, "H": 1e-5, "F": 1e-6}.get(unit, typical * 1e3)
    return typical, 0.0, largest


#: The reactance that rings against each: a capacitance against an inductance.
_RINGS_WITH = {"H": "F", "F": "H"}


def _other_reactance(
    fixture: Fixture, parameters: ParameterSet, unit: str | None
) -> float | None:
    """Series total of the other reactive values in the loop: the capacitances for an
    inductance (``unit`` ``"H"``), the inductances for a capacitance (``"F"``); None
    when there is none or ``unit`` is not reactive."""
    other = _RINGS_WITH.get(unit or "")
    values = [parameters.get((n, "value")) for n in fixture.loop
              if other is not None and PART_KINDS[fixture.parts[n].kind].unit == other]
    values = [v for v in values if v]
    if not values:
        return None
    if other == "F":  # capacitances in series add as reciprocals
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
        unit = PART_KINDS[part.kind].unit
        if unit not in _RINGS_WITH or part.measured is not None:
            continue
        value = parameters.get((name, "value"))
        if not value:
            continue  # written "?": already free
        lower, upper = value / 3.0, value * 3.0
        other = _other_reactance(fixture, parameters, unit)
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

    The fixture reader has already checked the ``[candidates]`` table
    (:mod:`xcheck.fixture.candidates_table`); what is left is what depends on the
    ladder itself.

    Raises
    ------
    FixtureError
        When ``drop`` or a ``base`` names a default rung this fixture's ladder leaves
        out (``all-unknowns`` when nothing is unknown and both reactive values are
        measured); all such problems are reported together.
    """
    ladder = default_ladder(fixture, hint)
    table = fixture.candidates
    by_name = {c.name: c for c in ladder}
    problems = [
        f"candidates.drop names {d!r}; the defaults are {', '.join(DEFAULT_NAMES)}"
        for d in table.drop
        if d not in by_name
    ]
    problems += [
        f"candidates.{spec.name}.base is {spec.base!r}; use one of {', '.join(DEFAULT_NAMES)}"
        for spec in table.specs
        if spec.base not in by_name
    ]
    if problems:
        raise FixtureError(str(fixture.source or "fixture"), problems)
    custom = [_custom_candidate(fixture, spec, by_name) for spec in table.specs]
    return [c for c in ladder if c.name not in table.drop] + custom


def _custom_candidate(
    fixture: Fixture, spec: CandidateSpec, by_name: dict[str, Candidate]
) -> Candidate:
    """The candidate a fixture's ``[candidates.NAME]`` record describes."""
    parameters = by_name[spec.base].parameters
    if spec.settings:
        parameters = parameters.with_values(spec.settings, "set by candidate")
    free = []
    for key in spec.free:
        unit = unit_of(fixture, key)
        if key == EXTRA_RESISTANCE:
            free.append(_extra_loss_parameter(fixture, parameters))
            continue
        start, lower, upper = _guess(fixture, key, unit, parameters)
        reason = f"free in {spec.name}"
        held = measured_bounds(fixture, key)
        if held is not None and key not in spec.release:
            start, lower, upper = held
            reason += "; held within its measurement uncertainty (list it in release to free it)"
        free.append(FreeParameter(key, start, lower, upper, unit, reason=reason))
    description = spec.description
    if description is None:
        description = f"fixture's own candidate based on {spec.base}"
    return _checked(fixture, spec.name, description, parameters, tuple(free))
