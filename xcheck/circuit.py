"""Primitive element graph shared by every engine.

A :class:`Circuit` is what both the SPICE deck and closed-form theory consume, so the
two always describe the same physics. Elements are R, L, C, V (independent DC source,
also used at 0 V as an ideal switch and current sense) between named nodes; ground is
``"0"``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

ElementKind = Literal["R", "L", "C", "V"]


@dataclass(frozen=True)
class Element:
    """One primitive element.

    Attributes
    ----------
    name
        Unique identifier made only of letters, digits and underscores, starting with
        the SPICE letter of its kind (``"C_C1"``, ``"R_C1_esr"``).
    kind
        ``"R"`` (ohms), ``"L"`` (henries), ``"C"`` (farads) or ``"V"`` (volts).
    nodes
        (first node, second node); for C the initial voltage is first minus second,
        for L and V the current flows from the first node through the element.
    value
        SI value.
    initial
        Initial condition (V across a C, A through an L) or None.
    part
        Fixture part it belongs to, or a pseudo-part (``"probe"``, ``"step"``, ``"loop"``).
    role
        ``"value"`` for the part's own element, else the parasitic or pseudo field.
    origin
        Where the value came from (see :mod:`xcheck.parameters`).
    """

    name: str
    kind: ElementKind
    nodes: tuple[str, str]
    value: float
    initial: float | None = None
    part: str = ""
    role: str = "value"
    origin: str = ""


@dataclass(frozen=True)
class Circuit:
    """A linear circuit with a probe, ready for any engine.

    Attributes
    ----------
    title
        Free text (sanitised before it reaches a deck).
    elements
        Elements in deterministic order (loop order, then parallel elements).
    probe
        (plus node, minus node) of the measured voltage.
    response
        ``"natural"`` or ``"step"``.
    current_sense
        Name of a 0 V source in the loop whose current is the loop current, or None.
    """

    title: str
    elements: tuple[Element, ...]
    probe: tuple[str, str]
    response: str = "natural"
    current_sense: str | None = None
    ground: str = field(default="0")
