"""The words of the verdict: the paragraph a reviewer reads, and the loop findings.

:func:`write_loop_findings` says how much series loss the best candidate needs beyond
the DC loop reading; :func:`write_verdict` composes the verdict paragraph from the ranked
outcomes, the measured-side findings and those loop findings, and ends it with what
went wrong with the SPICE leg (:func:`spice_sentences`). They only read
:mod:`xcheck.outcome` records; :mod:`xcheck.compare` runs the comparison and calls them.
"""

from __future__ import annotations

import math

from xcheck.fixture.schema import label_key
from xcheck.fitting.candidates import (
    EXTRA_RESISTANCE,
    ac_series_keys,
    dc_series_keys,
    describe_key,
    meter_uncertainty,
)
from xcheck.engines.ngspice import INSTALL_WAYS
from xcheck.fitting.fit import FittedValue
from xcheck.fixture.model import Fixture
from xcheck.measured import Measured
from xcheck.outcome import CandidateOutcome
from xcheck.values import format_eng

#: A model decay rate this far from the measured one means the candidate does not
#: account for the damping (the ring-down estimate's alpha is good to about 1 %).
ALPHA_MISMATCH = 0.02


def _needed_resistance(best: CandidateOutcome, measured_alpha: float | None) -> tuple[float, str]:
    """The series resistance the measurement needs, and what it rests on.

    The best candidate's series resistance when it accounts for the damping; else (its
    fitted extra loss stopped at its lower bound of zero, or it fits none and its decay
    rate is off by more than :data:`ALPHA_MISMATCH`) that resistance scaled by the
    measured over the model's decay rate, exact for a series loop whose damping is all
    series resistance (alpha = R / 2L; common practice, no source).
    """
    total = best.series_resistance_ohm
    extra = [v for v in best.fit.fitted if v.key == EXTRA_RESISTANCE]
    pinned = any(v.at_bound and v.lower == 0 and v.value - v.lower <= v.upper - v.value
                 for v in extra)
    theory = best.theory
    if not measured_alpha or theory is None:
        return total, "the best candidate needs"
    model_alpha = measured_alpha + theory.neper_frequency_error_per_s
    if not (math.isfinite(model_alpha) and model_alpha > 0):
        return total, "the best candidate needs"
    off = abs(model_alpha / measured_alpha - 1.0) > ALPHA_MISMATCH
    if pinned or (not extra and off):
        return total * measured_alpha / model_alpha, "the measured decay rate implies"
    return total, "the best candidate needs"


def _value_or_stated(fixture: Fixture, outcome: CandidateOutcome, key: tuple[str, str]) -> float:
    value = outcome.fit.parameters.get(key) if outcome.fit.parameters is not None else None
    if value is None:
        part = fixture.parts.get(key[0])
        value = part.parasitics.get(key[1]) if part is not None else None
    return float(value or 0.0)


def write_loop_findings(fixture: Fixture, outcomes: list[CandidateOutcome],
                        measured_alpha: float | None = None) -> list[str]:
    """How much series loss the best fit needs beyond the DC loop reading.

    Parameters
    ----------
    fixture
        The fixture; its ``[loop_reading]`` (if any) and itemised DC resistances.
    outcomes
        Every candidate's outcome; the one ranked 1 is the best.
    measured_alpha
        The ring-down estimate's decay rate (1/s); used when the best candidate's
        extra loss stopped at zero (see :func:`_needed_resistance`).

    Returns
    -------
    list of str
        One sentence, or none when no candidate could be fitted.
    """
    findings: list[str] = []
    best = next((o for o in outcomes if o.ranked.rank == 1), None)
    if best is None or best.fit.parameters is None:
        return findings
    total, basis = _needed_resistance(best, measured_alpha)
    if fixture.loop_reading is not None:
        dc = fixture.loop_reading.value
        # The best candidate's ESR where it has one, else the fixture's stated value
        # (the label-only rung carries no parasitics).
        esr = sum(_value_or_stated(fixture, best, key) for key in ac_series_keys(fixture))
        beyond = total - dc - esr
        sigma = meter_uncertainty(fixture.loop_reading.reading)
        head = (f"The DC loop reading accounts for {format_eng(dc, 'ohm')} of the "
                f"{format_eng(total, 'ohm')} series resistance {basis}, and "
                f"stated ESR for {format_eng(esr, 'ohm')}")
        if beyond > 2 * sigma:
            findings.append(
                f"{head}, leaving {format_eng(beyond, 'ohm')} of loss beyond what DC "
                "measurements explain (AC loss: skin and proximity effect, core loss, "
                "dielectric loss, contact resistance that changed)."
            )
        elif beyond < -2 * sigma:
            findings.append(
                f"{head}: together {format_eng(-beyond, 'ohm')} MORE than the ringing shows. "
                "A stated ESR or the loop reading is too high (check the lead zero and the "
                "contacts during the reading), or the capacitor was not at the temperature "
                "or frequency its ESR was stated for."
            )
        else:
            findings.append(
                f"{head}: together they explain the damping within the loop reading's "
                f"uncertainty (about {format_eng(sigma, 'ohm')})."
            )
    else:
        dc_known = sum(best.fit.parameters.get(k, 0.0) or 0.0 for k in dc_series_keys(fixture))
        findings.append(
            f"Itemised DC resistances add up to {format_eng(dc_known, 'ohm')}; "
            f"{basis} {format_eng(total, 'ohm')} in all. A DC loop reading "
            "([loop_reading]) would show how much of it is beyond DC."
        )
    return findings


