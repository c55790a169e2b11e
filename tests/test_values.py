"""Value parsing and engineering-notation formatting (xcheck.values).

Reference: the table of scale factors in the ngspice manual, chapter "Circuit
Description", section "Basic conventions" (from memory: T=1e12, G=1e9, Meg=1e6, K=1e3,
mil=25.4e-6, m=1e-3, u=1e-6, n=1e-9, p=1e-12, f=1e-15; letters are case-insensitive and
letters after the scale factor are ignored by SPICE; xcheck checks them as units).

Tolerance on parsed values: rel 1e-15. Decimal text to a double is one correctly
rounded conversion (half an ulp, 1.1e-16 relative); the 'mil' factor adds one
multiplication, so two roundings at most; 1e-15 leaves a margin above that.
"""

from __future__ import annotations

import random

import pytest

from xcheck.errors import ValueParseError, XcheckError
from xcheck.values import format_eng, parse_tolerance, parse_value

PARSE_REL = 1e-15  # see the module docstring: at most two roundings of a double

# ngspice manual, "Basic conventions", table of scale factors (from memory).
NGSPICE_SCALE_FACTORS = [
    ("T", 1e12),
    ("G", 1e9),
    ("Meg", 1e6),
    ("K", 1e3),
    ("mil", 25.4e-6),
    ("m", 1e-3),
    ("u", 1e-6),
    ("n", 1e-9),
    ("p", 1e-12),
    ("f", 1e-15),
]


@pytest.mark.parametrize(("suffix", "scale"), NGSPICE_SCALE_FACTORS)
def test_scale_factor_table(suffix: str, scale: float) -> None:
    assert parse_value(f"1{suffix}") == pytest.approx(scale, rel=PARSE_REL)
    assert parse_value(f"2.5{suffix}") == pytest.approx(2.5 * scale, rel=PARSE_REL)


@pytest.mark.parametrize(("suffix", "scale"), NGSPICE_SCALE_FACTORS)
def test_scale_factors_are_case_insensitive(suffix: str, scale: float) -> None:
    # SPICE reads scale factors in any case (ngspice manual, "Basic conventions",
    # from memory). The one exception xcheck makes, a bare upper-case M, is tested below.
    variants = {suffix.lower(), suffix.upper(), suffix.capitalize()} - {"M"}
    for variant in variants:
        assert parse_value(f"3{variant}") == pytest.approx(3 * scale, rel=PARSE_REL), variant


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("4.7n", 4.7e-9),
        ("47u", 47e-6),
        ("2.2meg", 2.2e6),
        ("0.22", 0.22),
        ("-.5u", -0.5e-6),
        ("+12", 12.0),
        ("47e-6", 47e-6),
        ("1e3k", 1e6),  # exponent and suffix combine: 1e3 * 1e3
        ("1.5E-3m", 1.5e-6),
        (" 10k ", 1e4),  # surrounding blanks are ignored
        ("47µ", 47e-6),  # micro sign U+00B5
        ("47μ", 47e-6),  # Greek small mu U+03BC
    ],
)
def test_numbers_with_suffixes(text: str, expected: float) -> None:
    assert parse_value(text) == pytest.approx(expected, rel=PARSE_REL)


def test_powers_of_ten_give_the_correctly_rounded_double() -> None:
    # 4.7 * 1e-9 in floating point is 4.7000000000000005e-09; the parser shifts the
    # exponent instead, so "4.7n" reads exactly as the literal 4.7e-9 does. Relative
    # tolerance 1e-17 (below one ulp, 2.2e-16) makes the check fail for the product.
    assert parse_value("4.7n") == pytest.approx(4.7e-9, rel=1e-17, abs=0)
    assert 4.7 * 1e-9 != pytest.approx(4.7e-9, rel=1e-17, abs=0)


@pytest.mark.parametrize(
    ("value", "expected"), [(12, 12.0), (47e-6, 47e-6), (-3, -3.0), (0, 0.0)]
)
def test_toml_numbers_pass_through(value: float, expected: float) -> None:
    assert parse_value(value) == pytest.approx(expected, rel=PARSE_REL, abs=0)


@pytest.mark.parametrize(
    ("text", "unit", "expected"),
    [
        ("47uF", "F", 47e-6),
        ("10mH", "H", 10e-3),
        ("412mohm", "ohm", 0.412),
        ("412mOhms", "ohm", 0.412),
        ("2.2kΩ", "ohm", 2.2e3),
        ("2.2kω", "ohm", 2.2e3),
        ("12V", "V", 12.0),
        ("1.5A", "A", 1.5),
        ("20us", "s", 20e-6),
        ("10kHz", "Hz", 1e4),
        ("47u", "F", 47e-6),  # the unit may be left out
    ],
)
def test_units_after_the_suffix(text: str, unit: str, expected: float) -> None:
    assert parse_value(text, unit=unit) == pytest.approx(expected, rel=PARSE_REL)


def test_lone_f_is_femto_as_in_spice() -> None:
    # In SPICE a lone F after the number is the femto scale factor, not farads
    # (ngspice manual, "Basic conventions", from memory): "1F" is 1e-15.
    assert parse_value("1F") == pytest.approx(1e-15, rel=PARSE_REL)
    assert parse_value("2f", unit="ohm") == pytest.approx(2e-15, rel=PARSE_REL)


