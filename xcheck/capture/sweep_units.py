"""Units and column names of frequency-sweep files, read from a header.

Used by :mod:`xcheck.capture.sweep_csv` and :mod:`xcheck.capture.lcr_table`. A header
field is a name and an optional unit (``freq (Hz)``, ``|Z| [kohm]``, ``mag / dB``,
``phase_deg``), split by :func:`split_field`; the unit is then read for the column's
role:

- frequency: ``Hz``, ``kHz``, ``MHz``, ``GHz``, ``mHz`` (SI spelling: an upper-case
  ``M`` before ``Hz`` is mega, as every analyser writes it, and ``mHz`` is millihertz;
  ``mhz`` in lower case is refused as ambiguous), and ``rad/s``;
- a magnitude or a real or imaginary part: ``dB`` (20 log10 of a field quantity), ``dBohm``
  (dB relative to 1 ohm), an ohm unit (``mohm``, ``ohm``, ``kohm``, ``megohm``, with ``Ω``
  for ``ohm``; ``Mohm`` is refused like the SPICE ``M`` trap), or a transfer unit
  (``V/V``, ``A/A``, ``A/V``, ``V/A``, ``1``), or ``linear`` (no unit, not dB);
- a phase: ``deg``, ``degree(s)``, ``°``, ``rad``, ``radian(s)``.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from xcheck.capture.csvlayout import UnitProblem, clean, norm

__all__ = [
    "UnitProblem",
    "ValueUnit",
    "frequency_scale",
    "phase_scale",
    "quantity_from_name",
    "role_of",
    "split_field",
    "value_unit",
]

_FREQUENCY = {"hz": 1.0, "khz": 1e3, "ghz": 1e9, "thz": 1e12, "rad/s": 1 / (2 * math.pi)}
_OHM_WORDS = ("ohms", "ohm", "Ω", "ω")
_OHM_PREFIXES = {"": 1.0, "u": 1e-6, "µ": 1e-6, "μ": 1e-6, "m": 1e-3, "k": 1e3, "K": 1e3,
                 "meg": 1e6, "Meg": 1e6, "MEG": 1e6, "G": 1e9, "g": 1e9}
_TRANSFER = {"v/v": "V/V", "a/a": "A/A", "a/v": "A/V", "v/a": "V/A", "1": "1"}
_PHASE = {"deg": math.pi / 180, "degree": math.pi / 180, "degrees": math.pi / 180,
          "°": math.pi / 180, "rad": 1.0, "radian": 1.0, "radians": 1.0}

FREQUENCY_HELP = "Hz, kHz, MHz, GHz (or rad/s)"
VALUE_HELP = "dB, dBohm, mohm, ohm, kohm, megohm, V/V, A/A, A/V, V/A, 1 or linear"
PHASE_HELP = "deg or rad"


def frequency_scale(text: str) -> float:
    """Hz per unit of a frequency unit (``"kHz" -> 1e3``).

    Raises
    ------
    UnitProblem
        For an unknown unit, or ``mhz`` written in lower case (milli or mega?).
    """
    raw = text.strip()
    if raw == "mHz":
        return 1e-3
    if raw in ("MHz", "MHZ", "Mhz"):
        return 1e6
    if raw.lower() == "mhz":
        raise UnitProblem(
            f"frequency unit {raw!r} is ambiguous (millihertz or megahertz?); write 'MHz' "
            "for megahertz or 'mHz' for millihertz"
        )
    scale = _FREQUENCY.get(raw.lower().replace(" ", ""))
    if scale is None:
        raise UnitProblem(f"unknown frequency unit {raw!r}; known units are {FREQUENCY_HELP}")
    return scale


def phase_scale(text: str) -> float:
    """Radians per unit of a phase unit (``"deg" -> pi / 180``).

    Raises
    ------
    UnitProblem
        For an unknown unit.
    """
    scale = _PHASE.get(text.strip().lower())
    if scale is None:
        raise UnitProblem(f"unknown phase unit {text.strip()!r}; known units are {PHASE_HELP}")
    return scale


@dataclass(frozen=True)
class ValueUnit:
    """What a magnitude or real / imaginary column's unit says.

    ``decibel`` is True for dB (then ``scale`` is None); ``quantity`` and ``unit`` are
    None when the unit does not tell (``dB``, ``linear``).
    """

    decibel: bool
    scale: float | None
    quantity: str | None
    unit: str | None


def value_unit(text: str) -> ValueUnit:
    """Read the unit of a magnitude, real-part or imaginary-part column.

    Raises
    ------
    UnitProblem
        For an unknown unit or an upper-case ``M`` before ``ohm``.
    """
    raw = text.strip()
    compact = raw.replace(" ", "")
    lowered = compact.lower()
    if lowered == "db":
        return ValueUnit(True, None, None, None)
    if lowered.startswith("db") and compact[2:].strip("()[]").lower() in _OHM_WORDS:
        return ValueUnit(True, None, "impedance", "ohm")
    if lowered in ("linear", "lin", "ratio", "abs"):
        return ValueUnit(False, 1.0, None, None)
    if lowered in _TRANSFER:
        return ValueUnit(False, 1.0, "transfer", _TRANSFER[lowered])
    for word in _OHM_WORDS:
        if lowered.endswith(word.lower()):
            prefix = compact[: len(compact) - len(word)]
            if prefix == "M":
                raise UnitProblem(
                    f"unit {raw!r} is ambiguous: an upper-case 'M' reads as milli in SPICE and "
                    "mega elsewhere; write 'megohm' for mega or 'mohm' for milli"
                )
            if prefix in _OHM_PREFIXES:
                return ValueUnit(False, _OHM_PREFIXES[prefix], "impedance", "ohm")
    raise UnitProblem(f"unknown unit {raw!r}; known units are {VALUE_HELP}")


_BRACKET_RE = re.compile(r"^(?P<name>.*?)\s*[\(\[](?P<unit>[^\)\]]*)[\)\]]\s*$")
_SLASH_RE = re.compile(r"^(?P<name>[^/]+?)\s*/\s*(?P<unit>\S+)$")
_SUFFIX_RE = re.compile(r"^(?P<name>.+?)_(?P<unit>[^_\s]+)$")


def _known_unit(text: str) -> bool:
    for reader in (frequency_scale, phase_scale, value_unit):
        try:
            reader(text)
            return True
        except UnitProblem:
            continue
    return False


def split_field(text: str) -> tuple[str, str | None]:
    """``'freq (Hz)' -> ('freq', 'Hz')``, ``'mag / dB'``, ``'phase_deg'``, ``'Re' -> ('Re', None)``.

    A trailing ``(...)`` is a unit only when it is not part of a name such as
    ``Re(Z)``: ``Re(Z) (ohm)`` splits into ``Re(Z)`` and ``ohm``, ``Re(Z)`` stays whole.
    """
    text = clean(text)
    match = _BRACKET_RE.match(text)
    if match and match.group("name"):
        unit_text = match.group("unit").strip()
        spaced = text[match.end("name")].isspace()
        if not unit_text or spaced or _known_unit(unit_text):
            return match.group("name").strip(), unit_text or None
    for pattern in (_SLASH_RE, _SUFFIX_RE):
        match = pattern.match(text)
        if match and _known_unit(match.group("unit")):
            return match.group("name").strip(), match.group("unit")
    return text, None


_FREQ_NAMES = {"f", "freq", "freq.", "frequency", "frequenz", "fréquence", "frequencies"}
_PHASE_NAMES = {"phase", "phi", "φ", "arg", "angle", "theta", "θ", "ph", "ang"}
_MAG_NAMES = {"mag", "magnitude", "abs", "amplitude", "gain", "impedance", "z", "h",
              "zmag", "hmag", "modulus"}
_REAL_NAMES = {"re", "real", "r", "z'", "zre", "zreal", "real part"}
_IMAG_NAMES = {"im", "imag", "imaginary", "x", "z''", "z\"", "zim", "zimag", "imaginary part"}


def role_of(name: str) -> str | None:
    """``"frequency"``, ``"magnitude"``, ``"phase"``, ``"real"``, ``"imag"`` or None, by name."""
    key = norm(name)
    bare = re.sub(r"\s*[\(\[].*[\)\]]$", "", key).strip()  # 're(z)' -> 're'
    if key in _FREQ_NAMES or bare in _FREQ_NAMES or key.startswith("freq"):
        return "frequency"
    if bare in _PHASE_NAMES or "phase" in key or key.startswith("∠"):
        return "phase"
    if bare in _REAL_NAMES or key.startswith("real") or key.endswith("real"):
        return "real"
    if bare in _IMAG_NAMES or "imag" in key:
        return "imag"
    if bare in _MAG_NAMES or re.fullmatch(r"\|.+\|", key) or "mag" in key or key.startswith("abs"):
        return "magnitude"
    return None


def quantity_from_name(name: str) -> str | None:
    """``"impedance"`` or ``"transfer"`` when the column's name says so, else None."""
    key = norm(name)
    if re.search(r"(?<![a-z])z(?![a-z])|impedance|zmag|zre|zim|zreal|zimag", key):
        return "impedance"
    if re.search(r"(?<![a-z])h(?![a-z])|gain|transfer|hmag|s21", key):
        return "transfer"
    return None
