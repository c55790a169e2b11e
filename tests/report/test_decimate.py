"""Thinning long series for drawing keeps every pixel column's extremes (so spikes).

Reference: a brute-force loop over the pixel columns (numpy min / max of each
column's samples, assigned with the same equal-width slicing of the time axis) gives
what each column must still show; min/max decimation for displays is common practice,
no source. Inputs are invented, seeded ring-downs with one single-sample spike.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from xcheck.report import figures
from xcheck.report.decimate import POINT_SPREAD, POINTS_PER_COLUMN, envelope

COLUMNS = 880  # figures.overlay_figure: 8.0 in at 110 dpi
N = 1_000_000
SPIKE_AT, SPIKE = 612_345, 9.0


def _record() -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(21)
    t = np.arange(N) * 4e-9
    v = 5.0 * np.exp(-800.0 * t) * np.cos(2 * math.pi * 2e5 * t) + rng.normal(0, 0.05, N)
    v[SPIKE_AT] = SPIKE  # one sample, far above the ring (5 V) and the noise
    return t, v


def _column_extremes(t: np.ndarray, v: np.ndarray, columns: int) -> tuple[np.ndarray, np.ndarray]:
    """Brute force: per column, the smallest and largest value (NaN when empty).
    Column c holds t[0] + width * [c, c + 1) / columns (numpy.digitize on those edges)."""
    edges = t[0] + (t[-1] - t[0]) * (np.arange(1, columns) / columns)
    position = np.digitize(t, edges)
    low, high = np.full(columns, np.nan), np.full(columns, np.nan)
    for c in range(columns):
        values = v[position == c]
        if values.size:
            low[c], high[c] = values.min(), values.max()
    return low, high


def test_single_sample_spike_survives_and_columns_keep_their_extent():
    t, v = _record()
    kept_t, kept_v = envelope(t, v, COLUMNS)
    assert kept_t.size <= POINTS_PER_COLUMN * COLUMNS + 2  # two a column, plus the ends
    assert SPIKE in kept_v and t[SPIKE_AT] in kept_t  # the very sample, not an average
    # Every column shows the same vertical extent as all its samples would.
    np.testing.assert_array_equal(_column_extremes(kept_t, kept_v, COLUMNS),
                                  _column_extremes(t, v, COLUMNS))
    # Only real samples come back, in time order.
    index = np.searchsorted(t, kept_t)
    np.testing.assert_array_equal(v[index], kept_v)
    assert np.all(np.diff(kept_t) > 0)


def test_points_keep_a_spread_and_short_series_are_untouched():
    t, v = _record()
    kept_t, kept_v = envelope(t, v, COLUMNS, spread=POINT_SPREAD)
    assert SPIKE in kept_v
    # Two extremes a column and the two ends, plus every k-th sample, k = N // (spread
    # * columns): ceil(N / k) of them.
    stride = N // (POINT_SPREAD * COLUMNS)
    assert kept_t.size <= POINTS_PER_COLUMN * COLUMNS + 2 + math.ceil(N / stride)
    assert kept_t.size > POINT_SPREAD * COLUMNS  # the spread is there
    short_t, short_v = t[:1000], v[:1000]
    same_t, same_v = envelope(short_t, short_v, COLUMNS)
    np.testing.assert_array_equal(same_t, short_t)
    np.testing.assert_array_equal(same_v, short_v)


def test_limits_keep_only_the_shown_range_and_its_neighbours():
    t, v = _record()
    lo, hi = t[1000] + 1e-12, t[5000]
    kept_t, _ = envelope(t, v, COLUMNS, limits=(lo, hi))
    assert kept_t[0] == t[1000] and kept_t[-1] == t[5001]  # one neighbour either side


def test_overlay_figure_draws_the_spike_from_a_long_record(tmp_path: Path, monkeypatch):
    # What the figure draws, read from matplotlib's own Line2D objects just before the
    # file is written (figures.save_png is the one place figures are saved).
    drawn = {}
    save = figures.save_png

    def spy(fig, path, **options):
        drawn["lines"] = [(line.get_label(), np.asarray(line.get_ydata()))
                          for line in fig.axes[0].get_lines()]
        return save(fig, path, **options)

    monkeypatch.setattr(figures, "save_png", spy)
    t, v = _record()
    smooth = 5.0 * np.exp(-800.0 * t) * np.cos(2 * math.pi * 2e5 * t)
    figures.overlay_figure(tmp_path / "overlay.png", t, v, [("model", smooth)], "long record")
    lines = dict(drawn["lines"])
    assert lines["measured"].max() == pytest.approx(SPIKE)
    assert lines["measured"].size < N / 50  # thinned, not every sample
    assert lines["model"].size <= POINTS_PER_COLUMN * COLUMNS + 2
    assert (tmp_path / "overlay.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
