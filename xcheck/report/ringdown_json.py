"""The JSON of ``xcheck ringdown --json`` and the alignment record it shares with
summary.json (one builder for both, so the two files name the same things alike)."""

from __future__ import annotations

import math
from typing import Any

from xcheck.capture.align import Alignment
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


def ringdown_json(found: FileRingdown, derived: DerivedCircuit | None = None) -> dict[str, Any]:
    """One file's ring-down estimate in SI units, JSON-safe (non-finite numbers become
    null).

    Parameters
    ----------
    found
        The file's estimate (:func:`xcheck.ringdown.from_file.ringdown_from_file`).
    derived
        Series-RLC values implied by the estimate, added as ``"derived"``.
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
