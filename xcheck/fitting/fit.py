"""Fit a candidate's free values to a measurement with the exact state-space engine.

A fit never changes its inputs. It returns a :class:`FitResult` carrying success, the
message, the number of model evaluations, residual statistics, AIC and BIC with the
effective sample count, fitted values with standard errors, their correlations, and the
combinations the data determine where single values are not (see
:mod:`xcheck.fitting.identifiability`). A fit that does not converge is a result marked failed,
never an exception.

Every candidate also fits the nuisance values of its observation (a trace's gain,
offset and time shift; a peak table's amplitude and time origin, see
:mod:`xcheck.fitting.observation`), so that no candidate loses merely because of the
instrument. ``FitResult.nuisance`` holds them in SI units.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
from scipy.optimize import least_squares

from xcheck.circuit.parameters import ParameterSet
from xcheck.errors import XcheckError
from xcheck.fitting.candidates import Candidate, FreeParameter
from xcheck.fitting.identifiability import (
    COLLAPSIBLE,
    Degeneracy,
    evaluate_groups,
    find_degeneracies,
    merge_groups,
)
from xcheck.fitting.fixed_values import fixed_uncertainties
from xcheck.fitting.model import CandidateModel
from xcheck.fitting.observation import Observation
from xcheck.fitting.stats import correlation_from_covariance, covariance_from_jacobian
from xcheck.fixture.model import Fixture


@dataclass(frozen=True)
class FittedValue:
    """One fitted value with its standard error, SI units."""

    label: str
    key: tuple[str, str]
    value: float
    stderr: float
    unit: str
    start: float
    lower: float
    upper: float
    #: Standard uncertainty including what the fixed values carry (GUM section 5);
    #: equal to ``stderr`` when no fixed value carries an uncertainty.
    combined_stderr: float = float("nan")
    #: Each fixed value's contribution (words, standard uncertainty in this value's unit).
    budget: tuple[tuple[str, float], ...] = ()

    @property
    def uncertainty(self) -> float:
        """The combined standard uncertainty where known, else the fit's own."""
        return self.combined_stderr if math.isfinite(self.combined_stderr) else self.stderr

    @property
    def at_bound(self) -> bool:
        """True when the value ended on a bound (its stderr then understates)."""
        span = max(self.upper - self.lower, abs(self.value), 1e-30)
        return min(abs(self.value - self.lower), abs(self.upper - self.value)) < 1e-6 * span


@dataclass(frozen=True)
class FitResult:
    """Outcome of fitting one candidate (also for failed fits)."""

    candidate: str
    success: bool
    message: str
    evaluations: int = 0
    parameters: ParameterSet | None = None
    fitted: tuple[FittedValue, ...] = ()
    nuisance: dict[str, tuple[float, float]] = field(default_factory=dict)
    correlation_labels: tuple[str, ...] = ()
    correlation: np.ndarray | None = None
    degeneracies: tuple[Degeneracy, ...] = ()
    model: np.ndarray | None = None
    residuals: np.ndarray | None = None
    rss: float = float("nan")
    rmse: float = float("nan")
    n: int = 0
    n_effective: float = float("nan")
    k: int = 0
    aic: float = float("nan")
    bic: float = float("nan")

    @property
    def failed(self) -> bool:
        """True when the fit did not produce a usable model."""
        return not self.success


def fit_candidate(fixture: Fixture, candidate: Candidate, obs: Observation) -> FitResult:
    """Fit ``candidate`` to ``obs``; failures are returned, not raised.

    Parameters
    ----------
    fixture
        The fixture the candidate was built from.
    candidate
        Start values and free values (with bounds).
    obs
        The measurement.

    Returns
    -------
    FitResult
        With ``success`` False and a plain-words ``message`` when the candidate cannot
        be built or the optimiser fails.
    """
    if not candidate.usable:
        return FitResult(candidate.name, False, "; ".join(candidate.problems))
    try:
        result = _fit(fixture, candidate, obs, candidate.free)
    except (XcheckError, ValueError, FloatingPointError, np.linalg.LinAlgError) as exc:
        return FitResult(candidate.name, False, f"fit failed: {exc}")
    groups: tuple[Degeneracy, ...] = ()
    free = candidate.free
    # Collapse what the data cannot separate and refit; a refit may reveal a further
    # near-equivalence that the exact one hid, so repeat until nothing new appears.
    for _ in range(len(candidate.free)):
        if not (result.success and result.degeneracies):
            break
        groups = merge_groups(groups + result.degeneracies)
        collapsed = _collapse(candidate.free, groups)
        if collapsed == free:
            break
        free = collapsed
        try:
            result = _fit(fixture, candidate, obs, free)
        except (XcheckError, ValueError, FloatingPointError, np.linalg.LinAlgError) as exc:
            return FitResult(candidate.name, False, f"refit failed: {exc}")
    if groups:
        merged = merge_groups(groups + tuple(result.degeneracies))
        result = replace(result, degeneracies=evaluate_groups(merged, result.fitted, result.parameters))
    return result


