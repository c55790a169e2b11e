"""What the engineer wrote: the fixture description (TOML, version 1) as frozen data.

A :class:`Fixture` is a faithful, validated copy of the file, in SI units. It makes no
modelling choices: which values a simulation uses (label, measured, fitted) is decided
later, in :mod:`xcheck.parameters`.

Wiring. Version 1 describes one series loop: ``loop = ["SW1", "C1", "R1", "L1"]``.
Part ``k`` of the loop sits between node ``n{k}`` and node ``n{k+1}``; the node between
the last and the first part is the ground reference ``0``. A part's *first terminal* is
the one met first going round the loop in the order written. :meth:`Fixture.connections`
returns this as (part, first node, second node) triples, which is all the rest of xcheck
uses, so node-based wiring (parts between named nodes) can be added later by filling the
same triples from the file without changing what a loop fixture means.

Polarity. The probe reads the probed part's first terminal minus its second. A
capacitor's ``initial`` voltage and an inductor's ``initial`` current use the same
convention (current flowing into the first terminal is positive).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Literal, Mapping

Response = Literal["natural", "step"]
GROUND = "0"


@dataclass(frozen=True)
class MeterReading:
    """A two-wire ohmmeter reading and its shorted-lead zero, in ohms."""

    reading: float
    leads: float = 0.0

    @property
    def value(self) -> float:
        """The part's resistance: the reading minus the lead zero."""
        return self.reading - self.leads


@dataclass(frozen=True)
class Part:
    """One part of the fixture, as written.

    Attributes
    ----------
    name
        The key under ``[parts]`` (``"C1"``).
    kind
        A row of :data:`xcheck.schema.PART_KINDS`.
    nominal
        Label value in SI units, ``None`` when absent or unknown (see ``unknown``).
    measured
        Meter value in SI units (for a two-wire reading, reading minus leads), or None.
    meter
        The raw two-wire reading when ``measured`` was given as ``{reading, leads}``.
    tolerance
        Label tolerance as a fraction (0.2 for 20 %), or None.
    parasitics
        Known parasitic values by key (``{"esr": 0.04}``), SI units.
    initial
        Initial capacitor voltage (V) or inductor current (A) at t = 0, or None.
    unknown
        Keys written as ``"?"`` (``{"dcr"}`` or ``{"nominal"}``): to be fitted.
    """

    name: str
    kind: str
    nominal: float | None = None
    measured: float | None = None
    meter: MeterReading | None = None
    tolerance: float | None = None
    parasitics: Mapping[str, float] = field(default_factory=lambda: MappingProxyType({}))
    initial: float | None = None
    unknown: frozenset[str] = frozenset()


@dataclass(frozen=True)
class LoopReading:
    """Ohmmeter reading around the closed loop with the capacitor taken out (ohms)."""

    reading: float
    leads: float = 0.0

    @property
    def value(self) -> float:
        """Sum of the other series resistances at DC: reading minus lead zero."""
        return self.reading - self.leads


@dataclass(frozen=True)
class ProbeLoading:
    """Scope input or probe across the probed part; either value may be absent."""

    resistance: float | None = None
    capacitance: float | None = None


@dataclass(frozen=True)
class StepSource:
    """Source switched into the loop at t = 0 for ``response = "step"``.

    It sits where the loop closes (between the last part and the first), its positive
    terminal towards the first part, so current flows round the loop in the order
    written.
    """

    volts: float
    source_resistance: float = 0.0


@dataclass(frozen=True)
class Fixture:
    """A validated fixture description, SI units throughout."""

    title: str
    response: Response
    loop: tuple[str, ...]
    probe: str
    parts: Mapping[str, Part]
    loop_reading: LoopReading | None = None
    probe_loading: ProbeLoading | None = None
    step: StepSource | None = None
    source: Path | None = None
    #: Extra keys later issues read (e.g. candidate definitions), kept as plain data.
    extras: Mapping[str, object] = field(default_factory=lambda: MappingProxyType({}))

    @property
    def name(self) -> str:
        """Short name for folders and decks: the file stem, else ``"fixture"``."""
        return self.source.stem if self.source is not None else "fixture"

    def connections(self) -> tuple[tuple[str, str, str], ...]:
        """Each part with its first and second node, in loop order.

        Returns
        -------
        tuple of (part name, first node, second node)
            Part ``k`` joins ``n{k}`` to ``n{k+1}``; the closing node is ground ``"0"``.
        """
        count = len(self.loop)
        nodes = [GROUND] + [f"n{k}" for k in range(1, count)] + [GROUND]
        return tuple((name, nodes[k], nodes[k + 1]) for k, name in enumerate(self.loop))

    @property
    def probed_part(self) -> Part:
        """The part the probe is across."""
        return self.parts[self.probe]
