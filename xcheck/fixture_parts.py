"""Reading one part of a fixture: a ``[parts.NAME]`` table -> :class:`~xcheck.fixture.Part`.

This module owns the part-level checks of the fixture reader: the part's name, its
kind and keys, its label value (or ``"?"``), its measured value (plain, or a two-wire
``{reading, leads}`` meter reading), tolerance, parasitics and initial value. They are
methods of :class:`_PartReader`, a mixin of the reader's parser
(:class:`xcheck.fixture_reader._Parser`), so that every problem lands in the one list
reported for the document; the parser also uses :meth:`_PartReader._number` and
:meth:`_PartReader.meter_pair` for its optional top-level tables.
"""

from __future__ import annotations

from types import MappingProxyType
from typing import Any, Mapping

from xcheck.errors import ValueParseError
from xcheck.fixture import MeterReading, Part
from xcheck.fixture_messages import (
    _MISSING,
    _a,
    _is_table,
    _key,
    _listing,
    _ProblemCollector,
    _suggest,
    _unit_name,
)
from xcheck.fixture_text import part_name_problem
from xcheck.schema import PART_KINDS, UNKNOWN_MARK, PartKind
from xcheck.values import parse_tolerance, parse_value

#: Parasitics that sit in parallel with their part. Zero would short the part out, so
#: they must be > 0 (leave the key out for an ideal part). Every other parasitic sits in
#: series (or is a stray capacitance across a part), where 0 simply means "ideal", so
#: those must be >= 0. A part's own R, L or C must be > 0: zero capacitance is an open
#: loop, zero inductance or resistance is a wire (use kind = "wire" for that).
PARALLEL_RESISTANCES: frozenset[str] = frozenset({"leakage"})

_METER_KEYS = ("reading", "leads")


