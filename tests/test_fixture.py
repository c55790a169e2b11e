"""The fixture parser (xcheck.fixture): format version 1.

The reference for every check here is the fixture format itself, as documented in the
module docstring of xcheck.fixture and in xcheck.schema (kinds, keys and units), and
the SPICE scale factors (ngspice manual, "Basic conventions", from memory). Values are
compared with rel 1e-12: each is a decimal string read into a double, with at most a
subtraction (reading minus leads) on top, so a few ulps (2.2e-16 each) at most.
"""

from __future__ import annotations

import copy
import datetime
import re
import tomllib
from collections.abc import Callable
from pathlib import Path

import pytest

from xcheck.errors import FixtureError
from xcheck.fixture import (
    GROUND,
    Fixture,
    LoopReading,
    MeterReading,
    ProbeLoading,
    StepSource,
    load_fixture,
    parse_fixture,
    parse_fixture_text,
)
from xcheck.schema import PART_KINDS

REL = 1e-12  # see the module docstring
EXAMPLES = Path(__file__).resolve().parent.parent / "examples"


def approx(value: float) -> object:
    return pytest.approx(value, rel=REL)


def mutate(text: str, *edits: tuple[str, str]) -> str:
    """Apply text replacements, each of which must change the text exactly once."""
    for old, new in edits:
        assert text.count(old) == 1, f"{old!r} must occur once in the base fixture"
        text = text.replace(old, new)
    return text


# --------------------------------------------------------------------------------------
# A good fixture
# --------------------------------------------------------------------------------------


def test_example_round_trip(example_fixture_toml: str, write_toml: Callable[..., Path]) -> None:
    path = write_toml(example_fixture_toml, "jig_b.toml")
    fixture = load_fixture(path)
    assert isinstance(fixture, Fixture)
    assert fixture.title == "Film capacitor ring-down, jig B (invented example)"
    assert fixture.response == "natural"
    assert fixture.loop == ("SW1", "C1", "R1", "L1")
    assert fixture.probe == "C1"
    assert fixture.source == path
    assert fixture.name == "jig_b"
    assert fixture.step is None
    assert dict(fixture.extras) == {}

    c1 = fixture.parts["C1"]
    assert c1.kind == "capacitor"
    assert c1.nominal == approx(47e-6)
    assert c1.measured == approx(49.1e-6)
    assert c1.meter is None
    assert c1.tolerance == approx(0.20)
    assert dict(c1.parasitics) == {"esr": approx(40e-3)}
    assert c1.initial == approx(12.0)
    assert c1.unknown == frozenset()

    r1 = fixture.parts["R1"]
    assert r1.nominal == approx(0.22)
    # two-wire ohmmeter: reading minus the shorted-lead zero, 0.291 - 0.058 = 0.233
    assert r1.meter == MeterReading(reading=approx(0.291), leads=approx(0.058))
    assert r1.measured == approx(0.233)

    l1 = fixture.parts["L1"]
    assert l1.nominal == approx(470e-6)
    assert l1.unknown == frozenset({"dcr"})
    assert "dcr" not in l1.parasitics

    sw1 = fixture.parts["SW1"]
    assert sw1.nominal is None
    assert dict(sw1.parasitics) == {"resistance": approx(5e-3)}

    assert fixture.loop_reading == LoopReading(reading=approx(0.512), leads=approx(0.058))
    assert fixture.loop_reading.value == approx(0.454)
    assert fixture.probe_loading == ProbeLoading(resistance=approx(10e6), capacitance=approx(11e-12))


def test_step_response_round_trip(example_fixture_toml: str) -> None:
    text = mutate(
        example_fixture_toml, ('response = "natural"', 'response = "step"')
    ) + '[step]\nvolts = "12"\nsource_resistance = "0.1"\n'
    fixture = parse_fixture_text(text, "step.toml")
    assert fixture.response == "step"
    assert fixture.step == StepSource(volts=approx(12.0), source_resistance=approx(0.1))
    assert fixture.source is None


