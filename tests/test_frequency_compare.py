"""Frequency sweeps compared with the candidates: recovery of parasitics, ngspice's
``.ac`` leg, and a joint fit with a ring-down.

References: the impedance of a capacitor with series resistance and inductance,
``Z = R + j w L + 1 / (j w C)``, and of a choke ``Z = R + j w L`` (standard circuit theory,
from memory); the skin-effect resistance growing as sqrt(f) (Terman, "Radio
Engineers' Handbook", from memory); a series RLC ring-down integrated by
scipy.signal.lsim. Every synthetic measurement is made here with those formulas and
numpy's seeded noise, outside the engines under test; the fitted values must land
within 3 standard errors of the values put in (a 3-sigma band: a false failure about 3
times in a thousand per value; common practice, no source).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy import signal

from sweep_cases import noisy, swept_capacitor_fixture
from xcheck.capture.sweep_types import FrequencySweep
from xcheck.demo.synth import write_capture_csv
from xcheck.errors import XcheckError
from xcheck.fixture.reader import parse_fixture_text
from xcheck.frequency_compare import run_frequency_comparison
from xcheck.measured import measure

#: An invented electrolytic measured alone on an impedance analyser.
CAPACITOR = swept_capacitor_fixture(
    "Electrolytic capacitor on an impedance analyser (invented example)", "100u")

#: An invented film capacitor rung down through a choke whose winding resistance is
#: unknown, the capacitor also swept alone.
JIG = '''
title = "Film capacitor and choke ring-down with a sweep of the capacitor (invented example)"
response = "natural"
loop = ["SW1", "C1", "L1"]
probe = "C1"
[parts.SW1]
kind = "switch"
[parts.C1]
kind = "capacitor"
nominal = "10u"
esr = "?"
initial = "10"
[parts.L1]
kind = "inductor"
nominal = "100u"
dcr = "?"
[swept]
measures = "impedance"
part = "C1"
'''


def _fitted(outcome) -> dict[str, tuple[float, float]]:
    return {v.label: (v.value, v.stderr) for v in outcome.fit.fitted}


def _within(fitted: tuple[float, float], truth: float, k: float = 3.0) -> bool:
    value, stderr = fitted
    return abs(value - truth) <= k * stderr


@pytest.mark.ngspice
def test_a_capacitors_esl_esr_and_skin_effect_are_recovered() -> None:
    c, r0, l, k = 100e-6, 0.05, 12e-9, 2e-5
    f = np.geomspace(100.0, 10e6, 120)
    w = 2 * math.pi * f
    z = r0 + k * np.sqrt(f) + 1j * w * l + 1 / (1j * w * c)
    sweep = FrequencySweep(f, noisy(z, 0.005, seed=11), "impedance", "ohm", "cap.csv",
                           relative_error=0.005, phase_error=0.005)
    fixture = parse_fixture_text(CAPACITOR, "cap.toml")
    result = run_frequency_comparison(fixture, sweep)
    assert result.best is not None and result.best.name == "skin-C1-esr"
    values = _fitted(result.best)
    assert _within(values["C1.value"], c) and _within(values["C1.esl"], l)
    assert _within(values["C1.esr"], r0) and _within(values["C1.skin"], k)
    # The lumped rung (no skin effect) is far worse: very strong evidence (BIC > 10).
    lumped = next(r for r in result.ranking if r.name == "lumped")
    assert lumped.delta_bic > 10 and lumped.evidence == "very strong"
    # The power law finds the exponent of the skin effect, 1/2, within 3 standard errors.
    power = next(o for o in result.outcomes if o.name == "power-C1-esr")
    assert _within(_fitted(power)["C1.loss_exponent"], 0.5)
    # ngspice's .ac analysis of the lumped fit agrees with the exact response (the
    # engine check asks 1e-4 of magnitude; here both run the same fitted circuit).
    lumped_outcome = next(o for o in result.outcomes if o.name == "lumped")
    assert lumped_outcome.engines_differ is not None and lumped_outcome.engines_differ < 1e-4
    assert "no lumped SPICE element" in result.best.ngspice_note
    # The |Z| minimum of the measurement and of the best model agree (within 5 %: the
    # minimum is broad at this low Q, about 0.2, and the noise of the 120 points moves
    # the measured one by a few percent); both lie below
    # 1 / (2 pi sqrt(LC)), since a resistance that grows with f pulls the minimum down.
    f0 = 1 / (2 * math.pi * math.sqrt(l * c))
    measured_min = [x for x in result.resonances if x.kind == "minimum"]
    model_min = [x for x in result.best.resonances if x.kind == "minimum"]
    assert measured_min and model_min
    assert model_min[0].frequency == pytest.approx(measured_min[0].frequency, rel=0.05)
    assert model_min[0].frequency < f0


def test_stated_errors_are_used_and_unstated_ones_are_said() -> None:
    c, r0 = 100e-6, 0.05
    f = np.geomspace(100.0, 1e6, 60)
    z = r0 + 1 / (1j * 2 * math.pi * f * c)
    sweep = FrequencySweep(f, noisy(z, 0.01, seed=3), "impedance", "ohm", "cap.csv")
    fixture = parse_fixture_text(CAPACITOR, "cap.toml")
    result = run_frequency_comparison(fixture, sweep, use_ngspice=False)
    assert any("states no standard errors" in n for n in result.notes)
    lumped = next(o for o in result.outcomes if o.name == "lumped")
    assert _within(_fitted(lumped)["C1.value"], c) and _within(_fitted(lumped)["C1.esr"], r0)


def test_a_sweep_needs_the_swept_table_and_the_right_quantity() -> None:
    f = np.geomspace(100.0, 1e6, 10)
    sweep = FrequencySweep(f, 1 / (1j * 2 * math.pi * f * 1e-6), "impedance", "ohm", "z.csv")
    bare = parse_fixture_text(CAPACITOR.split("[swept]")[0], "cap.toml")
    with pytest.raises(XcheckError, match=r"add a \[swept\] table"):
        run_frequency_comparison(bare, sweep)
    transfer = FrequencySweep(f, np.ones(f.size, complex), "transfer", "V/V", "h.csv")
    with pytest.raises(XcheckError, match="holds a transfer but"):
        run_frequency_comparison(parse_fixture_text(CAPACITOR, "cap.toml"), transfer)


def _ring_down(path: Path, total_r: float, esr: float, c: float, l: float, v0: float) -> Path:
    """The probe across C1 (its ESR included): v = v_C + ESR i, x = [v_C, i],
    C v_C' = -i, L i' = v_C - R i (the loop's resistance ``total_r``)."""
    a = np.array([[0.0, -1.0 / c], [1.0 / l, -total_r / l]])
    rate, after, before = 1e6, 2000, 200  # samples after and before the event
    t = np.arange(after) / rate
    system = signal.StateSpace(a, np.zeros((2, 1)), np.array([[1.0, esr]]), np.zeros((1, 1)))
    _, y, _ = signal.lsim(system, None, t, X0=np.array([v0, 0.0]))
    rng = np.random.default_rng(42)
    time = np.arange(-before, after) / rate
    volts = np.concatenate([np.full(before, v0), y]) + rng.normal(0.0, 0.01, time.size)
    return write_capture_csv(path, time, volts)


def test_a_joint_fit_splits_the_esr_from_the_winding_resistance(tmp_path: Path) -> None:
    c, l, esr, dcr, v0 = 10e-6, 100e-6, 0.08, 0.25, 10.0
    fixture = parse_fixture_text(JIG, "jig.toml")
    trace = _ring_down(tmp_path / "ring.csv", esr + dcr, esr, c, l, v0)
    measured = measure(fixture, trace=trace)
    timed = measured.observation(max_points=20_000)
    f = np.geomspace(100.0, 1e6, 80)
    z = esr + 1 / (1j * 2 * math.pi * f * c)
    sweep = FrequencySweep(f, noisy(z, 0.005, seed=8), "impedance", "ohm", "c1.csv",
                           relative_error=0.005, phase_error=0.005)
    joint = run_frequency_comparison(fixture, sweep, timed=timed, use_ngspice=False)
    assert joint.joint
    lumped = next(o for o in joint.outcomes if o.name == "lumped")
    values = _fitted(lumped)
    # Both resistances separately, each within 3 standard errors of the truth, and no
    # degeneracy left between them (C1 and L1 are strongly correlated, since the ring
    # fixes their product, but each is determined).
    assert _within(values["C1.esr"], esr) and _within(values["L1.dcr"], dcr)
    assert not any({"C1.esr", "L1.dcr"} <= set(g.members) for g in lumped.fit.degeneracies)
    # The ring-down alone determines only their sum (the time ladder reports a
    # degeneracy of the two, or a sum).
    from xcheck.compare import run_comparison

    alone = run_comparison(fixture, trace=trace, use_ngspice=False)
    unknowns = next(o for o in alone.outcomes if o.fit.candidate == "all-unknowns")
    groups = [set(g.members) for g in unknowns.fit.degeneracies]
    assert any({"C1.esr", "L1.dcr"} <= g for g in groups)
    split = {v.label: v.stderr for v in unknowns.fit.fitted}
    assert split["C1.esr"] > esr and split["L1.dcr"] > dcr  # each undetermined alone


def test_the_joint_fit_from_the_command_line(tmp_path: Path) -> None:
    import json

    from xcheck.cli import main

    c, l, esr, dcr = 10e-6, 100e-6, 0.08, 0.25
    fixture = tmp_path / "jig.toml"
    fixture.write_text(JIG, encoding="utf-8")
    trace = _ring_down(tmp_path / "ring.csv", esr + dcr, esr, c, l, 10.0)
    f = np.geomspace(100.0, 1e6, 60)
    z = noisy(esr + 1 / (1j * 2 * math.pi * f * c), 0.005, seed=2)
    rows = [f"{a:.9e},{b.real:.9e},{b.imag:.9e}" for a, b in zip(f, z)]
    sweep = tmp_path / "c1.csv"
    sweep.write_text("freq (Hz),Re (ohm),Im (ohm)\n" + "\n".join(rows) + "\n", encoding="ascii")
    out = tmp_path / "out"
    assert main(["compare", str(fixture), "--sweep", str(sweep), "--trace", str(trace),
                 "--out", str(out), "--quiet", "--no-ngspice"]) == 0
    data = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert data["frequency_sweep"]["joint"] is True
    assert [i["role"] for i in data["inputs"]] == ["fixture", "sweep", "trace"]
    lumped = next(c for c in data["frequency_sweep"]["candidates"] if c["name"] == "lumped")
    err = lumped["fitted_stderr"]
    assert abs(lumped["fitted"]["C1.esr"] - esr) <= 3 * err["C1.esr"]
    # No loss grows with frequency in these data, so the power-law rung is not tried
    # (its exponent would be undetermined) and says why.
    power = next(c for c in data["frequency_sweep"]["candidates"] if c["name"] == "power-C1-esr")
    assert power["failed"] and "skin-effect rung does not beat" in power["failure_reason"]
    assert abs(lumped["fitted"]["L1.dcr"] - dcr) <= 3 * err["L1.dcr"]


def test_a_missing_ngspice_skips_the_ac_leg_once_and_says_so(tmp_path: Path, monkeypatch) -> None:
    # A library path that does not exist: the loader's documented override.
    from xcheck.engines import ngspice

    monkeypatch.setenv("NGSPICE_LIBRARY_PATH", str(tmp_path / "no-such-libngspice.so"))
    ngspice.recycle_shared_worker(lambda runs, memory: True)  # the next run starts afresh
    f = np.geomspace(100.0, 1e6, 30)
    sweep = FrequencySweep(f, 0.05 + 1 / (1j * 2 * math.pi * f * 100e-6), "impedance", "ohm",
                           "cap.csv")
    try:
        result = run_frequency_comparison(parse_fixture_text(CAPACITOR, "cap.toml"), sweep)
    finally:
        monkeypatch.delenv("NGSPICE_LIBRARY_PATH")
        ngspice.recycle_shared_worker(lambda runs, memory: True)  # later tests: the real one
    skipped = [n for n in result.notes if "skipped for every candidate" in n]
    assert len(skipped) == 1
    lumped = next(o for o in result.outcomes if o.name == "lumped")
    assert lumped.ngspice is None and lumped.exact is not None
    assert result.best is not None  # the exact leg and the ranking are still there


@pytest.mark.ngspice
@pytest.mark.parametrize("example, table", [
    ("lc_filter_damped_step.toml", '[swept]\nmeasures = "transfer"\nsource = "V1"\n'),
    ("film_ringdown.toml", '[swept]\nmeasures = "impedance"\nacross = "SW1"\n'),
])
def test_a_sweep_made_by_ngspice_from_the_stated_values_ranks_them_first(example, table) -> None:
    # The measurement is ngspice's own .ac analysis of the as-measured circuit (a
    # reference outside the exact engine), with 1 % seeded noise: the candidate holding
    # exactly those values must rank first, and the lumped rung (which contains them)
    # may not beat it (it only pays BIC's penalty for its extra values).
    from xcheck.engines.ac_deck import AcSweep, simulate_ac_ngspice
    from xcheck.engines.swept import swept_engine
    from xcheck.fitting.candidates import default_ladder

    root = Path(__file__).resolve().parents[1] / "examples"
    fixture = parse_fixture_text((root / example).read_text(encoding="utf-8") + "\n" + table,
                                 example)
    stated = next(c for c in default_ladder(fixture) if c.name == "as-measured")
    plot = simulate_ac_ngspice(swept_engine(fixture, stated.parameters, fixture.swept),
                               AcSweep(10, 100.0, 1e7))
    quantity = fixture.swept.measures
    sweep = FrequencySweep(plot.frequency, noisy(plot.response, 0.01, seed=4), quantity,
                           "ohm" if quantity == "impedance" else "V/V", "made-by-ngspice.csv")
    result = run_frequency_comparison(fixture, sweep, use_ngspice=False)
    assert result.ranking[0].name == "as-measured"
    lumped = next(r for r in result.ranking if r.name == "lumped")
    assert lumped.delta_bic > 0
