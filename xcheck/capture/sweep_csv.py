"""Reading a measured frequency sweep from delimited text (:func:`read_sweep_csv`).

The layout is worked out as for a scope export (:mod:`xcheck.capture.csvlayout`):
comma, semicolon or tab separators, a decimal comma with semicolons or tabs, preamble
lines before the header kept as metadata, gzip read directly. A header row names the
columns; the columns are found by name and unit (:mod:`xcheck.capture.sweep_units`):

- a frequency column (``freq (Hz)``, ``Frequency [MHz]``; Hz when no unit is given);
- either a magnitude and a phase (``|Z| (ohm)``, ``mag (dB)``, ``phase (deg)``) or a
  real and an imaginary part (``Re``, ``Im``, ``R (ohm)``, ``X (ohm)``; preferred when
  both forms are present).

Keyword arguments name a column or a unit where the header does not, and override it
where it does. Nothing ambiguous is guessed: a magnitude column whose header gives no
unit needs ``magnitude_unit`` (``"dB"`` or ``"linear"``), a phase column without one
needs ``phase_unit``, and a sweep whose columns do not say impedance or transfer
function needs ``quantity``. A phase stated in degrees whose values all lie within
±pi (radians, perhaps) is read as stated, with a note on the sweep.

A sweep that runs downwards in frequency is read in reverse (with a note). Refused,
with every problem listed and each line named: no frequency column, frequencies not
above 0 Hz, repeated or out of order, empty, NaN or infinite cells, unreadable
numbers, negative linear magnitudes, values beyond the limits of
:mod:`xcheck.capture.sweep_types`, fewer than
:data:`~xcheck.capture.sweep_types.MIN_SWEEP_POINTS` points.
"""

from __future__ import annotations

import math
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator

import numpy as np

from xcheck.capture.csvlayout import (
    NUM_COMMA_RE,
    NUM_DOT_RE,
    Column,
    Layout,
    Source,
    columns,
    head_lines,
    open_source,
    pick_column,
    sniff_layout,
    split,
)
from xcheck.capture.sweep_checks import error_arrays, frequency_problems, listed, magnitude_problems
from xcheck.capture.sweep_types import (
    MAX_SWEEP_POINTS,
    MIN_SWEEP_POINTS,
    QUANTITY_UNITS,
    SWEEP_MAX_BYTES,
    FrequencySweep,
    SweepError,
)
from xcheck.capture.sweep_units import (
    UnitProblem,
    ValueUnit,
    frequency_scale,
    phase_scale,
    quantity_from_name,
    role_of,
    split_field,
    value_unit,
)
from xcheck.capture.types import MAX_EXAMPLES
from xcheck.errors import TraceError
from xcheck.input_file import size_words

__all__ = ["read_sweep_csv"]

Wanted = str | int | None


@contextmanager
def _as_sweep_error() -> Iterator[None]:
    """Re-raise the shared layout helpers' TraceError as a SweepError (same problems)."""
    try:
        yield
    except SweepError:
        raise
    except TraceError as exc:
        raise SweepError(exc.source, exc.problems) from None


