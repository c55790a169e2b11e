"""Frequency and decay of a ring-down, with honest uncertainties.

From a sampled trace: :func:`estimate_ringdown` (extrema and logarithmic decrement,
matrix pencil, nonlinear least squares, Cramér-Rao bound). From extrema read off scope
cursors: :func:`estimate_from_peaks`. Series-RLC quantities implied by either:
:func:`derive_circuit`. A trace that settles without ringing (overdamped, critically
damped, first order): :func:`estimate_aperiodic`, or ``estimate_ringdown(...,
allow_aperiodic=True)``, giving an :class:`AperiodicEstimate` (time constants, omega0,
zeta), and :func:`derive_aperiodic_circuit`. Modules: ``extrema``, ``pencil``, ``nls``,
``crb``, ``envelope``, ``checks``, ``estimator``, ``peaks``, ``derived``, ``result``,
``aperiodic_model``, ``aperiodic``, ``aperiodic_result``, ``aperiodic_derived``.
"""

from xcheck.ringdown.aperiodic import estimate_aperiodic
from xcheck.ringdown.aperiodic_derived import AperiodicCircuit, derive_aperiodic_circuit
from xcheck.ringdown.aperiodic_result import AperiodicEstimate, ResponseEstimate
from xcheck.ringdown.derived import DerivedCircuit, derive_circuit
from xcheck.ringdown.envelope import diagnose_envelope
from xcheck.ringdown.estimator import estimate_ringdown
from xcheck.ringdown.peaks import estimate_from_peaks
from xcheck.ringdown.result import EnvelopeDiagnostics, Estimate, ModeEstimate, RingdownEstimate

__all__ = [
    "AperiodicCircuit",
    "AperiodicEstimate",
    "DerivedCircuit",
    "EnvelopeDiagnostics",
    "Estimate",
    "ModeEstimate",
    "ResponseEstimate",
    "RingdownEstimate",
    "derive_aperiodic_circuit",
    "derive_circuit",
    "diagnose_envelope",
    "estimate_aperiodic",
    "estimate_from_peaks",
    "estimate_ringdown",
]
