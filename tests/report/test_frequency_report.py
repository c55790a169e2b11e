"""The frequency comparison's folder: report.md, bode.png and summary.json.

The sweep is an invented capacitor (Z = R + 1 / (j w C), standard circuit theory, from
memory) with seeded noise; the checks are on what the report must hold (the schema of
xcheck/report/frequency_report.py, escaping of user text as for every report).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from sweep_cases import noisy, swept_capacitor_fixture
from xcheck.capture.sweep_types import FrequencySweep
from xcheck.fixture.reader import parse_fixture_text
from xcheck.frequency_compare import run_frequency_comparison
from xcheck.report.frequency_report import write_frequency_report

FIXTURE = swept_capacitor_fixture(
    "Bench capacitor <img src=x onerror=alert(1)> [link](http://example.invalid) (invented)",
    "10u", esl_unknown=False)


def test_the_folder_names_the_best_candidate_and_escapes_user_text(tmp_path: Path) -> None:
    f = np.geomspace(100.0, 1e6, 50)
    z = 0.03 + 1 / (1j * 2 * math.pi * f * 10e-6)
    sweep = FrequencySweep(f, noisy(z, 0.002, seed=5), "impedance", "ohm", "c1.csv", relative_error=0.002,
                           phase_error=0.002)
    fixture = parse_fixture_text(FIXTURE, "cap.toml")
    comparison = run_frequency_comparison(fixture, sweep, use_ngspice=False)
    folder = write_frequency_report(comparison, tmp_path / "out",
                                    inputs=[("sweep", "c1.csv", "0" * 64)])
    assert sorted(p.name for p in folder.iterdir()) == ["bode.png", "report.md", "summary.json"]
    data = json.loads((folder / "summary.json").read_text(encoding="utf-8"))
    assert data["schema"] == "xcheck-summary" and data["schema_version"] == 1
    block = data["frequency_sweep"]
    assert block["measured"]["points"] == 50 and block["measured"]["errors_stated"] is True
    assert block["joint"] is False
    assert data["best"] == block["candidates"][0]["name"]
    # Every candidate's fitted values are SI numbers; the best one's ESR is near 30 mOhm.
    best = block["candidates"][0]
    assert abs(best["fitted"]["C1.esr"] - 0.03) <= 3 * best["fitted_stderr"]["C1.esr"]
    report = (folder / "report.md").read_text(encoding="utf-8")
    assert "<img" not in report and "](http" not in report  # neutralised, never rendered
    assert "## Resonances" in report and "Stored energy can hurt" in report
    assert data["verdict"].startswith("The best explanation of the sweep (the impedance of C1")
    # The same comparison gives the same bytes.
    again = write_frequency_report(comparison, tmp_path / "again",
                                   inputs=[("sweep", "c1.csv", "0" * 64)])
    for name in ("report.md", "summary.json", "bode.png"):
        assert (again / name).read_bytes() == (folder / name).read_bytes()
