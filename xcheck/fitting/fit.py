"""Fit a candidate's free values to a measurement with the fast (closed-form) engine.

A fit never changes its inputs. It returns a :class:`FitResult` carrying success, the
message, the number of model evaluations, residual statistics, AIC and BIC with the
effective sample count, fitted values with standard errors, their correlations, and the
combinations the data determine where single values are not (see
:mod:`xcheck.fitting.identifiability`). A fit that does not converge is a result marked failed,
never an exception.

Every candidate also fits three nuisance values, so that no candidate loses merely
because of the instrument: ``gain`` (probe attenuation or vertical-scale error and the
true initial voltage; dimensionless), ``offset`` (DC offset of the scope channel, V) and
``shift`` (error in the event time, s). For a peak table the nuisance values are the
``amplitude`` scale (dimensionless) and the ``time_origin`` (s) of the first extremum's
model time in the table's time base. ``FitResult.nuisance`` holds them in these units.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Literal

import numpy as np
from scipy.optimize import least_squares

from xcheck.fitting.candidates import Candidate, FreeParameter
from xcheck.circuit.expand import build_circuit
from xcheck.engines.theory import characterise, simulate_theory
from xcheck.errors import XcheckError
from xcheck.fixture.model import Fixture
from xcheck.fitting.identifiability import Degeneracy, find_degeneracies, reason_for
from xcheck.circuit.parameters import ParameterSet, label_key

ObservationKind = Literal["trace", "peaks"]


@dataclass(frozen=True)
class Observation:
    """What candidates are fitted to: an aligned trace or a peak table.

    Attributes
    ----------
    kind
        ``"trace"`` (samples from the event at t = 0) or ``"peaks"`` (extrema only).
    time, voltage
        Seconds and volts. For peaks the time origin may be arbitrary.
    sigma
        Standard deviation of each voltage reading (V), scalar or per point.
    n_effective
        Effective number of independent samples (oversampled, correlated noise
        carries less information than its sample count suggests).
    period
        Ring period from the ring-down estimate (s); sets the time-shift bounds and
        numbers the extrema of a peak table.
    time_sigma
        For peaks: standard deviation of the extremum times (s).
    """

    kind: ObservationKind
    time: np.ndarray
    voltage: np.ndarray
    sigma: float | np.ndarray
    n_effective: float
    period: float
    time_sigma: float = 0.0
    weights_mask: np.ndarray | None = None


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


class _Model:
    """Maps a parameter vector to model values on the observation's grid."""

    def __init__(self, fixture: Fixture, candidate: Candidate, obs: Observation,
                 free: tuple[FreeParameter, ...]) -> None:
        self.fixture = fixture
        self.candidate = candidate
        self.obs = obs
        self.free = free
        self.evaluations = 0

    def parameters(self, physical: np.ndarray) -> ParameterSet:
        return self.candidate.parameters.with_values(
            {f.key: float(v) for f, v in zip(self.free, physical)}
        )

    def shape(self, physical: np.ndarray, times: np.ndarray) -> np.ndarray:
        """Unscaled model probe voltage at ``times`` (s from the event)."""
        self.evaluations += 1
        circuit = build_circuit(self.fixture, self.parameters(physical))
        return simulate_theory(circuit, np.maximum(times, 0.0)).probe_voltage

    def extrema(self, physical: np.ndarray, count: int) -> tuple[np.ndarray, np.ndarray]:
        """Times (from the event) and probe voltages of the first ``count`` turning
        points: t_k = k pi / omega_d (exact for a series loop whose current starts at
        zero: the capacitor voltage's derivative is proportional to
        exp(-alpha t) sin(omega_d t)), voltages from the closed form at those times."""
        self.evaluations += 1
        circuit = build_circuit(self.fixture, self.parameters(physical))
        second = characterise(circuit)
        if not second.omega_d > 0:
            raise XcheckError("this candidate does not ring (not underdamped)")
        t = np.arange(count) * np.pi / second.omega_d
        return t, simulate_theory(circuit, t).probe_voltage


