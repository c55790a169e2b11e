"""Frequency and decay of a ring-down, with honest uncertainties.

From a sampled trace: :func:`estimate_ringdown` (extrema and logarithmic decrement,
matrix pencil, nonlinear least squares, Cramér-Rao bound). From extrema read off scope
cursors: :func:`estimate_from_peaks`. Series-RLC quantities implied by either:
:func:`derive_circuit`. Modules: ``extrema``, ``pencil``, ``nls``, ``crb``, ``envelope``,
``estimator``, ``peaks``, ``derived``, ``result``.
"""

from xcheck.ringdown.derived import DerivedCircuit, derive_circuit
from xcheck.ringdown.envelope import diagnose_envelope
from xcheck.ringdown.estimator import estimate_ringdown
from xcheck.ringdown.peaks import estimate_from_peaks
from xcheck.ringdown.result import EnvelopeDiagnostics, Estimate, ModeEstimate, RingdownEstimate

__all__ = [
    "DerivedCircuit",
    "EnvelopeDiagnostics",
    "Estimate",
    "ModeEstimate",
    "RingdownEstimate",
    "derive_circuit",
    "diagnose_envelope",
    "estimate_from_peaks",
    "estimate_ringdown",
]
