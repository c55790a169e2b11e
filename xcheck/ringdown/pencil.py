"""Matrix pencil estimate of the poles of a sum of damped exponentials.

Hua & Sarkar, "Matrix pencil method for estimating parameters of exponentially
damped/undamped sinusoids in noise", IEEE Trans. ASSP 38(5), 1990. Written here with
numpy's SVD because neither numpy nor scipy offers the method; scipy.linalg.hankel builds
the data matrix (its SVD is taken through a QR factorisation, Y = QR, SVD of R).

For uniformly sampled ``y[n] = sum_i R_i z_i^n`` the Hankel matrix ``Y[i, j] = y[i + j]``
(``N - L`` rows, ``L + 1`` columns) has rank ``M`` (the number of exponentials). Keeping
the ``M`` principal right singular vectors ``V`` (the SVD is the noise filter), the
shifted blocks satisfy ``V[1:] = V[:-1] Phi`` and the eigenvalues of ``Phi`` are the
``z_i``. The pencil parameter ``L`` between N/3 and N/2 gives the lowest variance in
noise (ibid., sec. V); N/3 is used.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg import hankel


@dataclass(frozen=True)
class PencilResult:
    """Poles found by :func:`matrix_pencil`.

    Attributes
    ----------
    poles
        Continuous-time poles ``s = log(z) / dt`` (1/s); a damped sinusoid appears as
        the pair ``-alpha +- j omega``, a constant as ``s ~ 0``.
    singular_values
        All singular values of the Hankel matrix (their fall-off shows the model order).
    """

    poles: np.ndarray
    singular_values: np.ndarray


def matrix_pencil(
    samples: np.ndarray, step: float, order: int, pencil: int | None = None
) -> PencilResult:
    """Poles of ``order`` damped exponentials in uniformly spaced samples.

    Parameters
    ----------
    samples
        Real samples, uniformly spaced by ``step`` seconds.
    step
        Sample interval (s).
    order
        Number of complex exponentials M (a damped sinusoid counts two, an offset one).
    pencil
        Pencil parameter L; default ``N // 3``.

    Returns
    -------
    PencilResult
        The ``order`` poles and the singular values.

    Raises
    ------
    ValueError
        When there are too few samples for the requested order.
    """
    y = np.asarray(samples, dtype=float)
    n = len(y)
    size = pencil if pencil is not None else n // 3
    if size < order or n - size < order:
        raise ValueError(f"{n} samples are too few for a pencil of order {order}")
    data = hankel(y[: n - size], y[n - size - 1 :])
    # Right singular vectors of Y are those of R in Y = QR (Y^T Y = R^T R): the SVD of
    # the small square R is cheaper and steadier than that of the tall Y.
    _, sing, vt = np.linalg.svd(np.linalg.qr(data, mode="r"))
    basis = vt[:order].T
    phi = np.linalg.lstsq(basis[:-1], basis[1:], rcond=None)[0]
    z = np.linalg.eigvals(phi).astype(complex)
    z = np.where(z == 0, 1e-300, z)
    return PencilResult(poles=np.log(z) / step, singular_values=sing)


def damped_pairs(poles: np.ndarray, nyquist_rad: float) -> list[tuple[float, float]]:
    """``(alpha, omega)`` of the oscillating poles (positive imaginary part), in pole order.

    Poles with ``omega`` at or above the Nyquist rate, or essentially real, are dropped.
    """
    pairs = []
    for s in poles:
        if s.imag > 1e-6 * max(abs(s), 1e-30) and s.imag < 0.999 * nyquist_rad:
            pairs.append((float(-s.real), float(s.imag)))
    return pairs
