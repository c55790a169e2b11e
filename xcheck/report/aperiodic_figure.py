"""The ``xcheck ringdown`` figure of a record that settles without ringing.

Two panels, readable in greyscale: the data (light grey) with the fitted model (black
dashed) and the settled level (dotted); below, the distance from the settled level on a
logarithmic axis, where each exponential term is a straight line (its time constant is
the inverse slope), with the noise level for scale. Written like every xcheck figure:
the Agg backend, PNG with :data:`xcheck.atomic.PNG_METADATA` (no time stamp). Long
records are thinned to the extremes of each pixel column
(:func:`xcheck.report.decimate.envelope`), so spikes stay visible.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from xcheck.report.decimate import POINT_SPREAD, columns_of, envelope  # noqa: E402
from xcheck.report.figures import save_png, time_scale  # noqa: E402
from xcheck.values import format_eng  # noqa: E402

if TYPE_CHECKING:
    from xcheck.ringdown.aperiodic_result import AperiodicEstimate

#: The time axis ends this many slowest time constants after the event (or at the
#: record's end when that comes first).
SHOWN_TIME_CONSTANTS = 8.0


def aperiodic_figure(
    path: Path,
    estimate: AperiodicEstimate,
    time: np.ndarray,
    voltage: np.ndarray,
    excluded: np.ndarray | None,
    *,
    title: str,
) -> Path:
    """Draw the data, the fitted sum of exponentials and the log-distance panel.

    Parameters
    ----------
    path
        PNG to write.
    estimate
        The aperiodic estimate.
    time, voltage
        Aligned samples (s, V).
    excluded
        Samples left out of the fit (boolean mask over ``time``), or None.
    title
        Start of the figure title (the file's name).
    """
    t = np.asarray(time, dtype=float)
    v = np.asarray(voltage, dtype=float)
    tau = estimate.time_constants[0].value
    span = min(float(np.max(t)), SHOWN_TIME_CONSTANTS * tau) if t.size else tau
    factor, prefix = time_scale(max(span, 1e-15))
    fig, (top, bottom) = plt.subplots(
        2, 1, figsize=(8.0, 6.4), dpi=110, gridspec_kw={"height_ratios": [3, 2]}
    )
    shown = t <= span
    columns = columns_of(fig)
    shown_t, shown_v = envelope(t[shown], v[shown], columns)
    top.plot(shown_t * factor, shown_v, color="#9a9a9a", linewidth=1.4, label="measured")
    if excluded is not None and np.any(excluded & shown):
        mask = np.asarray(excluded, dtype=bool) & shown
        clipped_t, clipped_v = envelope(t[mask], v[mask], columns)
        top.plot(clipped_t * factor, clipped_v, linestyle="none", marker="x", markersize=3,
                 color="#555555", label="excluded (clipped)")
    dense = np.linspace(min(0.0, float(np.min(t))) if t.size else 0.0, span, 2000)
    level = estimate.settled_level.value
    top.plot(dense * factor, estimate.model(dense), color="black", linestyle=(0, (3, 2)),
             linewidth=0.9, label="fitted model")
    top.axhline(level, color="#777777", linestyle=":", linewidth=0.8, label="settled level")
    taus = ", ".join(format_eng(e.value, "s", 4) for e in estimate.time_constants)
    zeta = estimate.damping_ratio
    top.set_title(
        f"{title}: {estimate.regime}, tau = {taus}"
        + ("" if zeta is None else f", zeta = {zeta.value:.3g}"),
        fontsize=9,
    )
    top.set_ylabel("voltage (V)")
    distance = np.abs(v[shown] - level)
    positive = distance > 0
    far_t, far = envelope(t[shown][positive], distance[positive], columns, spread=POINT_SPREAD)
    bottom.plot(far_t * factor, far, linestyle="none", marker=".",
                markersize=1.5, color="#9a9a9a", label="|measured - settled level|")
    bottom.plot(dense * factor, np.abs(estimate.model(dense) - level), color="black",
                linestyle=(0, (3, 2)), linewidth=0.9, label="|fitted model - settled level|")
    if estimate.regime == "overdamped":
        for i, term in enumerate(estimate.terms(dense)):
            tau_i = format_eng(estimate.time_constants[i].value, "s", 3)
            bottom.plot(dense * factor, np.abs(term), color="#555555",
                        linestyle=("-", "-.")[i % 2], linewidth=0.8,
                        label=f"term {i + 1}: tau = {tau_i}")
    sigma = estimate.noise_sigma
    if sigma > 0 and math.isfinite(sigma):
        bottom.axhline(sigma, color="#777777", linestyle=":", linewidth=0.8,
                       label="noise (1 standard deviation)")
    start = float(np.max(np.abs(estimate.model(dense) - level))) if dense.size else 1.0
    floor = max(sigma / 3.0, start * 1e-6) if sigma > 0 else start * 1e-6
    if start > 0 and floor > 0:
        bottom.set_ylim(floor, start * 3.0)
    bottom.set_yscale("log")
    bottom.set_ylabel("|v - settled level| (V)")
    bottom.set_xlabel(f"time from the event ({prefix}s)")
    for axis in (top, bottom):
        axis.set_xlim(dense[0] * factor, span * factor)
        axis.grid(True, which="major", linestyle=(0, (1, 3)), linewidth=0.6, color="#9a9a9a")
        axis.legend(fontsize=7, frameon=False, loc="upper right")
        axis.tick_params(labelsize=8)
    fig.tight_layout()
    return save_png(fig, path)