def peak_indices(obs: Observation, response: str) -> np.ndarray:
    """Number each reading of a peak table by the half-periods since the first, which
    is turning point 0 (the event itself) for a natural response and 1 (the first
    overshoot) for a step."""
    first = 1 if response == "step" else 0
    half = obs.period / 2.0
    return first + np.rint((obs.time - obs.time[0]) / half).astype(int)


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
        groups = _merge_groups(groups + result.degeneracies)
        collapsed = _collapse(candidate.free, groups)
        if collapsed == free:
            break
        free = collapsed
        try:
            result = _fit(fixture, candidate, obs, free)
        except (XcheckError, ValueError, FloatingPointError, np.linalg.LinAlgError) as exc:
            return FitResult(candidate.name, False, f"refit failed: {exc}")
    if groups:
        result = _merge_degeneracies(result, _merge_groups(groups + tuple(result.degeneracies)), free)
    return result


def _merge_groups(groups: tuple[Degeneracy, ...]) -> tuple[Degeneracy, ...]:
    """Join groups of the same kind that share a member (a sum joined with a sum stays a
    sum); a merely correlated pair stays its own entry."""
    merged: list[Degeneracy] = []
    for group in groups:
        members = list(group.members)
        kinds = {group.combination}
        units = {group.unit}
        keep = []
        for other in merged:
            same_kind = other.combination == group.combination
            if set(members) & set(other.members) and same_kind:
                members = list(dict.fromkeys(list(other.members) + members))
                kinds.add(other.combination)
                units.add(other.unit)
            else:
                keep.append(other)
        kind = kinds.pop() if len(kinds) == 1 else "combination"
        unit = units.pop() if len(units) == 1 else ""
        keep.append(Degeneracy(tuple(members), kind, float("nan"), float("nan"), unit,
                               reason_for(kind, tuple(members)), group.correlation))
        merged = keep
    return tuple(merged)


#: Groups whose determined combination has a physical meaning; only these are collapsed
#: (one member kept free, the others held). A merely correlated "combination" is
#: reported but every member stays free: holding one at a poor start value would bias
#: the rest.
COLLAPSIBLE = ("sum", "product", "ratio")


def _collapse(free: tuple[FreeParameter, ...], groups: tuple[Degeneracy, ...]) -> tuple[FreeParameter, ...]:
    """Keep the first member of each collapsible group free and fix the others."""
    fixed = set()
    for group in groups:
        if group.combination in COLLAPSIBLE:
            fixed.update(group.members[1:])
    return tuple(f for f in free if f.label not in fixed)


def _merge_degeneracies(
    refit: FitResult, groups: tuple[Degeneracy, ...], kept: tuple[FreeParameter, ...]
) -> FitResult:
    """Attach each group's determined combination, evaluated at the refit."""
    values = {f.label: f for f in refit.fitted}
    params = refit.parameters
    merged = []
    for group in groups:
        members = [m for m in group.members]
        first = values.get(members[0])
        stderr = first.stderr if first is not None else float("nan")
        member_values = [params.get(label_key(m), 0.0) or 0.0 for m in members] if params else []
        if group.combination == "sum":
            combined = float(sum(member_values))
        elif group.combination == "product":
            combined = float(np.prod(member_values))
            stderr = combined * (first.stderr / first.value) if first and first.value else float("nan")
        else:
            combined = float("nan")
        merged.append(
            Degeneracy(group.members, group.combination, combined, stderr, group.unit, group.reason,
                       group.correlation)
        )
    return FitResult(**{**refit.__dict__, "degeneracies": tuple(merged)})


