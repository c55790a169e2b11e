"""The Bode figure of a frequency sweep: measured against every candidate's model.

Four panels on one logarithmic frequency axis (tick labels in Hz, kHz, MHz): the
magnitude on a logarithmic axis, the phase in degrees, and two small residual panels,
the magnitude error ``100 ln(|model| / |measured|)`` (about the error in percent when
small) and the phase error ``angle(model / measured)`` in degrees (wrapped to ±180°).
Resonance frequencies are thin vertical dotted lines through every panel, labelled in
the top one.

The look follows :mod:`xcheck.report.figures`: measured data as small dark points, each
candidate a different line style *and* shade (:data:`~xcheck.report.figures.SHADES`,
:data:`~xcheck.report.figures.LINE_STYLES`) so the figure reads in greyscale, a light
dotted grid, no top or right frame. Drawn with the Agg backend and saved as PNG with
:data:`xcheck.atomic.PNG_METADATA` (no time stamp), so the same sweep gives the same bytes.

User text (the title, candidate names, resonance labels) is drawn as written: one line,
control characters folded to a space, and matplotlib's mathtext switched off for it, so a
``$`` or ``_`` is shown as itself and cannot make the drawing fail. Text already escaped
for mathtext (``\\$``, as :mod:`xcheck.report.markdown` escapes figure text) reads the
same as the raw text.
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import Sequence

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.axes import Axes  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.ticker import (  # noqa: E402
    EngFormatter, LogFormatter, LogLocator, MaxNLocator, NullFormatter,
)
from matplotlib.transforms import blended_transform_factory  # noqa: E402

from xcheck.report.figures import LINE_STYLES, SHADES, save_png  # noqa: E402

#: Figure size (inches) and resolution, and the panels' height ratios (top to bottom).
FIGSIZE = (8.0, 7.6)
DPI = 110
HEIGHT_RATIOS = (3.0, 2.0, 1.2, 1.2)
#: The error panels show at least ±this (percent, degrees).
MIN_ERROR_SPAN = 1.0

#: Tick-label units for the magnitude axis (the sweep's unit -> SI symbol); a unit not
#: here (a dimensionless ratio) keeps matplotlib's plain logarithmic labels.
_TICK_UNITS = {"ohm": "Ω", "V/A": "Ω", "A/V": "S"}
#: How the unit reads in an axis label.
_LABEL_UNITS = {"ohm": "Ω", "1": ""}
#: Line breaks and other control characters (C0, DEL, C1, Unicode line/paragraph separators).
_BREAKS = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029]+")
_MEASURED = "#222222"
_RESONANCE = "#555555"


class _PlainLogFormatter(LogFormatter):
    """matplotlib's choice of which logarithmic ticks to label, each label a plain
    number (``0.5``, ``2``, ``1e-05``)."""

    def __call__(self, x: float, pos: int | None = None) -> str:
        return f"{x:g}" if super().__call__(x, pos) else ""


def _one_line(value: object) -> str:
    """``value`` as one line of figure text: control characters folded to a space, and an
    escaped dollar ``\\$`` shown as ``$`` (as matplotlib shows it in text that is not
    math), so text a caller already escaped for mathtext reads the same as raw text."""
    return _BREAKS.sub(" ", str(value)).replace("\\$", "$").strip()


def _finite(values: np.ndarray) -> np.ndarray:
    """``values`` with every non-finite entry replaced by NaN (drawn as a gap)."""
    return np.where(np.isfinite(values), values, np.nan)


def _broken_at_wraps(frequency: np.ndarray, degrees: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """A phase line with a gap (NaN) wherever it jumps by more than 180° (a ±180° wrap),
    so the line is not drawn straight across the panel."""
    jumps = np.flatnonzero(np.abs(np.diff(degrees)) > 180.0) + 1
    return np.insert(frequency, jumps, np.nan), np.insert(degrees, jumps, np.nan)


def _frequency_axis(axis: Axes, low: float, high: float) -> None:
    """Engineering tick labels (Hz, kHz, MHz) on the shared logarithmic frequency axis;
    ticks at 1, 2, 5 per decade when it spans few decades, every integer when less."""
    decades = math.log10(high / low) if low > 0 and high > low else 0.0
    if decades < 2.0:
        subs = (1.0, 2.0, 5.0) if decades >= 0.7 else tuple(float(k) for k in range(1, 10))
        axis.xaxis.set_major_locator(LogLocator(base=10.0, subs=subs))
    axis.xaxis.set_major_formatter(EngFormatter(unit="Hz"))
    axis.xaxis.set_minor_formatter(NullFormatter())


def _style(axis: Axes) -> None:
    # The grid and frame of xcheck.report.figures.
    axis.grid(True, linestyle=":", linewidth=0.6, color="#999999")
    for side in ("top", "right"):
        axis.spines[side].set_visible(False)
    axis.tick_params(labelsize=8)


def bode_axes(frequency: np.ndarray, measured: np.ndarray,
              curves: Sequence[tuple[str, np.ndarray]], *, title: str, unit: str,
              resonances: Sequence[tuple[str, float]] = ()) -> Figure:
    """Draw the Bode figure and return it, unsaved (the caller saves or closes it).

    Parameters
    ----------
    frequency
        Hz, 1-D, increasing.
    measured
        Complex measured values, one per frequency (ohms for an impedance, ``unit``
        otherwise).
    curves
        (candidate name, complex model values at ``frequency``) per candidate, best
        first. Non-finite model values are left out of the drawing (gaps).
    title
        Figure title, raw user text.
    unit
        The values' unit: ``"ohm"`` for an impedance (the magnitude reads ``|Z|``), or a
        transfer function's unit (``"V/V"``, ``"1"``, ...; it reads ``|H|``).
    resonances
        (label, frequency in Hz) to mark with a thin vertical dotted line; those outside
        the swept range or not finite are not drawn.

    Returns
    -------
    matplotlib.figure.Figure
        Four axes, top to bottom: magnitude, phase, magnitude error, phase error. The
        magnitude axes holds the legend (``"measured"``, then every candidate's name as
        given) and the resonance labels. Every line's label says what it is: the
        candidate's name, ``"measured"``, ``"resonance: <label>"`` or ``"zero"``.

    Raises
    ------
    ValueError
        When ``frequency`` is not 1-D, or ``measured`` or a curve does not hold one value
        per frequency (a programming error, not a user's).
    """
    f = np.asarray(frequency, dtype=float)
    h = np.asarray(measured, dtype=complex)
    if f.ndim != 1 or h.shape != f.shape:
        raise ValueError(f"frequency must be 1-D and measured match it; got shapes "
                         f"{f.shape} and {h.shape}")
    models = []
    for name, values in curves:
        model = np.asarray(values, dtype=complex)
        if model.shape != f.shape:
            raise ValueError(f"curve {name!r} has shape {model.shape}, expected {f.shape}")
        models.append((_one_line(name), model))

    fig, axes = plt.subplots(len(HEIGHT_RATIOS), 1, figsize=FIGSIZE, dpi=DPI, sharex=True,
                             height_ratios=HEIGHT_RATIOS)
    magnitude, phase, magnitude_error, phase_error = axes
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        shown = np.isfinite(h) & (np.abs(h) > 0)
        h_abs = np.where(shown, np.abs(h), np.nan)
        h_deg = np.where(np.isfinite(h), np.angle(h, deg=True), np.nan)
        points = {"linestyle": "none", "marker": "o", "markersize": 2.2, "color": _MEASURED,
                  "zorder": 3, "label": "measured"}
        handles = [magnitude.plot(f, h_abs, **points)[0]]
        phase.plot(f, h_deg, **points)
        for i, (name, model) in enumerate(models):
            # Each line carries its candidate's name as its label (found by it; the
            # legend below is given its labels explicitly).
            style = {"color": SHADES[i % len(SHADES)],
                     "linestyle": LINE_STYLES[i % len(LINE_STYLES)], "linewidth": 1.4,
                     "zorder": 2, "label": name}
            usable = np.isfinite(model)
            size = np.where(usable & (np.abs(model) > 0), np.abs(model), np.nan)
            handles.append(magnitude.plot(f, size, **style)[0])
            phase.plot(*_broken_at_wraps(f, np.where(usable, np.angle(model, deg=True),
                                                     np.nan)), **style)
            ratio = np.where(usable, model, np.nan) / h
            magnitude_error.plot(f, _finite(100.0 * np.log(np.abs(ratio))), **style)
            phase_error.plot(f, _finite(np.angle(ratio, deg=True)), **style)

    symbol = "|Z|" if unit == "ohm" else "|H|"
    label_unit = _LABEL_UNITS.get(unit, unit)
    magnitude.set_yscale("log")
    if unit in _TICK_UNITS:
        magnitude.yaxis.set_major_formatter(EngFormatter(unit=_TICK_UNITS[unit]))
    else:  # a ratio: plain numbers (0.5, 2, 1000), not powers of ten
        magnitude.yaxis.set_major_formatter(_PlainLogFormatter(labelOnlyBase=False))
        magnitude.yaxis.set_minor_formatter(_PlainLogFormatter(labelOnlyBase=False))
    magnitude.set_ylabel(f"{symbol} ({label_unit})" if label_unit else symbol, fontsize=9)
    phase.set_ylabel("phase (°)", fontsize=9)
    phase.yaxis.set_major_locator(MaxNLocator(nbins=6, steps=[1, 1.5, 3, 4.5, 9, 10]))
    magnitude_error.set_ylabel(f"{symbol} error (%)", fontsize=8)
    phase_error.set_ylabel("phase error (°)", fontsize=8)
    for axis, formula in ((magnitude_error, "100 ln(|model| / |measured|), ≈ % when small"),
                          (phase_error, "angle(model / measured)")):
        axis.axhline(0.0, color="#777777", linewidth=0.6, zorder=1, label="zero")
        axis.set_title(formula, loc="left", fontsize=7, color="#555555", pad=2)
        bottom, top = axis.get_ylim()  # at least ±1 shown, so rounding noise stays flat
        axis.set_ylim(min(bottom, -MIN_ERROR_SPAN), max(top, MIN_ERROR_SPAN))
    phase_error.set_xlabel("frequency", fontsize=9)

    low, high = (float(f[0]), float(f[-1])) if f.size else (1.0, 10.0)
    high = high if high > low else low * 10.0
    if low > 0:
        phase_error.set_xscale("log")  # shared by every panel
        phase_error.set_xlim(low, high)
        _frequency_axis(phase_error, low, high)
    top_edge = blended_transform_factory(magnitude.transData, magnitude.transAxes)
    marked = [(label, float(where)) for label, where in resonances
              if math.isfinite(float(where)) and 0 < low <= float(where) <= high]
    for k, (label, where) in enumerate(marked):
        for axis in axes:
            axis.axvline(where, color=_RESONANCE, linestyle=":", linewidth=0.8, zorder=1,
                         label=f"resonance: {_one_line(label)}")
        # Labels alternate left and right of their lines, so two close ones stay apart.
        magnitude.text(where, 0.98, f" {_one_line(label)} ", transform=top_edge, rotation=90,
                       fontsize=7, color=_RESONANCE, ha="right" if k % 2 == 0 else "left",
                       va="top", parse_math=False)

    # Handles and labels given explicitly: a name starting with "_" is still listed.
    legend = magnitude.legend(handles, ["measured"] + [name for name, _ in models],
                              fontsize=8, frameon=False, loc="best")
    for text in legend.get_texts():
        text.set_parse_math(False)
    magnitude.set_title(_one_line(title), fontsize=10, parse_math=False)
    for axis in axes:
        _style(axis)
    fig.align_ylabels(axes)
    fig.tight_layout()
    return fig


def write_bode_figure(path: Path, frequency: np.ndarray, measured: np.ndarray,
                      curves: Sequence[tuple[str, np.ndarray]], *, title: str, unit: str,
                      resonances: Sequence[tuple[str, float]] = ()) -> Path:
    """Write the Bode figure of a sweep and every candidate's model as a PNG.

    Parameters
    ----------
    path
        PNG to write (always PNG, whatever its name, so a temporary name works).
    frequency, measured, curves, title, unit, resonances
        As for :func:`bode_axes`.

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    ValueError
        As :func:`bode_axes`.
    """
    fig = bode_axes(frequency, measured, curves, title=title, unit=unit,
                    resonances=resonances)
    save_png(fig, Path(path))
    return Path(path)
