"""summary.json: the documented keys, strictly valid JSON, the same bytes every time.

References: the standard library's ``json`` parser (with ``parse_constant`` raising, so
that NaN or Infinity, which strict JSON does not have, fail the test) and its float
formatting; the key lists below are copied from the schema in
:mod:`xcheck.report.summary`'s docstring, and each is also looked up in that docstring so
that the documentation and the file cannot drift apart.
"""

from __future__ import annotations

import json
import math
import re

import pytest

from compare_cases import LOSSY_JIG_TOML, write_trace
from xcheck.compare import run_comparison
from xcheck.fixture.reader import load_fixture
from xcheck.report import summary as summary_module
from xcheck.report.markdown import write_report
from xcheck.report.summary import SIGNIFICANT_DIGITS, summary, summary_text

TOP_KEYS = ("schema", "schema_version", "tool", "best", "verdict", "candidates", "measured",
            "inputs", "versions", "seeds", "safety")
CANDIDATE_KEYS = ("name", "description", "rank", "failed", "failure_reason", "nrmse",
                  "rmse_volts", "max_error_volts", "aic", "bic", "delta_bic", "evidence",
                  "fitted", "fitted_stderr", "series_resistance_ohm", "damped_frequency_hz",
                  "neper_frequency_per_s", "engines", "engine_disagreement", "undetermined")
ENGINE_KEYS = ("rmse", "nrmse", "max_error", "aic", "bic", "damped_frequency_error_hz",
               "neper_frequency_error_per_s")
UNDETERMINED_KEYS = ("members", "combination", "value", "stderr", "unit", "reason")
MEASURED_KEYS = ("kind", "damped_frequency_hz", "neper_frequency_per_s", "initial_volts",
                 "envelope_exponential", "flagged_extrema", "findings", "alignment")
INPUT_KEYS = ("role", "path", "sha256")


def _no_constants(name: str):
    raise ValueError(f"{name} is not valid JSON")


def _strict(text: str):
    """Parse as strict JSON: the standard library accepts NaN and Infinity unless told not to."""
    return json.loads(text, parse_constant=_no_constants)


def _floats(data, path=""):
    """Every float in nested JSON data, with where it sits."""
    if isinstance(data, float):
        yield path, data
    elif isinstance(data, dict):
        for key, value in data.items():
            yield from _floats(value, f"{path}.{key}")
    elif isinstance(data, list):
        for index, value in enumerate(data):
            yield from _floats(value, f"{path}[{index}]")


@pytest.fixture(scope="module")
def fixture_path(tmp_path_factory):
    # L1 written "?" (no nominal): the 'label' rung cannot be built, so one candidate
    # fails and carries NaN criteria, the values that must come out as null.
    text = LOSSY_JIG_TOML.replace('nominal = "220u"\nmeasured = "215u"', 'nominal = "?"')
    assert text != LOSSY_JIG_TOML
    path = tmp_path_factory.mktemp("summary") / "unknown_l.toml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def trace_path(tmp_path_factory):
    return write_trace(tmp_path_factory.mktemp("trace"), 12)


@pytest.fixture(scope="module")
def comparison(fixture_path, trace_path):
    return run_comparison(load_fixture(fixture_path), trace=trace_path, use_ngspice=False)


def test_every_documented_key_is_present(comparison):
    doc = summary_module.__doc__
    for key in (TOP_KEYS + CANDIDATE_KEYS + ENGINE_KEYS + UNDETERMINED_KEYS + MEASURED_KEYS
                + INPUT_KEYS):
        assert re.search(rf"\b{key}\b", doc), f"{key} is not in the documented schema"
    data = _strict(summary_text(summary(comparison)))
    assert set(data) >= set(TOP_KEYS)
    assert data["schema"] == "xcheck-summary" and data["schema_version"] == 1
    assert set(data["tool"]) == {"name", "version"}
    assert data["best"] == comparison.best.name
    assert [c["name"] for c in data["candidates"]] == [o.name for o in comparison.outcomes]
    for item in data["candidates"]:
        assert set(item) >= set(CANDIDATE_KEYS), item["name"]
        assert set(item["engines"]) == {"theory", "ngspice"}
        if not item["failed"]:
            assert set(item["engines"]["theory"]) >= set(ENGINE_KEYS)
        assert set(item["fitted"]) == set(item["fitted_stderr"])
        for group in item["undetermined"]:
            assert set(group) >= set(UNDETERMINED_KEYS)
    measured = data["measured"]
    assert set(measured) >= set(MEASURED_KEYS)
    for key in ("damped_frequency_hz", "neper_frequency_per_s", "initial_volts"):
        assert set(measured[key]) >= {"value", "stderr"}
    assert isinstance(measured["envelope_exponential"], bool)
    assert all(isinstance(i, int) for i in measured["flagged_extrema"])
    for item in data["inputs"]:
        assert set(item) == set(INPUT_KEYS) and re.fullmatch(r"[0-9a-f]{64}", item["sha256"])


def test_non_finite_numbers_are_written_as_null(comparison):
    failed = comparison.outcome("label")
    assert failed.failed and math.isnan(failed.fit.bic)  # the case this test is about
    text = summary_text(summary(comparison))
    data = _strict(text)  # raises on NaN / Infinity
    (item,) = [c for c in data["candidates"] if c["name"] == "label"]
    assert item["bic"] is None and item["aic"] is None and item["failed"] is True
    assert item["failure_reason"]
    assert text.endswith("}\n")
    # A non-finite number that slipped through must fail loudly, not write NaN.
    with pytest.raises(ValueError):
        summary_text({"value": math.nan})


def test_numbers_are_written_to_twelve_significant_digits(comparison):
    data = summary(comparison)
    written = _strict(summary_text(data))
    pairs = dict(_floats(data))
    assert pairs, "no floats to check"
    for path, value in _floats(written):
        exact = pairs[path]
        # Reference: the standard library's correctly rounded '%.12g'.
        assert value == float(f"{exact:.{SIGNIFICANT_DIGITS}g}"), path
        # Half a unit in the 12th digit at most: nothing changes meaning.
        assert abs(value - exact) <= 5e-12 * abs(exact), path


def test_two_builds_give_the_same_bytes(fixture_path, trace_path, comparison, tmp_path):
    again = run_comparison(load_fixture(fixture_path), trace=trace_path, use_ngspice=False)
    assert summary_text(summary(again)) == summary_text(summary(comparison))
    first = write_report(comparison, tmp_path / "first")
    second = write_report(again, tmp_path / "second")
    assert (first / "summary.json").read_bytes() == (second / "summary.json").read_bytes()
    assert (first / "summary.json").read_text(encoding="utf-8") == summary_text(summary(comparison))
