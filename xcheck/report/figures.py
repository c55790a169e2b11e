"""PNG figures for reports: overlay, residuals, envelope.

The look is xcheck's own: measured data as small dark points, each candidate a
different line style *and* shade so the figures read in greyscale, a light dotted grid,
and engineering-unit axis labels. Figures are written with the non-interactive Agg
backend and closed after saving.
"""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from xcheck.atomic import PNG_METADATA  # noqa: E402

LINE_STYLES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1, 1, 1)), (0, (1, 2)))
# Distinct in greyscale (luminance steps) and for common colour-vision deficiencies.
SHADES = ("#1b4f72", "#c0392b", "#7d8f2a", "#6c3483", "#b9770e", "#17202a")
MARKERS = ("o", "s", "^", "D", "v", "P")

_PREFIX = {-12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k"}


def time_scale(seconds: float) -> tuple[float, str]:
    """Factor and prefix so that ``seconds`` displays in a readable engineering unit."""
    if seconds <= 0 or not np.isfinite(seconds):
        return 1.0, ""
    exponent = int(3 * np.floor(np.log10(seconds) / 3))
    exponent = min(max(exponent, -12), 3)
    return 10.0 ** (-exponent), _PREFIX[exponent]


def _style(axis: plt.Axes) -> None:
    axis.grid(True, linestyle=":", linewidth=0.6, color="#999999")
    for side in ("top", "right"):
        axis.spines[side].set_visible(False)


def _finish(fig: plt.Figure, axis: plt.Axes, path: Path, xlabel: str, ylabel: str,
            title: str) -> Path:
    """Label, style, save and close a one-panel figure."""
    axis.set_xlabel(xlabel)
    axis.set_ylabel(ylabel)
    axis.set_title(title, fontsize=10)
    axis.legend(fontsize=8, frameon=False)
    _style(axis)
    fig.tight_layout()
    fig.savefig(path, metadata=PNG_METADATA)
    plt.close(fig)
    return path


def overlay_figure(path: Path, time: np.ndarray, measured: np.ndarray,
                   curves: Sequence[tuple[str, np.ndarray]], title: str,
                   peaks: bool = False) -> Path:
    """Measured data with every candidate's prediction overlaid.

    Parameters
    ----------
    path
        PNG to write.
    time, measured
        Measurement (s, V).
    curves
        (label, prediction on ``time``) per candidate, best first.
    title
        Figure title.
    peaks
        True when the measurement is a peak table (points joined by nothing).
    """
    factor, prefix = time_scale(float(np.max(np.abs(time))) if time.size else 1.0)
    fig, axis = plt.subplots(figsize=(8.0, 4.2), dpi=110)
    axis.plot(time * factor, measured, linestyle="none", marker="o",
              markersize=5 if peaks else 1.6, color="#222222", label="measured", zorder=3)
    for i, (label, curve) in enumerate(curves):
        axis.plot(time * factor, curve,
                  linestyle="none" if peaks else LINE_STYLES[i % len(LINE_STYLES)],
                  color=SHADES[i % len(SHADES)], linewidth=1.4,
                  marker=MARKERS[(i + 1) % len(MARKERS)] if peaks else None,
                  markersize=6, markerfacecolor="none", label=label, zorder=2)
    xlabel = (f"time from the first reading ({prefix}s)" if peaks
              else f"time from the event ({prefix}s)")
    return _finish(fig, axis, path, xlabel, "probe voltage (V)", title)


def residual_figure(path: Path, time: np.ndarray,
                    residuals: Sequence[tuple[str, np.ndarray]], noise_sigma: float) -> Path:
    """One panel per candidate: measured minus predicted, with the ±2σ noise band."""
    count = max(len(residuals), 1)
    factor, prefix = time_scale(float(np.max(np.abs(time))) if time.size else 1.0)
    fig, axes = plt.subplots(count, 1, figsize=(8.0, 1.6 + 1.3 * count), dpi=110, sharex=True,
                             squeeze=False)
    for i, (label, values) in enumerate(residuals):
        axis = axes[i, 0]
        axis.axhspan(-2 * noise_sigma, 2 * noise_sigma, color="#dddddd", zorder=0,
                     label="±2σ noise")
        axis.plot(time * factor, values, linestyle="none", marker=".", markersize=2,
                  color=SHADES[i % len(SHADES)])
        axis.set_ylabel("V", fontsize=8)
        axis.set_title(f"{label}: measured minus predicted", fontsize=9, loc="left")
        _style(axis)
    axes[-1, 0].set_xlabel(f"time from the event ({prefix}s)")
    fig.tight_layout()
    fig.savefig(path, metadata=PNG_METADATA)
    plt.close(fig)
    return path


def envelope_figure(path: Path, times: np.ndarray, amplitudes: np.ndarray,
                    flagged: Sequence[int], alpha: float, amplitude0: float,
                    title: str = "envelope of the extrema") -> Path:
    """|extremum| on a logarithmic axis, the fitted exponential, flagged extrema marked.

    Parameters
    ----------
    times, amplitudes
        Extremum times (s) and their magnitudes (V, offset removed).
    flagged
        0-based indices of extrema the envelope test flagged.
    alpha, amplitude0
        Fitted decay (1/s) and envelope at t = 0 (V) for the reference line.
    """
    factor, prefix = time_scale(float(np.max(times)) if times.size else 1.0)
    fig, axis = plt.subplots(figsize=(8.0, 3.8), dpi=110)
    keep = np.ones(times.size, bool)
    keep[list(flagged)] = False
    axis.semilogy(times[keep] * factor, np.abs(amplitudes[keep]), linestyle="none", marker="o",
                  color="#222222", label="extrema used")
    if not keep.all():
        axis.semilogy(times[~keep] * factor, np.abs(amplitudes[~keep]), linestyle="none",
                      marker="X", markersize=9, color=SHADES[1], label="flagged extrema")
        for index in flagged:
            axis.annotate(str(index), (times[index] * factor, abs(amplitudes[index])),
                          textcoords="offset points", xytext=(5, 5), fontsize=8)
    if times.size and np.isfinite(alpha) and amplitude0:
        line_t = np.linspace(0.0, float(times.max()), 200)
        axis.semilogy(line_t * factor, abs(amplitude0) * np.exp(-alpha * line_t), linestyle="--",
                      color=SHADES[0], label="fitted exp(-αt)")
    return _finish(fig, axis, path, f"time from the event ({prefix}s)", "|extremum| (V)", title)
