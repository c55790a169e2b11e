"""What one measurement cannot separate, found from the fit itself.

Values that produce the same waveform (in a ring-down every series resistance adds to
one loss; L and C set the frequency only through their product unless one is pinned)
show up as a (nearly) null direction of the fit's Jacobian and a correlation near
+/-1. No list of known pairs is consulted: the direction is read from the Jacobian and
classified as a *sum* (equal change in the same units), a *product* (equal and opposite
relative change) or a *ratio* (equal relative change).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from xcheck.circuit.parameters import ParameterSet
from xcheck.fixture.schema import label_key
from xcheck.fitting.stats import correlation_from_covariance, covariance_from_jacobian

#: Singular-value ratio below which a direction counts as undetermined. Finite-difference
#: Jacobians carry relative noise of about sqrt(machine epsilon) ~ 1e-8, so exact
#: degeneracies land far below this while merely correlated values stay above it.
NULL_RATIO = 1e-4
#: Correlation beyond which two values are reported as poorly separated.
HIGH_CORRELATION = 0.99
#: Correlation beyond which two values are treated as one combination: at 0.999 the
#: standard error of each is over 20 times that of their best-determined combination.
INSEPARABLE_CORRELATION = 0.999
#: Groups whose determined combination has a physical meaning; only these are collapsed
#: (one member kept free, the others held). A merely correlated "combination" is
#: reported but every member stays free: holding one at a poor start value would bias
#: the rest.
COLLAPSIBLE = ("sum", "product", "ratio")


@dataclass(frozen=True)
class Degeneracy:
    """A group of fitted values the data determine only in combination.

    Attributes
    ----------
    members
        Labels such as ``("L1.dcr", "loop.extra_resistance")``.
    combination
        ``"sum"``, ``"product"``, ``"ratio"`` or ``"combination"``.
    value, stderr
        The determined combination and its standard error (SI), when evaluated.
    unit
        Unit of the combination (``"ohm"`` for a sum of resistances; for a product the
        product of the members' units, e.g. ``"H*F"``).
    reason
        Plain-words explanation for the report.
    correlation
        Correlation between the first two members at the first fit.
    """

    members: tuple[str, ...]
    combination: str
    value: float
    stderr: float
    unit: str
    reason: str
    correlation: float = float("nan")


def _same(columns: np.ndarray) -> bool:
    """True when every column equals the first within 2 % of its norm (exactly
    equivalent values agree to rounding; nearly equivalent ones, such as ESR seen
    through a probe whose timing is also fitted, to within a few per mille)."""
    reference = columns[:, :1]
    size = np.linalg.norm(reference) or 1.0
    return bool(np.all(np.linalg.norm(columns - reference, axis=0) <= 0.02 * size))


def _classify(physical_columns: np.ndarray, values: np.ndarray, units: Sequence[str]) -> str:
    """Name what the data determine about a group, from its Jacobian columns.

    Equal columns per unit change (same units): only the sum matters. Equal columns per
    relative change: only the product matters; opposite ones (two members): the ratio.
    """
    if len(set(units)) == 1 and _same(physical_columns):
        return "sum"
    relative = physical_columns * values[None, :]
    if _same(relative):
        return "product"
    if relative.shape[1] == 2 and _same(relative * np.array([1.0, -1.0])[None, :]):
        return "ratio"
    return "combination"


def find_degeneracies(
    jacobian: np.ndarray,
    free: Sequence,  # Sequence[FreeParameter]; untyped to avoid an import cycle
    values: np.ndarray,
    scale: np.ndarray,
    nuisance: np.ndarray | None = None,
) -> list[Degeneracy]:
    """Groups of free values the Jacobian cannot tell apart.

    Parameters
    ----------
    jacobian
        d(weighted residuals)/d(x) for the physical free values only, where the
        physical value is ``x * scale``.
    free
        The free parameters (with ``label`` and ``unit``), in column order.
    values
        Fitted physical values.
    scale
        Physical value per unit of x, per column.
    nuisance
        Jacobian columns of values also fitted but not reported (gain, offset, time
        shift). They take part in the correlations: a value that only a nuisance value
        can mimic is still separable, but two values that differ only in what a nuisance
        value absorbs are not.

    Returns
    -------
    list of Degeneracy
        One entry per null direction (value and stderr left NaN: the fit fills them in
        after refitting with the group collapsed).
    """
    norms = np.linalg.norm(jacobian, axis=0)
    found: list[Degeneracy] = []
    dead = norms <= 0
    if np.any(dead):
        for index in np.flatnonzero(dead):
            found.append(
                Degeneracy((free[index].label,), "none", float("nan"), float("nan"), free[index].unit,
                           f"{free[index].label} has no effect on the measured waveform")
            )
    live = np.flatnonzero(~dead)
    if live.size < 2:
        return found
    normalised = jacobian[:, live] / norms[live]
    _, singular, vt = np.linalg.svd(normalised, full_matrices=False)
    extra = np.zeros((jacobian.shape[0], 0)) if nuisance is None else nuisance
    extra_norms = np.linalg.norm(extra, axis=0)
    extra = extra[:, extra_norms > 0] / extra_norms[extra_norms > 0]
    physical = jacobian / np.where(scale > 0, scale, 1.0)[None, :]
    if extra.shape[1]:
        # Compare columns only in what the nuisance values cannot absorb.
        basis, _ = np.linalg.qr(extra)
        physical = physical - basis @ (basis.T @ physical)
    member_sets: list[set[int]] = []
    correlated: list[set[int]] = []  # pairs touching an exact group, reported separately
    for s, row in zip(singular, vt):
        if s > NULL_RATIO * singular[0]:
            continue
        weight = np.abs(row) / np.max(np.abs(row))
        members = set(int(m) for m in live[weight > 0.1])
        if len(members) < 2:
            continue
        _join(member_sets, members)
    # Nearly equivalent values: not exactly null, but so correlated that the data
    # cannot apportion them (a standard error many times the value). Exact groups are
    # represented by one member here, so their singular direction cannot fake a
    # correlation with anything else.
    exact = [set(m) for m in member_sets]
    hidden = {m for group in exact for m in sorted(group)[1:]}
    shown = [k for k, column in enumerate(live) if int(column) not in hidden]
    if len(shown) >= 2:
        subset = np.column_stack([normalised[:, shown], extra])
        # Columns of unit norm already; a direction is dropped where numpy's default
        # pseudo-inverse of J^T J (cut-off 1e-15 of its largest eigenvalue) drops it.
        cov = covariance_from_jacobian(subset, rcond=math.sqrt(1e-15), scale_columns=False,
                                       undetermined="pseudo-inverse")
        corr = correlation_from_covariance(cov[: len(shown), : len(shown)])
        for a in range(len(shown)):
            for b in range(a + 1, len(shown)):
                if abs(corr[a, b]) > INSEPARABLE_CORRELATION:
                    pair = {int(live[shown[a]]), int(live[shown[b]])}
                    index = np.array(sorted(pair))
                    kind = _classify(physical[:, index], np.asarray(values, float)[index],
                                     [free[m].unit for m in index])
                    if kind != "combination" or not any(pair & group for group in exact):
                        _join(member_sets, pair)
                    else:
                        correlated.append(pair)
    for members in member_sets:
        index = np.array(sorted(members))
        units = [free[m].unit for m in index]
        kind = _classify(physical[:, index], np.asarray(values, float)[index], units)
        labels = tuple(free[m].label for m in index)
        unit = units[0] if kind == "sum" else "*".join(units) if kind == "product" else "/".join(units)
        found.append(
            Degeneracy(labels, kind, float("nan"), float("nan"), unit, reason_for(kind, labels))
        )
    for pair in correlated:
        index = np.array(sorted(pair))
        labels = tuple(free[m].label for m in index)
        found.append(Degeneracy(labels, "combination", float("nan"), float("nan"), "",
                                reason_for("combination", labels)))
    return found


def _join(member_sets: list[set[int]], members: set[int]) -> None:
    """Add ``members`` to ``member_sets``, merging every set it overlaps."""
    members = set(members)
    for other in [m for m in member_sets if m & members]:
        members |= other
        member_sets.remove(other)
    member_sets.append(members)


def merge_groups(groups: tuple[Degeneracy, ...]) -> tuple[Degeneracy, ...]:
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


def evaluate_groups(groups: Sequence[Degeneracy], fitted: Sequence,
                    parameters: ParameterSet | None) -> tuple[Degeneracy, ...]:
    """Each group with its determined combination evaluated at a refit in which only
    its first member was free.

    Parameters
    ----------
    groups
        The groups, value and stderr not yet known.
    fitted
        The refit's fitted values (with ``label``, ``value``, ``stderr``); untyped to
        avoid an import cycle.
    parameters
        The refit's parameter set, holding every member's value.

    Returns
    -------
    tuple of Degeneracy
        A sum's value is the members' sum, with the free member's uncertainty (its
        ``uncertainty`` when it has one: combined with the fixed values'); a product's
        the members' product, with the free member's relative uncertainty; anything
        else NaN.
    """
    values = {f.label: f for f in fitted}
    out = []
    for group in groups:
        members = list(group.members)
        first = values.get(members[0])
        # The free member's uncertainty, with what the fixed values carry (GUM
        # section 5) where the fit worked it out.
        stderr = getattr(first, "uncertainty", first.stderr) if first is not None else float("nan")
        member_values = ([parameters.get(label_key(m), 0.0) or 0.0 for m in members]
                         if parameters else [])
        if group.combination == "sum":
            combined = float(sum(member_values))
        elif group.combination == "product":
            combined = float(np.prod(member_values))
            stderr = combined * (stderr / first.value) if first and first.value else float("nan")
        else:
            combined = float("nan")
        out.append(
            Degeneracy(group.members, group.combination, combined, stderr, group.unit, group.reason,
                       group.correlation)
        )
    return tuple(out)


def reason_for(kind: str, labels: tuple[str, ...]) -> str:
    """Plain-words reason for a group of values determined only in combination."""
    names = ", ".join(labels)
    if kind == "sum":
        return (f"{names} act as one series loss in this waveform: every ohm moved from one to "
                "another gives the same trace, so only their sum is determined; a separate "
                "measurement (e.g. a DC reading of one of them) would split it")
    if kind == "product":
        return (f"{names} set the ring frequency only through their product: pin one of them "
                "with a measurement to determine the other")
    if kind == "ratio":
        return f"only the ratio of {names} is determined by this waveform"
    return f"{names} trade against each other; only a combination of them is determined"


def correlated_pairs(labels: Sequence[str], correlation: np.ndarray,
                     threshold: float = HIGH_CORRELATION) -> list[tuple[str, str, float]]:
    """Pairs of fitted values whose correlation magnitude exceeds ``threshold``."""
    pairs = []
    for i in range(len(labels)):
        for j in range(i + 1, len(labels)):
            if abs(correlation[i, j]) > threshold:
                pairs.append((labels[i], labels[j], float(correlation[i, j])))
    return pairs
