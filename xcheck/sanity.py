"""What an engineer would catch before reading the numbers: the sanity findings.

A fit absorbs instrument mistakes into its nuisance values without a word: a probe's
attenuation set wrong becomes a gain of 0.1 or 10, a time column in microseconds read
as seconds moves the ring a million times away from what the stated L and C give, a
channel offset becomes a large fitted offset. :func:`sanity_findings` looks at the best
candidate's nuisance values and at the stated values' ring and returns each such
finding with a short code; the verdict puts them first and summary.json lists them
under ``findings``. The thresholds are judgement, not statistics (common practice, no
source): a gain outside 1/1.5 to 1.5, a frequency more than 10 times off, an offset beyond
10 % of the event.
"""

from __future__ import annotations

import math

from xcheck.outcome import CandidateOutcome, Finding
from xcheck.values import format_eng

#: A gain outside [1 / GAIN_LIMIT, GAIN_LIMIT] is an instrument setting, not physics.
GAIN_LIMIT = 1.5
#: A measured ring this many times away from the stated values' is a units mistake or
#: a wrong value, not a parasitic.
FREQUENCY_LIMIT = 10.0
#: A fitted offset beyond this share of the event's size.
OFFSET_SHARE = 0.1
#: How close to a power of ten (in decades) a factor must be to be called one.
DECADE_TOLERANCE = 0.05


def _decades(factor: float) -> int | None:
    """The power of ten ``factor`` is (within :data:`DECADE_TOLERANCE`), else None."""
    if not (math.isfinite(factor) and factor > 0):
        return None
    exponent = math.log10(factor)
    nearest = round(exponent)
    return nearest if nearest != 0 and abs(exponent - nearest) < DECADE_TOLERANCE else None


def _gain_finding(name: str, gain: float, probe_factor: float = 1.0) -> Finding | None:
    if not math.isfinite(gain):
        return None
    if gain < 0:
        return Finding("gain-sign", (
            f"the best fit needed a negative {name} ({gain:.3g}): the measurement's polarity is "
            "opposite to the fixture's (probe or ground lead reversed, or an inverted channel)"))
    if 1 / GAIN_LIMIT <= gain <= GAIN_LIMIT:
        return None
    decade = _decades(gain)
    if probe_factor != 1.0 and abs(math.log10(gain / abs(probe_factor))) < DECADE_TOLERANCE:
        return Finding("probe-factor", (
            f"the file's preamble states a probe attenuation of {probe_factor:g} and its values "
            f"were multiplied by it, and the best fit needed a {name} of {gain:.4g}: the export "
            "was probably already scaled to the probe tip, so the factor was applied twice; "
            "delete the probe line from the file's preamble and compare again"))
    if decade is not None:
        return Finding("gain-decade", (
            f"the best fit needed a {name} of {gain:.4g}, a factor of 10^{decade}: a probe "
            "attenuation set wrong (a 10x probe read as 1x, or a preamble's factor applied to "
            "data already scaled at the probe tip); fix the setting rather than trust the fit"))
    return Finding("gain", (
        f"the best fit needed a {name} of {gain:.3g}: the capture's vertical scale, the "
        "probe's attenuation or the stated initial voltage or step is off by that factor"))


def sanity_findings(outcomes: list[CandidateOutcome], measured_f_d: float,
                    event_size: float, probe_factor: float = 1.0) -> list[Finding]:
    """The sanity findings of a comparison.

    Parameters
    ----------
    outcomes
        Every candidate's outcome; the best (rank 1) and ``as-measured`` are looked at.
    measured_f_d
        The measured ring frequency (Hz); 0 when the measurement does not ring.
    event_size
        The measured event's size (V), which an offset is judged against.
    probe_factor
        The probe attenuation the trace's preamble stated and the reader applied.
    """
    findings: list[Finding] = []
    best = next((o for o in outcomes if o.ranked.rank == 1), None)
    if best is not None:
        nuisance = best.fit.nuisance
        for name in ("gain", "amplitude"):
            if name in nuisance:
                found = _gain_finding(name, nuisance[name][0], probe_factor)
                if found:
                    findings.append(found)
        if "offset" in nuisance and event_size > 0:
            offset = nuisance["offset"][0]
            if abs(offset) > OFFSET_SHARE * event_size:
                findings.append(Finding("offset", (
                    f"the best fit needed an offset of {format_eng(offset, 'V')}, "
                    f"{abs(offset) / event_size:.0%} of the event: check the channel's DC "
                    "offset and coupling (AC coupling distorts a slow ring-down)")))
    stated = next((o for o in outcomes if o.name == "as-measured" and o.theory is not None), None)
    if stated is not None and measured_f_d > 0:
        model_f_d = measured_f_d + stated.theory.damped_frequency_error_hz
        if math.isfinite(model_f_d) and model_f_d > 0:
            ratio = measured_f_d / model_f_d
            if ratio > FREQUENCY_LIMIT or ratio < 1 / FREQUENCY_LIMIT:
                decade = _decades(ratio)
                hint = ("; a factor of 10^{:d} looks like a time column in the wrong unit (µs or "
                        "ms read as seconds) or a value written with the wrong suffix".format(decade)
                        if decade is not None and decade % 3 == 0 else
                        "; check the time column's unit and the stated L and C")
                findings.append(Finding("time-scale", (
                    f"the measured ring ({format_eng(measured_f_d, 'Hz')}) is {ratio:.3g} times "
                    f"what the stated values give ({format_eng(model_f_d, 'Hz')}){hint}")))
    return findings
