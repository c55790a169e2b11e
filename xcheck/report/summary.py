"""``summary.json``: the comparison's numbers for machines, built here and only here.

:func:`summary` turns a :class:`~xcheck.outcome.Comparison` into plain JSON-safe data
(the report's markdown is rendered from the same data); :func:`summary_text` writes it.

``summary.json`` schema (version 1, stable; new keys may be added, none renamed):

- ``schema`` ("xcheck-summary"), ``schema_version`` (1), ``tool`` {name, version}
- ``best``: name of the top-ranked candidate, or null when all failed
- ``verdict``: the verdict paragraph
- ``candidates``: list, best first, of {``name``, ``description``, ``rank`` (int or
  null), ``failed`` (bool), ``failure_reason``, ``nrmse``, ``rmse_volts``,
  ``max_error_volts``, ``aic``, ``bic``, ``delta_bic``, ``evidence``, ``fitted`` (object:
  "PART.FIELD" -> SI value), ``fitted_stderr`` (same keys: the fit's own standard error),
  ``fitted_uncertainty`` (same keys: combined with what the fixed values carry, GUM
  section 5), ``uncertainty_budget`` (same keys: list of {from, standard_uncertainty}),
  ``series_resistance_ohm``,
  ``damped_frequency_hz``, ``neper_frequency_per_s``, ``engines`` {theory, ngspice: {rmse,
  nrmse, max_error, aic, bic, damped_frequency_error_hz, neper_frequency_error_per_s} or
  null}, ``engine_disagreement`` (max |ngspice - theory| / amplitude),
  ``engine_notes`` (list of plain-words remarks on the engines' runs: ngspice skipped or
  failed, with its own message; a run retried after its process died),
  ``undetermined`` (list of {members, combination, value, stderr, unit, reason}),
  ``modes`` (list, largest share first, of {frequency_hz, neper_frequency_per_s,
  damping_ratio, share, made_by}: the fitted circuit's natural modes from the exact
  engine)}; ``damped_frequency_hz`` and ``neper_frequency_per_s`` are the
  dominant ringing mode's (null when none rings)
- ``measured``: {``kind``, ``damped_frequency_hz``, ``neper_frequency_per_s``,
  ``initial_volts`` (each {value, stderr}), ``regime`` ("underdamped", or for a record
  that does not ring "overdamped", "critically damped", "first order"),
  ``time_constants_s`` (list of {value, stderr}, slowest first; null when it rings),
  ``envelope_exponential`` (bool; null when it does not ring), ``flagged_extrema``
  (0-based indices in time order), ``findings``, ``alignment``}
- ``findings``: list of {code, text}: what to check before reading the numbers (codes
  ``gain``, ``gain-decade``, ``gain-sign``, ``offset``, ``time-scale``; see
  :mod:`xcheck.sanity`; ``implausible-value``, see :mod:`xcheck.fixture.plausibility`)
- ``next_measurements``: list, best first, of {measure, instrument, improves,
  standard_uncertainty_now (null for a member of a sum the data cannot split),
  standard_uncertainty_after, unit, reduction (1 - after / now), text}: the readings
  that would cut the best candidate's uncertainties most (see
  :mod:`xcheck.fitting.next_measurement`)
- ``inputs``: list of {role, path, sha256}; ``versions``; ``seeds``; ``safety``.
All numbers are SI (s, V, ohm, H, F, Hz, 1/s); non-finite numbers are written as null.
Numbers are written to :data:`SIGNIFICANT_DIGITS` significant digits, so that the same
comparison gives the same bytes, and differences in the last bits of floating-point
arithmetic between machines rarely show.
"""

from __future__ import annotations

import json
import math
import numbers
import platform
from typing import Any

import numpy as np

from xcheck import __version__
from xcheck.measured import Measured, display_path
from xcheck.outcome import CandidateOutcome, Comparison, EngineMetrics
from xcheck.report.ringdown_json import alignment_json
from xcheck.safety import assess

SCHEMA = "xcheck-summary"
SCHEMA_VERSION = 1
#: Significant digits of every number written to summary.json. Doubles carry about 16;
#: the last few differ between machines (BLAS, libm, instruction sets), and no estimate
#: here is known to better than about 1e-9 relative.
SIGNIFICANT_DIGITS = 12


