"""Reading a fixture file: TOML text -> :class:`~xcheck.fixture.Fixture`.

Every problem in a file is collected and reported together in one
:class:`~xcheck.errors.FixtureError`, each naming the key, the bad value, what was
expected (the example printed from the part kind's row in :mod:`xcheck.schema`) and how
to fix it. Fixtures are data, never code: no includes, no evaluation.

This module owns the entry points (:func:`load_fixture`, :func:`parse_fixture`,
:func:`parse_fixture_text`) and the document-level checks (top-level keys, title,
response, the loop, the probe, stored energy, the optional tables). The part-level
checks live in :mod:`xcheck.fixture_parts`, the title and part-name safety rules in
:mod:`xcheck.fixture_text` and the wording helpers in :mod:`xcheck.fixture_messages`;
their public names are importable from here as before.
"""

from __future__ import annotations

import copy
import re
import tomllib
from dataclasses import replace
from pathlib import Path
from types import MappingProxyType
from typing import Any, Mapping

from xcheck.errors import FixtureError
from xcheck.fixture import (
    Fixture,
    LoopReading,
    Part,
    ProbeLoading,
    Response,
    StepSource,
)
from xcheck.fixture_messages import (
    _MISSING,
    _is_table,
    _key,
    _listing,
    _show,
    _suggest,
)
from xcheck.fixture_parts import _METER_KEYS, PARALLEL_RESISTANCES, _PartReader
from xcheck.fixture_text import CONTROL_WORDS, PART_NAME_RE, TITLE_MAX, title_problem
from xcheck.schema import PART_KINDS, UNKNOWN_MARK

__all__ = [
    "CONTROL_WORDS",
    "PARALLEL_RESISTANCES",
    "PART_NAME_RE",
    "RESERVED_TABLES",
    "RESPONSES",
    "TITLE_MAX",
    "TOP_LEVEL_KEYS",
    "load_fixture",
    "parse_fixture",
    "parse_fixture_text",
]

#: Top-level keys of fixture format version 1, in documentation order.
TOP_LEVEL_KEYS: tuple[str, ...] = (
    "title", "response", "loop", "probe", "parts", "loop_reading", "probe_loading", "step",
)
#: Top-level tables reserved for later features; kept as plain data in ``Fixture.extras``.
RESERVED_TABLES: tuple[str, ...] = ("candidates",)
RESPONSES: tuple[str, ...] = ("natural", "step")

_EXAMPLE_LOOP = 'loop = ["SW1", "C1", "R1", "L1"]'
_PROBE_KEYS = ("resistance", "capacitance")
_STEP_KEYS = ("volts", "source_resistance")
_TOML_LINE_RE = re.compile(r"\(at line (\d+), column (\d+)\)")


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


class _Parser(_PartReader):
    """Walks one fixture document, collecting problems instead of stopping at the first."""

    def __init__(self, data: Mapping[str, Any], source: str) -> None:
        self.data = data
        self.source = source
        self.problems: list[str] = []
        #: Every name under [parts], valid or not (None when [parts] is unusable).
        self.defined: list[str] | None = None
        #: Keys that already have a problem (to avoid knock-on reports).
        self.failed: set[str] = set()

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
        reason = title_problem(value)
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
