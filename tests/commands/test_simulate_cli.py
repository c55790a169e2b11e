"""``xcheck simulate``: files written, numbers printed, closed form not applicable.

Fixtures here are invented scenarios. The printed alpha and omega0 are checked against
alpha = R/(2L) and omega0 = 1/sqrt(LC) of the summed loop (Nilsson & Riedel, "Electric
Circuits", chapter "Natural and Step Responses of RLC Circuits", from memory).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from compare_cases import data_text
from xcheck.cli import main
from xcheck.values import format_eng

pytestmark = pytest.mark.ngspice  # skipped, with the install hint, without libngspice

RING_DOWN = data_text("bench_ringdown.toml")

# A winding capacitance of half the main capacitance: a real third and fourth mode.
NOT_REDUCIBLE = RING_DOWN.replace('dcr = "?"', 'dcr = "0.1"\nparallel_capacitance = "0.5u"')


def _read_csv(path: Path) -> tuple[list[str], np.ndarray]:
    with path.open(encoding="ascii") as handle:
        header = handle.readline().strip().split(",")
    return header, np.loadtxt(path, delimiter=",", skiprows=1)


def test_simulate_writes_csv_png_and_prints_numbers(
    write_toml, tmp_path: Path, printed
) -> None:
    fixture = write_toml(RING_DOWN, "ring.toml")
    out = tmp_path / "out"
    assert main(["simulate", str(fixture), "--out", str(out)]) == 0
    printed = printed().out
    header, data = _read_csv(out / "prediction.csv")
    assert header == ["time_s", "ngspice_probe_V", "theory_probe_V", "ngspice_current_A", "theory_current_A"]
    # Engines agree to 1e-4 of the initial 10 V (the engines' accuracy target).
    assert np.max(np.abs(data[:, 1] - data[:, 2])) <= 1e-3
    assert data[0, 1] == pytest.approx(10.0, abs=1e-3)  # starts at the initial voltage
    assert (out / "overlay.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert not [p for p in out.iterdir() if p.name.endswith(".tmp")]  # no leftovers
    r, l, c = 0.010 + 0.040 + 2.2, 1e-3, 1e-6  # switch + ESR + R1; DCR unknown, left out
    assert format_eng(r / (2 * l), "Np/s") in printed
    assert format_eng(1 / math.sqrt(l * c), "rad/s") in printed
    assert "underdamped" in printed and "Q (quality factor)" in printed
    assert "left out of both predictions: L1 dcr" in printed
    assert "largest difference between ngspice and theory" in printed


def test_default_folder_is_under_reports(write_toml, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    fixture = write_toml(RING_DOWN, "bench7.toml")
    monkeypatch.chdir(tmp_path)
    assert main(["simulate", str(fixture)]) == 0
    assert (tmp_path / "reports" / "bench7" / "simulate" / "prediction.csv").is_file()


def test_without_closed_form_the_exact_engine_is_the_theory_leg(
    write_toml, tmp_path: Path, printed
) -> None:
    fixture = write_toml(NOT_REDUCIBLE, "wound.toml")
    out = tmp_path / "out"
    assert main(["simulate", str(fixture), "--out", str(out)]) == 0
    printed = printed().out
    assert "no closed form:" in printed and "neglect" in printed and "L1" in printed
    assert "natural modes (exact state space)" in printed
    header, data = _read_csv(out / "prediction.csv")
    assert header == ["time_s", "ngspice_probe_V", "theory_probe_V", "ngspice_current_A",
                      "theory_current_A"]
    # ngspice is the outside reference: within 1e-4 of the 10 V the capacitor starts
    # at, the deck's accuracy target (engines/timing.py).
    assert data.shape[0] > 100
    assert np.max(np.abs(data[:, 1] - data[:, 2])) <= 1e-4 * 10.0


def test_bad_input_exits_2(tmp_path: Path, printed) -> None:
    assert main(["simulate", str(tmp_path / "missing.toml")]) == 2
    assert "missing.toml" in printed().err


def test_files_xcheck_did_not_write_are_never_overwritten(write_toml, tmp_path: Path,
                                                          printed) -> None:
    from xcheck.cli import main

    fixture = write_toml(RING_DOWN, "ring.toml")
    out = tmp_path / "mine"
    out.mkdir()
    (out / "prediction.csv").write_text("keep,me\n1,2\n", encoding="utf-8")
    assert main(["simulate", str(fixture), "--out", str(out)]) == 2
    assert (out / "prediction.csv").read_text(encoding="utf-8") == "keep,me\n1,2\n"
    assert not (out / "overlay.png").exists()
    assert "nothing was written" in printed().err
    # An earlier simulate output is replaced as usual.
    fresh = tmp_path / "fresh"
    assert main(["simulate", str(fixture), "--out", str(fresh)]) == 0
    assert main(["simulate", str(fixture), "--out", str(fresh)]) == 0
