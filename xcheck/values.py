"""Values at the edge: SPICE-style numbers in, engineering notation out.

Inside xcheck every quantity is a plain SI float. Text such as ``4.7n``, ``10k`` or
``2.2meg`` is read once, here, and engineering notation is produced here for reports.

The suffix rules are those of SPICE (ngspice manual, "Basic conventions": T, G, Meg,
K, mil, m, u, n, p, f, case-insensitive), with one deliberate exception: a bare
upper-case ``M`` is rejected. In SPICE ``m`` and ``M`` both mean milli (1e-3) and mega
is ``meg``, but engineers routinely write ``1M`` meaning one megohm; silently reading
it as one milliohm would be a 1e9 error, so xcheck asks which was meant.

After the scale suffix a unit may follow (``uF``, ``mH``, ``ohm``, ``Ω``, ``V``, ``A``,
``s``, ``Hz``); it is checked against the unit the caller expects, if any. As in SPICE,
a lone ``f`` or ``F`` right after the number is femto: ``1F`` is 1e-15. For a
capacitance that reading is a second trap (``1.12e-9F`` meant as farads would become
1.12e-24 F), so there a lone ``f``/``F`` is rejected like ``M`` and the message asks
for ``1.12n``, ``1.12e-9`` or ``1.12fF``.
"""

from __future__ import annotations

import math
import re

from xcheck.errors import ValueParseError
from xcheck.quoting import excerpt, quoted

#: Scale suffixes as listed in the ngspice manual's table of scale factors, plus the
#: micro sign. Keys are lower case; matching is case-insensitive.
SCALE_SUFFIXES: dict[str, float] = {
    "t": 1e12,
    "g": 1e9,
    "meg": 1e6,
    "k": 1e3,
    "mil": 25.4e-6,
    "m": 1e-3,
    "u": 1e-6,
    "µ": 1e-6,  # micro sign U+00B5
    "μ": 1e-6,  # Greek small mu U+03BC
    "n": 1e-9,
    "p": 1e-12,
    "f": 1e-15,
}

#: Unit spellings accepted after the suffix, mapped to a canonical unit name.
UNIT_ALIASES: dict[str, str] = {
    "f": "F",
    "h": "H",
    "ohm": "ohm",
    "ohms": "ohm",
    "Ω": "ohm",
    "ω": "ohm",
    "v": "V",
    "a": "A",
    "s": "s",
    "hz": "Hz",
}

# ASCII digits only: ``\d`` would also accept other scripts' digits, which float() reads.
_NUMBER = r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"
_SUFFIX = r"meg|mil|[tgkmuµμnpf]"
_UNIT = r"ohms|ohm|hz|[fhvas]|Ω|ω"
_VALUE_RE = re.compile(
    rf"(?P<number>{_NUMBER})(?P<suffix>{_SUFFIX})?(?P<unit>{_UNIT})?", re.IGNORECASE
)
_PERCENT_RE = re.compile(rf"(?:±\s*)?(?P<number>{_NUMBER})\s*%")

_F_TRAP_HELP = (
    "a lone 'F' after a capacitance is ambiguous: in SPICE it is the femto suffix (1e-15), "
    "not farads; write the farads without a unit (e.g. '1.12e-9'), with a scale suffix "
    "('1.12n'), or femtofarads in full ('1.12fF')"
)
_M_TRAP_HELP = (
    "an upper-case 'M' suffix is ambiguous: in SPICE 'm' and 'M' mean milli (1e-3) "
    "and mega is 'meg'; write e.g. '1meg' for 1e6 or '1m' for 1e-3"
)


def parse_value(text: str | int | float, *, unit: str | None = None) -> float:
    """Read one SPICE-style value into an SI float.

    Parameters
    ----------
    text
        The value as written: a number (``47e-6``, ``0.22``), optionally followed by
        a scale suffix (``47u``, ``10meg``) and a unit (``47uF``, ``412mohm``). TOML
        numbers (int or float) are accepted as they are.
    unit
        Canonical unit the caller expects (``"F"``, ``"H"``, ``"ohm"``, ``"V"``,
        ``"A"``, ``"s"``, ``"Hz"``). When the text carries a different unit the value
        is rejected; when ``None`` any unit is accepted.

    Returns
    -------
    float
        The value in SI base units.

    Raises
    ------
    ValueParseError
        When the text is not a number, uses an unknown suffix, an upper-case ``M``
        suffix, the wrong unit, or is not finite.
    """
    if isinstance(text, bool):
        raise ValueParseError(f"expected a number such as '4.7u', got the boolean {_q(text)}")
    if isinstance(text, (int, float)):
        try:
            value = float(text)
        except OverflowError:  # an integer beyond the float range
            value = math.inf
        if not math.isfinite(value):
            raise ValueParseError(f"expected a finite number, got {_q(text)}")
        return value
    if not isinstance(text, str):
        raise ValueParseError(
            f"expected a number or a string such as '4.7u', got {type(text).__name__}"
        )
    stripped = text.strip().replace(" ", "")
    match = _VALUE_RE.fullmatch(stripped)
    if match is None:
        raise ValueParseError(
            f"cannot read {_q(text)} as a value; expected a number with an optional "
            "SPICE suffix (f p n u m k meg g t) and unit, e.g. '47u', '2.2meg', '10mH'"
        )
    suffix = match.group("suffix")
    if suffix == "M":
        raise ValueParseError(f"{_q(text)}: {_M_TRAP_HELP}")
    found_unit = match.group("unit")
    if unit == "F" and suffix and suffix.lower() == "f" and not found_unit:
        raise ValueParseError(f"{_q(text)}: {_F_TRAP_HELP}")
    value = _scaled(match.group("number"), suffix.lower() if suffix else "")
    if not math.isfinite(value):
        raise ValueParseError(
            f"{_q(text)} is not a finite number (it is beyond about 1.8e308, the largest "
            "a double-precision float holds)")
    if found_unit and unit is not None:
        canonical = UNIT_ALIASES.get(found_unit.lower(), UNIT_ALIASES.get(found_unit))
        if canonical != unit:
            raise ValueParseError(
                f"{_q(text)} is in {canonical}, but this value is in {unit}"
            )
    return value


