"""The draws of the varied values, against scipy.stats and sampling theory.

References: scipy.stats (uniform, lognorm, kstest, spearmanr) and numpy's corrcoef; the
lognormal's moments (mean e^{mu + s^2/2}, variance (e^{s^2} - 1) e^{2 mu + s^2}) and the
Spearman correlation (6 / pi) asin(rho / 2) of a Gaussian copula are recalled (from
memory). Every draw uses a fixed seed, so each test gives the same numbers every run;
the thresholds are set so that a correct draw passes with a wide margin while a wrong
width or shape (the checks were tried with a 10 % wider spread) fails.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.stats

from compare_cases import data_text, variant
from xcheck.circuit.parameters import parameters_from_fixture
from xcheck.fixture.reader import parse_fixture_text
from xcheck.sweep.tolerances import ToleranceModel, VariedValue, tolerance_model

#: Trials of the distribution checks.
N = 20_000


def rng(seed: int = 20240611) -> np.random.Generator:
    return np.random.default_rng(seed)


def fixture(extra: str = "", measured: bool = True):
    text = variant(
        data_text("series_rlc.toml"),
        ('nominal = "10u"', 'nominal = "10u"\ntolerance = "10%"'),
        ('nominal = "220u"', 'nominal = "220u"\ntolerance = "20%"'),
        ('nominal = "1.3"', 'nominal = "1.3"' + ('\nmeasured = "1.31"' if measured else "")),
    )
    return parse_fixture_text(text + "\n" + extra, "jig.toml")


def test_label_tolerances_and_meter_readings_are_what_varies() -> None:
    f = fixture()
    label = tolerance_model(f, parameters_from_fixture(f, use_measured=False,
                                                       include_parasitics=False))
    assert [v.label for v in label.varied] == ["C1.value", "L1.value"]
    measured = tolerance_model(f, parameters_from_fixture(f))
    assert [(v.label, v.source) for v in measured.varied] == [
        ("C1.value", "tolerance"), ("R1.value", "meter"), ("L1.value", "tolerance")]
    # The meter reading's standard uncertainty: 1 % + 10 mOhm (common practice, no
    # source; xcheck.fitting.candidates), relative to the reading.
    r1 = measured.varied[1]
    assert r1.spread == pytest.approx((0.01 * 1.31 + 0.010) / 1.31, rel=1e-12)


def test_uniform_draws_follow_scipy_uniform() -> None:
    item = VariedValue(("C1", "value"), 10e-6, "tolerance", "uniform", 0.1, None, 0.1)
    values = item.value * ToleranceModel((item,), np.eye(1)).draw(rng(), N)[:, 0]
    # Reference: scipy.stats.uniform on [v (1 - t), v (1 + t)].
    reference = scipy.stats.uniform(loc=9e-6, scale=2e-6)
    assert scipy.stats.kstest(values, reference.cdf).pvalue > 0.01
    wider = scipy.stats.uniform(loc=8.9e-6, scale=2.2e-6)  # the check can fail
    assert scipy.stats.kstest(values, wider.cdf).pvalue < 1e-6
    assert values.min() >= 9e-6 and values.max() <= 11e-6


def test_normal_draws_are_the_lognormal_with_the_stated_mean_and_sigma() -> None:
    r = 0.2 / 3  # a 20 % tolerance stated as 3 sigma
    item = VariedValue(("L1", "value"), 220e-6, "tolerance", "normal", r, 3.0, 0.2)
    values = item.value * ToleranceModel((item,), np.eye(1)).draw(rng(), N)[:, 0]
    s = math.sqrt(math.log1p(r * r))
    # Reference: scipy.stats.lognorm with shape s and scale v e^{-s^2/2} (mean v).
    reference = scipy.stats.lognorm(s, scale=220e-6 * math.exp(-s * s / 2))
    assert reference.mean() == pytest.approx(220e-6, rel=1e-12)
    assert reference.std() == pytest.approx(r * 220e-6, rel=1e-12)
    assert scipy.stats.kstest(values, reference.cdf).pvalue > 0.01
    assert scipy.stats.kstest(values, scipy.stats.lognorm(1.1 * s, scale=220e-6).cdf
                              ).pvalue < 1e-6
    # Sample moments within 4 standard errors: sigma / sqrt(N) for the mean, about
    # sigma / sqrt(2 N) for the standard deviation (near-normal).
    assert abs(values.mean() - 220e-6) < 4 * r * 220e-6 / math.sqrt(N)
    assert abs(values.std() / (r * 220e-6) - 1) < 4 / math.sqrt(2 * N)


def test_no_draw_is_ever_negative() -> None:
    wide = VariedValue(("R1", "value"), 0.02, "meter", "normal", 1.5, 3.0)  # u = 150 %
    edge = VariedValue(("C1", "value"), 1e-6, "tolerance", "uniform", 0.99, None, 0.99)
    factors = ToleranceModel((wide, edge), np.eye(2)).draw(rng(), N)
    assert np.all(factors > 0)
    assert wide.extremes[0] > 0 and edge.extremes[0] == pytest.approx(0.01)


def test_a_tolerance_of_100_percent_is_refused_by_the_fixture() -> None:
    from xcheck.errors import FixtureError

    text = variant(data_text("series_rlc.toml"), ('nominal = "10u"',
                                                  'nominal = "10u"\ntolerance = "100%"'))
    with pytest.raises(FixtureError, match=r"must be below 100 %"):
        parse_fixture_text(text, "jig.toml")


@pytest.mark.parametrize("distribution", ["normal", "uniform"])
def test_the_copula_correlation_is_recovered(distribution: str) -> None:
    rho = 0.8
    if distribution == "normal":
        items = tuple(VariedValue((p, "value"), 1.0, "tolerance", "normal", 0.05, 2.0, 0.1)
                      for p in ("C1", "C2"))
    else:
        items = tuple(VariedValue((p, "value"), 1.0, "tolerance", "uniform", 0.1, None, 0.1)
                      for p in ("C1", "C2"))
    factors = ToleranceModel(items, np.array([[1.0, rho], [rho, 1.0]])).draw(rng(7), N)
    if distribution == "normal":
        # The logarithms of two lognormal factors are the copula's normal scores,
        # scaled: they correlate by rho exactly. Standard error of Pearson's r about
        # (1 - rho^2) / sqrt(N) = 0.0025 (from memory); tolerance four of them.
        found = np.corrcoef(np.log(factors).T)[0, 1]
        expected = rho
    else:
        # Uniform margins keep the ranks: Spearman's rho of a Gaussian copula is
        # (6 / pi) asin(rho / 2) (from memory), checked with scipy.stats.spearmanr.
        found = scipy.stats.spearmanr(factors[:, 0], factors[:, 1]).statistic
        expected = 6 / math.pi * math.asin(rho / 2)
    assert abs(found - expected) < 4 * (1 - rho**2) / math.sqrt(N)


def test_the_fixture_correlation_reaches_the_model() -> None:
    f = fixture('[[spread.correlation]]\nparts = ["C1", "L1"]\ncoefficient = 0.6\n',
                measured=False)
    model = tolerance_model(f, parameters_from_fixture(f, use_measured=False,
                                                       include_parasitics=False))
    assert model.correlation.tolist() == [[1.0, 0.6], [0.6, 1.0]]


def test_corners_are_every_extreme() -> None:
    items = (VariedValue(("C1", "value"), 1.0, "tolerance", "uniform", 0.1, None, 0.1),
             VariedValue(("L1", "value"), 1.0, "tolerance", "uniform", 0.2, None, 0.2))
    corners = ToleranceModel(items, np.eye(2)).corners()
    assert sorted(map(tuple, np.round(corners, 12))) == [(0.9, 0.8), (0.9, 1.2),
                                                          (1.1, 0.8), (1.1, 1.2)]
