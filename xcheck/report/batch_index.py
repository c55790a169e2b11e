"""The index of a batch (``xcheck batch``): index.md, values.png and batch.json.

One :class:`BatchEntry` per fixture (its comparison's headline numbers, its report's
files, or the error that stopped it) becomes a row of the index's markdown table:
fixture, best candidate, NRMSE, the chosen fitted value, pass or fail against the
threshold, and a link to its report. ``values.png`` plots the chosen fitted value (by
default the fitted extra series loss, ``loop.extra_resistance``) of each fixture's best
candidate with its standard error. ``batch.json`` holds the same rows for machines;
it is also how a later run recognises the folder as an earlier batch output.

Every user string (fixture names, candidate names, titles, error messages) goes through
:func:`~xcheck.report.markdown.escape_markdown`; report links are percent-encoded. The
folder is written by :func:`write_batch_folder` through
:func:`xcheck.atomic.write_folder_atomically`.

``batch.json`` schema (version 1; keys may be added, none renamed): ``schema``
("xcheck-batch"), ``schema_version``, ``tool`` {name, version}, ``value`` (the label
plotted), ``max_nrmse`` (null when none was given), ``counts`` {fixtures, pass, fail,
error, compared}, ``fixtures``: list in index order of {``name``, ``fixture``,
``measurement``, ``title``, ``status`` ("pass", "fail", "error" or "compared" when no
threshold was given), ``best``, ``nrmse``, ``value``, ``stderr``, ``unit``,
``value_note``, ``report`` (relative path of its report.md, null on error), ``error``
(the message, null unless the status is "error")}. Non-finite numbers are null.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Sequence
from urllib.parse import quote

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
from matplotlib.ticker import FuncFormatter  # noqa: E402

from xcheck import __version__  # noqa: E402
from xcheck.atomic import json_is_ours, write_folder_atomically  # noqa: E402
from xcheck.report.figures import SHADES, save_png  # noqa: E402
from xcheck.report.markdown import escape_markdown  # noqa: E402
from xcheck.report.summary import summary_text  # noqa: E402
from xcheck.values import format_eng  # noqa: E402

SCHEMA = "xcheck-batch"
SCHEMA_VERSION = 1
INDEX = "index.md"
FIGURE = "values.png"
JSON = "batch.json"
#: Folder of the per-fixture reports inside the batch folder.
REPORTS = "reports"
#: Why a folder that is not an earlier batch output is refused.
BATCH_HINT = f"it is not an earlier xcheck batch output: no xcheck {JSON} in it"

PASS, FAIL, ERROR, COMPARED = "pass", "fail", "error", "compared"


@dataclass(frozen=True)
class BatchEntry:
    """One fixture of a batch: its comparison's headline, or why it has none.

    Attributes
    ----------
    name
        The fixture's path below the batch folder, without ``.toml`` (POSIX form); its
        report goes to ``reports/<name>/``.
    fixture, measurement
        The fixture and its trace or peak table, as shown (relative to the working
        folder where they lie below it); ``measurement`` is "" when none was found.
    title
        The fixture's title ("" when it could not be read).
    best
        The top-ranked candidate, or None when every candidate failed (or on error).
    nrmse
        The best candidate's NRMSE (theory); infinity when there is no best candidate.
    value, stderr, unit
        The chosen fitted value of the best candidate (SI) and its standard error;
        NaN when the best candidate does not fit it.
    value_note
        Why ``value`` is missing, or "".
    verdict
        The comparison's verdict paragraph.
    error
        The message of what stopped this fixture; "" when it was compared.
    files
        The report's files (path inside the report folder -> bytes).
    """

    name: str
    fixture: str
    measurement: str = ""
    title: str = ""
    best: str | None = None
    nrmse: float = math.inf
    value: float = math.nan
    stderr: float = math.nan
    unit: str = ""
    value_note: str = ""
    verdict: str = ""
    error: str = ""
    files: dict[str, bytes] = field(default_factory=dict, repr=False)

    def status(self, max_nrmse: float | None) -> str:
        """``"error"``; else ``"pass"`` or ``"fail"`` against ``max_nrmse`` (as
        ``xcheck compare --max-nrmse`` decides), or ``"compared"`` without one."""
        if self.error:
            return ERROR
        if max_nrmse is None:
            return COMPARED
        return PASS if self.nrmse <= max_nrmse else FAIL

    @property
    def report(self) -> str | None:
        """Path of its report.md inside the batch folder, or None on error."""
        return None if self.error else f"{REPORTS}/{self.name}/report.md"


def batch_folder_is_ours(folder: Path) -> bool:
    """True when ``folder`` holds a ``batch.json`` an earlier ``xcheck batch`` wrote."""
    return json_is_ours(Path(folder) / JSON, schema=SCHEMA)


def counts(entries: Sequence[BatchEntry], max_nrmse: float | None) -> dict[str, int]:
    """How many fixtures there are, and how many passed, failed, errored, compared."""
    statuses = [e.status(max_nrmse) for e in entries]
    return {"fixtures": len(entries), PASS: statuses.count(PASS), FAIL: statuses.count(FAIL),
            ERROR: statuses.count(ERROR), COMPARED: len(entries) - statuses.count(ERROR)}


def _pct(value: float) -> str:
    return "n/a" if not math.isfinite(value) else f"{100 * value:.3g} %"


def _value_text(entry: BatchEntry) -> str:
    if not math.isfinite(entry.value):
        return "n/a" + (f" ({escape_markdown(entry.value_note)})" if entry.value_note else "")
    text = format_eng(entry.value, entry.unit, 4)
    if math.isfinite(entry.stderr):
        text += f" ± {format_eng(entry.stderr, entry.unit, 2)}"
    return text


_STATUS_WORDS = {PASS: "pass", FAIL: "**fail**", ERROR: "**error** (below)", COMPARED: "compared"}


def index_markdown(entries: Sequence[BatchEntry], *, folder: str, value_label: str,
                   max_nrmse: float | None) -> str:
    """The text of ``index.md``.

    Parameters
    ----------
    entries
        One per fixture, in index order.
    folder
        The batch folder as shown to the user.
    value_label
        The fitted value tabulated and plotted (``PART.FIELD`` or ``loop.extra_resistance``).
    max_nrmse
        The pass threshold on the best candidate's NRMSE, or None.

    Returns
    -------
    str
        Markdown, ending in a newline.
    """
    md = escape_markdown
    tally = counts(entries, max_nrmse)
    threshold = (f"pass when the best candidate's NRMSE is at most {_pct(max_nrmse)}"
                 if max_nrmse is not None else "no NRMSE threshold given (--max-nrmse)")
    lines = [f"# xcheck batch: {md(folder)}", "",
             f"{tally['fixtures']} fixtures: {tally[COMPARED]} compared, {tally[ERROR]} "
             f"stopped by an error" + (f"; {tally[PASS]} pass, {tally[FAIL]} fail"
                                       if max_nrmse is not None else "") + f". {threshold[0].upper()}{threshold[1:]}.",
             "", f"| fixture | best candidate | NRMSE | {md(value_label)} | result | report |",
             "|---|---|---:|---:|---|---|"]
    for entry in entries:
        link = (f"[report]({quote(entry.report)})" if entry.report else "–")
        best = md(entry.best) if entry.best else ("–" if entry.error else "none (every "
                                                                          "candidate failed)")
        lines.append(f"| {md(entry.name)} | {best} | {_pct(entry.nrmse) if not entry.error else '–'} "
                     f"| {_value_text(entry) if not entry.error else '–'} | "
                     f"{_STATUS_WORDS[entry.status(max_nrmse)]} | {link} |")
    lines += ["", f"![{md(value_label)} of each fixture's best candidate]({FIGURE})", "",
              f"The figure shows {md(value_label)} as fitted by each fixture's best candidate, "
              "with its standard error; fixtures whose best candidate holds it fixed, or that "
              "stopped with an error, are left out.", ""]
    errors = [e for e in entries if e.error]
    if errors:
        lines += ["## Errors", ""]
        lines += [f"- **{md(e.name)}** ({md(e.fixture)}): {md(e.error)}" for e in errors]
        lines.append("")
    titled = [e for e in entries if e.title]
    if titled:
        lines += ["## Fixtures", "", "| fixture | title | measurement |", "|---|---|---|"]
        lines += [f"| {md(e.name)} | {md(e.title)} | {md(e.measurement) or '–'} |" for e in titled]
        lines.append("")
    return "\n".join(lines)


def _finite(value: float) -> float | None:
    return value if math.isfinite(value) else None


def batch_json(entries: Sequence[BatchEntry], *, value_label: str,
               max_nrmse: float | None) -> dict[str, Any]:
    """The content of ``batch.json`` (schema in the module docstring)."""
    return {
        "schema": SCHEMA, "schema_version": SCHEMA_VERSION,
        "tool": {"name": "xcheck", "version": __version__},
        "value": value_label, "max_nrmse": max_nrmse,
        "counts": counts(entries, max_nrmse),
        "fixtures": [{
            "name": e.name, "fixture": e.fixture, "measurement": e.measurement or None,
            "title": e.title or None, "status": e.status(max_nrmse), "best": e.best,
            "nrmse": _finite(e.nrmse) if not e.error else None, "value": _finite(e.value),
            "stderr": _finite(e.stderr), "unit": e.unit or None,
            "value_note": e.value_note or None, "report": e.report, "error": e.error or None,
        } for e in entries],
    }


def _figure_text(value: object) -> str:
    """One line for a matplotlib label; ``$`` not read as mathtext."""
    return " ".join(str(value).split()).replace("$", r"\$")


def value_figure(path: Path, entries: Sequence[BatchEntry], value_label: str,
                 max_nrmse: float | None) -> Path:
    """Plot the chosen fitted value of each fixture's best candidate, with its standard
    error (filled markers pass or have no threshold, hollow ones fail).

    Parameters
    ----------
    path
        PNG to write (always PNG, whatever the name).
    entries
        The batch's entries; those without a finite value are left out.
    value_label
        Axis label.
    max_nrmse
        The threshold that decides pass or fail, or None.

    Returns
    -------
    Path
        ``path``.
    """
    shown = [e for e in entries if not e.error and math.isfinite(e.value)]
    unit = shown[0].unit if shown else ""
    fig, axis = plt.subplots(figsize=(max(6.0, 1.5 + 0.45 * len(shown)), 4.2), dpi=110)
    labelled: set[bool] = set()
    for position, entry in enumerate(shown):
        failed = entry.status(max_nrmse) == FAIL
        label = None
        if max_nrmse is not None and failed not in labelled:
            labelled.add(failed)
            label = "NRMSE above the threshold" if failed else "NRMSE within the threshold"
        axis.errorbar([position], [entry.value], label=label,
                      yerr=[entry.stderr] if math.isfinite(entry.stderr) else None,
                      marker="s" if failed else "o", markersize=6, capsize=3,
                      color=SHADES[1] if failed else SHADES[0],
                      markerfacecolor="none" if failed else SHADES[0], linestyle="none")
    axis.set_xticks(range(len(shown)))
    axis.set_xticklabels([_figure_text(e.name) for e in shown], rotation=60, ha="right",
                         fontsize=8)
    axis.yaxis.set_major_formatter(FuncFormatter(lambda v, _pos: format_eng(v, unit)))
    axis.set_ylabel(_figure_text(value_label))
    if not shown:
        axis.text(0.5, 0.5, "no fixture's best candidate fitted this value",
                  transform=axis.transAxes, ha="center", va="center")
    if labelled:
        axis.legend(fontsize=8, frameon=False)
    axis.set_title(_figure_text(f"{value_label}, best candidate of each fixture"), fontsize=10)
    axis.grid(True, linestyle=":", linewidth=0.6, color="#999999")
    for side in ("top", "right"):
        axis.spines[side].set_visible(False)
    fig.tight_layout()
    return save_png(fig, path)


def write_batch_folder(out: str | Path, entries: Sequence[BatchEntry], *, folder: str,
                       value_label: str, max_nrmse: float | None) -> Path:
    """Write every report, index.md, values.png and batch.json into ``out`` atomically.

    Parameters
    ----------
    out
        The batch folder; replaced only when missing, empty or an earlier batch output.
    entries
        One per fixture, in index order.
    folder, value_label, max_nrmse
        As for :func:`index_markdown`.

    Returns
    -------
    Path
        ``out``.

    Raises
    ------
    XcheckError
        When ``out`` is not free to replace (nothing is touched) or cannot be written.
    """

    def fill(staging: Path) -> None:
        for entry in entries:
            base = staging / REPORTS / entry.name
            for relative, data in sorted(entry.files.items()):
                target = base / relative
                target.parent.mkdir(parents=True, exist_ok=True)
                target.write_bytes(data)
        value_figure(staging / FIGURE, entries, value_label, max_nrmse)
        data = batch_json(entries, value_label=value_label, max_nrmse=max_nrmse)
        (staging / JSON).write_text(summary_text(data), encoding="utf-8")
        (staging / INDEX).write_text(
            index_markdown(entries, folder=folder, value_label=value_label,
                           max_nrmse=max_nrmse), encoding="utf-8")

    return write_folder_atomically(Path(out), fill, is_ours=batch_folder_is_ours,
                                   option="--out folder", hint=BATCH_HINT)
