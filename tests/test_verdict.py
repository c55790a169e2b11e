"""The words of the verdict, called directly on comparisons of seeded synthetic events.

References: the captures are integrated by scipy.signal.lsim (xcheck.demo.synth) from a
hidden truth written in tests/compare_cases.py, independently of the closed-form engine
the fit uses; the numbers the sentences print are checked against that truth, or
against numpy's RMS of the residuals. The BIC evidence scale is Kass & Raftery (1995),
"Bayes factors", JASA 90: a difference above 10 is their top band (from memory).
Printed numbers have three significant digits, so every parsed number carries a
rounding allowance of half a unit in the third digit (0.5 % relative) on top of the
statistical one.
"""

from __future__ import annotations

import re
from dataclasses import replace

import numpy as np
import pytest

from compare_cases import HIDDEN_EXTRA, LOSSY_JIG_TOML, hidden_truth_series_resistance, lossy_capture, write_trace
from xcheck.compare import run_comparison
from xcheck.demo.synth import capture_trace, write_capture_csv
from xcheck.fixture.reader import load_fixture
from xcheck.verdict import MISFIT_LIMIT, write_loop_findings, write_verdict

#: Three significant digits: half a unit in the last one, relative.
PRINT_ROUNDING = 5e-3
_PREFIX = {"": 1.0, "m": 1e-3, "µ": 1e-6, "n": 1e-9, "k": 1e3}
#: The lossy jig's DC loop reading minus its leads (tests/data/lossy_jig.toml:
#: 1.065 - 0.06 ohm) and its capacitor's stated ESR (20 mOhm).
DC_READING_OHM = 1.065 - 0.06
STATED_ESR_OHM = 0.020


def _si(text: str) -> float:
    """'425 mΩ' -> 0.425: the number and SI prefix of a printed value."""
    number, prefix = re.fullmatch(r"(-?[\d.]+) ([mµnk]?)[ΩHF]", text).groups()
    return float(number) * _PREFIX[prefix]


@pytest.fixture(scope="module")
def lossy_fixture(tmp_path_factory):
    path = tmp_path_factory.mktemp("verdict") / "lossy_jig.toml"
    path.write_text(LOSSY_JIG_TOML, encoding="utf-8")
    return load_fixture(path)


@pytest.fixture(scope="module")
def explained(tmp_path_factory, lossy_fixture):
    """The lossy jig's event with its hidden 0.35 ohm extra loss (seed 11)."""
    folder = tmp_path_factory.mktemp("explained")
    return run_comparison(lossy_fixture, trace=write_trace(folder, 11), use_ngspice=False)


def _verdict(fixture, comparison, measured=None) -> str:
    outcomes = list(comparison.outcomes)
    findings = tuple(write_loop_findings(fixture, outcomes))
    return write_verdict(fixture, measured or comparison.measured, outcomes, findings,
                         next_steps=comparison.next_measurements)


def test_the_best_candidate_is_named_with_its_fitted_loss(lossy_fixture, explained):
    text = _verdict(lossy_fixture, explained)
    assert text == explained.verdict  # the comparison's paragraph is this one
    best = explained.best
    assert best.name == "extra-loss"
    assert text.startswith(
        f"The best explanation of the measurement is candidate 'extra-loss' "
        f"({best.candidate.description}), NRMSE "
    )
    assert "NO candidate" not in text
    # The fitted extra loss as printed: the hidden truth within 3 standard errors
    # (plus print rounding).
    value, stderr = re.search(r"Fitted extra series loss = (\S+ [mµ]?Ω) ± (\S+ [mµ]?Ω)[ .;]", text).groups()
    assert abs(_si(value) - HIDDEN_EXTRA) < 3 * _si(stderr) + PRINT_ROUNDING * HIDDEN_EXTRA
    # The as-measured model loses with very strong evidence (Kass & Raftery 1995:
    # 2 ln B > 10, their top band).
    delta, words = re.search(
        r"The as-measured model does worse by ΔBIC = ([\d.]+) \(([\w ]+?) evidence against it\)",
        text).groups()
    assert float(delta) > 10 and words == "very strong"
    assert float(delta) == pytest.approx(explained.outcome("as-measured").ranked.delta_bic, abs=0.05)
    # Loss beyond DC: true total minus DC reading minus stated ESR (0.35 ohm by
    # construction of the capture).
    beyond = re.search(r"leaving (\S+ [mµ]?Ω) of loss beyond what DC measurements explain", text)
    truth = hidden_truth_series_resistance() - DC_READING_OHM - STATED_ESR_OHM
    (extra,) = best.fit.fitted
    assert abs(_si(beyond.group(1)) - truth) < 3 * extra.stderr + PRINT_ROUNDING * truth
    # Every sentence starts with a capital and ends with a full stop.
    for sentence in re.split(r"(?<=\.) (?=[A-Z])", text):
        assert sentence[0].isupper() and sentence.endswith("."), sentence