def _fit(fixture: Fixture, candidate: Candidate, obs: Observation,
         free: tuple[FreeParameter, ...]) -> FitResult:
    model = _Model(fixture, candidate, obs, free)
    start = np.array([candidate.parameters.get(f.key, f.start) or f.start for f in free], float)
    lower = np.array([f.lower for f in free], float)
    upper = np.array([f.upper for f in free], float)
    start = np.clip(start, lower, upper)
    scale = np.maximum(np.abs(start), (upper - lower) * 1e-3)
    scale = np.where(scale > 0, scale, 1.0)
    sigma = np.broadcast_to(np.asarray(obs.sigma, float), obs.voltage.shape)
    residual_fn, nuisance_start, nuisance_bounds, names, to_si = _residual_function(
        model, obs, sigma, start)
    x0 = np.concatenate([start / scale, nuisance_start])
    lo = np.concatenate([lower / scale, nuisance_bounds[0]])
    hi = np.concatenate([upper / scale, nuisance_bounds[1]])
    x0 = np.clip(x0, lo, hi)
    n_free = len(free)

    def residuals(x: np.ndarray) -> np.ndarray:
        return residual_fn(x[:n_free] * scale, x[n_free:])

    solution = least_squares(residuals, x0, bounds=(lo, hi), x_scale="jac", method="trf",
                             max_nfev=200 * (len(x0) + 1))
    if not np.all(np.isfinite(solution.fun)):
        return FitResult(candidate.name, False, "the model produced non-finite values",
                         evaluations=model.evaluations)
    physical = solution.x[:n_free] * scale
    weighted = solution.fun
    n = weighted.size
    k = len(x0)
    n_eff = float(min(obs.n_effective, n)) if obs.kind == "trace" else float(n)
    chi2 = float(np.sum(weighted**2))
    dof = max(n - k, 1)
    jac = solution.jac * np.concatenate([1.0 / scale, np.ones(k - n_free)])[None, :]
    jac_x = solution.jac
    cov_x = _covariance(jac_x) * (chi2 / dof) * (n / n_eff)
    physical_scale = np.concatenate([scale, np.ones(k - n_free)])
    cov = cov_x * np.outer(physical_scale, physical_scale)
    stderr = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    labels = tuple(f.label for f in free) + tuple(names)
    corr = _correlation(cov)
    fitted = tuple(
        FittedValue(f.label, f.key, float(v), float(s), f.unit, float(f.start), f.lower, f.upper)
        for f, v, s in zip(free, physical, stderr[:n_free])
    )
    nuisance_scale, nuisance_origin = to_si
    nuisance = {
        name: (float(v * f + o), float(s * abs(f)))
        for name, v, s, f, o in zip(names, solution.x[n_free:], stderr[n_free:],
                                    nuisance_scale, nuisance_origin)
    }
    model_values = residual_fn.model_values(physical, solution.x[n_free:])  # type: ignore[attr-defined]
    residual_volts = obs.voltage - model_values
    rss_volts = float(np.sum(residual_volts**2))
    if obs.kind == "trace":
        # Noise level profiled from the residuals (robust to a mis-stated sigma on long
        # records); -2 ln L = n_eff ln(RSS / n) + const.
        mean_square = chi2 / n
        aic = n_eff * np.log(mean_square) + 2 * k
        bic = n_eff * np.log(mean_square) + k * np.log(n_eff)
    else:
        # A peak table has a handful of readings with stated (or estimated) errors:
        # profiling the variance from so few would hide a bad fit, so -2 ln L = chi^2.
        aic = chi2 + 2 * k
        bic = chi2 + k * np.log(n)
    degeneracies = (find_degeneracies(jac_x[:, :n_free], free, physical, scale, jac_x[:, n_free:])
                    if n_free > 1 else ())
    del jac
    return FitResult(
        candidate=candidate.name,
        success=bool(solution.success),
        message=str(solution.message),
        evaluations=model.evaluations,
        parameters=model.parameters(physical),
        fitted=fitted,
        nuisance=nuisance,
        correlation_labels=labels,
        correlation=corr,
        degeneracies=tuple(degeneracies),
        model=model_values,
        residuals=residual_volts,
        rss=rss_volts,
        rmse=float(np.sqrt(rss_volts / residual_volts.size)),
        n=n,
        n_effective=n_eff,
        k=k,
        aic=float(aic),
        bic=float(bic),
    )


def _covariance(jac: np.ndarray) -> np.ndarray:
    """(J^T J)^-1 through the SVD, with numerically null directions left infinite-free
    (pseudo-inverse) so a degenerate fit still yields finite numbers."""
    _, s, vt = np.linalg.svd(jac, full_matrices=False)
    threshold = np.finfo(float).eps * max(jac.shape) * (s[0] if s.size else 0.0)
    inv = np.where(s > threshold, 1.0 / np.where(s > 0, s, 1.0) ** 2, 0.0)
    return (vt.T * inv) @ vt


