"""Reading a Touchstone ``.s1p`` / ``.s2p`` file as an impedance sweep (:func:`read_touchstone`).

Touchstone is an open standard for network parameters; the file is parsed by
scikit-rf (``skrf``, an optional dependency: ``pip install 'xcheck[touchstone]'``),
imported only when a file is read. Before that, the data lines are checked here so a
problem names its line: numbers that cannot be read, NaN or infinite values, a point
with too few or too many numbers, frequencies not above 0 Hz, repeated or out of
order, fewer than :data:`~xcheck.capture.sweep_types.MIN_SWEEP_POINTS` points.

The network parameters become an impedance with the file's reference impedance Z0
(real, positive and the same on every port and frequency):

- a one-port is a reflection: ``Z = Z0 (1 + S11) / (1 - S11)``;
- a two-port is a part measured through, connected as the caller states
  (``connection``): ``"shunt"`` (the part from the through line to ground),
  ``Z = Z0 S21 / (2 (1 - S21))``; ``"series"`` (the part in the line between the
  ports), ``Z = 2 Z0 (1 - S21) / S21``. Both follow from a source and a load of Z0 on
  either side of the part (derived in ``tests/capture/test_touchstone.py``).
"""

from __future__ import annotations

import io
import re
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from xcheck.capture.sweep_checks import error_arrays, frequency_problems, listed, magnitude_problems
from xcheck.capture.sweep_types import MIN_SWEEP_POINTS, SWEEP_MAX_BYTES, FrequencySweep, SweepError
from xcheck.capture.types import MAX_EXAMPLES
from xcheck.input_file import InputFileProblem, open_regular
from xcheck.quoting import excerpt

__all__ = ["CONNECTIONS", "read_touchstone"]

#: How a two-port's part sits between the ports, and the conversion from S21.
CONNECTIONS = {
    "shunt": "Z = Z0 S21 / (2 (1 - S21))",
    "series": "Z = 2 Z0 (1 - S21) / S21",
}
_FREQ_UNITS = {"hz": 1.0, "khz": 1e3, "mhz": 1e6, "ghz": 1e9}  # the standard's units
_NUMBER_RE = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eEdD][+-]?\d+)?\Z")
_NONFINITE_RE = re.compile(r"[+-]?(?:nan|inf|infinity)\Z", re.IGNORECASE)
_INSTALL = "pip install 'xcheck[touchstone]' (or pip install scikit-rf)"


def read_touchstone(
    path: str | Path,
    *,
    connection: str | None = None,
    relative_error: object = None,
    phase_error: object = None,
) -> FrequencySweep:
    """Read a one- or two-port Touchstone file as an impedance sweep.

    Parameters
    ----------
    path
        A ``.s1p`` or ``.s2p`` file (Touchstone 1.0), or a Touchstone 2.0 file of one or
        two ports.
    connection
        For a two-port only: ``"shunt"`` or ``"series"`` (see the module notes).
    relative_error
        Standard error of the magnitude relative to it (one number, or one a point).
    phase_error
        Standard error of the phase in radians (one number, or one a point).

    Returns
    -------
    FrequencySweep
        Quantity ``"impedance"`` (ohms); its notes give the conversion used.

    Raises
    ------
    SweepError
        Listing every problem found, or when scikit-rf is not installed.
    """
    name = str(path)
    text = _read_text(path, name)
    ports = _ports(name, text)
    if connection is not None and connection not in CONNECTIONS:
        raise SweepError(name, [
            f"connection must be 'shunt' or 'series', got {excerpt(repr(connection))}"])
    if ports == 1 and connection is not None:
        raise SweepError(name, [
            "connection applies to a two-port file; a one-port is read as a reflection, so "
            "leave connection out"])
    if ports == 2 and connection is None:
        raise SweepError(name, [
            "this is a two-port file: say how the part sat between the ports with "
            "connection='shunt' (from the line to ground) or connection='series' (in the "
            "line between the ports); from the command line, write it in the fixture's "
            '[swept] table, e.g. connection = "shunt"'])
    scan = _scan(name, text, ports)
    problems, reverse = frequency_problems(scan.frequency, scan.lines, "the frequencies")
    if problems:
        raise SweepError(name, problems)
    ts, notes = _parse(name, text, path)
    if ts.f.size != scan.frequency.size:
        raise SweepError(name, [
            f"scikit-rf read {ts.f.size} frequencies but the file's data lines hold "
            f"{scan.frequency.size}; check the file against the Touchstone standard"])
    z0 = _reference(name, np.asarray(ts.z0))
    s = np.asarray(ts.s)
    if ports == 1:
        reflection = s[:, 0, 0]
        bad = np.flatnonzero(reflection == 1)
        with np.errstate(divide="ignore", invalid="ignore"):
            value = z0 * (1 + reflection) / (1 - reflection)
        conversion = "Z = Z0 (1 + S11) / (1 - S11)"
        label = "S11"
        what = "S11 = 1 (an open circuit: infinite impedance)"
    else:
        s21 = s[:, 1, 0]
        with np.errstate(divide="ignore", invalid="ignore"):
            if connection == "shunt":
                bad = np.flatnonzero(s21 == 1)
                value = z0 * s21 / (2 * (1 - s21))
                what = "S21 = 1 (no part across the line: infinite impedance)"
            else:
                bad = np.flatnonzero(s21 == 0)
                value = 2 * z0 * (1 - s21) / s21
                what = "S21 = 0 (nothing passes: infinite impedance)"
        conversion = CONNECTIONS[str(connection)]
        label = f"S21 ({connection} through)"
    problems = []
    if bad.size:
        shown = [f"line {scan.lines[k]}" for k in bad[:MAX_EXAMPLES]]
        problems.append(
            f"{what} on {listed(shown, bad.size)}; measure a part with a finite impedance "
            "or leave those points out"
        )
    else:
        problems += magnitude_problems(value, scan.lines, "the impedance", "ohm")
    if problems:
        raise SweepError(name, problems)
    frequency = np.asarray(ts.f, dtype=float)
    notes = [f"{label} converted to impedance: {conversion}, with the file's reference "
             f"impedance Z0 = {z0:.6g} ohm (common practice, no source)"] + notes
    rel, ph = error_arrays(name, frequency.size, relative_error, phase_error)
    if reverse:
        frequency, value = frequency[::-1], value[::-1]
        rel = rel[::-1] if rel is not None else None
        ph = ph[::-1] if ph is not None else None
        notes.append("the frequencies fall from point to point; they were read in reverse order")
    return FrequencySweep(
        frequency=frequency, value=value, quantity="impedance", unit="ohm", source=name,
        relative_error=rel, phase_error=ph, notes=tuple(notes), label=label,
        metadata={"parameter": str(ts.parameter).upper(), "format": str(ts.format).upper(),
                  "reference impedance": f"{z0:.9g} ohm", "version": str(ts.version)},
    )


