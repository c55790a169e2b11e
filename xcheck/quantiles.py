"""Tail probabilities and quantiles of the normal and Student-t distributions.

Thin wrappers on :mod:`scipy.special` (already loaded by :mod:`scipy.optimize`), so the
few thresholds xcheck needs do not pull in :mod:`scipy.stats`, which costs about half a
second of start-up. Each function evaluates the same special function that
``scipy.stats.norm`` / ``scipy.stats.t`` evaluate, and applies the same boundary
values, so the results agree with them to the last bit.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike
from scipy import special

__all__ = ["normal_isf", "normal_sf", "student_isf", "student_ppf"]


def _scalar_or_array(value: np.ndarray) -> float | np.ndarray:
    """A plain ``numpy.float64`` for 0-d results, the array otherwise."""
    return value[()] if value.ndim == 0 else value


def normal_sf(x: ArrayLike) -> float | np.ndarray:
    """Upper-tail probability ``P(Z > x)`` of the standard normal distribution.

    Parameters
    ----------
    x
        Value(s) in standard deviations.

    Returns
    -------
    float or numpy.ndarray
        ``1 - Phi(x)``, evaluated as ``Phi(-x)`` so that it keeps full relative
        precision far into the upper tail.
    """
    return _scalar_or_array(np.asarray(special.ndtr(-np.asarray(x, dtype=float))))


def normal_isf(p: ArrayLike) -> float | np.ndarray:
    """Value exceeded with probability ``p`` by a standard normal variable.

    Parameters
    ----------
    p
        Upper-tail probability(ies), in ``[0, 1]``; ``nan`` outside.

    Returns
    -------
    float or numpy.ndarray
        ``z`` with ``P(Z > z) = p``: ``inf`` at ``p = 0``, ``-inf`` at ``p = 1``.
        Evaluated as ``-Phi^-1(p)``, which keeps full precision for small ``p``
        (``Phi^-1(1 - p)`` would lose it in forming ``1 - p``).
    """
    return _scalar_or_array(np.asarray(-special.ndtri(np.asarray(p, dtype=float))))


def student_ppf(q: ArrayLike, df: ArrayLike) -> float | np.ndarray:
    """Quantile (inverse CDF) of Student's t distribution.

    Parameters
    ----------
    q
        Lower-tail probability(ies), in ``[0, 1]``; ``nan`` outside.
    df
        Degrees of freedom, ``> 0`` (need not be an integer; ``inf`` gives the normal
        distribution); ``nan`` for ``df <= 0``.

    Returns
    -------
    float or numpy.ndarray
        ``t`` with ``P(T <= t) = q``: ``-inf`` at ``q = 0``, ``inf`` at ``q = 1``.
    """
    q_arr = np.asarray(q, dtype=float)
    df_arr = np.asarray(df, dtype=float)
    value = special.stdtrit(df_arr, q_arr)
    # stdtrit returns +inf at q = 0; the quantile there is the lower end of the support.
    value = np.where((q_arr == 0.0) & (df_arr > 0.0), -np.inf, value)
    return _scalar_or_array(np.asarray(value))


def student_isf(p: ArrayLike, df: ArrayLike) -> float | np.ndarray:
    """Value exceeded with probability ``p`` by a Student-t variable.

    Parameters
    ----------
    p
        Upper-tail probability(ies), in ``[0, 1]``; ``nan`` outside.
    df
        Degrees of freedom, ``> 0`` (need not be an integer); ``nan`` for ``df <= 0``.

    Returns
    -------
    float or numpy.ndarray
        ``t`` with ``P(T > t) = p``: ``inf`` at ``p = 0``, ``-inf`` at ``p = 1``.
        Evaluated by symmetry as ``-F^-1(p)``, which keeps full precision for
        small ``p``.
    """
    return _scalar_or_array(np.asarray(-np.asarray(student_ppf(p, df))))