def read_sweep_csv(
    path: str | Path,
    *,
    frequency_column: Wanted = None,
    magnitude_column: Wanted = None,
    phase_column: Wanted = None,
    real_column: Wanted = None,
    imag_column: Wanted = None,
    frequency_unit: str | None = None,
    magnitude_unit: str | None = None,
    phase_unit: str | None = None,
    quantity: str | None = None,
    relative_error: object = None,
    phase_error: object = None,
) -> FrequencySweep:
    """Read a frequency sweep (magnitude and phase, or real and imaginary parts).

    Parameters
    ----------
    path
        CSV / text file, optionally gzip-compressed.
    frequency_column, magnitude_column, phase_column, real_column, imag_column
        A column by header name (case-insensitive, unit optional), ``"column k"``
        (1-based) or 0-based index; default: found by name and unit.
    frequency_unit
        The frequency column's unit (``"Hz"``, ``"kHz"``, ``"MHz"``, ``"GHz"``); default:
        the header's, else Hz.
    magnitude_unit
        The unit of the magnitude, or of the real and imaginary parts: ``"dB"``,
        ``"linear"``, or a unit (``"ohm"``, ``"kohm"``, ``"dBohm"``, ``"V/V"``, ...).
        Default: the header's; a magnitude column without one is refused.
    phase_unit
        ``"deg"`` or ``"rad"``; default: the header's; without one, refused.
    quantity
        ``"impedance"`` or ``"transfer"``; default: what the units or names say.
    relative_error
        Standard error of the magnitude relative to it (one number, or one a point), if
        known (for example an analyser's stated accuracy taken as a standard error).
    phase_error
        Standard error of the phase in radians (one number, or one a point), if known.

    Returns
    -------
    FrequencySweep
        Frequency in Hz (increasing) and complex values in ohms or the transfer unit.

    Raises
    ------
    SweepError
        Listing every problem found (see the module notes).
    """
    with _as_sweep_error():
        src = open_source(path, SWEEP_MAX_BYTES)
        if not src.complete:
            raise SweepError(src.name, [
                f"the file holds more than {size_words(SWEEP_MAX_BYTES)} of text, more than "
                "a frequency sweep needs; check that this is the right file or decimate it"
            ])
        layout = sniff_layout(src)
        plan = _plan(src, layout, dict(
            frequency=frequency_column, magnitude=magnitude_column, phase=phase_column,
            real=real_column, imag=imag_column,
        ), frequency_unit, magnitude_unit, phase_unit, quantity)
    data, lines = _read_rows(src, layout, plan)
    return _sweep(src, layout, plan, data, lines, relative_error, phase_error)


# --------------------------------------------------------------------------- columns


@dataclass
class _Col:
    """One column with its name and unit as a sweep reads them."""

    column: Column
    name: str
    unit: str | None

    @property
    def index(self) -> int:
        return self.column.index

    @property
    def label(self) -> str:
        return self.column.label


@dataclass
class _Plan:
    frequency: _Col
    form: str  # "polar" or "rect"
    first: _Col  # magnitude or real part
    second: _Col  # phase or imaginary part
    frequency_scale: float
    value: ValueUnit
    phase_scale: float  # radians per unit (1 for the rect form)
    quantity: str
    unit: str
    notes: list[str]


def _sweep_columns(layout: Layout) -> list[_Col]:
    found = []
    for column in columns(layout):
        if layout.header is not None and layout.header[column.index]:
            name, unit_text = split_field(layout.header[column.index])
        else:
            name, unit_text = column.name, None
        found.append(_Col(column, name, layout.units[column.index] or unit_text))
    return found


def _role(col: _Col) -> str | None:
    """The column's role by name, else by unit."""
    role = role_of(col.name)
    if role is not None or col.unit is None:
        return role
    for reader, found in ((frequency_scale, "frequency"), (phase_scale, "phase"),
                          (value_unit, "magnitude")):
        try:
            reader(col.unit)
            return found
        except UnitProblem:
            continue
    return None