def test_parse_fixture_takes_plain_data() -> None:
    data = {
        "title": "Two-part loop (invented example)",
        "response": "natural",
        "loop": ["C1", "L1"],
        "probe": "C1",
        "parts": {
            "C1": {"kind": "capacitor", "nominal": 1e-6, "initial": 5},  # TOML numbers
            "L1": {"kind": "inductor", "nominal": "?", "initial": "-0.5"},
        },
    }
    fixture = parse_fixture(data, "<data>")
    assert fixture.parts["C1"].nominal == approx(1e-6)
    assert fixture.parts["C1"].initial == approx(5.0)
    assert fixture.parts["L1"].nominal is None
    assert fixture.parts["L1"].unknown == frozenset({"nominal"})
    assert fixture.parts["L1"].initial == approx(-0.5)


def test_zero_series_parasitic_is_allowed(example_fixture_toml: str) -> None:
    # A series parasitic of 0 means an ideal part (documented in xcheck.fixture).
    fixture = parse_fixture_text(mutate(example_fixture_toml, ('esr = "40m"', 'esr = "0"')), "x")
    assert fixture.parts["C1"].parasitics["esr"] == pytest.approx(0.0, abs=0)


def test_reserved_candidates_table_is_kept_as_data(example_fixture_toml: str) -> None:
    text = example_fixture_toml + '\n[candidates.ideal]\nparasitics = []\nnote = "x"\n'
    fixture = parse_fixture_text(text, "x")
    assert dict(fixture.extras) == {"candidates": {"ideal": {"parasitics": [], "note": "x"}}}


def test_connections_and_polarity(example_fixture_toml: str) -> None:
    # Documented wiring: part k joins n{k} to n{k+1}, the loop closes on ground "0",
    # and the probe reads the probed part's first terminal minus its second.
    fixture = parse_fixture_text(example_fixture_toml, "x")
    assert fixture.connections() == (
        ("SW1", GROUND, "n1"),
        ("C1", "n1", "n2"),
        ("R1", "n2", "n3"),
        ("L1", "n3", GROUND),
    )
    probed = dict((name, (a, b)) for name, a, b in fixture.connections())[fixture.probe]
    assert probed == ("n1", "n2")  # v(n1) - v(n2), the same sense as C1's initial 12 V
    assert fixture.probed_part is fixture.parts["C1"]


def test_two_part_loop_connections() -> None:
    fixture = parse_fixture(
        {
            "title": "t", "response": "natural", "loop": ["L1", "C1"], "probe": "C1",
            "parts": {
                "C1": {"kind": "capacitor", "nominal": "1u", "initial": "1"},
                "L1": {"kind": "inductor", "nominal": "1m"},
            },
        },
        "x",
    )
    assert fixture.connections() == (("L1", GROUND, "n1"), ("C1", "n1", GROUND))


@pytest.mark.parametrize("name", ["film_ringdown.toml", "lc_filter_step.toml"])
def test_examples_load_and_are_labelled_invented(name: str) -> None:
    fixture = load_fixture(EXAMPLES / name)
    assert "(invented example)" in fixture.title


def test_film_ringdown_example_content() -> None:
    fixture = load_fixture(EXAMPLES / "film_ringdown.toml")
    assert fixture.response == "natural"
    assert fixture.parts["C1"].initial == approx(12.0)
    assert fixture.parts["L1"].unknown == frozenset({"dcr"})
    assert fixture.loop_reading is not None and fixture.probe_loading is not None


def test_lc_filter_step_example_content() -> None:
    fixture = load_fixture(EXAMPLES / "lc_filter_step.toml")
    assert fixture.response == "step"
    assert fixture.step is not None and fixture.step.volts == approx(24.0)
    kinds = {fixture.parts[name].kind for name in fixture.loop}
    assert kinds == {"switch", "wire", "inductor", "capacitor"}


# --------------------------------------------------------------------------------------
# Bad fixtures: each problem named with its key, value, expectation and fix
# --------------------------------------------------------------------------------------

CAPACITOR_EXAMPLE = re.escape(PART_KINDS["capacitor"].example)

