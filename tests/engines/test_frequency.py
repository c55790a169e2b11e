"""The exact frequency response (engines/frequency) against independent references.

References:

- ngspice's small-signal ``.ac`` analysis of a deck written from the same circuit
  (engines/ac_deck): its nodal analysis of complex admittances knows nothing of the
  state space. Acceptance: magnitude within 1e-4 relative and phase within 0.01 degree
  at every point of a 9-decade sweep (1 Hz to 1 GHz, 20 points a decade), the accuracy
  the engines are held to in the time domain (a sweep has no integration error, so both
  legs are far better than that; the report lists what was measured).
- scipy.signal.freqresp on the same (A, B, C, D) matrices: a general-purpose reference
  that goes through zeros, poles and gain (scipy converts the state space to polynomials
  and their roots), a different algorithm from the stacked linear solves.
- Textbook resonance of series and parallel RLC circuits (Nilsson & Riedel, "Electric
  Circuits", chapter "Frequency-Selective Circuits", from memory): at
  w0 = 1 / sqrt(L C) the series circuit's |Z| is smallest and equals R, the parallel
  circuit's is largest and equals R, and the phase is 0 in both.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
import scipy.signal

from xcheck.circuit.expand import build_circuit
from xcheck.circuit.model import Circuit, Element
from xcheck.circuit.parameters import parameters_from_fixture
from xcheck.engines.ac_deck import AcSweep, simulate_ac_ngspice, write_ac_deck
from xcheck.engines.deck import is_xcheck_deck
from xcheck.engines.frequency import FrequencyEngine, impedance, response_matrix, transfer_function
from xcheck.engines.ngspice import run_ac_deck
from xcheck.errors import SimulationError
from xcheck.fixture.reader import load_fixture

ROOT = Path(__file__).resolve().parents[2]

#: The state-space leg against ngspice's .ac (see the module docstring).
MAGNITUDE_RTOL = 1e-4
PHASE_DEG = 0.01
#: 9 decades, 20 points a decade (more than the 6 decades asked for).
SWEEP = AcSweep(20, 1.0, 1e9)

#: (fixture, "impedance" across the probe nodes | "transfer" from the named source).
CASES = [
    ("examples/coupled_tanks.toml", "impedance", None),
    ("examples/current_probe_ringdown.toml", "transfer", "V_sense"),  # A/V, current probe
    ("examples/esl_probe_fourth_order.toml", "impedance", None),
    ("examples/film_ringdown.toml", "impedance", None),
    ("examples/lc_filter_damped_step.toml", "transfer", "V1"),  # a part name
    ("examples/lc_filter_damped_step.toml", "impedance", None),  # the 1 V drive
    ("examples/lc_filter_step.toml", "transfer", "step"),  # the step pseudo-part
    ("examples/overdamped_discharge.toml", "impedance", None),
    ("examples/parallel_rlc_ringdown.toml", "impedance", None),
    ("examples/rc_snubber_switch.toml", "transfer", "V1"),
    ("tests/data/bench_ringdown.toml", "impedance", None),
    ("tests/data/film_jig.toml", "impedance", None),
    ("tests/data/lossy_jig.toml", "impedance", None),
    ("tests/data/series_rlc.toml", "impedance", None),
]


def _case_id(case: tuple) -> str:
    return f"{Path(case[0]).stem}-{case[1]}"


def _circuit(path: str) -> Circuit:
    """The circuit of a fixture's stated values, built as engines/predict.py does."""
    fixture = load_fixture(ROOT / path)
    return build_circuit(fixture, parameters_from_fixture(fixture))


def _engine(case: tuple) -> FrequencyEngine:
    path, quantity, source = case
    circuit = _circuit(path)
    if quantity == "impedance":
        return FrequencyEngine.impedance(circuit, *circuit.probe)
    return FrequencyEngine.transfer(circuit, source)


# --------------------------------------------------------------------------------------
# ngspice .ac
# --------------------------------------------------------------------------------------


