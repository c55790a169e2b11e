"""The ring-down of one file: read it, align it, estimate (``xcheck ringdown``'s work).

A waveform file is read (:func:`xcheck.capture.scope_csv.read_trace`), the event found
and the time axis moved to it (:func:`xcheck.capture.align.align_trace`), clipped samples
left out, and the ring-down estimated (:func:`xcheck.ringdown.estimate_ringdown`) with
the pre-event noise as the noise level; with ``allow_aperiodic`` a trace that settles
without ringing gives an :class:`~xcheck.ringdown.aperiodic_result.AperiodicEstimate`.
A table of extrema read off cursors is read with
:func:`xcheck.capture.peak_table.read_peaks` and estimated with
:func:`xcheck.ringdown.estimate_from_peaks`.

The rest of this package works on arrays; this module is the one that reads files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from xcheck.capture.align import Alignment, align_trace
from xcheck.capture.peak_table import read_peaks
from xcheck.capture.scope_csv import read_trace
from xcheck.ringdown.aperiodic_result import AperiodicEstimate
from xcheck.ringdown.estimator import estimate_ringdown
from xcheck.ringdown.peaks import estimate_from_peaks
from xcheck.ringdown.result import RingdownEstimate


@dataclass(frozen=True)
class FileRingdown:
    """One file's ring-down estimate and what it was made from.

    Attributes
    ----------
    source
        The file as given.
    estimate
        The ring-down estimate, or the aperiodic one (``estimate.aperiodic`` True) of a
        trace that settles without ringing when that was allowed.
    time, voltage
        Samples from the event (s, V), or a peak table's readings as written.
    excluded
        Samples left out of the fit (clipped), a boolean mask over ``time``; None for a
        peak table.
    alignment
        Event time, baseline, noise, droop and inversion; None for a peak table.
    source_name
        The file's name as the reader reports it.
    column
        The channel used (traces), or None.
    uncertainty
        A peak table's stated uncertainty of each reading (V), or None.
    time_resolution
        A peak table's reading step of the time column (s), or None.
    resolution
        A trace's converter step (V), or None.
    probe_factor
        The probe attenuation a trace's preamble stated and its values were multiplied
        by (1 when none).
    """

    source: str
    estimate: RingdownEstimate | AperiodicEstimate
    time: np.ndarray
    voltage: np.ndarray
    excluded: np.ndarray | None
    alignment: Alignment | None
    source_name: str
    column: str | None = None
    uncertainty: np.ndarray | None = None
    time_resolution: float | None = None
    resolution: float | None = None
    probe_factor: float = 1.0

    @property
    def is_peak_table(self) -> bool:
        """True when the file was a table of extrema."""
        return self.excluded is None


def ringdown_from_file(
    path: str | Path,
    *,
    peaks: bool = False,
    column: str | int | None = None,
    time_column: str | int | None = None,
    event_time: float | None = None,
    expect: str = "natural",
    expected_sign: int | None = None,
    modes: int = 1,
    allow_aperiodic: bool = False,
    reading_floor: float = 0.0,
) -> FileRingdown:
    """Read ``path``, align it and estimate its ring-down.

    Parameters
    ----------
    path
        A waveform file (CSV, optionally gzip-compressed) or, with ``peaks``, a table of
        extrema.
    peaks
        True when ``path`` is a peak table; the options below then do not apply.
    column, time_column
        Channel and time column (header name or 0-based index); None picks them.
    event_time
        Event time in the file's time base (s); None finds it from the trace.
    expect
        ``"natural"`` (a charged capacitor released) or ``"step"``.
    expected_sign
        The event's expected polarity (+1 or -1) when the fixture states it; an event of
        the other sign is reported as an inverted probe. None: either.
    modes
        Damped sinusoids to fit.
    allow_aperiodic
        True to accept a trace that settles without ringing (overdamped, critically
        damped, first order) and estimate its time constants; False refuses it with a
        message saying what it is. Peak tables always ring.
    reading_floor
        A peak table's least reading error (V) besides its rounding: the scope's
        vertical accuracy (a fixture's ``[scope]`` table).

    Returns
    -------
    FileRingdown
    """
    if peaks:
        table = read_peaks(path)
        estimate = estimate_from_peaks(
            table.time, table.voltage, table.uncertainty, source=table.source,
            time_resolution=table.time_resolution, voltage_resolution=table.voltage_resolution,
            reading_floor=reading_floor,
        )
        return FileRingdown(str(path), estimate, np.asarray(table.time),
                            np.asarray(table.voltage), None, None, table.source,
                            uncertainty=table.uncertainty,
                            time_resolution=table.time_resolution)
    trace = read_trace(path, column=column, time_column=time_column)
    aligned, alignment = align_trace(trace, event_time=event_time, expect=expect,
                                     expected_sign=expected_sign)
    noise = (
        alignment.noise_rms
        if math.isfinite(alignment.noise_rms) and alignment.noise_rms > 0
        else None
    )
    estimate = estimate_ringdown(
        aligned.time,
        aligned.voltage,
        noise_sigma=noise,
        exclude=aligned.clipped,
        modes=modes,
        resolution=trace.resolution,
        source=trace.source,
        allow_aperiodic=allow_aperiodic,
    )
    return FileRingdown(str(path), estimate, np.asarray(aligned.time),
                        np.asarray(aligned.voltage), np.asarray(aligned.clipped), alignment,
                        trace.source, trace.column, resolution=trace.resolution,
                        probe_factor=trace.probe_factor)
