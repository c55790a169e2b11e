"""The next measurement to make: which reading would cut a fitted value's uncertainty most.

Three kinds of reading are weighed, each by the standard uncertainty it would leave
(first-order propagation, JCGM 100:2008 section 5, inputs uncorrelated):

- **a better reading of a fixed value** that carries much of a fitted value's combined
  uncertainty (its budget, :mod:`xcheck.fitting.fixed_values`): a label value read on a
  meter to :data:`METER_ACCURACY`, a meter reading repeated to
  :data:`BETTER_METER_ACCURACY`; the budget entry shrinks in proportion.
- **a direct reading of a fitted value** (an inductance on an LCR meter, a winding's DC
  resistance on a four-wire ohmmeter): added to the fit as one more observation, the
  Fisher information of that value grows by 1/u^2; the covariance of the others follows
  from the rank-one update ``S - S e e^T S / (e^T S e + u^2)`` (the Kalman / Sherman-
  Morrison form, from memory).
- **splitting a sum** the data determine only as a whole: a direct reading of one member
  leaves the other known to ``sqrt(u_sum^2 + u_reading^2)``.

Meter accuracies are stated as the half-width of a rectangular distribution (JCGM 100,
4.3.7): u = accuracy x |value| / sqrt(3). The accuracies are typical bench figures
(common practice, no source); the sentence says which was assumed.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from xcheck.fitting.candidates import describe_key
from xcheck.fitting.fit import FitResult, FittedValue
from xcheck.fitting.fixed_values import fixed_uncertainties
from xcheck.fixture.model import Fixture
from xcheck.fixture.schema import ParameterKey, label_key
from xcheck.values import format_eng

#: Accuracy assumed for a first meter reading of a label value (common practice, no source).
METER_ACCURACY = 0.01
#: Accuracy assumed for a better reading of a value already metered (common practice).
BETTER_METER_ACCURACY = 0.001
#: Readings that would cut an uncertainty by less than this share are not suggested.
WORTH_SUGGESTING = 0.2
#: At most this many suggestions, best first.
SHOWN = 3


@dataclass(frozen=True)
class NextMeasurement:
    """One reading that would help, and by how much.

    Attributes
    ----------
    measure
        What to read: ``"C1 capacitance"``.
    instrument
        How: ``"an LCR meter to 0.1 %"``.
    improves
        The fitted value (or sum) whose uncertainty falls most.
    before, after
        Its combined standard uncertainty now and with the reading (SI; ``before`` is
        infinite for a sum's member the data cannot determine).
    unit
        Their unit.
    reduction
        ``1 - after / before``.
    sentence
        The suggestion in words.
    """

    measure: str
    instrument: str
    improves: str
    before: float
    after: float
    unit: str
    reduction: float
    sentence: str


def next_measurements(fixture: Fixture, fit: FitResult) -> tuple[NextMeasurement, ...]:
    """The readings that would cut the fitted values' uncertainties most, best first.

    Parameters
    ----------
    fixture
        The fixture (which values are fixed, their origins and tolerances).
    fit
        A candidate's fit, with its budget of fixed-value uncertainties, standard errors
        and correlation matrix.

    Returns
    -------
    tuple of NextMeasurement
        At most :data:`SHOWN`, each cutting some fitted uncertainty by at least
        :data:`WORTH_SUGGESTING`; empty when the fit failed or nothing would help much.
    """
    best: dict[str, NextMeasurement] = {}
    for item in every_reading(fixture, fit):
        if item.reduction < WORTH_SUGGESTING:
            continue
        kept = best.get(item.measure)
        if kept is None or item.reduction > kept.reduction:
            best[item.measure] = item
    ranked = sorted(best.values(), key=lambda m: (-m.reduction, m.measure))
    return tuple(ranked[:SHOWN])


def every_reading(fixture: Fixture, fit: FitResult) -> list[NextMeasurement]:
    """Every reading weighed, for every fitted value it would improve (unranked).

    Parameters
    ----------
    fixture, fit
        As for :func:`next_measurements`.
    """
    if fit.failed or not fit.fitted:
        return []
    return _splitting_sums(fixture, fit) + _better_fixed(fixture, fit) + _direct(fixture, fit)


def _instrument(fixture: Fixture, key: ParameterKey, accuracy: float) -> str:
    unit = _unit(fixture, key)
    if key[1] == "dcr" or (unit == "ohm" and key[1] == "value"):
        return f"a four-wire DC ohmmeter to {accuracy:.1%}".replace(".0%", "%")
    if key[1] == "esr":
        return f"an LCR meter at the ring frequency to {accuracy:.1%}".replace(".0%", "%")
    return f"an LCR meter to {accuracy:.1%}".replace(".0%", "%")


def _unit(fixture: Fixture, key: ParameterKey) -> str:
    spec = fixture.field_spec(key)
    return spec.unit if spec is not None else ""


def _measurable(fixture: Fixture, key: ParameterKey) -> bool:
    """A value of a real part a bench meter reads directly (not a pseudo-part)."""
    return key[0] in fixture.parts and _unit(fixture, key) in ("ohm", "H", "F")


def _reading_sigma(value: float, accuracy: float) -> float:
    return accuracy * abs(value) / math.sqrt(3.0)


def _combined(value: FittedValue) -> float:
    return value.uncertainty


def _item(fixture: Fixture, key: ParameterKey, accuracy: float, improves: str, before: float,
          after: float, unit: str, words: str) -> NextMeasurement:
    measure = describe_key(fixture, key)
    instrument = _instrument(fixture, key, accuracy)
    reduction = 1.0 - after / before if math.isfinite(before) and before > 0 else 1.0
    return NextMeasurement(measure, instrument, improves, before, after, unit, reduction, words)


def _better_fixed(fixture: Fixture, fit: FitResult) -> list[NextMeasurement]:
    if fit.parameters is None:
        return []
    free = {label_key(v.label) for v in fit.fitted}
    items = {u.words: u for u in fixed_uncertainties(fixture, fit.parameters, free)}
    out = []
    for value in fit.fitted:
        before = _combined(value)
        for words, contribution in value.budget:
            item = items.get(words)
            if item is None or not _measurable(fixture, item.key) or before <= 0:
                continue
            metered = "meter" in words
            accuracy = BETTER_METER_ACCURACY if metered else METER_ACCURACY
            better = _reading_sigma(item.value, accuracy)
            if better >= item.sigma:
                continue
            after = math.sqrt(max(before ** 2 - contribution ** 2
                                  + (contribution * better / item.sigma) ** 2, 0.0))
            target = describe_key(fixture, label_key(value.label))
            cut = 1.0 - after / before
            verb = "a better reading of" if metered else "reading"
            sentence = (f"{verb} {describe_key(fixture, item.key)} on "
                        f"{_instrument(fixture, item.key, accuracy)} would cut the "
                        f"uncertainty of {target} by {cut:.0%} "
                        f"(± {format_eng(before, value.unit)} to ± {format_eng(after, value.unit)})")
            out.append(_item(fixture, item.key, accuracy, target, before, after, value.unit,
                             sentence))
    return out


def _covariance(fit: FitResult) -> np.ndarray | None:
    """The fit's own covariance of the fitted values (SI), from its correlation matrix."""
    n = len(fit.fitted)
    if fit.correlation is None or fit.correlation.shape[0] < n:
        return None
    sd = np.array([v.stderr for v in fit.fitted], float)
    corr = np.asarray(fit.correlation, float)[:n, :n]
    if not (np.all(np.isfinite(sd)) and np.all(np.isfinite(corr))):
        return None
    return corr * np.outer(sd, sd)


def _direct(fixture: Fixture, fit: FitResult) -> list[NextMeasurement]:
    cov = _covariance(fit)
    if cov is None:
        return []
    out = []
    fitted = list(fit.fitted)
    for m, value in enumerate(fitted):
        key = label_key(value.label)
        if not _measurable(fixture, key) or not value.value:
            continue
        u = _reading_sigma(value.value, METER_ACCURACY)
        update = cov - np.outer(cov[:, m], cov[m, :]) / (cov[m, m] + u ** 2)
        for j, other in enumerate(fitted):
            before = _combined(other)
            if before <= 0:
                continue
            fixed_part = max(before ** 2 - other.stderr ** 2, 0.0)
            if j == m:
                after = math.sqrt(1.0 / (1.0 / before ** 2 + 1.0 / u ** 2))
            else:
                after = math.sqrt(max(update[j, j], 0.0) + fixed_part)
            target = describe_key(fixture, label_key(other.label))
            cut = 1.0 - after / before
            sentence = (f"reading {describe_key(fixture, key)} on "
                        f"{_instrument(fixture, key, METER_ACCURACY)} would cut the uncertainty "
                        f"of {target} by {cut:.0%} (± {format_eng(before, other.unit)} to "
                        f"± {format_eng(after, other.unit)})")
            out.append(_item(fixture, key, METER_ACCURACY, target, before, after, other.unit,
                             sentence))
    return out


def _splitting_sums(fixture: Fixture, fit: FitResult) -> list[NextMeasurement]:
    out = []
    for group in fit.degeneracies:
        if group.combination != "sum" or not math.isfinite(group.value):
            continue
        keys = [label_key(m) for m in group.members]
        names = " + ".join(describe_key(fixture, k) for k in keys)
        for key in keys:
            if not _measurable(fixture, key):
                continue
            # The member's size is unknown; a reading to the accuracy of a sum's share
            # is taken at half the sum (the two members alike), a fair middle.
            u = _reading_sigma(group.value / 2, METER_ACCURACY)
            after = math.sqrt(group.stderr ** 2 + u ** 2)
            others = [describe_key(fixture, k) for k in keys if k != key]
            sentence = (f"a reading of {describe_key(fixture, key)} alone, on "
                        f"{_instrument(fixture, key, METER_ACCURACY)}, would split the "
                        f"{format_eng(group.value, group.unit)} sum of {names}: "
                        f"{', '.join(others)} would then be known to about "
                        f"± {format_eng(after, group.unit)}")
            out.append(_item(fixture, key, METER_ACCURACY, f"the sum {names}", math.inf, after,
                             group.unit, sentence))
    return out