BAD_FIXTURES: list[tuple[str, tuple[tuple[str, str], ...], str]] = [
    # (id, text edits applied to the good example, regex the message must match)
    ("malformed-toml", (('nominal = "47u"', "nominal = 47u"),),
     r'TOML syntax error at line 8, column \d+ \(the line reads "nominal = 47u"\).*'
     r'must be quoted strings'),
    ("missing-title", (('title = "Film capacitor ring-down, jig B (invented example)"\n', ""),),
     r"\(1\) title is missing; write one line of plain text"),
    ("missing-response", (('response = "natural"\n', ""),),
     r"response is missing; write response = \"natural\""),
    ("missing-loop", (('loop = ["SW1", "C1", "R1", "L1"]\n', ""),),
     r"loop is missing; list the parts in order around the series loop"),
    ("missing-probe", (('probe = "C1"\n', ""),), r"probe is missing; name the part"),
    ("bad-response", (('response = "natural"', 'response = "ringdown"'),),
     r'response = "ringdown": must be natural or step'),
    ("loop-not-a-list", (('loop = ["SW1", "C1", "R1", "L1"]', 'loop = "SW1 C1 R1 L1"'),),
     r'loop = "SW1 C1 R1 L1": must be a list of part names \(strings\)'),
    ("loop-not-strings", (('loop = ["SW1", "C1", "R1", "L1"]', 'loop = ["SW1", 1, "R1", "L1"]'),),
     r"must be a list of part names \(strings\)"),
    ("loop-empty", (('loop = ["SW1", "C1", "R1", "L1"]', "loop = []"),), r"loop = \[\]: is empty"),
    ("loop-one-part", (('loop = ["SW1", "C1", "R1", "L1"]', 'loop = ["C1"]'),),
     r'loop = \["C1"\]: has fewer than 2 parts'),
    ("unknown-part-in-loop", (('"R1", "L1"]', '"R9", "L1"]'),),
     r'loop\[2\] = "R9": is not a part defined under \[parts\]; the defined parts are '
     r"C1, R1, L1 and SW1"),
    ("part-twice-in-loop", (('"R1", "L1"]', '"R1", "L1", "C1"]'),),
     r'loop\[4\] = "C1": repeats loop\[1\]: a series loop passes each part once'),
    ("part-not-in-loop", (('"R1", "L1"]', '"L1"]'),),
     r"parts\.R1 is defined but not in the loop; every part must be in the loop"),
    ("probe-missing-part", (('probe = "C1"', 'probe = "C2"'),),
     r'probe = "C2": is not a part defined under \[parts\]; the defined parts are C1, R1, L1 '
     r"and SW1"),
    ("probe-wrong-case", (('probe = "C1"', 'probe = "c1"'),),
     r'probe = "c1": is not a part defined under \[parts\]; did you mean C1\?'),
    ("unknown-kind", (('kind = "inductor"', 'kind = "choke"'),),
     r'parts\.L1\.kind = "choke": is not a known kind of part; the kinds are capacitor, '
     r"inductor, resistor, switch and wire"),
    ("esr-on-inductor", (('dcr = "?"', 'esr = "0.1"'),),
     r'parts\.L1\.esr = "0\.1": is not a key of an inductor \(esr belongs to capacitor\); '
     r"an inductor takes kind, nominal, measured, tolerance, dcr, parallel_capacitance and "
     r"initial"),
    ("missing-nominal", (('nominal = "0.22"\n', ""),),
     r"parts\.R1\.nominal is missing; a resistor needs its label value; add nominal = "
     r'"\.\.\." \(or "\?" if it is not known\)'),
    ("non-numeric", (('nominal = "47u"', 'nominal = "forty-seven"'),),
     r'parts\.C1\.nominal = "forty-seven": cannot read \'forty-seven\' as a value.*'
     r"give a value in farads, e\.g\. " + CAPACITOR_EXAMPLE),
    ("zero-nominal", (('nominal = "470u"', 'nominal = "0"'),),
     r'parts\.L1\.nominal = "0": must be greater than zero \(got 0 H\)'),
    ("negative-parasitic", (('esr = "40m"', 'esr = "-40m"'),),
     r'parts\.C1\.esr = "-40m": must be zero or positive \(got -0\.04 ohm\)'),
    ("zero-leakage", (('esr = "40m"', 'leakage = "0"'),),
     r'parts\.C1\.leakage = "0": must be greater than zero'),
    ("upper-case-m", (('nominal = "0.22"', 'nominal = "1M"'),),
     r"parts\.R1\.nominal = \"1M\": '1M': an upper-case 'M' suffix is ambiguous: in SPICE "
     r"'m' and 'M' mean milli \(1e-3\) and mega is 'meg'"),
    ("wrong-unit", (('nominal = "47u"', 'nominal = "47uH"'),),
     r"parts\.C1\.nominal = \"47uH\": '47uH' is in H, but this value is in F"),
    ("meter-without-reading", (('reading = "0.291", leads', 'value = "0.291", leads'),),
     r"parts\.R1\.measured\.value = \"0\.291\": is not a key of a meter reading.*"
     r"parts\.R1\.measured\.reading is missing"),
    ("leads-not-below-reading", (('leads = "0.058" }', 'leads = "0.3" }'),),
     r'parts\.R1\.measured\.leads = "0\.3": is not smaller than the reading \(0\.291\)'),
    ("meter-on-capacitor", (('measured = "49.1u"', 'measured = { reading = "49.1u" }'),),
     r"parts\.C1\.measured = .*applies only to resistors"),
    ("tolerance-number", (('tolerance = "20%"', "tolerance = 20"),),
     r"parts\.C1\.tolerance = 20: is not a percentage; write a percentage such as "
     r'tolerance = "20%"'),
    ("tolerance-text", (('tolerance = "20%"', 'tolerance = "20"'),),
     r"parts\.C1\.tolerance = \"20\": cannot read '20' as a tolerance; write a percentage "
     r"such as '5%'; e\.g\. tolerance = \"20%\""),
    ("tolerance-too-large", (('tolerance = "20%"', 'tolerance = "100%"'),),
     r"parts\.C1\.tolerance = \"100%\": must be below 100 %"),
    ("initial-on-resistor", (('nominal = "0.22"', 'nominal = "0.22"\ninitial = "1"'),),
     r'parts\.R1\.initial = "1": a resistor stores no energy, so it has no initial value'),
    ("unknown-initial", (('initial = "12"', 'initial = "?"'),),
     r'1 problem in this fixture: \(1\) parts\.C1\.initial = "\?": may not be "\?"; the '
     r"initial voltage or current is what you set up"),
    ("unknown-tolerance", (('tolerance = "20%"', 'tolerance = "?"'),),
     r'parts\.C1\.tolerance = "\?": may not be "\?"'),
    ("unknown-probe-loading", (('capacitance = "11p"', 'capacitance = "?"'),),
     r'probe_loading\.capacitance = "\?": may not be "\?"; .*cannot be told apart'),
    ("unknown-measured", (('measured = "49.1u"', 'measured = "?"'),),
     r'parts\.C1\.measured = "\?": may not be "\?"; measured is what a meter read'),
    ("step-response-without-step", (('response = "natural"', 'response = "step"'),),
     r'step is missing, but response = "step" needs it'),
    ("newline-in-title", (("jig B (invented", "jig B\\n.control (invented"),),
     r'title = "Film capacitor ring-down, jig B\\n\.control.*holds a line break or control '
     r"character"),
    ("control-char-in-title", (("jig B (invented", "jig B\\u0007 (invented"),),
     r"title = .*holds a line break or control character"),
    ("dot-command-in-title", (("jig B (invented", "jig B .endc (invented"),),
     r"title = .*holds a word starting with '\.', which looks like a SPICE dot-command"),
    ("control-word-in-title", (("jig B (invented", "jig B; shell rm x (invented"),),
     r"title = .*holds shell, a word of ngspice's control language"),
    ("leading-star-in-title", (('title = "Film', 'title = "*Film'),),
     r"title = \"\*Film.*starts with '\*', which SPICE reads as a dot-command, comment or "
     r"continuation line"),
    ("bad-part-name", (("[parts.R1]", '[parts."R1.x"]'), ('"R1", "L1"]', '"R1.x", "L1"]')),
     r'parts\."R1\.x" is not a valid part name: it must start with a letter'),
    ("newline-in-part-name", (("[parts.R1]", '[parts."R1\\n.control"]'),
                              ('"R1", "L1"]', '"R1\\n.control", "L1"]')),
     r'parts\."R1\\n\.control" is not a valid part name'),
    ("control-word-part-name", (("[parts.R1]", "[parts.System]"), ('"R1", "L1"]', '"System", "L1"]')),
     r"parts\.System is a word of ngspice's control language"),
    ("case-collision", (("[parts.R1]", "[parts.c1]"), ('"R1", "L1"]', '"c1", "L1"]')),
     r"parts\.c1 differs from the part C1 only in upper/lower case"),
    ("unknown-top-level-key", (('probe = "C1"', 'probe = "C1"\nprobe_load = 3'),),
     r"probe_load = 3: is not a key of the fixture format; did you mean probe_loading\? the "
     r"known top-level keys are title, response, loop, probe, parts, loop_reading, "
     r"probe_loading and step"),
    ("include-is-not-a-key", (('probe = "C1"', 'probe = "C1"\ninclude = "other.toml"'),),
     r'include = "other\.toml": is not a key of the fixture format'),
    ("no-stored-energy", (('initial = "12"', 'initial = "0"'),),
     r'response = "natural": needs energy stored at t = 0'),
    ("probe-loading-unknown-key", (('capacitance = "11p"', 'capacity = "11p"'),),
     r'probe_loading\.capacity = "11p": is not a key of \[probe_loading\]; did you mean '
     r"capacitance\?"),
    ("loop-reading-without-reading", (('reading = "0.512"\n', ""),),
     r"loop_reading\.reading is missing"),
    ("loop-reading-unknown-key", (('leads = "0.058"\n\n[probe', 'leads = "0.058"\nfoo = 1\n\n[probe'),),
     r"1 problem in this fixture: \(1\) loop_reading\.foo = 1: is not a key of \[loop_reading\]"),
]


