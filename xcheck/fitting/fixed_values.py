"""Uncertainty the fixed values carry into the fitted ones (JCGM 100:2008, the GUM, section 5).

A fit's standard errors are conditional on every value it holds fixed: an inductance
fitted against a capacitor whose meter reading is 1 % high comes out about 1 % low,
whatever the noise. The law of propagation of uncertainty (GUM 5.1.2) carries each
fixed value's standard uncertainty u(phi) into a fitted value theta through the
sensitivity d theta / d phi; for a least-squares fit that sensitivity is
-(J^T J)^-1 J^T d r / d phi (the fitted values move so as to cancel the change of the
residuals r), with J the fit's Jacobian. The fixed values are taken as uncorrelated.

Which fixed values carry an uncertainty, and how much (standard uncertainties):

- a meter reading: as :func:`xcheck.fitting.candidates.measured_uncertainty` says;
- a label value with a tolerance t: the tolerance as the half-width of a rectangular
  distribution, u = t |value| / sqrt(3) (GUM 4.3.7);
- everything else stated (parasitics, probe loading, initial values) without an
  uncertainty in the fixture: taken as exact, and said so nowhere else but here.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from xcheck.circuit.parameters import ORIGIN_LABEL, ORIGIN_MEASURED, ORIGIN_METER, ParameterSet
from xcheck.fitting.candidates import measured_uncertainty
from xcheck.fixture.model import Fixture
from xcheck.fixture.schema import ParameterKey


@dataclass(frozen=True)
class FixedUncertainty:
    """One fixed value's standard uncertainty and words for it.

    Attributes
    ----------
    key
        The value's ``(part, field)``.
    value, sigma
        The value held fixed and its standard uncertainty (SI units).
    words
        ``"C1 meter reading"``, ``"L1 10 % tolerance"``.
    """

    key: ParameterKey
    value: float
    sigma: float
    words: str


def fixed_uncertainties(fixture: Fixture, parameters: ParameterSet,
                        free: set[ParameterKey]) -> list[FixedUncertainty]:
    """The values a candidate holds fixed that carry a stated or assumed uncertainty."""
    out = []
    for key, value in parameters.values.items():
        if key in free or not value:
            continue
        origin = parameters.origins.get(key, "")
        part = fixture.parts.get(key[0])
        if origin in (ORIGIN_MEASURED, ORIGIN_METER):
            sigma = measured_uncertainty(fixture, key)
            if sigma:
                out.append(FixedUncertainty(key, float(value), sigma, f"{key[0]} meter reading"))
        elif origin == ORIGIN_LABEL and part is not None and part.tolerance and key[1] == "value":
            sigma = part.tolerance * abs(value) / math.sqrt(3.0)
            out.append(FixedUncertainty(key, float(value), sigma,
                                        f"{key[0]} {part.tolerance:.0%} tolerance"))
    return out
