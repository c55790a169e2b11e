"""Fewer points to draw, the same picture: the extremes of each pixel column.

A figure 880 pixels wide cannot show ten million samples, and drawing them costs
seconds and memory for nothing. Evenly spaced decimation would, however, drop a
single-sample spike. :func:`envelope` keeps, in each of ``columns`` equal slices of the
time axis, the sample with the smallest and the one with the largest value (in time
order), plus the first and last sample: a line through those points covers exactly the
vertical extent every column would have shown, so spikes, clipping and glitches stay
visible (the usual min/max decimation of oscilloscope displays; common practice, no
source). Data drawn as separate points also keep a few evenly spaced samples per
column (``spread``), so that a noisy band still looks filled rather than as its two
edges. Only real samples are returned, never averages.
"""

from __future__ import annotations

import numpy as np

#: Above this many points per column a series is thinned; below it drawn as it is.
POINTS_PER_COLUMN = 2
#: Evenly spaced samples kept per column, on average, for data drawn as points.
POINT_SPREAD = 6


def columns_of(figure) -> int:
    """The figure's width in pixels (``figsize`` width times ``dpi``): one column each.

    Parameters
    ----------
    figure
        A matplotlib figure.

    Returns
    -------
    int
    """
    return max(1, int(round(figure.get_figwidth() * figure.dpi)))


def envelope_indices(x: np.ndarray, y: np.ndarray, columns: int, spread: int = 0) -> np.ndarray:
    """Indices of the samples :func:`envelope` keeps (ascending).

    Parameters
    ----------
    x
        Abscissae, non-decreasing (times).
    y
        Values, as many as ``x``.
    columns
        Equal slices of ``[x[0], x[-1]]`` (pixel columns).
    spread
        Evenly spaced samples to keep per column on average besides the extremes.

    Returns
    -------
    numpy.ndarray
        Every index when there are at most ``(POINTS_PER_COLUMN + spread) * columns``
        samples; otherwise the first and last sample, per non-empty slice the first
        occurrence of its minimum and of its maximum, and every k-th sample for
        ``spread`` (k = n // (spread * columns)).
    """
    n = x.size
    columns = max(columns, 1)
    if n <= (POINTS_PER_COLUMN + spread) * columns:
        return np.arange(n)
    width = float(x[-1] - x[0])
    if width > 0:
        # Column c holds x[0] + width * [c, c + 1) / columns (the last one closed);
        # x is sorted, so each column is one slice, found by bisection.
        edges = x[0] + width * (np.arange(1, columns) / columns)
        bounds = np.r_[0, np.searchsorted(x, edges, side="left"), n]
    else:
        bounds = np.array([0, n])
    keep = [np.array([0, n - 1])]
    if spread > 0:
        keep.append(np.arange(0, n, max(1, n // (spread * columns))))
    lows, highs = [], []
    for begin, end in zip(bounds[:-1], bounds[1:]):
        if end > begin:
            piece = y[begin:end]
            lows.append(begin + int(np.argmin(piece)))
            highs.append(begin + int(np.argmax(piece)))
    keep += [np.array(lows, dtype=np.int64), np.array(highs, dtype=np.int64)]
    return np.unique(np.concatenate(keep))


def envelope(
    x: np.ndarray, y: np.ndarray, columns: int, limits: tuple[float, float] | None = None,
    spread: int = 0,
) -> tuple[np.ndarray, np.ndarray]:
    """The samples worth drawing of ``(x, y)`` in a plot ``columns`` pixels wide.

    Parameters
    ----------
    x
        Abscissae (s), non-decreasing; unsorted input is sorted first (stable).
    y
        Values, as many as ``x``; NaN is not expected (the readers refuse it).
    columns
        Width of the plot in pixels.
    limits
        The shown range of ``x``: samples outside it are left out, except the nearest
        one on each side (so that a line still runs to the edge). None: all of ``x``.
    spread
        Evenly spaced samples per column besides the extremes (for data drawn as
        points; 0 for a line).

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        The kept samples, in order (see :func:`envelope_indices`).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if x.size and not np.all(x[1:] >= x[:-1]):
        order = np.argsort(x, kind="stable")
        x, y = x[order], y[order]
    if limits is not None and x.size:
        lo = max(int(np.searchsorted(x, limits[0], side="left")) - 1, 0)
        hi = min(int(np.searchsorted(x, limits[1], side="right")) + 1, x.size)
        x, y = x[lo:hi], y[lo:hi]
    if not x.size:
        return x, y
    keep = envelope_indices(x, y, columns, spread)
    return x[keep], y[keep]
