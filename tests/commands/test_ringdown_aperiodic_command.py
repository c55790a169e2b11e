"""``xcheck ringdown`` on records that do not ring (invented scenarios, files written here).

The trace is the overdamped series-RLC capacitor voltage after the capacitor, charged to
V0, is released into R and L with no current:
``v = V0 (s2 exp(-s1 t) - s1 exp(-s2 t)) / (s2 - s1)``, ``s1,2 = alpha -+ sqrt(alpha^2 -
omega0^2)``, ``alpha = R/(2L)``, ``omega0 = 1/sqrt(LC)`` (derived in
tests/ringdown/test_ringdown_aperiodic.py; standard circuit theory, e.g. Nilsson &
Riedel, Electric Circuits, from memory), after a flat pre-event level, with seeded
noise. "Recovered" means within 3 reported standard errors (0.3 % chance of a miss per
number when the errors are right; fixed seeds make a pass reproducible).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import matplotlib.image
import numpy as np

from xcheck.cli import main

L, C, V0 = 10e-6, 1e-6, 9.0
OMEGA0 = 1.0 / math.sqrt(L * C)
ZETA = 1.8
R = 2.0 * ZETA * math.sqrt(L / C)  # zeta = (R/2) sqrt(C/L)
S1 = ZETA * OMEGA0 - OMEGA0 * math.sqrt(ZETA**2 - 1)
S2 = ZETA * OMEGA0 + OMEGA0 * math.sqrt(ZETA**2 - 1)


def write_scope(path: Path, *, samples: int = 1000, seed: int = 401) -> Path:
    rng = np.random.default_rng(seed)
    step = 1.0 / S1 / 100
    t = np.arange(-300, samples) * step
    after = np.clip(t, 0.0, None)
    clean = V0 * (S2 * np.exp(-S1 * after) - S1 * np.exp(-S2 * after)) / (S2 - S1)
    v = np.where(t < 0, V0, clean) + rng.normal(0.0, 0.02, t.size)
    lines = ["Model,invented bench recorder", "Time (s),CH1 [V]"]
    lines += [f"{a:.9e},{b:.5f}" for a, b in zip(t, v)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def recovered(item: dict, true: float) -> bool:
    return abs(item["value"] - true) <= 3 * item["stderr"]


def test_overdamped_trace_prints_time_constants(tmp_path: Path, printed) -> None:
    scope = write_scope(tmp_path / "overdamped.csv")
    out_json, out_png = tmp_path / "od.json", tmp_path / "od.png"
    args = ["ringdown", str(scope), "--json", str(out_json), "--out", str(out_png),
            "--capacitance", "1u"]
    assert main(args) == 0
    out = printed().out
    assert "the response is overdamped" in out
    assert "time constant tau1 (slow)" in out and "time constant tau2 (fast)" in out
    assert "damping ratio zeta" in out and "natural frequency omega0" in out
    assert "series resistance R" in out and "periods of ringing" not in out
    data = json.loads(out_json.read_text(encoding="utf-8"))
    assert data["regime"] == "overdamped" and data["aperiodic"] is True
    tau1, tau2 = data["time_constants_s"]
    assert recovered(tau1, 1 / S1) and recovered(tau2, 1 / S2)
    assert recovered(data["damping_ratio"], ZETA)
    assert recovered(data["natural_angular_frequency_rad_per_s"], OMEGA0)
    # R = (tau1 + tau2) / C for a given C (xcheck/ringdown/aperiodic_derived.py).
    assert recovered(data["derived"]["series_resistance_ohms"], R)
    assert data["alignment"]["event_time_s"] < 1e-6
    image = matplotlib.image.imread(out_png)
    assert image.ndim == 3 and image.shape[0] > 400 and image.shape[1] > 600
    # The second run replaces its own JSON and PNG.
    assert main(args) == 0


def test_too_short_non_ringing_record_exit_2_with_decay_advice(tmp_path: Path, printed) -> None:
    scope = write_scope(tmp_path / "short.csv", samples=150)  # 1.5 slow time constants
    assert main(["ringdown", str(scope), "--out", str(tmp_path / "x.png")]) == 2
    err = printed().err
    assert "short.csv" in err and "does not ring" in err and "time constants" in err
    assert "longer time window" in err and "periods" not in err
    assert not (tmp_path / "x.png").exists()


def test_ringing_json_names_its_regime(tmp_path: Path, printed) -> None:
    # A ringing trace (zeta = 0.1, closed form V0 exp(-alpha t)(cos + alpha/omega_d sin))
    # still takes the ringing path and says so.
    alpha, wd = 0.1 * OMEGA0, OMEGA0 * math.sqrt(1 - 0.01)
    step = 2 * math.pi / wd / 40
    t = np.arange(-300, 2000) * step
    after = np.clip(t, 0.0, None)
    ring = V0 * np.exp(-alpha * after) * (np.cos(wd * after) + alpha / wd * np.sin(wd * after))
    v = np.where(t < 0, V0, ring) + np.random.default_rng(402).normal(0.0, 0.02, t.size)
    scope = tmp_path / "ring.csv"
    scope.write_text("Time (s),CH1 [V]\n" + "\n".join(f"{a:.9e},{b:.5f}" for a, b in zip(t, v))
                     + "\n", encoding="utf-8")
    out_json = tmp_path / "r.json"
    assert main(["ringdown", str(scope), "--json", str(out_json),
                 "--out", str(tmp_path / "r.png")]) == 0
    assert "damped frequency f_d" in printed().out
    data = json.loads(out_json.read_text(encoding="utf-8"))
    assert data["regime"] == "underdamped" and data["aperiodic"] is False
    assert recovered(data["neper_frequency_per_s"], alpha)
