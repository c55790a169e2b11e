"""``xcheck ringdown`` end to end on files written by the tests (invented scenarios).

The trace is the closed-form series-RLC capacitor voltage,
V0 exp(-alpha t) (cos(omega_d t) + (alpha/omega_d) sin(omega_d t)) (Nilsson & Riedel,
Electric Circuits, from memory), after a drooping pre-event level, with seeded noise;
"recovered" means within 3 reported standard errors (see test_ringdown_trace).
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import matplotlib.image
import numpy as np
import pytest

from xcheck.cli import main

R, L, C, V0 = 0.35, 15e-6, 2.2e-6, 9.0
ALPHA = R / (2 * L)
OMEGA = math.sqrt(1 / (L * C) - ALPHA**2)
FREQ = OMEGA / (2 * math.pi)


def ringdown(t: np.ndarray) -> np.ndarray:
    return V0 * np.exp(-ALPHA * t) * (np.cos(OMEGA * t) + ALPHA / OMEGA * np.sin(OMEGA * t))


def write_scope(path: Path, *, samples: int = 3000, seed: int = 301) -> Path:
    rng = np.random.default_rng(seed)
    step = 1.0 / FREQ / 40
    t = np.arange(-500, samples) * step
    v = np.where(t < 0, V0 - 30.0 * t, ringdown(np.clip(t, 0.0, None))) + rng.normal(
        0.0, 0.02, t.size
    )
    lines = ["Model,invented bench recorder", f"Sample interval,{step:.9e}", "Time (s),CH1 [V]"]
    lines += [f"{a:.9e},{b:.5f}" for a, b in zip(t, v)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def test_trace_table_png_and_json(tmp_path: Path, printed) -> None:
    scope = write_scope(tmp_path / "scope.csv")
    out_json, out_png = tmp_path / "ringdown.json", tmp_path / "fig.png"
    status = main(
        [
            "ringdown",
            str(scope),
            "--json",
            str(out_json),
            "--out",
            str(out_png),
            "--capacitance",
            "2.2u",
        ]
    )
    printed = printed().out
    assert status == 0
    assert "damped frequency f_d" in printed and "±" in printed and "inductance L" in printed
    data = json.loads(out_json.read_text(encoding="utf-8"))
    for key, true in (
        ("damped_frequency_hz", FREQ),
        ("neper_frequency_per_s", ALPHA),
        ("initial_volts", V0),
    ):
        assert abs(data[key]["value"] - true) <= 3 * data[key]["stderr"], key
    assert data["envelope_exponential"] is True and data["flagged_extrema"] == []
    assert (
        abs(data["derived"]["inductance_henries"]["value"] - L)
        <= 3 * data["derived"]["inductance_henries"]["stderr"]
    )
    assert data["alignment"]["droop_volts_per_s"] < 0
    image = matplotlib.image.imread(out_png)
    assert image.ndim == 3 and image.shape[0] > 400 and image.shape[1] > 600


def test_peak_table_misread_flagged(tmp_path: Path, printed) -> None:
    k = np.arange(10)
    tk = k * math.pi / OMEGA
    vk = V0 * (-1.0) ** k * np.exp(-ALPHA * tk)
    vk[3] *= 0.9  # misread
    rows = ["time [us],value [V],uncertainty [mV]"] + [
        f"{a * 1e6:.4f},{b:.4f},5" for a, b in zip(tk, vk)
    ]
    table = tmp_path / "cursor.csv"
    table.write_text("\n".join(rows) + "\n", encoding="utf-8")
    out_json = tmp_path / "p.json"
    status = main(
        [
            "ringdown",
            str(table),
            "--peaks",
            "--json",
            str(out_json),
            "--out",
            str(tmp_path / "p.png"),
        ]
    )
    printed = printed().out
    assert status == 0
    data = json.loads(out_json.read_text(encoding="utf-8"))
    assert data["flagged_extrema"] == [3]
    assert "misread cursor" in printed
    assert (
        abs(data["neper_frequency_per_s"]["value"] - ALPHA)
        <= 3 * data["neper_frequency_per_s"]["stderr"]
    )


@pytest.mark.parametrize(
    ("extra", "pattern"),
    [
        (["--capacitance", "1M"], r"--capacitance: .*upper-case 'M'"),
        (["--modes", "0"], r"--modes: expected 1 or more"),
        (["--event-time", "abc"], r"--event-time: cannot read 'abc'"),
        (["--capacitance=-2u"], r"--capacitance: expected a positive value"),
    ],
)
def test_bad_options_exit_2(
    tmp_path: Path, printed, extra: list[str], pattern: str
) -> None:
    scope = write_scope(tmp_path / "scope.csv", samples=400)
    assert main(["ringdown", str(scope), "--out", str(tmp_path / "x.png"), *extra]) == 2
    assert re.search(pattern, printed().err)


def test_too_short_record_exit_2(tmp_path: Path, printed) -> None:
    scope = write_scope(tmp_path / "short.csv", samples=45)
    assert main(["ringdown", str(scope), "--out", str(tmp_path / "x.png")]) == 2
    err = printed().err
    assert "short.csv" in err and "periods of ringing" in err and "at least 1.5 periods" in err
    assert not (tmp_path / "x.png").exists()


def test_files_xcheck_did_not_write_are_never_overwritten(
    tmp_path: Path, printed
) -> None:
    scope = write_scope(tmp_path / "scope.csv")
    precious_json = tmp_path / "notes.json"
    precious_json.write_text('{"mine": 1}\n', encoding="utf-8")
    args = ["ringdown", str(scope), "--out", str(tmp_path / "fig.png")]
    assert main(args + ["--json", str(precious_json)]) == 2
    assert precious_json.read_text(encoding="utf-8") == '{"mine": 1}\n'
    assert not (tmp_path / "fig.png").exists()
    assert "not written by xcheck" in printed().err
    # A PNG that xcheck did not make is left alone too (the Software chunk tells).
    foreign_png = tmp_path / "photo.png"
    matplotlib.image.imsave(foreign_png, np.zeros((4, 4, 3)))
    before = foreign_png.read_bytes()
    assert main(["ringdown", str(scope), "--out", str(foreign_png)]) == 2
    assert foreign_png.read_bytes() == before
    # Its own outputs are replaced as usual.
    own = ["ringdown", str(scope), "--out", str(tmp_path / "fig.png"),
           "--json", str(tmp_path / "r.json")]
    assert main(own) == 0
    assert main(own) == 0
