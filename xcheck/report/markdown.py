"""Render a :class:`~xcheck.outcome.Comparison` as ``report.md``, PNGs and ``summary.json``.

The folder is written atomically: everything goes into a temporary sibling folder that
replaces the target only when complete. An existing folder is replaced only when it is
an earlier xcheck report (it holds a ``summary.json`` that says so); anything else is
left alone and reported as an error.

``summary.json`` is built by :mod:`xcheck.report.summary` (its schema is documented
there); the markdown is rendered from the same data.
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import Any

import numpy as np

from xcheck.outcome import Comparison
from xcheck.atomic import REPORT_HINT, report_folder_is_ours, write_folder_atomically
from xcheck.report.figures import envelope_figure, overlay_figure, residual_figure
from xcheck.fixture.schema import label_key
from xcheck.report.summary import SCHEMA, summary, summary_text
from xcheck.safety import CAUTION, assess
from xcheck.values import format_eng

FIGURES = ("overlay.png", "residuals.png", "envelope.png")
NUISANCE_UNITS = {"offset": "V", "shift": "s", "time_origin": "s"}


#: Characters that start HTML or markdown syntax: ``&<>`` become entities; the markdown
#: punctuation (link and image brackets, code spans, table cells) gets a backslash.
_HTML = {"&": "&amp;", "<": "&lt;", ">": "&gt;"}
_MARKDOWN_PUNCTUATION = "\\`[]()!|"
#: Line breaks and other control characters (C0, DEL, C1, Unicode line/paragraph separators).
_BREAKS = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029]+")
#: Starts of bare addresses that GitHub-flavoured markdown turns into links by itself.
_BARE_ADDRESS = re.compile(r"(?i)(?<=\bwww)\.|:(?=//)")


def escape_markdown(value: object) -> str:
    """``value`` as inert markdown text: it renders as itself, on one line.

    Every user string that reaches ``report.md`` (fixture title, part and candidate names,
    descriptions, file names, messages quoting them) goes through this one function, so that
    no raw HTML (``<img onerror=...>``, ``<script>``), markdown link or image, code span,
    table-cell break or new line written in a fixture can take effect on a review site.

    Parameters
    ----------
    value
        Any object; its ``str()`` is escaped.

    Returns
    -------
    str
        The text with ``&<>`` as HTML entities, each of ``\\ ` [ ] ( ) ! |`` preceded by a
        backslash (CommonMark backslash escapes), every run of line breaks or control
        characters folded to one space, and the ``:`` of ``://`` and the ``.`` of ``www.``
        escaped so that a bare address is not turned into a link (GitHub-flavoured autolinks).
    """
    text = _BREAKS.sub(" ", str(value))
    text = "".join(_HTML.get(c) or ("\\" + c if c in _MARKDOWN_PUNCTUATION else c) for c in text)
    return _BARE_ADDRESS.sub(lambda match: "\\" + match.group(0), text)


def _figure_text(value: object) -> str:
    """``value`` for a matplotlib title or legend: one line, ``$`` not read as mathtext."""
    return _BREAKS.sub(" ", str(value)).replace("$", r"\$")


def _pct(value: float | None) -> str:
    return "n/a" if value is None or not math.isfinite(value) else f"{100 * value:.3g} %"


def _num(value: float | None, digits: int = 4) -> str:
    return "n/a" if value is None or not math.isfinite(value) else f"{value:.{digits}g}"


def markdown(comparison: Comparison, data: dict[str, Any]) -> str:
    """The text of ``report.md``."""
    fixture = comparison.fixture
    safety = assess(fixture)
    md = escape_markdown
    lines = [f"# xcheck report: {md(fixture.title)}", ""]
    if safety.hazardous:
        lines += [f"> **Caution** ({md('; '.join(safety.reasons))}). {CAUTION}", ""]
    lines += ["## Verdict", "", md(comparison.verdict), "", "![Measured and every candidate](overlay.png)", ""]
    lines += ["## Candidates, ranked by BIC", "",
              "| rank | candidate | ΔBIC | evidence vs best | NRMSE (theory) | NRMSE (ngspice) | "
              "series R | f_d | α | engines differ by | status |",
              "|---:|---|---:|---|---:|---:|---:|---:|---:|---:|---|"]
    for outcome, item in zip(comparison.outcomes, data["candidates"]):
        ng = item["engines"]["ngspice"]
        status = "failed: " + md(item["failure_reason"]) if item["failed"] else (
            "engines disagree" if outcome.engines_disagree else "ok")
        lines.append(
            f"| {item['rank'] or '–'} | {md(item['name'])} | {_num(item['delta_bic'], 3)} | "
            f"{item['evidence']} | {_pct(item['nrmse'])} | {_pct(ng['nrmse'] if ng else None)} | "
            f"{_eng(item['series_resistance_ohm'], 'ohm')} | {_eng(item['damped_frequency_hz'], 'Hz')} | "
            f"{_num(item['neper_frequency_per_s'])} /s | {_pct(item['engine_disagreement'])} | {status} |"
        )
    # Per-candidate remarks on the engines (a deck ngspice rejected, a run retried); a
    # leg skipped for every candidate is said once, in the verdict, not here.
    noted = [(item["name"], note) for item in data["candidates"]
             for note in item.get("engine_notes", [])
             if not note.startswith("ngspice leg skipped")]
    if noted:
        lines += ["", "Engine notes:", ""]
        lines += [f"- {md(name)}: {md(note)}" for name, note in noted]
    lines += ["", "Evidence words follow Kass & Raftery (1995), ΔBIC read as 2 ln B: < 2 not "
              "distinguishable (their words: not worth more than a bare mention), 2–6 positive, "
              "6–10 strong, > 10 very strong. AIC and BIC use the effective sample count "
              f"n_eff = {_num(comparison.observation.n_effective, 4)}.", ""]
    lines += ["## Fitted values", "", "| candidate | value | fitted | ± standard error (fit) | "
              "± with the fixed values' uncertainty | start | note |",
              "|---|---|---:|---:|---:|---:|---|"]
    for outcome in comparison.outcomes:
        for value in outcome.fit.fitted:
            note = "at a bound" if value.at_bound else ""
            for group in outcome.fit.degeneracies:
                if value.label in group.members:
                    held = [m for m in group.members if m != value.label]
                    shown = ", ".join(
                        f"{md(m)} held at {format_eng(outcome.fit.parameters.get(label_key(m), 0.0) or 0.0, group.unit or value.unit)}"
                        for m in held)
                    note = (f"only the {group.combination} with {md(', '.join(held))} is determined "
                            f"({shown}); the ± applies to the {group.combination}")
            lines.append(
                f"| {md(outcome.name)} | {md(value.label)} | {format_eng(value.value, value.unit, 4)} | "
                f"{format_eng(value.stderr, value.unit, 2)} | {format_eng(value.uncertainty, value.unit, 2)} | "
                f"{format_eng(value.start, value.unit)} | {note} |"
            )
        for name, (value, stderr) in outcome.fit.nuisance.items():
            unit = NUISANCE_UNITS.get(name, "")
            shown = (f"{format_eng(value, unit, 4)} | {format_eng(stderr, unit, 2)}" if unit
                     else f"{_num(value)} | {_num(stderr, 2)}")
            lines.append(f"| {md(outcome.name)} | {name} (nuisance) | {shown} | | | |")
    lines += ["", "The second ± adds what the values each candidate holds fixed carry into it: "
              "meter readings (1 % of a measured L or C; 1 % + 10 mΩ of a two-wire reading) and "
              "label tolerances (as the half-width of a rectangular distribution), propagated "
              "through the fit's sensitivities as in JCGM 100 (the GUM), section 5; other stated "
              "values are taken as exact.", ""]
    lines += ["Nuisance values, fitted in every candidate so that none loses to the instrument: "
              "gain (probe attenuation and true initial voltage, 1 = as stated), offset (scope DC "
              "offset, V), shift (error of the detected event time, s); for a peak table, amplitude "
              "(1 = as predicted) and time_origin (s).", ""]
    best = next((o for o in comparison.outcomes if o.ranked.rank == 1), None)
    if best is not None and best.modes:
        lines += [f"## Natural modes of '{md(best.name)}'", "",
                  "| frequency | α (decay rate) | ζ | share of the response | made by |",
                  "|---:|---:|---:|---:|---|"]
        for mode in best.modes:
            freq = format_eng(mode.frequency_hz, "Hz", 4) if mode.rings else "does not ring"
            lines.append(f"| {freq} | {format_eng(mode.alpha, '1/s', 4)} | {mode.zeta:.3g} | "
                         f"{100 * mode.share:.3g} % | {md(', '.join(mode.makers))} |")
        lines += ["", "From the exact state space of the fitted circuit; a mode is made by the "
                  "elements that hold most of its energy.", ""]
    lines += ["## What this measurement cannot separate", ""]
    any_group = False
    for outcome in comparison.outcomes:
        for group in outcome.fit.degeneracies:
            any_group = True
            value = (format_eng(group.value, group.unit) if group.combination == "sum"
                     else _num(group.value))
            lines.append(f"- **{md(outcome.name)}**: {group.combination} of {md(', '.join(group.members))} "
                         f"= {value}. {md(group.reason)}.")
    if not any_group:
        lines.append("- Every fitted value is determined separately by this measurement.")
    if comparison.next_measurements:
        lines += ["", "## Next measurement", "",
                  "Readings that would cut the best candidate's uncertainties most (first-order "
                  "propagation, JCGM 100 section 5; meter accuracies assumed as stated):", ""]
        lines += [f"{k}. {md(m.sentence[0].upper() + m.sentence[1:])}."
                  for k, m in enumerate(comparison.next_measurements, 1)]
    lines += ["", "## Measured ring-down", ""]
    lines += _measured_lines(data["measured"])
    lines += ["", "![Residuals per candidate](residuals.png)", ""]
    if data["measured"].get("envelope_exponential") is not None:
        lines += ["![Envelope of the extrema](envelope.png)", ""]
    lines += ["## Inputs", "", "| role | file | sha256 |", "|---|---|---|"]
    for item in data["inputs"]:
        lines.append(f"| {md(item['role'])} | {md(item['path'])} | `{md(item['sha256'])}` |")
    lines += ["", "## Versions and seeds", ""]
    lines += [f"- {md(name)}: {md(value)}" for name, value in data["versions"].items()]
    lines += [f"- seed {md(name)}: {md(value)}" for name, value in data["seeds"].items()]
    if not data["seeds"]:
        lines.append("- no random numbers were drawn for this report")
    if not safety.hazardous:
        lines += ["", "---", "", "Working with charged capacitors: " + CAUTION]
    return "\n".join(lines) + "\n"


def _eng(value: float | None, unit: str) -> str:
    return "n/a" if value is None or not math.isfinite(value) else format_eng(value, unit, 4)


_MEASURED_ROWS = (
    ("damped_frequency_hz", "damped frequency f_d", "Hz"),
    ("neper_frequency_per_s", "neper frequency α (decay rate)", "1/s"),
    ("initial_volts", "voltage at the event", "V"),
)


def _measured_lines(measured: dict[str, Any]) -> list[str]:
    lines = ["| quantity | value | ± standard error | Cramér-Rao bound |", "|---|---:|---:|---:|"]
    for key, words, unit in _MEASURED_ROWS:
        item = measured.get(key) or {}
        crb = item.get("crb")
        lines.append(f"| {words} | {_num(item.get('value'), 6)} {unit} | "
                     f"{_num(item.get('stderr'), 3)} {unit} | "
                     f"{_num(crb, 3) + ' ' + unit if crb is not None else 'n/a'} |")
    alignment = measured.get("alignment")
    if alignment:
        lines += ["", f"- event at {_eng(alignment['event_time_s'], 's')} in the file's time base"
                  f"{' (given by hand)' if alignment['manual'] else ''}; pre-event level "
                  f"{_eng(alignment['baseline_volts'], 'V')}, noise {_eng(alignment['noise_rms_volts'], 'V')} RMS"]
    if measured.get("time_constants_s"):
        taus = ", ".join(f"{_eng(t['value'], 's')} ± {_eng(t['stderr'], 's')}"
                         for t in measured["time_constants_s"])
        lines += ["", f"- does not ring: {escape_markdown(measured.get('regime'))}, time "
                  f"constants {taus}"]
    else:
        lines += ["", f"- envelope is one exponential: {'yes' if measured.get('envelope_exponential') else 'no'}",
                  f"- flagged extrema (0-based, time order): {measured.get('flagged_extrema') or 'none'}"]
    for finding in measured.get("notes", []) or measured.get("findings", []):
        lines.append(f"- {escape_markdown(finding)}")
    return lines


def write_report(comparison: Comparison, folder: str | Path) -> Path:
    """Write report.md, the PNGs and summary.json into ``folder`` atomically.

    Parameters
    ----------
    comparison
        The result of :func:`xcheck.compare.run_comparison`.
    folder
        Target folder; created if missing, replaced only if it is empty or holds an
        earlier report (:func:`xcheck.atomic.write_folder_atomically`).

    Returns
    -------
    Path
        The folder written.

    Raises
    ------
    XcheckError
        When ``folder`` exists and is not an earlier xcheck report (nothing is touched).
    """

    def fill(staging: Path) -> None:
        data = summary(comparison)
        _write_figures(comparison, staging)
        (staging / "summary.json").write_text(summary_text(data), encoding="utf-8")
        (staging / "report.md").write_text(markdown(comparison, data), encoding="utf-8")

    return write_folder_atomically(Path(folder), fill,
                                   is_ours=lambda path: report_folder_is_ours(path, SCHEMA),
                                   option="--out folder", hint=REPORT_HINT)


def _write_figures(comparison: Comparison, folder: Path) -> None:
    obs = comparison.observation
    usable = [o for o in comparison.outcomes if not o.failed and o.theory_curve is not None]
    curves = [(_figure_text(f"{o.name} (rank {o.ranked.rank})"), o.theory_curve) for o in usable]
    samples = None
    if not obs.discrete and obs.time.size:
        # Every sample of the fit window (the fit saw an evenly decimated subset, which
        # can step over a spike); the figure thins them to each pixel column's extremes.
        m = comparison.measured
        window = slice(int(np.searchsorted(m.time, obs.time[0], side="left")),
                       int(np.searchsorted(m.time, obs.time[-1], side="right")))
        samples = (m.time[window], m.voltage[window])
        if m.excluded[window].any():  # clipped samples stay out, as in the fit
            kept = ~m.excluded[window]
            samples = (samples[0][kept], samples[1][kept])
    overlay_figure(folder / "overlay.png", obs.time, obs.voltage, curves,
                   _figure_text(comparison.fixture.title), peaks=obs.discrete, samples=samples)
    residuals = [(_figure_text(o.name), obs.voltage - o.theory_curve) for o in usable]
    sigma = float(np.median(np.broadcast_to(np.asarray(obs.sigma, float), obs.voltage.shape)))
    residual_figure(folder / "residuals.png", obs.time, residuals, sigma)
    env = comparison.measured.envelope()
    if env is None:  # a response that does not ring has no envelope
        return
    envelope_figure(folder / "envelope.png", env.times, env.amplitudes, env.flagged, env.alpha,
                    env.amplitude0)
