"""What the fixed values carry into the fitted ones (JCGM 100:2008, the GUM, 5.1.2).

References: for a series loop the ring fixes omega0^2 = 1 / (L C) (textbook relation,
from memory), so with the frequency measured, dL/dC = -L/C and a capacitance known to
u(C) leaves the fitted inductance uncertain by L u(C) / C; and, independently of the
linearisation, refitting with the fixed capacitance moved by one standard uncertainty
moves the fitted inductance by that much (the GUM's sensitivity, found by the fit
itself: the Monte Carlo view of JCGM 101 with one draw at +1 sigma).
"""

from __future__ import annotations

import math
from dataclasses import replace

import pytest

from xcheck.compare import run_comparison
from xcheck.demo.data import demo_fixture_path, demo_trace_path
from xcheck.fitting.candidates import measured_uncertainty
from xcheck.fitting.fit import fit_candidate
from xcheck.fixture.reader import load_fixture


@pytest.fixture(scope="module")
def demo():
    fixture = load_fixture(demo_fixture_path())
    return fixture, run_comparison(fixture, trace=demo_trace_path(), use_ngspice=False)


def test_the_capacitance_reading_sets_the_inductance_uncertainty(demo) -> None:
    fixture, result = demo
    outcome = result.outcome("all-unknowns")
    l1 = {v.label: v for v in outcome.fit.fitted}["L1.value"]
    budget = dict(l1.budget)
    c1 = fixture.parts["C1"].measured
    u_c = measured_uncertainty(fixture, ("C1", "value"))
    assert u_c == pytest.approx(0.01 * c1)  # 1 % of an LCR meter reading (the rule used)
    # L u(C) / C; 2 % covers the probe capacitance and ESL, which the relation ignores.
    assert budget["C1 meter reading"] == pytest.approx(l1.value * u_c / c1, rel=0.02)
    # The combined uncertainty adds in quadrature (GUM 5.1.2, uncorrelated inputs).
    expected = (l1.stderr**2 + sum(u**2 for u in budget.values())) ** 0.5
    assert l1.combined_stderr == pytest.approx(expected, rel=1e-12)
    assert l1.combined_stderr > 50 * l1.stderr  # the reading, not the noise, dominates here
    assert "from the fit alone, the rest from the C1 meter reading" in result.verdict


def test_a_refit_with_the_capacitance_moved_by_one_sigma_agrees(demo) -> None:
    fixture, result = demo
    outcome = result.outcome("all-unknowns")
    l1 = {v.label: v for v in outcome.fit.fitted}["L1.value"]
    u_c = measured_uncertainty(fixture, ("C1", "value"))
    key = ("C1", "value")
    candidate = outcome.candidate
    moved = replace(candidate, parameters=candidate.parameters.with_values(
        {key: candidate.parameters.get(key) + u_c}, "moved by one sigma"))
    refit = fit_candidate(fixture, moved, result.observation)
    shifted = {v.label: v for v in refit.fitted}["L1.value"].value
    # Linear propagation holds to second order in u(C)/C = 1 %: 5 % of the shift.
    assert abs(shifted - l1.value) == pytest.approx(dict(l1.budget)["C1 meter reading"], rel=0.05)


def test_a_seeded_monte_carlo_over_the_fixed_values_agrees_with_the_budget() -> None:
    # JCGM 101 (Monte Carlo propagation): draw every uncertain fixed value (the C1 and R1
    # meter readings) from its normal distribution, refit the same observation each time,
    # and compare the spread of the fitted values with the first-order budget (JCGM 100,
    # 5.1.2). Only the fixed values vary, so the spread excludes the fit's own noise.
    # The standard deviation of N draws has a relative standard error of about
    # 1 / sqrt(2 (N - 1)) (normal samples, from memory): 60 draws, 9 %; agreement within
    # three of those. 300 points keep each refit short; the sensitivities do not depend on
    # how densely the ring is sampled.
    import numpy as np

    from xcheck.fitting.candidates import RingHint, build_candidates
    from xcheck.fitting.fixed_values import fixed_uncertainties
    from xcheck.measured import measure

    fixture = load_fixture(demo_fixture_path())
    measured = measure(fixture, trace=demo_trace_path())
    observation = measured.observation(max_points=300)
    candidate = next(c for c in build_candidates(fixture, RingHint(measured.natural_angular_frequency))
                     if c.name == "all-unknowns")
    base = {v.label: v for v in fit_candidate(fixture, candidate, observation).fitted}
    items = fixed_uncertainties(fixture, candidate.parameters, {f.key for f in candidate.free})
    assert {i.words for i in items} == {"C1 meter reading", "R1 meter reading"}
    rng = np.random.default_rng(20261202)
    draws = 60
    fitted: dict[str, list[float]] = {"L1.value": [], "loop.extra_resistance": []}
    for _ in range(draws):
        moved = {i.key: i.value + rng.normal() * i.sigma for i in items}
        refit = fit_candidate(fixture, replace(candidate, parameters=candidate.parameters.with_values(
            moved, "Monte Carlo draw")), observation)
        values = {v.label: v.value for v in refit.fitted}
        for label in fitted:
            fitted[label].append(values[label])
    relative_error = 1.0 / math.sqrt(2 * (draws - 1))
    for label, values in fitted.items():
        from_budget = math.sqrt(sum(u**2 for _, u in base[label].budget))
        spread = float(np.std(values, ddof=1))
        assert abs(spread / from_budget - 1.0) < 3 * relative_error, (label, spread, from_budget)