# --------------------------------------------------------------------------- the text


def _read_text(path: str | Path, name: str) -> str:
    """The file's text, read through :func:`open_regular` (bounded)."""
    try:
        with open_regular(path, SWEEP_MAX_BYTES, "a Touchstone file") as handle:
            data = handle.read(SWEEP_MAX_BYTES + 1)
    except InputFileProblem as exc:
        raise SweepError(name, [f"the file {exc}"]) from None
    except FileNotFoundError:
        raise SweepError(name, ["file not found; check the path and the working directory"]) from None
    except PermissionError:
        raise SweepError(name, ["permission denied; make the file readable"]) from None
    except OSError as exc:
        raise SweepError(name, [f"cannot read the file ({exc.strerror or exc})"]) from None
    if b"\x00" in data[:8192]:
        raise SweepError(name, [
            "this looks like a binary file (a zero byte near its start), not Touchstone text; "
            "save the measurement from the analyser as a Touchstone (.s1p, .s2p) file"])
    if not data.strip():
        raise SweepError(name, ["the file is empty; save the measurement again"])
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError:
        return data.decode("latin-1")


def _ports(name: str, text: str) -> int:
    """Number of ports, from the extension (``.sNp``) or a 2.0 ``[Number of Ports]`` line."""
    match = re.search(r"^\s*\[number of ports\]\s*(\d+)", text, re.IGNORECASE | re.MULTILINE)
    if match is not None:
        ports = int(match.group(1))
    else:
        suffix = re.fullmatch(r"\.[syzgh](\d+)p", Path(name).suffix.lower())
        if suffix is None:
            raise SweepError(name, [
                f"cannot tell the number of ports: the name ends in {excerpt(Path(name).suffix or 'nothing')!s} "
                "rather than .s1p or .s2p, and there is no '[Number of Ports]' line; rename "
                "the file to .s1p (one port) or .s2p (two ports)"])
        ports = int(suffix.group(1))
    if ports not in (1, 2):
        raise SweepError(name, [
            f"the file has {ports} ports; xcheck reads one-port (.s1p) and two-port (.s2p) "
            "files: save the measurement with one or two ports"])
    return ports


@dataclass
class _Scan:
    frequency: np.ndarray  # Hz, file order
    lines: np.ndarray  # the line each point starts on