def _collapse(free: tuple[FreeParameter, ...], groups: tuple[Degeneracy, ...]) -> tuple[FreeParameter, ...]:
    """Keep the first member of each collapsible group free and fix the others."""
    fixed = set()
    for group in groups:
        if group.combination in COLLAPSIBLE:
            fixed.update(group.members[1:])
    return tuple(f for f in free if f.label not in fixed)


#: Free values whose bounds span more than this ratio are scanned for a start value.
SCAN_SPAN = 10.0
#: Spacing of the scan (ratio of neighbouring values): a mode's frequency then moves by
#: about 1 % between neighbours (f ~ 1 / sqrt(L C)), inside the basin of a fit to some
#: twenty cycles of ringing.
SCAN_RATIO = 1.02
#: Most values per scan.
SCAN_MAX_POINTS = 1200


def _scanned_start(model: CandidateModel, obs: Observation, start: np.ndarray,
                   lower: np.ndarray, upper: np.ndarray,
                   pairs: tuple[tuple[int, int, float], ...] = (),
                   units: tuple[str, ...] = ()) -> np.ndarray:
    """Start values improved by scanning each widely bounded free value (traces).

    A reactive value (``units`` "H" or "F") known only within decades (an ESL written
    ``"?"``) makes the residual
    oscillate with it (a mode's frequency moves through the record's ringing), so a
    local optimiser started at a typical value stops in the nearest dip. Each such
    value in turn is scanned on a log grid (:data:`SCAN_RATIO`) across its bounds, the
    others held, the whole grid in one batch of the exact engine; each trial gets its
    best instrument gain and offset by linear least squares, and the lowest weighted
    residual sum is kept. Peak tables are not scanned (their readings are few and
    numbered by the ring, which the scan would move).
    """
    if obs.discrete:
        return start
    best = start.copy()
    weight = 1.0 / obs.sigmas
    target = obs.voltage * weight

    def costs(trials: np.ndarray) -> np.ndarray:
        with np.errstate(all="ignore"):
            shapes = model.shapes(trials, obs.time) * weight
        # Per trial, min over (gain, offset) of |gain s + offset w - v w|^2.
        design_ww = float(np.sum(weight**2))
        ss = np.sum(shapes**2, axis=1)
        sw = shapes @ weight
        sv = shapes @ target
        wv = float(weight @ target)
        det = ss * design_ww - sw**2
        with np.errstate(all="ignore"):
            gain = (sv * design_ww - sw * wv) / det
            offset = (ss * wv - sw * sv) / det
            residual = np.sum((shapes * gain[:, None] + np.outer(offset, weight) - target) ** 2, axis=1)
        return np.where(np.isfinite(residual), residual, np.inf)

    for first, second, product in pairs:
        # Along the curve value_1 * value_2 = product (a mode at a known frequency).
        count = min(SCAN_MAX_POINTS, int(math.ceil(
            math.log(upper[first] / max(lower[first], upper[first] * 1e-6)) / math.log(SCAN_RATIO))) + 1)
        trials = np.repeat(best[None, :], count, axis=0)
        trials[:, first] = np.geomspace(max(lower[first], upper[first] * 1e-6), upper[first], count)
        trials[:, second] = np.clip(product / trials[:, first], lower[second], upper[second])
        try:
            scores = costs(trials)
        except (XcheckError, ValueError, FloatingPointError, np.linalg.LinAlgError):
            continue
        if np.min(scores) < costs(best[None, :])[0]:
            best = trials[int(np.argmin(scores))]
    for k in range(len(start)):
        if units[k] not in ("H", "F"):
            continue  # a resistance moves damping only: its residual has one dip
        top = upper[k]
        bottom = lower[k] if lower[k] > 0 else top * 1e-6
        if not (np.isfinite(top) and top > 0 and top / bottom > SCAN_SPAN):
            continue
        count = min(SCAN_MAX_POINTS, int(math.ceil(math.log(top / bottom) / math.log(SCAN_RATIO))) + 1)
        trials = np.repeat(best[None, :], count + 1, axis=0)
        trials[1:, k] = np.geomspace(bottom, top, count)
        try:
            scores = costs(trials)
        except (XcheckError, ValueError, FloatingPointError, np.linalg.LinAlgError):
            continue
        best = trials[int(np.argmin(scores))]
    return best


def _fixed_value_budget(fixture: Fixture, candidate: Candidate, model: CandidateModel,
                        free: tuple[FreeParameter, ...], physical: np.ndarray, solution,
                        residuals, jac_x: np.ndarray, scale: np.ndarray
                        ) -> list[tuple[tuple[str, float], ...]]:
    """Per free value, the standard uncertainty each uncertain fixed value carries into
    it (see :mod:`xcheck.fitting.fixed_values`): d theta / d phi from the change of the
    weighted residuals when phi moves by a small step (central difference), through
    the pseudo-inverse of the fit's Jacobian (GUM 5.1.2, uncorrelated inputs)."""
    n_free = len(free)
    budgets: list[list[tuple[str, float]]] = [[] for _ in range(n_free)]
    items = fixed_uncertainties(fixture, candidate.parameters, {f.key for f in free})
    if not items or n_free == 0:
        return [tuple(b) for b in budgets]
    inverse = np.linalg.pinv(jac_x)  # optimiser variables per weighted residual
    for item in items:
        step = 1e-4 * item.sigma
        try:
            model.nudged(item.key, item.value + step)
            up = residuals(solution.x)
            model.nudged(item.key, item.value - step)
            down = residuals(solution.x)
        except (XcheckError, ValueError, FloatingPointError, np.linalg.LinAlgError):
            continue
        finally:
            model.restore()
        slope = (up - down) / (2 * step)
        moved = -(inverse @ slope)[:n_free] * scale  # physical units per unit of phi
        for k in range(n_free):
            contribution = abs(float(moved[k])) * item.sigma
            if np.isfinite(contribution):
                budgets[k].append((item.words, contribution))
    return [tuple(b) for b in budgets]


