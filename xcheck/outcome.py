"""The comparison's result records: what :func:`xcheck.compare.run_comparison` returns.

Data only: :class:`EngineMetrics` (one engine's match to the measurement),
:class:`CandidateOutcome` (one candidate after fitting and simulation),
:class:`InputFile` (an input and its checksum) and :class:`Comparison` (the whole
result). Running the comparison is :mod:`xcheck.compare`'s job, its words are
:mod:`xcheck.verdict`'s, and rendering is :mod:`xcheck.report`'s.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from xcheck.engines.modes import NamedMode
from xcheck.engines.theory import SecondOrder
from xcheck.fitting.candidates import Candidate
from xcheck.fitting.fit import FitResult
from xcheck.fitting.observation import Observation
from xcheck.fitting.rank import Ranked
from xcheck.fixture.model import Fixture
from xcheck.measured import Measured


@dataclass(frozen=True)
class Finding:
    """One sanity finding (:mod:`xcheck.sanity`): a short stable code and the sentence
    for the verdict."""

    code: str
    text: str

#: Engines agree to about 1e-4 of the amplitude (tested); beyond 1e-3 it is a deck,
#: time-step or approximation problem worth a reviewer's attention.
ENGINE_DISAGREEMENT_LIMIT = 1e-3


@dataclass(frozen=True)
class EngineMetrics:
    """How well one engine's prediction of a fitted candidate matches the measurement."""

    engine: str
    rmse: float
    nrmse: float
    max_error: float
    damped_frequency_error_hz: float
    neper_frequency_error_per_s: float
    aic: float
    bic: float


@dataclass(frozen=True)
class CandidateOutcome:
    """Everything known about one candidate after fitting and simulation."""

    candidate: Candidate
    fit: FitResult
    ranked: Ranked
    theory: EngineMetrics | None = None
    ngspice: EngineMetrics | None = None
    second_order: SecondOrder | None = None
    series_resistance_ohm: float = float("nan")
    engine_disagreement: float = float("nan")
    engine_notes: tuple[str, ...] = ()
    theory_curve: np.ndarray | None = None
    ngspice_curve: np.ndarray | None = None
    #: The fitted circuit's natural modes, largest share first
    #: (:func:`xcheck.engines.modes.natural_modes_named`).
    modes: tuple[NamedMode, ...] = ()
    #: Why ngspice could not run this candidate's deck (its own lines quoted), or ''
    #: when it ran or was not asked to; the same text is in :attr:`engine_notes`.
    ngspice_error: str = ""

    @property
    def name(self) -> str:
        return self.candidate.name

    @property
    def failed(self) -> bool:
        return self.fit.failed

    @property
    def engines_disagree(self) -> bool:
        """True when ngspice and theory differ by more than numerical precision
        (:data:`ENGINE_DISAGREEMENT_LIMIT`)."""
        return math.isfinite(self.engine_disagreement) and (
            self.engine_disagreement > ENGINE_DISAGREEMENT_LIMIT
        )


@dataclass(frozen=True)
class InputFile:
    """An input with its checksum, for the report's provenance table."""

    role: str
    path: str
    sha256: str


@dataclass(frozen=True)
class Comparison:
    """Result of a three-way comparison, ready for :mod:`xcheck.report`."""

    fixture: Fixture
    measured: Measured
    observation: Observation
    outcomes: tuple[CandidateOutcome, ...]
    verdict: str
    inputs: tuple[InputFile, ...]
    loop_findings: tuple[str, ...] = ()
    seeds: dict[str, int] = field(default_factory=dict)
    ngspice_version: str = ""
    #: What an engineer would catch first (:func:`xcheck.sanity.sanity_findings`).
    findings: tuple[Finding, ...] = ()
    #: Readings that would cut the best candidate's uncertainties most
    #: (:func:`xcheck.fitting.next_measurement.next_measurements`), best first.
    next_measurements: tuple = ()
    #: Why the SPICE leg was skipped for every candidate (ngspice could not be loaded:
    #: the loader's reason), or '' when ngspice ran or was not asked for.
    ngspice_skipped: str = ""

    @property
    def best(self) -> CandidateOutcome | None:
        """The top-ranked candidate, or None when every candidate failed."""
        ranked = [o for o in self.outcomes if o.ranked.rank == 1]
        return ranked[0] if ranked else None

    def outcome(self, name: str) -> CandidateOutcome:
        """The outcome of the candidate called ``name``."""
        for item in self.outcomes:
            if item.name == name:
                return item
        raise KeyError(name)
