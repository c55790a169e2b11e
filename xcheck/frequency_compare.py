"""The three-way comparison for a frequency sweep: measured, exact H(jw), ngspice ``.ac``.

:func:`run_frequency_comparison` reads the fixture's ``[swept]`` measurement, builds the
sweep ladder (:func:`xcheck.fitting.sweep_candidates.sweep_ladder`), fits each candidate
to the sweep (:class:`xcheck.fitting.sweep_observation.SweepObservation`) or, with a time
capture too, to both at once (:class:`~xcheck.fitting.sweep_observation.JointObservation`),
ranks them by BIC, evaluates every fitted candidate on the exact frequency engine and
(for the lumped ones) in ngspice's ``.ac`` analysis of the same circuit, and finds the
resonances of the measurement and of each model (:mod:`xcheck.capture.resonance`). It
returns data only (:class:`FrequencyComparison`); the report turns it into words.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Callable

import numpy as np

from xcheck.capture.resonance import Resonance, find_resonances
from xcheck.capture.sweep_types import FrequencySweep
from xcheck.engines.ngspice import ngspice_status
from xcheck.engines.swept import swept_engine
from xcheck.errors import SimulationError, XcheckError
from xcheck.fitting.candidates import Candidate
from xcheck.fitting.fit import FitResult, fit_candidate
from xcheck.fitting.frequency_laws import FrequencyLaw, apply_laws, law_keys
from xcheck.fitting.rank import Ranked, rank_by_bic
from xcheck.fitting.sweep_candidates import sweep_ladder
from xcheck.fitting.sweep_observation import JointObservation, SweepObservation, log_ratio
from xcheck.fixture.model import Fixture

#: ngspice ``.ac`` points per decade for the SPICE leg (its own grid; the exact engine
#: is evaluated on it too for the engines' agreement).
AC_POINTS_PER_DECADE = 50
#: The note of a candidate whose ngspice leg was not run because it was not asked for.
NOT_ASKED = "ngspice was not asked for"


@dataclass(frozen=True)
class SweepOutcome:
    """One candidate fitted to the sweep (and the capture, in a joint fit).

    Attributes
    ----------
    candidate
        The candidate as fitted.
    laws
        Its frequency-dependent losses.
    fit
        The fit's result.
    exact
        The fitted model's response at the measured frequencies (complex), or None
        when the fit failed.
    ngspice_frequency, ngspice
        ngspice's ``.ac`` frequencies (Hz) and response, or None (with ``ngspice_note``).
    engines_differ
        Largest ``|ln(H_ngspice / H_exact)|`` over ngspice's frequencies, or None.
    ngspice_note
        Why there is no ngspice leg, or "".
    resonances
        The fitted model's resonances at the measured frequencies.
    rms_log_error
        RMS of ``|ln(H_model / H_measured)|`` over the sweep (a relative error).
    """

    candidate: Candidate
    laws: tuple[FrequencyLaw, ...]
    fit: FitResult
    exact: np.ndarray | None = None
    ngspice_frequency: np.ndarray | None = None
    ngspice: np.ndarray | None = None
    engines_differ: float | None = None
    ngspice_note: str = ""
    resonances: tuple[Resonance, ...] = ()
    rms_log_error: float = math.nan

    @property
    def name(self) -> str:
        return self.candidate.name


@dataclass(frozen=True)
class FrequencyComparison:
    """A sweep compared with every candidate.

    Attributes
    ----------
    fixture
        The fixture.
    sweep
        The measurement.
    outcomes
        Every candidate, ladder order.
    ranking
        BIC ranking, best first (failed candidates last).
    resonances
        The measurement's resonances.
    joint
        True when the candidates were fitted to a time capture as well.
    notes
        Plain-words remarks (errors assumed, legs skipped).
    ngspice_version
        The ngspice that ran the ``.ac`` legs, or "" when none ran.
    """

    fixture: Fixture
    sweep: FrequencySweep
    outcomes: tuple[SweepOutcome, ...]
    ranking: tuple[Ranked, ...]
    resonances: tuple[Resonance, ...]
    joint: bool = False
    notes: tuple[str, ...] = field(default=())
    ngspice_version: str = ""

    @property
    def best(self) -> SweepOutcome | None:
        """The best-ranked candidate's outcome, or None when every fit failed."""
        if not self.ranking or self.ranking[0].rank is None:
            return None
        return next(o for o in self.outcomes if o.name == self.ranking[0].name)


