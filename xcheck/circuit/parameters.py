"""Which value each circuit element takes: the parameter set of one candidate model.

A :class:`ParameterSet` maps a key ``(part, field)``
(:data:`xcheck.fixture.schema.ParameterKey`, written ``"C1.esr"`` by
:func:`xcheck.fixture.schema.key_label`) to an SI value and records where the value
came from. Fields are ``"value"`` (the part's own R, L or C), a parasitic key
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
from typing import TYPE_CHECKING, Mapping

from xcheck.fixture.schema import PART_KINDS, ParameterKey

if TYPE_CHECKING:  # pragma: no cover - import for type hints only
    from xcheck.fixture.model import Fixture

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


# --------------------------------------------------------------------------------------
# Parameter sets from a fixture
# --------------------------------------------------------------------------------------

#: Pseudo-part keys a parameter set may carry besides the fixture's parts.
PROBE_RESISTANCE: ParameterKey = ("probe", "resistance")
PROBE_CAPACITANCE: ParameterKey = ("probe", "capacitance")
STEP_VOLTS: ParameterKey = ("step", "volts")
STEP_SOURCE_RESISTANCE: ParameterKey = ("step", "source_resistance")
LOOP_EXTRA_RESISTANCE: ParameterKey = ("loop", "extra_resistance")
LOOP_EXTRA_INDUCTANCE: ParameterKey = ("loop", "extra_inductance")


def parameters_from_fixture(
    fixture: Fixture,
    *,
    use_measured: bool = True,
    include_parasitics: bool = True,
    include_probe: bool = True,
) -> ParameterSet:
    """The parameter set a fixture states, each value with its origin.

    Parameters
    ----------
    fixture
        The validated fixture.
    use_measured
        Take a part's measured value (meter reading minus lead zero for a two-wire
        reading) when one is given; otherwise, and when False, the label value.
    include_parasitics
        Include the parasitics the fixture states (ESR, DCR, switch resistance, ...).
    include_probe
        Include the probe loading (``("probe", "resistance")`` and
        ``("probe", "capacitance")``) when the fixture gives it.

    Returns
    -------
    ParameterSet
        Keys ``(part, "value")`` for R, L and C parts, ``(part, parasitic)`` for stated
        parasitics, the probe keys, and ``("step", "volts")`` /
        ``("step", "source_resistance")`` for a step response. Values written ``"?"``
        are simply absent (see :func:`missing_values`). Initial conditions are not
        parameters; the circuit builder reads them from the fixture.
    """
    values: dict[ParameterKey, float] = {}
    origins: dict[ParameterKey, str] = {}

    def put(key: ParameterKey, value: float | None, origin: str) -> None:
        if value is not None:
            values[key] = float(value)
            origins[key] = origin

    for name in fixture.loop:
        part = fixture.parts[name]
        if use_measured and part.measured is not None:
            put((name, "value"), part.measured,
                ORIGIN_METER if part.meter is not None else ORIGIN_MEASURED)
        elif "nominal" not in part.unknown:
            put((name, "value"), part.nominal, ORIGIN_LABEL)
        if include_parasitics:
            for key in sorted(part.parasitics):
                if key not in part.unknown:
                    put((name, key), part.parasitics[key], ORIGIN_PARASITIC)
    if include_probe and fixture.probe_loading is not None:
        put(PROBE_RESISTANCE, fixture.probe_loading.resistance, ORIGIN_PROBE)
        put(PROBE_CAPACITANCE, fixture.probe_loading.capacitance, ORIGIN_PROBE)
    if fixture.step is not None:
        put(STEP_VOLTS, fixture.step.volts, ORIGIN_SOURCE)
        put(STEP_SOURCE_RESISTANCE, fixture.step.source_resistance, ORIGIN_SOURCE)
    return ParameterSet(values, origins)


def required_keys(fixture: Fixture) -> list[ParameterKey]:
    """Keys a circuit cannot be built without, in loop order.

    Each resistor, capacitor and inductor needs ``(part, "value")``; a step response
    also needs ``("step", "volts")``.
    """
    keys: list[ParameterKey] = [
        (name, "value")
        for name in fixture.loop
        if PART_KINDS[fixture.parts[name].kind].needs_nominal
    ]
    if fixture.response == "step":
        keys.append(STEP_VOLTS)
    return keys


def missing_values(fixture: Fixture, parameters: ParameterSet) -> list[ParameterKey]:
    """Required keys the parameter set lacks (e.g. a nominal ``"?"`` never measured).

    Parameters
    ----------
    fixture
        The fixture the parameters belong to.
    parameters
        A parameter set, e.g. from :func:`parameters_from_fixture`.

    Returns
    -------
    list of ParameterKey
        In loop order; empty when a circuit can be built.
    """
    return [key for key in required_keys(fixture) if key not in parameters.values]
