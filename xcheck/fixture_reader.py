"""Reading a fixture file: TOML text -> :class:`~xcheck.fixture.Fixture`.

Every problem in a file is collected and reported together in one
:class:`~xcheck.errors.FixtureError`, each naming the key, the bad value, what was
expected (the example printed from the part kind's row in :mod:`xcheck.schema`) and how
to fix it. Fixtures are data, never code: no includes, no evaluation.
"""

from __future__ import annotations

import copy
import difflib
import json
import re
import tomllib
from dataclasses import replace
from pathlib import Path
from types import MappingProxyType
from typing import Any, Mapping

from xcheck.errors import FixtureError, ValueParseError
from xcheck.fixture import (
    Fixture,
    LoopReading,
    MeterReading,
    Part,
    ProbeLoading,
    Response,
    StepSource,
)
from xcheck.schema import PART_KINDS, UNKNOWN_MARK, PartKind
from xcheck.values import parse_tolerance, parse_value

#: Top-level keys of fixture format version 1, in documentation order.
TOP_LEVEL_KEYS: tuple[str, ...] = (
    "title", "response", "loop", "probe", "parts", "loop_reading", "probe_loading", "step",
)
#: Top-level tables reserved for later features; kept as plain data in ``Fixture.extras``.
RESERVED_TABLES: tuple[str, ...] = ("candidates",)
RESPONSES: tuple[str, ...] = ("natural", "step")

#: A part name: a letter, then letters, digits or underscores, 32 characters at most.
PART_NAME_RE = re.compile(r"[A-Za-z][A-Za-z0-9_]{0,31}")
#: Longest title accepted (it becomes the deck's first line and a report heading).
TITLE_MAX = 200
#: Words of ngspice's control language that could run commands or open a control block
#: if they ever reached the start of a deck line; refused in titles and part names as
#: whole words, any case. (The deck writer sanitises again; this is the first fence.)
CONTROL_WORDS: frozenset[str] = frozenset(
    {"control", "endc", "shell", "system", "unixcom", "exec"}
)
_DOT_WORD_RE = re.compile(r"(?:^|\s)\.[A-Za-z]")
_WORD_RE = re.compile(r"[A-Za-z_]+")

#: Parasitics that sit in parallel with their part. Zero would short the part out, so
#: they must be > 0 (leave the key out for an ideal part). Every other parasitic sits in
#: series (or is a stray capacitance across a part), where 0 simply means "ideal", so
#: those must be >= 0. A part's own R, L or C must be > 0: zero capacitance is an open
#: loop, zero inductance or resistance is a wire (use kind = "wire" for that).
PARALLEL_RESISTANCES: frozenset[str] = frozenset({"leakage"})

_EXAMPLE_LOOP = 'loop = ["SW1", "C1", "R1", "L1"]'
_METER_KEYS = ("reading", "leads")
_PROBE_KEYS = ("resistance", "capacitance")
_STEP_KEYS = ("volts", "source_resistance")
_TOML_LINE_RE = re.compile(r"\(at line (\d+), column (\d+)\)")


class _Missing:
    """Marker for a key that is absent (distinct from any TOML value)."""


_MISSING = _Missing()