def _plan(
    src: Source, layout: Layout, wanted: dict[str, Wanted], frequency_unit: str | None,
    magnitude_unit: str | None, phase_unit: str | None, quantity: str | None,
) -> _Plan:
    found = _sweep_columns(layout)
    plain = [c.column for c in found]
    problems: list[str] = []
    if quantity is not None and quantity not in QUANTITY_UNITS:
        raise SweepError(src.name, [
            f"quantity must be 'impedance' or 'transfer', got {quantity!r}"])
    chosen: dict[str, _Col] = {}
    for role, given in wanted.items():
        if given is not None:
            column = pick_column(src.name, plain, given, f"{role} column")
            chosen[role] = found[column.index]
    roles = {c.index: _role(c) for c in found}
    taken = {c.index for c in chosen.values()}
    for role in ("frequency", "magnitude", "phase", "real", "imag"):
        if role not in chosen:
            match = next((c for c in found if roles[c.index] == role and c.index not in taken), None)
            if match is not None:
                chosen[role] = match
                taken.add(match.index)
    listing = ", ".join(c.label for c in found)
    if "frequency" not in chosen:
        raise SweepError(src.name, [
            f"no frequency column: the file has {listing}; name the frequency column in the "
            "header (such as 'freq (Hz)') or pass frequency_column="
        ])
    explicit_polar = wanted["magnitude"] is not None or wanted["phase"] is not None
    explicit_rect = wanted["real"] is not None or wanted["imag"] is not None
    if explicit_polar and explicit_rect:
        raise SweepError(src.name, [
            "give either magnitude and phase columns or real and imaginary columns, not both"])
    has_rect = "real" in chosen and "imag" in chosen
    has_polar = "magnitude" in chosen and "phase" in chosen
    notes: list[str] = []
    if explicit_rect or (has_rect and not explicit_polar):
        form = "rect"
        if has_polar and not explicit_rect:
            notes.append(
                f"read the real and imaginary parts ({chosen['real'].label}, "
                f"{chosen['imag'].label}); the magnitude and phase columns were not used"
            )
    elif explicit_polar or has_polar:
        form = "polar"
    else:
        partial = [f"{role} {chosen[role].label}" for role in ("magnitude", "phase", "real", "imag")
                   if role in chosen]
        raise SweepError(src.name, [
            "cannot find the values: a sweep needs a magnitude and a phase column or a real "
            f"and an imaginary column; the file has {listing}"
            + (f" (found {', '.join(partial)} only)" if partial else "")
            + "; name them in the header (such as '|Z| (ohm)' and 'phase (deg)', or 'Re' and "
            "'Im') or pass magnitude_column= and phase_column= (or real_column= and imag_column=)"
        ])
    first, second = (chosen.get("magnitude"), chosen.get("phase")) if form == "polar" else (
        chosen.get("real"), chosen.get("imag"))
    if first is None or second is None:
        missing = ("magnitude" if first is None else "phase") if form == "polar" else (
            "real" if first is None else "imag")
        raise SweepError(src.name, [
            f"no {missing} column found among {listing}; pass {missing}_column="])
    freq = chosen["frequency"]
    if freq.index in (first.index, second.index) or first.index == second.index:
        raise SweepError(src.name, ["the frequency and value columns must be different columns"])

    f_scale = 1.0
    f_unit = frequency_unit if frequency_unit is not None else freq.unit
    if f_unit is not None:
        try:
            f_scale = frequency_scale(f_unit)
        except UnitProblem as exc:
            problems.append(f"frequency column {freq.label}: {exc}; {_fix(frequency_unit, 'frequency_unit')}")
    value = _value_unit(form, first, second, magnitude_unit, layout, problems)
    p_scale = 1.0
    if form == "polar":
        p_unit = phase_unit if phase_unit is not None else second.unit
        if p_unit is None:
            problems.append(
                f"the phase column {second.label} does not say whether it is in degrees or "
                "radians; write the unit in the header (such as 'phase (deg)') or pass "
                "phase_unit='deg' or 'rad'"
            )
        else:
            try:
                p_scale = phase_scale(p_unit)
            except UnitProblem as exc:
                problems.append(f"phase column {second.label}: {exc}; {_fix(phase_unit, 'phase_unit')}")
    found_quantity = _quantity(src, first, second, value, quantity, problems)
    if problems:
        raise SweepError(src.name, problems)
    assert found_quantity is not None
    unit = "ohm" if found_quantity == "impedance" else (value.unit or "1")
    return _Plan(freq, form, first, second, f_scale, value, p_scale, found_quantity, unit, notes)


def _fix(given: str | None, keyword: str) -> str:
    return f"pass a known unit as {keyword}=" if given is not None else (
        f"correct the header or pass {keyword}=")


def _value_unit(
    form: str, first: _Col, second: _Col, magnitude_unit: str | None, layout: Layout,
    problems: list[str],
) -> ValueUnit:
    """The unit of the magnitude (or of the real and imaginary parts)."""
    keyword = "magnitude_unit"
    given = magnitude_unit if magnitude_unit is not None else first.unit
    if form == "rect" and given is None:
        given = second.unit
    if given is None:
        if form == "rect":
            return ValueUnit(False, 1.0, None, None)
        texts = [row[first.index] for row in layout.samples if len(row) > first.index]
        negative = any(t.lstrip().startswith("-") for t in texts)
        hint = " (it holds negative values, so it is probably dB)" if negative else ""
        problems.append(
            f"the magnitude column {first.label} does not say whether it is in dB or linear"
            f"{hint}; write the unit in the header (such as 'mag (dB)' or '|Z| (ohm)') or "
            "pass magnitude_unit='dB' or 'linear'"
        )
        return ValueUnit(False, 1.0, None, None)
    try:
        found = value_unit(given)
    except UnitProblem as exc:
        problems.append(f"column {first.label}: {exc}; {_fix(magnitude_unit, keyword)}")
        return ValueUnit(False, 1.0, None, None)
    if form == "rect" and found.decibel:
        problems.append(
            f"the real and imaginary parts ({first.label}, {second.label}) cannot be in dB; "
            "give their linear unit (such as 'ohm') or read a magnitude and phase instead"
        )
    return found


