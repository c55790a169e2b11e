"""Three signal routines the ring-down estimator needs, on numpy alone.

:func:`spaced_peaks` (samples that are the highest within a given spacing, by a
running maximum, :func:`window_maximum`), :func:`strongest_line` (the frequency of the
largest one-sided periodogram bin) and :func:`cubic_smoother_residual` (a Savitzky-Golay
cubic smoother's residual and centre coefficient). They stand in for
``scipy.signal.find_peaks(x, distance=d)``, ``scipy.signal.periodogram(...,
window="boxcar", detrend=False)`` and ``scipy.signal.savgol_filter(x, w, 3)`` in these
uses, and the tests hold them to those functions. They are written here because
importing ``scipy.signal`` costs about half a second (it imports ``scipy.stats`` and
parses docstrings), which every ``xcheck compare`` would pay before reading a sample;
and the running maximum keeps the peak search at a few passes over the record however
finely it is sampled.
"""

from __future__ import annotations

import math

import numpy as np

#: Windows longer than this are convolved through the FFT rather than directly.
DIRECT_CONVOLUTION_TAPS = 64


def window_maximum(values: np.ndarray, width: int) -> np.ndarray:
    """Largest sample within ``width // 2`` samples either side of each sample.

    The van Herk / Gil-Werman running maximum: cumulative maxima forward and backward
    within blocks of ``width`` samples, so the cost does not depend on ``width``. The
    record is padded with -inf, so windows near the ends see only the samples there.

    Parameters
    ----------
    values
        Samples, one dimension.
    width
        Odd window length (samples).

    Returns
    -------
    numpy.ndarray
        The running maximum, one value per sample.
    """
    y = np.asarray(values, dtype=float)
    half = width // 2
    width = 2 * half + 1
    count = math.ceil((y.size + 2 * half) / width)
    padded = np.full(count * width, -np.inf)
    padded[half : half + y.size] = y
    blocks = padded.reshape(count, width)
    forward = np.maximum.accumulate(blocks, axis=1).ravel()
    backward = np.maximum.accumulate(blocks[:, ::-1], axis=1)[:, ::-1].ravel()
    # Window of sample i (padded positions i .. i + width - 1): the backward maximum
    # from its start to the end of the start's block, the forward maximum from the
    # next block's start to the window's end.
    return np.maximum(backward[: y.size], forward[width - 1 : width - 1 + y.size])


def spaced_peaks(values: np.ndarray, distance: int) -> np.ndarray:
    """Indices of samples that are the highest within ``distance - 1`` samples of themselves.

    Non-maximum suppression: a sample is a peak when no sample closer than ``distance``
    (and neither neighbour) is higher and it is higher than at least one neighbour (so
    a flat record has no peaks); the first and last samples never count. A flat top
    counts once, at its middle sample (the left one of two middle ones); of equal peaks
    closer than ``distance`` the first is kept; a missing sample (NaN) counts as lower
    than any. Peaks are therefore at least ``distance`` samples apart. Unlike
    ``scipy.signal.find_peaks(values, distance=distance)``, which removes lower peaks
    greedily from the highest down, a peak is not kept because the higher peak next to
    it was removed by a still higher one; on a ringing record the two agree at the
    ringing's extrema (the tests compare them). The cost is a few passes over the
    record whatever ``distance`` is.

    Parameters
    ----------
    values
        Samples, one dimension.
    distance
        Least spacing of the peaks returned (samples, at least 1).

    Returns
    -------
    numpy.ndarray
        Sample indices (int) of the peaks, increasing.
    """
    y = np.asarray(values, dtype=float)
    distance = max(1, int(math.ceil(distance)))
    if y.size < 3:
        return np.zeros(0, dtype=int)
    if np.isnan(y).any():
        y = np.where(np.isnan(y), -np.inf, y)  # a missing sample is lower than any
    top = y >= window_maximum(y, 2 * max(distance, 2) - 1)
    top[0] = top[-1] = False
    inner = top[1:-1]
    inner &= (y[1:-1] > y[:-2]) | (y[1:-1] > y[2:])
    index = np.flatnonzero(top)
    # A flat top passes at its two edges: take its middle once.
    rising = index[(index + 1 < y.size) & (y[np.minimum(index + 1, y.size - 1)] == y[index])]
    if rising.size:
        ends = np.array([_flat_end(y, i) for i in rising])
        middles = rising + (ends - rising) // 2
        # The flat tops are disjoint and in order: each index lies in the last one
        # starting at or before it, or in none.
        top_of = np.searchsorted(rising, index, side="right") - 1
        inside = (top_of >= 0) & (index <= ends[np.maximum(top_of, 0)])
        index = np.union1d(index[~inside], middles)
    if index.size > 1:
        index = index[np.concatenate(([True], np.diff(index) >= max(distance, 2)))]
    return index.astype(int)