@pytest.mark.parametrize(
    ("edits", "match"), [case[1:] for case in BAD_FIXTURES], ids=[c[0] for c in BAD_FIXTURES]
)
def test_bad_fixture(
    example_fixture_toml: str, edits: tuple[tuple[str, str], ...], match: str
) -> None:
    text = mutate(example_fixture_toml, *edits)
    with pytest.raises(FixtureError, match=match) as info:
        parse_fixture_text(text, "bad.toml")
    assert str(info.value).startswith("bad.toml: ")


def test_step_table_with_natural_response(example_fixture_toml: str) -> None:
    text = example_fixture_toml + '[step]\nvolts = "12"\n'
    with pytest.raises(
        FixtureError, match=r'step = .*is given, but response = "natural" has no source'
    ):
        parse_fixture_text(text, "x")


def test_unknown_step_volts(example_fixture_toml: str) -> None:
    text = mutate(example_fixture_toml, ('response = "natural"', 'response = "step"'))
    text += '[step]\nvolts = "?"\n'
    with pytest.raises(FixtureError, match=r'step\.volts = "\?": may not be "\?"; the step height'):
        parse_fixture_text(text, "x")


def test_loop_without_energy_store() -> None:
    data = {
        "title": "t", "response": "step", "loop": ["R1", "SW1"], "probe": "R1",
        "step": {"volts": "1"},
        "parts": {"R1": {"kind": "resistor", "nominal": "1k"}, "SW1": {"kind": "switch"}},
    }
    with pytest.raises(FixtureError, match=r"holds no capacitor or inductor"):
        parse_fixture(data, "x")


