"""Inputs that used to end in a traceback give one clear paragraph (or a right answer).

References: the float range (IEEE 754 double, largest about 1.8e308, from memory);
CPython's recursion limit (about 1000 frames, sys.getrecursionlimit, from memory), which
tomllib's recursive parser reaches for deeply nested arrays and inline tables; the damped
frequency of a series RLC, f_d = sqrt(1/(L C) - (R / 2L)^2) / 2 pi (textbook formula).
The fixture and captures are invented (tests/compare_cases.py).
"""

from __future__ import annotations

import json
import math

import pytest

from compare_cases import LOSSY_JIG_TOML, lossy_capture, variant, write_trace
from xcheck.cli import main

INITIAL = 'initial = "12"'


def one_paragraph(raw_err: str) -> str:
    assert "Traceback" not in raw_err and "Warning" not in raw_err, raw_err
    assert raw_err.startswith("xcheck: ") and "\n\n" not in raw_err.strip(), raw_err
    return " ".join(raw_err.split())


@pytest.mark.parametrize("value", ['"1e308"', '"-1e308"', '"1.7e308"', "1e300", '"2meg"'])
def test_absurd_initial_voltage_is_refused_with_its_key(tmp_path, printed, value):
    path = tmp_path / "hot.toml"
    path.write_text(variant(LOSSY_JIG_TOML, (INITIAL, f"initial = {value}")), encoding="utf-8")
    out = tmp_path / "x.cir"
    assert main(["deck", str(path), "--out", str(out)]) == 2
    err = one_paragraph(printed().raw_err)
    assert "hot.toml" in err and "parts.C1.initial" in err and "1.00 MV" in err, err
    assert not out.exists()


def test_bench_sized_initial_voltage_is_still_accepted(tmp_path, printed):
    # Boundary: 1 MV itself is accepted (the limit is inclusive); 12 V is the base case.
    path = tmp_path / "ok.toml"
    path.write_text(variant(LOSSY_JIG_TOML, (INITIAL, 'initial = "1meg"')), encoding="utf-8")
    assert main(["deck", str(path), "--out", str(tmp_path / "ok.cir")]) == 0


@pytest.mark.parametrize("nested", [
    "[" * 3000 + "]" * 3000,  # beyond tomllib's recursion: RecursionError while parsing
    "{a = " * 3000 + "1" + "}" * 3000,
    "[" * 450 + "]" * 450,  # parsed, but deep enough to overflow a recursive check
    "[" * 33 + "]" * 33,  # one level past xcheck.fixture.reader.MAX_NESTING (32)
])
def test_deeply_nested_toml_is_refused(tmp_path, printed, nested):
    path = tmp_path / "deep.toml"
    path.write_text(variant(LOSSY_JIG_TOML, ('probe = "C1"', f"probe = {nested}")),
                    encoding="utf-8")
    assert main(["deck", str(path), "--out", str(tmp_path / "x.cir")]) == 2
    err = one_paragraph(printed().raw_err)
    assert "deep.toml" in err and "too deeply" in err, err


def scaled_trace(tmp_path, factor: float):
    """The lossy jig's capture with every voltage multiplied by ``factor``."""
    plain = write_trace(tmp_path, 41).read_text(encoding="ascii").splitlines()
    rows = [plain[0]] + [f"{t},{float(v) * factor:.6e}"
                         for t, v in (line.split(",") for line in plain[1:])]
    path = tmp_path / f"scaled_{factor:g}.csv"
    path.write_text("\n".join(rows) + "\n", encoding="ascii")
    return path


@pytest.mark.parametrize("factor", [1e299, 1e307])
@pytest.mark.parametrize("command", ["ringdown", "compare"])
def test_trace_near_the_float_limit_is_refused(tmp_path, printed, factor, command):
    trace = scaled_trace(tmp_path, factor)
    fixture = tmp_path / "jig.toml"
    fixture.write_text(LOSSY_JIG_TOML, encoding="utf-8")
    out = tmp_path / "out"
    args = (["ringdown", str(trace), "--out", str(out / "r.png")] if command == "ringdown" else
            ["compare", str(fixture), "--trace", str(trace), "--out", str(out), "--no-ngspice",
             "--quiet"])
    assert main(args) == 2
    err = one_paragraph(printed().raw_err)
    # Line 2 is the first data row (line 1 is the header).
    assert trace.name in err and "line 2" in err and "CH1" in err and "1e+09" in err, err
    assert not out.exists()


def test_trace_clipped_flat_at_zero_before_the_event_gives_the_right_frequency(tmp_path,
                                                                               printed):
    # The scope range ends at 0 V: the 12 V pre-event level and every positive swing sit
    # exactly on the rail (flat, zero noise), which made the baseline fit's loss scale 0.
    plain = write_trace(tmp_path, 11).read_text(encoding="ascii").splitlines()
    rows = [plain[0]] + [f"{t},{min(max(float(v), -5.0), 0.0):.4f}"
                         for t, v in (line.split(",") for line in plain[1:])]
    trace = tmp_path / "clipped.csv"
    trace.write_text("\n".join(rows) + "\n", encoding="ascii")
    numbers = tmp_path / "r.json"
    assert main(["ringdown", str(trace), "--out", str(tmp_path / "r.png"),
                 "--json", str(numbers)]) == 0
    seen = printed()
    assert "Traceback" not in seen.raw_err and "clipped" in seen.out
    c = lossy_capture(11)
    # c.resistance is the whole series resistance, ESR included (xcheck.demo.synth).
    f_theory = math.sqrt(1 / (c.inductance * c.capacitance)
                         - (c.resistance / (2 * c.inductance)) ** 2) / (2 * math.pi)
    f_d = json.loads(numbers.read_text(encoding="utf-8"))["damped_frequency_hz"]
    # Within 4 of its own standard errors (about 1 Hz here) and 0.1 % of the formula.
    assert abs(f_d["value"] - f_theory) < max(4 * f_d["stderr"], 1e-3 * f_theory)
    # The same capture through compare: a result, not a traceback.
    fixture = tmp_path / "jig.toml"
    fixture.write_text(LOSSY_JIG_TOML, encoding="utf-8")
    assert main(["compare", str(fixture), "--trace", str(trace), "--out", str(tmp_path / "o"),
                 "--no-ngspice", "--quiet"]) in (0, 1)
    assert "Traceback" not in printed().raw_err


@pytest.mark.parametrize("command", ["ringdown", "compare"])
def test_peak_table_near_the_float_limit_is_refused(tmp_path, printed, command):
    from compare_cases import write_peaks

    plain = write_peaks(tmp_path, 11).read_text(encoding="ascii").splitlines()
    rows = [plain[0]] + [f"{t},{float(v) * 1e300:.4e},{u}"
                         for t, v, u in (line.split(",") for line in plain[1:])]
    table = tmp_path / "huge_peaks.csv"
    table.write_text("\n".join(rows) + "\n", encoding="ascii")
    fixture = tmp_path / "jig.toml"
    fixture.write_text(LOSSY_JIG_TOML, encoding="utf-8")
    out = tmp_path / "out"
    args = (["ringdown", str(table), "--peaks", "--out", str(out / "r.png")]
            if command == "ringdown" else
            ["compare", str(fixture), "--peaks", str(table), "--out", str(out), "--quiet"])
    assert main(args) == 2
    err = one_paragraph(printed().raw_err)
    assert table.name in err and "line 2" in err and "1e+09 V" in err, err
    assert not out.exists()
