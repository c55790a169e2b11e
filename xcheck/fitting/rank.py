"""Rank candidates by BIC and put the evidence into words.

Evidence scale for a BIC difference, read as twice the log Bayes factor (Kass & Raftery,
"Bayes Factors", JASA 1995, their table on 2 ln B): below 2 "not worth more than a bare
mention" (xcheck says *not distinguishable*), 2 to 6 "positive", 6 to 10 "strong", above
10 "very strong". Their words are used as they are; "decisive" belongs to another scale
(Jeffreys', on the Bayes factor itself) and is not used.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence


@dataclass(frozen=True)
class Ranked:
    """One candidate's place in the ranking."""

    name: str
    rank: int | None  # None for failed candidates
    bic: float
    delta_bic: float  # versus the best; NaN for failed
    evidence: str     # plain words versus the best


def evidence_words(delta_bic: float) -> str:
    """Plain-words strength of evidence for a BIC difference (Kass & Raftery 1995)."""
    if not math.isfinite(delta_bic):
        return "not comparable"
    if delta_bic < 2:
        return "not distinguishable"
    if delta_bic < 6:
        return "positive"
    if delta_bic <= 10:
        return "strong"
    return "very strong"


def rank_by_bic(names: Sequence[str], bics: Sequence[float], failed: Sequence[bool]) -> list[Ranked]:
    """Order candidates by BIC (lowest first); failed ones go last, unranked.

    Parameters
    ----------
    names, bics, failed
        Parallel sequences, one entry per candidate.

    Returns
    -------
    list of Ranked
        Best first. ``delta_bic`` is each candidate's BIC minus the best's.
    """
    usable = [(b, n) for n, b, f in zip(names, bics, failed) if not f and math.isfinite(b)]
    # Stable sort on BIC alone: on a tie the simpler, earlier rung of the ladder stays first.
    usable.sort(key=lambda item: item[0])
    best = usable[0][0] if usable else float("nan")
    ranked = [
        Ranked(n, i + 1, b, b - best, evidence_words(b - best) if i else "best")
        for i, (b, n) in enumerate(usable)
    ]
    ranked_names = {r.name for r in ranked}
    for n, b, f in zip(names, bics, failed):
        if n not in ranked_names:
            ranked.append(Ranked(n, None, b, float("nan"), "failed"))
    return ranked
