"""What the fixed values carry into the fitted ones (JCGM 100:2008, the GUM, 5.1.2).

References: for a series loop the ring fixes omega0^2 = 1 / (L C) (textbook relation,
from memory), so with the frequency measured, dL/dC = -L/C and a capacitance known to
u(C) leaves the fitted inductance uncertain by L u(C) / C; and, independently of the
linearisation, refitting with the fixed capacitance moved by one standard uncertainty
moves the fitted inductance by that much (the GUM's sensitivity, found by the fit
itself: the Monte Carlo view of JCGM 101 with one draw at +1 sigma).
"""

from __future__ import annotations

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
