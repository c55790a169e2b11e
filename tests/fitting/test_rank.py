"""Ranking by BIC and the evidence words.

Reference: R. E. Kass and A. E. Raftery, "Bayes Factors", Journal of the American
Statistical Association 90 (1995), section 3.2: 2 ln B (which BIC differences
approximate) of 0-2 "not worth more than a bare mention", 2-6 "positive", 6-10
"strong", > 10 "very strong" (from memory).
"""

import math

import pytest

from xcheck.fitting.rank import evidence_words, rank_by_bic


@pytest.mark.parametrize(
    "delta, words",
    [(0.0, "not distinguishable"), (1.99, "not distinguishable"), (2.0, "positive"),
     (5.9, "positive"), (6.0, "strong"), (10.0, "strong"), (10.01, "very strong"),
     (250.0, "very strong"), (float("nan"), "not comparable")],
)
def test_evidence_scale_follows_kass_raftery(delta, words):
    assert evidence_words(delta) == words


def test_failed_candidates_rank_last_and_unranked():
    ranked = rank_by_bic(["a", "b", "c", "d"], [105.0, 100.0, float("nan"), 130.0],
                         [False, False, True, False])
    assert [r.name for r in ranked] == ["b", "a", "d", "c"]
    assert [r.rank for r in ranked] == [1, 2, 3, None]
    # Differences are exact sums of the inputs: tolerance is float rounding only.
    assert ranked[1].delta_bic == pytest.approx(5.0, abs=1e-12)
    assert ranked[1].evidence == "positive"
    assert ranked[2].evidence == "very strong"
    assert ranked[3].evidence == "failed" and math.isnan(ranked[3].delta_bic)


def test_all_failed_gives_no_best():
    ranked = rank_by_bic(["a"], [float("nan")], [True])
    assert ranked[0].rank is None
