"""Responses that settle without ringing: the models, their least squares, start values.

Three nested models about a settled level ``v_inf``, in scaled time ``u = (t - t_ref) / T``
(``T`` a first guess of the slowest time constant, so every rate is of order one):

====================  ==========================================  ======================
model                 v(u)                                        parameters
====================  ==========================================  ======================
``first order``       ``v_inf + c exp(-s u)``                     ``s, c, v_inf``
``critically damped`` ``v_inf + c0 phi0(u) + c1 phi1(u)``, d = 0  ``a, c0, c1, v_inf``
``second order``      ``v_inf + c0 phi0(u) + c1 phi1(u)``         ``a, d, c0, c1, v_inf``
====================  ==========================================  ======================

``phi0`` and ``phi1`` solve ``y'' + 2 a y' + (a^2 - d) y = 0`` with ``y(0) = 1, y'(0) = 0``
and ``y(0) = 0, y'(0) = 1``: ``phi1 = exp(-a u) sinh(sqrt(d) u) / sqrt(d)`` and
``phi0 = exp(-a u) cosh(sqrt(d) u) + a phi1``. The characteristic roots are
``-(a -+ sqrt(d))``: for ``d > 0`` two real decay rates ``s1,2 = a -+ sqrt(d)`` (the sum of
two exponentials, overdamped), for ``d = 0`` one double root (``phi1 = u exp(-a u)``, the
critically damped ``(A + B u) exp(-a u)``), for ``d < 0`` a damped oscillation of angular
frequency ``sqrt(-d)``. Both functions are entire in ``d`` and are evaluated by their
power series where ``|d| u^2`` is small, so one fit passes smoothly through critical
damping, where the amplitudes of two separate exponentials would diverge (standard
second-order linear ODE solution, common practice, no source).

The refinement is :func:`scipy.optimize.least_squares` (Levenberg-Marquardt) over the
rates with the linear parameters projected out (:func:`fit_candidate`), the full model's
Jacobian by central differences at the solution; starting values come from the matrix
pencil's real poles (:func:`xcheck.ringdown.pencil.matrix_pencil`) and from a grid of decay rates whose
amplitudes and level are solved by linear least squares (numpy.linalg.lstsq).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

from xcheck.ringdown.pencil import matrix_pencil

FIRST_ORDER = "first order"
CRITICAL = "critically damped"
SECOND_ORDER = "second order"
#: Fitted parameters of each model (the settled level included).
PARAMETER_COUNT = {FIRST_ORDER: 3, CRITICAL: 4, SECOND_ORDER: 5}
#: Below this ``|d| u^2`` the basis is summed as a power series.
_SERIES_LIMIT = 0.1
_SERIES_TERMS = 9


def _exp(x: np.ndarray) -> np.ndarray:
    """``exp`` with the argument clipped so that a wild trial step cannot overflow.

    The upper clip (e^300, about 1e130) leaves room for the products the bases form
    with a rate (``a * sinh``), which an optimiser's trial step may make large too;
    no decaying model the fit accepts comes near it.
    """
    return np.exp(np.clip(x, -745.0, 300.0))


def second_order_basis(u: np.ndarray, a: float, d: float) -> tuple[np.ndarray, np.ndarray]:
    """``phi0(u)``, ``phi1(u)`` (module docstring) for decay ``a`` and discriminant ``d``."""
    u = np.asarray(u, dtype=float)
    decay = _exp(-a * u)
    cosh = np.empty_like(u)
    sinh = np.empty_like(u)  # sinh(sqrt(d) u) / sqrt(d), times exp(-a u) below
    x = d * u * u
    small = np.abs(x) < _SERIES_LIMIT
    if small.any():
        xs = x[small]
        term_c = np.ones_like(xs)
        term_s = np.ones_like(xs)
        sum_c = term_c.copy()
        sum_s = term_s.copy()
        for k in range(1, _SERIES_TERMS):
            term_c = term_c * xs / ((2 * k - 1) * (2 * k))
            term_s = term_s * xs / ((2 * k) * (2 * k + 1))
            sum_c += term_c
            sum_s += term_s
        cosh[small] = decay[small] * sum_c
        sinh[small] = decay[small] * sum_s * u[small]
    big = ~small
    if big.any():
        ub = u[big]
        if d > 0:
            r = math.sqrt(d)
            slow, fast = _exp(-(a - r) * ub), _exp(-(a + r) * ub)
            cosh[big] = 0.5 * (slow + fast)
            sinh[big] = (slow - fast) / (2.0 * r)
        else:
            w = math.sqrt(-d)
            cosh[big] = decay[big] * np.cos(w * ub)
            sinh[big] = decay[big] * np.sin(w * ub) / w
    return cosh + a * sinh, sinh


def model(name: str, u: np.ndarray, p: np.ndarray) -> np.ndarray:
    """Evaluate model ``name`` (see the module docstring) at scaled times ``u``."""
    u = np.asarray(u, dtype=float)
    if name == FIRST_ORDER:
        s, c, level = p
        return level + c * _exp(-s * u)
    if name == CRITICAL:
        a, c0, c1, level = p
        d = 0.0
    else:
        a, d, c0, c1, level = p
    phi0, phi1 = second_order_basis(u, float(a), float(d))
    return level + c0 * phi0 + c1 * phi1


def jacobian(name: str, u: np.ndarray, p: np.ndarray) -> np.ndarray:
    """``d model / d p`` by central differences, shape ``(len(u), len(p))``.

    Steps are 1e-6 of each parameter's size (rates of order one in scaled time, the
    amplitudes' scale for the linear ones), for which the truncation and rounding
    errors are both near 1e-10 relative: ample for a covariance.
    """
    p = np.asarray(p, dtype=float)
    linear = p[2:] if name == SECOND_ORDER else p[1:]
    amp = max(float(np.max(np.abs(linear))), 1e-300)
    rate = abs(float(p[0])) + 1.0
    typical = {
        FIRST_ORDER: [rate, amp, amp],
        CRITICAL: [rate, amp, amp, amp],
        SECOND_ORDER: [rate, rate * rate, amp, amp, amp],
    }[name]
    jac = np.empty((len(u), len(p)))
    for i, scale in enumerate(typical):
        h = 1e-6 * max(abs(float(p[i])), 1e-3 * scale)
        up, down = p.copy(), p.copy()
        up[i] += h
        down[i] -= h
        jac[:, i] = (model(name, u, up) - model(name, u, down)) / (2.0 * h)
    return jac


def linear_part(name: str, u: np.ndarray, v: np.ndarray, rates: tuple[float, ...]) -> np.ndarray:
    """Full parameter vector for fixed rates: amplitudes and level by linear least squares.

    ``rates`` is ``(s,)`` for the first order, ``(a,)`` for the critical and ``(a, d)``
    for the second-order model.
    """
    basis = _basis_matrix(name, u, np.asarray(rates, dtype=float))
    coef = np.linalg.lstsq(basis, v, rcond=None)[0]
    return np.concatenate([np.asarray(rates, dtype=float), coef])


def decaying(name: str, p: np.ndarray) -> bool:
    """True when every root of the fitted model decays (no growing exponential)."""
    if name == SECOND_ORDER:
        a, d = float(p[0]), float(p[1])
        return a > 0 and a - math.sqrt(max(d, 0.0)) > 0
    return float(p[0]) > 0


@dataclass(frozen=True)
class CandidateFit:
    """One model fitted by least squares (scaled time, see the module docstring).

    Attributes
    ----------
    name
        ``"first order"``, ``"critically damped"`` or ``"second order"``.
    params
        Fitted parameters in the order of the module docstring's table.
    residuals
        Data minus model.
    jacobian
        ``d model / d params`` at the solution.
    rss
        Sum of squared residuals (V^2).
    success
        The optimiser reported convergence and every root decays.
    message
        The optimiser's message.
    """

    name: str
    params: np.ndarray
    residuals: np.ndarray
    jacobian: np.ndarray
    rss: float
    success: bool
    message: str


def _basis_matrix(name: str, u: np.ndarray, rates: np.ndarray) -> np.ndarray:
    """Columns multiplying the linear parameters (amplitudes, then the level)."""
    if name == FIRST_ORDER:
        return np.column_stack([_exp(-rates[0] * u), np.ones_like(u)])
    d = float(rates[1]) if name == SECOND_ORDER else 0.0
    phi0, phi1 = second_order_basis(u, float(rates[0]), d)
    return np.column_stack([phi0, phi1, np.ones_like(u)])


def _rate_count(name: str) -> int:
    return 2 if name == SECOND_ORDER else 1


def fit_candidate(
    name: str, u: np.ndarray, v: np.ndarray, starts: list[np.ndarray]
) -> CandidateFit | None:
    """Least squares of model ``name`` from each start; the best decaying solution.

    Separable least squares (variable projection, Golub & Pereyra 1973, from memory):
    the optimiser moves only the rates, the amplitudes and level being the linear least
    squares solution at every step, so one or two nonlinear parameters are searched and
    the optimum is that of the full problem. The Jacobian of the full model is then
    taken at the solution for the covariance. Returns None when no start leads to a
    solution whose roots all decay.
    """
    best: CandidateFit | None = None
    count = _rate_count(name)

    def rates_of(x: np.ndarray) -> np.ndarray:
        # The second order is searched in (a, g) with d = g |g|: the two rates a -+ g are
        # then linear in the search variables (a straight valley, not a curved one).
        return np.array([x[0], x[1] * abs(x[1])]) if count == 2 else x

    def projected(x: np.ndarray) -> np.ndarray:
        basis = _basis_matrix(name, u, rates_of(x))
        coef = np.linalg.lstsq(basis, v, rcond=None)[0]
        return basis @ coef - v

    for start in starts:
        if not np.all(np.isfinite(start)):
            continue
        x0 = np.asarray(start[:count], dtype=float).copy()
        if count == 2:
            x0[1] = math.copysign(math.sqrt(abs(x0[1])), x0[1])
        result = least_squares(
            projected,
            x0,
            method="lm",
            x_scale=np.full(count, max(abs(float(x0[0])), 1e-3)),
            xtol=1e-10,
            ftol=1e-12,
            gtol=1e-12,
            max_nfev=100 * (count + 1),
        )
        rates = rates_of(result.x)
        p = linear_part(name, u, v, tuple(float(r) for r in rates))
        if not (np.all(np.isfinite(p)) and decaying(name, p)):
            continue
        resid = v - model(name, u, p)
        rss = float(resid @ resid)
        if best is None or rss < best.rss:
            best = CandidateFit(
                name, p, resid, jacobian(name, u, p), rss, bool(result.success), result.message
            )
    return best


def first_order_rate(t: np.ndarray, v: np.ndarray, step: float) -> float:
    """Decay rate (1/s) of the best ``c exp(-s t) + level`` on a logarithmic grid of ``s``.

    The grid runs from a twentieth of one over the record's span to half the sample
    rate; at each rate the amplitude and level are linear least squares.
    """
    span = float(t[-1] - t[0])
    tt = t - t[0]
    best_rate, best_rss = 1.0 / span, math.inf
    for s in np.geomspace(0.05 / span, 0.5 / step, 90):
        basis = np.column_stack([_exp(-s * tt), np.ones_like(tt)])
        coef, *_ = np.linalg.lstsq(basis, v, rcond=None)
        r = v - basis @ coef
        rss = float(r @ r)
        if rss < best_rss:
            best_rate, best_rss = float(s), rss
    return best_rate


def pencil_rates(v_blocks: np.ndarray, step: float) -> tuple[float, float] | None:
    """``(a, d)`` (1/s, 1/s^2) from the matrix pencil's two non-constant poles.

    Order 3: two exponentials and the settled level (a pole near zero). Real poles give
    ``a = (s1 + s2) / 2`` and ``d = ((s2 - s1) / 2)^2``; a complex pair ``-a +- j w`` gives
    ``d = -w^2``. None when the pencil fails.
    """
    try:
        poles = matrix_pencil(v_blocks, step, 3).poles
    except (ValueError, np.linalg.LinAlgError):
        return None
    order = np.argsort(np.abs(poles))
    rest = poles[order[1:]]
    if np.all(np.abs(rest.imag) <= 1e-9 * np.abs(rest)):
        s1, s2 = sorted(-rest.real)
        return 0.5 * (s1 + s2), 0.25 * (s2 - s1) ** 2
    pole = rest[np.argmax(rest.imag)]
    return float(-pole.real), -float(pole.imag) ** 2


def second_order_starts(
    u: np.ndarray, v: np.ndarray, pencil: tuple[float, float] | None
) -> list[np.ndarray]:
    """Starting parameter vectors of the second-order model (scaled time, slow rate ~ 1).

    The pencil's poles when they decay, the two best pairs of a grid (slow rate
    0.5, 0.8 or 1, the first-order guess being 1; fast rate 1.5 to 300 times the slow
    one) and a double root at the first-order rate.
    """
    scored = []
    for slow in (0.5, 0.8, 1.0):
        for ratio in (1.5, 3.0, 10.0, 30.0, 100.0, 300.0):
            a, d = 0.5 * slow * (1 + ratio), (0.5 * slow * (ratio - 1)) ** 2
            p = linear_part(SECOND_ORDER, u, v, (a, d))
            r = v - model(SECOND_ORDER, u, p)
            scored.append((float(r @ r), p))
    scored.sort(key=lambda item: item[0])
    starts = [p for _, p in scored[:2]]
    if pencil is not None and pencil[0] > 0:
        starts.insert(0, linear_part(SECOND_ORDER, u, v, pencil))
    starts.append(linear_part(SECOND_ORDER, u, v, (1.0, 0.0)))
    return starts
