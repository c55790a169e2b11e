"""Which value each circuit element takes: the parameter set of one candidate model.

A :class:`ParameterSet` maps a key ``(part, field)`` to an SI value and records where
the value came from. Fields are ``"value"`` (the part's own R, L or C), a parasitic key
of the part's kind (``"esr"``, ``"dcr"``, ...), or, for the pseudo-parts below:

- ``("probe", "resistance")`` and ``("probe", "capacitance")``: probe loading;
- ``("step", "volts")`` and ``("step", "source_resistance")``: the step source;
- ``("loop", "extra_resistance")`` and ``("loop", "extra_inductance")``: a lumped series
  element nobody measured (the unexplained part a fit puts a number on).

Parameter sets are immutable; :meth:`ParameterSet.with_values` returns a new one.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Mapping

ParameterKey = tuple[str, str]

#: Origins recorded beside each value (shown in decks and reports).
ORIGIN_LABEL = "label value"
ORIGIN_MEASURED = "measured"
ORIGIN_METER = "meter reading minus lead zero"
ORIGIN_PARASITIC = "stated parasitic"
ORIGIN_PROBE = "probe loading"
ORIGIN_SOURCE = "step source"
ORIGIN_FITTED = "fitted"


@dataclass(frozen=True)
class ParameterSet:
    """Values (SI) and their origins for every element of one circuit."""

    values: Mapping[ParameterKey, float] = field(default_factory=lambda: MappingProxyType({}))
    origins: Mapping[ParameterKey, str] = field(default_factory=lambda: MappingProxyType({}))

    def __post_init__(self) -> None:
        object.__setattr__(self, "values", MappingProxyType(dict(self.values)))
        object.__setattr__(self, "origins", MappingProxyType(dict(self.origins)))

    def get(self, key: ParameterKey, default: float | None = None) -> float | None:
        """The value for ``key``, or ``default`` when the set has none."""
        return self.values.get(key, default)

    def with_values(
        self, updates: Mapping[ParameterKey, float], origin: str = ORIGIN_FITTED
    ) -> "ParameterSet":
        """A copy with ``updates`` applied, each recorded with ``origin``."""
        values = dict(self.values)
        origins = dict(self.origins)
        for key, value in updates.items():
            values[key] = float(value)
            origins[key] = origin
        return ParameterSet(values, origins)

    def without(self, keys: set[ParameterKey] | frozenset[ParameterKey]) -> "ParameterSet":
        """A copy with ``keys`` removed (e.g. parasitics left out)."""
        return ParameterSet(
            {k: v for k, v in self.values.items() if k not in keys},
            {k: v for k, v in self.origins.items() if k not in keys},
        )
