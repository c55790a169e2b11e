"""ngspice against the closed form: accuracy and economy of the automatic time step.

For a series RLC loop (invented values: L = 1 mH, C = 1 uF, R set by the damping ratio
zeta = R / (2 sqrt(L / C)); the capacitor charged to 1 V, no current at t = 0, probe
across C) the deck xcheck writes is run in ngspice and compared with the closed-form
natural response (:func:`xcheck.engines.theory.series_rlc_response`; the textbook
second-order solution) on ngspice's own time points; and the same for the invented
fourth-order circuit of row (d) (:func:`benchmarks.bench_exact.fourth_order_circuit`: a
charged capacitor with ESR and ESL, a capacitance across it, an R-L discharge path),
compared with the exact state-space response (:class:`xcheck.engines.exact.ExactEngine`,
the matrix-exponential modal sum, evaluated on ngspice's points). Figures per case:

- the largest error as a fraction of the response's scale (the reference voltage of
  :func:`xcheck.engines.timing.reference_voltage`, the scale the step is chosen for),
  goal <= 1e-4;
- the number of time points ngspice returned, against the fewest that still meet 1e-4,
  found by bisecting (on a log scale) the maximum step written into the ``.tran`` line;
  goal <= 2x.

Usage: python -m benchmarks.bench_ngspice [--iterations 10]
"""

from __future__ import annotations

import argparse
import math
import re
from collections.abc import Callable

import numpy as np

from benchmarks.bench_exact import fourth_order_circuit
from benchmarks.table import Row, judged
from xcheck.circuit.model import Circuit, Element
from xcheck.engines.deck import deck_names, spice_number, write_deck
from xcheck.engines.exact import ExactEngine
from xcheck.engines.ngspice import run_deck
from xcheck.engines.theory import series_rlc_response
from xcheck.engines.timing import reference_voltage, transient_settings

ZETAS = (0.01, 0.1, 1.0, 5.0)
INDUCTANCE = 1e-3
CAPACITANCE = 1e-6
ERROR_GOAL = 1e-4
POINTS_GOAL = 2.0
_TRAN = re.compile(r"^\.tran .*$", re.MULTILINE)


def series_rlc(zeta: float) -> Circuit:
    """The invented series RLC loop with damping ratio ``zeta``."""
    resistance = 2.0 * zeta * math.sqrt(INDUCTANCE / CAPACITANCE)
    return Circuit(
        f"series RLC, zeta {zeta:g} (benchmark, invented values)",
        (
            Element("R_1", "R", ("n1", "n2"), resistance),
            Element("L_1", "L", ("n2", "0"), INDUCTANCE, initial=0.0),
            Element("C_1", "C", ("n1", "0"), CAPACITANCE, initial=1.0),
        ),
        probe=("n1", "0"),
    )


#: The reference response of a case on given times (s -> V).
Reference = Callable[[np.ndarray], np.ndarray]


def closed_form(zeta: float) -> Reference:
    """The series loop's textbook natural response (capacitor voltage) at ``zeta``."""
    resistance = 2.0 * zeta * math.sqrt(INDUCTANCE / CAPACITANCE)
    return lambda times: series_rlc_response(times, resistance, INDUCTANCE, CAPACITANCE,
                                             v0=1.0).capacitor_voltage


def exact_response(circuit: Circuit) -> Reference:
    """The exact state-space response of ``circuit``'s probe at its stated values."""
    engine = ExactEngine(circuit)
    return lambda times: engine.response(times)[0]


def relative_error(circuit: Circuit, deck: str, exact: Reference) -> tuple[float, int]:
    """(max |ngspice - reference| / reference voltage, number of time points)."""
    names = deck_names(circuit)
    waveform = run_deck(deck, probe=names.probe, current_sense=names.current_sense, name=circuit.title)
    error = float(np.max(np.abs(waveform.probe_voltage - exact(waveform.time))))
    return error / reference_voltage(circuit), int(waveform.time.size)


def with_max_step(deck: str, stop: float, max_step: float) -> str:
    """``deck`` with its ``.tran`` line replaced: print step = maximum step = ``max_step``."""
    step = spice_number(max_step)
    return _TRAN.sub(f".tran {step} {spice_number(stop)} 0 {step} uic", deck, count=1)


