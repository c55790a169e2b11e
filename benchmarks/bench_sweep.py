"""Sweep throughput: ngspice runs per second per worker on the local pool, against a
bare loop of the same runs in one process.

The work (invented): the embedded demo's circuit with every R, L and C scaled by a
seeded uniform factor in 0.9 to 1.1, one ngspice transient per value set
(:func:`xcheck.engines.ngspice.simulate_ngspice`, its waveform returned to the caller),
as a tolerance Monte Carlo would run it. The bare loop runs the list in this process
through the module's long-lived ngspice child; the sweep runs the same list through
:func:`xcheck.sweep.executors.open_executor` with one worker per available CPU (each with
its own ngspice child). Both are timed after a warm-up (one run in the loop; one task per
worker in the pool, so the processes and their ngspice are up), so the figure is the
steady state: (sweep runs per second / workers) / (bare runs per second); goal >= 0.8.

Usage: python -m benchmarks.bench_sweep [--runs 200]
"""

from __future__ import annotations

import argparse
import time
from dataclasses import replace

import numpy as np

from benchmarks.table import SKIPPED, Row, judged
from xcheck.circuit.model import Circuit

GOAL = 0.8
SEED = 20261203


def circuits(count: int) -> list[Circuit]:
    """``count`` seeded variants of the demo's circuit (every R, L, C times 0.9-1.1)."""
    from benchmarks.bench_exact import demo_circuit

    base = demo_circuit()
    rng = np.random.default_rng(SEED)
    out = []
    for factors in rng.uniform(0.9, 1.1, size=(count, len(base.elements))):
        elements = tuple(replace(e, value=e.value * f) if e.kind in "RLC" else e
                         for e, f in zip(base.elements, factors))
        out.append(replace(base, elements=elements))
    return out


def simulate(circuit: Circuit) -> tuple[np.ndarray, np.ndarray]:
    """One sweep run: (time, probe voltage) from ngspice."""
    from xcheck.engines.ngspice import simulate_ngspice

    wave = simulate_ngspice(circuit)
    return wave.time, wave.probe_voltage


def measure(runs: int, workers: int) -> tuple[float, float, int]:
    """(bare runs per second, sweep runs per second, failed sweep runs)."""
    from xcheck.sweep.executors import TaskError, open_executor

    work = circuits(runs + workers)
    warm, timed = work[:workers], work[workers:]
    simulate(warm[0])
    start = time.perf_counter()
    for circuit in timed:
        simulate(circuit)
    bare = runs / (time.perf_counter() - start)
    with open_executor(workers=workers) as executor:
        executor.map(simulate, warm)
        start = time.perf_counter()
        results = executor.map(simulate, timed)
        sweep = runs / (time.perf_counter() - start)
    return bare, sweep, sum(isinstance(r, TaskError) for r in results)


def rows(runs: int = 200) -> list[Row]:
    """Row ``g-sweep`` of the benchmark table."""
    from xcheck.sweep.executors import available_cpus

    workers = available_cpus()
    figure = "sweep of ngspice runs on the local pool, runs per second per worker"
    reference = "a bare loop of the same runs in one process"
    if workers < 2:
        return [Row("g-sweep", figure, f">= {GOAL:g}x", reference, "", SKIPPED,
                    "one CPU available: the pool would run in-process")]
    bare, sweep, failed = measure(runs, workers)
    ratio = sweep / workers / bare
    reason = "" if ratio >= GOAL else (
        "; likely reason: other work on the machine takes CPU time from the workers, or the "
        "runs are too short for the per-task cost of sending the work and its waveform "
        "between processes")
    return [Row(
        "g-sweep", figure, f">= {GOAL:g}x", reference, f"{ratio:.2f}x", judged(ratio >= GOAL),
        f"{workers} workers: {sweep:.1f} runs/s against {bare:.1f} runs/s in the loop "
        f"({runs} runs of the demo circuit scaled 0.9-1.1, after a warm-up; "
        f"{failed} failed){reason}")]


def main(argv: list[str] | None = None) -> int:
    """Print the row."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=200)
    args = parser.parse_args(argv)
    for row in rows(args.runs):
        print(row.line())
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
