"""Sensitivities of f_d, alpha and the fit residual, and which tolerance explains a gap.

The normalised sensitivity of an output y to a value p is (p / y) dy/dp: the percentage
y moves for one percent of p (for f = 1 / (2 pi sqrt(L C)) it is -1/2 for L and for C).
It is taken by central differences, each side one rebuilt circuit on the exact engine:

    S = (y(p (1 + h)) - y(p (1 - h))) / (2 h y(p)),

h = :data:`STEP` for f_d and alpha (the truncation error is of order h^2, far below any
tolerance) and :data:`RESIDUAL_STEP` for the residual, which is the RMS of the
candidate's fit (its nuisance values, and any free value, refitted at each side, so
the optimiser's own tolerance must stay small beside the change it measures).

Then, for the measured f_d and alpha (the ring-down estimate,
:mod:`xcheck.measured`), each varied value is moved alone to either extreme
(:attr:`xcheck.sweep.tolerances.VariedValue.extremes`), the others held as stated: it
*explains* the measured value when the measurement lies within the range this reaches
widened by :data:`AGREEMENT_K` standard errors of the estimate (coverage factor 2,
common practice, no source). Explaining values are ranked by how little of their range
they need, the others by how much of the gap they reach.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Literal

import numpy as np

from xcheck.circuit.expand import build_circuit
from xcheck.circuit.parameters import ParameterSet
from xcheck.engines.exact import ExactEngine, dominant_ring
from xcheck.errors import XcheckError
from xcheck.fitting.candidates import Candidate, describe_key, unit_of
from xcheck.fitting.fit import fit_candidate
from xcheck.fitting.observation import Observation
from xcheck.fixture.model import Fixture
from xcheck.fixture.schema import ParameterKey, key_label
from xcheck.sweep.tolerances import VariedValue, varied_values

#: Relative step of the central differences of f_d and alpha.
STEP = 1e-4
#: Relative step of the central differences of the fit residual.
RESIDUAL_STEP = 1e-3
#: Standard errors of the measured value that count as agreement.
AGREEMENT_K = 2.0

Quantity = Literal["frequency", "damping"]


@dataclass(frozen=True)
class Sensitivity:
    """Normalised sensitivities of one value (nan where an output is not defined)."""

    key: ParameterKey
    value: float
    unit: str
    words: str
    frequency: float
    alpha: float
    residual: float
    varied: VariedValue | None = None

    @property
    def label(self) -> str:
        """``"L1.value"``."""
        return key_label(self.key)


@dataclass(frozen=True)
class Explanation:
    """What one varied value alone does to a measured gap.

    Attributes
    ----------
    varied
        The value and its distribution.
    reach
        The output with the value at its low and at its high extreme.
    needed
        The relative change of the value that would close the gap (interpolated
        between the stated value and the extreme on that side); nan when no change
        within reach of either extreme's direction does.
    covers
        Share of the gap reached at the better extreme (1 or more when it closes).
    explains
        True when the measurement lies within ``reach`` (and the stated value's
        output), widened by :data:`AGREEMENT_K` standard errors.
    """

    varied: VariedValue
    reach: tuple[float, float]
    needed: float
    covers: float
    explains: bool


@dataclass(frozen=True)
class Discrepancy:
    """A measured output against the candidate's, and the values that explain it."""

    quantity: Quantity
    measured: float
    stderr: float
    model: float
    explained_by: tuple[Explanation, ...]
    not_explained: tuple[Explanation, ...]

    @property
    def agrees(self) -> bool:
        """True when the stated values already give the measured value."""
        return abs(self.measured - self.model) <= AGREEMENT_K * self.stderr


@dataclass(frozen=True)
class CandidateSensitivity:
    """One candidate's sensitivities and explanations."""

    candidate: str
    frequency: float
    alpha: float
    residual: float
    sensitivities: tuple[Sensitivity, ...]
    discrepancies: tuple[Discrepancy, ...]

    @property
    def sentence(self) -> str:
        """The explanations in words (see :func:`explanation_words`)."""
        return explanation_words(self.discrepancies)


def ring_of(fixture: Fixture, parameters: ParameterSet) -> tuple[float, float]:
    """(f_d in Hz, alpha in 1/s) of the dominant ring the parameter set gives (nan,
    nan when nothing rings)."""
    engine = ExactEngine(build_circuit(fixture, parameters))
    ring = dominant_ring(engine, engine.model())
    if ring is None:
        return float("nan"), float("nan")
    return ring[0] / (2 * math.pi), ring[1]


def residual_of(fixture: Fixture, candidate: Candidate, parameters: ParameterSet,
                observation: Observation) -> float:
    """The RMS residual (V) of the candidate fitted with ``parameters`` as its start and
    fixed values (nan when the fit fails)."""
    fit = fit_candidate(fixture, replace(candidate, parameters=parameters), observation)
    return float(fit.rmse) if not fit.failed else float("nan")


def _normalised(plus: float, minus: float, centre: float, step: float) -> float:
    if not (math.isfinite(plus) and math.isfinite(minus) and math.isfinite(centre)) or centre == 0:
        return float("nan")
    return (plus - minus) / (2 * step * centre)


