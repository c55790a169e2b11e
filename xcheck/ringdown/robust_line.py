"""Theil-Sen line: the median of pairwise slopes, robust to a minority of bad points.

Written out with numpy so that the envelope test does not need :mod:`scipy.stats`.
It follows the estimator of Theil (1950) and Sen (1968) as ``scipy.stats.theilslopes``
computes it with its default ``method='separate'``: the slope is the median of
``(y_j - y_i) / (x_j - x_i)`` over the pairs with ``x_j > x_i`` (pairs with equal
``x`` are skipped), the intercept ``median(y) - slope * median(x)``.
"""

from __future__ import annotations

import warnings

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["theil_sen"]


def theil_sen(y: ArrayLike, x: ArrayLike) -> tuple[float, float]:
    """Slope and intercept of the Theil-Sen line through ``(x, y)``.

    Parameters
    ----------
    y
        Dependent values, one per point.
    x
        Independent values, same length as ``y``; ties are allowed (pairs with
        equal ``x`` take no part in the slope).

    Returns
    -------
    slope, intercept : float
        ``slope`` is the median of the pairwise slopes, ``intercept`` is
        ``median(y) - slope * median(x)``. Both are ``nan`` (with a
        ``RuntimeWarning``) when there are fewer than 2 points or every ``x`` is
        the same, as ``scipy.stats.theilslopes`` gives.

    Raises
    ------
    ValueError
        If ``x`` and ``y`` differ in length.

    Notes
    -----
    All ``n (n - 1) / 2`` slopes are formed at once, ``O(n^2)`` memory: meant for a
    few hundred points at most.
    """
    y_arr = np.asarray(y, dtype=float).ravel()
    x_arr = np.asarray(x, dtype=float).ravel()
    if x_arr.size != y_arr.size:
        raise ValueError("x and y must have the same length")
    if y_arr.size < 2:
        warnings.warn("fewer than 2 points: no line", RuntimeWarning, stacklevel=2)
        return float("nan"), float("nan")
    dx = x_arr[:, np.newaxis] - x_arr
    dy = y_arr[:, np.newaxis] - y_arr
    forward = dx > 0
    if not forward.any():
        warnings.warn("all x coordinates are identical", RuntimeWarning, stacklevel=2)
        return float("nan"), float("nan")
    slope = float(np.median(dy[forward] / dx[forward]))
    intercept = float(np.median(y_arr) - slope * np.median(x_arr))
    return slope, intercept
