"""The fixture schema as a data table: one row per part kind.

The parser, the circuit builder and the error messages all read the same rows, so an
error can print the expected form of a part from the row the parser used.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Mapping


@dataclass(frozen=True)
class PartKind:
    """What one kind of part looks like in a fixture file.

    Attributes
    ----------
    kind
        Name used in the fixture (``kind = "capacitor"``).
    unit
        Canonical unit of the part's own value (``"F"``, ``"H"``, ``"ohm"``), or
        ``None`` for parts without a value of their own (switch, wire).
    needs_nominal
        Whether ``nominal`` is required.
    parasitics
        Optional parasitic keys and their units.
    initial_unit
        Unit of ``initial`` (volts for capacitors, amperes for inductors), or
        ``None`` when the kind stores no energy.
    example
        A one-line TOML example printed in error messages.
    """

    kind: str
    unit: str | None
    needs_nominal: bool
    parasitics: Mapping[str, str]
    initial_unit: str | None
    example: str
    description: str = ""
    extra_keys: tuple[str, ...] = field(default=())

    def allowed_keys(self) -> tuple[str, ...]:
        """All keys a part of this kind may carry, in documentation order."""
        keys = ["kind"]
        if self.unit is not None:
            keys += ["nominal", "measured", "tolerance"]
        keys += list(self.parasitics)
        if self.initial_unit is not None:
            keys.append("initial")
        return tuple(keys) + self.extra_keys


def _row(**kwargs: object) -> PartKind:
    kwargs["parasitics"] = MappingProxyType(dict(kwargs["parasitics"]))  # type: ignore[arg-type]
    return PartKind(**kwargs)  # type: ignore[arg-type]


PART_KINDS: Mapping[str, PartKind] = MappingProxyType(
    {
        "capacitor": _row(
            kind="capacitor",
            unit="F",
            needs_nominal=True,
            parasitics={"esr": "ohm", "esl": "H", "leakage": "ohm"},
            initial_unit="V",
            example='[parts.C1] kind = "capacitor", nominal = "47u", esr = "40m", initial = "12"',
            description="leakage is a resistance in parallel with the ideal capacitance",
        ),
        "inductor": _row(
            kind="inductor",
            unit="H",
            needs_nominal=True,
            parasitics={"dcr": "ohm", "parallel_capacitance": "F"},
            initial_unit="A",
            example='[parts.L1] kind = "inductor", nominal = "470u", dcr = "?"',
            description="parallel_capacitance is the winding's self-capacitance",
        ),
        "resistor": _row(
            kind="resistor",
            unit="ohm",
            needs_nominal=True,
            parasitics={"inductance": "H"},
            initial_unit=None,
            example='[parts.R1] kind = "resistor", nominal = "0.22", measured = "0.23"',
        ),
        "switch": _row(
            kind="switch",
            unit=None,
            needs_nominal=False,
            parasitics={"resistance": "ohm"},
            initial_unit=None,
            example='[parts.SW1] kind = "switch", resistance = "5m"',
            description="closes at t = 0; ideal (zero resistance) when resistance is absent",
        ),
        "wire": _row(
            kind="wire",
            unit=None,
            needs_nominal=False,
            parasitics={"resistance": "ohm", "inductance": "H"},
            initial_unit=None,
            example='[parts.W1] kind = "wire", resistance = "12m", inductance = "150n"',
        ),
    }
)

#: Marker a fixture uses for a value that is not known and is to be fitted.
UNKNOWN_MARK = "?"