def sensitivities(fixture: Fixture, candidate: Candidate,
                  observation: Observation | None = None,
                  measured=None) -> CandidateSensitivity:
    """Sensitivities of f_d, alpha and the fit residual to every non-zero value of the
    candidate, and the explanations of the measured f_d and alpha.

    Parameters
    ----------
    fixture, candidate
        The candidate (its parameter set gives the values).
    observation
        The measurement the residual is fitted to; None leaves the residual out (nan).
    measured
        The :class:`~xcheck.measured.Measured` record giving the measured f_d and
        alpha; None (or a record that does not ring) leaves the explanations out.

    Returns
    -------
    CandidateSensitivity
    """
    if not candidate.usable:
        raise XcheckError(f"candidate {candidate.name}: {'; '.join(candidate.problems)}")
    params = candidate.parameters
    f0, a0 = ring_of(fixture, params)
    r0 = residual_of(fixture, candidate, params, observation) if observation is not None \
        else float("nan")
    varied = {v.key: v for v in varied_values(fixture, params)}
    rows = []
    for key, value in params.values.items():
        if not value:
            continue
        up = params.with_values({key: value * (1 + STEP)}, "sensitivity")
        down = params.with_values({key: value * (1 - STEP)}, "sensitivity")
        (fu, au), (fd, ad) = ring_of(fixture, up), ring_of(fixture, down)
        residual = float("nan")
        if observation is not None:
            ru = residual_of(fixture, candidate, params.with_values(
                {key: value * (1 + RESIDUAL_STEP)}, "sensitivity"), observation)
            rd = residual_of(fixture, candidate, params.with_values(
                {key: value * (1 - RESIDUAL_STEP)}, "sensitivity"), observation)
            residual = _normalised(ru, rd, r0, RESIDUAL_STEP)
        rows.append(Sensitivity(key, float(value), unit_of(fixture, key),
                                describe_key(fixture, key), _normalised(fu, fd, f0, STEP),
                                _normalised(au, ad, a0, STEP), residual, varied.get(key)))
    discrepancies: list[Discrepancy] = []
    if measured is not None and not measured.aperiodic:
        reaches = {key: _reach(fixture, params, item) for key, item in varied.items()}
        for quantity, estimate, model, slot in (
                ("frequency", measured.damped_frequency_hz, f0, 0),
                ("damping", measured.neper_frequency_per_s, a0, 1)):
            if not math.isfinite(model):
                continue
            discrepancies.append(_discrepancy(quantity, estimate.value, estimate.stderr, model,
                                              [(varied[k], r[slot]) for k, r in reaches.items()]))
    return CandidateSensitivity(candidate.name, f0, a0, r0, tuple(rows), tuple(discrepancies))


def _reach(fixture: Fixture, params: ParameterSet,
           item: VariedValue) -> tuple[tuple[float, float], tuple[float, float]]:
    """((f_d low, f_d high), (alpha low, alpha high)) with ``item`` at its extremes."""
    low, high = (ring_of(fixture, params.with_values({item.key: item.value * f}, "extreme"))
                 for f in item.extremes)
    return (low[0], high[0]), (low[1], high[1])


def _discrepancy(quantity: Quantity, measured: float, stderr: float, model: float,
                 reaches: list[tuple[VariedValue, tuple[float, float]]]) -> Discrepancy:
    gap = measured - model
    margin = AGREEMENT_K * (stderr if math.isfinite(stderr) else 0.0)
    explains, others = [], []
    for item, (y_low, y_high) in reaches:
        span = [y for y in (y_low, y_high, model) if math.isfinite(y)]
        inside = bool(span) and min(span) - margin <= measured <= max(span) + margin
        covers, needed = 0.0, float("nan")
        for factor, y in zip(item.extremes, (y_low, y_high)):
            moved = y - model
            if not math.isfinite(moved) or gap == 0 or moved * gap <= 0:
                continue
            share = moved / gap
            if share > covers:
                covers = share
                needed = (factor - 1.0) / share if share >= 1 else float("nan")
        entry = Explanation(item, (y_low, y_high), needed, covers, inside)
        (explains if inside else others).append(entry)

    def used(e: Explanation) -> float:
        half = max(abs(f - 1.0) for f in e.varied.extremes)
        return abs(e.needed) / half if math.isfinite(e.needed) else 0.0

    explains.sort(key=used)
    others.sort(key=lambda e: -e.covers)
    return Discrepancy(quantity, measured, stderr, model, tuple(explains), tuple(others))


def _pct(value: float) -> str:
    return f"{100 * value:+.2g} %"


def explanation_words(discrepancies: tuple[Discrepancy, ...]) -> str:
    """One sentence per measured quantity, e.g. "L1 within its 10 % tolerance (uniform)
    explains the frequency (it needs -3.9 %); no tolerance explains the damping (the
    nearest, C1, reaches 12 % of the gap)."."""
    parts = []
    for item in discrepancies:
        what = item.quantity
        if item.agrees:
            parts.append(f"the stated values already give the measured {what} (within "
                         f"{AGREEMENT_K:g} standard errors)")
            continue
        if item.explained_by:
            found = item.explained_by
            if len(found) == 1:
                e = found[0]
                need = f" (it needs {_pct(e.needed)})" if math.isfinite(e.needed) else ""
                parts.append(f"{e.varied.part} within {e.varied.words} explains the {what}{need}")
                continue
            names = [e.varied.part for e in found]
            needs = "; ".join(
                f"{e.varied.part} within {e.varied.words}"
                + (f" needs {_pct(e.needed)}" if math.isfinite(e.needed) else "")
                for e in found)
            parts.append(f"{', '.join(names[:-1])} or {names[-1]} alone explains the {what} "
                         f"({needs})")
            continue
        if not item.not_explained:
            parts.append(f"nothing varies that could explain the {what} (no tolerance and no "
                         "meter reading)")
            continue
        nearest = item.not_explained[0]
        parts.append(f"no tolerance explains the {what} (the nearest, {nearest.varied.part}, "
                     f"reaches {100 * nearest.covers:.2g} % of the gap)")
    if not parts:
        return ""
    text = "; ".join(parts)
    return text[0].upper() + text[1:] + "."