@pytest.mark.ngspice
@pytest.mark.parametrize("case", CASES, ids=_case_id)
def test_state_space_agrees_with_ngspice_ac(case: tuple) -> None:
    engine = _engine(case)
    spice = simulate_ac_ngspice(engine, SWEEP)
    # ngspice's own frequencies: 20 a decade over the whole sweep.
    assert spice.frequency[0] == pytest.approx(SWEEP.start, rel=1e-9)
    assert spice.frequency[-1] >= SWEEP.stop * (1 - 1e-6)
    assert math.log10(spice.frequency[-1] / spice.frequency[0]) >= 6
    assert spice.frequency.size >= 9 * 20
    exact = engine.response(spice.frequency)[0]
    magnitude = np.abs(np.abs(spice.response) / np.abs(exact) - 1)
    phase = np.abs(np.degrees(np.angle(spice.response / exact)))
    worst = int(np.argmax(magnitude))
    assert magnitude.max() <= MAGNITUDE_RTOL, (
        f"|H| differs by {magnitude.max():.3g} (relative) at {spice.frequency[worst]:.4g} Hz"
    )
    assert phase.max() <= PHASE_DEG, (
        f"phase differs by {phase.max():.3g} deg at {spice.frequency[np.argmax(phase)]:.4g} Hz"
    )


@pytest.mark.ngspice
def test_current_probe_sign_matches_ngspice_branch_current() -> None:
    # Below resonance the series loop is capacitive: its current leads the voltage
    # driving it round the loop by nearly 90 degrees (Nilsson & Riedel, "Electric
    # Circuits", chapter "Sinusoidal Steady-State Analysis", from memory). V_sense is
    # written "0 sense", so its ac 1 holds the loop's start at -1 V: the current in
    # loop order is then at 90 - 180 = -90 degrees. Checks the sign of both legs, not
    # only their agreement.
    engine = _engine(("examples/current_probe_ringdown.toml", "transfer", "V_sense"))
    assert engine.circuit.element("V_sense").nodes == ("0", "sense")
    spice = simulate_ac_ngspice(engine, AcSweep(1, 1.0, 10.0))
    exact = engine.response(spice.frequency)[0]
    for h in (spice.response[0], exact[0]):
        assert -90.01 < math.degrees(np.angle(h)) < -89.0


@pytest.mark.ngspice
def test_ngspice_ac_reports_a_deck_without_ac_results() -> None:
    deck = "* no analysis\nR_1 a 0 1\nI_1 0 a dc 0 ac 1\n.op\n.end\n"
    with pytest.raises(SimulationError, match="no AC results"):
        run_ac_deck(deck, probe=("a", "0"), name="no-ac")


# --------------------------------------------------------------------------------------
# The AC deck
# --------------------------------------------------------------------------------------


def test_ac_deck_drives_one_source_and_drops_initial_conditions() -> None:
    engine = _engine(("examples/rc_snubber_switch.toml", "transfer", "V1"))
    deck = write_ac_deck(engine, AcSweep(10, 10.0, 1e8))
    lines = deck.splitlines()
    assert is_xcheck_deck(deck)
    assert [line for line in lines if " ac 1" in line] == [
        line for line in lines if line.startswith("V_V1 ")
    ]
    assert lines[-2:] == [".ac dec 10 1e+01 1e+08", ".end"]
    assert "ic=" not in deck and "PULSE" not in deck and ".tran" not in deck
    assert write_ac_deck(engine, AcSweep(10, 10.0, 1e8)) == deck  # same text each time


def test_impedance_deck_adds_a_current_source_into_the_first_node() -> None:
    circuit = _circuit("examples/lc_filter_damped_step.toml")
    engine = FrequencyEngine.impedance(circuit, "out", "0")
    # The state space needs the 1 V drive here (L1 and the ESLs cut "out" off), the
    # deck keeps the 1 A source: SPICE's I n+ n- takes current out of n+, so "0 out".
    assert engine.output == "admittance"
    last = write_ac_deck(engine, SWEEP).splitlines()[-3]
    assert last.startswith("I_xcheck_ac 0 out dc 0 ac 1 ;")
    source = next(line for line in write_ac_deck(engine, SWEEP).splitlines()
                  if line.startswith("V_V1 "))
    assert " ac " not in source.split(";")[0] and " dc 0 " in source


@pytest.mark.parametrize("bad", [
    dict(points_per_decade=0, start=1.0, stop=10.0),
    dict(points_per_decade=2.5, start=1.0, stop=10.0),
    dict(points_per_decade=10, start=0.0, stop=10.0),
    dict(points_per_decade=10, start=10.0, stop=1.0),
    dict(points_per_decade=10, start=1.0, stop=math.inf),
])
def test_bad_sweeps_are_refused(bad: dict) -> None:
    with pytest.raises(SimulationError, match="AC sweep"):
        AcSweep(**bad)


# --------------------------------------------------------------------------------------
# scipy.signal.freqresp on the same matrices
# --------------------------------------------------------------------------------------