class _PartReader(_ProblemCollector):
    """The part-level checks of the fixture reader (a mixin of its parser).

    Each method reports what is wrong through :meth:`problem` and returns None (or
    False) for a value it could not accept.
    """

    def part_name(self, name: str) -> bool:
        reason = part_name_problem(name)
        if reason is not None:
            self.problem(
                _key("parts", name), _MISSING, reason,
                "rename the part, e.g. [parts.C1] (part names reach the SPICE deck, so "
                "they may not hold anything SPICE could read as a command)",
            )
            return False
        return True

    def part(self, name: str, table: object) -> Part | None:
        base = _key("parts", name)
        if not _is_table(table):
            self.problem(
                base, table, "must be a table describing the part",
                "e.g. " + PART_KINDS["capacitor"].example,
            )
            return None
        kind_name = table.get("kind", _MISSING)
        kinds = _listing(PART_KINDS)
        if kind_name is _MISSING:
            self.problem(
                f"{base}.kind", _MISSING, "is missing",
                f"add kind = one of {kinds}, e.g. " + PART_KINDS["capacitor"].example,
            )
            return None
        if not isinstance(kind_name, str) or kind_name not in PART_KINDS:
            hint = _suggest(kind_name, PART_KINDS) if isinstance(kind_name, str) else ""
            self.problem(
                f"{base}.kind", kind_name, "is not a known kind of part",
                f"{hint}the kinds are {kinds}",
            )
            return None
        row = PART_KINDS[kind_name]
        allowed = row.allowed_keys()
        for key in table:
            if key == "initial" and row.initial_unit is None:
                self.problem(
                    _key("parts", name, key), table[key],
                    f"{_a(kind_name)} stores no energy, so it has no initial value",
                    "initial is only for a capacitor (volts) or an inductor (amperes); "
                    "remove it",
                )
            elif key not in allowed:
                owners = [k for k, r in PART_KINDS.items() if key in r.allowed_keys()]
                elsewhere = (
                    f" ({key} belongs to {_listing(owners, 'or')})" if owners else ""
                )
                self.problem(
                    _key("parts", name, key), table[key],
                    f"is not a key of {_a(kind_name)}{elsewhere}",
                    f"{_suggest(key, allowed)}{_a(kind_name)} takes {_listing(allowed)}, "
                    f"e.g. {row.example}",
                )
        unknown: set[str] = set()
        nominal = measured = tolerance = initial = None
        meter: MeterReading | None = None
        if row.unit is not None:
            nominal = self.value(
                name, row, "nominal", table.get("nominal", _MISSING), row.unit,
                positive=True, unknown=unknown, required=row.needs_nominal,
            )
            measured, meter = self.measured(name, row, table.get("measured", _MISSING))
            tolerance = self.tolerance(name, row, table.get("tolerance", _MISSING))
        parasitics: dict[str, float] = {}
        for key, unit in row.parasitics.items():
            found = self.value(
                name, row, key, table.get(key, _MISSING), unit,
                positive=key in PARALLEL_RESISTANCES, unknown=unknown,
            )
            if found is not None:
                parasitics[key] = found
        if "initial" in table and row.initial_unit is not None:
            initial = self.value(
                name, row, "initial", table["initial"], row.initial_unit,
                positive=None, unknown=None,
            )
        return Part(
            name=name,
            kind=kind_name,
            nominal=nominal,
            measured=measured,
            meter=meter,
            tolerance=tolerance,
            parasitics=MappingProxyType(parasitics),
            initial=initial,
            unknown=frozenset(unknown),
        )

    def value(
        self,
        name: str,
        row: PartKind,
        key: str,
        raw: object,
        unit: str,
        *,
        positive: bool | None,
        unknown: set[str] | None,
        required: bool = False,
    ) -> float | None:
        """One value of a part; ``positive`` True: > 0, False: >= 0, None: any sign.

        ``unknown`` collects keys written as "?"; None means "?" is not allowed here.
        """
        where = _key("parts", name, key)
        form = f"e.g. {row.example}"
        if raw is _MISSING:
            if required:
                self.problem(
                    where, _MISSING, f"is missing; {_a(row.kind)} needs its label value",
                    f'add {key} = "..." (or "{UNKNOWN_MARK}" if it is not known), {form}',
                )
            return None
        if isinstance(raw, str) and raw.strip() == UNKNOWN_MARK:
            if unknown is None:
                self.problem(
                    where, raw, f'may not be "{UNKNOWN_MARK}"',
                    "the initial voltage or current is what you set up before t = 0 and "
                    "the whole waveform scales with it, so it cannot be left to a fit; "
                    f"write the value you charged to, {form}",
                )
                return None
            unknown.add(key)
            return None
        return self._number(where, raw, unit, positive, form)

    def _number(
        self, where: str, raw: object, unit: str, positive: bool | None, form: str
    ) -> float | None:
        """Parse one value, check its sign, report a problem and return None if bad."""
        if isinstance(raw, (list, dict)):
            self.problem(
                where, raw, f"must be a single value in {_unit_name(unit)}",
                f"write it as a number or a quoted string such as \"4.7u\", {form}",
            )
            return None
        try:
            number = parse_value(raw, unit=unit)  # type: ignore[arg-type]
        except ValueParseError as exc:
            self.problem(where, raw, str(exc), f"give a value in {_unit_name(unit)}, {form}")
            return None
        if positive is True and number <= 0:
            self.problem(
                where, raw, f"must be greater than zero (got {number:g} {unit})",
                f"write the positive value, {form}",
            )
            return None
        if positive is False and number < 0:
            self.problem(
                where, raw, f"must be zero or positive (got {number:g} {unit})",
                f"write the magnitude (0 means an ideal part), {form}",
            )
            return None
        return number

    def measured(
        self, name: str, row: PartKind, raw: object
    ) -> tuple[float | None, MeterReading | None]:
        where = _key("parts", name, "measured")
        form = f"e.g. {row.example}"
        if raw is _MISSING:
            return None, None
        if isinstance(raw, str) and raw.strip() == UNKNOWN_MARK:
            self.problem(
                where, raw, f'may not be "{UNKNOWN_MARK}"',
                "measured is what a meter read; leave it out when there is no reading, "
                f'and write nominal = "{UNKNOWN_MARK}" for a value to be fitted',
            )
            return None, None
        if not _is_table(raw):
            return self._number(where, raw, row.unit or "", True, form), None
        if row.kind != "resistor":
            self.problem(
                where, raw,
                "a {reading, leads} meter reading applies only to resistors (a two-wire "
                "ohmmeter reading minus its shorted-lead zero)",
                f"give the {row.kind}'s measured value as a plain value, {form}",
            )
            return None, None
        pair = self.meter_pair(
            where, raw, 'e.g. measured = { reading = "0.291", leads = "0.058" }'
        )
        if pair is None:
            return None, None
        meter = MeterReading(*pair)
        return meter.value, meter

    def meter_pair(
        self, where: str, raw: Mapping[str, Any], form: str, *, check_keys: bool = True
    ) -> tuple[float, float] | None:
        """``{reading, leads}`` in ohms: reading > 0, 0 <= leads < reading."""
        for key in raw if check_keys else ():
            if key not in _METER_KEYS:
                self.problem(
                    f"{where}.{_key(key)}", raw[key], "is not a key of a meter reading",
                    f"a meter reading takes {_listing(_METER_KEYS)}, {form}",
                )
        if "reading" not in raw:
            self.problem(
                f"{where}.reading", _MISSING, "is missing",
                f"give the ohmmeter reading and the shorted-lead zero, {form}",
            )
            return None
        reading: float | None = None
        if not self._no_unknown(f"{where}.reading", raw["reading"], "an ohmmeter reading"):
            reading = self._number(f"{where}.reading", raw["reading"], "ohm", True, form)
        leads: float | None = 0.0
        if "leads" in raw:
            leads = None
            if not self._no_unknown(f"{where}.leads", raw["leads"], "the shorted-lead zero"):
                leads = self._number(f"{where}.leads", raw["leads"], "ohm", False, form)
        if reading is None or leads is None:
            return None
        if leads >= reading:
            self.problem(
                f"{where}.leads", raw["leads"],
                f"is not smaller than the reading ({raw['reading']!s}): the part's "
                "resistance would be zero or negative",
                "leads is the reading with the probe tips shorted together; check both "
                "values",
            )
            return None
        return reading, leads

    def _no_unknown(self, where: str, raw: object, what: str) -> bool:
        if isinstance(raw, str) and raw.strip() == UNKNOWN_MARK:
            self.problem(
                where, raw, f'may not be "{UNKNOWN_MARK}"',
                f"{what} is a measurement; leave the whole table out if it was not taken",
            )
            return True
        return False

    def tolerance(self, name: str, row: PartKind, raw: object) -> float | None:
        where = _key("parts", name, "tolerance")
        fix = 'write a percentage such as tolerance = "20%"'
        form = 'e.g. tolerance = "20%"'
        if raw is _MISSING:
            return None
        if isinstance(raw, str) and raw.strip() == UNKNOWN_MARK:
            self.problem(
                where, raw, f'may not be "{UNKNOWN_MARK}"',
                "a tolerance is the spread printed on the part; leave it out when not "
                f"known ({fix})",
            )
            return None
        if not isinstance(raw, str):
            self.problem(where, raw, "is not a percentage", fix)
            return None
        try:
            fraction = parse_tolerance(raw)
        except ValueParseError as exc:
            self.problem(where, raw, str(exc), form)
            return None
        if fraction >= 1:
            self.problem(
                where, raw,
                "must be below 100 % (at 100 % or more the part could have no value at all)",
                fix,
            )
            return None
        return fraction