def _resonances(frequency: np.ndarray, values: np.ndarray) -> tuple[Resonance, ...]:
    if not np.all(np.isfinite(values)) or np.any(values == 0):
        return ()
    try:
        return find_resonances(frequency, values)
    except ValueError:
        return ()


def _evaluate(fixture: Fixture, obs: SweepObservation, candidate: Candidate,
              laws: tuple[FrequencyLaw, ...], fit: FitResult, use_ngspice: bool,
              off_note: str = NOT_ASKED) -> SweepOutcome:
    """The fitted candidate on both engines (``off_note``: why ngspice is not run when
    ``use_ngspice`` is False)."""
    if fit.failed or fit.parameters is None:
        return SweepOutcome(candidate, laws, fit, ngspice_note="the fit failed")
    f = obs.frequency
    parameters = fit.parameters
    engine = swept_engine(fixture, parameters.without(law_keys(laws)), obs.setting)
    exact = apply_laws(engine, engine.defaults(1), laws, f, parameters.values)
    error = log_ratio(exact, np.asarray(obs.sweep.value, complex))
    rms = float(np.sqrt(np.mean(np.abs(error) ** 2)))
    resonances = _resonances(f, exact)
    if laws:
        return SweepOutcome(candidate, laws, fit, exact, resonances=resonances,
                            rms_log_error=rms,
                            ngspice_note="a frequency-dependent loss has no lumped SPICE "
                                         "element, so ngspice's .ac leg is skipped")
    if not use_ngspice:
        return SweepOutcome(candidate, laws, fit, exact, resonances=resonances,
                            rms_log_error=rms, ngspice_note=off_note)
    from xcheck.engines.ac_deck import AcSweep, simulate_ac_ngspice

    try:
        plot = simulate_ac_ngspice(engine, AcSweep(AC_POINTS_PER_DECADE, float(f[0]),
                                                   float(f[-1])))
    except (SimulationError, XcheckError) as exc:
        return SweepOutcome(candidate, laws, fit, exact, resonances=resonances,
                            rms_log_error=rms, ngspice_note=f"ngspice's .ac run failed: {exc}")
    on_grid = engine.response(plot.frequency)[0]
    differ = float(np.max(np.abs(log_ratio(plot.response, on_grid))))
    return SweepOutcome(candidate, laws, fit, exact, plot.frequency, plot.response, differ,
                        resonances=resonances, rms_log_error=rms)


def run_frequency_comparison(fixture: Fixture, sweep: FrequencySweep, *,
                             timed=None, use_ngspice: bool = True,
                             progress: Callable[[str], None] | None = None
                             ) -> FrequencyComparison:
    """Fit and rank the sweep ladder against ``sweep`` (and a time capture).

    Parameters
    ----------
    fixture
        The fixture; its ``[swept]`` table says what the sweep measured.
    sweep
        The measured sweep.
    timed
        A time-capture observation (:class:`~xcheck.fitting.observation.TraceObservation`
        or a peak table's) to fit jointly, or None for the sweep alone.
    use_ngspice
        Run ngspice's ``.ac`` leg.
    progress
        Called with a short line per stage.

    Raises
    ------
    XcheckError
        When the fixture has no ``[swept]`` table, or the sweep's quantity is not the
        one the table names.
    """
    setting = fixture.swept
    if setting is None:
        raise XcheckError(
            f"{fixture.source or fixture.name}: a frequency sweep needs the fixture to say "
            'what was swept; add a [swept] table, e.g. [swept] measures = "impedance", '
            'part = "C1"')
    if sweep.quantity != setting.measures:
        raise XcheckError(
            f"{sweep.source}: the file holds a {sweep.quantity} but the fixture's [swept] "
            f"table says the sweep measured {setting.describe()}; read the file as a "
            f"{setting.measures} or correct [swept] measures")
    candidates, laws = sweep_ladder(fixture, setting, sweep)
    if timed is not None:
        candidates = _with_time_unknowns(fixture, candidates)
    base = SweepObservation.of(sweep, setting)
    notes = []
    if not base.stated:
        notes.append(
            "the sweep states no standard errors: each point weighs as if its magnitude "
            "and phase were known to the same relative error, and the noise level is "
            "estimated from the residuals")
    version, off_note = "", NOT_ASKED
    if use_ngspice:
        version, unavailable = ngspice_status()
        if unavailable is not None:  # checked once: one child start, not one a candidate
            use_ngspice = False
            off_note = "ngspice could not be started (see the notes)"
            notes.append(f"ngspice's .ac leg was skipped for every candidate: {unavailable}")
    outcomes = []
    bics: dict[str, float] = {}
    for number, candidate in enumerate(candidates, 1):
        if progress is not None:
            progress(f"fitting candidate {number}/{len(candidates)}: {candidate.name}")
        obs = base.with_laws(laws[candidate.name])
        fitted_to = JointObservation.of(timed, obs) if timed is not None else obs
        skip = _power_law_not_needed(laws[candidate.name], laws, bics)
        fit = (FitResult(candidate.name, False, skip) if skip
               else fit_candidate(fixture, candidate, fitted_to))
        bics[candidate.name] = fit.bic if not fit.failed else math.inf
        outcomes.append(_evaluate(fixture, obs, candidate, laws[candidate.name], fit,
                                  use_ngspice, off_note))
    ranking = rank_by_bic([o.name for o in outcomes], [o.fit.bic for o in outcomes],
                          [o.fit.failed for o in outcomes])
    return FrequencyComparison(fixture, sweep, tuple(outcomes), tuple(ranking),
                               _resonances(base.frequency, np.asarray(sweep.value, complex)),
                               joint=timed is not None, notes=tuple(notes),
                               ngspice_version=version if use_ngspice else "")