@pytest.mark.parametrize("case", CASES, ids=_case_id)
def test_state_space_agrees_with_scipy_freqresp(case: tuple) -> None:
    engine = _engine(case)
    a, b, c, d = (m[0] for m in engine.matrices())
    frequency = np.logspace(0, 9, 181)
    ours = response_matrix(a[None], b[None, :, 0], c[None, 0], d[None, 0, 0], frequency)[0]
    with warnings.catch_warnings():
        # scipy warns that the polynomial coefficients are badly conditioned for the
        # stiff fixtures; the tolerance below is what that route achieves.
        warnings.simplefilter("ignore", scipy.signal.BadCoefficients)
        _, reference = scipy.signal.freqresp((a, b, c, d), 2 * np.pi * frequency)
    # scipy's route (polynomials, then their roots) loses digits as the natural
    # frequencies spread: 1e-10 relative where cond(A) <= 1e6, 1e-8 beyond (probe
    # loading against the loop: cond(A) up to 2e9 here, measured gap 3e-9 at worst).
    tolerance = 1e-10 if np.linalg.cond(a) <= 1e6 else 1e-8
    gap = np.abs(ours - reference) / np.abs(reference)
    assert gap.max() <= tolerance, f"{gap.max():.3g} at {frequency[np.argmax(gap)]:.4g} Hz"
    if engine.output == "admittance":  # the response is the reciprocal of these matrices'
        np.testing.assert_allclose(engine.response(frequency)[0], 1 / ours, rtol=1e-13)


# --------------------------------------------------------------------------------------
# Textbook circuits
# --------------------------------------------------------------------------------------

R_, L_, C_ = 4.7, 220e-6, 10e-6
F0 = 1 / (2 * math.pi * math.sqrt(L_ * C_))


def _series_rlc() -> Circuit:
    return Circuit("series RLC", (
        Element("R_1", "R", ("a", "b"), R_),
        Element("L_1", "L", ("b", "c"), L_),
        Element("C_1", "C", ("c", "0"), C_),
    ), probe=("a", "0"))


def _parallel_rlc() -> Circuit:
    return Circuit("parallel RLC", (
        Element("R_1", "R", ("a", "0"), R_),
        Element("L_1", "L", ("a", "0"), L_),
        Element("C_1", "C", ("a", "0"), C_),
    ), probe=("a", "0"))


def test_series_rlc_impedance_is_r_at_resonance_and_smallest_there() -> None:
    frequency = np.concatenate([F0 * np.logspace(-3, 3, 601), [F0]])
    z = impedance(_series_rlc(), "a", "0", frequency)
    w = 2 * np.pi * frequency
    # Z = R + j w L + 1 / (j w C) (Nilsson & Riedel, from memory); 1e-12 relative is
    # rounding of a 2-state solve, far above double precision's 1e-16.
    np.testing.assert_allclose(z, R_ + 1j * w * L_ + 1 / (1j * w * C_), rtol=1e-12)
    assert abs(z[-1]) == pytest.approx(R_, rel=1e-12)
    assert abs(math.degrees(np.angle(z[-1]))) < 1e-9
    assert np.all(np.abs(z[:-1]) >= R_ * (1 - 1e-12))
    assert np.degrees(np.angle(z[0])) == pytest.approx(-90, abs=0.1)  # capacitive below
    assert np.degrees(np.angle(z[-2])) == pytest.approx(90, abs=0.1)  # inductive above


def test_parallel_rlc_impedance_is_r_at_resonance_and_largest_there() -> None:
    frequency = np.concatenate([F0 * np.logspace(-3, 3, 601), [F0]])
    z = impedance(_parallel_rlc(), "a", "0", frequency)
    w = 2 * np.pi * frequency
    # 1 / Z = 1 / R + j w C + 1 / (j w L) (Nilsson & Riedel, from memory).
    np.testing.assert_allclose(z, 1 / (1 / R_ + 1j * w * C_ + 1 / (1j * w * L_)), rtol=1e-12)
    assert abs(z[-1]) == pytest.approx(R_, rel=1e-12)
    assert abs(math.degrees(np.angle(z[-1]))) < 1e-9
    assert np.all(np.abs(z[:-1]) <= R_ * (1 + 1e-12))
    assert np.degrees(np.angle(z[0])) == pytest.approx(90, abs=0.1)  # inductive below