def _sentence(text: str) -> str:
    text = text.strip()
    if not text:
        return text
    text = text[0].upper() + text[1:]
    return text if text[-1] in ".!?" else text + "."


def _against_label(fixture: Fixture, value) -> str:
    """'' or ' (label 470 µH: -3.8 %, inside its 10 % tolerance)' for a part's own value."""
    part_name, field_name = value.key
    part = fixture.parts.get(part_name)
    if part is None or field_name != "value" or not part.nominal:
        return ""
    change = value.value / part.nominal - 1.0
    text = f" (label {format_eng(part.nominal, value.unit)}: {change:+.1%}"
    if part.tolerance is not None:
        inside = abs(change) <= part.tolerance
        text += f", {'inside' if inside else 'OUTSIDE'} its {part.tolerance:.0%} tolerance"
    return text + ")"


def _degeneracy_sentences(fixture: Fixture, outcome: CandidateOutcome) -> list[str]:
    sentences = []
    for group in outcome.fit.degeneracies:
        names = [describe_key(fixture, label_key(m)) for m in group.members]
        if group.combination == "sum" and math.isfinite(group.value):
            sentences.append(
                f"In '{outcome.name}' the data determine only the sum {' + '.join(names)} = "
                f"{format_eng(group.value, group.unit)} ± {format_eng(group.stderr, group.unit)}, "
                "not the parts separately"
            )
        elif group.combination == "product" and math.isfinite(group.value):
            sentences.append(
                f"In '{outcome.name}' the data determine only the product {' × '.join(names)} "
                f"= {group.value:.4g} {group.unit} (± {group.stderr:.2g}), not the values separately"
            )
        else:
            sentences.append(
                f"In '{outcome.name}' {', '.join(names)} trade against each other (correlation "
                "beyond 0.999): this measurement pins only a combination of them, so each one's "
                "standard error is large"
            )
    return sentences


#: Residuals beyond this multiple of the noise mean no candidate explains the data.
MISFIT_LIMIT = 3.0


def _misfit(best: CandidateOutcome, measured: Measured) -> float | None:
    """Residual RMS over noise (trace) or sqrt(reduced chi-square) (peaks) of the best
    candidate, when it exceeds :data:`MISFIT_LIMIT`; else None."""
    fit = best.fit
    if fit.residuals is None or fit.n <= fit.k:
        return None
    ratio = measured.misfit_ratio(fit)
    return ratio if ratio > MISFIT_LIMIT else None


#: Modes carrying at least this share of the probed response are named in the verdict.
MODE_SHARE_SHOWN = 0.01


def _modes_sentence(outcome: CandidateOutcome) -> str:
    """Names the candidate's natural modes when more than one shows in the response."""
    shown = [m for m in outcome.modes if m.share >= MODE_SHARE_SHOWN]
    if len(shown) < 2:
        return ""
    return (f"Candidate '{outcome.name}' has {len(shown)} modes in the probed response: "
            + "; ".join(m.sentence() for m in shown))


def _budget_words(value: FittedValue) -> str:
    """``"; ± 42.9 nH from the fit alone, the rest from the C1 meter reading (...)"``
    when the fixed values add to the fit's own standard error; '' otherwise."""
    shown = [words for words, u in value.budget if u >= 0.1 * value.uncertainty]
    if not value.budget or not value.uncertainty > 1.05 * value.stderr or not shown:
        return ""
    return (f"; ± {format_eng(value.stderr, value.unit)} from the fit alone, the rest from "
            f"the {' and the '.join(shown)} (combined as in JCGM 100, section 5)")


def _bound_sentence(fixture: Fixture, value: FittedValue) -> str:
    """Words for a fitted value that ended on one of its bounds."""
    which = "lower" if abs(value.value - value.lower) <= abs(value.upper - value.value) else "upper"
    edge = value.lower if which == "lower" else value.upper
    text = (f"{describe_key(fixture, value.key)} stopped at its {which} bound of "
            f"{format_eng(edge, value.unit)}, so its ± understates the uncertainty")
    if which == "lower" and edge == 0:
        text += (": the data need none of it, or less than none, which no physical value "
                 "can be (if the stated values account for more than was measured, the "
                 "loop findings below say by how much)")
    return text


