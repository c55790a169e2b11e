"""Least-squares statistics: information criteria, covariance and correlation.

One copy of each, used by the candidate fit, the comparison's engine metrics and the
ring-down estimators. Nothing here knows about circuits or measurements: the callers
say which likelihood applies (see :func:`profiled_deviance`).

For Gaussian errors ``-2 ln L`` (the *deviance*, up to a constant shared by every model
fitted to the same data) gives ``AIC = -2 ln L + 2 k`` and ``BIC = -2 ln L + k ln n``
(Akaike 1974; Schwarz 1978; from memory).
"""

from __future__ import annotations

from typing import Literal

import numpy as np

Undetermined = Literal["pseudo-inverse", "infinite"]


def profiled_deviance(chi2: float, n: int, n_effective: float) -> float:
    """``-2 ln L`` up to a constant when the noise level is profiled from the residuals.

    With Gaussian errors of unknown common variance, maximising the likelihood over the
    variance leaves ``-2 ln L = n ln(RSS / n) + const``. Samples that are correlated
    carry the information of fewer independent ones, so the leading factor is the
    effective count: ``n_eff ln(chi2 / n)``.

    Parameters
    ----------
    chi2
        Sum of squared (weighted) residuals.
    n
        Number of residuals.
    n_effective
        Effective number of independent residuals.
    """
    return n_effective * np.log(chi2 / n)


def aic(deviance: float, k: int) -> float:
    """Akaike information criterion ``-2 ln L + 2 k`` for ``k`` fitted values."""
    return float(deviance + 2 * k)


def bic(deviance: float, k: int, n: float) -> float:
    """Bayesian information criterion ``-2 ln L + k ln n`` (``n``: sample count)."""
    return float(deviance + k * np.log(n))


def covariance_from_jacobian(
    jacobian: np.ndarray,
    *,
    rcond: float = 1e-12,
    scale_columns: bool = True,
    undetermined: Undetermined = "infinite",
) -> np.ndarray:
    """``(J^T J)^-1`` through the singular value decomposition of ``J``.

    Parameters
    ----------
    jacobian
        Jacobian of the (weighted) residuals, shape ``(n, k)``.
    rcond
        Singular values below ``rcond`` times the largest count as zero (numpy's rank
        and pseudo-inverse use machine epsilon times ``max(n, k)``).
    scale_columns
        Decompose the column-normalised Jacobian, undoing the scaling afterwards, so
        parameters in very different units do not set the cut-off for one another.
    undetermined
        What a numerically null direction gives: ``"infinite"`` gives every parameter
        taking part in it (weight above 1e-3) an infinite variance rather than a
        meaningless huge number; ``"pseudo-inverse"`` leaves the direction out
        (finite numbers, so a degenerate fit can still be inspected).

    Returns
    -------
    numpy.ndarray
        Shape ``(k, k)``; multiply by the residual variance for a covariance.
    """
    jac = np.asarray(jacobian, dtype=float)
    if scale_columns:
        norms = np.linalg.norm(jac, axis=0)
        norms = np.where(norms > 0, norms, 1.0)
        jac = jac / norms
    _, sing, vt = np.linalg.svd(jac, full_matrices=False)
    keep = sing > rcond * (sing[0] if sing.size else 0.0)
    inv = np.zeros_like(sing)
    inv[keep] = 1.0 / sing[keep] ** 2
    cov = (vt.T * inv) @ vt
    if scale_columns:
        cov = cov / np.outer(norms, norms)
    if undetermined == "infinite" and not keep.all():
        involved = np.abs(vt[~keep]).max(axis=0) > 1e-3
        cov[involved, involved] = np.inf
    return cov


def correlation_from_covariance(cov: np.ndarray) -> np.ndarray:
    """Correlation matrix of ``cov``; entries with a zero variance give 0."""
    d = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    with np.errstate(divide="ignore", invalid="ignore"):
        corr = cov / np.outer(d, d)
    return np.nan_to_num(corr, nan=0.0)