def test_resistive_divider_has_flat_response() -> None:
    # No state at all: H = D = R2 / (R1 + R2) at every frequency (Ohm's law, common
    # practice, no source); 1e-15 is rounding of one division.
    circuit = Circuit("divider", (
        Element("V_1", "V", ("in", "0"), 1.0, part="V1"),
        Element("R_1", "R", ("in", "out"), 3.0),
        Element("R_2", "R", ("out", "0"), 1.0),
    ), probe=("out", "0"))
    h = transfer_function(circuit, "V1", [0.0, 1.0, 1e6])
    np.testing.assert_allclose(h, 0.25, rtol=1e-15)


# --------------------------------------------------------------------------------------
# Batches
# --------------------------------------------------------------------------------------


@pytest.mark.parametrize("case", [CASES[4], CASES[5], CASES[0]], ids=_case_id)
def test_batched_evaluation_equals_row_by_row(case: tuple) -> None:
    engine = _engine(case)
    rng = np.random.default_rng(20240610)
    values = engine.defaults(5)
    passive = [k for k, e in enumerate(engine.swept.elements) if e.kind in "RLC"]
    values[:, passive] *= rng.uniform(0.5, 2.0, size=(5, len(passive)))
    frequency = np.logspace(1, 8, 71)
    batched = engine.response(frequency, values)
    assert batched.shape == (5, 71)
    for row in range(5):
        # The row's own circuit, built and analysed from scratch (no batch axis shared).
        elements = tuple(replace(e, value=float(values[row, k]))
                         for k, e in enumerate(engine.circuit.elements))
        alone = _rebuilt(engine, replace(engine.circuit, elements=elements))
        # 1e-12: the same LU per matrix, only the assembly's summation order differs.
        np.testing.assert_allclose(batched[row], alone.response(frequency)[0], rtol=1e-12)


def _rebuilt(engine: FrequencyEngine, circuit: Circuit) -> FrequencyEngine:
    if engine.quantity == "impedance":
        return FrequencyEngine.impedance(circuit, *engine.nodes)
    return FrequencyEngine.transfer(circuit, engine.source)


def test_long_sweeps_are_solved_in_chunks_with_the_same_result(monkeypatch) -> None:
    from xcheck.engines import frequency as module

    engine = _engine(CASES[0])
    frequency = np.logspace(0, 9, 91)
    whole = engine.response(frequency)
    monkeypatch.setattr(module, "CHUNK_ENTRIES", 1)  # one frequency per solve
    np.testing.assert_array_equal(engine.response(frequency), whole)


# --------------------------------------------------------------------------------------
# Refusals
# --------------------------------------------------------------------------------------


def test_unknown_source_is_refused_with_the_sources_listed() -> None:
    with pytest.raises(SimulationError, match=r"'V9' is not a source.*V_V1 \(part V1\)"):
        FrequencyEngine.transfer(_circuit("examples/rc_snubber_switch.toml"), "V9")


def test_impedance_needs_two_different_known_nodes() -> None:
    circuit = _series_rlc()
    with pytest.raises(SimulationError, match="not in the circuit"):
        FrequencyEngine.impedance(circuit, "a", "nowhere")
    with pytest.raises(SimulationError, match="two different nodes"):
        FrequencyEngine.impedance(circuit, "a", "a")


def test_negative_frequency_is_refused() -> None:
    with pytest.raises(SimulationError, match="non-negative"):
        impedance(_series_rlc(), "a", "0", [-1.0, 1.0])


def test_zero_hertz_with_a_floating_node_and_with_no_dc_path() -> None:
    # R across two series capacitors: at DC the capacitors are open, so Z(0) = R
    # (common practice, no source); the node between them makes A exactly singular in
    # a mode the drive cannot reach, which least squares leaves out.
    floating = Circuit("R across two series C", (
        Element("R_1", "R", ("a", "0"), R_),
        Element("C_1", "C", ("a", "m"), C_),
        Element("C_2", "C", ("m", "0"), C_),
    ), probe=("a", "0"))
    assert impedance(floating, "a", "0", [0.0])[0] == pytest.approx(R_, rel=1e-12)
    # A capacitor alone has no DC path: its impedance at 0 Hz is unbounded.
    alone = Circuit("one C", (Element("C_1", "C", ("a", "0"), C_),), probe=("a", "0"))
    with pytest.raises(SimulationError, match="no DC path"):
        impedance(alone, "a", "0", [0.0, 1.0])


def test_series_rlc_blocks_dc() -> None:
    # The series circuit's 1 V drive (the 1 A source would be in a cut set with L):
    # no current at DC, so an infinite impedance, not an error.
    engine = FrequencyEngine.impedance(_series_rlc(), "a", "0")
    assert engine.output == "admittance"
    assert np.isinf(engine.response([0.0])[0, 0])