def _quantity(
    src: Source, first: _Col, second: _Col, value: ValueUnit, quantity: str | None,
    problems: list[str],
) -> str | None:
    """Impedance or transfer function: the keyword, else the unit, else the names."""
    if quantity is not None:
        if value.quantity is not None and value.quantity != quantity:
            problems.append(
                f"quantity={quantity!r} was given, but column {first.label} is in a unit of "
                f"{'impedance' if value.quantity == 'impedance' else 'a transfer function'}; "
                "correct the argument or the header"
            )
        return quantity
    if value.quantity is not None:
        return value.quantity
    named = quantity_from_name(first.name) or quantity_from_name(second.name)
    if named is not None:
        return named
    problems.append(
        f"cannot tell whether {first.label} is an impedance or a transfer function; "
        "write its unit in the header (such as 'ohm' or 'V/V'), name it (such as '|Z|' or "
        "'|H|'), or pass quantity='impedance' or 'transfer'"
    )
    return None


# --------------------------------------------------------------------------- rows


def _read_rows(src: Source, layout: Layout, plan: _Plan) -> tuple[np.ndarray, np.ndarray]:
    """The wanted columns as a (points, 3) float array, and each row's line number."""
    pattern = NUM_COMMA_RE if layout.decimal_comma else NUM_DOT_RE
    wanted = (plan.frequency, plan.first, plan.second)
    rows = [line for line in head_lines(src) if line.number >= layout.body_line and line.text.strip()]
    if len(rows) > MAX_SWEEP_POINTS:
        raise SweepError(src.name, [
            f"{len(rows)} data rows, more than the {MAX_SWEEP_POINTS} points accepted in one "
            "sweep; decimate the sweep"
        ])
    data = np.full((len(rows), 3), np.nan)
    lines = np.array([line.number for line in rows], dtype=int)
    wrong_count: list[int] = []
    unreadable: dict[int, list[tuple[int, str]]] = {0: [], 1: [], 2: []}
    nonfinite: dict[int, list[int]] = {0: [], 1: [], 2: []}
    for r, line in enumerate(rows):
        fields = split(line.text, layout.delimiter)
        if len(fields) != layout.n_fields:
            wrong_count.append(r)
            continue
        for k, col in enumerate(wanted):
            text = fields[col.index]
            if pattern.match(text):
                value = float(text.replace(",", ".")) if layout.decimal_comma else float(text)
                if math.isfinite(value):
                    data[r, k] = value
                    continue
                nonfinite[k].append(r)
            elif not text or text.lower().lstrip("+-") in ("nan", "inf", "infinity"):
                nonfinite[k].append(r)
            else:
                unreadable[k].append((r, text))
    problems = []
    if wrong_count:
        shown = [f"line {lines[r]} has {len(split(rows[r].text, layout.delimiter))}"
                 for r in wrong_count[:MAX_EXAMPLES]]
        problems.append(
            f"rows must have {layout.n_fields} fields like the first data row (line "
            f"{layout.body_line}): {listed(shown, len(wrong_count))}; delete or repair those lines"
        )
    point = "a decimal comma" if layout.decimal_comma else "a decimal point"
    for k, col in enumerate(wanted):
        if unreadable[k]:
            shown = [f"line {lines[r]} reads {text[:40]!r}" for r, text in unreadable[k][:MAX_EXAMPLES]]
            problems.append(
                f"column {col.label}: cannot read a number: {listed(shown, len(unreadable[k]))}; "
                f"write plain numbers with {point} (such as 1.5e3) or delete those lines"
            )
        if nonfinite[k]:
            shown = [f"line {lines[r]}" for r in nonfinite[k][:MAX_EXAMPLES]]
            problems.append(
                f"column {col.label} needs a finite number in every row, but it is empty, NaN "
                f"or infinite on {listed(shown, len(nonfinite[k]))}; delete those rows or "
                "measure them again"
            )
    if problems:
        raise SweepError(src.name, problems)
    if len(rows) < MIN_SWEEP_POINTS:
        raise SweepError(src.name, [
            f"only {len(rows)} data rows; a sweep needs at least {MIN_SWEEP_POINTS} points "
            "(sweep more frequencies)"
        ])
    return data, lines


