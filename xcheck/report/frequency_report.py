"""A frequency comparison's folder: ``report.md``, ``bode.png`` and ``summary.json``.

Rendered from a :class:`~xcheck.frequency_compare.FrequencyComparison` only; every user
string in ``report.md`` goes through :func:`xcheck.report.markdown.escape_markdown`.

``summary.json`` for a sweep has the schema of :mod:`xcheck.report.summary` (``schema``
"xcheck-summary", version 1): ``best``, ``verdict``, ``inputs``, ``versions``,
``safety``, and the sweep's figures under the key ``frequency_sweep`` (added in version
1; a sweep-only comparison has no ``measured`` or time-domain ``candidates``):

- ``measured``: {``quantity``, ``unit``, ``what`` (the ``[swept]`` table in words),
  ``points``, ``start_hz``, ``stop_hz``, ``errors_stated`` (bool), ``resonances``}
- ``joint`` (bool): the candidates were fitted to a time capture as well
- ``candidates``: list, best first, of {``name``, ``description``, ``rank`` (int or
  null), ``failed``, ``failure_reason``, ``bic``, ``delta_bic``, ``evidence``,
  ``rms_log_error`` (RMS of |ln(H_model / H_measured)|), ``fitted``, ``fitted_stderr``
  (objects "PART.FIELD" -> SI value), ``frequency_laws`` (list of {kind, target}),
  ``engine_disagreement`` (max |ln(H_ngspice / H_exact)|, null without ngspice),
  ``ngspice_note``, ``resonances``, ``undetermined`` (list of {members, reason})}
- each resonance: {``frequency_hz``, ``magnitude``, ``kind`` ("minimum" or "maximum"),
  ``q``, ``q_method``}
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from xcheck import __version__
from xcheck.atomic import REPORT_HINT, report_folder_is_ours, write_folder_atomically
from xcheck.capture.resonance import Resonance
from xcheck.frequency_compare import FrequencyComparison, SweepOutcome
from xcheck.report.markdown import escape_markdown
from xcheck.report.summary import (SCHEMA, SCHEMA_VERSION, _finite, library_versions,
                                   summary_text)
from xcheck.safety import CAUTION, assess
from xcheck.values import format_eng

FIGURE = "bode.png"
#: Units of the law coefficients (not fixture fields) for the report.
UNIT_WORDS = {"ohm": "Ω", "H": "H", "F": "F", "1": "", "ohm/sqrt(Hz)": "Ω/√Hz"}


def _value(value: float, unit: str) -> str:
    symbol = UNIT_WORDS.get(unit, unit)
    if unit in ("1", "ohm/sqrt(Hz)"):
        return f"{value:.4g}{(' ' + symbol) if symbol else ''}"
    return format_eng(value, symbol)


def _resonance_json(items: Sequence[Resonance]) -> list[dict[str, Any]]:
    return [{"frequency_hz": _finite(r.frequency), "magnitude": _finite(r.magnitude),
             "kind": r.kind, "q": _finite(r.q), "q_method": r.q_method} for r in items]


def _resonance_words(items: Sequence[Resonance], unit: str) -> str:
    if not items:
        return "none"
    symbol = "|Z|" if unit == "ohm" else "|H|"
    parts = []
    for r in items:
        q = f", Q {r.q:.3g}" if r.q is not None and math.isfinite(r.q) else ""
        parts.append(f"{symbol} {r.kind} at {format_eng(r.frequency, 'Hz')}{q}")
    return "; ".join(parts)


def _ordered(comparison: FrequencyComparison) -> list[tuple[SweepOutcome, Any]]:
    by_name = {o.name: o for o in comparison.outcomes}
    return [(by_name[r.name], r) for r in comparison.ranking]


def frequency_verdict(comparison: FrequencyComparison) -> str:
    """The verdict paragraph of a frequency comparison."""
    setting = comparison.fixture.swept
    what = setting.describe() if setting is not None else "the sweep"
    both = " and the time capture together" if comparison.joint else ""
    best = comparison.best
    if best is None:
        return (f"No candidate could be fitted to the sweep ({what}){both}; every fit "
                "failed (the reasons are in the table below).")
    ranked = dict((r.name, r) for r in comparison.ranking)
    words = [f"The best explanation of the sweep ({what}){both} is candidate "
             f"'{best.name}' ({best.candidate.description}), RMS error "
             f"{100 * best.rms_log_error:.3g} % of the magnitude."]
    fitted = [f"{v.label} = {_value(v.value, v.unit)} ± {_value(v.stderr, v.unit)}"
              for v in best.fit.fitted if math.isfinite(v.stderr)]
    if fitted:
        words.append("Fitted: " + "; ".join(fitted) + ".")
    for group in best.fit.degeneracies:
        words.append(f"The data determine only a combination of {', '.join(group.members)}.")
    runner = [r for r in comparison.ranking if r.rank is not None and r.rank > 1]
    if runner:
        second = runner[0]
        words.append(f"The next candidate, '{second.name}', does worse by ΔBIC = "
                     f"{second.delta_bic:.1f} ({second.evidence} evidence against it).")
    lumped = ranked.get("lumped")
    if best.laws and lumped is not None and lumped.rank is not None and lumped.rank > 1:
        words.append(f"A loss that grows with frequency is needed: the lumped model "
                     f"(constant values) does worse by ΔBIC = {lumped.delta_bic:.1f}.")
    words.append("Resonances measured: "
                 f"{_resonance_words(comparison.resonances, comparison.sweep.unit)}; in "
                 f"the best model: {_resonance_words(best.resonances, comparison.sweep.unit)}.")
    return " ".join(words)


def frequency_summary(comparison: FrequencyComparison,
                      inputs: Sequence[tuple[str, str, str]] = ()) -> dict[str, Any]:
    """The JSON data of ``summary.json`` (see the module docstring)."""
    sweep = comparison.sweep
    setting = comparison.fixture.swept
    safety = assess(comparison.fixture)
    candidates = []
    for outcome, ranked in _ordered(comparison):
        fit = outcome.fit
        candidates.append({
            "name": outcome.name, "description": outcome.candidate.description,
            "rank": ranked.rank, "failed": fit.failed,
            "failure_reason": fit.message if fit.failed else None,
            "bic": _finite(fit.bic), "delta_bic": _finite(ranked.delta_bic),
            "evidence": ranked.evidence, "rms_log_error": _finite(outcome.rms_log_error),
            "fitted": {v.label: _finite(v.value) for v in fit.fitted},
            "fitted_stderr": {v.label: _finite(v.stderr) for v in fit.fitted},
            "frequency_laws": [{"kind": law.kind, "target": f"{law.target[0]}.{law.target[1]}"}
                               for law in outcome.laws],
            "engine_disagreement": _finite(outcome.engines_differ),
            "ngspice_note": outcome.ngspice_note,
            "resonances": _resonance_json(outcome.resonances),
            "undetermined": [{"members": list(g.members), "reason": g.reason}
                             for g in fit.degeneracies],
        })
    best = comparison.best
    return {
        "schema": SCHEMA, "schema_version": SCHEMA_VERSION,
        "tool": {"name": "xcheck", "version": __version__},
        "best": best.name if best is not None else None,
        "verdict": frequency_verdict(comparison),
        "frequency_sweep": {
            "measured": {
                "quantity": sweep.quantity, "unit": sweep.unit,
                "what": setting.describe() if setting is not None else None,
                "points": len(sweep), "start_hz": float(sweep.frequency[0]),
                "stop_hz": float(sweep.frequency[-1]),
                "errors_stated": sweep.relative_error is not None,
                "resonances": _resonance_json(comparison.resonances),
            },
            "joint": comparison.joint,
            "candidates": candidates,
            "notes": list(comparison.notes),
        },
        "inputs": [{"role": r, "path": p, "sha256": h} for r, p, h in inputs],
        "versions": library_versions(comparison.ngspice_version),
        "safety": {"max_volts": _finite(safety.max_volts),
                   "stored_energy_joules": _finite(safety.stored_energy_joules),
                   "hazardous": safety.hazardous},
    }


def frequency_markdown(comparison: FrequencyComparison, data: dict[str, Any]) -> str:
    """``report.md`` of a frequency comparison."""
    e = escape_markdown
    sweep = comparison.sweep
    lines = [f"# xcheck: {e(comparison.fixture.title)}", "", "## Verdict", "",
             e(data["verdict"]), "", f"![Measured sweep and every candidate]({FIGURE})", "",
             "## Candidates", "",
             "| rank | candidate | ΔBIC | evidence vs best | RMS error (log-ratio) | "
             "ngspice vs exact | note |",
             "|---:|---|---:|---|---:|---:|---|"]
    for item in data["frequency_sweep"]["candidates"]:
        rank = item["rank"] if item["rank"] is not None else "—"
        delta = f"{item['delta_bic']:.3g}" if item["delta_bic"] is not None else "—"
        rms = f"{100 * item['rms_log_error']:.3g} %" if item["rms_log_error"] is not None else "—"
        differ = (f"{item['engine_disagreement']:.2g}" if item["engine_disagreement"] is not None
                  else "—")
        note = item["failure_reason"] or item["ngspice_note"] or ""
        lines.append(f"| {rank} | {e(item['name'])} | {delta} | {e(item['evidence'])} | {rms} | "
                     f"{differ} | {e(note)} |")
    lines += ["", "Evidence words follow Kass & Raftery (1995), ΔBIC read as 2 ln B: < 2 not "
              "distinguishable, 2–6 positive, 6–10 strong, > 10 very strong. The residual "
              "of each point is ln(H_model / H_measured): its real part the relative error "
              "of the magnitude, its imaginary part the phase error.", "",
              "## Fitted values", ""]
    for outcome, ranked in _ordered(comparison):
        if outcome.fit.failed or not outcome.fit.fitted:
            continue
        values = "; ".join(f"{v.label} = {_value(v.value, v.unit)} ± {_value(v.stderr, v.unit)}"
                           for v in outcome.fit.fitted)
        lines.append(f"- **{e(outcome.name)}**: {e(values)}")
    lines += ["", "## Resonances", "", "| where | kind | frequency | magnitude | Q |",
              "|---|---|---:|---:|---:|"]
    rows = [("measured", comparison.resonances)] + [
        (o.name, o.resonances) for o, _ in _ordered(comparison) if o.exact is not None]
    for where, items in rows:
        for r in items:
            q = f"{r.q:.3g} ({r.q_method})" if r.q is not None and math.isfinite(r.q) else "—"
            lines.append(f"| {e(where)} | {r.kind} | {format_eng(r.frequency, 'Hz')} | "
                         f"{_value(r.magnitude, sweep.unit)} | {e(q)} |")
    measured = data["frequency_sweep"]["measured"]
    lines += ["", "## Measured sweep", "",
              f"{e(measured['what'])}: {measured['points']} points from "
              f"{format_eng(measured['start_hz'], 'Hz')} to {format_eng(measured['stop_hz'], 'Hz')}"
              f" ({e(sweep.quantity)}, {e(sweep.unit)}); standard errors "
              f"{'stated' if measured['errors_stated'] else 'not stated'}. Resonances: "
              f"{e(_resonance_words(comparison.resonances, sweep.unit))}."]
    for note in comparison.notes + tuple(sweep.notes):
        lines.append(f"- {e(note)}")
    lines += ["", "## Inputs", "", "| role | file | sha256 |", "|---|---|---|"]
    lines += [f"| {e(i['role'])} | {e(i['path'])} | `{i['sha256']}` |" for i in data["inputs"]]
    lines += ["", "## Versions", ""]
    lines += [f"- {name}: {e(version)}" for name, version in data["versions"].items()]
    lines += ["", "---", "", f"Working with charged capacitors: {CAUTION}", ""]
    return "\n".join(lines)


def write_frequency_report(comparison: FrequencyComparison, folder: str | Path, *,
                           inputs: Sequence[tuple[str, str, str]] = ()) -> Path:
    """Write ``report.md``, ``bode.png`` and ``summary.json`` into ``folder`` atomically
    (replacing only an earlier xcheck report, :func:`xcheck.atomic.write_folder_atomically`)."""
    from xcheck.report.bode_figure import write_bode_figure
    from xcheck.report.markdown import _figure_text

    def fill(staging: Path) -> None:
        data = frequency_summary(comparison, inputs)
        curves = [(_figure_text(o.name), o.exact) for o, r in _ordered(comparison)
                  if o.exact is not None]
        marks = [(_figure_text(f"measured {r.kind}"), r.frequency)
                 for r in comparison.resonances]
        write_bode_figure(staging / FIGURE, np.asarray(comparison.sweep.frequency, float),
                          np.asarray(comparison.sweep.value, complex), curves,
                          title=_figure_text(comparison.fixture.title),
                          unit=comparison.sweep.unit, resonances=marks)
        (staging / "summary.json").write_text(summary_text(data), encoding="utf-8")
        (staging / "report.md").write_text(frequency_markdown(comparison, data),
                                           encoding="utf-8")

    return write_folder_atomically(Path(folder), fill,
                                   is_ours=lambda path: report_folder_is_ours(path, SCHEMA),
                                   option="--out folder", hint=REPORT_HINT)