def _q(text: object) -> str:
    """``text`` quoted for a message, cut to a short excerpt when long."""
    return quoted(text) if isinstance(text, str) else excerpt(repr(text))


def _scaled(number: str, suffix: str) -> float:
    """Apply a scale suffix; powers of ten go through the exponent so that ``4.7n``
    is the correctly rounded 4.7e-09 rather than 4.7 * 1e-9."""
    scale = SCALE_SUFFIXES.get(suffix, 1.0)
    exponent = round(math.log10(scale))
    if suffix and 10.0**exponent == scale:
        mantissa, _, given = number.lower().partition("e")
        if len(given.lstrip("+-").lstrip("0")) > 6:  # far outside any float's range; keep
            # int() away from a digit string it would refuse (over 4300 digits)
            power = -(10**6) if given.startswith("-") else 10**6
        else:
            power = int(given or 0)
        return float(f"{mantissa}e{power + exponent}")
    return float(number) * scale


def parse_tolerance(text: str | int | float) -> float:
    """Read a tolerance such as ``"20%"`` (or a bare fraction ``0.2``) as a fraction.

    Parameters
    ----------
    text
        ``"5%"``, ``"0.5 %"``, ``"±10%"``, or a plain number already a fraction
        (``0.05``); a bare number of 1 or more is rejected as ambiguous (``20``
        would be 2000 %).

    Returns
    -------
    float
        The tolerance as a non-negative fraction of the value (0.2 for 20 %).

    Raises
    ------
    ValueParseError
        When the text is not a percentage or fraction, is negative, or is a bare
        number of 1 or more.
    """
    if isinstance(text, str):
        match = _PERCENT_RE.fullmatch(text.strip())
        if match is None:
            raise ValueParseError(
                f"cannot read {_q(text)} as a tolerance; write a percentage such as '5%'"
            )
        fraction = float(match.group("number")) / 100.0
    else:
        fraction = parse_value(text)
        if fraction >= 1:
            raise ValueParseError(
                f"a bare tolerance {_q(text)} is read as a fraction ({fraction * 100:g} %); "
                f"write a percentage such as '{text:g}%' if that is what was meant"
            )
    if fraction < 0 or not math.isfinite(fraction):
        raise ValueParseError(f"a tolerance must be zero or positive, got {_q(text)}")
    return fraction


_PREFIXES: tuple[tuple[int, str], ...] = (
    (12, "T"), (9, "G"), (6, "M"), (3, "k"), (0, ""),
    (-3, "m"), (-6, "µ"), (-9, "n"), (-12, "p"), (-15, "f"),
)
_UNIT_SYMBOLS = {"ohm": "Ω"}


def format_eng(value: float, unit: str = "", digits: int = 3) -> str:
    """Format an SI value in engineering notation for reports.

    Parameters
    ----------
    value
        The value in SI base units.
    unit
        Unit symbol to append (``"F"``, ``"H"``, ``"ohm"`` is shown as ``Ω``).
    digits
        Significant digits.

    Returns
    -------
    str
        For example ``format_eng(47.3e-6, "F") == "47.3 µF"`` and
        ``format_eng(0.412, "ohm") == "412 mΩ"``. In reports ``M`` means mega.
    """
    symbol = _UNIT_SYMBOLS.get(unit, unit)
    if not math.isfinite(value):
        return f"{value} {symbol}".strip()
    if value == 0:
        return f"0 {symbol}".strip()
    # Round first so that 999.96 becomes 1.00k rather than 1000.
    rounded = float(f"{value:.{digits - 1}e}")
    if not math.isfinite(rounded):  # 1.5e308 to one digit rounds past the largest double
        rounded = value
    exponent = math.floor(math.log10(abs(rounded)))
    eng = max(min(3 * math.floor(exponent / 3), 12), -15)
    prefix = dict(_PREFIXES)[eng]
    mantissa = rounded / 10.0**eng
    decimals = max(digits - 1 - (exponent - eng), 0)
    return f"{mantissa:.{decimals}f} {prefix}{symbol}".strip()
