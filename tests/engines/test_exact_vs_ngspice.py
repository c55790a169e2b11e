"""The exact engine against ngspice on circuits beyond the single series loop.

ngspice is the independent reference: its trapezoidal integration with the deck's
automatic time step knows nothing of the state space. Acceptance: the largest
|exact - ngspice| over the run is at most 1e-4 of the response's scale (the largest
|signal| of the exact response, or the largest source or initial voltage where that
is larger), the accuracy the deck's step rule targets (see engines/timing.py). All
runs share one ngspice child process.
"""

from __future__ import annotations

import numpy as np
import pytest

from hand_circuits import ALL_CASES
from xcheck.engines.exact import simulate_exact
from xcheck.engines.ngspice import simulate_ngspice

pytestmark = pytest.mark.ngspice  # skipped, with the install hint, without libngspice

AGREEMENT = 1e-4


@pytest.mark.parametrize("make", ALL_CASES, ids=lambda f: f.__name__)
def test_exact_engine_agrees_with_ngspice(make) -> None:
    case = make()
    spice = simulate_ngspice(case.circuit, stop_time=case.stop)
    exact = simulate_exact(case.circuit, spice.time).probe_voltage
    scale = max(float(np.max(np.abs(exact))),
                *(abs(e.initial or 0.0) for e in case.circuit.elements if e.kind == "C"))
    gap = np.abs(spice.probe_voltage - exact)
    assert np.max(gap) <= AGREEMENT * scale, (
        f"{case.name}: largest difference {np.max(gap):.3g} at "
        f"t = {spice.time[np.argmax(gap)]:.3g} s, scale {scale:.3g}"
    )