def _correlation(cov: np.ndarray) -> np.ndarray:
    d = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    with np.errstate(divide="ignore", invalid="ignore"):
        corr = cov / np.outer(d, d)
    return np.nan_to_num(corr, nan=0.0)


def _residual_function(model: _Model, obs: Observation, sigma: np.ndarray, start: np.ndarray):
    """Residuals (weighted), nuisance start values and bounds for ``obs``."""
    if obs.kind == "trace":
        return _trace_residuals(model, obs, sigma, start)
    return _peak_residuals(model, obs, sigma, start)


def _trace_residuals(model: _Model, obs: Observation, sigma: np.ndarray, start: np.ndarray):
    time = obs.time
    mask = obs.weights_mask if obs.weights_mask is not None else np.ones(time.shape, bool)
    shape0 = model.shape(start, time)
    # Linear least squares for gain and offset at the start values.
    design = np.column_stack([shape0[mask], np.ones(mask.sum())])
    (gain0, offset0), *_ = np.linalg.lstsq(design, obs.voltage[mask], rcond=None)
    if not np.isfinite(gain0) or gain0 == 0:
        gain0 = 1.0
    amplitude = float(np.max(np.abs(obs.voltage[mask] - offset0))) or 1.0
    max_shift = 0.25 * obs.period
    shift_scale = obs.period * 1e-3
    nuisance_start = np.array([gain0, offset0 / amplitude, 0.0])
    bounds = (np.array([-np.inf, -np.inf, -max_shift / shift_scale]),
              np.array([np.inf, np.inf, max_shift / shift_scale]))

    def values(physical: np.ndarray, nuisance: np.ndarray) -> np.ndarray:
        gain, offset, shift = nuisance[0], nuisance[1] * amplitude, nuisance[2] * shift_scale
        return gain * model.shape(physical, time - shift) + offset

    def residuals(physical: np.ndarray, nuisance: np.ndarray) -> np.ndarray:
        return ((values(physical, nuisance) - obs.voltage) / sigma)[mask]

    def model_values(physical: np.ndarray, nuisance: np.ndarray) -> np.ndarray:
        return values(physical, nuisance)

    residuals.model_values = model_values  # type: ignore[attr-defined]
    to_si = (np.array([1.0, amplitude, shift_scale]), np.zeros(3))
    return residuals, nuisance_start, bounds, ("gain", "offset", "shift"), to_si


def _peak_residuals(model: _Model, obs: Observation, sigma: np.ndarray, start: np.ndarray):
    index = peak_indices(obs, model.fixture.response)
    count = int(index.max()) + 1
    time_sigma = obs.time_sigma if obs.time_sigma > 0 else obs.period * 1e-3
    t_model0, v_model0 = model.extrema(start, count)
    ratio = obs.voltage / np.where(v_model0[index] != 0, v_model0[index], 1.0)
    amplitude0 = float(np.median(ratio))
    # The table's time base is arbitrary: the first reading fixes where the event was,
    # within a little over half a period either way (the amplitude's sign absorbs a
    # reading numbered one turning point off).
    origin0 = float(obs.time[0] - t_model0[index[0]])
    nuisance_start = np.array([amplitude0, 0.0])
    period = obs.period
    bounds = (np.array([-np.inf, -0.6 * period / time_sigma]),
              np.array([np.inf, 0.6 * period / time_sigma]))

    def predicted(physical: np.ndarray, nuisance: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        t_model, v_model = model.extrema(physical, count)
        return t_model[index] + origin0 + nuisance[1] * time_sigma, nuisance[0] * v_model[index]

    def residuals(physical: np.ndarray, nuisance: np.ndarray) -> np.ndarray:
        t_pred, v_pred = predicted(physical, nuisance)
        return np.concatenate([(v_pred - obs.voltage) / sigma, (t_pred - obs.time) / time_sigma])

    def model_values(physical: np.ndarray, nuisance: np.ndarray) -> np.ndarray:
        return predicted(physical, nuisance)[1]

    residuals.model_values = model_values  # type: ignore[attr-defined]
    to_si = (np.array([1.0, time_sigma]), np.array([0.0, origin0]))
    return residuals, nuisance_start, bounds, ("amplitude", "time_origin"), to_si


ResidualFunction = Callable[[np.ndarray, np.ndarray], np.ndarray]