def spice_sentences(outcomes: list[CandidateOutcome], skipped: str = "") -> list[str]:
    """What went wrong with the SPICE leg: one sentence when ngspice could not be loaded
    (``skipped``: the loader's reason), else one per candidate ngspice could not run.

    Parameters
    ----------
    outcomes
        Every candidate's outcome; :attr:`~xcheck.outcome.CandidateOutcome.ngspice_error`
        holds ngspice's message for a deck it could not run.
    skipped
        Why ngspice could not be loaded, or '' when it was (or was not asked for).

    Returns
    -------
    list of str
        Finished sentences, possibly none.
    """
    if skipped:
        return [_sentence(
            f"The SPICE leg was skipped for every candidate because ngspice could not be "
            f"loaded ({skipped.rstrip('.')}), so the comparison rests on the exact "
            f"state-space engine alone; to add it, install ngspice's shared library: "
            f"{INSTALL_WAYS}")]
    return [_sentence(f"Candidate '{o.name}' has no SPICE leg: {o.ngspice_error.rstrip('.')}")
            for o in outcomes if o.ngspice_error]


def write_verdict(fixture: Fixture, measured: Measured, outcomes: list[CandidateOutcome],
                  loop_findings: tuple[str, ...], findings: tuple = (),
                  next_steps: tuple = (), ngspice_skipped: str = "") -> str:
    """One paragraph a reviewer can read: best candidate, the fitted extra, how much
    worse the as-measured model does, and the measured-side findings.

    Parameters
    ----------
    fixture
        The fixture (part names, labels and tolerances for the wording).
    measured
        The measurement; its findings end the paragraph and its noise sets the misfit
        test (:data:`MISFIT_LIMIT`).
    outcomes
        Every candidate's outcome, best first.
    loop_findings
        Sentences from :func:`write_loop_findings`.
    findings
        Sanity findings (:func:`xcheck.sanity.sanity_findings`): they come first, after
        a misfit warning, as things to check before reading the numbers.
    next_steps
        The readings that would help most (:mod:`xcheck.fitting.next_measurement`).
    ngspice_skipped
        Why ngspice could not be loaded, when the SPICE leg was skipped for every
        candidate: one sentence with the install help (:func:`spice_sentences`).

    Returns
    -------
    str
        The verdict paragraph.
    """
    best = next((o for o in outcomes if o.ranked.rank == 1), None)
    spice = spice_sentences(outcomes, ngspice_skipped)
    if best is None:
        return " ".join(["No candidate could be fitted to this measurement; see each "
                         "candidate's reason below.", *spice])
    parts = []
    misfit = _misfit(best, measured)
    if misfit is not None:
        parts.append(
            f"NO candidate explains this measurement within its noise: the best, "
            f"'{best.name}', leaves residuals {misfit:.1f} times the noise. Check that the "
            "fixture describes this capture (natural or step response, the probed part, "
            "probe polarity and attenuation, the channel) before reading the numbers below"
        )
    for finding in findings:
        parts.append(f"Check first: {finding.text}")
    lead = "The closest candidate" if misfit is not None or findings else (
        "The best explanation of the measurement")
    parts.append(f"{lead} is candidate '{best.name}' ({best.candidate.description})")
    if best.theory is not None:
        parts[-1] += f", NRMSE {best.theory.nrmse:.2%}"
    parts[-1] += "."
    for value in best.fit.fitted:
        if any(value.label in d.members and d.combination in ("sum", "product")
               for d in best.fit.degeneracies):
            continue
        shown = value.value
        if value.at_bound and value.lower == 0 and abs(value.value) <= 1e-9 * max(value.upper, 1e-300):
            shown = 0.0  # on the bound to rounding
        parts.append(
            f"Fitted {describe_key(fixture, value.key)} = {format_eng(shown, value.unit)} ± "
            f"{format_eng(value.uncertainty, value.unit)}{_against_label(fixture, value)}"
            f"{_budget_words(value)}."
        )
        if value.at_bound:
            parts.append(_bound_sentence(fixture, value))
    parts.extend(_degeneracy_sentences(fixture, best))
    sentence = _modes_sentence(best)
    if sentence:
        parts.append(sentence)
    for other in outcomes:
        if other is best or other.failed or other.ranked.evidence != "not distinguishable":
            continue
        parts.append(
            f"Candidate '{other.name}' explains the measurement as well "
            f"(ΔBIC = {other.ranked.delta_bic:.1f}, not distinguishable)"
        )
        parts.extend(_degeneracy_sentences(fixture, other))
    as_measured = next((o for o in outcomes if o.name == "as-measured"), None)
    if as_measured is not None and as_measured is not best:
        if as_measured.failed:
            parts.append(f"The as-measured model could not be fitted ({as_measured.fit.message}).")
        else:
            parts.append(
                f"The as-measured model does worse by ΔBIC = {as_measured.ranked.delta_bic:.1f} "
                f"({as_measured.ranked.evidence} evidence against it)"
                + (f", NRMSE {as_measured.theory.nrmse:.2%}" if as_measured.theory else "")
                + "."
            )
    parts.extend(loop_findings)
    parts.extend(measured.findings)
    if next_steps:
        parts.append(f"Next measurement: {next_steps[0].sentence}")
    parts = [_sentence(p) for p in parts] + spice
    if best.engines_disagree:
        parts.append(
            f"Warning: ngspice and theory differ by {best.engine_disagreement:.2%} of the "
            "amplitude for this candidate, more than numerical precision."
        )
    return " ".join(parts)