def test_residuals_beyond_the_misfit_limit_are_called_out_first(lossy_fixture, tmp_path):
    """A ring at sqrt(2) times the frequency the measured L and C allow: no rung frees
    L or C, so the residuals dwarf the noise."""
    capture = lossy_capture(31).with_(inductance=215e-6 / 2)
    path = write_capture_csv(tmp_path / "other.csv", *capture_trace(capture))
    result = run_comparison(lossy_fixture, trace=path, use_ngspice=False)
    text = _verdict(lossy_fixture, result)
    best = result.best
    match = re.match(
        rf"NO candidate explains this measurement within its noise: the best, '{best.name}', "
        r"leaves residuals ([\d.]+) times the noise\. Check that the fixture describes this "
        r"capture .*\. The closest candidate is candidate '" + re.escape(best.name) + "'",
        text)
    assert match, text[:300]
    assert "The best explanation" not in text
    # The printed ratio is the RMS of the residuals (numpy) over the estimated noise, to
    # its one printed decimal.
    residual = result.observation.voltage - best.fit.model
    ratio = np.sqrt(np.mean(residual**2)) / result.measured.estimate.noise_sigma
    assert float(match.group(1)) == pytest.approx(ratio, abs=0.05)
    assert ratio > MISFIT_LIMIT


@pytest.mark.parametrize("times_noise, called_out", [(4.0, True), (2.9, False)])
def test_the_misfit_limit_is_three_times_the_noise(lossy_fixture, explained, times_noise,
                                                   called_out):
    # The same comparison read as if the noise were smaller: residual RMS over noise is
    # then ``times_noise`` exactly (the residual RMS is numpy's, from the fit's residuals).
    rms = float(np.sqrt(np.mean(explained.best.fit.residuals**2)))
    measured = explained.measured
    quieter = replace(measured, estimate=replace(measured.estimate,
                                                 noise_sigma=rms / times_noise),
                      instrument_noise=rms / times_noise)
    text = _verdict(lossy_fixture, explained, quieter)
    assert text.startswith("NO candidate explains") is called_out
    if called_out:
        assert f"leaves residuals {times_noise:.1f} times the noise" in text


def test_stated_losses_above_what_the_ringing_shows_are_called_too_high(lossy_fixture, tmp_path):
    """True series resistance 0.6 ohm, while the DC reading and the stated ESR alone
    give 1.025 ohm: the sentence must say they are 0.425 ohm too high."""
    capture = lossy_capture(32).with_(resistance=0.6)
    path = write_capture_csv(tmp_path / "low.csv", *capture_trace(capture))
    result = run_comparison(lossy_fixture, trace=path, use_ngspice=False)
    alpha = result.measured.neper_frequency_per_s.value
    (finding,) = write_loop_findings(lossy_fixture, list(result.outcomes), alpha)
    match = re.fullmatch(
        r"The DC loop reading accounts for (\S+ [mµ]?Ω) of the (\S+ [mµ]?Ω) series resistance the "
        r"measured decay rate implies, and stated ESR for (\S+ [mµ]?Ω): together (\S+ [mµ]?Ω) MORE than the ringing "
        r"shows\. A stated ESR or the loop reading is too high .*\.",
        finding)
    assert match, finding
    dc, total, esr, excess = (_si(g) for g in match.groups())
    assert dc == pytest.approx(DC_READING_OHM, rel=PRINT_ROUNDING)
    assert esr == pytest.approx(STATED_ESR_OHM, rel=PRINT_ROUNDING)
    # Reference: the capture's construction, 1.005 + 0.020 - 0.6 = 0.425 ohm. The needed
    # resistance is the stated one scaled by the measured over the model's decay rate
    # (alpha = R / 2L for a series loop; common practice, no source); the ring-down
    # estimate's alpha is good to about 1 % on this capture, and the loop's other
    # damping (none stated) and ESR's frequency do not enter, so 3 % of the total.
    truth = DC_READING_OHM + STATED_ESR_OHM - 0.6
    assert abs(total - 0.6) < 0.03 * 0.6 + PRINT_ROUNDING * 0.6
    assert abs(excess - truth) < 0.03 * 0.6 + PRINT_ROUNDING * truth
    assert finding in result.verdict
    assert "beyond what DC measurements explain" not in result.verdict


def test_a_value_stopped_at_zero_is_called_so(lossy_fixture) -> None:
    from xcheck.fitting.fit import FittedValue
    from xcheck.verdict import _bound_sentence

    value = FittedValue("loop.extra_resistance", ("loop", "extra_resistance"), 1e-12, 1e-3,
                        "ohm", 0.0, 0.0, 10.0)
    assert value.at_bound
    text = _bound_sentence(lossy_fixture, value)
    assert "stopped at its lower bound of 0" in text and "no physical value can be" in text
    inside = FittedValue("loop.extra_resistance", ("loop", "extra_resistance"), 0.3, 1e-3,
                         "ohm", 0.0, 0.0, 10.0)
    assert not inside.at_bound
