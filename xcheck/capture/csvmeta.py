"""What a capture's preamble states, and whether the data agree with it.

Used by :mod:`xcheck.capture.scope_csv`. Preamble keys are matched as whole phrases after
normalisation (case, punctuation and a unit in brackets removed): a sample interval
(or rate), a start time, a record length, a vertical scale and a probe attenuation.
A key may name a channel first (``CH2 probe``); it then applies to that channel only.
Values are a number with an optional unit, in the same field or the next one. A value
that is not a number leaves the line as a plain remark; a number with a unit that
cannot be read is a problem.

Cross-checks use the rounding of the numbers as written: half a unit in the last digit
of the metadata value, and of the time column's values (the widest seen in the first
rows, as an absolute step for fixed-point numbers or relative for exponent notation).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np

from xcheck.capture.csvlayout import (
    NUM_DOT_RE,
    Column,
    Layout,
    UnitProblem,
    clean,
    half_ulp,
    norm,
    unit,
)

#: The channel may span at most this many divisions of the stated vertical scale.
MAX_DIVISIONS = 15.0

_KEYS = {
    "interval": {
        "sample interval", "sampling interval", "sample period", "sampling period",
        "time step", "timestep", "time increment", "x increment", "xincrement", "dt",
        "delta t", "time per sample", "time per point", "horizontal interval", "interval",
        "time interval", "sample spacing",
    },
    "rate": {
        "sample rate", "sampling rate", "sample frequency", "sampling frequency",
        "samples per second", "fs",
    },
    "start": {
        "start", "start time", "x origin", "xorigin", "first time", "time of first sample",
        "t0", "time start", "t start", "first sample time",
    },
    "length": {
        "record length", "number of points", "number of samples", "points", "samples",
        "point count", "sample count", "npts", "length", "record size", "data points",
    },
    "vscale": {
        "vertical scale", "volts div", "v div", "volts per div", "volts per division",
        "vertical sensitivity", "scale v div",
    },
    "probe": {"probe", "probe attenuation", "attenuation", "probe factor", "probe ratio"},
}

_NUMBER_RE = re.compile(
    r"\s*(?P<number>[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?)\s*(?P<rest>.*)\Z"
)
_PROBE_RE = re.compile(
    r"\s*(?:[xX]\s*(?P<a>\d+(?:\.\d*)?)|(?P<b>\d+(?:\.\d*)?)\s*[xX]?"
    r"|(?P<c>\d+(?:\.\d*)?)\s*:\s*(?P<d>\d+(?:\.\d*)?))\s*\Z"
)
_RATE_UNIT_RE = re.compile(
    r"(?P<prefix>[kKmMgG]?)(?:hz|sa/s|s/s|sps|samples/s|sa/sec|samples/sec)\Z", re.IGNORECASE
)


@dataclass
class Stated:
    """A number stated in the preamble: SI value, its rounding, where it was written."""

    value: float
    rounding: float
    key: str
    line: int

    def where(self) -> str:
        return f"metadata line {self.line} ('{self.key}')"


@dataclass
class Meta:
    """The preamble's statements about one channel (None where not stated)."""

    interval: Stated | None = None
    rate: Stated | None = None
    start: Stated | None = None
    length: Stated | None = None
    vscale: Stated | None = None
    probe: Stated | None = None

    def sample_interval(self, problems: list[str]) -> Stated | None:
        """The interval, from the interval line or the rate line (checked if both)."""
        if self.rate is None:
            return self.interval
        rate = self.rate
        from_rate = Stated(1.0 / rate.value, rate.rounding / rate.value**2, rate.key, rate.line)
        if self.interval is None:
            return from_rate
        gap = abs(self.interval.value - from_rate.value)
        if gap > self.interval.rounding + from_rate.rounding + 1e-9 * self.interval.value:
            problems.append(
                f"{self.interval.where()} gives a sample interval of "
                f"{self.interval.value:.9g} s but {rate.where()} gives {rate.value:.9g} "
                f"samples/s (interval {from_rate.value:.9g} s); correct one of them"
            )
        return self.interval


