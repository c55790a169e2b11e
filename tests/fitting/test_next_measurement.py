"""The next measurement: which reading would cut a fitted value's uncertainty most.

References: the law of propagation of uncertainty for uncorrelated inputs (JCGM 100:2008,
the GUM, 5.1.2: contributions add in quadrature), the rectangular distribution's
u = a / sqrt(3) for a stated accuracy of +-a (GUM 4.3.7), and for a direct reading of
a fitted value the information form of adding one observation,
(S^-1 + e e^T / u^2)^-1, computed with numpy's matrix inverse as the reference for the
module's rank-one update.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from xcheck.compare import run_comparison
from xcheck.demo.data import demo_fixture_path, demo_trace_path
from xcheck.fitting.fit import FitResult, FittedValue
from xcheck.fitting.next_measurement import (
    BETTER_METER_ACCURACY,
    METER_ACCURACY,
    every_reading,
    next_measurements,
)
from xcheck.fixture.reader import load_fixture
from xcheck.report.summary import summary


@pytest.fixture(scope="module")
def demo():
    fixture = load_fixture(demo_fixture_path())
    return fixture, run_comparison(fixture, trace=demo_trace_path(), use_ngspice=False)


def test_the_demo_suggests_splitting_the_sum_and_a_better_capacitance_reading(demo):
    fixture, result = demo
    steps = result.next_measurements
    assert steps, "the demo's uncertainties are dominated by fixed values: suggestions expected"
    assert steps[0].measure == "L1 winding resistance (DCR)"
    assert "would split the" in steps[0].sentence and "sum of extra series loss" in steps[0].sentence
    better_c1 = next(s for s in steps if s.measure == "C1 capacitance")
    l1 = {v.label: v for v in result.outcome("all-unknowns").fit.fitted}["L1.value"]
    c1_share = dict(l1.budget)["C1 meter reading"]
    # GUM 5.1.2: the C1 term shrinks by u_new / u_old, the other terms stay.
    u_old = 0.01 * fixture.parts["C1"].measured  # the 1 % meter rule of the fixed values
    u_new = BETTER_METER_ACCURACY * fixture.parts["C1"].measured / math.sqrt(3.0)
    expected = math.sqrt(l1.uncertainty**2 - c1_share**2 + (c1_share * u_new / u_old) ** 2)
    assert better_c1.after == pytest.approx(expected, rel=1e-9)
    assert better_c1.reduction == pytest.approx(1 - expected / l1.uncertainty, rel=1e-9)
    assert better_c1.reduction > 0.9  # the C1 reading carries almost all of it
    assert "Next measurement: " in result.verdict
    data = summary(result)["next_measurements"]
    assert [d["measure"] for d in data] == [s.measure for s in steps]
    assert data[0]["standard_uncertainty_now"] is None  # a sum's member: not determined


def _value(label, key, value, stderr, unit, combined=float("nan"), budget=()):
    return FittedValue(label, key, value, stderr, unit, value, 0.0, 10 * value, combined, budget)


def test_a_direct_reading_updates_the_covariance_as_one_more_observation(demo):
    fixture, _ = demo
    # Two fitted values, strongly correlated: L1's inductance and the extra loss.
    sd = np.array([5e-6, 0.02])
    corr = np.array([[1.0, -0.8], [-0.8, 1.0]])
    fit = FitResult("invented", True, "ok", fitted=(
        _value("L1.value", ("L1", "value"), 470e-6, sd[0], "H"),
        _value("loop.extra_resistance", ("loop", "extra_resistance"), 0.1, sd[1], "ohm")),
        correlation=corr, correlation_labels=("L1.value", "loop.extra_resistance"))
    steps = {(s.measure, s.improves): s for s in every_reading(fixture, fit)}
    cov = corr * np.outer(sd, sd)
    u = METER_ACCURACY * 470e-6 / math.sqrt(3.0)
    information = np.linalg.inv(cov) + np.outer([1.0, 0.0], [1.0, 0.0]) / u**2
    reference = np.linalg.inv(information)
    loss = steps[("L1 inductance", "extra series loss")]
    assert loss.after == pytest.approx(math.sqrt(reference[1, 1]), rel=1e-9)
    assert loss.reduction == pytest.approx(1 - math.sqrt(reference[1, 1]) / sd[1], rel=1e-9)


def test_nothing_is_suggested_when_no_reading_would_cut_much(demo):
    fixture, _ = demo
    # The fit's own error dominates and nothing is correlated: a 1 % reading of L1
    # (2.7 uH) would barely improve a value known to 0.1 uH.
    fit = FitResult("invented", True, "ok", fitted=(
        _value("L1.value", ("L1", "value"), 470e-6, 1e-7, "H"),),
        correlation=np.eye(1), correlation_labels=("L1.value",))
    assert next_measurements(fixture, fit) == ()
    assert next_measurements(fixture, FitResult("failed", False, "no")) == ()
