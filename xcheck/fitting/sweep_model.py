"""What a fit drives for a frequency sweep: one candidate's measured circuit, by its
free values, on the exact frequency engine.

:class:`SweepModel` is :class:`~xcheck.fitting.model.CandidateModel`'s counterpart for
a sweep: it builds the circuit the sweep measured once
(:func:`xcheck.engines.swept.swept_engine`, every free value present), and from then on
only changes element values. Free values that are coefficients of a frequency law
(:mod:`xcheck.fitting.frequency_laws`) are no elements: they change their target
resistance at each frequency, and the response is then evaluated one value set per
frequency (:func:`xcheck.engines.swept.paired_response`).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from xcheck.circuit.parameters import ParameterKey, ParameterSet
from xcheck.engines.frequency import FrequencyEngine
from xcheck.engines.swept import swept_engine
from xcheck.fitting.candidates import Candidate, FreeParameter
from xcheck.fitting.frequency_laws import FrequencyLaw, apply_laws, element_keys, law_keys
from xcheck.fitting.model import _placeholder
from xcheck.fixture.model import Fixture
from xcheck.fixture.swept_table import SweptSetting


class SweepModel:
    """The exact frequency response of one candidate's measured circuit.

    Parameters
    ----------
    fixture, candidate
        Where the circuit comes from.
    free
        The values the fit moves, in the order of the fit's vector (law coefficients
        among them).
    setting
        What the sweep measured.
    laws
        The candidate's frequency-dependent losses.
    """

    #: ``"natural"`` or ``"step"`` (unused by a sweep; kept for the fit's interface).
    response: str

    def __init__(self, fixture: Fixture, candidate: Candidate, free: tuple[FreeParameter, ...],
                 setting: SweptSetting, laws: Sequence[FrequencyLaw] = ()) -> None:
        self.fixture = fixture
        self.response = fixture.response
        self.candidate = candidate
        self.free = free
        self.setting = setting
        self.laws = tuple(laws)
        self.evaluations = 0
        #: Fixed values changed for a sensitivity (key -> SI value); see :meth:`nudged`.
        self.overrides: dict[ParameterKey, float] = {}
        base = np.array([_placeholder(f) for f in free], float)
        self.engine: FrequencyEngine = swept_engine(fixture, self._circuit_parameters(base),
                                                    setting)
        keys = element_keys(self.engine)
        self._keys = keys
        self._columns = [[k for k, key in enumerate(keys) if key == f.key] for f in free]
        self._values = self.engine.defaults(1)
        missing = [law.target for law in self.laws if law.target not in keys]
        if missing:
            raise ValueError(
                f"a frequency-dependent loss needs the element {missing[0]} in the "
                "measured circuit; make that value free or give it a value")

    def parameters(self, physical: np.ndarray) -> ParameterSet:
        """The candidate's parameter set with ``physical`` free values (law
        coefficients included)."""
        base = self.candidate.parameters
        if self.overrides:
            base = base.with_values(dict(self.overrides), "nudged for a sensitivity")
        return base.with_values({f.key: float(v) for f, v in zip(self.free, physical)})

    def _circuit_parameters(self, physical: np.ndarray) -> ParameterSet:
        return self.parameters(physical).without(law_keys(self.laws))

    def nudged(self, key: ParameterKey, value: float) -> "SweepModel":
        """This model with the fixed value ``key`` set to ``value`` (SI); see
        :meth:`xcheck.fitting.model.CandidateModel.nudged`."""
        self.overrides[key] = float(value)
        return self

    def restore(self) -> None:
        """Undo :meth:`nudged`."""
        self.overrides.clear()

    def _element_values(self, physical: np.ndarray) -> np.ndarray:
        values = self._values.copy()
        for key, value in self.overrides.items():
            values[0, [k for k, kk in enumerate(self._keys) if kk == key]] = value
        for cols, value in zip(self._columns, physical):
            values[0, cols] = value
        return values

    def frequency_response(self, physical: np.ndarray, frequencies: np.ndarray) -> np.ndarray:
        """Complex response at ``frequencies`` (Hz) for ``physical`` free values."""
        self.evaluations += 1
        values = self._element_values(np.asarray(physical, float))
        looked_up = self.parameters(physical).values if self.laws else {}
        return apply_laws(self.engine, values, self.laws, frequencies, looked_up, self._keys)
