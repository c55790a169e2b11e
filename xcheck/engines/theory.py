"""Closed-form circuit theory: series RLC, RC and RL responses.

A series loop of resistors, inductors, capacitors and DC sources reduces to one
resistance R (the sum), one inductance L (the sum) and one capacitance C (the series
combination), optionally with a resistance Rp across the single capacitor (leakage).
The capacitor voltage v and loop current i then obey (KVL and KCL; textbook form as in
Nilsson & Riedel, "Electric Circuits", chapter "Natural and Step Responses of RLC
Circuits", from memory)

    v'' + 2 alpha v' + omega0^2 v = E / (L C),
    2 alpha = R / L + 1 / (Rp C),    omega0^2 = (1 + R / Rp) / (L C),

with E the source voltage driving the loop. Writing x = v - v_final and
beta^2 = alpha^2 - omega0^2, every regime is one formula

    x(t) = exp(-alpha t) [x0 ch(t) + (x0' + alpha x0) sh(t)],
    ch = cosh(beta t), sh = sinh(beta t) / beta     (overdamped, beta^2 > 0)
    ch = cos(wd t),    sh = sin(wd t) / wd          (underdamped, wd^2 = -beta^2)

which tends to the critically damped (1 + alpha t) form as beta -> 0. It is evaluated
without cancellation near critical damping (sh = t sinc(...), and for the overdamped
case the two exponentials are combined with expm1) and without overflow for strong
damping (the slow root is computed as -omega0^2 / (alpha + beta)).

The voltage across a part holding ESR and ESL besides its capacitance is
v + R_esr i + L_esl di/dt, exact for a series loop; di/dt is also closed form.
Things that do not fit the reduction (capacitance across a part such as a probe or a
winding's self-capacitance, a resistance across more than the capacitor) are neglected
only when the circuit's full natural frequencies (from :mod:`xcheck.engines.statespace`)
show their effect is tiny; the estimated effect is written into ``Waveform.notes``.
Otherwise :class:`TheoryNotApplicable` says why.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import networkx as nx
import numpy as np

from xcheck.circuit.model import Circuit, Element
from xcheck.engines.statespace import natural_modes
from xcheck.errors import SimulationError
from xcheck.engines.waveform import Waveform

Regime = Literal["underdamped", "critically damped", "overdamped", "first order"]

#: |zeta - 1| below this is reported as critically damped (the formulas are continuous
#: through critical damping, so this only affects the word shown).
CRITICAL_BAND = 1e-6
#: A neglected element is "tiny" when it moves the reduced model's natural frequencies
#: by less than this fraction ...
NEGLECT_POLE_SHIFT = 1e-3
#: ... and the modes it adds carry less than this fraction of the reference voltage.
NEGLECT_AMPLITUDE = 1e-3
#: Agreement between the reduced and the full natural frequencies expected of an exact
#: reduction (double rounding in an eigenvalue problem, with margin).
EXACT_POLE_MATCH = 1e-6


class TheoryNotApplicable(SimulationError):
    """The circuit does not reduce to a first- or second-order series loop."""


@dataclass(frozen=True)
class SecondOrder:
    """The reduced loop and its characteristic numbers (SI units).

    Attributes
    ----------
    resistance, inductance, capacitance
        Series sums (R, L) and series combination (C); ``capacitance`` is ``inf`` for
        an RL loop, ``inductance`` is 0 for an RC loop.
    alpha
        Neper frequency (1/s): decay rate of the envelope, R/(2L) + 1/(2 Rp C).
    omega0
        Undamped natural frequency (rad/s), sqrt((1 + R/Rp)/(L C)); NaN for first order.
    omega_d
        Damped natural frequency (rad/s), sqrt(omega0^2 - alpha^2); 0 unless underdamped.
    zeta
        Damping ratio alpha / omega0; NaN for first order.
    q
        Quality factor omega0 / (2 alpha) = 1 / (2 zeta); inf when lossless.
    regime
        ``"underdamped"``, ``"critically damped"``, ``"overdamped"`` or ``"first order"``.
    shunt_resistance
        Resistance across the capacitor (leakage), ``inf`` when none.
    time_constant
        For first order, L/R or the RC time constant (s); NaN otherwise.
    """

    resistance: float
    inductance: float
    capacitance: float
    alpha: float
    omega0: float
    omega_d: float
    zeta: float
    q: float
    regime: Regime
    shunt_resistance: float = math.inf
    time_constant: float = math.nan

    @property
    def f_d(self) -> float:
        """Damped ringing frequency in Hz (omega_d / 2 pi)."""
        return self.omega_d / (2 * math.pi)


def second_order(
    resistance: float,
    inductance: float,
    capacitance: float,
    shunt_resistance: float = math.inf,
) -> SecondOrder:
    """Characteristic numbers of a series RLC loop, optionally with Rp across C.

    Parameters
    ----------
    resistance, inductance, capacitance
        Series R (ohm, >= 0), L (H, > 0) and C (F, > 0).
    shunt_resistance
        Resistance across the capacitor (ohm, > 0); ``inf`` for none.

    Returns
    -------
    SecondOrder
    """
    conductance = 0.0 if math.isinf(shunt_resistance) else 1.0 / shunt_resistance
    alpha = 0.5 * (resistance / inductance + conductance / capacitance)
    omega0 = math.sqrt((1.0 + resistance * conductance) / (inductance * capacitance))
    zeta = alpha / omega0
    if abs(zeta - 1.0) <= CRITICAL_BAND:
        regime: Regime = "critically damped"
    elif zeta < 1.0:
        regime = "underdamped"
    else:
        regime = "overdamped"
    omega_d = math.sqrt(max(omega0**2 - alpha**2, 0.0)) if regime == "underdamped" else 0.0
    q = omega0 / (2 * alpha) if alpha > 0 else math.inf
    return SecondOrder(
        resistance, inductance, capacitance, alpha, omega0, omega_d, zeta, q, regime,
        shunt_resistance,
    )


@dataclass(frozen=True)
class SeriesResponse:
    """Closed-form response of a reduced loop on a time axis.

    Attributes
    ----------
    capacitor_voltage
        Voltage across the (series-combined) capacitance, in the loop direction (V).
    current
        Loop current (A).
    current_rate
        di/dt (A/s), for the voltage across series inductance.
    """

    capacitor_voltage: np.ndarray
    current: np.ndarray
    current_rate: np.ndarray

    def across(self, resistance: float = 0.0, inductance: float = 0.0) -> np.ndarray:
        """Voltage across the capacitance in series with ``resistance`` (ESR) and
        ``inductance`` (ESL): v + R i + L di/dt."""
        return self.capacitor_voltage + resistance * self.current + inductance * self.current_rate


def _damped_basis(
    time: np.ndarray, alpha: np.ndarray | float, omega0_sq: np.ndarray | float
) -> tuple[np.ndarray, np.ndarray]:
    """exp(-alpha t) ch(t) and exp(-alpha t) sh(t) for every regime (see module notes).

    Both are analytic in beta^2 = alpha^2 - omega0^2, and computed here without
    cancellation as beta -> 0 and without overflow for large beta t.
    """
    alpha = np.asarray(alpha, dtype=float)
    omega0_sq = np.asarray(omega0_sq, dtype=float)
    beta_sq = alpha**2 - omega0_sq
    scalar = alpha.ndim == 0 and omega0_sq.ndim == 0
    magnitude = np.sqrt(np.abs(beta_sq))

    def under() -> tuple[np.ndarray, np.ndarray]:
        envelope = np.exp(-alpha * time)
        phase = magnitude * time
        return envelope * np.cos(phase), envelope * time * np.sinc(phase / np.pi)

    def over() -> tuple[np.ndarray, np.ndarray]:
        slow = -omega0_sq / (alpha + magnitude)  # = -(alpha - beta), no cancellation
        fast_gap = 2.0 * magnitude * time  # (slow - fast) t >= 0
        e_slow = np.exp(slow * time)
        e_ratio = np.exp(-fast_gap)  # exp((fast - slow) t) in [0, 1]
        with np.errstate(invalid="ignore", divide="ignore"):
            shrink = np.where(fast_gap > 0, -np.expm1(-fast_gap) / fast_gap, 1.0)
        return 0.5 * e_slow * (1.0 + e_ratio), e_slow * time * shrink

    if scalar:
        return under() if beta_sq < 0 else over()
    c_u, s_u = under()
    c_o, s_o = over()
    return np.where(beta_sq < 0, c_u, c_o), np.where(beta_sq < 0, s_u, s_o)


def series_rlc_response(
    time: np.ndarray,
    resistance: float | np.ndarray,
    inductance: float | np.ndarray,
    capacitance: float | np.ndarray,
    v0: float | np.ndarray = 0.0,
    i0: float | np.ndarray = 0.0,
    step_volts: float | np.ndarray = 0.0,
    shunt_resistance: float | np.ndarray = math.inf,
) -> SeriesResponse:
    """Closed-form response of a series RLC loop (optionally Rp across C), t >= 0.

    The loop: source ``step_volts`` (switched in at t = 0, driving current in the loop
    direction), R, L and C in series; ``shunt_resistance`` across C. Natural response:
    ``step_volts = 0``. Parameters broadcast against ``time`` (e.g. shape (k, 1) with
    time shape (n,) evaluates k parameter sets at once).

    Parameters
    ----------
    time
        Seconds since t = 0 (>= 0).
    resistance, inductance, capacitance
        R >= 0 (ohm), L > 0 (H), C > 0 (F).
    v0, i0
        Capacitor voltage (V) and loop current (A) at t = 0; v0 is measured so that a
        positive loop current charges it (i = C dv/dt + v/Rp).
    step_volts
        Source voltage for t > 0 (V).
    shunt_resistance
        Rp across the capacitor (ohm), ``inf`` for none.

    Returns
    -------
    SeriesResponse
        Capacitor voltage, loop current and di/dt on ``time``.
    """
    t = np.asarray(time, dtype=float)
    r, l, c = (np.asarray(x, dtype=float) for x in (resistance, inductance, capacitance))
    g = np.where(np.isinf(shunt_resistance), 0.0, 1.0 / np.asarray(shunt_resistance, float))
    alpha = 0.5 * (r / l + g / c)
    omega0_sq = (1.0 + r * g) / (l * c)
    v_final = np.asarray(step_volts, dtype=float) / (1.0 + r * g)
    x0 = np.asarray(v0, dtype=float) - v_final
    dx0 = (np.asarray(i0, dtype=float) - g * np.asarray(v0, dtype=float)) / c
    ch, sh = _damped_basis(t, alpha, omega0_sq)
    x = x0 * ch + (dx0 + alpha * x0) * sh
    dx = dx0 * ch - (alpha * dx0 + omega0_sq * x0) * sh
    ddx = -2.0 * alpha * dx - omega0_sq * x
    voltage = v_final + x
    current = c * dx + g * voltage
    rate = c * ddx + g * dx
    return SeriesResponse(voltage, current, rate)


def rc_response(
    time: np.ndarray,
    resistance: float,
    capacitance: float,
    v0: float = 0.0,
    step_volts: float = 0.0,
    shunt_resistance: float = math.inf,
) -> SeriesResponse:
    """First-order RC loop (source, R, C; optional Rp across C), t >= 0.

    v(t) = v_final + (v0 - v_final) exp(-t / tau), tau = C R Rp / (R + Rp),
    v_final = E Rp / (R + Rp) (Nilsson & Riedel, "Response of First-Order RL and RC
    Circuits", from memory).

    Returns
    -------
    SeriesResponse
        ``current_rate`` is di/dt of the loop current.
    """
    t = np.asarray(time, dtype=float)
    g = 0.0 if math.isinf(shunt_resistance) else 1.0 / shunt_resistance
    tau = capacitance * resistance / (1.0 + resistance * g)
    v_final = step_volts / (1.0 + resistance * g)
    decay = np.exp(-t / tau)
    voltage = v_final + (v0 - v_final) * decay
    current = (step_volts - voltage) / resistance
    rate = (v0 - v_final) * decay / (tau * resistance)
    return SeriesResponse(voltage, current, rate)


def rl_response(
    time: np.ndarray, resistance: float, inductance: float, i0: float = 0.0, step_volts: float = 0.0
) -> SeriesResponse:
    """First-order RL loop (source, R, L), t >= 0: i(t) = E/R + (i0 - E/R) exp(-t R/L).

    Returns
    -------
    SeriesResponse
        ``capacitor_voltage`` is all zeros (there is no capacitor).
    """
    t = np.asarray(time, dtype=float)
    final = step_volts / resistance
    decay = np.exp(-t * resistance / inductance)
    current = final + (i0 - final) * decay
    rate = -(i0 - final) * decay * resistance / inductance
    return SeriesResponse(np.zeros_like(t), current, rate)


# --------------------------------------------------------------------------------------
# Reducing a Circuit
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Reduced:
    """A circuit reduced to a loop: totals, excitation, and how to form the probe."""

    resistance: float
    inductance: float
    capacitance: float  # inf when no capacitor
    shunt: float  # inf when none
    v0: float  # total capacitor voltage along the loop
    i0: float
    drive: float  # source voltage driving the loop
    probe_path: tuple[tuple[Element, float, float], ...]  # see _arc
    capacitors: tuple[tuple[Element, float], ...]  # every loop capacitor and its sign
    neglected: tuple[Element, ...]


def _check_excitation(circuit: Circuit) -> None:
    """The closed form covers sources constant from t = 0 and a voltage probe."""
    for element in circuit.elements:
        if element.kind == "I":
            raise TheoryNotApplicable(
                f"circuit {circuit.title!r}: the closed form has no current sources "
                f"({element.name})")
        if element.kind == "V" and element.timing != "dc" and (
                element.t_on > 0 or element.t_off is not None):
            raise TheoryNotApplicable(
                f"circuit {circuit.title!r}: the closed form covers sources switched on at "
                f"t = 0 and left on ({element.name} is delayed or a pulse)")
    if circuit.probe_current is not None:
        raise TheoryNotApplicable(
            f"circuit {circuit.title!r}: the closed form covers voltage probes only")
    if circuit.starts_settled:
        raise TheoryNotApplicable(
            f"circuit {circuit.title!r}: the closed form covers stated initial values, "
            "not a settled start")


def _loop_order(circuit: Circuit) -> list[tuple[Element, float]]:
    """Loop elements in traversal order with +1 when traversed first -> second node."""
    _check_excitation(circuit)
    loop = [e for e in circuit.elements if getattr(e, "in_loop", True)]
    if not loop:
        raise TheoryNotApplicable(f"circuit {circuit.title!r} has no series loop")
    graph = nx.MultiGraph()
    for index, element in enumerate(loop):
        graph.add_edge(*element.nodes, key=index)
    if any(degree != 2 for _, degree in graph.degree()) or not nx.is_connected(graph):
        raise TheoryNotApplicable(
            f"circuit {circuit.title!r}: its loop elements do not form one series loop "
            "(closed form covers a single loop with elements across its parts)"
        )
    reference = next(
        (e for e in loop if e.name == circuit.current_sense), loop[0]
    )
    order = [(reference, 1.0)]
    node = reference.nodes[1]
    used = {reference.name}
    while len(order) < len(loop):
        element = next(
            e for e in loop if e.name not in used and node in e.nodes
        )
        sign = 1.0 if element.nodes[0] == node else -1.0
        node = element.nodes[1] if sign > 0 else element.nodes[0]
        order.append((element, sign))
        used.add(element.name)
    return order


def _arc(
    order: list[tuple[Element, float]], plus: str, minus: str
) -> tuple[tuple[Element, float, float], ...]:
    """The shorter run of loop elements from node ``plus`` to node ``minus``.

    Returns (element, traversal sign, direction) triples: the traversal sign is +1 when
    the loop direction goes through the element first -> second node; the direction is
    +1 when the run follows the loop direction and -1 when it goes against it, so the
    voltage plus - minus is the sum of direction * (drop along the loop direction).
    """
    if plus == minus:
        return ()
    starts = [e.nodes[0] if s > 0 else e.nodes[1] for e, s in order]
    count = len(order)
    if plus not in starts or minus not in starts:
        raise TheoryNotApplicable(
            f"the nodes ({plus}, {minus}) are not both on the series loop"
        )
    a, b = starts.index(plus), starts.index(minus)
    forward = [(*order[(a + k) % count], 1.0) for k in range((b - a) % count)]
    backward = [(*order[(b + k) % count], -1.0) for k in range((a - b) % count)]
    return tuple(forward if len(forward) <= len(backward) else backward)


def _reduce(circuit: Circuit) -> _Reduced:
    order = _loop_order(circuit)
    resistance = sum(e.value for e, _ in order if e.kind == "R")
    inductance = sum(e.value for e, _ in order if e.kind == "L")
    capacitors = tuple((e, s) for e, s in order if e.kind == "C")
    inverse = sum(1.0 / e.value for e, _ in capacitors)
    capacitance = 1.0 / inverse if capacitors else math.inf
    v0 = sum(s * (e.initial or 0.0) for e, s in capacitors)
    drive = -sum(s * e.value for e, s in order if e.kind == "V")
    currents = [s * (e.initial or 0.0) for e, s in order if e.kind == "L"]
    if currents and max(currents) - min(currents) > 1e-12 * max(1.0, max(map(abs, currents))):
        raise TheoryNotApplicable(
            f"circuit {circuit.title!r}: the loop's inductors start with different "
            f"currents ({', '.join(f'{c:g} A' for c in currents)}); a series loop has one"
        )
    i0 = currents[0] if currents else 0.0

    shunt_conductance = 0.0
    neglected: list[Element] = []
    for element in circuit.elements:
        if getattr(element, "in_loop", True):
            continue
        span = {e.name for e, _, _ in _arc(order, *element.nodes)}
        is_leakage = (
            element.kind == "R" and len(capacitors) == 1 and span == {capacitors[0][0].name}
        )
        if is_leakage:
            shunt_conductance += 1.0 / element.value
        else:
            neglected.append(element)
    probe_path = _arc(order, *circuit.probe)
    return _Reduced(
        resistance=resistance,
        inductance=inductance,
        capacitance=capacitance,
        shunt=1.0 / shunt_conductance if shunt_conductance else math.inf,
        v0=v0,
        i0=i0,
        drive=drive,
        probe_path=probe_path,
        capacitors=capacitors,
        neglected=tuple(neglected),
    )


def _characterise_reduced(reduced: _Reduced) -> SecondOrder:
    r, l, c, rp = reduced.resistance, reduced.inductance, reduced.capacitance, reduced.shunt
    if l > 0 and math.isfinite(c):
        return second_order(r, l, c, rp)
    if l > 0:  # RL
        tau = l / r if r > 0 else math.inf
        return SecondOrder(r, l, c, 1.0 / tau if r > 0 else 0.0, math.nan, 0.0, math.nan,
                           math.nan, "first order", rp, tau)
    if math.isfinite(c) and r > 0:  # RC
        g = 0.0 if math.isinf(rp) else 1.0 / rp
        tau = c * r / (1.0 + r * g)
        return SecondOrder(r, 0.0, c, 1.0 / tau, math.nan, 0.0, math.nan, math.nan,
                           "first order", rp, tau)
    if math.isfinite(c):
        raise TheoryNotApplicable(
            "the loop is capacitors and sources only (no resistance or inductance): the "
            "charge would move in zero time"
        )
    raise TheoryNotApplicable("the loop stores no energy (no inductor or capacitor)")


def _reduced_poles(order: SecondOrder) -> np.ndarray:
    if order.regime == "first order":
        return np.array([-1.0 / order.time_constant if order.time_constant else 0.0])
    beta_sq = complex(order.alpha**2 - order.omega0**2)
    root = np.sqrt(beta_sq)
    return np.array([-order.alpha + root, -order.alpha - root])


def _check_against_full_model(
    circuit: Circuit, reduced: _Reduced, order: SecondOrder
) -> tuple[str, ...]:
    """Compare the reduced natural frequencies with the full circuit's. Returns notes on
    what was neglected; raises TheoryNotApplicable when the effect is not tiny."""
    modes = natural_modes(circuit)
    full = modes.poles
    mine = _reduced_poles(order)
    # Zero poles are constants (charge left on series capacitors): the reduction keeps
    # them exactly through charge conservation, so they are not extra modes.
    largest = float(np.max(np.abs(full))) if full.size else 0.0
    remaining = [k for k in range(full.size) if abs(full[k]) > 1e-9 * largest]
    worst_shift = 0.0
    for pole in mine:
        if not remaining:
            worst_shift = math.inf
            break
        distances = [abs(full[k] - pole) for k in remaining]
        best = int(np.argmin(distances))
        scale = max(abs(pole), order.alpha if order.alpha > 0 else 0.0, 1e-300)
        worst_shift = max(worst_shift, distances[best] / scale)
        remaining.pop(best)
    reference = max(
        abs(reduced.v0), abs(reduced.drive), abs(modes.initial), abs(modes.steady),
        *(abs(e.initial or 0.0) for e, _ in reduced.capacitors),
    )
    if reference == 0 and math.isfinite(order.capacitance) and order.inductance > 0:
        reference = abs(reduced.i0) * math.sqrt(order.inductance / order.capacitance)
    extra = float(np.sum(np.abs(modes.amplitudes[remaining]))) if remaining else 0.0
    extra_relative = extra / reference if reference > 0 else 0.0
    if not reduced.neglected:
        if worst_shift > EXACT_POLE_MATCH or extra_relative > EXACT_POLE_MATCH:
            raise TheoryNotApplicable(
                f"circuit {circuit.title!r} does not reduce to one series loop: its natural "
                f"frequencies differ from the reduced loop's by {worst_shift:.3g} (relative)"
            )
        return ()
    names = ", ".join(f"{e.name} ({e.kind} = {e.value:.4g})" for e in reduced.neglected)
    effect = (
        f"moves the natural frequencies by {worst_shift:.2g} (relative) and adds modes "
        f"carrying {extra_relative:.2g} of the reference voltage"
    )
    if worst_shift > NEGLECT_POLE_SHIFT or extra_relative > NEGLECT_AMPLITUDE:
        raise TheoryNotApplicable(
            f"it would have to neglect {names}, which {effect} (more than the "
            f"{NEGLECT_POLE_SHIFT:g} allowed); use the ngspice prediction"
        )
    return (f"closed form neglects {names}: from the full circuit's natural frequencies, "
            f"this {effect}",)


def _drop_along_loop(
    element: Element, sign: float, reduced: _Reduced, response: SeriesResponse, t: np.ndarray
) -> np.ndarray:
    """Voltage drop across one loop element in the loop direction (``sign`` is +1 when
    the loop direction runs first -> second node through it)."""
    if element.kind == "R":
        return element.value * response.current
    if element.kind == "L":
        return element.value * response.current_rate
    if element.kind == "V":
        return np.full_like(t, sign * element.value)
    # A capacitor carries the same charge as the series combination.
    share = reduced.capacitance / element.value
    return sign * (element.initial or 0.0) + share * (response.capacitor_voltage - reduced.v0)


def characterise(circuit: Circuit) -> SecondOrder:
    """Reduce ``circuit`` to a series loop and give its characteristic numbers.

    Parameters
    ----------
    circuit
        A circuit whose loop elements form one series loop, with elements across its
        parts (``Element.in_loop`` False).

    Returns
    -------
    SecondOrder
        alpha, omega0, omega_d, zeta, Q and the regime (``"first order"`` for RC and RL
        loops, with ``time_constant``).

    Raises
    ------
    TheoryNotApplicable
        When the circuit does not reduce (see :func:`simulate_theory`).
    """
    reduced = _reduce(circuit)
    order = _characterise_reduced(reduced)
    _check_against_full_model(circuit, reduced, order)
    return order


def simulate_theory(circuit: Circuit, time: np.ndarray) -> Waveform:
    """Closed-form probe voltage and loop current of ``circuit`` on ``time``.

    Parameters
    ----------
    circuit
        A series loop (see :func:`characterise`).
    time
        Seconds since t = 0, each >= 0.

    Returns
    -------
    Waveform
        ``engine="theory"``; ``loop_current`` is the current through the current-sense
        element (or the first loop element) from its first node to its second;
        ``notes`` name the regime and anything neglected with its estimated effect.

    Raises
    ------
    TheoryNotApplicable
        When the loop elements do not form one loop, the probe is not across loop
        nodes, inductors start with different currents, the loop has no resistance and
        no inductance, or an element across a part (probe or winding capacitance, a
        resistance across more than the capacitor) changes the natural frequencies by
        more than ``NEGLECT_POLE_SHIFT`` or adds modes larger than ``NEGLECT_AMPLITUDE``.
    """
    t = np.asarray(time, dtype=float)
    if t.ndim != 1 or (t.size and (not np.all(np.isfinite(t)) or t.min() < 0)):
        raise ValueError("time must be a one-dimensional array of finite times >= 0 s")
    reduced = _reduce(circuit)
    order = _characterise_reduced(reduced)
    notes = list(_check_against_full_model(circuit, reduced, order))
    r, l, c = reduced.resistance, reduced.inductance, reduced.capacitance
    if order.regime == "first order" and l > 0:
        response = rl_response(t, r, l, reduced.i0, reduced.drive)
        notes.insert(0, f"first-order RL loop, time constant {order.time_constant:.6g} s")
    elif order.regime == "first order":
        response = rc_response(t, r, c, reduced.v0, reduced.drive, reduced.shunt)
        notes.insert(0, f"first-order RC loop, time constant {order.time_constant:.6g} s")
    else:
        response = series_rlc_response(
            t, r, l, c, reduced.v0, reduced.i0, reduced.drive, reduced.shunt
        )
        notes.insert(0, f"{order.regime} series RLC loop, zeta = {order.zeta:.6g}")
    probe = np.zeros_like(t)
    for element, sign, direction in reduced.probe_path:
        probe = probe + direction * _drop_along_loop(element, sign, reduced, response, t)
    return Waveform(
        time=t,
        probe_voltage=probe,
        loop_current=response.current,
        engine="theory",
        notes=tuple(notes),
    )
