"""Clipping and quantisation seen in a measured channel.

Owns :data:`CLIP_RUN`, :func:`estimate_resolution` (the converter's step, when the
samples visibly sit on a grid) and :func:`detect_clipping` (runs of samples at the
record's maximum or minimum). Pure numpy on one array of samples; used by
:func:`xcheck.capture.scope_csv.read_trace` and :mod:`xcheck.capture.align`, and also importable from
:mod:`xcheck.capture.scope_csv`.
"""

from __future__ import annotations

import numpy as np

#: A run of at least this many samples at the record's maximum or minimum is clipping.
CLIP_RUN = 3


def estimate_resolution(values: np.ndarray) -> float | None:
    """The quantisation step of ``values`` when they visibly sit on an even grid.

    Parameters
    ----------
    values
        Samples of one channel.

    Returns
    -------
    float or None
        The grid step, or None when values rarely repeat (no grid can be seen) or the
        gaps between distinct values are not whole multiples of one step.
    """
    values = np.asarray(values, dtype=float)
    sample = values[:: max(1, values.size // 65536)]  # an evenly spread subset is plenty
    sample = sample[np.isfinite(sample)]
    distinct = np.unique(sample)
    if distinct.size < 3 or distinct.size > 0.5 * sample.size:
        return None
    gaps = np.diff(distinct)
    smallest = gaps.min()
    base = gaps[gaps < 1.5 * smallest].mean()
    ratios = gaps / base
    if np.any(np.abs(ratios - np.round(ratios)) > 0.2):
        return None
    return float((distinct[-1] - distinct[0]) / np.round(ratios).sum())


def detect_clipping(
    values: np.ndarray,
    resolution: float | None = None,
    *,
    extremes: tuple[float, float] | None = None,
) -> np.ndarray:
    """Mask of samples in runs of >= :data:`CLIP_RUN` at the record's maximum or minimum.

    A converter driven past its range returns its top or bottom code for as long as the
    input stays beyond it, so clipping shows as runs of equal samples at the extremes
    (common practice, no source). "At the extreme" means within half a quantisation
    step when the step is known, else within 1e-9 of the record's magnitude.

    Parameters
    ----------
    values
        Samples of one channel.
    resolution
        Quantisation step, if known (see :func:`estimate_resolution`).
    extremes
        ``(max, min)`` of ``values`` when already known (saves two passes).

    Returns
    -------
    numpy.ndarray
        Boolean mask, True for clipped samples.
    """
    values = np.asarray(values, dtype=float)
    mask = np.zeros(values.shape, dtype=bool)
    if values.size < CLIP_RUN:
        return mask
    top, bottom = extremes if extremes is not None else (float(values.max()), float(values.min()))
    scale = max(abs(top), abs(bottom), top - bottom)
    tol = 0.5 * resolution if resolution else 1e-9 * scale
    for at_rail in (values >= top - tol, values <= bottom + tol):
        index = np.flatnonzero(at_rail)
        if index.size < CLIP_RUN:
            continue
        run_id = np.concatenate(([0], np.cumsum(np.diff(index) != 1)))
        lengths = np.bincount(run_id)
        mask[index[lengths[run_id] >= CLIP_RUN]] = True
    return mask