def _flat_end(y: np.ndarray, start: int) -> int:
    """Index of the last sample of the run of samples equal to ``y[start]``."""
    step = 64
    while True:
        stop = min(start + step, y.size)
        differ = np.flatnonzero(y[start:stop] != y[start])
        if differ.size:
            return start + int(differ[0]) - 1
        if stop == y.size:
            return y.size - 1
        step *= 4


def strongest_line(values: np.ndarray, step: float, nfft: int,
                   lowest: float) -> float:
    """Frequency (Hz) of the largest one-sided periodogram bin at or above ``lowest``.

    The rectangular-window periodogram of ``values`` zero-padded to ``nfft`` points:
    ``|X_k|^2``, doubled except at DC and (even ``nfft``) the Nyquist bin, as the
    one-sided density of ``scipy.signal.periodogram(values, window="boxcar",
    detrend=False, nfft=nfft)`` up to a constant factor, which the largest bin does not
    depend on.

    Parameters
    ----------
    values
        Samples, one dimension (mean already removed if it should be).
    step
        Sample interval (s).
    nfft
        Transform length (at least ``len(values)``).
    lowest
        Lowest frequency considered (Hz).

    Returns
    -------
    float
        The bin's frequency (Hz); ``lowest`` when no bin reaches it.
    """
    spectrum = np.fft.rfft(np.asarray(values, dtype=float), n=nfft)
    power = spectrum.real**2 + spectrum.imag**2
    last = power.size - 1 if nfft % 2 == 0 else power.size
    power[1:last] *= 2.0
    freqs = np.fft.rfftfreq(nfft, d=step)
    usable = freqs >= lowest
    if not usable.any():
        return float(lowest)
    return float(freqs[usable][np.argmax(power[usable])])


def cubic_smoother_residual(values: np.ndarray, window: int) -> tuple[np.ndarray, float]:
    """Residual of a Savitzky-Golay cubic smoother, and its centre coefficient.

    Interior samples are smoothed by the least-squares cubic over ``window`` samples
    centred on each; the first and last ``window // 2`` samples by the cubic fitted to
    the first and last ``window`` samples (``scipy.signal.savgol_filter(values,
    window, 3)``, its default ``mode="interp"``). Long windows are convolved through
    the FFT.

    Parameters
    ----------
    values
        Samples, one dimension, at least ``window`` of them.
    window
        Odd window length, at least 5.

    Returns
    -------
    tuple
        ``values - smoothed`` and the smoother's weight of the centre sample ``h0``.
    """
    v = np.asarray(values, dtype=float)
    if window % 2 == 0 or window < 5 or window > v.size:
        raise ValueError(f"window must be odd, at least 5 and at most {v.size}; got {window}")
    half = window // 2
    x = np.arange(-half, half + 1, dtype=float)
    design = np.vander(x, 4)
    weights = np.linalg.pinv(design)  # rows: cubic coefficients from the window's samples
    centre_row = weights[-1]  # the constant term: the smoothed value at the centre
    smooth = np.empty_like(v)
    if window <= DIRECT_CONVOLUTION_TAPS:
        interior = np.convolve(v, centre_row[::-1], mode="valid")
    else:
        size = 1 << (v.size + window - 1).bit_length()
        full = np.fft.irfft(np.fft.rfft(v, size) * np.fft.rfft(centre_row[::-1], size), size)
        interior = full[window - 1 : v.size]
    smooth[half : v.size - half] = interior
    head = np.polyval(weights @ v[:window], x[:half])
    tail = np.polyval(weights @ v[-window:], x[half + 1 :])
    smooth[:half] = head
    smooth[v.size - half :] = tail
    return v - smooth, float(centre_row[half])