def _finite(value: Any) -> Any:
    """A real number as a float, or None when it is missing or not finite; anything
    else (strings, booleans, containers) unchanged."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        return value
    return float(value) if math.isfinite(value) else None


def library_versions(ngspice: str) -> dict[str, str]:
    """Versions of the tool and of the libraries that make the numbers.

    Parameters
    ----------
    ngspice
        The ngspice version that ran ("" when ngspice was not used).

    Returns
    -------
    dict
        Name -> version text, for ``xcheck``, ``ngspice``, ``numpy``, ``scipy`` and
        ``python``.
    """
    import scipy

    return {
        "xcheck": __version__,
        "ngspice": ngspice or "not used",
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "python": platform.python_version(),
    }


def versions(comparison: Comparison) -> dict[str, str]:
    """:func:`library_versions` with the ngspice ``comparison`` ran with."""
    return library_versions(comparison.ngspice_version)


def _engine_json(metrics: EngineMetrics | None) -> dict[str, Any] | None:
    if metrics is None:
        return None
    return {
        "rmse": _finite(metrics.rmse),
        "nrmse": _finite(metrics.nrmse),
        "max_error": _finite(metrics.max_error),
        "aic": _finite(metrics.aic),
        "bic": _finite(metrics.bic),
        "damped_frequency_error_hz": _finite(metrics.damped_frequency_error_hz),
        "neper_frequency_error_per_s": _finite(metrics.neper_frequency_error_per_s),
    }


def _candidate_json(outcome: CandidateOutcome) -> dict[str, Any]:
    fit = outcome.fit
    theory = outcome.theory
    # The dominant ringing mode of the exact engine (the closed form's numbers where it
    # applies are the same to its accuracy).
    ring = next((m for m in outcome.modes if m.rings), None)
    return {
        "name": outcome.name,
        "description": outcome.candidate.description,
        "rank": outcome.ranked.rank,
        "failed": bool(outcome.failed),
        "failure_reason": fit.message if outcome.failed else None,
        "nrmse": _finite(theory.nrmse) if theory else None,
        "rmse_volts": _finite(theory.rmse) if theory else None,
        "max_error_volts": _finite(theory.max_error) if theory else None,
        "aic": _finite(fit.aic),
        "bic": _finite(fit.bic),
        "delta_bic": _finite(outcome.ranked.delta_bic),
        "evidence": outcome.ranked.evidence,
        "fitted": {v.label: _finite(v.value) for v in fit.fitted},
        "fitted_stderr": {v.label: _finite(v.stderr) for v in fit.fitted},
        "fitted_uncertainty": {v.label: _finite(v.uncertainty) for v in fit.fitted},
        "uncertainty_budget": {v.label: [{"from": words, "standard_uncertainty": _finite(u)}
                                         for words, u in v.budget] for v in fit.fitted},
        "series_resistance_ohm": _finite(outcome.series_resistance_ohm),
        "damped_frequency_hz": _finite(ring.frequency_hz) if ring else None,
        "neper_frequency_per_s": _finite(ring.alpha) if ring else None,
        "modes": [
            {"frequency_hz": _finite(m.frequency_hz), "neper_frequency_per_s": _finite(m.alpha),
             "damping_ratio": _finite(m.zeta), "share": _finite(m.share),
             "made_by": list(m.makers)}
            for m in outcome.modes
        ],
        "engines": {"theory": _engine_json(outcome.theory), "ngspice": _engine_json(outcome.ngspice)},
        "engine_disagreement": _finite(outcome.engine_disagreement),
        "engine_notes": list(outcome.engine_notes),
        "undetermined": [
            {
                "members": list(d.members),
                "combination": d.combination,
                "value": _finite(d.value),
                "stderr": _finite(d.stderr),
                "unit": d.unit,
                "reason": d.reason,
            }
            for d in fit.degeneracies
        ],
    }


def _pair(estimate) -> dict[str, float | None]:
    """{value, stderr, crb} of one estimated quantity (crb null when it has none)."""
    return {"value": _finite(estimate.value), "stderr": _finite(estimate.stderr),
            "crb": _finite(getattr(estimate, "crb", None))}


def _measured_json(measured: Measured) -> dict[str, Any]:
    """The ``measured`` object of summary.json."""
    est = measured.estimate
    data: dict[str, Any] = {
        "kind": measured.kind,
        "source": display_path(measured.source),
        "damped_frequency_hz": _pair(measured.damped_frequency_hz),
        "neper_frequency_per_s": _pair(measured.neper_frequency_per_s),
        "initial_volts": _pair(est.initial_volts),
        "regime": est.regime if measured.aperiodic else "underdamped",
        "time_constants_s": ([_pair(t) for t in est.time_constants] if measured.aperiodic
                             else None),
        "envelope_exponential": (None if measured.aperiodic
                                 else bool(est.envelope_exponential)),
        "flagged_extrema": ([] if measured.aperiodic
                            else [int(i) for i in est.flagged_extrema]),
        "noise_sigma_volts": _finite(est.noise_sigma),
        "effective_samples": _finite(est.effective_samples),
        "samples_excluded": int(measured.excluded.sum()),
        "findings": list(measured.findings),
        "notes": list(measured.notes),
    }
    if measured.alignment is not None:
        data["alignment"] = {k: _finite(v) for k, v in alignment_json(measured.alignment).items()}
    return data


def summary(comparison: Comparison) -> dict[str, Any]:
    """The ``summary.json`` content (see the module docstring for the schema).

    Parameters
    ----------
    comparison
        The result of :func:`xcheck.compare.run_comparison`.

    Returns
    -------
    dict
        JSON-safe data at full precision (non-finite numbers are None);
        :func:`summary_text` rounds it when writing.
    """
    best = comparison.best
    safety = assess(comparison.fixture)
    return {
        "schema": SCHEMA,
        "schema_version": SCHEMA_VERSION,
        "tool": {"name": "xcheck", "version": __version__},
        "title": comparison.fixture.title,
        "best": best.name if best else None,
        "verdict": comparison.verdict,
        "candidates": [_candidate_json(o) for o in comparison.outcomes],
        "measured": _measured_json(comparison.measured),
        "loop_findings": list(comparison.loop_findings),
        "findings": [{"code": f.code, "text": f.text} for f in comparison.findings],
        "next_measurements": [
            {"measure": m.measure, "instrument": m.instrument, "improves": m.improves,
             "standard_uncertainty_now": _finite(m.before),
             "standard_uncertainty_after": _finite(m.after), "unit": m.unit,
             "reduction": _finite(m.reduction), "text": m.sentence}
            for m in comparison.next_measurements],
        "inputs": [{"role": i.role, "path": i.path, "sha256": i.sha256} for i in comparison.inputs],
        "versions": versions(comparison),
        "seeds": dict(comparison.seeds),
        "safety": {
            "max_volts": _finite(safety.max_volts),
            "stored_energy_joules": _finite(safety.stored_energy_joules),
            "hazardous": safety.hazardous,
        },
    }


def _rounded(data: Any, digits: int) -> Any:
    """``data`` with every float rounded to ``digits`` significant digits."""
    if isinstance(data, float):
        return float(f"{data:.{digits}g}")
    if isinstance(data, dict):
        return {key: _rounded(value, digits) for key, value in data.items()}
    if isinstance(data, (list, tuple)):
        return [_rounded(value, digits) for value in data]
    return data


def summary_text(data: dict[str, Any]) -> str:
    """The bytes of ``summary.json`` (as text) for :func:`summary`'s ``data``.

    Parameters
    ----------
    data
        The output of :func:`summary`.

    Returns
    -------
    str
        Indented JSON, floats to :data:`SIGNIFICANT_DIGITS` significant digits, ending
        in a newline.

    Raises
    ------
    ValueError
        When a non-finite number slipped through (JSON has no NaN or infinity).
    """
    rounded = _rounded(data, SIGNIFICANT_DIGITS)
    return json.dumps(rounded, indent=2, allow_nan=False) + "\n"
