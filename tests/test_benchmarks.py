"""Smoke run of ``python -m benchmarks --quick``: the table's structure, not its numbers.

No timing is asserted (the benchmarks measure the machine; a test must not depend on
its load). The reference for the expected rows and columns is the benchmark
specification in benchmarks/README.md; the machine section is checked against the
standard library (platform, os) and importlib.metadata.
"""

from __future__ import annotations

import os
import platform
import re
import subprocess
import sys
from importlib import metadata
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent

#: Every row key the table must hold, with the pattern its value must match.
RATIO = r"\d+\.\d+x"
CRB_VALUE = r"(\d+\.\d+|nan)"  # nan only when every trial of a scenario was refused
EXPECTED = {
    "a-plain-speed": RATIO, "a-plain-memory": RATIO,
    "a-gzip-speed": RATIO, "a-gzip-memory": RATIO,
    "a-pandas": rf"({RATIO})?",  # empty when pandas is not installed (row skipped)
    **{f"b-{name}-{snr}dB": CRB_VALUE for name in ("alpha", "f_d") for snr in (40, 20, 10)},
    **{f"b-se-{snr}dB": rf"{CRB_VALUE}-{CRB_VALUE}" for snr in (40, 20, 10)},
    **{f"b-refused-{k}": r"\d+/\d+" for k in (1, 2, 3)},
    **{f"c-error-{z}": r"\d\.\d\de[-+]\d\d" for z in ("0.01", "0.1", "1", "5", "fourth-order")},
    **{f"c-points-{z}": rf"({RATIO}|n/a)" for z in ("0.01", "0.1", "1", "5", "fourth-order")},
    **{f"d-{c}": RATIO for c in ("demo", "fourth-order")},
    **{f"d-{c}-agreement": r"\d\.\d\de[-+]\d\d" for c in ("demo", "fourth-order")},
    # Row (e) at the quick sizes (2000 and 5000 samples): a ratio per size, the peak
    # memory of the largest, the growth exponent (a slope: any sign).
    **{f"e-{size}": RATIO for size in ("2e3", "5e3")},
    "e-memory": RATIO, "e-growth": r"-?\d+\.\d\d",
    "f-version": r"[+-]\d+\.\d{3} s", "f-deck": r"[+-]\d+\.\d{3} s",
    "g-sweep": rf"({RATIO})?",  # empty when one CPU is available (row skipped)
}
STATUSES = {"met", "**missed**", "not measured", "skipped", "info"}


@pytest.fixture(scope="module")
def quick_table(tmp_path_factory: pytest.TempPathFactory) -> str:
    """BENCHMARKS.md text of one quick run (module scope: the run takes ~10 s)."""
    out = tmp_path_factory.mktemp("bench") / "BENCHMARKS.md"
    done = subprocess.run(
        [sys.executable, "-m", "benchmarks", "--quick", "--out", str(out)],
        cwd=REPO, capture_output=True, text=True, timeout=300,
    )
    assert done.returncode == 0, done.stderr
    return out.read_text(encoding="utf-8")


def _rows(text: str) -> dict[str, list[str]]:
    rows = {}
    for line in text.splitlines():
        if line.startswith("| ") and not line.startswith("| # "):
            cells = [c.strip() for c in re.split(r"(?<!\\)\|", line)[1:-1]]
            rows[cells[0]] = cells
    return rows


@pytest.mark.ngspice
def test_every_row_is_present_with_a_well_formed_value(quick_table: str) -> None:
    rows = _rows(quick_table)
    assert set(rows) == set(EXPECTED)
    for key, pattern in EXPECTED.items():
        cells = rows[key]
        assert len(cells) == 7, key  # key, figure, goal, reference, value, status, note
        assert re.fullmatch(pattern, cells[4]), (key, cells[4])
        assert cells[5] in STATUSES, (key, cells[5])
        assert cells[1] and cells[2] and cells[3], key  # figure, goal, reference filled in


@pytest.mark.ngspice
def test_missed_rows_give_a_reason_and_are_listed(quick_table: str) -> None:
    rows = _rows(quick_table)
    missed = [key for key, cells in rows.items() if cells[5] == "**missed**"]
    for key in missed:
        assert "likely reason" in rows[key][6] or "met 1e-4" in rows[key][6], key
    summary = re.search(r"^Missed goals: (.*)\.$", quick_table, re.MULTILINE).group(1)
    assert summary == (", ".join(missed) if missed else "none")
    # Row (e): each size's note gives the wall time, the peak memory and the parts.
    for size in ("2e3", "5e3"):
        note = rows[f"e-{size}"][6]
        assert re.search(r"wall \d+\.\d\d s, peak RSS \d+ MB", note), note
        assert re.search(r"read \d+\.\d\d s \+ \d+ ngspice runs", note), note


@pytest.mark.ngspice
def test_machine_and_date_are_recorded(quick_table: str) -> None:
    # Reference: the standard library's own view of this machine and interpreter.
    assert f"- CPUs: {os.cpu_count()}\n" in quick_table
    assert f"- Python: {platform.python_version()}\n" in quick_table
    assert f"- platform: {platform.platform()}\n" in quick_table
    for name in ("numpy", "scipy", "pyarrow"):
        assert f"- {name}: {metadata.version(name)}\n" in quick_table
    assert re.search(r" on \d{4}-\d\d-\d\d \d\d:\d\d UTC\.", quick_table)
    assert "Quick smoke run" in quick_table