@pytest.mark.parametrize("text", ["1.12e-9F", "1F", "4.7f"])
def test_a_lone_f_on_a_capacitance_is_refused_as_ambiguous(text: str) -> None:
    # "1.12e-9F" meant as farads would read as 1.12e-24 F under the SPICE rule above: a
    # capacitance asks which was meant, as an upper-case M does.
    with pytest.raises(ValueParseError, match="ambiguous.*1.12n"):
        parse_value(text, unit="F")
    assert parse_value(text.rstrip("fF") + "fF", unit="F") == pytest.approx(
        float(text.rstrip("fF")) * 1e-15, rel=PARSE_REL)
    assert parse_value("1uF", unit="F") == pytest.approx(1e-6, rel=PARSE_REL)


@pytest.mark.parametrize(
    ("text", "unit", "found"),
    [("47uH", "F", "H"), ("10mF", "H", "F"), ("12V", "ohm", "V"), ("1kohm", "V", "ohm")],
)
def test_wrong_unit_is_rejected(text: str, unit: str, found: str) -> None:
    with pytest.raises(ValueParseError, match=rf"'{text}' is in {found}, but this value is in {unit}"):
        parse_value(text, unit=unit)


@pytest.mark.parametrize("text", ["1M", "2.2M", "10MΩ", "1Mohm", "1MHz", "4.7MF"])
def test_upper_case_m_is_rejected_with_an_explanation(text: str) -> None:
    # Common practice, no source: engineers write 1M for a megohm, but SPICE reads
    # M as milli; the message must name both readings.
    with pytest.raises(ValueParseError, match=r"upper-case 'M'.*milli \(1e-3\).*'meg'") as info:
        parse_value(text)
    assert text in str(info.value)


@pytest.mark.parametrize(
    ("text", "expected"), [("1MEG", 1e6), ("1Meg", 1e6), ("1m", 1e-3), ("1MIL", 25.4e-6)]
)
def test_m_words_that_are_not_a_bare_upper_case_m_are_accepted(text: str, expected: float) -> None:
    assert parse_value(text) == pytest.approx(expected, rel=PARSE_REL)


@pytest.mark.parametrize(
    "text", ["", "abc", "1..2", "1k2", "4.7 x", "1e", "k1", "١٢", "nan", "inf", "1e400"]
)
def test_unreadable_text_is_rejected(text: str) -> None:
    # "١٢" is twelve in Arabic-Indic digits: float() would read it, a SPICE deck
    # would not, so the parser accepts ASCII digits only.
    with pytest.raises(ValueParseError, match=r"cannot read|not a finite number"):
        parse_value(text)


@pytest.mark.parametrize("value", [True, None, [1], {"a": 1}, float("inf"), float("nan")])
def test_non_numbers_are_rejected(value: object) -> None:
    with pytest.raises(ValueParseError, match=r"expected a (finite )?number"):
        parse_value(value)  # type: ignore[arg-type]


def test_value_errors_are_xcheck_errors() -> None:
    # The CLI turns every XcheckError into one paragraph and exit status 2.
    assert issubclass(ValueParseError, XcheckError)


@pytest.mark.parametrize(
    ("text", "expected"),
    [("20%", 0.2), ("0.5 %", 0.005), ("±10%", 0.1), ("± 5 %", 0.05), ("0%", 0.0), (0.05, 0.05)],
)
def test_tolerances(text: str | float, expected: float) -> None:
    assert parse_tolerance(text) == pytest.approx(expected, rel=PARSE_REL, abs=0)


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("-5%", r"zero or positive"),
        ("20", r"write a percentage"),
        ("twenty%", r"write a percentage"),
        ("5 percent", r"write a percentage"),
        (20, r"read as a fraction \(2000 %\); write a percentage such as '20%'"),
        (-0.1, r"zero or positive"),
    ],
)
def test_bad_tolerances(text: str | float, match: str) -> None:
    with pytest.raises(ValueParseError, match=match):
        parse_tolerance(text)


@pytest.mark.parametrize(
    ("value", "unit", "digits", "expected"),
    [
        (47.3e-6, "F", 3, "47.3 µF"),
        (2.2e-3, "H", 3, "2.20 mH"),
        (0.412, "ohm", 3, "412 mΩ"),
        (999.96, "ohm", 3, "1.00 kΩ"),  # rounds up into the next prefix
        (10e6, "ohm", 3, "10.0 MΩ"),  # in reports M is mega
        (1.5e-15, "F", 3, "1.50 fF"),
        (-12.0, "V", 3, "-12.0 V"),
        (0.0, "V", 3, "0 V"),
        (47.3e-6, "F", 2, "47 µF"),
        (123456.0, "", 4, "123.5 k"),
    ],
)
def test_format_eng(value: float, unit: str, digits: int, expected: str) -> None:
    # Engineering notation: mantissa in [1, 1000), SI prefix a power of 1000
    # (common practice, no source).
    assert format_eng(value, unit, digits) == expected


def test_format_eng_reads_back() -> None:
    # Formatting with 6 significant digits and parsing back must agree to half a unit
    # in the 6th digit (rel 5e-6), for prefixes the parser shares with the formatter.
    rng = random.Random(20240611)
    for _ in range(200):
        value = 10 ** rng.uniform(-14, 5) * rng.choice([1, -1])
        text = format_eng(value, "", 6).replace(" ", "")
        assert parse_value(text) == pytest.approx(value, rel=5e-6), text