@pytest.mark.parametrize("missing", ["title", "response", "loop", "probe", "parts"])
def test_each_required_top_level_key(missing: str, example_fixture_toml: str) -> None:
    data = tomllib.loads(example_fixture_toml)
    del data[missing]
    with pytest.raises(FixtureError, match=rf"(^|\) ){missing} is missing"):
        parse_fixture(data, "x")


def test_all_problems_reported_together(write_toml: Callable[..., Path]) -> None:
    path = write_toml(
        '''
title = "Bad one (invented example)"
response = "natural"
loop = ["C1", "L1", "L1"]
probe = "X"

[parts.C1]
kind = "capacitor"
nominal = "1M"
esr = "-1"
initial = "5"

[parts.L1]
kind = "inductor"
nominal = "10uF"
esr = "1m"
''',
        "several.toml",
    )
    with pytest.raises(FixtureError) as info:
        load_fixture(path)
    error = info.value
    expected = [
        r"parts\.C1\.nominal = \"1M\": .*upper-case 'M'",
        r'parts\.C1\.esr = "-1": must be zero or positive',
        r'parts\.L1\.esr = "1m": is not a key of an inductor',
        r"parts\.L1\.nominal = \"10uF\": '10uF' is in F, but this value is in H",
        r'loop\[2\] = "L1": repeats loop\[1\]',
        r'probe = "X": is not a part defined',
    ]
    assert len(error.problems) == len(expected)
    for pattern in expected:
        assert sum(bool(re.search(pattern, p)) for p in error.problems) == 1, pattern
    message = str(error)
    assert message.startswith(f"{path}: 6 problems in this fixture: (1) ")
    assert "(6) " in message


