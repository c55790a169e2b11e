"""Reading a table of LCR-meter readings (:func:`read_lcr_table`) and converting them.

The table is delimited text (comma, semicolon or tab; a decimal comma with semicolons
or tabs), optionally after ``#`` comment lines, with a header row naming:

- the frequency (``freq (Hz)``, ``f [kHz]``; cells may be written ``1k`` or ``100Hz``);
- the primary reading: a capacitance (``C``, ``Cs``, ``Cp``), an inductance (``L``,
  ``Ls``, ``Lp``) or an impedance magnitude (``|Z|``, ``Z``), in the header's unit
  (``C (uF)``) or, without one, with engineering notation in the cells (``47u``,
  ``4.7nF``; :func:`xcheck.values.parse_value`, so an upper-case ``M`` is refused);
- one secondary reading: a resistance (``ESR`` or ``Rs`` for the series circuit, ``Rp``
  for the parallel one, ``R`` for whichever the circuit is), the dissipation factor
  (``D``, ``DF``, ``tan d``; ``D (%)`` in percent), ``Q``, or the phase (``theta (deg)``,
  with ``|Z|`` only). A table with several secondary columns uses the first.

The meter's equivalent circuit is ``"series"`` by default; the header's ``Cs`` / ``Cp``
(``Ls``, ``Lp``, ``Rs``, ``Rp``) or the ``circuit`` argument says otherwise (they must
agree). An ``|Z|`` reading with a resistance, D or Q needs ``reactance`` (``"inductive"`` or
``"capacitive"``): those readings do not carry the reactance's sign.

The readings are converted to complex impedance by :func:`lcr_impedance` with the
common-practice formulas (no source): for a series circuit Z = R + jX with
X = -1/(omega C) or omega L, D = R / |X| (so D = ESR omega C for a series C), Q = 1 / D
(so Q = omega L / ESR for a series L); for a parallel circuit Y = G + jB with
B = omega C or -1/(omega L), G = 1 / Rp, D = G / |B|; for ``|Z|``, tan |phase| = Q = 1 / D.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np

from xcheck.capture.csvlayout import (
    HEAD_BYTES,
    NUM_DOT_RE,
    check_text,
    head_lines,
    norm,
    open_source,
    split,
)
from xcheck.capture.sweep_checks import error_arrays, frequency_problems, magnitude_problems
from xcheck.capture.sweep_types import MAX_LCR_ROWS, FrequencySweep, LcrReadings, SweepError
from xcheck.capture.sweep_units import UnitProblem, frequency_scale, phase_scale, role_of, split_field
from xcheck.errors import TraceError, ValueParseError
from xcheck.values import parse_value

__all__ = ["lcr_impedance", "read_lcr_table"]

_PRIMARY = {
    "capacitance": ({"c", "cs", "cp", "cap", "capacitance"}, "F"),
    "inductance": ({"l", "ls", "lp", "ind", "inductance"}, "H"),
    "impedance magnitude": ({"z", "|z|", "zs", "impedance", "abs(z)", "zmag", "|z|s"}, "ohm"),
}
_SECONDARY = {
    "resistance": {"esr", "rs", "r", "rp", "epr", "resistance"},
    "D": {"d", "df", "tan d", "tand", "tan δ", "tanδ", "tan delta", "dissipation",
          "dissipation factor"},
    "Q": {"q", "quality", "quality factor"},
}
_SERIES_NAMES = {"cs", "ls", "rs", "esr", "zs", "|z|s"}
_PARALLEL_NAMES = {"cp", "lp", "rp", "epr"}


# --------------------------------------------------------------------------- conversion


def lcr_impedance(
    frequency: np.ndarray,
    primary: str,
    primary_values: np.ndarray,
    secondary: str,
    secondary_values: np.ndarray,
    circuit: str = "series",
    reactance: str | None = None,
) -> np.ndarray:
    """Complex impedance of LCR-meter readings (common-practice formulas, no source).

    Parameters
    ----------
    frequency
        Hz, positive.
    primary
        ``"capacitance"`` (F), ``"inductance"`` (H) or ``"impedance magnitude"`` (ohm).
    primary_values
        The primary readings, positive.
    secondary
        ``"resistance"`` (ohm: series R of a series circuit, Rp of a parallel one),
        ``"D"``, ``"Q"`` or ``"phase"`` (rad; with an impedance magnitude only).
    secondary_values
        The secondary readings.
    circuit
        ``"series"`` or ``"parallel"``.
    reactance
        ``"inductive"`` or ``"capacitive"``: the sign of the reactance of an impedance
        magnitude read with a resistance, D or Q.

    Returns
    -------
    numpy.ndarray
        Complex impedance (ohm), one a frequency.

    Raises
    ------
    ValueError
        For an unknown kind or circuit, a missing ``reactance``, or readings outside
        their domain (a resistance above ``|Z|`` in series, below it in parallel).
    """
    omega = 2 * math.pi * np.asarray(frequency, dtype=float)
    x = np.asarray(primary_values, dtype=float)
    s = np.asarray(secondary_values, dtype=float)
    if circuit not in ("series", "parallel"):
        raise ValueError(f"circuit must be 'series' or 'parallel', got {circuit!r}")
    if primary == "impedance magnitude":
        return _from_magnitude(x, secondary, s, circuit, reactance)
    if secondary == "phase":
        raise ValueError("a phase reading goes with an impedance magnitude, not a C or an L")
    if primary == "capacitance":
        # Series: X = -1 / (omega C); parallel: B = omega C.
        reactive = -1 / (omega * x) if circuit == "series" else omega * x
    elif primary == "inductance":
        reactive = omega * x if circuit == "series" else -1 / (omega * x)
    else:
        raise ValueError(f"unknown primary reading {primary!r}")
    size = np.abs(reactive)
    if circuit == "series":
        # D = R / |X| (D = ESR omega C for a series C); Q = 1 / D (Q = omega L / ESR).
        resistance = _real_part(secondary, s, size, parallel=False)
        return resistance + 1j * reactive
    # D = G / |B| (D = 1 / (omega C Rp) for a parallel C); Q = 1 / D.
    conductance = _real_part(secondary, s, size, parallel=True)
    return 1 / (conductance + 1j * reactive)


def _real_part(secondary: str, s: np.ndarray, size: np.ndarray, parallel: bool) -> np.ndarray:
    """R (series) or G (parallel) from the secondary reading and |X| or |B|."""
    if secondary == "resistance":
        return 1 / s if parallel else s
    if secondary == "D":
        return s * size
    if secondary == "Q":
        return size / s
    raise ValueError(f"unknown secondary reading {secondary!r}")


def _from_magnitude(
    magnitude: np.ndarray, secondary: str, s: np.ndarray, circuit: str, reactance: str | None
) -> np.ndarray:
    if secondary == "phase":
        return magnitude * np.exp(1j * s)
    if reactance not in ("inductive", "capacitive"):
        raise ValueError("an impedance magnitude with a resistance, D or Q needs reactance= "
                         "'inductive' or 'capacitive'")
    sign = 1.0 if reactance == "inductive" else -1.0
    if secondary == "D":
        return magnitude * np.exp(1j * sign * np.arctan2(1.0, s))  # tan |phase| = 1 / D
    if secondary == "Q":
        return magnitude * np.exp(1j * sign * np.arctan(s))  # tan |phase| = Q
    if secondary != "resistance":
        raise ValueError(f"unknown secondary reading {secondary!r}")
    if circuit == "series":
        if np.any(s > magnitude):
            raise ValueError("a series resistance cannot exceed |Z|")
        return s + 1j * sign * np.sqrt(magnitude**2 - s**2)
    if np.any(s < magnitude):
        raise ValueError("a parallel resistance cannot be below |Z|")
    conductance = 1 / s
    # Y = G + jB with B = -|B| for an inductive part, +|B| for a capacitive one.
    susceptance = -sign * np.sqrt(np.maximum(1 / magnitude**2 - conductance**2, 0.0))
    return 1 / (conductance + 1j * susceptance)


# --------------------------------------------------------------------------- the table


def read_lcr_table(
    path: str | Path,
    *,
    circuit: str | None = None,
    reactance: str | None = None,
    phase_unit: str | None = None,
    relative_error: object = None,
    phase_error: object = None,
) -> LcrReadings:
    """Read LCR-meter readings and convert them to an impedance sweep.

    Parameters
    ----------
    path
        The table (see the module notes), optionally gzip-compressed.
    circuit
        ``"series"`` or ``"parallel"``: the meter's equivalent circuit. Default: what the
        header's names say (``Cp``, ``Rp``), else series.
    reactance
        ``"inductive"`` or ``"capacitive"``, for ``|Z|`` read with a resistance, D or Q.
    phase_unit
        ``"deg"`` or ``"rad"`` for a phase column whose header gives no unit.
    relative_error
        Standard error of the impedance magnitude relative to it (one number, or one a
        row), for example the meter's basic accuracy taken as a standard error.
    phase_error
        Standard error of the impedance phase in radians (one number, or one a row).

    Returns
    -------
    LcrReadings
        The readings as displayed and their impedance sweep (frequency order).

    Raises
    ------
    SweepError
        Listing every problem: no header, unknown columns or units, unreadable cells
        (line and column named), frequencies not above 0 Hz, repeated or out of order,
        readings outside their domain, more than :data:`MAX_LCR_ROWS` rows.
    """
    try:
        src = open_source(path, 16 * HEAD_BYTES)
        check_text(src)
    except SweepError:
        raise
    except TraceError as exc:
        raise SweepError(exc.source, exc.problems) from None
    name = src.name
    if not src.complete:
        raise SweepError(name, [
            "this is too long for a table of LCR-meter readings; read a swept measurement "
            "with read_sweep_csv or read_touchstone instead"])
    for keyword, given, allowed in (("circuit", circuit, ("series", "parallel")),
                                    ("reactance", reactance, ("inductive", "capacitive"))):
        if given is not None and given not in allowed:
            raise SweepError(name, [
                f"{keyword} must be {allowed[0]!r} or {allowed[1]!r}, got {given!r}"])
    lines = [line for line in head_lines(src)
             if line.text.strip() and not line.text.lstrip().startswith("#")]
    if not lines:
        raise SweepError(name, ["the file has no rows; write a header and one reading per row"])
    header_line, rows = lines[0], lines[1:]
    delimiter = next((d for d in (";", "\t", ",") if d in header_line.text), None)
    header = split(header_line.text, delimiter)
    decimal_comma = delimiter in (";", "\t")
    if len(rows) > MAX_LCR_ROWS:
        raise SweepError(name, [f"{len(rows)} rows, more than the {MAX_LCR_ROWS} an LCR table "
                                "may hold; read a sweep file instead"])
    columns = _columns(name, header_line.number, header)
    problems: list[str] = []
    header_circuit = columns.circuit
    if circuit is not None and header_circuit is not None and circuit != header_circuit:
        problems.append(
            f"line {header_line.number}: the header names a {header_circuit} circuit "
            f"({columns.circuit_word!r}) but circuit={circuit!r} was given; make them agree")
    chosen = circuit or header_circuit or "series"
    if columns.primary == "impedance magnitude":
        if columns.secondary != "phase" and reactance is None:
            problems.append(
                f"an impedance magnitude read with {columns.secondary_word} does not say "
                "whether the part is inductive or capacitive; pass reactance='inductive' or "
                "'capacitive', or log the phase (Z-theta) instead")
    elif reactance is not None:
        problems.append("reactance applies to |Z| readings only; a C or L reading sets it")
    scales = _scales(header_line.number, columns, phase_unit, problems)
    if problems:
        raise SweepError(name, problems)
    values = _cells(rows, header, delimiter, decimal_comma, columns, scales, problems)
    if problems:
        raise SweepError(name, problems)
    if not rows:
        raise SweepError(name, ["the table has a header but no readings; add one row per frequency"])
    line_numbers = np.array([row.number for row in rows], dtype=int)
    frequency, primary, secondary = values[:, 0], values[:, 1], values[:, 2]
    problems, reverse = frequency_problems(frequency, line_numbers, "the frequencies")
    problems += _domain_problems(columns, chosen, primary, secondary, line_numbers)
    if problems:
        raise SweepError(name, problems)
    z = lcr_impedance(frequency, columns.primary, primary, columns.secondary, secondary,
                      chosen, reactance)
    problems = magnitude_problems(z, line_numbers, "the impedance", "ohm")
    if problems:
        raise SweepError(name, problems)
    rel, ph = error_arrays(name, frequency.size, relative_error, phase_error)
    order = slice(None, None, -1) if reverse else slice(None)
    notes = [f"{columns.primary} with {columns.secondary_word} as a {chosen} circuit, converted "
             "to impedance (common practice, no source)"] + columns.notes
    if reverse:
        notes.append("the readings run from high to low frequency; they were read in reverse")
    sweep = FrequencySweep(
        frequency=frequency[order], value=z[order], quantity="impedance", unit="ohm",
        source=name, relative_error=rel[order] if rel is not None else None,
        phase_error=ph[order] if ph is not None else None, notes=tuple(notes),
        label=f"{columns.texts[1]} and {columns.texts[2]}",
    )
    return LcrReadings(sweep=sweep, primary=columns.primary, primary_values=primary[order],
                       secondary=columns.secondary, secondary_values=secondary[order],
                       circuit=chosen)


class _Columns:
    """Which header field is which, and what the header says."""

    def __init__(self) -> None:
        self.index: list[int] = []  # frequency, primary, secondary
        self.texts: list[str] = []
        self.units: list[str | None] = []
        self.primary = ""
        self.secondary = ""
        self.secondary_word = ""
        self.circuit: str | None = None
        self.circuit_word = ""
        self.notes: list[str] = []


def _bare(name: str) -> str:
    return norm(name).replace("_", " ")


def _columns(name: str, line: int, header: list[str]) -> _Columns:
    found = _Columns()
    fields = [split_field(text) for text in header]
    freq = next((i for i, (n, _u) in enumerate(fields) if role_of(n) == "frequency"), None)
    primary = next(((i, kind) for i, (n, _u) in enumerate(fields) for kind, (names, _si)
                    in _PRIMARY.items() if _bare(n) in names), None)
    secondary = [(i, kind) for i, (n, _u) in enumerate(fields) for kind, names
                 in _SECONDARY.items() if _bare(n) in names]
    secondary += [(i, "phase") for i, (n, _u) in enumerate(fields)
                  if role_of(n) == "phase" and _bare(n) not in _SECONDARY["D"]]
    secondary.sort()
    listing = ", ".join(repr(h) for h in header)
    missing = []
    if freq is None:
        missing.append("a frequency column (such as 'freq (Hz)')")
    if primary is None:
        missing.append("a primary reading (C, Cs, Cp, L, Ls, Lp or |Z|, such as 'Cs (nF)')")
    if not secondary:
        missing.append("a secondary reading (ESR, Rs, Rp, D, Q, or theta with |Z|)")
    if missing:
        raise SweepError(name, [
            f"line {line} must be a header naming {'; '.join(missing)}; it reads {listing}: "
            "name the columns in the first row that is not a '#' comment"])
    assert freq is not None and primary is not None
    second, kind = secondary[0]
    if len(secondary) > 1:
        found.notes.append(
            f"the table has several secondary readings; {header[second]!r} was used and "
            + ", ".join(repr(header[i]) for i, _k in secondary[1:]) + " left out")
    found.index = [freq, primary[0], second]
    found.texts = [header[i] for i in found.index]
    found.units = [fields[i][1] for i in found.index]
    found.primary, found.secondary = primary[1], kind
    found.secondary_word = fields[second][0]
    for i in (primary[0], second):
        word = _bare(fields[i][0])
        side = "series" if word in _SERIES_NAMES else "parallel" if word in _PARALLEL_NAMES else None
        if side is not None and found.circuit is not None and side != found.circuit:
            raise SweepError(name, [
                f"line {line}: the header mixes a series and a parallel circuit "
                f"({found.circuit_word!r} and {fields[i][0]!r}); log one equivalent circuit"])
        if side is not None and found.circuit is None:
            found.circuit, found.circuit_word = side, fields[i][0]
    return found


def _scales(
    line: int, columns: _Columns, phase_unit: str | None, problems: list[str]
) -> list[float | None]:
    """SI scale of each column from its header unit (None: the cells carry their own)."""
    scales: list[float | None] = []
    roles = ("frequency", columns.primary, columns.secondary_word)
    si = ("Hz", _PRIMARY[columns.primary][1],
          "ohm" if columns.secondary == "resistance" else None)
    for k, unit_text in enumerate(columns.units):
        where = f"line {line}, the {roles[k]} column {columns.texts[k]!r}"
        if k == 2 and columns.secondary == "phase":
            given = phase_unit if phase_unit is not None else unit_text
            if given is None:
                problems.append(f"{where} does not say degrees or radians; write the unit "
                                "(such as 'theta (deg)') or pass phase_unit='deg' or 'rad'")
                scales.append(1.0)
                continue
            try:
                scales.append(phase_scale(given))
            except UnitProblem as exc:
                problems.append(f"{where}: {exc}")
                scales.append(1.0)
            continue
        if unit_text is None:
            scales.append(None)
            continue
        try:
            if k == 0:
                scales.append(frequency_scale(unit_text))
            elif si[k] is None:  # D or Q
                if unit_text.strip() != "%" or columns.secondary != "D":
                    raise UnitProblem(f"unit {unit_text!r}: {columns.secondary} has no unit "
                                      "(D may be given in '%')")
                scales.append(0.01)
            elif unit_text.strip() == si[k]:
                scales.append(1.0)
            else:
                scales.append(parse_value("1" + unit_text.strip(), unit=si[k]))
        except (UnitProblem, ValueParseError) as exc:
            problems.append(f"{where}: {exc}; correct the unit in the header")
            scales.append(1.0)
    return scales


def _cells(
    rows: list, header: list[str], delimiter: str | None, decimal_comma: bool,
    columns: _Columns, scales: list[float | None], problems: list[str],
) -> np.ndarray:
    """The three wanted cells of every row in SI units (problems appended)."""
    si = ("Hz", _PRIMARY[columns.primary][1], "ohm" if columns.secondary == "resistance" else None)
    values = np.full((len(rows), 3), np.nan)
    for r, line in enumerate(rows):
        fields = split(line.text, delimiter)
        if len(fields) != len(header):
            problems.append(f"line {line.number} has {len(fields)} fields, the header "
                            f"{len(header)}; write one reading per row")
            continue
        for k, index in enumerate(columns.index):
            text = fields[index].replace(",", ".") if decimal_comma else fields[index]
            value = _cell(text, scales[k], si[k])
            if isinstance(value, str):
                problems.append(f"line {line.number}, column {columns.texts[k]!r}: {value}")
            else:
                values[r, k] = value
    return values


def _cell(text: str, scale: float | None, si: str | None) -> float | str:
    """The SI value of one cell, or why it cannot be read."""
    if not text or re.fullmatch(r"(?i)[+-]?(nan|inf|infinity)", text):
        return f"{text!r} is not a finite number; give a reading or delete the row"
    if si is None and not NUM_DOT_RE.match(text):
        return f"{text!r} is not a number; write the reading as a plain number (such as 0.05)"
    if scale is not None or si is None:
        if not NUM_DOT_RE.match(text):
            return (f"{text!r} is not a plain number; the header gives the unit, so write the "
                    "number alone (or drop the unit from the header and write e.g. '4.7n')")
        value = float(text) * (1.0 if scale is None else scale)
    else:
        try:
            value = parse_value(text, unit=si)
        except ValueParseError as exc:
            return f"{exc}"
    return value if math.isfinite(value) else f"{text!r} is not a finite number"


def _domain_problems(
    columns: _Columns, circuit: str, primary: np.ndarray, secondary: np.ndarray,
    lines: np.ndarray,
) -> list[str]:
    """Readings outside what the conversion (and a passive part) allows."""
    problems = []
    what = columns.primary
    for k in np.flatnonzero(~(primary > 0))[:5]:
        hint = ("; a negative C means the part is inductive at that frequency (and a negative L "
                "capacitive): log |Z| and theta there instead") if what != "impedance magnitude" else ""
        problems.append(f"line {lines[k]}: the {what} reads {primary[k]:.6g}, which must be "
                        f"positive{hint}")
    word = columns.secondary_word
    kind = columns.secondary
    if kind == "resistance" and circuit == "series":
        bad, rule = ~(secondary >= 0), "zero or positive"
    elif kind == "resistance" or kind == "Q":
        bad, rule = ~(secondary > 0), "positive"
    elif kind == "D":
        bad, rule = ~(secondary >= 0), "zero or positive"
    else:
        bad, rule = ~(np.abs(secondary) <= math.pi / 2), "within ±90 degrees (a passive part)"
    advice = ("check the column's unit (deg or rad); beyond ±90 degrees the part would have "
              "a negative resistance" if kind == "phase" else "a negative loss usually means "
              "the meter's open and short corrections are off: redo them and measure again")
    for k in np.flatnonzero(bad)[:5]:
        problems.append(
            f"line {lines[k]}: {word} reads {secondary[k]:.6g}, which must be {rule}; {advice}")
    if what == "impedance magnitude" and kind == "resistance":
        wrong = secondary > primary if circuit == "series" else secondary < primary
        for k in np.flatnonzero(wrong & ~bad)[:5]:
            relation = "above" if circuit == "series" else "below"
            problems.append(
                f"line {lines[k]}: {word} = {secondary[k]:.6g} ohm is {relation} |Z| = "
                f"{primary[k]:.6g} ohm, which a {circuit} circuit cannot give; check the "
                "columns and the circuit")
    return problems
