"""The figure of ``xcheck sweep``: each candidate's Monte Carlo band over the measurement.

One panel per candidate: the band between the coverage interval's quantiles (shaded),
its median, the curve at the stated values (dashed), the worst-case corners' envelope
(dotted) and the measured samples (small dark points; a peak table's readings as
circles). The look follows :mod:`xcheck.report.figures` (the same shades, grid and
engineering time axis); saved as PNG with :data:`xcheck.atomic.PNG_METADATA`, so the
same sweep gives the same bytes.
"""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

import numpy as np

from xcheck.report.figures import SHADES, save_png, time_scale


def band_figure(path: Path, panels: Sequence[dict], title: str, peaks: bool = False,
                coverage: float = 0.90) -> Path:
    """Draw the band of every candidate.

    Parameters
    ----------
    path
        PNG to write (any name: the format is given explicitly).
    panels
        One per candidate: ``name`` (text for the panel title), ``times``, ``low``,
        ``median``, ``high``, ``nominal`` (arrays on the grid), ``measured`` (array or
        None), ``corner_low`` and ``corner_high`` (arrays or None).
    title
        Figure title (one line, ``$`` escaped by the caller).
    peaks
        True when the grid is a peak table's readings.
    coverage
        The band's coverage probability, for the legend.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt


    count = max(len(panels), 1)
    span = max((float(np.max(np.abs(p["times"]))) for p in panels if len(p["times"])),
               default=1.0)
    factor, prefix = time_scale(span)
    fig, axes = plt.subplots(count, 1, figsize=(8.0, 1.4 + 2.6 * count), dpi=110,
                             sharex=True, squeeze=False)
    low_pct, high_pct = 50 * (1 - coverage), 50 * (1 + coverage)
    for i, panel in enumerate(panels):
        axis = axes[i, 0]
        t = np.asarray(panel["times"], float) * factor
        shade = SHADES[i % len(SHADES)]
        axis.fill_between(t, panel["low"], panel["high"], color=shade, alpha=0.25, linewidth=0,
                          step=None, label=f"{low_pct:g} % to {high_pct:g} % of the trials")
        axis.plot(t, panel["median"], color=shade, linewidth=1.1, label="median",
                  marker="s" if peaks else None, markersize=4)
        axis.plot(t, panel["nominal"], color="#444444", linewidth=0.9, linestyle="--",
                  label="stated values", marker="x" if peaks else None)
        if panel.get("corner_low") is not None:
            axis.plot(t, panel["corner_low"], color=shade, linewidth=0.8, linestyle=":",
                      label="worst-case corners")
            axis.plot(t, panel["corner_high"], color=shade, linewidth=0.8, linestyle=":")
        if panel.get("measured") is not None:
            axis.plot(t, panel["measured"], linestyle="none", marker="o",
                      markersize=5 if peaks else 1.2, color="#222222", label="measured",
                      markerfacecolor="none" if peaks else "#222222", zorder=3)
        axis.set_title(panel["name"], fontsize=9, loc="left")
        axis.set_ylabel("probe (V)", fontsize=8)
        axis.grid(True, linestyle=":", linewidth=0.6, color="#999999")
        for side in ("top", "right"):
            axis.spines[side].set_visible(False)
        axis.legend(fontsize=7, frameon=False, loc="upper right")
    axes[-1, 0].set_xlabel(f"time from the first reading ({prefix}s)" if peaks
                           else f"time from the event ({prefix}s)")
    fig.suptitle(title, fontsize=10)
    fig.tight_layout()
    return save_png(fig, path)