def load_fixture(path: str | Path) -> Fixture:
    """Read and validate a fixture file (TOML, format version 1).

    Parameters
    ----------
    path
        The fixture file.

    Returns
    -------
    Fixture
        The validated fixture, SI units throughout, with ``source`` set to ``path``.

    Raises
    ------
    FixtureError
        When the file cannot be read, is not valid TOML (the problem names the line
        and column), or breaks any rule of the format; every problem found is listed.
    """
    path = Path(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise FixtureError(
            str(path), [f"cannot read the file ({exc.strerror or exc}); check the path"]
        ) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise FixtureError(
            str(path),
            [f"the file is not UTF-8 text (line {line} holds byte 0x{raw[exc.start]:02x}); "
             "save it as UTF-8"],
        ) from None
    fixture = parse_fixture_text(text, str(path))
    return replace(fixture, source=path)


def parse_fixture_text(text: str, source: str) -> Fixture:
    """Validate fixture TOML given as text.

    Parameters
    ----------
    text
        The TOML document.
    source
        Name of the input used in messages (a file name, or e.g. ``"<demo>"``).

    Returns
    -------
    Fixture
        The validated fixture (``source`` is None; :func:`load_fixture` sets it).

    Raises
    ------
    FixtureError
        As :func:`parse_fixture`, and for TOML syntax errors (line and column named).
    """
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise FixtureError(source, [_toml_problem(exc, text)]) from None
    return parse_fixture(data, source)


def _toml_problem(exc: tomllib.TOMLDecodeError, text: str) -> str:
    """One problem describing a TOML syntax error, with the line it is on."""
    reason = _TOML_LINE_RE.sub("", str(exc)).strip()
    found = _TOML_LINE_RE.search(str(exc))
    where = "TOML syntax error"
    if found:
        line_no, column = int(found.group(1)), int(found.group(2))
        lines = text.split("\n")  # TOML counts lines by LF only
        where = f"TOML syntax error at line {line_no}, column {column}"
        if 1 <= line_no <= len(lines):
            where += f" (the line reads {_show(lines[line_no - 1].strip())})"
    return (
        f"{where}: {reason}; this is not valid TOML. Values with SI suffixes must be "
        'quoted strings (nominal = "47u", not nominal = 47u), each key is written '
        "once per table, and tables are opened as [parts.C1]"
    )


def parse_fixture(data: Mapping[str, Any], source: str) -> Fixture:
    """Validate a fixture already read from TOML into plain data.

    Parameters
    ----------
    data
        The TOML document as returned by :func:`tomllib.load`.
    source
        Name of the input used in messages (usually the file name).

    Returns
    -------
    Fixture
        The validated fixture, SI units throughout (``source`` is None).

    Raises
    ------
    FixtureError
        Listing every problem found, each naming the key, the bad value, what was
        expected and how to fix it.
    """
    return _Parser(data, source).run()


class _Parser:
    """Walks one fixture document, collecting problems instead of stopping at the first."""

    def __init__(self, data: Mapping[str, Any], source: str) -> None:
        self.data = data
        self.source = source
        self.problems: list[str] = []
        #: Every name under [parts], valid or not (None when [parts] is unusable).
        self.defined: list[str] | None = None
        #: Keys that already have a problem (to avoid knock-on reports).
        self.failed: set[str] = set()

    # -- reporting -----------------------------------------------------------------

    def problem(self, key: str, value: object, message: str, fix: str) -> None:
        self.failed.add(key)
        if value is _MISSING:  # "probe is missing; ..."
            self.problems.append(f"{key} {message}; {fix}")
        else:  # 'probe = "C9": is not a part ...; ...'
            self.problems.append(f"{key} = {_show(value)}: {message}; {fix}")

    # -- whole document ------------------------------------------------------------

    def run(self) -> Fixture:
        data = self.data
        if not isinstance(data, Mapping):
            raise FixtureError(self.source, ["the document is not a TOML table"])
        extras: dict[str, object] = {}
        for key, value in data.items():
            if key in TOP_LEVEL_KEYS:
                continue
            if key in RESERVED_TABLES:
                if _is_table(value) or (
                    isinstance(value, list) and all(_is_table(v) for v in value)
                ):
                    extras[key] = copy.deepcopy(dict(value) if _is_table(value) else value)
                else:
                    self.problem(
                        _key(key), value, "must be a table or an array of tables",
                        f"write it as [{key}] or [[{key}]], or remove it",
                    )
                continue
            self.problem(
                _key(key), value, "is not a key of the fixture format",
                f"{_suggest(key, TOP_LEVEL_KEYS)}the known top-level keys are "
                f"{_listing(TOP_LEVEL_KEYS)} (plus the table {_listing(RESERVED_TABLES)} "
                "kept for later use); remove or rename it",
            )
        title = self.title(data.get("title", _MISSING))
        response = self.response(data.get("response", _MISSING))
        parts = self.parts(data.get("parts", _MISSING))
        loop = self.loop(data.get("loop", _MISSING), parts)
        probe = self.probe(data.get("probe", _MISSING), parts, loop)
        loop_reading = self.loop_reading(data.get("loop_reading", _MISSING))
        probe_loading = self.probe_loading(data.get("probe_loading", _MISSING))
        step = self.step(data.get("step", _MISSING), response)
        self.energy(parts, loop, response)
        if self.problems:
            raise FixtureError(self.source, self.problems)
        assert title is not None and response is not None and parts is not None
        assert loop is not None and probe is not None
        return Fixture(
            title=title,
            response=response,
            loop=loop,
            probe=probe,
            parts=MappingProxyType(parts),
            loop_reading=loop_reading,
            probe_loading=probe_loading,
            step=step,
            extras=MappingProxyType(extras),
        )

    # -- top-level scalars ---------------------------------------------------------

    def title(self, value: object) -> str | None:
        fix = 'write one line of plain text, e.g. title = "Film capacitor ring-down, jig B"'
        if value is _MISSING:
            self.problem("title", _MISSING, "is missing", fix)
            return None
        if not isinstance(value, str):
            self.problem("title", value, "must be a string", fix)
            return None
        reason = _unsafe_text(value)
        if reason is None and not value.strip():
            reason = "is empty"
        if reason is None and len(value) > TITLE_MAX:
            reason = f"is longer than {TITLE_MAX} characters"
        if reason is not None:
            self.problem(
                "title", value, reason,
                fix + " (the title becomes the first line of the SPICE deck, so it may not "
                "hold anything SPICE could read as a command)",
            )
            return None
        return value.strip()

    def response(self, value: object) -> Response | None:
        fix = (
            'write response = "natural" (stored energy released when the switch closes '
            'at t = 0) or response = "step" (a source switched in at t = 0)'
        )
        if value is _MISSING:
            self.problem("response", _MISSING, "is missing", fix)
            return None
        if value not in RESPONSES:
            self.problem("response", value, f"must be {_listing(RESPONSES, 'or')}", fix)
            return None
        return value  # type: ignore[return-value]

    # -- parts ---------------------------------------------------------------------

    def parts(self, value: object) -> dict[str, Part] | None:
        if value is _MISSING:
            self.problem(
                "parts", _MISSING, "is missing",
                "describe each part of the loop in its own table, e.g. "
                + PART_KINDS["capacitor"].example,
            )
            return None
        if not _is_table(value) or not value:
            self.problem(
                "parts", value, "must be a table of parts, one [parts.NAME] table each",
                "e.g. " + PART_KINDS["capacitor"].example,
            )
            return None
        parts: dict[str, Part] = {}
        folded: dict[str, str] = {}
        self.defined = list(value)
        for name, table in value.items():
            name_ok = self.part_name(name)
            if name_ok:
                other = folded.setdefault(name.lower(), name)
                if other != name:
                    self.problem(
                        _key("parts", name), _MISSING,
                        f"differs from the part {other} only in upper/lower case",
                        "SPICE ignores case, so the two would collide; rename one",
                    )
            part = self.part(name, table)
            if part is not None and name_ok:
                parts[name] = part
        return parts

    def part_name(self, name: str) -> bool:
        reason = None
        if not PART_NAME_RE.fullmatch(name):
            reason = (
                "is not a valid part name: it must start with a letter and hold only "
                "letters, digits and underscores, 32 characters at most"
            )
        elif name.lower() in CONTROL_WORDS:
            reason = (
                "is a word of ngspice's control language and may not be used as a "
                "part name"
            )
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

    # -- loop and probe ------------------------------------------------------------

    def loop(self, value: object, parts: dict[str, Part] | None) -> tuple[str, ...] | None:
        fix = f"list the parts in order around the series loop, e.g. {_EXAMPLE_LOOP}"
        if value is _MISSING:
            self.problem("loop", _MISSING, "is missing", fix)
            return None
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            self.problem("loop", value, "must be a list of part names (strings)", fix)
            return None
        if not value:
            self.problem("loop", value, "is empty", fix)
            return None
        if len(value) < 2:
            self.problem(
                "loop", value, "has fewer than 2 parts, so it cannot close a loop", fix
            )
        ok = True
        defined = self.defined
        if defined is not None:
            for index, name in enumerate(value):
                if name not in defined:
                    ok = False
                    self.problem(
                        f"loop[{index}]", name, "is not a part defined under [parts]",
                        f"{_suggest(name, defined)}the defined parts are "
                        f"{_listing(defined) or 'none'}; add a [parts.NAME] table for it or "
                        "correct the name",
                    )
        seen: dict[str, int] = {}
        for index, name in enumerate(value):
            if name in seen:
                ok = False
                self.problem(
                    f"loop[{index}]", name,
                    f"repeats loop[{seen[name]}]: a series loop passes each part once",
                    "list each part once; for two like parts define two names (C1, C2)",
                )
            else:
                seen[name] = index
        if defined is not None:
            for name in defined:
                if name not in seen:
                    ok = False
                    self.problem(
                        _key("parts", name), _MISSING,
                        "is defined but not in the loop; every part must be in the loop",
                        f"add {_show(name)} to loop at its place in the circuit, or "
                        f"delete [{_key('parts', name)}]",
                    )
        if not ok or len(value) < 2:
            return None
        return tuple(value)

    def probe(
        self, value: object, parts: dict[str, Part] | None, loop: tuple[str, ...] | None
    ) -> str | None:
        fix = 'name the part the scope is across, e.g. probe = "C1"'
        if value is _MISSING:
            self.problem("probe", _MISSING, "is missing", fix)
            return None
        if not isinstance(value, str):
            self.problem("probe", value, "must be a part name (a string)", fix)
            return None
        defined = self.defined
        if defined is not None and value not in defined:
            self.problem(
                "probe", value, "is not a part defined under [parts]",
                f"{_suggest(value, defined)}the defined parts are "
                f"{_listing(defined) or 'none'}",
            )
            return None
        if parts is None or loop is None:
            return None
        return value

    def energy(
        self, parts: dict[str, Part] | None, loop: tuple[str, ...] | None,
        response: Response | None,
    ) -> None:
        """The loop must hold an energy store; a natural response needs stored energy."""
        if parts is None or loop is None or any(n not in parts for n in loop):
            return
        stores = [n for n in loop if PART_KINDS[parts[n].kind].initial_unit is not None]
        if not stores:
            self.problem(
                "loop", list(loop),
                "holds no capacitor or inductor, so nothing in it can ring or settle",
                "add the capacitor or inductor the waveform comes from",
            )
            return
        if any(_key("parts", n, "initial") in self.failed for n in stores):
            return
        if response == "natural" and not any(parts[n].initial for n in stores):
            self.problem(
                "response", response,
                "needs energy stored at t = 0, but no capacitor or inductor has a "
                "non-zero initial value",
                f'give the charged capacitor its voltage, e.g. {PART_KINDS["capacitor"].example}'
                ', or use response = "step" with a [step] table',
            )

    # -- optional tables -----------------------------------------------------------

    def _table(
        self, name: str, value: object, keys: tuple[str, ...], form: str
    ) -> Mapping[str, Any] | None:
        """Common checks of an optional top-level table; None when absent or unusable."""
        if value is _MISSING:
            return None
        if not _is_table(value):
            self.problem(name, value, "must be a table", f"write it as [{name}], {form}")
            return None
        for key in value:
            if key not in keys:
                self.problem(
                    _key(name, key), value[key], f"is not a key of [{name}]",
                    f"{_suggest(key, keys)}[{name}] takes {_listing(keys)}, {form}",
                )
        return value

    def _table_value(
        self, name: str, table: Mapping[str, Any], key: str, unit: str,
        positive: bool | None, why_known: str, form: str,
    ) -> float | None:
        raw = table[key]
        where = _key(name, key)
        if isinstance(raw, str) and raw.strip() == UNKNOWN_MARK:
            self.problem(where, raw, f'may not be "{UNKNOWN_MARK}"', why_known)
            return None
        return self._number(where, raw, unit, positive, form)

    def loop_reading(self, value: object) -> LoopReading | None:
        form = '[loop_reading] reading = "0.512", leads = "0.058"'
        table = self._table("loop_reading", value, _METER_KEYS, "e.g. " + form)
        if table is None:
            return None
        # _table has already reported unknown keys of [loop_reading]
        pair = self.meter_pair("loop_reading", table, "e.g. " + form, check_keys=False)
        return None if pair is None else LoopReading(*pair)

    def probe_loading(self, value: object) -> ProbeLoading | None:
        form = 'e.g. [probe_loading] resistance = "10meg", capacitance = "11p"'
        table = self._table("probe_loading", value, _PROBE_KEYS, form)
        if table is None:
            return None
        if not any(k in table for k in _PROBE_KEYS):
            self.problem(
                "probe_loading", dict(table), "is empty",
                f"give resistance and/or capacitance, or remove the table; {form}",
            )
            return None
        why = (
            "the probe's input resistance and capacitance are printed on the probe and "
            "the scope; a fit cannot find them because the probe capacitance adds to the "
            "probed part's own and cannot be told apart from it; leave the key out if "
            "the probe's loading is negligible"
        )
        values: dict[str, float | None] = {}
        for key, unit, positive in (("resistance", "ohm", True), ("capacitance", "F", False)):
            if key in table:
                values[key] = self._table_value(
                    "probe_loading", table, key, unit, positive, why, form
                )
                if values[key] is None:
                    return None
        return ProbeLoading(**values)

    def step(self, value: object, response: Response | None) -> StepSource | None:
        form = 'e.g. [step] volts = "12", source_resistance = "0.1"'
        if value is _MISSING:
            if response == "step":
                self.problem(
                    "step", _MISSING, 'is missing, but response = "step" needs it',
                    f"describe the source switched in at t = 0, {form}",
                )
            return None
        if response == "natural":
            self.problem(
                "step", value, 'is given, but response = "natural" has no source',
                'remove [step], or set response = "step" if a source is switched in',
            )
        table = self._table("step", value, _STEP_KEYS, form)
        if table is None:
            return None
        why_volts = (
            "the step height is the excitation you applied and the whole waveform "
            "scales with it, so it cannot be left to a fit; write the value you set"
        )
        why_resistance = (
            "a source resistance is in series with the loop and cannot be told apart "
            "from the other series resistances by a fit; write the supply's output "
            f'resistance, or mark one part\'s resistance "{UNKNOWN_MARK}" instead'
        )
        if "volts" not in table:
            self.problem("step.volts", _MISSING, "is missing", f"give the step height, {form}")
            return None
        volts = self._table_value("step", table, "volts", "V", None, why_volts, form)
        if volts is not None and volts == 0:
            self.problem(
                "step.volts", table["volts"], "is zero, so nothing would happen",
                f"give the step height, {form}",
            )
            volts = None
        resistance: float | None = 0.0
        if "source_resistance" in table:
            resistance = self._table_value(
                "step", table, "source_resistance", "ohm", False, why_resistance, form
            )
        if volts is None or resistance is None or response != "step":
            return None
        return StepSource(volts=volts, source_resistance=resistance)


def _unsafe_text(text: str) -> str | None:
    """Why ``text`` could smuggle a line into a SPICE deck, or None when it is safe."""
    bad = [c for c in text if not c.isprintable()]
    if bad:
        return (
            f"holds a line break or control character ({_show(bad[0])}); it must be one "
            "line of printable text"
        )
    stripped = text.lstrip()
    if stripped[:1] in (".", "*", "+"):
        return (
            f"starts with {stripped[0]!r}, which SPICE reads as a dot-command, comment "
            "or continuation line"
        )
    if _DOT_WORD_RE.search(text):
        return "holds a word starting with '.', which looks like a SPICE dot-command"
    words = sorted({w.lower() for w in _WORD_RE.findall(text)} & CONTROL_WORDS)
    if words:
        return (
            f"holds {_listing(words)}, a word of ngspice's control language, which can "
            "run commands"
        )
    return None


def _is_table(value: object) -> bool:
    return isinstance(value, Mapping)


def _key(*segments: str) -> str:
    """A dotted TOML key, quoting segments that are not bare keys."""
    return ".".join(s if _BARE_KEY_RE.fullmatch(s) else _quote(s) for s in segments)


_BARE_KEY_RE = re.compile(r"[A-Za-z0-9_-]+")


def _quote(text: str) -> str:
    """Text in double quotes with control and other non-printable characters escaped."""
    escaped = json.dumps(text, ensure_ascii=False)
    return "".join(c if c.isprintable() else f"\\u{ord(c):04x}" for c in escaped)


def _show(value: object, limit: int = 60) -> str:
    """A bad value as the user would write it in TOML, shortened when long."""
    if isinstance(value, str):
        shown = _quote(value)
    elif isinstance(value, bool):
        shown = "true" if value else "false"
    elif isinstance(value, (int, float)):
        shown = repr(value)
    elif isinstance(value, Mapping):
        items = (f"{_key(str(k))} = {_show(v, 20)}" for k, v in value.items())
        shown = "{ " + ", ".join(items) + " }"
    elif isinstance(value, list):
        shown = "[" + ", ".join(_show(v, 20) for v in value) + "]"
    else:
        shown = _quote(str(value))
    return shown if len(shown) <= limit else shown[: limit - 3] + "..."


def _listing(items: object, word: str = "and") -> str:
    names = [str(i) for i in items]  # type: ignore[attr-defined]
    if len(names) <= 1:
        return "".join(names)
    return ", ".join(names[:-1]) + f" {word} " + names[-1]


def _suggest(word: str, choices: object) -> str:
    """``"did you mean X? "`` for a close or case-only match, else an empty string."""
    options = [str(c) for c in choices]  # type: ignore[attr-defined]
    same_case = [c for c in options if c.lower() == word.lower()]
    close = same_case or difflib.get_close_matches(word, options, n=1, cutoff=0.7)
    return f"did you mean {close[0]}? " if close else ""


def _a(noun: str) -> str:
    """The noun with its indefinite article ("an inductor", "a switch")."""
    return ("an " if noun[:1].lower() in "aeiou" else "a ") + noun


def _unit_name(unit: str) -> str:
    return {
        "F": "farads", "H": "henries", "ohm": "ohms", "V": "volts", "A": "amperes",
        "s": "seconds", "Hz": "hertz",
    }.get(unit, unit)