def _key(key: str) -> tuple[str, str | None, str | None]:
    """Normalised key phrase, the channel number it names (if any), unit in brackets."""
    bracket = None
    match = re.search(r"[\(\[]([^\)\]]*)[\)\]]", key)
    if match:
        bracket = match.group(1).strip() or None
        key = key[: match.start()] + key[match.end() :]
    phrase = re.sub(r"[^0-9a-zµμ]+", " ", key.lower().replace("/", " ")).strip()
    channel = None
    match = re.match(r"(?:ch|chan|channel)\s*(\d+)\s+(.*)", phrase)
    if match:
        channel, phrase = match.group(1), match.group(2)
    return phrase, channel, bracket


def _channel_number(column: Column) -> str | None:
    match = re.fullmatch(r"(?:ch|chan|channel)\s*(\d+)", norm(column.name))
    return match.group(1) if match else None


def read_metadata(layout: Layout, channel: Column, problems: list[str]) -> Meta:
    """What the preamble states about ``channel``; unreadable values go to ``problems``."""
    meta = Meta()
    wanted_channel = _channel_number(channel)
    for key, value in layout.metadata.items():
        phrase, key_channel, bracket = _key(key)
        kind = next((k for k, phrases in _KEYS.items() if phrase in phrases), None)
        if kind is None or getattr(meta, kind) is not None:
            continue
        if key_channel is not None and key_channel != wanted_channel:
            continue  # about another channel
        line = layout.metadata_lines[key]
        parts = value.split(layout.delimiter) if layout.delimiter else re.split(r"[,;\t]", value)
        fields = [f for f in (clean(p) for p in parts) if f]
        if not fields:
            continue
        try:
            stated = _value(kind, fields, bracket, layout)
        except UnitProblem as exc:
            problems.append(f"metadata line {line} ('{key}'): {exc}; correct the line or delete it")
            continue
        if stated is None:
            continue  # not a number: a remark, kept as metadata only
        number, rounding = stated
        if kind != "start" and not (math.isfinite(number) and number > 0):
            problems.append(
                f"metadata line {line} ('{key}'): {value!r} must be a positive number; "
                "correct the line or delete it"
            )
            continue
        setattr(meta, kind, Stated(number, rounding, key, line))
    return meta


def _value(
    kind: str, fields: list[str], bracket: str | None, layout: Layout
) -> tuple[float, float] | None:
    """SI value and rounding of a preamble value, None when it is not a number."""
    first = fields[0]
    if kind == "probe":
        match = _PROBE_RE.match(first)
        if match is None:
            return None
        if match.group("c") is not None:  # "10:1" (or "1:10"): the larger over the smaller
            a, b = float(match.group("c")), float(match.group("d"))
            return (max(a, b) / min(a, b), 0.0) if min(a, b) > 0 else (math.nan, 0.0)
        return float(match.group("a") or match.group("b")), 0.0
    match = _NUMBER_RE.match(first)
    if match is None:
        return None
    number = match.group("number")
    if "," in number and layout.delimiter == ",":
        return None
    value = float(number.replace(",", "."))
    rounding = half_ulp(number)
    unit_text = match.group("rest").strip() or (fields[1] if len(fields) > 1 else "") or bracket or ""
    unit_text = unit_text.strip("()[] ")
    if kind == "length":
        bare = re.sub(r"\s*(pts|points|samples|sa|s)\Z", "", unit_text, flags=re.IGNORECASE)
        scale = {"": 1.0, "k": 1e3, "K": 1e3, "M": 1e6}.get(bare.strip())
        if scale is None:
            raise UnitProblem(f"cannot read {first!r} {unit_text!r} as a number of samples")
        return value * scale, 0.0
    if kind == "rate":
        if not unit_text:
            return value, rounding
        found = _RATE_UNIT_RE.match(unit_text.replace(" ", ""))
        if found is None:
            raise UnitProblem(
                f"unknown sample-rate unit {unit_text!r}; write e.g. '100 MSa/s' or '1e8'"
            )
        # A milli-hertz sample rate is not a capture: 'm' here can only mean mega.
        scale = {"": 1.0, "k": 1e3, "m": 1e6, "g": 1e9}[found.group("prefix").lower()]
        return value * scale, rounding * scale
    if kind == "vscale":
        unit_text = re.sub(r"\s*/?\s*div\Z", "", unit_text, flags=re.IGNORECASE)
    if not unit_text:
        return value, rounding
    expected = "s" if kind in ("interval", "start") else "V"
    dimension, scale = unit(unit_text)
    if dimension != expected and not (expected == "V" and dimension == "A"):
        what = "a time" if expected == "s" else "a voltage"
        raise UnitProblem(f"unit {unit_text!r} is not {what} unit")
    return value * scale, rounding * scale


