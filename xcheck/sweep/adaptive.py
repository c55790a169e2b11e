"""How many Monte Carlo trials: the adaptive procedure of JCGM 101:2008, section 7.9.

The procedure (7.9.4, restated): run batches of h trials each, h = max(J, 10^4) with J
the smallest integer >= 100 / (1 - p) for a coverage probability p. After the second
batch and every later one, take the mean of the batch results of each quantity watched
(the estimate y, its standard uncertainty u(y), and the ends of the probabilistically
symmetric coverage interval) and the standard deviation of that mean,

    s = sqrt( sum_r (x_r - x_mean)^2 / (H (H - 1)) )   over the H batches so far.

The results are stable when 2 s is at most the numerical tolerance delta of u(y) for
every quantity. delta (7.9.2): write u(y) as c x 10^l with c an integer of ``digits``
significant digits; delta = 10^l / 2. E.g. u(y) = 0.0165 with two digits is
17 x 10^-3, delta = 0.0005.

:class:`AdaptiveRun` does the bookkeeping for any number of outputs (several watched at
once: all must be stable); the caller draws the batches.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

#: Fewest trials in one batch (JCGM 101 7.9.4 b).
MIN_BATCH = 10_000
#: The procedure stops after this many trials even when not stable (and says so).
MAX_TRIALS = 2_000_000


def batch_size(coverage: float) -> int:
    """h = max(J, 10^4), J the smallest integer >= 100 / (1 - p) (JCGM 101 7.9.4 b)."""
    if not 0 < coverage < 1:
        raise ValueError("the coverage probability must lie between 0 and 1")
    return max(int(math.ceil(100.0 / (1.0 - coverage) - 1e-9)), MIN_BATCH)


def numerical_tolerance(u: float, digits: int) -> float:
    """delta of JCGM 101 7.9.2: half a unit in the last of ``digits`` significant
    digits of the standard uncertainty ``u`` (``nan`` when u is not positive)."""
    if not (math.isfinite(u) and u > 0):
        return float("nan")
    exponent = math.floor(math.log10(u)) - digits + 1
    # Rounding may carry into one more digit (99.7 -> 100 for two digits).
    if round(u / 10.0**exponent) >= 10**digits:
        exponent += 1
    return 0.5 * 10.0**exponent


def interval(values: np.ndarray, coverage: float) -> tuple[float, float]:
    """The probabilistically symmetric coverage interval: the (1 - p) / 2 and
    (1 + p) / 2 quantiles of ``values`` (JCGM 101 7.7)."""
    low, high = np.quantile(values, [(1 - coverage) / 2, (1 + coverage) / 2])
    return float(low), float(high)


def summary(values: np.ndarray, coverage: float) -> tuple[float, float, float, float]:
    """(mean, standard deviation, interval low, interval high) of the finite values."""
    values = np.asarray(values, float)
    values = values[np.isfinite(values)]
    if values.size < 2:
        return (float("nan"),) * 4
    low, high = interval(values, coverage)
    return float(np.mean(values)), float(np.std(values, ddof=1)), low, high


@dataclass
class AdaptiveRun:
    """The state of the adaptive procedure for several outputs watched together.

    Parameters
    ----------
    names
        The outputs (``"frequency"``, ``"alpha"``).
    coverage
        The coverage probability p.
    digits
        Significant decimal digits asked of each standard uncertainty (1 or 2 usual).
    """

    names: tuple[str, ...]
    coverage: float = 0.90
    digits: int = 2
    batches: dict[str, list[tuple[float, float, float, float]]] = field(default_factory=dict)
    values: dict[str, list[np.ndarray]] = field(default_factory=dict)

    def add(self, batch: dict[str, np.ndarray]) -> None:
        """Record one batch's results (an array of trial outputs per name)."""
        for name in self.names:
            data = np.asarray(batch[name], float)
            self.batches.setdefault(name, []).append(summary(data, self.coverage))
            self.values.setdefault(name, []).append(data)

    @property
    def count(self) -> int:
        """Batches recorded."""
        return len(self.batches.get(self.names[0], [])) if self.names else 0

    def all_values(self, name: str) -> np.ndarray:
        """Every trial's output ``name`` so far, in trial order."""
        parts = self.values.get(name, [])
        return np.concatenate(parts) if parts else np.empty(0)

    def tolerance(self, name: str) -> float:
        """delta for ``name``, from the standard uncertainty of every trial so far."""
        return numerical_tolerance(summary(self.all_values(name), self.coverage)[1],
                                   self.digits)

    def spread_of_means(self, name: str) -> np.ndarray:
        """Standard deviations of the batch means of (y, u, low, high) for ``name``."""
        rows = np.array(self.batches[name], float)
        count = rows.shape[0]
        if count < 2:
            return np.full(4, np.inf)
        return np.sqrt(np.sum((rows - rows.mean(axis=0)) ** 2, axis=0) / (count * (count - 1)))

    def stable(self, name: str) -> bool:
        """True when 2 s <= delta for the mean, standard deviation and interval ends of
        ``name`` (an output that never varies, u = 0, is stable at once)."""
        if self.count < 2:
            return False
        rows = np.array(self.batches[name], float)
        if np.all(np.isnan(rows)):
            return True  # no usable trial at all: more batches would not change that
        u = summary(self.all_values(name), self.coverage)[1]
        if u == 0:
            return True
        delta = self.tolerance(name)
        spread = self.spread_of_means(name)
        return bool(np.all(np.isfinite(spread)) and np.all(2 * spread <= delta))

    def done(self) -> bool:
        """True when every output is stable."""
        return all(self.stable(name) for name in self.names)