#: A fitted power of frequency is tried only where the square-root law already beats the
#: constant loss by at least this BIC difference ("positive" evidence, Kass & Raftery
#: 1995): without a loss that grows with frequency the power's exponent is undetermined
#: and the fit only wanders.
POWER_LAW_NEEDS = 2.0


def _power_law_not_needed(own: tuple[FrequencyLaw, ...],
                          laws: dict[str, tuple[FrequencyLaw, ...]],
                          bics: dict[str, float]) -> str:
    """Why a rung with laws ``own`` is not fitted ("" when it is): a power law whose
    target's square-root rung (the candidate whose one law is skin effect on the same
    resistance, fitted before it) does not beat ``lumped`` by :data:`POWER_LAW_NEEDS`."""
    if len(own) != 1 or own[0].kind != "power":
        return ""
    skin = min((bics.get(name, math.inf) for name, found in laws.items()
                if len(found) == 1 and found[0].kind == "skin"
                and found[0].target == own[0].target), default=math.inf)
    if skin < bics.get("lumped", math.inf) - POWER_LAW_NEEDS:
        return ""
    return ("not fitted: the skin-effect rung does not beat the lumped model, so no loss "
            "grows with frequency for a power of it to describe")


def _with_time_unknowns(fixture: Fixture, candidates: list[Candidate]) -> list[Candidate]:
    """The sweep's fitted candidates with the time capture's unknowns (every ``"?"``
    value of the time ladder) free as well: a joint fit moves what either measurement
    sees. The loop's lumped extra loss is left out: it would only repeat a ``"?"``
    resistance in the time capture and is nowhere in a part's sweep."""
    from xcheck.fitting.candidates import default_ladder

    time_ladder = {c.name: c for c in default_ladder(fixture)}
    unknown = time_ladder.get("all-unknowns")
    if unknown is None:
        return candidates
    extra = [f for f in unknown.free if f.key != ("loop", "extra_resistance")]
    out = []
    for candidate in candidates:
        if not candidate.free:
            out.append(candidate)
            continue
        have = {f.key for f in candidate.free}
        added = tuple(f for f in extra if f.key not in have)
        out.append(replace(candidate, free=candidate.free + added))
    return out


def read_sweep_file(path: str | Path, connection: str | None = None) -> FrequencySweep:
    """A sweep file by its name: Touchstone (``.s1p``, ``.s2p``, ``.ts``; a two-port with
    its ``connection``, "shunt" or "series", from the fixture's ``[swept]`` table) or a
    CSV sweep; an LCR-meter table is read by
    :func:`xcheck.capture.lcr_table.read_lcr_table`."""
    name = str(path).lower()
    if name.endswith((".s1p", ".s2p", ".ts")):
        from xcheck.capture.touchstone import read_touchstone

        return read_touchstone(path, connection=connection)
    from xcheck.capture.sweep_csv import read_sweep_csv

    return read_sweep_csv(path)
