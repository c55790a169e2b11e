"""Nonlinear least squares of a sum of damped sinusoids plus offset.

Model (parameters ``theta = [alpha_1, omega_1, a_1, b_1, ..., alpha_M, omega_M, a_M, b_M,
offset]``)::

    v(t) = sum_m exp(-alpha_m t) (a_m cos(omega_m t) + b_m sin(omega_m t)) + offset

The cosine/sine amplitudes (rather than amplitude and phase) keep the problem well
conditioned; ``A = hypot(a, b)`` and ``phi = atan2(-b, a)`` give the usual
``A exp(-alpha t) cos(omega t + phi)`` form. The refinement is
:func:`scipy.optimize.least_squares` with the analytic Jacobian; standard errors come from
``s^2 (J^T J)^-1`` (ordinary least-squares asymptotics,
:func:`xcheck.fitting.stats.covariance_from_jacobian`); with correlated residuals the
sandwich covariance (:func:`sandwich_covariance`) uses their autocorrelation up to the
lag where it has died out (:func:`residual_correlation`, which also gives ``N_eff``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

from xcheck.fitting.stats import covariance_from_jacobian


def mode_count(theta: np.ndarray) -> int:
    """Number of damped sinusoids in a parameter vector of length ``4 M + 1``."""
    return (len(theta) - 1) // 4


def damped_model(time: np.ndarray, theta: np.ndarray) -> np.ndarray:
    """Evaluate the sum of damped sinusoids plus offset at ``time`` (s)."""
    theta = np.asarray(theta, dtype=float)
    out = np.full(np.shape(time), theta[-1], dtype=float)
    for m in range(mode_count(theta)):
        alpha, omega, a, b = theta[4 * m : 4 * m + 4]
        phase = omega * time
        with np.errstate(over="ignore", invalid="ignore"):
            # A trial mode that grows (alpha < 0) may overflow; the optimiser then
            # sees an infinite residual and steps back, which is all it needs.
            out += np.exp(-alpha * time) * (a * np.cos(phase) + b * np.sin(phase))
    return out


def damped_jacobian(time: np.ndarray, theta: np.ndarray) -> np.ndarray:
    """Analytic Jacobian d model / d theta, shape ``(len(time), len(theta))``."""
    theta = np.asarray(theta, dtype=float)
    jac = np.empty((len(time), len(theta)))
    for m in range(mode_count(theta)):
        alpha, omega, a, b = theta[4 * m : 4 * m + 4]
        decay = np.exp(-alpha * time)
        cos = decay * np.cos(omega * time)
        sin = decay * np.sin(omega * time)
        jac[:, 4 * m] = -time * (a * cos + b * sin)
        jac[:, 4 * m + 1] = time * (b * cos - a * sin)
        jac[:, 4 * m + 2] = cos
        jac[:, 4 * m + 3] = sin
    jac[:, -1] = 1.0
    return jac


def linear_amplitudes(
    time: np.ndarray, voltage: np.ndarray, rates: list[tuple[float, float]]
) -> np.ndarray:
    """Best cosine/sine amplitudes and offset for fixed (alpha, omega) pairs.

    Ordinary linear least squares (numpy.linalg.lstsq); returns a full parameter vector.
    """
    columns = []
    for alpha, omega in rates:
        decay = np.exp(-alpha * time)
        columns += [decay * np.cos(omega * time), decay * np.sin(omega * time)]
    columns.append(np.ones_like(time))
    basis = np.column_stack(columns)
    coef = np.linalg.lstsq(basis, voltage, rcond=None)[0]
    theta = []
    for m, (alpha, omega) in enumerate(rates):
        theta += [alpha, omega, coef[2 * m], coef[2 * m + 1]]
    theta.append(coef[-1])
    return np.asarray(theta, dtype=float)


@dataclass(frozen=True)
class NlsFit:
    """Outcome of :func:`fit_damped`."""

    theta: np.ndarray
    residuals: np.ndarray
    jacobian: np.ndarray
    cost: float
    success: bool
    message: str
    evaluations: int


def fit_damped(time: np.ndarray, voltage: np.ndarray, theta0: np.ndarray) -> NlsFit:
    """Refine ``theta0`` by nonlinear least squares (Levenberg-Marquardt, MINPACK).

    Parameters
    ----------
    time, voltage
        Samples to fit (s, V); the caller has already left out excluded samples.
    theta0
        Starting parameters, see the module docstring.

    Returns
    -------
    NlsFit
        Parameters, residuals (data minus model), Jacobian at the solution, status.
    """
    t = np.asarray(time, dtype=float)
    v = np.asarray(voltage, dtype=float)

    def residual(theta: np.ndarray) -> np.ndarray:
        return damped_model(t, theta) - v

    def jac(theta: np.ndarray) -> np.ndarray:
        return damped_jacobian(t, theta)

    result = least_squares(
        residual,
        np.asarray(theta0, dtype=float),
        jac=jac,
        method="lm",
        x_scale="jac",
        xtol=1e-12,
        ftol=1e-12,
        gtol=1e-12,
        max_nfev=200 * (len(theta0) + 1),
    )
    return NlsFit(
        theta=result.x,
        residuals=-result.fun,
        jacobian=result.jac,
        cost=float(result.cost),
        success=bool(result.success),
        message=str(result.message),
        evaluations=int(result.nfev),
    )


def residual_correlation(residuals: np.ndarray) -> tuple[np.ndarray, float]:
    """Autocorrelation of residuals up to the lag where it has died out, and ``N_eff``.

    ``N_eff = N / (1 + 2 sum_k rho_k)`` with the sample autocorrelation ``rho_k`` summed
    by Geyer's initial positive sequence (Geyer 1992, Statistical Science 7: pairs
    ``rho_2m + rho_2m+1`` are added while positive), which stops the sum where the
    estimated correlation has fallen into its own noise. Clamped to ``[1, N]``.

    Returns
    -------
    tuple
        ``rho[0..K]`` (``rho[0] = 1``) up to the truncation lag K, and ``N_eff``.
    """
    r = np.asarray(residuals, dtype=float)
    n = len(r)
    if n < 8:
        return np.ones(1), float(n)
    r = r - r.mean()
    size = 1 << (2 * n - 1).bit_length()
    spectrum = np.fft.rfft(r, size)
    acov = np.fft.irfft(spectrum * np.conj(spectrum), size)[:n] / n
    if acov[0] <= 0:
        return np.ones(1), float(n)
    rho = acov / acov[0]
    max_lag = n // 4
    total = 0.0  # sum of the pairs Gamma_m = rho_2m + rho_2m+1, from m = 0 (rho_0 = 1)
    m = 0
    while 2 * m + 1 <= max_lag:
        pair = rho[2 * m] + rho[2 * m + 1]
        if pair <= 0:
            break
        total += pair
        m += 1
    tau = max(2.0 * total - 1.0, 1.0)  # Geyer: -1 + 2 sum_m Gamma_m = 1 + 2 sum_k rho_k
    lag = max(2 * m - 1, 0)
    return rho[: lag + 1].copy(), float(min(max(n / tau, 1.0), n))


def sandwich_covariance(jacobian: np.ndarray, rho: np.ndarray, sigma: float) -> np.ndarray:
    """Parameter covariance of least squares under correlated noise.

    ``(J^T J)^-1 J^T Sigma J (J^T J)^-1`` with ``Sigma_ij = sigma^2 rho_|i-j|`` truncated
    at the last lag of ``rho`` (the heteroscedasticity-and-autocorrelation-consistent
    "sandwich" covariance, Newey & West 1987, Econometrica 55, here with flat
    truncation at the lag where the correlation has died out). Unlike a single
    ``N / N_eff`` factor it weighs the noise spectrum where each parameter's information
    lies (near the ringing frequency for frequency and decay, near DC for the offset).
    """
    jac = np.asarray(jacobian, dtype=float)
    bread = covariance_from_jacobian(jac)
    meat = jac.T @ jac
    lags = len(rho) - 1
    if lags <= 16:
        for k in range(1, lags + 1):
            cross = jac[:-k].T @ jac[k:]
            meat += rho[k] * (cross + cross.T)
    else:
        # Lagged cross-products of all column pairs at once by FFT correlation.
        size = 1 << (2 * len(jac) - 1).bit_length()
        spectra = np.fft.rfft(jac, size, axis=0)
        for i in range(jac.shape[1]):
            lagged = np.fft.irfft(np.conj(spectra[:, i : i + 1]) * spectra, size, axis=0)
            row = rho[1:] @ lagged[1 : lags + 1]  # sum_k rho_k sum_n J[n, i] J[n + k, :]
            meat[i] += row
            meat[:, i] += row
    return sigma**2 * bread @ meat @ bread


def at_least(cov: np.ndarray, floor: np.ndarray) -> np.ndarray:
    """``cov`` with each variance raised to at least that of ``floor`` (correlations kept).

    Correlated noise is never allowed to make a standard error smaller than white noise
    of the same per-sample level would (a conservative choice, common practice).
    """
    d_cov, d_floor = np.diag(cov), np.diag(floor)
    scale = np.sqrt(
        np.where(d_cov > 0, np.maximum(d_floor / np.where(d_cov > 0, d_cov, 1.0), 1.0), 1.0)
    )
    return cov * np.outer(scale, scale)


def given_noise(noise_sigma: float, resolution: float | None) -> tuple[float, str]:
    """A given per-sample noise level for the uncertainties, and where it came from.

    When the converter step q exceeds the given level, its rounding variance q^2/12
    (uniform-error model, common practice) is added; a finer step hides in the noise.

    Parameters
    ----------
    noise_sigma
        The given noise level (V), e.g. the pre-event baseline's scatter.
    resolution
        The converter step (V), or None.

    Returns
    -------
    tuple
        The level (V) and the words for ``noise_source``.
    """
    sigma = float(noise_sigma)
    source = "given noise level (pre-event baseline)"
    if resolution and resolution > noise_sigma:
        sigma = math.hypot(sigma, resolution / math.sqrt(12.0))
        source += " plus quantisation q^2/12"
    return sigma, source


def block_means(
    time: np.ndarray, voltage: np.ndarray, keep: np.ndarray, size: int
) -> tuple[np.ndarray, np.ndarray]:
    """Means of consecutive blocks of ``size`` samples; blocks touching an excluded sample go."""
    n_blocks = len(time) // size
    t = time[: n_blocks * size].reshape(n_blocks, size)
    v = voltage[: n_blocks * size].reshape(n_blocks, size)
    k = keep[: n_blocks * size].reshape(n_blocks, size).all(axis=1)
    return t[k].mean(axis=1), v[k].mean(axis=1)


def unblock(theta_blocks: np.ndarray, size: int, step: float) -> np.ndarray:
    """Sample-level parameters from parameters fitted to block means.

    The mean over ``size`` samples spaced ``step`` of ``exp(s t)`` centred on ``t_c`` is
    ``exp(s t_c) sinh(size s step / 2) / (size sinh(s step / 2))``: the poles are
    unchanged and each complex amplitude ``a - i b`` is multiplied by that factor, which
    is divided out here (exact for uniformly sampled data).
    """
    theta = np.array(theta_blocks, dtype=float)
    if size == 1:
        return theta
    for m in range(mode_count(theta)):
        alpha, omega, a, b = theta[4 * m : 4 * m + 4]
        s = complex(-alpha, omega)
        gain = np.sinh(size * s * step / 2.0) / (size * np.sinh(s * step / 2.0))
        z = complex(a, -b) / gain
        theta[4 * m + 2] = z.real
        theta[4 * m + 3] = -z.imag
    return theta


def jtj_chunked(time: np.ndarray, theta: np.ndarray, chunk: int = 200_000) -> np.ndarray:
    """``J^T J`` of the model at every sample, accumulated in chunks to bound memory."""
    p = len(theta)
    acc = np.zeros((p, p))
    for start in range(0, len(time), chunk):
        jac = damped_jacobian(time[start : start + chunk], theta)
        acc += jac.T @ jac
    return acc


def model_chunked(time: np.ndarray, theta: np.ndarray, chunk: int = 1_000_000) -> np.ndarray:
    """:func:`damped_model` evaluated chunk by chunk (same result, bounded temporaries)."""
    out = np.empty(len(time))
    for start in range(0, len(time), chunk):
        out[start : start + chunk] = damped_model(time[start : start + chunk], theta)
    return out
