"""A long user value is quoted as a short excerpt: every message stays one short paragraph.

Limits: an excerpt keeps xcheck.quoting.EXCERPT_CHARS (60) characters and names the full
length; a whole message stays under 1 kB, about ten lines of a terminal (common practice
for a readable error, no source). Python's own limit of 4300 digits for int() of a digit
string is from the standard library documentation (sys.int_info), from memory. The long
values are invented.
"""

from __future__ import annotations

import pytest

from compare_cases import LOSSY_JIG_TOML, variant
from xcheck.cli import main
from xcheck.errors import ValueParseError
from xcheck.values import parse_value

MAX_MESSAGE_BYTES = 1024
INITIAL = 'initial = "12"'

CASES = {
    "megabyte part name (a [parts] key)":
        (LOSSY_JIG_TOML + "\n[parts." + "Q" * 1_000_000 + ']\nkind = "resistor"\nnominal = "1"\n',
         "(1000000 characters)"),
    "megabyte loop entry":
        (variant(LOSSY_JIG_TOML, ('"L1"]', '"L1", "' + "P" * 1_000_000 + '"]')),
         "(1000002 characters)"),
    "5000-digit value string":
        (variant(LOSSY_JIG_TOML, (INITIAL, 'initial = "' + "1" * 5000 + '"')),
         "(5000 characters)"),
    "5000-digit value string with a bad suffix":
        (variant(LOSSY_JIG_TOML, (INITIAL, 'initial = "' + "1" * 5000 + 'x"')),
         "(5001 characters)"),
    "5000-digit bare integer (beyond Python's 4300-digit int() limit)":
        (variant(LOSSY_JIG_TOML, (INITIAL, "initial = " + "1" * 5000)), "4300 digits"),
    "400-digit bare integer (beyond the float range)":
        (variant(LOSSY_JIG_TOML, (INITIAL, "initial = 1" + "0" * 400)), "(401 characters)"),
    "100 kB title":
        (variant(LOSSY_JIG_TOML, ('title = "Lossy jig ring-down (invented example)"',
                                  'title = "' + "T" * 100_000 + '"')), "(100002 characters)"),
    "100 kB unknown key":
        (variant(LOSSY_JIG_TOML, ("[loop_reading]\n", "[loop_reading]\n" + "z" * 100_000 + " = 1\n")),
         "(100000 characters)"),
}


@pytest.mark.parametrize("name", list(CASES))
def test_long_values_are_quoted_as_short_excerpts(tmp_path, printed, name):
    text, length_words = CASES[name]
    path = tmp_path / "long.toml"
    path.write_text(text, encoding="utf-8")
    out = tmp_path / "x.cir"
    assert main(["deck", str(path), "--out", str(out)]) == 2
    seen = printed()
    assert "Traceback" not in seen.raw_err
    assert len(seen.raw_err.encode()) < MAX_MESSAGE_BYTES, seen.raw_err
    assert "long.toml" in seen.err and length_words in seen.err, seen.err
    assert not out.exists()


@pytest.mark.parametrize("text", ["9" * 5000, "1e" + "9" * 5000 + "k", "2" * 3000 + "meg",
                                  "1" * 5000 + "uF?"])
def test_value_parse_errors_stay_short(text):
    # The reference is the float range (IEEE 754 double, largest about 1.8e308, from
    # memory): each text is far outside it or unreadable, so it must be refused, briefly.
    with pytest.raises(ValueParseError) as info:
        parse_value(text)
    assert len(str(info.value)) < 400
    assert f"({len(text)} characters)" in str(info.value)


def test_far_too_small_exponent_is_zero_not_an_error():
    # 1e-(5000 nines) kilo is far below the smallest subnormal double (about 4.9e-324,
    # from memory), so it rounds to 0.0 as float() rounds "1e-99999" (the standard library).
    assert parse_value("1e-" + "9" * 5000 + "k") == float("1e-99999") == 0.0


def test_long_column_names_are_quoted_as_short_excerpts(tmp_path, printed):
    from compare_cases import write_trace

    plain = write_trace(tmp_path, 51).read_text(encoding="ascii").splitlines()
    trace = tmp_path / "wide_header.csv"
    trace.write_text("\n".join(["time [s]," + "H" * 100_000] + plain[1:]) + "\n",
                     encoding="ascii")
    # A header name of 100 kB, and a --column of 50 kB that names no column.
    for args in (["--column", "nope"], ["--column", "Z" * 50_000]):
        out = tmp_path / "r.png"
        assert main(["ringdown", str(trace), "--out", str(out), *args]) == 2
        seen = printed()
        assert "Traceback" not in seen.raw_err
        assert len(seen.raw_err.encode()) < MAX_MESSAGE_BYTES, seen.raw_err[:2000]
        assert "(100000 characters)" in seen.err
        assert not out.exists()
    assert "(50000 characters)" in seen.err
