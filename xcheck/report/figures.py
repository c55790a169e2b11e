"""Every PNG figure xcheck draws.

For the report: :func:`overlay_figure`, :func:`residual_figure`, :func:`envelope_figure`.
For ``xcheck ringdown``: :func:`ringdown_figure`. For ``xcheck simulate``:
:func:`prediction_figure`.

The look is xcheck's own: measured data as small dark points, each candidate a
different line style *and* shade so the figures read in greyscale, a light dotted grid,
and engineering-unit axis labels. Figures are written with the non-interactive Agg
backend and closed after saving, always as PNG (whatever the file's name, so a
temporary file works) with :data:`xcheck.atomic.PNG_METADATA`: the xcheck Software
chunk and no time stamp, so the same figure is the same bytes run after run.

Long records are not drawn sample by sample: each series is thinned to the extremes of
each pixel column (:func:`xcheck.report.decimate.envelope`), which keeps single-sample
spikes and clipping visible at any record length.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING, Sequence

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from matplotlib.layout_engine import PlaceHolderLayoutEngine  # noqa: E402
from matplotlib.ticker import EngFormatter  # noqa: E402

from xcheck.atomic import PNG_METADATA  # noqa: E402
from xcheck.report.decimate import POINT_SPREAD, columns_of, envelope  # noqa: E402
from xcheck.values import format_eng  # noqa: E402

if TYPE_CHECKING:
    from xcheck.engines.predict import Prediction
    from xcheck.ringdown import RingdownEstimate

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


def save_png(fig: plt.Figure, path: Path, **options) -> Path:
    """Save ``fig`` to ``path`` as PNG with xcheck's metadata, then close it.

    ``fig.tight_layout()`` leaves a placeholder layout engine on the figure, for which
    ``savefig`` draws the whole figure once more before drawing it into the file
    (matplotlib 3.6 and later); the layout is done by then, so that engine is dropped
    first: the same pixels, drawn once.
    """
    try:
        if isinstance(fig.get_layout_engine(), PlaceHolderLayoutEngine):
            fig.set_layout_engine(None)
        fig.savefig(path, format="png", metadata=PNG_METADATA, **options)
    finally:
        plt.close(fig)
    return path


def _finish(fig: plt.Figure, axis: plt.Axes, path: Path, xlabel: str, ylabel: str,
            title: str) -> Path:
    """Label, style, save and close a one-panel figure."""
    axis.set_xlabel(xlabel)
    axis.set_ylabel(ylabel)
    axis.set_title(title, fontsize=10)
    axis.legend(fontsize=8, frameon=False)
    _style(axis)
    fig.tight_layout()
    return save_png(fig, path)


def overlay_figure(path: Path, time: np.ndarray, measured: np.ndarray,
                   curves: Sequence[tuple[str, np.ndarray]], title: str,
                   peaks: bool = False,
                   samples: tuple[np.ndarray, np.ndarray] | None = None) -> Path:
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
    samples
        The measurement to draw as points, when it holds more samples than ``time``
        (e.g. every sample of the fit window, while the curves are on the fit's
        decimated times); None draws ``(time, measured)``. Either is thinned to the
        extremes of each pixel column (a peak table never is).
    """
    factor, prefix = time_scale(float(np.max(np.abs(time))) if time.size else 1.0)
    fig, axis = plt.subplots(figsize=(8.0, 4.2), dpi=110)
    columns = columns_of(fig)
    shown_t, shown_v = samples if samples is not None else (time, measured)
    if not peaks:
        shown_t, shown_v = envelope(shown_t, shown_v, columns, spread=POINT_SPREAD)
    axis.plot(shown_t * factor, shown_v, linestyle="none", marker="o",
              markersize=5 if peaks else 1.6, color="#222222", label="measured", zorder=3)
    for i, (label, curve) in enumerate(curves):
        curve_t, curve = (time, curve) if peaks else envelope(time, curve, columns)
        axis.plot(curve_t * factor, curve,
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
    columns = columns_of(fig)
    for i, (label, values) in enumerate(residuals):
        axis = axes[i, 0]
        axis.axhspan(-2 * noise_sigma, 2 * noise_sigma, color="#dddddd", zorder=0,
                     label="±2σ noise")
        shown_t, values = envelope(time, values, columns, spread=POINT_SPREAD)
        axis.plot(shown_t * factor, values, linestyle="none", marker=".", markersize=2,
                  color=SHADES[i % len(SHADES)])
        axis.set_ylabel("V", fontsize=8)
        axis.set_title(f"{label}: measured minus predicted", fontsize=9, loc="left")
        _style(axis)
    axes[-1, 0].set_xlabel(f"time from the event ({prefix}s)")
    fig.tight_layout()
    return save_png(fig, path)


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


def ringdown_figure(path: Path, estimate: RingdownEstimate, time: np.ndarray,
                    voltage: np.ndarray, excluded: np.ndarray | None, *, title: str) -> Path:
    """Two panels: the data with the fitted model; the extrema's envelope on a log axis.

    Readable in greyscale: the data are light grey, the model a black dashed line, used
    extrema open circles, flagged extrema filled black triangles with their index,
    excluded (clipped) samples small crosses.

    Parameters
    ----------
    path
        PNG to write.
    estimate
        The ring-down estimate (model, extrema, envelope).
    time, voltage
        Aligned samples (s, V), or a peak table's readings.
    excluded
        Samples left out of the fit (boolean mask over ``time``); None for a peak table.
    title
        Start of the figure title (the file's name).
    """
    et = np.asarray(estimate.extrema_time)
    span = _shown_span(estimate, time, et)
    factor, prefix = time_scale(max(span, 1e-15))
    fig, (top, bottom) = plt.subplots(
        2, 1, figsize=(8.0, 6.4), dpi=110, gridspec_kw={"height_ratios": [3, 2]}
    )
    peaks = excluded is None
    dense = np.linspace(min(0.0, float(np.min(time))), span, 2000)
    if not peaks:  # a peak table's readings are drawn below as the extrema
        columns, limits = columns_of(fig), (float(dense[0]), span)
        shown_t, shown_v = envelope(time, voltage, columns, limits)
        top.plot(shown_t * factor, shown_v, color="#9a9a9a", linewidth=1.4, label="measured")
        if excluded.any():
            clipped_t, clipped_v = envelope(time[excluded], voltage[excluded], columns, limits)
            top.plot(
                clipped_t * factor,
                clipped_v,
                linestyle="none",
                marker="x",
                markersize=3,
                color="#555555",
                label="excluded (clipped)",
            )
    top.plot(
        dense * factor,
        estimate.model(dense),
        color="black",
        linestyle=(0, (3, 2)),
        linewidth=0.9,
        label="fitted model",
    )
    top.axhline(estimate.offset.value, color="#777777", linestyle=":", linewidth=0.8)
    top.set_ylabel("voltage (V)")
    top.set_title(
        f"{title}: f_d = {format_eng(estimate.damped_frequency.value, 'Hz', 5)}, "
        f"alpha = {format_eng(estimate.neper_frequency.value, 'Np/s', 4)}",
        fontsize=9,
    )
    ev = np.abs(np.asarray(estimate.extrema_value) - estimate.offset.value)
    flagged = np.zeros(len(et), dtype=bool)
    flagged[estimate.flagged_extrema] = True
    for axis, values in ((top, np.asarray(estimate.extrema_value)), (bottom, ev)):
        axis.plot(
            et[~flagged] * factor,
            values[~flagged],
            linestyle="none",
            marker="o",
            markersize=5,
            markerfacecolor="none",
            markeredgecolor="black",
            label="readings used" if peaks else "extrema used",
        )
        if flagged.any():
            axis.plot(
                et[flagged] * factor,
                values[flagged],
                linestyle="none",
                marker="^",
                markersize=8,
                color="black",
                label="flagged readings" if peaks else "flagged extrema",
            )
    for i in estimate.flagged_extrema:
        bottom.annotate(
            f"#{i}", (et[i] * factor, ev[i]), textcoords="offset points", xytext=(6, 4), fontsize=8
        )
    line_t = np.linspace(0.0, span, 200)
    bottom.plot(
        line_t * factor,
        estimate.envelope_at(line_t),
        color="black",
        linewidth=1.0,
        label="fitted envelope",
    )
    if estimate.alternate is not None:
        which = "with flagged" if estimate.excludes_flagged else "without flagged"
        bottom.plot(
            line_t * factor,
            estimate.alternate.envelope_at(line_t),
            color="#666666",
            linestyle=(0, (4, 2)),
            linewidth=1.0,
            label=f"envelope {which}",
        )
    bottom.set_yscale("log")
    if len(ev) and np.all(ev > 0):
        bottom.set_ylim(ev.min() / 3.0, ev.max() * 3.0)
    bottom.set_ylabel("|extremum - offset| (V)")
    bottom.set_xlabel(f"time from the event ({prefix}s)" if not peaks else f"time ({prefix}s)")
    for axis in (top, bottom):
        axis.set_xlim(min(0.0, float(np.min(time))) * factor, span * factor)
        axis.grid(True, which="major", linestyle=(0, (1, 3)), linewidth=0.6, color="#9a9a9a")
        axis.legend(fontsize=7, frameon=False, loc="upper right")
        axis.tick_params(labelsize=8)
    fig.tight_layout()
    return save_png(fig, path)


def _shown_span(estimate: RingdownEstimate, time: np.ndarray, extrema_time: np.ndarray) -> float:
    """End of the time axis shown: the ringing and a little after, not a long quiet tail."""
    end = float(np.max(time)) if len(time) else 1.0
    if not len(extrema_time):
        return end
    alpha = estimate.neper_frequency.value
    period = 2.0 * math.pi / estimate.angular_frequency.value
    ring = float(extrema_time[-1]) + 3.0 * period
    if alpha > 0 and estimate.noise_sigma > 0:
        size = float(estimate.envelope_at(np.array([0.0]))[0])
        if size > estimate.noise_sigma:
            ring = max(ring, math.log(size / estimate.noise_sigma) / alpha * 1.2)
    return min(end, ring)


def prediction_figure(path: Path, prediction: Prediction, title: str) -> Path:
    """Both engines' probe voltages (solid and dashed) and, below, their difference.

    Parameters
    ----------
    path
        PNG to write.
    prediction
        ngspice's waveform and, when it applies, the closed form on the same times.
    title
        Figure title.
    """
    spice, theory = prediction.ngspice, prediction.theory
    rows = 2 if theory is not None else 1
    figure, axes = plt.subplots(rows, 1, figsize=(8, 5.5 if rows == 2 else 4), sharex=True,
                                squeeze=False, height_ratios=[3, 1.4][:rows])
    top = axes[0][0]
    columns = columns_of(figure)
    top.plot(*envelope(spice.time, spice.probe_voltage, columns), color="black", linestyle="-",
             linewidth=1.6, label="ngspice (circuit simulation)")
    if theory is not None:
        top.plot(*envelope(theory.time, theory.probe_voltage, columns), color="0.55",
                 linestyle="--", linewidth=1.4, label="closed-form theory")
    unit = getattr(prediction, "unit", "V")
    top.set_ylabel("probe current (A)" if unit == "A" else "probe voltage (V)")
    top.set_title(title, fontsize=10)
    top.legend(loc="best", frameon=False)
    top.yaxis.set_major_formatter(EngFormatter(unit="V"))
    if theory is not None:
        bottom = axes[1][0]
        bottom.plot(*envelope(spice.time, theory.probe_voltage - spice.probe_voltage, columns),
                    color="black", linestyle=":", linewidth=1.2, label="theory minus ngspice")
        bottom.set_ylabel(f"difference ({unit})")
        bottom.yaxis.set_major_formatter(EngFormatter(unit="V"))
        bottom.legend(loc="best", frameon=False)
    axes[-1][0].set_xlabel("time since t = 0 (s)")
    axes[-1][0].xaxis.set_major_formatter(EngFormatter(unit="s"))
    for row in axes:
        row[0].grid(True, linestyle=":", linewidth=0.6, color="0.75")
    figure.tight_layout()
    return save_png(figure, path, dpi=120)