def _fit(fixture: Fixture, candidate: Candidate, obs: Observation,
         free: tuple[FreeParameter, ...]) -> FitResult:
    model = obs.fit_model(fixture, candidate, free)
    start = np.array([candidate.parameters.get(f.key, f.start) or f.start for f in free], float)
    lower = np.array([f.lower for f in free], float)
    upper = np.array([f.upper for f in free], float)
    start = np.clip(start, lower, upper)
    scale = np.maximum(np.abs(start), (upper - lower) * 1e-3)
    scale = np.where(scale > 0, scale, 1.0)
    readings = obs.residuals(model, start)
    index = {f.key: k for k, f in enumerate(free)}
    keys = [f.key for f in candidate.free]
    pairs = tuple((index[keys[a]], index[keys[b]], p) for a, b, p in candidate.scan_pairs
                  if keys[a] in index and keys[b] in index)
    start = _scanned_start(model, obs, start, lower, upper, pairs, tuple(f.unit for f in free))
    readings = obs.residuals(model, start)
    x0 = np.concatenate([start / scale, readings.start])
    lo = np.concatenate([lower / scale, readings.lower])
    hi = np.concatenate([upper / scale, readings.upper])
    x0 = np.clip(x0, lo, hi)
    n_free = len(free)

    def residuals(x: np.ndarray) -> np.ndarray:
        return readings.weighted(x[:n_free] * scale, x[n_free:])

    solution = least_squares(residuals, x0, bounds=(lo, hi), x_scale="jac", method="trf",
                             max_nfev=200 * (len(x0) + 1))
    if not np.all(np.isfinite(solution.fun)):
        return FitResult(candidate.name, False, "the model produced non-finite values",
                         evaluations=model.evaluations)
    physical = solution.x[:n_free] * scale
    weighted = solution.fun
    n = weighted.size
    k = len(x0)
    chi2 = float(np.sum(weighted**2))
    criteria = obs.criteria(chi2, n, k, weighted=weighted)
    n_eff = criteria.n_effective
    dof = max(n - k, 1)
    jac_x = solution.jac
    # The optimiser's variables are already of order one (x = value / scale), so the
    # plain SVD with numpy's rank tolerance; a numerically null direction is left out
    # (pseudo-inverse) so that a degenerate first fit still gives finite numbers for
    # the identifiability check to work on.
    unit = covariance_from_jacobian(jac_x, rcond=np.finfo(float).eps * max(jac_x.shape),
                                    scale_columns=False, undetermined="pseudo-inverse")
    cov_x = unit * (chi2 / dof) * (n / n_eff)
    physical_scale = np.concatenate([scale, np.ones(k - n_free)])
    cov = cov_x * np.outer(physical_scale, physical_scale)
    stderr = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    budgets = _fixed_value_budget(fixture, candidate, model, free, physical, solution, residuals,
                                  jac_x, scale)
    fitted = tuple(
        FittedValue(f.label, f.key, float(v), float(s), f.unit, float(f.start), f.lower, f.upper,
                    float(math.sqrt(s**2 + sum(u**2 for _, u in budget))), budget)
        for f, v, s, budget in zip(free, physical, stderr[:n_free], budgets)
    )
    model_values = readings.predicted(physical, solution.x[n_free:])
    residual_volts = obs.voltage - model_values
    rss_volts = float(np.sum(residual_volts**2))
    degeneracies = (find_degeneracies(jac_x[:, :n_free], free, physical, scale, jac_x[:, n_free:])
                    if n_free > 1 else ())
    return FitResult(
        candidate=candidate.name,
        success=bool(solution.success),
        message=str(solution.message),
        evaluations=model.evaluations,
        parameters=model.parameters(physical),
        fitted=fitted,
        nuisance=readings.in_si(solution.x[n_free:], stderr[n_free:]),
        correlation_labels=tuple(f.label for f in free) + readings.names,
        correlation=correlation_from_covariance(cov),
        degeneracies=tuple(degeneracies),
        model=model_values,
        residuals=residual_volts,
        rss=rss_volts,
        rmse=float(np.sqrt(rss_volts / residual_volts.size)),
        n=n,
        n_effective=n_eff,
        k=k,
        aic=criteria.aic,
        bic=criteria.bic,
    )
