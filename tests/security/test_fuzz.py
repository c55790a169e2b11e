"""Property tests: the value parser, the fixture loader and the trace readers raise
nothing but xcheck's own errors (XcheckError subclasses), whatever they are given.

Inputs are drawn by hypothesis (the "ci" profile of tests/conftest.py: derandomized,
bounded, no deadline): arbitrary text and bytes, and the invented corpus bases of
tests/security/ with one line, key or cell replaced by random data. The reference for
what a value may be is the IEEE 754 double (finite results only, from memory) and for
what a file may hold TOML 1.0 (what tomllib returns: str, int, float, bool, dates and
times, arrays, tables). pytest turns warnings into errors, so a numpy RuntimeWarning
(an overflow) fails a property too.
"""

from __future__ import annotations

import datetime
import gzip
import json
import math
import tomllib

import pytest

hypothesis = pytest.importorskip("hypothesis")
from hypothesis import example, given  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

from security.corpus_fixtures import LOOP_BASE, NODE_BASE  # noqa: E402
from security.corpus_traces import BASE_TRACE, PEAKS_BASE  # noqa: E402
from xcheck.capture.peak_table import read_peaks  # noqa: E402
from xcheck.capture.scope_csv import read_trace  # noqa: E402
from xcheck.circuit.expand import build_circuit  # noqa: E402
from xcheck.circuit.parameters import parameters_from_fixture  # noqa: E402
from xcheck.engines.deck import write_deck  # noqa: E402
from xcheck.errors import TraceError, XcheckError  # noqa: E402
from xcheck.fixture.reader import load_fixture, parse_fixture, parse_fixture_text  # noqa: E402
from xcheck.values import format_eng, parse_tolerance, parse_value  # noqa: E402

# --------------------------------------------------------------------------- values

#: Text shaped like a SPICE value: digits (up to hundreds), exponent, suffix and unit.
VALUE_TEXT = st.from_regex(
    r"\A[ +-]?[0-9]{0,400}(\.[0-9]{0,40})?([eE][+-]?[0-9]{0,400})?"
    r"(meg|MEG|mil|[tTgGkKmMuUµμnNpPfF])?(ohms?|Hz|hz|[fFhHvVaAsS]|Ω|ω)? ?%?\Z")
#: Anything a caller might pass where a value belongs.
ANY_VALUE = (VALUE_TEXT | st.text() | st.integers() | st.floats() | st.booleans()
             | st.none() | st.lists(st.integers(), max_size=3)
             | st.dictionaries(st.text(max_size=3), st.integers(), max_size=2))
UNITS = st.sampled_from([None, "F", "H", "ohm", "V", "A", "s", "Hz", "furlong"])


@given(value=ANY_VALUE, unit=UNITS)
@example(value="1e-" + "9" * 5000 + "k", unit=None)
@example(value=10**400, unit="F")
def test_parse_value_returns_a_finite_float_or_raises_its_own_error(value, unit):
    try:
        number = parse_value(value, unit=unit)
    except XcheckError as exc:
        assert len(str(exc)) < 600  # a short paragraph, however long the value
        return
    assert isinstance(number, float) and math.isfinite(number)


@given(value=ANY_VALUE)
def test_parse_tolerance_returns_a_fraction_or_raises_its_own_error(value):
    try:
        fraction = parse_tolerance(value)
    except XcheckError:
        return
    assert math.isfinite(fraction) and fraction >= 0


@given(value=st.floats(), unit=st.sampled_from(["", "F", "ohm", "V"]),
       digits=st.integers(1, 12))
def test_format_eng_formats_every_float(value, unit, digits):
    text = format_eng(value, unit, digits)
    assert isinstance(text, str) and "\n" not in text


# --------------------------------------------------------------------------- fixtures

#: Values as tomllib returns them.
TOML_SCALARS = (st.text(max_size=30) | VALUE_TEXT | st.integers() | st.floats()
                | st.booleans() | st.dates() | st.times()
                | st.datetimes(timezones=st.none() | st.just(datetime.timezone.utc)))
TOML_VALUES = st.recursive(
    TOML_SCALARS,
    lambda inner: st.lists(inner, max_size=3)
    | st.dictionaries(st.text(max_size=8), inner, max_size=3),
    max_leaves=8)
BASES = st.sampled_from([LOOP_BASE, NODE_BASE])


def paths(data: object, prefix: tuple = ()) -> list[tuple]:
    """Every key path of a parsed TOML document (tables walked, arrays not)."""
    found = [prefix] if prefix else []
    if isinstance(data, dict):
        for key, value in data.items():
            found += paths(value, prefix + (key,))
    return found


def accepted_reaches_a_deck(fixture) -> None:
    """An accepted fixture goes on to a circuit and a deck, or raises xcheck's error."""
    try:
        circuit = build_circuit(fixture, parameters_from_fixture(fixture))
        write_deck(circuit, source_name="fuzz.toml")
    except XcheckError:
        pass


@given(text=st.text(max_size=300))
def test_any_text_is_a_fixture_or_a_fixture_error(text):
    try:
        fixture = parse_fixture_text(text, "fuzz.toml")
    except XcheckError:
        return
    accepted_reaches_a_deck(fixture)