def _rounding_bound(texts: list[str], scale: float) -> tuple[float, float]:
    """(absolute, relative) bounds on the rounding of numbers written like ``texts``."""
    absolute = relative = 0.0
    for text in texts:
        if not NUM_DOT_RE.match(text.replace(",", ".")):
            continue
        half = half_ulp(text)
        if "e" in text.lower():
            magnitude = abs(float(text.replace(",", ".")))
            if magnitude > 0:
                relative = max(relative, half / magnitude)
        else:
            absolute = max(absolute, half * scale)
    return absolute, relative


def time_problems(
    layout: Layout,
    time_column: Column,
    scale: float,
    time: np.ndarray,
    interval: Stated | None,
    start: Stated | None,
) -> list[str]:
    """Disagreements between a time column and the stated interval and start."""
    problems = []
    texts = [row[time_column.index] for row in layout.samples if len(row) > time_column.index]
    absolute, relative = _rounding_bound(texts, scale)

    def written(value: float) -> float:
        return max(absolute, relative * abs(value))

    n = time.size
    if interval is not None:
        mean_step = (time[-1] - time[0]) / (n - 1)
        tol = (
            (written(time[0]) + written(time[-1])) / (n - 1)
            + interval.rounding
            + 1e-9 * interval.value
        )
        if abs(mean_step - interval.value) > tol:
            problems.append(
                f"{interval.where()} gives a sample interval of {interval.value:.9g} s, but "
                f"the time column {time_column.label} advances {mean_step:.9g} s per row on "
                f"average ({mean_step / interval.value:.6g} times as much); check the time "
                "column's unit or correct that line"
            )
    if start is not None:
        tol = written(time[0]) + start.rounding + 1e-9 * abs(time[-1] - time[0])
        if abs(time[0] - start.value) > tol:
            problems.append(
                f"{start.where()} gives a start time of {start.value:.9g} s, but the first "
                f"row of the time column {time_column.label} reads {time[0]:.9g} s; check "
                "the time column's unit or correct that line"
            )
    return problems


def record_problems(meta: Meta, channel: Column, rows: int, span: float) -> list[str]:
    """Disagreements with the stated record length and vertical scale.

    ``span`` is the channel's peak-to-peak in volts before any probe factor.
    """
    problems = []
    if meta.length is not None and round(meta.length.value) != rows:
        problems.append(
            f"{meta.length.where()} gives a record length of {meta.length.value:.0f} samples "
            f"but the file has {rows} data rows; the file may be cut short or the line "
            "wrong: export the capture again or correct the line"
        )
    probe = meta.probe.value if meta.probe is not None else 1.0
    if meta.vscale is not None and span > MAX_DIVISIONS * meta.vscale.value * max(probe, 1.0):
        problems.append(
            f"column {channel.label} spans {span:.6g} V, {span / meta.vscale.value:.0f} "
            f"divisions of the vertical scale in {meta.vscale.where()} "
            f"({meta.vscale.value:.6g} V/div), where a screen holds about 10: check the "
            "column's unit (for example [mV]) or that line"
        )
    return problems