# --------------------------------------------------------------------------- values


def _sweep(
    src: Source, layout: Layout, plan: _Plan, data: np.ndarray, lines: np.ndarray,
    relative_error: object, phase_error: object,
) -> FrequencySweep:
    with np.errstate(over="ignore", invalid="ignore"):  # beyond the float range: refused
        frequency = data[:, 0] * plan.frequency_scale
        return _checked_sweep(src, layout, plan, data, lines, frequency, relative_error, phase_error)


def _checked_sweep(
    src: Source, layout: Layout, plan: _Plan, data: np.ndarray, lines: np.ndarray,
    frequency: np.ndarray, relative_error: object, phase_error: object,
) -> FrequencySweep:
    problems, reverse = frequency_problems(frequency, lines, f"the frequency column {plan.frequency.label}")
    notes = list(plan.notes)
    first, second = data[:, 1], data[:, 2]
    if plan.form == "polar":
        if plan.value.decibel:
            magnitude = 10.0 ** (first / 20.0)  # dB of a field quantity (20 log10)
        else:
            magnitude = first * plan.value.scale
            negative = np.flatnonzero(magnitude < 0)
            if negative.size:
                shown = [f"line {lines[k]} reads {first[k]:.6g}" for k in negative[:MAX_EXAMPLES]]
                problems.append(
                    f"the magnitude column {plan.first.label} holds negative values "
                    f"({listed(shown, negative.size)}), which a linear magnitude cannot be; if "
                    "it is in dB pass magnitude_unit='dB' or write '(dB)' in the header"
                )
        phase = second * plan.phase_scale
        notes += _phase_notes(plan, second)
        checked = magnitude
    else:
        value = checked = (first + 1j * second) * plan.value.scale
    unit_words = "ohm" if plan.quantity == "impedance" else plan.unit
    problems += magnitude_problems(checked, lines, f"the {plan.quantity}", unit_words)
    if problems:
        raise SweepError(src.name, problems)
    if plan.form == "polar":
        value = magnitude * np.exp(1j * phase)
    if reverse:
        frequency, value = frequency[::-1], value[::-1]
        notes.append("the sweep runs from high to low frequency; it was read in reverse order")
    rel, ph = error_arrays(src.name, frequency.size, relative_error, phase_error)
    if reverse:
        rel = rel[::-1] if rel is not None else None
        ph = ph[::-1] if ph is not None else None
    return FrequencySweep(
        frequency=frequency, value=value, quantity=plan.quantity, unit=plan.unit,
        source=src.name, relative_error=rel, phase_error=ph, notes=tuple(notes),
        label=f"{plan.first.column.text} and {plan.second.column.text}",
        metadata=layout.metadata,
    )


def _phase_notes(plan: _Plan, raw: np.ndarray) -> list[str]:
    """Remarks on a phase column that may be in the other unit than stated."""
    largest = float(np.max(np.abs(raw)))
    degrees = math.isclose(plan.phase_scale, math.pi / 180)
    if degrees and largest <= math.pi:
        return [
            f"the phase column {plan.second.label} is read as degrees, but every value lies "
            f"within ±pi (largest {largest:.4g}); if it is in radians, pass phase_unit='rad'"
        ]
    if not degrees and largest > 2 * math.pi:
        return [
            f"the phase column {plan.second.label} is read as radians, but values reach "
            f"{largest:.4g}; if it is in degrees, pass phase_unit='deg'"
        ]
    return []