@given(base=BASES, data=st.data())
def test_a_fixture_with_one_value_replaced_is_read_or_refused(base, data):
    document = tomllib.loads(base)
    path = data.draw(st.sampled_from(paths(document)))
    value = data.draw(TOML_VALUES)
    table = document
    for key in path[:-1]:
        table = table[key]
    table[path[-1]] = value
    try:
        fixture = parse_fixture(document, "fuzz.toml")
    except XcheckError:
        return
    accepted_reaches_a_deck(fixture)


@given(base=BASES, data=st.data())
def test_a_fixture_with_one_line_replaced_is_read_or_refused(base, data):
    lines = base.splitlines()
    index = data.draw(st.integers(0, len(lines) - 1))
    key = lines[index].partition("=")[0].strip() or "x"
    replacement = data.draw(st.one_of(
        st.text(max_size=60),  # anything at all (mostly invalid TOML)
        st.builds(lambda v: f"{key} = {json.dumps(v)}", st.text(max_size=40) | VALUE_TEXT),
        st.builds(lambda v: f"{key} = {v!r}".replace("'", '"'),
                  st.integers() | st.lists(st.integers(), max_size=3)),
    ))
    lines[index] = replacement
    try:
        fixture = parse_fixture_text("\n".join(lines) + "\n", "fuzz.toml")
    except XcheckError:
        return
    accepted_reaches_a_deck(fixture)


@pytest.fixture(scope="module")
def scratch(tmp_path_factory):
    return tmp_path_factory.mktemp("fuzz")


@given(raw=st.binary(max_size=400) | st.builds(
    lambda cut, junk: LOOP_BASE.encode()[:cut] + junk,
    st.integers(0, len(LOOP_BASE)), st.binary(max_size=20)))
def test_any_bytes_are_a_fixture_or_a_fixture_error(scratch, raw):
    path = scratch / "fuzz.toml"
    path.write_bytes(raw)
    try:
        load_fixture(path)
    except XcheckError:
        pass


# --------------------------------------------------------------------------- traces

#: A cell of a scope export: numbers of every size, specials, and text.
CELLS = (st.floats().map(repr) | st.integers().map(str) | st.text(max_size=12)
         | st.sampled_from(["nan", "-inf", "", "1e308", "1e-320", "0x10", "1,5", "true"]))


def mutated(base: bytes, data: st.DataObject) -> bytes:
    """``base`` with one row replaced by random cells, or cut short, or with junk added."""
    lines = base.decode().splitlines()
    how = data.draw(st.sampled_from(["cell", "row", "cut", "junk"]))
    if how == "cut":
        return base[: data.draw(st.integers(0, len(base)))]
    if how == "junk":
        return base + data.draw(st.binary(max_size=200))
    index = data.draw(st.integers(0, len(lines) - 1))
    if how == "row":
        lines[index] = data.draw(st.text(max_size=60))
    else:
        cells = lines[index].split(",")
        cells[data.draw(st.integers(0, len(cells) - 1))] = data.draw(CELLS)
        lines[index] = ",".join(cells)
    return ("\n".join(lines) + "\n").encode("utf-8", errors="surrogatepass")


def random_table(data: st.DataObject, columns: int) -> bytes:
    """A header and rows of random cells."""
    rows = data.draw(st.lists(st.lists(CELLS, min_size=columns, max_size=columns),
                              max_size=40))
    header = data.draw(st.sampled_from(["time [s],CH1 [V]", "t,v,u", "time [ms];value [mV]",
                                        "", "Index,CH1"]))
    body = "\n".join(",".join(row) for row in rows)
    return (header + "\n" + body + "\n").encode("utf-8", errors="surrogatepass")


def read_or_refuse(reader, path) -> None:
    try:
        reader(path)
    except TraceError:
        pass


@given(data=st.data(), packed=st.booleans())
def test_a_mutated_trace_is_read_or_refused(scratch, data, packed):
    raw = mutated(BASE_TRACE, data)
    path = scratch / "fuzz.csv"
    path.write_bytes(gzip.compress(raw, mtime=0) if packed else raw)
    read_or_refuse(read_trace, path)


@given(data=st.data(), columns=st.integers(1, 4))
def test_a_random_table_is_a_trace_or_a_trace_error(scratch, data, columns):
    path = scratch / "random.csv"
    path.write_bytes(random_table(data, columns))
    read_or_refuse(read_trace, path)


@given(raw=st.binary(max_size=600))
def test_any_bytes_are_a_trace_or_a_trace_error(scratch, raw):
    path = scratch / "bytes.csv"
    path.write_bytes(raw)
    read_or_refuse(read_trace, path)
    read_or_refuse(read_peaks, path)


@given(data=st.data())
def test_a_mutated_peak_table_is_read_or_refused(scratch, data):
    path = scratch / "peaks.csv"
    path.write_bytes(mutated(PEAKS_BASE, data))
    read_or_refuse(read_peaks, path)


@given(data=st.data(), columns=st.integers(2, 3))
def test_a_random_peak_table_is_read_or_refused(scratch, data, columns):
    path = scratch / "random_peaks.csv"
    path.write_bytes(random_table(data, columns))
    read_or_refuse(read_peaks, path)
