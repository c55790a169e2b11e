"""Transient time step and stop time derived from a circuit's natural modes.

The deck uses the trapezoidal method: it adds no numerical damping (gear's damping
would bias any loss fitted from the result). Its one error is a phase error: per step
of length h a mode exp(s t) is multiplied by (1 + s h / 2) / (1 - s h / 2), which is
exp(s h - (s h)^3 / 12 + ...). After a time t the mode has therefore drifted by about
``A s^3 h^2 t exp(s t) / 12`` volts, where ``A`` is its amplitude in the probe voltage
(a standard result on the trapezoidal rule's local truncation error, e.g. Hairer &
Wanner, "Solving Ordinary Differential Equations", from memory).

:func:`transient_settings` bounds that drift over every significant mode at its worst
time within the run and picks the largest ``h`` that keeps it within half of the
accuracy target (:data:`RESOLVED_SHARE`; a quarter is left for ignored modes and the
rest for ngspice's first, backward-Euler step and its own step control). Two groups of
modes are bounded differently:

- ringing modes (``|Im s| > |Re s|``, damping ratio below 1/sqrt(2)): each by
  ``|A| |s|^3 max_t(t exp(Re(s) t)) / 12``; their drift accumulates as a phase error
  over many periods, and the bound is what one lightly damped mode reaches;
- well-damped modes (the rest: decays that do not ring, or hardly): by the largest
  value of their signed sum ``|t sum_k A_k s_k^3 exp(s_k t)| / 12`` on a fine time grid.
  Near critical damping their amplitudes are large and cancel (the response is
  ``(1 + a t) exp(-a t)``, not two separate decays), and adding their sizes would
  overstate the drift.

A well-damped mode that dies out within one maximum step (``|Re s| h > 1``) does not
bound the step at all: ngspice's own truncation-error control (tight with the deck's
``reltol``) starts the run with steps far below the maximum and holds them there
while such a fast decay is large (observed: at damping ratio 5 the steps reach the
maximum only after eighteen of the fast mode's time constants), so it is resolved
without the maximum step's help (benchmarks row (c) measures the error that results).

Modes whose whole amplitude is below a small share of the target are insignificant:
even if the step does not resolve them at all, their error cannot exceed twice their
amplitude (the trapezoidal rule never amplifies a decaying mode), so they do not force
a tiny step (a probe's few picofarads, a winding capacitance).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from xcheck.circuit.model import Circuit
from xcheck.engines.statespace import NaturalModes, natural_modes, probe_map, state_space

#: Accuracy aimed at: largest error in the probe voltage relative to the reference
#: voltage (initial capacitor voltage or step).
TARGET_RELATIVE_ERROR = 1e-4
#: Share of the target spent on resolved modes and on ignored (insignificant) modes.
RESOLVED_SHARE = 0.5
IGNORED_SHARE = 0.25
#: A well-damped mode decaying by more than e within one maximum step is left to
#: ngspice's own step control (see the module docstring).
FAST_DECAY_PER_STEP = 1.0
#: Points of the time grid on which the well-damped modes' drift is maximised.
DRIFT_GRID = 4000
#: Most points a run may take; beyond this the step is widened (and a note says so).
#: 250 000 points keep one ngspice run near two seconds and its vectors near 6 MB.
MAX_POINTS = 250_000
#: Default length of a run: this many time constants of the slowest decaying mode,
#: extended towards MIN_PERIODS periods of a ringing mode (at most twice as many
#: time constants).
DECAY_TIME_CONSTANTS = 5.0
MIN_PERIODS = 10.0
#: Relative size below which a computed probe value is round-off (double precision
#: with a few operations' growth).
ROUND_OFF = 1e-12


@dataclass(frozen=True)
class TransientSettings:
    """Arguments of the deck's ``.tran`` line (seconds) and the integration method.

    Attributes
    ----------
    step
        Print step (``tstep``).
    stop
        End of the run (``tstop``).
    max_step
        Largest internal step ngspice may take (``tmax``).
    method
        ``"trap"`` (trapezoidal).
    notes
        Plain-words remarks, e.g. when the point cap widened the step.
    """

    step: float
    stop: float
    max_step: float
    method: str = "trap"
    notes: tuple[str, ...] = field(default=(), compare=False)

    @property
    def points(self) -> int:
        """Approximate number of time points of the run at the largest step."""
        return int(math.ceil(self.stop / self.max_step))


def transient_settings(circuit: Circuit, *, stop_time: float | None = None) -> TransientSettings:
    """Choose the ``.tran`` step, maximum step and stop time for ``circuit``.

    Parameters
    ----------
    circuit
        The circuit to simulate (its probe defines which modes matter).
    stop_time
        End of the run in seconds (e.g. the length of a measured trace). Default: five
        time constants of the slowest decaying significant mode, extended
        towards ten periods of the slowest ringing one but not beyond ten time
        constants; ten periods when nothing decays; all of it after the last time a
        source switches (a delayed step's or a pulse's edges).

    Returns
    -------
    TransientSettings
        ``max_step`` keeps the trapezoidal phase error of the probe voltage within
        ``RESOLVED_SHARE * TARGET_RELATIVE_ERROR`` of the reference voltage (a
        well-damped mode that decays within one step left to ngspice's own step
        control, see the module docstring); ``step``
        equals ``max_step``. When that would exceed ``MAX_POINTS`` points, the step is
        widened to ``stop / MAX_POINTS`` and ``notes`` says the accuracy target may be
        missed.
    """
    if stop_time is not None and not (math.isfinite(stop_time) and stop_time > 0):
        raise ValueError(f"stop_time must be a positive number of seconds, got {stop_time!r}")
    modes = natural_modes(circuit)
    poles = modes.poles
    reference = reference_voltage(circuit, modes)
    notes: list[str] = []
    if poles.size == 0:
        stop = stop_time if stop_time is not None else 1e-6
        notes.append("the circuit stores no energy; the run length is arbitrary")
        return TransientSettings(stop / 100, stop, stop / 100, notes=tuple(notes))

    amplitude = _clipped_amplitudes(circuit, modes, reference)
    significant = _significant(amplitude, IGNORED_SHARE * TARGET_RELATIVE_ERROR * reference)
    stop = (
        stop_time if stop_time is not None
        else last_switch(circuit) + _default_stop(poles[significant])
    )
    budget = RESOLVED_SHARE * TARGET_RELATIVE_ERROR * reference
    max_step = _max_step(poles, modes.amplitudes, amplitude, significant, stop, budget)
    if stop / max_step > MAX_POINTS:
        notes.append(
            f"the step needed for a {TARGET_RELATIVE_ERROR:g} relative accuracy "
            f"({max_step:.3e} s) would take {stop / max_step:.3g} points; it was widened "
            f"to {stop / MAX_POINTS:.3e} s ({MAX_POINTS} points), so the accuracy target "
            "may be missed"
        )
        max_step = stop / MAX_POINTS
    return TransientSettings(max_step, stop, max_step, notes=tuple(notes))


def _max_step(poles: np.ndarray, amplitudes: np.ndarray, clipped: np.ndarray,
              significant: np.ndarray, stop: float, budget: float) -> float:
    """Largest step (s, at most ``stop / 100``) whose trapezoidal drift over the
    significant modes stays within ``budget`` (volts), leaving out the fastest
    well-damped modes when each of them then decays by more than
    ``FAST_DECAY_PER_STEP`` e-folds within the step (tried for every count left out:
    the largest step so consistent is taken)."""
    well_damped = np.abs(poles.imag) <= np.abs(poles.real)
    candidates = np.flatnonzero(significant & well_damped)
    fastest_first = candidates[np.argsort(poles[candidates].real)]
    best = 0.0
    for count in range(fastest_first.size + 1):
        kept = significant.copy()
        kept[fastest_first[:count]] = False
        rate = _drift_rate(poles, amplitudes, clipped, kept & ~well_damped,
                           kept & well_damped, stop)
        max_step = math.sqrt(budget / rate) if rate > 0 else stop / 100
        max_step = min(max_step, stop / 100)
        left = poles[fastest_first[:count]]
        if np.all(-left.real * max_step > FAST_DECAY_PER_STEP):
            best = max(best, max_step)
    return best


def _drift_rate(poles: np.ndarray, amplitudes: np.ndarray, clipped: np.ndarray,
                ringing: np.ndarray, damped: np.ndarray, stop: float) -> float:
    """Largest drift over the run divided by h^2 (volts per s^2): the ringing modes'
    bounds ``|A| |s|^3 max_t(t e^{Re s t}) / 12`` added, plus the largest
    ``|t sum_k A_k s_k^3 e^{s_k t}| / 12`` of the well-damped modes on a time grid
    (their clipped sizes added instead when an amplitude is not finite: a defective
    eigenvector basis at exactly repeated poles)."""
    rate = 0.0
    for pole, size in zip(poles[ringing], clipped[ringing]):
        rate += size * abs(pole) ** 3 * _worst_time(pole.real, stop) / 12.0
    if not damped.any():
        return rate
    s, a = poles[damped], amplitudes[damped]
    if not np.all(np.isfinite(a)):
        for pole, size in zip(s, clipped[damped]):
            rate += size * abs(pole) ** 3 * _worst_time(pole.real, stop) / 12.0
        return rate
    fastest = float(np.max(np.abs(s)))
    start = min(1e-3 / fastest, stop / DRIFT_GRID) if fastest > 0 else stop / DRIFT_GRID
    t = np.geomspace(start, stop, DRIFT_GRID)
    drift = t * np.real(np.exp(np.outer(t, s)) @ (a * s**3))
    return rate + float(np.max(np.abs(drift))) / 12.0


def last_switch(circuit: Circuit) -> float:
    """The last time (s) a source switches after t = 0 (a delayed step's switch-on, a
    pulse's switch-off); 0 when none does."""
    times = [0.0]
    for element in circuit.elements:
        if element.kind in ("V", "I") and element.timing != "dc":
            times.append(element.t_on)
            if element.t_off is not None:
                times.append(element.t_off)
    return max(times)


def reference_voltage(circuit: Circuit, modes: NaturalModes | None = None) -> float:
    """The size of the probed signal an engine's accuracy is relative to (its target
    here, the engines' difference in ``xcheck simulate``), in the probe's unit
    (:attr:`~xcheck.circuit.model.Circuit.probe_unit`).

    For a voltage probe: the largest initial capacitor voltage, voltage source's value,
    initial or final probe voltage. For a current probe: the largest current source's
    value, initial or final probed current. When all are zero (a circuit started by an
    inductor current alone, a current source probed as a voltage) the peak of the probed
    signal; 1 when that is zero too. ``modes``: the circuit's natural modes, when
    already known.
    """
    modes = natural_modes(circuit) if modes is None else modes
    # Computed values at round-off level of the modes' sizes count as zero (a probe
    # that settles to 0 V comes back as 1e-16 V).
    noise = ROUND_OFF * float(np.sum(np.abs(modes.amplitudes[np.isfinite(modes.amplitudes)])))
    candidates = [v for v in (abs(modes.initial), abs(modes.steady)) if v > noise]
    amperes = circuit.probe_unit == "A"
    for element in circuit.elements:
        if element.kind == "C" and element.initial is not None and not amperes:
            candidates.append(abs(element.initial))
        elif element.kind == ("I" if amperes else "V"):
            candidates.append(abs(element.value))
    reference = max(candidates, default=0.0)
    if reference > 0:
        return reference
    peak = float(np.max(np.abs(_probe_samples(circuit, _default_stop(modes.poles)))))
    return peak if peak > 0 else 1.0


def _probe_samples(circuit: Circuit, stop: float, count: int = 4001) -> np.ndarray:
    """Exact probed signal on a uniform grid (matrix exponential of the state model,
    every source on from t = 0), used only to size the response; it stays finite at
    repeated poles."""
    model = state_space(circuit)
    probe = probe_map(model, circuit)
    steady_state = model.steady_state()
    step = scipy.linalg.expm(model.a * (stop / (count - 1)))
    x = model.x0 - steady_state
    out = np.empty(count)
    offset = float(probe.x_coef @ steady_state + probe.u_coef @ model.u)
    for k in range(count):
        out[k] = probe.x_coef @ x + offset
        x = step @ x
    return out


def _clipped_amplitudes(circuit: Circuit, modes, reference: float) -> np.ndarray:
    """|amplitude| of each mode, clipped to the size of the response: near critical
    damping the eigenvector amplitudes are huge and cancel, while the modes' true
    contribution is of the order of the response itself."""
    amplitude = np.abs(modes.amplitudes)
    amplitude[~np.isfinite(amplitude)] = np.inf
    if np.any(amplitude > reference):
        stop = _default_stop(modes.poles)
        peak = float(np.max(np.abs(_probe_samples(circuit, stop) - modes.steady)))
        amplitude = np.minimum(amplitude, max(peak, reference))
    return amplitude


def _significant(amplitude: np.ndarray, allowance: float) -> np.ndarray:
    """Mask of modes that must be resolved: the smallest modes are ignored while their
    summed worst-case error (twice their amplitude) stays within ``allowance``."""
    mask = np.ones(amplitude.size, dtype=bool)
    spent = 0.0
    for index in np.argsort(amplitude):
        cost = 2.0 * amplitude[index]
        if spent + cost > allowance:
            break
        spent += cost
        mask[index] = False
    return mask


def _worst_time(decay: float, stop: float) -> float:
    """max over 0 <= t <= stop of t * exp(decay * t)."""
    if decay >= 0:
        return stop * math.exp(decay * stop)
    peak_time = min(-1.0 / decay, stop)
    return peak_time * math.exp(decay * peak_time)


def _default_stop(poles: np.ndarray) -> float:
    """Default run length: five time constants of the slowest decaying mode, extended
    towards ten periods of the slowest ringing mode but never beyond ten time constants
    (by then the response is below 5e-5 of its start); ten periods when nothing decays."""
    if poles.size == 0:
        return 1e-6
    decaying = poles[poles.real < 0]
    ringing = poles[np.abs(poles.imag) > 0]
    periods = (
        MIN_PERIODS * 2 * math.pi / float(np.min(np.abs(ringing.imag))) if ringing.size else 0.0
    )
    if decaying.size:
        tau = 1.0 / float(np.min(-decaying.real))
        return max(DECAY_TIME_CONSTANTS * tau, min(periods, 2 * DECAY_TIME_CONSTANTS * tau))
    if periods:
        return periods
    return 1.0 / float(np.max(np.abs(poles))) if np.any(poles) else 1e-3
