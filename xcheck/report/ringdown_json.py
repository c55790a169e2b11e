"""The JSON of ``xcheck ringdown --json`` and the alignment record it shares with
summary.json (one builder for both, so the two files name the same things alike).

A ringing trace gives :meth:`xcheck.ringdown.RingdownEstimate.to_json` (``"regime":
"underdamped"``, ``damped_frequency_hz``, ``neper_frequency_per_s``, ...); a trace that
settles without ringing gives :meth:`xcheck.ringdown.AperiodicEstimate.to_json`
(``"regime"`` one of ``"overdamped"``, ``"critically damped"``, ``"first order"``,
``time_constants_s``, ``decay_rates_per_s``, ``natural_angular_frequency_rad_per_s``,
``damping_ratio``, ``settled_level_volts``, ``record_span_time_constants``, ``bic``,
...). Both carry ``"aperiodic"`` (false or true), ``source``, ``alignment`` and, when a
component was given, ``derived``.
"""

from __future__ import annotations

import math
from typing import Any

from xcheck.capture.align import Alignment
from xcheck.ringdown.aperiodic_derived import AperiodicCircuit
from xcheck.ringdown.derived import DerivedCircuit
from xcheck.ringdown.from_file import FileRingdown


def alignment_json(alignment: Alignment) -> dict[str, Any]:
    """Event time, baseline, noise, droop and the inversion and manual flags, SI units."""
    return {
        "event_time_s": alignment.event_time,
        "baseline_volts": alignment.baseline,
        "noise_rms_volts": alignment.noise_rms,
        "droop_volts_per_s": alignment.droop_per_s,
        "inverted": bool(alignment.inverted),
        "manual": bool(alignment.manual),
    }


def ringdown_json(
    found: FileRingdown, derived: DerivedCircuit | AperiodicCircuit | None = None
) -> dict[str, Any]:
    """One file's ring-down (or aperiodic) estimate in SI units, JSON-safe (non-finite
    numbers become null).

    Parameters
    ----------
    found
        The file's estimate (:func:`xcheck.ringdown.from_file.ringdown_from_file`).
    derived
        Series-circuit values implied by the estimate, added as ``"derived"``.
    """
    data = found.estimate.to_json()
    data["source"] = found.source
    if found.alignment is not None:
        a = found.alignment
        data["alignment"] = {
            **alignment_json(a),
            "pre_event_samples": int(a.pre_event_samples),
            "notes": list(a.notes),
        }
    if derived is not None:
        data["derived"] = derived.to_json()
    return json_safe(data)


def json_safe(data: Any) -> Any:
    """JSON-safe copy: non-finite floats become null (JSON has no NaN or infinity)."""
    if isinstance(data, dict):
        return {k: json_safe(v) for k, v in data.items()}
    if isinstance(data, (list, tuple)):
        return [json_safe(v) for v in data]
    if isinstance(data, float) and not math.isfinite(data):
        return None
    return data
