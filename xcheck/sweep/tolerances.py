"""Which values of a candidate vary, how, and the random draws of them.

What varies is what the fixture states an uncertainty for, as
:func:`xcheck.fitting.fixed_values.fixed_uncertainties` decides: a label value with a
``tolerance``, and a meter reading (its assumed standard uncertainty, see
:func:`xcheck.fitting.candidates.measured_uncertainty`). How a tolerance varies is the
fixture's ``[spread]`` table (:mod:`xcheck.fixture.spread_table`). Every variation is a
multiplicative factor on the stated value, and no factor is ever zero or negative:

- **uniform** (a tolerance t as half-width): factor ``1 + t (2 U - 1)`` with U uniform on
  [0, 1], so the value lies in [v (1 - t), v (1 + t)]; the fixture reader refuses a
  tolerance of 100 % or more, so the lower end stays above zero;
- **normal** (a tolerance spanning k standard deviations, or a meter reading's standard
  uncertainty u): a *lognormal* factor ``exp(s Z - s^2 / 2)``, Z standard normal,
  ``s^2 = ln(1 + r^2)``, with r = t / k (or u / v) the relative standard deviation. Its
  mean is exactly 1 and its standard deviation exactly r (the lognormal's moments,
  from memory: mean e^{mu + s^2/2}, variance (e^{s^2} - 1) e^{2 mu + s^2}), so the value
  keeps the stated mean and relative sigma, can never be negative, and for small r is
  the normal distribution to first order. A truncated normal was not chosen: cutting
  the tails off changes the stated sigma, and by an amount that depends on r.

Correlations come from a Gaussian copula: one vector Z of correlated standard normal
scores per trial (``Z = L N``, L the Cholesky factor of the correlation matrix), turned
into uniform scores ``U = Phi(Z)`` where a value is uniform. The coefficient is that of
the normal scores: two lognormal factors' logarithms correlate exactly by it, two
uniform factors' ranks by (6 / pi) asin(rho / 2) (Spearman's rho of a Gaussian copula,
from memory).

The *extremes* of a value (worst-case corners, the one-at-a-time explanation of a
discrepancy) are the ends of a uniform tolerance, and the factors at Z = -k and +k of a
normal one (k = 3 for a meter reading: the fit's bounds for a measured value use three
standard uncertainties too).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from scipy.special import ndtr

from xcheck.circuit.parameters import ORIGIN_LABEL, ParameterSet
from xcheck.fitting.fixed_values import fixed_uncertainties
from xcheck.fixture.model import Fixture
from xcheck.fixture.schema import ParameterKey, key_label

#: Standard deviations a meter reading's extremes lie from it.
METER_EXTREME_SIGMAS = 3.0


@dataclass(frozen=True)
class VariedValue:
    """One value that varies, with its distribution (relative to the stated value).

    Attributes
    ----------
    key
        ``(part, "value")``.
    value
        The stated value (SI), the mean of the drawn values.
    source
        ``"tolerance"`` (a label tolerance) or ``"meter"`` (a meter reading).
    distribution
        ``"uniform"`` or ``"normal"`` (drawn as a lognormal factor, see the module
        docstring).
    spread
        Uniform: the tolerance as a fraction (the half-width). Normal: the relative
        standard deviation r.
    extreme_sigmas
        Normal: how many standard deviations from the value the extremes lie (the
        tolerance's k, or 3 for a meter reading); None for uniform.
    tolerance
        The printed tolerance (fraction), None for a meter reading.
    """

    key: ParameterKey
    value: float
    source: Literal["tolerance", "meter"]
    distribution: Literal["uniform", "normal"]
    spread: float
    extreme_sigmas: float | None = None
    tolerance: float | None = None

    @property
    def label(self) -> str:
        """``"L1.value"``."""
        return key_label(self.key)

    @property
    def part(self) -> str:
        """The part's name."""
        return self.key[0]

    @property
    def relative_sigma(self) -> float:
        """Relative standard deviation of the drawn value (t / sqrt(3) for uniform,
        JCGM 100 section 4.3.7)."""
        if self.distribution == "uniform":
            return self.spread / math.sqrt(3.0)
        return self.spread

    @property
    def log_sigma(self) -> float:
        """s of the lognormal factor (normal only): sqrt(ln(1 + r^2))."""
        return math.sqrt(math.log1p(self.spread**2))

    def factor(self, score: np.ndarray) -> np.ndarray:
        """Multiplicative factors for standard normal scores ``score``."""
        score = np.asarray(score, dtype=float)
        if self.distribution == "uniform":
            return 1.0 + self.spread * (2.0 * ndtr(score) - 1.0)
        s = self.log_sigma
        return np.exp(s * score - 0.5 * s * s)

    @property
    def extremes(self) -> tuple[float, float]:
        """(low, high) factors: the tolerance's ends, or the factors at -k and +k
        standard deviations."""
        if self.distribution == "uniform":
            return 1.0 - self.spread, 1.0 + self.spread
        k = float(self.extreme_sigmas or METER_EXTREME_SIGMAS)
        low, high = self.factor(np.array([-k, k]))
        return float(low), float(high)

    @property
    def words(self) -> str:
        """``"its 10 % tolerance (uniform)"``, ``"3 standard uncertainties of its meter
        reading (1 % each)"``."""
        if self.source == "meter":
            return (f"{METER_EXTREME_SIGMAS:g} standard uncertainties of its meter reading "
                    f"({100 * self.spread:.2g} % each)")
        tolerance = 100 * float(self.tolerance or 0.0)
        if self.distribution == "uniform":
            return f"its {tolerance:g} % tolerance (uniform)"
        return f"its {tolerance:g} % tolerance (normal, {self.extreme_sigmas:g} sigma)"


@dataclass(frozen=True)
class ToleranceModel:
    """The values one candidate varies and their correlation matrix (the copula's)."""

    varied: tuple[VariedValue, ...]
    correlation: np.ndarray

    @property
    def size(self) -> int:
        """Number of varied values."""
        return len(self.varied)

    def scores(self, rng: np.random.Generator, count: int) -> np.ndarray:
        """``(count, size)`` correlated standard normal scores."""
        raw = rng.standard_normal((count, self.size))
        if self.size and not np.allclose(self.correlation, np.eye(self.size)):
            raw = raw @ np.linalg.cholesky(self.correlation).T
        return raw

    def draw(self, rng: np.random.Generator, count: int) -> np.ndarray:
        """``(count, size)`` multiplicative factors, one row per trial."""
        scores = self.scores(rng, count)
        out = np.empty_like(scores)
        for k, item in enumerate(self.varied):
            out[:, k] = item.factor(scores[:, k])
        return out

    def corners(self) -> np.ndarray:
        """``(2**size, size)`` factors: every value at one of its extremes."""
        ends = [item.extremes for item in self.varied]
        return np.array(list(itertools.product(*ends)), dtype=float).reshape(-1, self.size)


def varied_values(fixture: Fixture, parameters: ParameterSet) -> tuple[VariedValue, ...]:
    """The values of ``parameters`` that vary (module docstring), in parameter order."""
    out = []
    for item in fixed_uncertainties(fixture, parameters, set()):
        part = fixture.parts[item.key[0]]
        origin = parameters.origins.get(item.key, "")
        if origin == ORIGIN_LABEL:
            tolerance = float(part.tolerance or 0.0)
            spread = fixture.spread.for_part(part.name)
            if spread.distribution == "uniform":
                assert tolerance < 1.0  # the fixture reader refuses 100 % and more
                out.append(VariedValue(item.key, item.value, "tolerance", "uniform", tolerance,
                                       None, tolerance))
            else:
                sigmas = float(spread.sigmas or 0.0)
                out.append(VariedValue(item.key, item.value, "tolerance", "normal",
                                       tolerance / sigmas, sigmas, tolerance))
        else:
            out.append(VariedValue(item.key, item.value, "meter", "normal",
                                   item.sigma / abs(item.value), METER_EXTREME_SIGMAS))
    return tuple(out)


def tolerance_model(fixture: Fixture, parameters: ParameterSet) -> ToleranceModel:
    """The :class:`ToleranceModel` of one candidate's parameter set."""
    varied = varied_values(fixture, parameters)
    matrix = fixture.spread.matrix([v.part for v in varied])
    return ToleranceModel(varied, matrix)
