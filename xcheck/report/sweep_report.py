"""``xcheck sweep``'s folder: ``report.md``, ``band.png`` and ``sweep.json``.

Written in one :func:`xcheck.atomic.write_folder_atomically`; an existing folder is
replaced only when it holds an earlier ``sweep.json`` (:func:`sweep_folder_is_ours`).
Every user string in ``report.md`` goes through
:func:`xcheck.report.markdown.escape_markdown`.

``sweep.json`` schema (version 1; keys may be added, never renamed). All numbers SI (s,
V, Hz, 1/s), to 12 significant digits, non-finite ones as null:

- ``schema`` ("xcheck-sweep"), ``schema_version`` (1), ``tool`` {name, version},
  ``title``
- ``seed`` (int), ``engine`` ("exact" or "ngspice"), ``coverage`` (0.9: the 5 % to
  95 % interval), ``digits``, ``runs`` (the trials asked for, or null: adaptive),
  ``chunk_trials``, ``band_trials_max``
- ``measured``: null, or {kind, damped_frequency_hz, neper_frequency_per_s (each
  {value, stderr}), aperiodic}
- ``candidates``: list of {``name``, ``description``, ``trials``, ``no_ring``,
  ``varied`` (list of {value ("L1.value"), stated, source ("tolerance" or "meter"),
  distribution, spread, relative_sigma, extremes [low, high] as factors}),
  ``correlation`` (matrix over ``varied``), ``nominal`` {damped_frequency_hz,
  neper_frequency_per_s}, ``damped_frequency_hz`` and ``neper_frequency_per_s`` (each
  {mean, std, low, high, count}), ``adaptive`` (null, or {batches, batch, converged,
  tolerance {frequency, alpha}}), ``band`` {trials, inside (share of measured samples
  inside, or null), times_s, low, median, high, nominal, measured (or null)},
  ``corners`` (null, or {method ("all" or "first-order"), count, and frequency_low,
  frequency_high, alpha_low, alpha_high each {factors, damped_frequency_hz,
  neper_frequency_per_s}}), ``residual_rms_volts``, ``sensitivities`` (list of {value,
  stated, unit, words, damped_frequency, neper_frequency, residual}: normalised
  (p / y) dy / dp), ``explanations`` (list of {quantity ("frequency" or "damping"),
  measured, stderr, model, agrees, explained_by and not_explained (lists of {value,
  reach [low, high], needed, covers})}), ``sentence``}
- ``notes``, ``inputs`` (list of {role, path, sha256}), ``versions``, ``safety``
  {hazardous, reasons}
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np

from xcheck import __version__
from xcheck.atomic import json_is_ours, write_folder_atomically
from xcheck.report.markdown import _figure_text, escape_markdown
from xcheck.report.summary import summary_text
from xcheck.safety import CAUTION, assess
from xcheck.sweep.montecarlo import CandidateSweep, Corner, Statistics
from xcheck.sweep.sensitivity import AGREEMENT_K, CandidateSensitivity, Explanation
from xcheck.sweep.study import SweepResult
from xcheck.sweep.trials import BAND_TRIALS, CHUNK_TRIALS
from xcheck.values import format_eng

SCHEMA = "xcheck-sweep"
SCHEMA_VERSION = 1
#: Why a folder that fails :func:`sweep_folder_is_ours` is refused.
SWEEP_HINT = "it is not an earlier xcheck sweep: no xcheck sweep.json in it"


def sweep_folder_is_ours(folder: Path) -> bool:
    """True when ``folder`` holds a ``sweep.json`` an earlier ``xcheck sweep`` wrote."""
    return json_is_ours(folder / "sweep.json", schema=SCHEMA)


def _f(value: Any) -> Any:
    """A float, or None when not finite."""
    value = float(value)
    return value if math.isfinite(value) else None


def _list(values: np.ndarray | None) -> list | None:
    return None if values is None else [_f(v) for v in np.asarray(values, float)]


def _stats(item: Statistics) -> dict[str, Any]:
    return {"mean": _f(item.mean), "std": _f(item.std), "low": _f(item.low),
            "high": _f(item.high), "count": item.count}


def _corner(item: Corner) -> dict[str, Any]:
    return {"factors": [_f(x) for x in item.factors],
            "damped_frequency_hz": _f(item.frequency), "neper_frequency_per_s": _f(item.alpha)}


def _explanation(item: Explanation) -> dict[str, Any]:
    return {"value": item.varied.label, "reach": [_f(x) for x in item.reach],
            "needed": _f(item.needed), "covers": _f(item.covers)}


def _candidate_json(sweep: CandidateSweep, found: CandidateSensitivity,
                    correlation: np.ndarray) -> dict[str, Any]:
    band, corners = sweep.band, sweep.corners
    return {
        "name": sweep.candidate, "description": sweep.description, "trials": sweep.trials,
        "no_ring": sweep.no_ring,
        "varied": [{"value": v.label, "stated": _f(v.value), "source": v.source,
                    "distribution": v.distribution, "spread": _f(v.spread),
                    "relative_sigma": _f(v.relative_sigma),
                    "extremes": [_f(x) for x in v.extremes]} for v in sweep.varied],
        "correlation": [[_f(x) for x in row] for row in correlation],
        "nominal": {"damped_frequency_hz": _f(sweep.nominal_frequency),
                    "neper_frequency_per_s": _f(sweep.nominal_alpha)},
        "damped_frequency_hz": _stats(sweep.frequency),
        "neper_frequency_per_s": _stats(sweep.alpha),
        "adaptive": None if sweep.adaptive is None else {
            "batches": sweep.adaptive.batches, "batch": sweep.adaptive.batch,
            "converged": sweep.adaptive.converged,
            "tolerance": {k: _f(v) for k, v in sweep.adaptive.tolerance.items()}},
        "band": {"trials": band.trials, "inside": None if band.inside is None else band.inside,
                 "times_s": _list(band.times), "low": _list(band.low),
                 "median": _list(band.median), "high": _list(band.high),
                 "nominal": _list(band.nominal), "measured": _list(band.measured)},
        "corners": None if corners is None else {
            "method": corners.method, "count": corners.count,
            "frequency_low": _corner(corners.frequency_low),
            "frequency_high": _corner(corners.frequency_high),
            "alpha_low": _corner(corners.alpha_low),
            "alpha_high": _corner(corners.alpha_high)},
        "residual_rms_volts": _f(found.residual),
        "sensitivities": [{"value": s.label, "stated": _f(s.value), "unit": s.unit,
                           "words": s.words, "damped_frequency": _f(s.frequency),
                           "neper_frequency": _f(s.alpha), "residual": _f(s.residual)}
                          for s in found.sensitivities],
        "explanations": [{"quantity": d.quantity, "measured": _f(d.measured),
                          "stderr": _f(d.stderr), "model": _f(d.model), "agrees": d.agrees,
                          "explained_by": [_explanation(e) for e in d.explained_by],
                          "not_explained": [_explanation(e) for e in d.not_explained]}
                         for d in found.discrepancies],
        "sentence": found.sentence,
    }


def sweep_data(result: SweepResult) -> dict[str, Any]:
    """The content of ``sweep.json`` (module docstring)."""
    mc, measured, fixture = result.montecarlo, result.measured, result.fixture
    safety = assess(fixture)
    measured_json = None
    if measured is not None:
        measured_json = {
            "kind": measured.kind, "aperiodic": measured.aperiodic,
            "damped_frequency_hz": {"value": _f(measured.damped_frequency_hz.value),
                                    "stderr": _f(measured.damped_frequency_hz.stderr)},
            "neper_frequency_per_s": {"value": _f(measured.neper_frequency_per_s.value),
                                      "stderr": _f(measured.neper_frequency_per_s.stderr)}}
    candidates = []
    for sweep, found in zip(mc.candidates, result.sensitivity):
        matrix = fixture.spread.matrix([v.part for v in sweep.varied])
        candidates.append(_candidate_json(sweep, found, matrix))
    return {
        "schema": SCHEMA, "schema_version": SCHEMA_VERSION,
        "tool": {"name": "xcheck", "version": __version__}, "title": fixture.title,
        "seed": mc.seed, "engine": mc.engine, "coverage": mc.coverage, "digits": mc.digits,
        "runs": mc.runs, "chunk_trials": CHUNK_TRIALS, "band_trials_max": BAND_TRIALS,
        "measured": measured_json, "candidates": candidates, "notes": list(result.notes),
        "inputs": [{"role": r, "path": p, "sha256": h} for r, p, h in result.inputs],
        "versions": dict(result.versions),
        "safety": {"hazardous": safety.hazardous, "reasons": list(safety.reasons)},
    }


def _eng(value: float | None, unit: str, digits: int = 4) -> str:
    if value is None or not math.isfinite(value):
        return "n/a"
    if unit == "1/s":  # a decay rate reads best as a plain number ("310 m1/s" does not)
        return f"{value:.{digits}g} 1/s"
    return format_eng(value, unit, digits)


def _num(value: float | None, digits: int = 3) -> str:
    return "n/a" if value is None or not math.isfinite(value) else f"{value:.{digits}g}"


def _pct(value: float | None) -> str:
    return "n/a" if value is None or not math.isfinite(value) else f"{100 * value:.3g} %"


def _interval(item: Statistics, unit: str) -> str:
    return f"{_eng(item.low, unit)} to {_eng(item.high, unit)}"


def sweep_markdown(result: SweepResult) -> str:
    """The text of ``report.md``."""
    md = escape_markdown
    mc, fixture, measured = result.montecarlo, result.fixture, result.measured
    safety = assess(fixture)
    low_pct, high_pct = 50 * (1 - mc.coverage), 50 * (1 + mc.coverage)
    lines = [f"# xcheck sweep: {md(fixture.title)}", ""]
    if safety.hazardous:
        lines += [f"> **Caution** ({md('; '.join(safety.reasons))}). {CAUTION}", ""]
    lines += ["## What the tolerances explain", ""]
    for found in result.sensitivity:
        sentence = found.sentence or ("No measurement was given, so there is nothing to "
                                      "explain; the spread below is the prediction's.")
        lines.append(f"- **{md(found.candidate)}**: {md(sentence)}")
    for note in result.notes:
        lines.append(f"- {md(note)}")
    lines += ["", "## Monte Carlo", "",
              f"| candidate | trials | f_d stated | f_d mean ± σ | f_d {low_pct:g}–{high_pct:g} % | "
              f"α stated | α mean ± σ | α {low_pct:g}–{high_pct:g} % | measured inside the band |",
              "|---|---:|---:|---:|---:|---:|---:|---:|---:|"]
    for sweep in mc.candidates:
        f, a = sweep.frequency, sweep.alpha
        lines.append(
            f"| {md(sweep.candidate)} | {sweep.trials} | {_eng(sweep.nominal_frequency, 'Hz')} | "
            f"{_eng(f.mean, 'Hz')} ± {_eng(f.std, 'Hz', 2)} | {_interval(f, 'Hz')} | "
            f"{_eng(sweep.nominal_alpha, '1/s')} | {_eng(a.mean, '1/s')} ± {_eng(a.std, '1/s', 2)} | "
            f"{_interval(a, '1/s')} | {_pct(sweep.band.inside)} |")
    if measured is not None and not measured.aperiodic:
        fd, al = measured.damped_frequency_hz, measured.neper_frequency_per_s
        lines += ["", f"Measured (ring-down estimate): f_d = {_eng(fd.value, 'Hz', 6)} ± "
                  f"{_eng(fd.stderr, 'Hz', 2)}, α = {_eng(al.value, '1/s', 6)} ± "
                  f"{_eng(al.stderr, '1/s', 2)}."]
    lines += ["", "![The band of every candidate over the measurement](band.png)", ""]
    lines += _trials_lines(result)
    lines += ["", "### Values varied", "", "| candidate | value | stated | how it varies | "
              "extremes |", "|---|---|---:|---|---:|"]
    for sweep in mc.candidates:
        if not sweep.varied:
            lines.append(f"| {md(sweep.candidate)} | nothing varies | | | |")
        for v in sweep.varied:
            unit = _unit(result, v.key)
            lines.append(f"| {md(sweep.candidate)} | {md(v.label)} | {_eng(v.value, unit)} | "
                         f"{md(_how(v))} | {_eng(v.value * v.extremes[0], unit)} to "
                         f"{_eng(v.value * v.extremes[1], unit)} |")
    correlated = [c for c in fixture.spread.correlations]
    if correlated:
        lines += ["", "Correlations (Gaussian copula, coefficient of the normal scores): "
                  + md("; ".join(f"{a} with {b}: {c.coefficient:g}"
                                 for c in correlated for a, b in [c.parts])) + "."]
    lines += ["", "## Worst-case corners", "",
              "| candidate | corners | lowest f_d | highest f_d | lowest α | highest α |",
              "|---|---|---:|---:|---:|---:|"]
    for sweep in mc.candidates:
        c = sweep.corners
        if c is None:
            continue
        how = f"{c.count} ({'every value at either extreme' if c.method == 'all' else 'first-order ranking'})"
        lines.append(f"| {md(sweep.candidate)} | {how} | {_eng(c.frequency_low.frequency, 'Hz')} | "
                     f"{_eng(c.frequency_high.frequency, 'Hz')} | {_eng(c.alpha_low.alpha, '1/s')} | "
                     f"{_eng(c.alpha_high.alpha, '1/s')} |")
    lines += ["", "## Sensitivities", "",
              "Normalised, (p / y) dy/dp: the percentage change of f_d, α or the fit's RMS "
              "residual for one percent more of the value (central differences on the exact "
              "engine); — where the output is not defined.", ""]
    for found in result.sensitivity:
        lines += [f"**{md(found.candidate)}** (f_d {_eng(found.frequency, 'Hz')}, α "
                  f"{_eng(found.alpha, '1/s')}, fit residual {_eng(found.residual, 'V', 3)} RMS)",
                  "", "| value | stated | f_d | α | residual |", "|---|---:|---:|---:|---:|"]
        for s in found.sensitivities:
            lines.append(f"| {md(s.label)} ({md(s.words)}) | {_eng(s.value, s.unit)} | "
                         f"{_sens(s.frequency)} | {_sens(s.alpha)} | {_sens(s.residual)} |")
        lines.append("")
    lines += _method_lines(result)
    lines += ["", "## Inputs", "", "| role | file | sha256 |", "|---|---|---|"]
    for role, path, digest in result.inputs:
        lines.append(f"| {md(role)} | {md(path)} | `{md(digest)}` |")
    lines += ["", "## Versions and seeds", ""]
    lines += [f"- {md(name)}: {md(value)}" for name, value in result.versions.items()]
    lines.append(f"- seed of the Monte Carlo draws: {mc.seed} (rerun with --seed {mc.seed} "
                 "for the same numbers, with any number of workers)")
    if not safety.hazardous:
        lines += ["", "---", "", "Working with charged capacitors: " + CAUTION]
    return "\n".join(lines) + "\n"


def _sens(value: float) -> str:
    return "—" if not math.isfinite(value) else f"{value:+.4g}"


def _unit(result: SweepResult, key: tuple[str, str]) -> str:
    spec = result.fixture.field_spec(key)
    return spec.unit if spec is not None else ""


def _how(v) -> str:
    if v.source == "meter":
        return (f"meter reading, lognormal with {100 * v.spread:.2g} % standard uncertainty "
                "(extremes at 3 σ)")
    if v.distribution == "uniform":
        return f"{100 * (v.tolerance or 0):g} % tolerance, uniform (the tolerance is the half-width)"
    return (f"{100 * (v.tolerance or 0):g} % tolerance as {v.extreme_sigmas:g} σ, lognormal "
            f"with {100 * v.spread:.3g} % relative σ")


def _trials_lines(result: SweepResult) -> list[str]:
    mc = result.montecarlo
    lines = []
    for sweep in mc.candidates:
        if sweep.adaptive is not None:
            a = sweep.adaptive
            state = ("stable" if a.converged else "NOT stable (stopped at the trial limit)")
            lines.append(
                f"- {escape_markdown(sweep.candidate)}: {sweep.trials} trials in {a.batches} "
                f"batches of {a.batch} (JCGM 101 section 7.9, {mc.digits} significant digits: "
                f"numerical tolerance {_eng(a.tolerance.get('frequency'), 'Hz', 2)} for f_d, "
                f"{_eng(a.tolerance.get('alpha'), '1/s', 2)} for α; {state}); band from "
                f"{sweep.band.trials} trials")
        else:
            lines.append(f"- {escape_markdown(sweep.candidate)}: {sweep.trials} trials "
                         f"(--runs); band from {sweep.band.trials} trials")
        if sweep.no_ring:
            lines.append(f"  - {sweep.no_ring} trials did not ring and are left out of f_d and α")
    return lines


def _method_lines(result: SweepResult) -> list[str]:
    mc = result.montecarlo
    engine = ("the exact engine (state space, modal sum)" if mc.engine == "exact"
              else "ngspice, one run per trial (corners on the exact engine)")
    return [
        "## Method", "",
        f"Each trial draws every varied value and evaluates the circuit with {engine}. A "
        "uniform tolerance t is the half-width: the value lies in [v (1 − t), v (1 + t)]. A "
        "normal tolerance, and a meter reading's standard uncertainty, is drawn as a "
        "lognormal factor with mean 1 and the stated relative σ, so no value is ever "
        "negative. Correlated values share a Gaussian copula. The number of trials follows "
        "JCGM 101:2008 section 7.9 unless --runs is given. The band is the quantile range "
        f"of the first {BAND_TRIALS} trials' curves at each point; it is the prediction "
        "from the stated values, with no gain, offset or time shift fitted, so an "
        "instrument's error shows as samples outside it. A value explains a measured f_d "
        "or α when moving it alone within its extremes reaches the measurement within "
        f"{AGREEMENT_K:g} standard errors. Trials are drawn in chunks of {CHUNK_TRIALS}, "
        "each from its own seed (numpy SeedSequence spawned by candidate and chunk), so the "
        "numbers depend on the seed alone.",
    ]


def write_sweep_report(result: SweepResult, folder: str | Path) -> Path:
    """Write report.md, band.png and sweep.json into ``folder`` atomically.

    Raises
    ------
    XcheckError
        When ``folder`` exists and is not an earlier sweep (nothing is touched).
    """
    from xcheck.report.sweep_figure import band_figure

    def fill(staging: Path) -> None:
        panels = []
        for sweep in result.montecarlo.candidates:
            band, corners = sweep.band, sweep.corners
            panels.append({"name": _figure_text(f"{sweep.candidate}: {sweep.trials} trials"),
                           "times": band.times, "low": band.low, "median": band.median,
                           "high": band.high, "nominal": band.nominal,
                           "measured": band.measured,
                           "corner_low": None if corners is None else corners.envelope_low,
                           "corner_high": None if corners is None else corners.envelope_high})
        peaks = result.measured is not None and result.measured.kind == "peaks"
        band_figure(staging / "band.png", panels, _figure_text(result.fixture.title), peaks,
                    result.montecarlo.coverage)
        (staging / "sweep.json").write_text(summary_text(sweep_data(result)), encoding="utf-8")
        (staging / "report.md").write_text(sweep_markdown(result), encoding="utf-8")

    return write_folder_atomically(Path(folder), fill, is_ours=sweep_folder_is_ours,
                                   option="--out folder", hint=SWEEP_HINT)
