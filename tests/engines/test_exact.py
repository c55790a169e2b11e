"""The exact engine against outside references: scipy.signal.lsim on hand-derived
matrices, the closed form on textbook loops, a textbook parallel RLC, and itself
evaluated one value set at a time (the batch must not change any answer).

Tolerances: the exact engine and lsim are both exact up to rounding; lsim steps a
matrix exponential from sample to sample and so accumulates about one rounding error
per step (2000 steps * 2.2e-16 ~ 5e-13), hence 1e-9 of the response's scale, a wide
margin. Against the closed form the acceptance figure is 1e-9 relative.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from hand_circuits import ALL_CASES, reference_response, sample_times
from xcheck.circuit.model import Circuit, Element
from xcheck.engines.exact import (
    MODAL_CONDITION_LIMIT,
    ExactEngine,
    dominant_ring,
    simulate_exact,
    turning_points,
)
from xcheck.engines.theory import simulate_theory
from xcheck.errors import SimulationError

RELATIVE = 1e-9


def _scale(values: np.ndarray) -> float:
    return float(np.max(np.abs(values))) or 1.0


@pytest.mark.parametrize("make", ALL_CASES, ids=lambda f: f.__name__)
def test_exact_engine_matches_lsim_on_hand_derived_matrices(make) -> None:
    # Reference: scipy.signal.lsim (zero-order hold, exact for inputs switching at
    # sample times) on state equations derived by hand in hand_circuits.py.
    case = make()
    times = sample_times(case)
    expected = reference_response(case, times)
    got = simulate_exact(case.circuit, times).probe_voltage
    assert np.max(np.abs(got - expected)) <= RELATIVE * _scale(expected), case.name


def _series(r: float, *, l: float = 1e-3, c: float = 1e-6, v0: float = 10.0) -> Circuit:
    return Circuit(f"series RLC, R = {r}", (
        Element("V_sense", "V", ("0", "n1"), 0.0, part="loop", role="sense"),
        Element("C_C1", "C", ("n1", "n2"), c, initial=v0, part="C1"),
        Element("R_R1", "R", ("n2", "n3"), r, part="R1"),
        Element("L_L1", "L", ("n3", "0"), l, initial=0.0, part="L1"),
    ), probe=("n1", "n2"), current_sense="V_sense")


@pytest.mark.parametrize("zeta", [0.01, 0.3, 0.999, 1.0, 1.001, 5.0])
def test_exact_engine_matches_the_closed_form_on_series_loops(zeta: float) -> None:
    # Reference: the closed-form series RLC response (engines/theory.py, itself checked
    # against textbook formulas in test_engine_theory.py). zeta = 1 exactly has a
    # repeated root: the modal sum is refused there and the matrix exponential used.
    r = 2 * zeta * math.sqrt(1e-3 / 1e-6)
    circuit = _series(r)
    times = np.linspace(0, 2e-3 if zeta < 1 else 4e-3, 3001)
    exact = simulate_exact(circuit, times)
    theory = simulate_theory(circuit, times)
    assert np.max(np.abs(exact.probe_voltage - theory.probe_voltage)) <= RELATIVE * 10.0
    current_scale = 10.0 / math.sqrt(1e-3 / 1e-6)
    assert np.max(np.abs(exact.loop_current - theory.loop_current)) <= RELATIVE * current_scale


def test_critical_damping_takes_the_matrix_exponential_path() -> None:
    # The eigenvector matrix of a defective A is singular; its condition number must be
    # beyond the limit for the test above to have exercised the fallback.
    circuit = _series(2 * math.sqrt(1e-3 / 1e-6))
    engine = ExactEngine(circuit)
    _, vectors = np.linalg.eig(engine.model().a[0])
    assert np.linalg.cond(vectors) > MODAL_CONDITION_LIMIT


def test_parallel_rlc_textbook_natural_response() -> None:
    # Parallel RLC natural response, re-derived (textbook form as in Nilsson & Riedel,
    # "Electric Circuits", chapter on natural and step responses of RLC circuits, from
    # memory): v = e^{-alpha t} (B1 cos wd t + B2 sin wd t), alpha = 1/(2RC),
    # w0 = 1/sqrt(LC), B1 = V0, B2 = (v'(0) + alpha V0) / wd with
    # v'(0) = -V0/(RC) - I0/C from KCL at the top node.
    r, l, c, v0 = 200.0, 1e-3, 1e-6, 10.0
    circuit = Circuit("parallel RLC", (
        Element("C_C1", "C", ("top", "0"), c, initial=v0, part="C1"),
        Element("R_R1", "R", ("top", "0"), r, part="R1"),
        Element("L_L1", "L", ("top", "0"), l, initial=0.0, part="L1"),
    ), probe=("top", "0"))
    alpha, w0 = 1 / (2 * r * c), 1 / math.sqrt(l * c)
    wd = math.sqrt(w0**2 - alpha**2)
    b2 = (-v0 / (r * c) + alpha * v0) / wd
    t = np.linspace(0, 5e-4, 2001)
    expected = np.exp(-alpha * t) * (v0 * np.cos(wd * t) + b2 * np.sin(wd * t))
    got = simulate_exact(circuit, t).probe_voltage
    assert np.max(np.abs(got - expected)) <= RELATIVE * v0
    # Natural frequencies: s = -alpha +- j wd (same source).
    poles = np.sort_complex(ExactEngine(circuit).poles()[0])
    np.testing.assert_allclose(poles, [complex(-alpha, -wd), complex(-alpha, wd)], rtol=1e-12)


def test_a_batch_gives_what_each_value_set_gives_alone() -> None:
    # Reference: the engine itself, one value set per call; batching (and the chunking
    # of large batches) must not change any number beyond rounding.
    circuit = _series(3.0)
    engine = ExactEngine(circuit)
    values, initials = engine.defaults(5)
    r_col = engine.index_of("R_R1")
    values[:, r_col] = [0.5, 3.0, 20.0, 63.2455532033676, 300.0]  # incl. critical damping
    times = np.linspace(0, 1e-3, 501)
    batch = engine.response(times, values, initials)
    for row in range(5):
        alone = engine.response(times, values[row:row + 1], initials[row:row + 1])[0]
        np.testing.assert_allclose(batch[row], alone, rtol=0, atol=1e-12 * 10.0)


def test_turning_points_of_a_series_loop_are_at_multiples_of_the_half_period() -> None:
    # For a series RLC whose current starts at zero, dv/dt is proportional to
    # e^{-alpha t} sin(wd t) (common practice, no source), so the capacitor voltage's
    # turning points are at k pi / wd exactly; Newton on the exact derivative must find
    # them to rounding (1e-9 of a half period, a wide margin).
    circuit = _series(3.0)
    engine = ExactEngine(circuit)
    model = engine.model()
    omega_d, alpha = dominant_ring(engine, model)
    assert alpha == pytest.approx(3.0 / (2 * 1e-3), rel=1e-12)
    times, values = turning_points(engine, model, 6, "natural")
    half = math.pi / omega_d
    np.testing.assert_allclose(times / half, np.arange(6), atol=1e-9)
    expected = simulate_theory(circuit, times).probe_voltage
    np.testing.assert_allclose(values, expected, atol=RELATIVE * 10.0)


def test_a_non_ringing_candidate_has_no_turning_points() -> None:
    circuit = _series(500.0)
    engine = ExactEngine(circuit)
    with pytest.raises(SimulationError, match="does not ring"):
        turning_points(engine, engine.model(), 3, "natural")


def test_negative_times_are_refused() -> None:
    with pytest.raises(SimulationError, match="t >= 0"):
        simulate_exact(_series(3.0), np.array([-1e-6, 0.0]))