ODD_VALUES: list[object] = [
    True, 0, -1, 1.5, float("inf"), "", "?", "1M", "\n", [], ["x", 1], {}, {"reading": "?"},
    datetime.date(2024, 1, 1),
]


def test_odd_values_anywhere_give_a_fixture_error(example_fixture_toml: str) -> None:
    # Robustness: whatever type or value a key holds, the parser either accepts it or
    # raises FixtureError; no other exception may escape to the user.
    base = tomllib.loads(example_fixture_toml)
    paths: list[tuple[str, ...]] = []
    for key, value in base.items():
        paths.append((key,))
        if isinstance(value, dict):
            for sub, subvalue in value.items():
                paths.append((key, sub))
                if isinstance(subvalue, dict):
                    paths += [(key, sub, leaf) for leaf in subvalue]
    failures = 0
    for path in paths:
        for odd in ODD_VALUES:
            data = copy.deepcopy(base)
            target = data
            for step in path[:-1]:
                target = target[step]
            target[path[-1]] = odd
            try:
                parse_fixture(data, "odd")
            except FixtureError:
                failures += 1
    assert failures > len(paths)  # most odd values must be refused


def test_unreadable_file(tmp_path: Path) -> None:
    with pytest.raises(FixtureError, match=r"nope\.toml: 1 problem in this fixture: \(1\) cannot read the file"):
        load_fixture(tmp_path / "nope.toml")


def test_file_not_utf8(tmp_path: Path) -> None:
    path = tmp_path / "latin1.toml"
    path.write_bytes('title = "47 \u00b5F"\n'.encode("latin-1"))
    with pytest.raises(FixtureError, match=r"not UTF-8 text \(line 1 holds byte 0xb5\); save it as UTF-8"):
        load_fixture(path)


# --------------------------------------------------------------------------------------
# Command line
# --------------------------------------------------------------------------------------

@pytest.mark.parametrize(
    ("edits", "match"), [case[1:] for case in BAD_FIXTURES], ids=[c[0] for c in BAD_FIXTURES]
)
def test_every_bad_fixture_exits_2_with_one_paragraph_at_the_cli(
    example_fixture_toml: str,
    write_toml: Callable[..., Path],
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
    edits: tuple[tuple[str, str], ...],
    match: str,
) -> None:
    from xcheck.cli import main

    bad = write_toml(mutate(example_fixture_toml, *edits), "bad.toml")
    out = tmp_path / "deck.cir"
    status = main(["deck", str(bad), "--out", str(out)])
    err = capsys.readouterr().err
    assert status == 2
    assert not out.exists()  # nothing written
    assert err.startswith("xcheck: ") and "Traceback" not in err
    assert "\n\n" not in err.strip()  # one paragraph
    # The message is wrapped at spaces for the terminal; unwrap before matching.
    assert re.search(match, " ".join(err.split())), err


def test_cli_reports_a_bad_fixture_in_one_paragraph(
    example_fixture_toml: str,
    write_toml: Callable[..., Path],
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
) -> None:
    from xcheck.cli import main

    bad = write_toml(
        mutate(example_fixture_toml, ('nominal = "0.22"', 'nominal = "1M"'), ('probe = "C1"', 'probe = "C9"')),
        "bad.toml",
    )
    out = tmp_path / "deck.cir"
    status = main(["deck", str(bad), "--out", str(out)])
    captured = capsys.readouterr()
    assert status == 2
    assert not out.exists()
    err = captured.err
    assert err.startswith("xcheck: ")
    assert "Traceback" not in err
    assert "\n\n" not in err.strip()  # one paragraph
    flat = " ".join(err.split())
    assert "bad.toml: 2 problems in this fixture" in flat
    assert "upper-case 'M'" in flat and 'probe = "C9"' in flat
