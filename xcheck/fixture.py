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

Reading. :func:`load_fixture` (a file) and :func:`parse_fixture` (data already read
from TOML) check the whole document and raise one :class:`~xcheck.errors.FixtureError`
listing every problem, each naming the key, the bad value, the expected form (printed
from the part kind's row in :data:`xcheck.schema.PART_KINDS`) and how to fix it.
Fixtures are data, never code: nothing is evaluated and nothing else is included.

- ``"?"`` marks a value to be fitted; it is allowed for ``nominal`` and parasitics
  (recorded in :attr:`Part.unknown`) and nowhere else: an initial value or a step is
  the excitation, which the whole waveform scales with; a tolerance is printed on the
  part; a meter reading or the probe loading is known or left out.
- A part's own R, L or C must be > 0; series parasitics and stray capacitances must be
  >= 0 (0 means ideal); a parallel resistance (``leakage``) must be > 0.
- Titles and part names reach the SPICE deck, so they may not hold anything that could
  become a SPICE or control-language line (see :func:`xcheck.fixture_text._unsafe_text`).
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
        """The part's resistance: the reading minus the lead zero (rounded to 12
        significant digits, far below any meter's resolution, so that 0.291 - 0.058
        is 0.233 rather than 0.23299999999999998)."""
        return float(f"{self.reading - self.leads:.12g}")


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
        """Sum of the other series resistances at DC: reading minus lead zero (rounded
        to 12 significant digits, as :attr:`MeterReading.value`)."""
        return float(f"{self.reading - self.leads:.12g}")


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


# Reading a fixture file lives in xcheck.fixture_reader; its entry points are reachable
# from here too (resolved on first use, since the reader builds the classes above).
_READER_NAMES = ("load_fixture", "parse_fixture", "parse_fixture_text")


def __getattr__(name: str) -> object:
    if name in _READER_NAMES:
        from xcheck import fixture_reader

        return getattr(fixture_reader, name)
    raise AttributeError(f"module 'xcheck.fixture' has no attribute {name!r}")
