"""The model ladder built from a fixture.

Arithmetic checks only (a two-wire reading minus its shorted-lead zero is the part's
resistance: common practice, no source); fits are tested in test_compare.py.
"""

from __future__ import annotations

import pytest

from compare_cases import data_text, variant
from xcheck.fitting.candidates import (
    EXTRA_RESISTANCE,
    RingHint,
    build_candidates,
    series_resistance,
)
from xcheck.errors import FixtureError
from xcheck.fixture.reader import parse_fixture_text

#: The film jig (tests/data/film_jig.toml) with a loop reading of 0.506 ohm, without the
#: tolerance and probe loading, which the ladder arithmetic below does not use.
BASE = variant(
    data_text("film_jig.toml"),
    ('tolerance = "20%"\n', ""),
    ('reading = "0.512"', 'reading = "0.506"'),
    ('\n[probe_loading]\nresistance = "10meg"\ncapacitance = "11p"\n', ""),
)


def _ladder(text: str = BASE, hint: RingHint | None = None):
    fixture = parse_fixture_text(text, "ladder.toml")
    return fixture, {c.name: c for c in build_candidates(fixture, hint)}


def test_default_ladder_rungs_and_their_values():
    fixture, ladder = _ladder()
    assert list(ladder) == ["label", "as-measured", "extra-loss", "all-unknowns"]
    label = ladder["label"].parameters
    assert label.get(("R1", "value")) == pytest.approx(0.22)
    assert label.get(("C1", "esr")) is None  # no parasitics on the label rung
    measured = ladder["as-measured"].parameters
    assert measured.get(("R1", "value")) == pytest.approx(0.291 - 0.058, abs=1e-12)
    assert measured.get(("C1", "value")) == pytest.approx(49.1e-6, rel=1e-12)
    # The loop reading (0.506 - 0.058 = 0.448 ohm) pins the one unknown DC resistance:
    # DCR = 0.448 - R1 (0.233) - SW1 (0.005) = 0.210 ohm.
    assert measured.get(("L1", "dcr")) == pytest.approx(0.210, abs=1e-12)
    assert series_resistance(fixture, measured) == pytest.approx(0.448 + 0.040, abs=1e-12)


def test_extra_loss_is_bounded_at_zero():
    # A resistance cannot be negative: the fit may not buy a better match with an
    # unphysical value (it stops at zero and the verdict says so).
    fixture, ladder = _ladder()
    (extra,) = ladder["extra-loss"].free
    assert extra.key == EXTRA_RESISTANCE
    total = series_resistance(fixture, ladder["as-measured"].parameters)
    assert extra.lower == 0.0
    assert extra.upper >= 10.0 * total


def test_all_unknowns_frees_question_marks_and_the_unmeasured_inductance():
    _, ladder = _ladder()
    labels = [f.label for f in ladder["all-unknowns"].free]
    assert labels == ["loop.extra_resistance", "L1.dcr", "L1.value"]
    dcr = {f.label: f for f in ladder["all-unknowns"].free}["L1.dcr"]
    # The loop reading bounds the DCR: at most the loop's 0.448 ohm plus two meter sigmas.
    assert dcr.upper < 0.448 + 2 * (0.01 * 0.506 + 0.010) + 1e-12


def test_ladder_stops_when_nothing_is_unknown():
    text = BASE.replace('dcr = "?"', 'dcr = "0.2"\nmeasured = "455u"')
    _, ladder = _ladder(text)
    assert list(ladder) == ["label", "as-measured", "extra-loss"]


def test_unknown_inductance_starts_from_the_ring_frequency():
    text = BASE.replace('nominal = "470u"\ndcr = "?"', 'nominal = "?"')
    omega0 = 1 / (452e-6 * 49.1e-6) ** 0.5
    _, ladder = _ladder(text, RingHint(omega0))
    free = {f.label: f for f in ladder["all-unknowns"].free}
    # omega0^2 = 1/(L C) (textbook); start within rounding of 452 uH.
    assert free["L1.value"].start == pytest.approx(452e-6, rel=1e-9)
    assert not ladder["label"].usable and "L1" in ladder["label"].problems[0]


def test_fixture_candidates_are_added_and_defaults_dropped():
    text = BASE + '''
[candidates]
drop = ["label"]
[candidates.esr-only]
base = "as-measured"
free = ["C1.esr"]
description = "all unexplained loss is ESR"
[candidates.esr-only.set]
"L1.dcr" = "0.12"
'''
    _, ladder = _ladder(text)
    assert "label" not in ladder
    custom = ladder["esr-only"]
    assert [f.label for f in custom.free] == ["C1.esr"]
    assert custom.parameters.get(("L1", "dcr")) == pytest.approx(0.12)
    assert custom.description == "all unexplained loss is ESR"


@pytest.mark.parametrize(
    "table, message",
    [
        ('[candidates]\ndrop = ["nope"]\n', r"candidates\.drop names 'nope'"),
        ('[candidates.x]\nfree = ["Z9.esr"]\n', r"no part 'Z9'"),
        ('[candidates.x]\nfree = ["L1.esr"]\n', r"inductor has no 'esr'"),
        ('[candidates.x]\nbase = "best"\n', r"candidates\.x\.base is 'best'"),
        ('[candidates.x]\nfree = "C1.esr"\n', r"must be a list"),
        ('[candidates.x.set]\n"L1.dcr" = "1M"\n', r"upper-case 'M'"),
        ('[candidates.x]\ncolour = "red"\n', r"unknown keys \['colour'\]"),
    ],
)
def test_bad_candidate_tables_are_fixture_errors(table, message):
    with pytest.raises(FixtureError, match=message):
        _ladder(BASE + "\n" + table)


def test_a_measured_value_stays_within_its_uncertainty_unless_released():
    table = '''
[candidates.r-free]
free = ["R1.value"]
[candidates.r-released]
free = ["R1.value"]
release = ["R1.value"]
'''
    _, ladder = _ladder(BASE + table)
    held = ladder["r-free"].free[0]
    # 0.233 ohm measured; sigma = 1 % of the 0.291 reading + 10 mOhm = 12.91 mOhm; 3 sigma.
    assert held.lower == pytest.approx(0.233 - 3 * 0.01291, abs=1e-9)
    assert held.upper == pytest.approx(0.233 + 3 * 0.01291, abs=1e-9)
    released = ladder["r-released"].free[0]
    assert released.upper > 1.0 and released.lower < 0.01


def test_a_rung_the_ladder_leaves_out_fails_when_the_ladder_is_built():
    # Read time checks names against the four defaults; only the ladder knows that it
    # stops at extra-loss when nothing is unknown (see test_ladder_stops_when_nothing_is_unknown).
    text = BASE.replace('dcr = "?"', 'dcr = "0.2"\nmeasured = "455u"')
    fixture = parse_fixture_text(text + '\n[candidates.x]\nbase = "all-unknowns"\n', "l.toml")
    with pytest.raises(FixtureError, match=r"candidates\.x\.base is 'all-unknowns'"):
        build_candidates(fixture)
