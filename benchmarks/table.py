"""Rows of the benchmark table, the machine description and the markdown output."""

from __future__ import annotations

import datetime as _dt
import os
import platform
import sys
from dataclasses import dataclass
from importlib import metadata

#: Status words of a row.
MET, MISSED, NOT_MEASURED, SKIPPED, INFO = "met", "missed", "not measured", "skipped", "info"


@dataclass(frozen=True)
class Row:
    """One figure of the table.

    Attributes
    ----------
    key
        Short identifier, e.g. ``"a1"`` (stable; the smoke test looks rows up by it).
    figure
        What is measured.
    goal
        The goal in words, e.g. ``">= 0.8x"``.
    reference
        What the value is a ratio to.
    value
        The measured value as text (empty when not measured).
    status
        One of ``met``, ``missed``, ``not measured``, ``skipped``, ``info``.
    note
        Details; for a missed row, the likely reason.
    """

    key: str
    figure: str
    goal: str
    reference: str
    value: str
    status: str
    note: str = ""

    def line(self) -> str:
        """The row as one line of text, for a benchmark script run on its own."""
        return f"{self.figure}: {self.value} ({self.status}; goal {self.goal}) - {self.note}"


def judged(ok: bool) -> str:
    """``met`` or ``missed``."""
    return MET if ok else MISSED


def machine() -> dict[str, str]:
    """Platform, CPU count, Python and library versions of this process."""
    versions = {}
    for name in ("numpy", "scipy", "pyarrow", "PySpice"):
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = "not installed"
    return {
        "platform": platform.platform(),
        "CPUs": str(os.cpu_count()),
        "Python": sys.version.split()[0],
        **versions,
        "load average": " ".join(f"{x:.2f}" for x in os.getloadavg()),
    }


def _cell(text: str) -> str:
    return text.replace("|", "\\|").replace("\n", " ")


def render(
    rows: list[Row], info: dict[str, str], command: str, when: _dt.datetime, *, quick: bool = False
) -> str:
    """The markdown text of BENCHMARKS.md.

    Parameters
    ----------
    rows
        The table's rows in order.
    info
        From :func:`machine`.
    command
        The command line that produced it.
    when
        Start of the run (UTC).
    quick
        A smoke run at tiny sizes: the text says its numbers mean nothing.

    Returns
    -------
    str
        Markdown, ending in a newline.
    """
    lines = [
        "# Benchmarks",
        "",
        f"Written by `{command}` on {when:%Y-%m-%d %H:%M} UTC. Every value is a ratio to a "
        "reference measured in the same run (absolute times drift on shared machines). "
        "See `benchmarks/README.md` for the method of each row.",
        "",
        *(["**Quick smoke run at tiny sizes: the values are not meaningful.**", ""] if quick else []),
        "| # | figure | goal | reference | value | status | note |",
        "|---|---|---|---|---|---|---|",
    ]
    for row in rows:
        status = f"**{row.status}**" if row.status == MISSED else row.status
        cells = (row.key, row.figure, row.goal, row.reference, row.value, status, row.note)
        lines.append("| " + " | ".join(_cell(c) for c in cells) + " |")
    lines += ["", "Machine:", ""]
    lines += [f"- {key}: {value}" for key, value in info.items()]
    missed = [row.key for row in rows if row.status == MISSED]
    lines += ["", "Missed goals: " + (", ".join(missed) if missed else "none") + "."]
    return "\n".join(lines) + "\n"
