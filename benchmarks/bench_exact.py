"""The exact state-space engine against ngspice: time per run, vectorised.

For two circuits (the embedded demo's fixture, a series loop with probe loading; and an
invented fourth-order circuit, a charged capacitor with ESR and ESL discharged through
R1 and L1 with a capacitance across it) a seeded batch of value sets is drawn
(every R, L and C scaled by a uniform factor in 0.9 to 1.1). ngspice runs a sample of
them, one deck each through the long-lived ngspice child (deck text written before the
clock starts, so only the run and the transfer of its vectors are timed); the exact
engine evaluates the whole batch in one call (best of three) on a uniform grid over the
same run with as many points as ngspice's nominal run returned (a scope's sampling is
uniform, and that is what fits and sweeps evaluate on). The figure is ngspice's time
per run over the exact engine's time per value set; goal >= 100x. Reported beside it:
the same ratio on ngspice's own, non-uniform time points (each point then costs the
exact engine its own exponentials), and the largest difference between the two
engines on the nominal run (ngspice's accuracy target is 1e-4).

Usage: python -m benchmarks.bench_exact [--sets 1000]
"""

from __future__ import annotations

import argparse
import math
import time
from dataclasses import replace

import numpy as np

from benchmarks.table import INFO, Row, judged
from xcheck.circuit.model import Circuit, Element
from xcheck.engines.deck import deck_names, write_deck
from xcheck.engines.exact import ExactEngine
from xcheck.engines.ngspice import run_deck

SPEED_GOAL = 100.0
SEED = 20261202


def demo_circuit() -> Circuit:
    """The embedded demo's fixture at its stated values."""
    from xcheck.circuit.expand import build_circuit
    from xcheck.circuit.parameters import parameters_from_fixture
    from xcheck.demo.data import demo_fixture_path
    from xcheck.fixture.reader import load_fixture

    fixture = load_fixture(demo_fixture_path())
    return build_circuit(fixture, parameters_from_fixture(fixture))


def fourth_order_circuit() -> Circuit:
    """Invented: 1 uF with 50 mOhm ESR and 100 nH ESL, 100 nF across it (probe and
    wiring), 0.5 ohm and 20 uH discharge path, charged to 12 V: a 35 kHz ring with a
    1.6 MHz second mode."""
    return Circuit("capacitor with ESL and a capacitance across it (benchmark, invented values)", (
        Element("L_esl", "L", ("a", "b"), 100e-9, initial=0.0),
        Element("R_esr", "R", ("b", "c"), 0.05),
        Element("C_1", "C", ("c", "0"), 1e-6, initial=12.0),
        Element("C_probe", "C", ("a", "0"), 100e-9, initial=12.0),
        Element("R_1", "R", ("a", "d"), 0.5),
        Element("L_1", "L", ("d", "0"), 20e-6, initial=0.0),
    ), probe=("a", "0"))


def _scaled(circuit: Circuit, factors: np.ndarray) -> Circuit:
    elements = tuple(
        replace(e, value=e.value * f) if e.kind in "RLC" else e
        for e, f in zip(circuit.elements, factors)
    )
    return replace(circuit, elements=elements)


def _best_time(call, repeat: int = 3) -> float:
    best = math.inf
    for _ in range(repeat):
        start = time.perf_counter()
        call()
        best = min(best, time.perf_counter() - start)
    return best


def measure(circuit: Circuit, sets: int, spice_runs: int) -> tuple[float, float, float, float, int]:
    """(ngspice s per run, exact s per value set on a uniform grid, the same on
    ngspice's time points, largest |difference| over the response's scale on the
    nominal run, output points per run)."""
    rng = np.random.default_rng(SEED)
    factors = rng.uniform(0.9, 1.1, size=(sets, len(circuit.elements)))
    names = deck_names(circuit)
    nominal = run_deck(write_deck(circuit), probe=names.probe, name=circuit.title)
    times = nominal.time
    decks = [write_deck(_scaled(circuit, factors[k])) for k in range(spice_runs)]
    start = time.perf_counter()
    for deck in decks:
        run_deck(deck, probe=names.probe, name=circuit.title)
    spice_per_run = (time.perf_counter() - start) / spice_runs

    engine = ExactEngine(circuit)
    values, initials = engine.defaults(sets)
    values = values * np.where([e.kind in "RLC" for e in engine.topology.elements], factors, 1.0)
    uniform = np.linspace(0.0, float(times[-1]), times.size)
    engine.response(times[:10], values[:2], initials[:2])  # warm-up (imports, caches)
    exact_per_set = _best_time(lambda: engine.response(uniform, values, initials)) / sets
    own_points = _best_time(lambda: engine.response(times, values, initials), 1) / sets
    exact_nominal = engine.response(times)[0]
    scale = float(np.max(np.abs(exact_nominal))) or 1.0
    gap = float(np.max(np.abs(exact_nominal - nominal.probe_voltage))) / scale
    return spice_per_run, exact_per_set, own_points, gap, int(times.size)


def rows(sets: int = 1000, spice_runs: int = 20) -> list[Row]:
    """Rows ``d-*`` of the benchmark table."""
    out = []
    for key, make in (("d-demo", demo_circuit), ("d-fourth-order", fourth_order_circuit)):
        circuit = make()
        spice, exact, own, gap, points = measure(circuit, sets, spice_runs)
        ratio = spice / exact
        reason = ""
        if ratio < SPEED_GOAL:
            reason = ("; likely reason: " + (
                f"a batch of {sets} does not amortise the engine's fixed cost per call"
                if sets < 100 else
                "the run returns many time points, each costing the exact engine memory "
                "traffic, while ngspice's cost per point falls on long runs"))
        out.append(Row(
            key, f"exact engine vs ngspice, time per run ({circuit.title})", f">= {SPEED_GOAL:g}x",
            f"one ngspice run of the same circuit ({spice_runs} runs timed)", f"{ratio:.1f}x",
            judged(ratio >= SPEED_GOAL),
            f"ngspice {spice * 1e3:.2f} ms per run; exact engine {exact * 1e6:.1f} µs per value "
            f"set, {sets} sets in one call, {points} uniform time points each (as many as "
            f"ngspice returned); on ngspice's own time points {own * 1e6:.0f} µs per set "
            f"({spice / own:.0f}x){reason}",
        ))
        out.append(Row(
            f"{key}-agreement", "exact engine vs ngspice, largest difference (nominal run)",
            "none (reported)", "the response's largest |value|", f"{gap:.2e}", INFO,
            "ngspice's automatic step targets 1e-4 of the response's scale",
        ))
    return out


def main(argv: list[str] | None = None) -> int:
    """Print the rows."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sets", type=int, default=1000)
    args = parser.parse_args(argv)
    for row in rows(args.sets):
        print(row.line())
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