def _scan(name: str, text: str, ports: int) -> _Scan:
    """Check the data lines (numbers, counts, frequencies), with their line numbers."""
    unit = 1e9  # the standard's default, GHz
    per_point = 1 + 2 * ports * ports
    in_data = not re.search(r"^\s*\[network data\]", text, re.IGNORECASE | re.MULTILINE)
    points: list[tuple[int, list[float]]] = []
    unreadable: list[str] = []
    nonfinite: list[str] = []
    miscounted: list[str] = []
    for number, raw in enumerate(text.splitlines(), 1):
        line = raw.split("!", 1)[0].strip()
        if not line:
            continue
        if line.startswith("#"):
            for token in line[1:].lower().split():
                unit = _FREQ_UNITS.get(token, unit)
            continue
        if line.startswith("["):
            keyword = line.lower()
            if keyword.startswith("[network data]"):
                in_data = True
            elif keyword.startswith(("[noise data]", "[end]")):
                in_data = False
            elif keyword.startswith("[matrix format]") and ports == 2 and "full" not in keyword:
                per_point = 1 + 2 * 3  # the lower or upper triangle of a 2 x 2 matrix
            continue
        if not in_data:
            continue
        tokens = line.split()
        if ports == 2 and len(tokens) == 5 and points:
            first = _number(tokens[0])
            if first is not None and first <= points[-1][1][0]:
                break  # version 1.0 noise parameters follow the network data
        values = []
        for token in tokens:
            value = _number(token)
            if value is None:
                if _NONFINITE_RE.match(token):
                    nonfinite.append(f"line {number}")
                else:
                    unreadable.append(f"line {number} reads {excerpt(token, 30)!r}")
                value = float("nan")
            values.append(value)
        if len(values) != per_point:
            miscounted.append(f"line {number} has {len(values)}")
        else:
            points.append((number, values))
    problems = []
    if unreadable:
        problems.append(f"cannot read a number: {listed(unreadable[:MAX_EXAMPLES], len(unreadable))}; "
                        "write plain numbers (such as 1.5e-3) or save the file again")
    if nonfinite:
        nonfinite = list(dict.fromkeys(nonfinite))  # one mention a line
        problems.append(f"NaN or infinite values on {listed(nonfinite[:MAX_EXAMPLES], len(nonfinite))}; "
                        "measure those points again or delete their lines")
    if miscounted:
        problems.append(
            f"a {ports}-port data line holds {per_point} numbers (the frequency and "
            f"{per_point - 1} parts of the parameters): {listed(miscounted[:MAX_EXAMPLES], len(miscounted))}; "
            "complete or delete those lines, and check the file's extension (.s1p or .s2p)")
    if problems:
        raise SweepError(name, problems)
    if len(points) < MIN_SWEEP_POINTS:
        raise SweepError(name, [
            f"only {len(points)} frequency points; a sweep needs at least {MIN_SWEEP_POINTS} "
            "(sweep more frequencies)"])
    with np.errstate(over="ignore"):
        frequency = np.array([p[1][0] for p in points]) * unit
    return _Scan(frequency, np.array([p[0] for p in points], dtype=int))


def _number(token: str) -> float | None:
    if not _NUMBER_RE.match(token):
        return None
    return float(token.replace("d", "e").replace("D", "e"))


def _parse(name: str, text: str, path: str | Path) -> tuple[object, list[str]]:
    """The file parsed by scikit-rf's Touchstone reader, and its warnings as notes."""
    try:
        from skrf.io.touchstone import Touchstone
    except ImportError:
        raise SweepError(name, [
            f"reading a Touchstone file needs scikit-rf, which is not installed; install it "
            f"with {_INSTALL}"]) from None
    handle = io.StringIO(text)
    handle.name = Path(path).name  # scikit-rf takes the number of ports from the name
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            ts = Touchstone(handle)
        except Exception as exc:  # a third-party parser: any failure is the file's
            raise SweepError(name, [
                f"scikit-rf cannot read it as Touchstone ({excerpt(str(exc).strip(), 200)}); "
                "check the option line (such as '# MHz S RI R 50') and the data against the "
                "Touchstone standard"]) from None
    notes = [f"scikit-rf: {excerpt(str(w.message), 200)}" for w in caught]
    return ts, notes


def _reference(name: str, z0: np.ndarray) -> float:
    """The one real, positive reference impedance of the file (ohm)."""
    flat = z0.reshape(-1)
    first = complex(flat[0])
    if not np.all(flat == first) or first.imag != 0 or not first.real > 0:
        shown = ", ".join(f"{complex(v):.6g}" for v in np.unique(flat)[:MAX_EXAMPLES])
        raise SweepError(name, [
            f"the reference impedance must be one real, positive value for every port and "
            f"frequency (the conversion to impedance assumes it); the file gives {shown} "
            "ohm: renormalise the data to one reference (such as 50 ohm) before saving"])
    return first.real
