"""Cramér-Rao bound of the damped-sinusoid model.

For data ``x = s(theta) + w`` with white Gaussian ``w`` of variance ``sigma^2`` the
Fisher information is ``I(theta) = J^T J / sigma^2`` with ``J = d s / d theta`` (Kay,
Fundamentals of Statistical Signal Processing, vol. 1: Estimation Theory, 1993,
eq. 3.31), and no unbiased estimator has a covariance below ``I(theta)^-1``. The bound is
evaluated numerically at the given parameters and on the actual sample times, so it
covers damping, offset, clipped gaps and several modes alike.
"""

from __future__ import annotations

import numpy as np

from xcheck.fitting.stats import covariance_from_jacobian
from xcheck.ringdown.nls import jtj_chunked


def fisher_information(jacobian: np.ndarray, sigma: float) -> np.ndarray:
    """``J^T J / sigma^2`` for white Gaussian noise of standard deviation ``sigma`` (V)."""
    jac = np.asarray(jacobian, dtype=float)
    return jac.T @ jac / sigma**2


def crb_covariance(jacobian: np.ndarray, sigma: float) -> np.ndarray:
    """Inverse Fisher information ``sigma^2 (J^T J)^-1`` (computed via an SVD of J)."""
    return sigma**2 * covariance_from_jacobian(np.asarray(jacobian, dtype=float))


def damped_sinusoid_crb(time: np.ndarray, theta: np.ndarray, sigma: float) -> np.ndarray:
    """Cramér-Rao bound of ``theta`` (see :mod:`xcheck.ringdown.nls`) on sample times ``time``.

    ``J^T J`` is accumulated in chunks, so long records cost little memory. Returns the
    bound as a covariance matrix in the order of ``theta``.
    """
    jtj = jtj_chunked(np.asarray(time, dtype=float), np.asarray(theta, dtype=float))
    scale = np.sqrt(np.diag(jtj))
    scale = np.where(scale > 0, scale, 1.0)
    normalised = jtj / np.outer(scale, scale)
    inv = np.linalg.pinv(normalised, rcond=1e-13, hermitian=True)
    return sigma**2 * inv / np.outer(scale, scale)