def fewest_points(circuit: Circuit, deck: str, exact: Reference, stop: float, start: float,
                  start_error: float, start_points: int,
                  iterations: int) -> tuple[int | None, float | None]:
    """Fewest time points meeting ERROR_GOAL, by bisection of the maximum step.

    Bisects log(max_step) between a step known to meet the goal (the automatic
    ``start`` when its error ``start_error`` does, else ``start / 4``) and
    ``min(64 start, stop / 10)``, assuming the error grows with the step; returns
    (points, max_step) of the largest step found that meets the goal, or (None, None)
    when even ``start / 4`` does not.
    """
    high = min(64.0 * start, stop / 10.0)
    error, points = relative_error(circuit, with_max_step(deck, stop, high), exact)
    if error <= ERROR_GOAL:
        return points, high
    if start_error <= ERROR_GOAL:
        low, best = start, (start_points, start)
    else:
        low = start / 4.0
        error, points = relative_error(circuit, with_max_step(deck, stop, low), exact)
        if error > ERROR_GOAL:
            return None, None
        best = (points, low)
    for _ in range(iterations):
        middle = math.sqrt(low * high)
        error, points = relative_error(circuit, with_max_step(deck, stop, middle), exact)
        if error <= ERROR_GOAL:
            low, best = middle, (points, middle)
        else:
            high = middle
    return best


def _points_reason(zeta: float | None) -> str:
    """Why the automatic step uses more points than needed (for a missed row)."""
    if zeta is None:
        return (
            "the step rule bounds every mode's drift over the whole run, and the fast "
            "second mode, which dies out early, sets the step throughout"
        )
    if zeta < 1.0:
        return (
            "the step rule spends only RESOLVED_SHARE (a quarter) of the 1e-4 budget on the "
            "trapezoidal phase drift, which grows as step^2, so it takes twice the points the "
            "whole budget would"
        )
    return (
        "the step rule bounds the drift by |s|^3 of every mode, written for ringing; for "
        "non-oscillating decays (zeta >= 1) the fast mode dies out early and the bound is "
        "pessimistic"
    )


def cases() -> list[tuple[str, str, Circuit, Reference, float | None]]:
    """(key, words, circuit, reference, zeta or None) of every case."""
    out: list[tuple[str, str, Circuit, Reference, float | None]] = [
        (f"{zeta:g}", f"series RLC zeta {zeta:g}", series_rlc(zeta), closed_form(zeta), zeta)
        for zeta in ZETAS
    ]
    fourth = fourth_order_circuit()
    out.append(("fourth-order", "the fourth-order example of row d", fourth,
                exact_response(fourth), None))
    return out


def rows(iterations: int = 10) -> list[Row]:
    """Error and points rows per case.

    Parameters
    ----------
    iterations
        Bisection steps for the fewest points (each one ngspice run).

    Returns
    -------
    list of Row
        Per case (each zeta, then the fourth-order example): the relative error, then
        the points against the fewest.
    """
    out: list[Row] = []
    for key, words, circuit, exact, zeta in cases():
        reference = ("closed-form response" if zeta is not None
                     else "exact state-space response")
        settings = transient_settings(circuit)
        deck = write_deck(circuit)
        error, points = relative_error(circuit, deck, exact)
        out.append(Row(
            f"c-error-{key}", f"ngspice max error, {words}, automatic step",
            f"<= {ERROR_GOAL:g}", f"{reference}; error over the response's scale (reference voltage)",
            f"{error:.2e}", judged(error <= ERROR_GOAL),
            f"maximum step {settings.max_step:.3e} s, stop {settings.stop:.3e} s, {points} points"
            + ("" if error <= ERROR_GOAL else "; likely reason: the step rule's error estimate "
               "(trapezoidal phase drift) misses another error term here"),
        ))
        fewest, step = fewest_points(
            circuit, deck, exact, settings.stop, settings.max_step, error, points, iterations
        )
        label = f"ngspice time points, {words}"
        if fewest is None:
            out.append(Row(
                f"c-points-{key}", label,
                f"<= {POINTS_GOAL:g}x", "fewest points meeting 1e-4 (bisection of the maximum step)",
                "n/a", "missed", f"neither the automatic step nor a quarter of it met 1e-4 ({points} points used)",
            ))
            continue
        ratio = points / fewest
        out.append(Row(
            f"c-points-{key}", label,
            f"<= {POINTS_GOAL:g}x", "fewest points meeting 1e-4 (bisection of the maximum step)",
            f"{ratio:.3f}x", judged(ratio <= POINTS_GOAL),
            f"{points} used, fewest {fewest} at maximum step {step:.3e} s ({iterations} bisection steps)"
            + ("" if ratio <= POINTS_GOAL else "; likely reason: " + _points_reason(zeta)),
        ))
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--iterations", type=int, default=10)
    args = parser.parse_args()
    for row in rows(args.iterations):
        print(row.line())


if __name__ == "__main__":
    main()
