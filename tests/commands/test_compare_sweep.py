"""``xcheck compare`` with a frequency sweep: CSV, Touchstone and LCR inputs, a joint fit
with a trace, and the errors.

Sweeps are invented capacitors, Z = R + j w L + 1 / (j w C) (standard circuit theory,
from memory), written here as files; the Touchstone one by scikit-rf (the reference
library). Exit statuses follow the project's convention (common practice for
command-line checkers, no source): 0 done, 1 a threshold missed, 2 bad input.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from sweep_cases import series_rlc, swept_capacitor_fixture
from xcheck.cli import main

FIXTURE = swept_capacitor_fixture(
    "Film capacitor swept on an impedance analyser (invented example)", "1u")
C, R, L = 1e-6, 0.02, 8e-9


def _impedance(f: np.ndarray) -> np.ndarray:
    return series_rlc(f, R, L, C)


def _fixture(tmp_path: Path, text: str = FIXTURE) -> Path:
    path = tmp_path / "film.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _csv(tmp_path: Path) -> Path:
    f = np.geomspace(1e3, 30e6, 60)
    z = _impedance(f)
    rows = [f"{a:.9e},{abs(b):.9e},{math.degrees(math.atan2(b.imag, b.real)):.9f}"
            for a, b in zip(f, z)]
    path = tmp_path / "film_z.csv"
    path.write_text("freq (Hz),|Z| (ohm),phase (deg)\n" + "\n".join(rows) + "\n",
                    encoding="ascii")
    return path


def _summary(out: Path) -> dict:
    return json.loads((out / "summary.json").read_text(encoding="utf-8"))


def test_a_csv_sweep_gives_the_frequency_report(tmp_path: Path, capsys) -> None:
    out = tmp_path / "out"
    status = main(["compare", str(_fixture(tmp_path)), "--sweep", str(_csv(tmp_path)),
                   "--out", str(out), "--quiet"])
    printed = capsys.readouterr().out
    assert status == 0 and "The best explanation of the sweep" in printed
    assert sorted(p.name for p in out.iterdir()) == ["bode.png", "report.md", "summary.json"]
    data = _summary(out)
    lumped = next(c for c in data["frequency_sweep"]["candidates"] if c["name"] == "lumped")
    # Noise-free values written to 10 digits: the lumped fit returns them to 1e-6.
    assert lumped["fitted"]["C1.value"] == pytest.approx(C, rel=1e-6)
    assert lumped["fitted"]["C1.esl"] == pytest.approx(L, rel=1e-6)
    assert lumped["fitted"]["C1.esr"] == pytest.approx(R, rel=1e-5)
    # ngspice's .ac leg of the lumped fit agrees with the exact response.
    assert lumped["engine_disagreement"] is not None and lumped["engine_disagreement"] < 1e-4
    assert [i["role"] for i in data["inputs"]] == ["fixture", "sweep"]


def test_a_touchstone_one_port_from_scikit_rf(tmp_path: Path) -> None:
    skrf = pytest.importorskip("skrf")
    f = np.geomspace(1e3, 30e6, 40)
    network = skrf.Network(frequency=skrf.Frequency.from_f(f, unit="Hz"),
                           z=_impedance(f).reshape(-1, 1, 1), z0=50)
    network.write_touchstone(str(tmp_path / "film"))
    out = tmp_path / "out"
    assert main(["compare", str(_fixture(tmp_path)), "--sweep", str(tmp_path / "film.s1p"),
                 "--out", str(out), "--quiet", "--no-ngspice"]) == 0
    lumped = next(c for c in _summary(out)["frequency_sweep"]["candidates"]
                  if c["name"] == "lumped")
    assert lumped["fitted"]["C1.value"] == pytest.approx(C, rel=1e-6)


def test_lcr_readings_are_a_sweep(tmp_path: Path) -> None:
    f = np.array([100.0, 1e3, 10e3, 100e3])
    rows = [f"{a:g},{C * 1e9:.9g},{R * 1e3:.9g}" for a in f]  # a series C with its ESR
    path = tmp_path / "readings.csv"
    path.write_text("freq (Hz),Cs (nF),ESR (mohm)\n" + "\n".join(rows) + "\n", encoding="ascii")
    text = FIXTURE.replace('esl = "?"\n', "")
    out = tmp_path / "out"
    assert main(["compare", str(_fixture(tmp_path, text)), "--lcr", str(path), "--out",
                 str(out), "--quiet", "--no-ngspice"]) == 0
    lumped = next(c for c in _summary(out)["frequency_sweep"]["candidates"]
                  if c["name"] == "lumped")
    assert lumped["fitted"]["C1.esr"] == pytest.approx(R, rel=1e-4)


@pytest.mark.parametrize("extra, words", [
    ([], "compare needs a measurement"),
    (["--sweep", "SWEEP", "--lcr", "SWEEP"], "not allowed with argument"),
])
def test_bad_invocations_exit_2(tmp_path: Path, capsys, extra, words) -> None:
    sweep = str(_csv(tmp_path))
    args = ["compare", str(_fixture(tmp_path))] + [sweep if a == "SWEEP" else a for a in extra]
    status = main(args + ["--out", str(tmp_path / "o")])
    assert status == 2
    err = capsys.readouterr().err
    assert words in err and "Traceback" not in err


def test_a_sweep_without_a_swept_table_is_refused(tmp_path: Path, capsys) -> None:
    fixture = _fixture(tmp_path, FIXTURE.split("[swept]")[0])
    status = main(["compare", str(fixture), "--sweep", str(_csv(tmp_path)), "--out",
                   str(tmp_path / "o"), "--quiet"])
    err = capsys.readouterr().err
    assert status == 2 and "add a [swept] table" in err and "Traceback" not in err
    assert not (tmp_path / "o").exists()


def test_a_two_port_needs_its_connection_in_the_swept_table(tmp_path: Path, capsys) -> None:
    skrf = pytest.importorskip("skrf")
    f = np.geomspace(1e3, 30e6, 40)
    z = _impedance(f)
    # The part from the line to ground between two 50-ohm ports: S21 = 2 Z / (2 Z + Z0),
    # S11 = -Z0 / (2 Z + Z0) (see tests/capture/test_touchstone.py for the derivation).
    s21 = 2 * z / (2 * z + 50.0)
    s11 = -50.0 / (2 * z + 50.0)
    s = np.stack([np.stack([s11, s21], -1), np.stack([s21, s11], -1)], -2)
    skrf.Network(frequency=skrf.Frequency.from_f(f, unit="Hz"), s=s, z0=50).write_touchstone(
        str(tmp_path / "fixture2"))
    two_port = str(tmp_path / "fixture2.s2p")
    out = tmp_path / "out"
    assert main(["compare", str(_fixture(tmp_path)), "--sweep", two_port, "--out", str(out),
                 "--quiet", "--no-ngspice"]) == 2
    assert "[swept] table, e.g. connection = \"shunt\"" in capsys.readouterr().err
    shunt = FIXTURE.replace('part = "C1"\n', 'part = "C1"\nconnection = "shunt"\n')
    assert main(["compare", str(_fixture(tmp_path, shunt)), "--sweep", two_port, "--out",
                 str(out), "--quiet", "--no-ngspice"]) == 0
    lumped = next(c for c in _summary(out)["frequency_sweep"]["candidates"]
                  if c["name"] == "lumped")
    assert lumped["fitted"]["C1.value"] == pytest.approx(C, rel=1e-6)
