"""What one measurement cannot separate, found from the fit itself.

Values that produce the same waveform (in a ring-down every series resistance adds to
one loss; L and C set the frequency only through their product unless one is pinned)
show up as a (nearly) null direction of the fit's Jacobian and a correlation near
+/-1. No list of known pairs is consulted: the direction is read from the Jacobian and
classified as a *sum* (equal change in the same units), a *product* (equal and opposite
relative change) or a *ratio* (equal relative change).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

#: Singular-value ratio below which a direction counts as undetermined. Finite-difference
#: Jacobians carry relative noise of about sqrt(machine epsilon) ~ 1e-8, so exact
#: degeneracies land far below this while merely correlated values stay above it.
NULL_RATIO = 1e-4
#: Correlation beyond which two values are reported as poorly separated.
HIGH_CORRELATION = 0.99


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


def _classify(direction: np.ndarray, values: np.ndarray, units: Sequence[str]) -> str:
    """Name the null direction in physical units: sum, product, ratio or combination."""
    absolute = direction / np.max(np.abs(direction))
    same_units = len(set(units)) == 1
    if same_units and np.allclose(np.abs(absolute), 1.0, atol=0.05):
        signs = np.sign(absolute)
        if len(signs) == 2 and signs[0] != signs[1]:
            return "sum"
        if len(signs) > 2 and abs(np.sum(absolute)) < 0.1 * len(signs):
            return "sum"
    with np.errstate(divide="ignore", invalid="ignore"):
        relative = direction / values
    if np.all(np.isfinite(relative)) and np.max(np.abs(relative)) > 0:
        relative = relative / np.max(np.abs(relative))
        if np.allclose(np.abs(relative), 1.0, atol=0.05) and len(relative) == 2:
            return "product" if relative[0] * relative[1] < 0 else "ratio"
    return "combination"


def find_degeneracies(
    jacobian: np.ndarray,
    free: Sequence,  # Sequence[FreeParameter]; untyped to avoid an import cycle
    values: np.ndarray,
    scale: np.ndarray,
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
    for s, row in zip(singular, vt):
        if s > NULL_RATIO * singular[0]:
            continue
        # Direction in x, then in physical units.
        direction_x = row / norms[live]
        direction = direction_x * scale[live]
        weight = np.abs(row) / np.max(np.abs(row))
        members_idx = live[weight > 0.1]
        if members_idx.size < 2:
            continue
        local = np.array([np.flatnonzero(live == m)[0] for m in members_idx])
        units = [free[m].unit for m in members_idx]
        kind = _classify(direction[local], values[members_idx], units)
        labels = tuple(free[m].label for m in members_idx)
        unit = units[0] if kind == "sum" else "*".join(units) if kind == "product" else "/".join(units)
        found.append(
            Degeneracy(labels, kind, float("nan"), float("nan"), unit, _reason(kind, labels))
        )
    return found


def _reason(kind: str, labels: tuple[str, ...]) -> str:
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
