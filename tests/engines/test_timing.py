"""Transient settings: step size against the trapezoidal rule's actual error, run length.

References: the trapezoidal rule applied to x' = A x is the map
x_{k+1} = (I - hA/2)^{-1} (I + hA/2) x_k, and the exact solution is expm(A h)^k x0
(Hairer & Wanner, "Solving Ordinary Differential Equations I", from memory). The test
runs both and measures the error that the chosen step really gives, independently of
how :mod:`xcheck.engines.timing` estimates it; ngspice's own error is checked in
test_engine_agreement.py. A heavily damped loop's fast decay is left to ngspice's own
step control; that case is checked against ngspice itself and the closed form of the
series RLC natural response, ``v(t) = V0 (s1 exp(s2 t) - s2 exp(s1 t)) / (s1 - s2)``
with s1, s2 the roots of ``L C s^2 + R C s + 1`` (numpy.roots; Nilsson & Riedel,
"Electric Circuits", natural response of the series RLC circuit, from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.linalg

from xcheck.circuit.model import Circuit, Element
from xcheck.engines.statespace import natural_frequencies, state_space
from xcheck.engines.timing import (
    FAST_DECAY_PER_STEP,
    MAX_POINTS,
    RESOLVED_SHARE,
    TARGET_RELATIVE_ERROR,
    TransientSettings,
    transient_settings,
)

L_, C_, V0 = 1e-3, 1e-6, 10.0
OMEGA0 = 1 / math.sqrt(L_ * C_)


def _rlc(zeta: float, extra: tuple[Element, ...] = (), esr: float = 0.0) -> Circuit:
    r = 2 * zeta * math.sqrt(L_ / C_) - esr
    elements = [
        Element("V_sense", "V", ("0", "n1"), 0.0),
        Element("R_esr", "R", ("n1", "a"), esr) if esr else None,
        Element("C_1", "C", ("a" if esr else "n1", "n2"), C_, initial=V0),
        Element("R_1", "R", ("n2", "n3"), r),
        Element("L_1", "L", ("n3", "0"), L_, initial=0.0),
    ]
    return Circuit(
        f"zeta {zeta}", tuple(e for e in elements if e is not None) + extra,
        probe=("n1", "n2"), current_sense="V_sense",
    )


def _trapezoidal_error(circuit: Circuit, settings: TransientSettings) -> float:
    """Largest |trapezoidal - exact| probe voltage over the run at the maximum step."""
    model = state_space(circuit)
    h = settings.max_step
    identity = np.eye(model.a.shape[0])
    trap = np.linalg.solve(identity - h * model.a / 2, identity + h * model.a / 2)
    exact = scipy.linalg.expm(model.a * h)
    probe = model.voltage_between(*circuit.probe).x_coef
    x = y = model.x0
    worst = 0.0
    for _ in range(int(settings.stop / h)):
        x, y = trap @ x, exact @ y
        worst = max(worst, abs(probe @ (x - y)))
    return worst


@pytest.mark.parametrize("zeta", [0.01, 0.1, 0.5, 0.9, 1.0, 1.2, 2.0])
def test_step_meets_the_target_without_waste(zeta: float) -> None:
    circuit = _rlc(zeta)
    stop = 10 * 2 * math.pi / OMEGA0 if zeta < 1 else None  # 10 periods, else the default
    settings = transient_settings(circuit, stop_time=stop)
    error = _trapezoidal_error(circuit, settings) / V0
    budget = RESOLVED_SHARE * TARGET_RELATIVE_ERROR
    # The estimate is first order in h^2; 20 % margin over the budget it aims at, and
    # at least a tenth of it (a smaller error means far more points than needed).
    assert error <= 1.2 * budget
    assert error >= 0.1 * budget
    assert settings.method == "trap"
    assert settings.step == settings.max_step


@pytest.mark.ngspice
@pytest.mark.parametrize("zeta", [3.0, 5.0, 10.0])
def test_fast_decay_is_left_to_ngspice_step_control(zeta: float) -> None:
    from xcheck.engines.ngspice import simulate_ngspice

    circuit = _rlc(zeta)
    settings = transient_settings(circuit)
    poles = natural_frequencies(circuit)
    # The fast root decays by more than FAST_DECAY_PER_STEP e-folds within one maximum
    # step (so the maximum step did not resolve it), the slow root by far less.
    assert float(np.max(-poles.real)) * settings.max_step > FAST_DECAY_PER_STEP
    assert float(np.min(-poles.real)) * settings.max_step < 0.1
    run = simulate_ngspice(circuit)
    r = 2 * zeta * math.sqrt(L_ / C_)
    s1, s2 = np.roots([L_ * C_, r * C_, 1.0])
    exact = V0 * (s1 * np.exp(s2 * run.time) - s2 * np.exp(s1 * run.time)) / (s1 - s2)
    error = float(np.max(np.abs(run.probe_voltage - exact))) / V0
    # ngspice meets the whole target (1e-4 of V0: what the deck aims at), and the step
    # is not needlessly small: at least a tenth of the resolved modes' share is spent
    # (measured: about 0.8 of it at these damping ratios).
    assert error <= TARGET_RELATIVE_ERROR
    assert error >= 0.1 * RESOLVED_SHARE * TARGET_RELATIVE_ERROR
    # The run takes a few hundred points, not the thousands a fixed step resolving
    # the fast root would (100 maximum steps at most over the default run, plus
    # ngspice's own short steps while the fast root is large).
    assert run.time.size < 400


def test_default_run_length() -> None:
    # Light damping: five time constants 5/alpha (alpha = zeta omega0) exceed ten periods.
    light = transient_settings(_rlc(0.01))
    assert light.stop == pytest.approx(5 / (0.01 * OMEGA0), rel=1e-9)  # eigenvalue rounding
    # zeta = 0.3: ten periods (65.9/omega0) would exceed ten time constants (33.3/omega0),
    # so the run stops at ten time constants.
    medium = transient_settings(_rlc(0.3))
    assert medium.stop == pytest.approx(10 / (0.3 * OMEGA0), rel=1e-9)
    # Overdamped: five time constants of the slow root omega0^2 / (alpha + beta).
    alpha = 5 * OMEGA0
    slow = OMEGA0**2 / (alpha + math.sqrt(alpha**2 - OMEGA0**2))
    assert transient_settings(_rlc(5.0)).stop == pytest.approx(5 / slow, rel=1e-9)


def test_given_stop_time_is_kept_and_checked() -> None:
    assert transient_settings(_rlc(0.2), stop_time=1.234e-3).stop == 1.234e-3
    with pytest.raises(ValueError, match="stop_time must be a positive number"):
        transient_settings(_rlc(0.2), stop_time=-1.0)


def test_tiny_parasitic_mode_does_not_force_a_tiny_step() -> None:
    # 1 pF across a 1 uF capacitor with 10 mohm ESR adds a mode near 1e11 rad/s whose
    # amplitude in the probe voltage is ~1e-6 of V0: insignificant.
    base = transient_settings(_rlc(0.1, esr=0.01))
    probe_c = Element("C_probe", "C", ("n1", "n2"), 1e-12, initial=V0, in_loop=False)
    loaded = transient_settings(_rlc(0.1, extra=(probe_c,), esr=0.01))
    assert loaded.max_step == pytest.approx(base.max_step, rel=0.01)  # 1 %: same step
    assert loaded.notes == ()


def test_point_cap_widens_the_step_and_says_so() -> None:
    # zeta = 1e-4 over its default five time constants needs ~1e8 points.
    settings = transient_settings(_rlc(1e-4))
    assert settings.points <= MAX_POINTS + 1
    assert settings.max_step == pytest.approx(settings.stop / MAX_POINTS, rel=1e-12)
    assert any("accuracy target may be missed" in note for note in settings.notes)


def test_circuit_without_storage() -> None:
    circuit = Circuit("divider", (Element("V_s", "V", ("n1", "0"), 1.0), Element("R_1", "R", ("n1", "0"), 1.0)), probe=("n1", "0"))
    settings = transient_settings(circuit)
    assert settings.stop > 0 and settings.max_step > 0
    assert any("stores no energy" in note for note in settings.notes)
