"""The circuit a fixture's frequency sweep measured, and its frequency engine.

A fixture's ``[swept]`` table (:mod:`xcheck.fixture.swept_table`) says what the sweep
measured; this module turns it and one parameter set into the circuit and the
:class:`~xcheck.engines.frequency.FrequencyEngine` that predicts it:

- ``part = X``: X's own elements only (its value and parasitics), between X's two
  terminals, the second one taken as ground;
- ``across = X``: the whole fixture between X's terminals, X's elements left out when X
  is a switch (the analyser is connected in its place), kept otherwise;
- ``between = [a, b]``: the whole fixture between nodes a and b;
- a transfer function: the whole fixture from its source to its probe.

An impedance is measured with the scope off the fixture, so the probe's loading is left
out of an impedance; a transfer function keeps it (the probe is what reads the
output). Every circuit is built by :func:`xcheck.circuit.expand.build_circuit`, the one
expansion every engine shares, with the fixture's probe moved to the measured points,
so the circuit node names come from the same place as the transient deck's.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from xcheck.circuit.expand import build_circuit
from xcheck.circuit.model import GROUND, Circuit
from xcheck.circuit.parameters import ParameterSet
from xcheck.engines.frequency import FrequencyEngine, response_matrix
from xcheck.errors import SimulationError
from xcheck.fixture.model import Fixture
from xcheck.fixture.swept_table import SweptSetting

#: The pseudo-part of the probe's loading elements.
PROBE_PART = "probe"
#: Part kinds an ``across`` takes out of the circuit.
OPENED_KINDS = ("switch",)


def swept_circuit(fixture: Fixture, parameters: ParameterSet,
                  setting: SweptSetting) -> tuple[Circuit, tuple[str, str] | None]:
    """The circuit a sweep measured, and the circuit nodes of an impedance.

    Parameters
    ----------
    fixture
        The fixture (its ``[swept]`` table is ``setting``).
    parameters
        One candidate's parameter set.
    setting
        What the sweep measured.

    Returns
    -------
    (Circuit, (plus, minus) or None)
        For an impedance, the circuit and the two nodes it is seen between; for a
        transfer function, the fixture's own circuit and None.
    """
    if setting.measures == "transfer":
        return build_circuit(fixture, parameters), None
    # The scope is off the fixture for an impedance: its loading is left out (and would
    # form a loop with a switch's 0 V source when the impedance is across the switch).
    if setting.between is not None:
        moved = replace(fixture, probe=None, probe_kind="nodes", probe_nodes=setting.between,
                        probe_loading=None)
    else:
        name = setting.part if setting.part is not None else setting.across
        moved = replace(fixture, probe=name, probe_kind="part", probe_nodes=None,
                        probe_loading=None)
    whole = build_circuit(moved, parameters)
    plus, minus = whole.probe
    if setting.part is not None:
        kept = [e for e in whole.elements if e.part == setting.part]
        if plus == GROUND:  # an impedance is the same seen from either terminal
            plus, minus = minus, plus
        if minus != GROUND:  # the part alone: its second terminal becomes the reference
            kept = [replace(e, nodes=tuple(GROUND if n == minus else n for n in e.nodes))
                    for e in kept]
            minus = GROUND
    else:
        opened = (setting.across is not None
                  and fixture.parts[setting.across].kind in OPENED_KINDS)
        kept = [e for e in whole.elements if e.part != PROBE_PART
                and not (opened and e.part == setting.across)]
    circuit = replace(whole, elements=tuple(kept), probe=(plus, minus), probe_current=None,
                      current_sense=None)
    return circuit, (plus, minus)


def swept_engine(fixture: Fixture, parameters: ParameterSet,
                 setting: SweptSetting) -> FrequencyEngine:
    """The :class:`FrequencyEngine` of what the sweep measured.

    Raises
    ------
    SimulationError
        When the measured circuit has no unique small-signal solution (for example an
        impedance across a part that the rest of the fixture shorts).
    """
    circuit, nodes = swept_circuit(fixture, parameters, setting)
    if nodes is None:
        source = setting.source if setting.source is not None else "step"
        return FrequencyEngine.transfer(circuit, source)
    if not circuit.elements:
        raise SimulationError(f"{setting.describe()}: the circuit has no elements there")
    return FrequencyEngine.impedance(circuit, nodes[0], nodes[1])


def paired_response(engine: FrequencyEngine, values: np.ndarray,
                    frequencies: np.ndarray) -> np.ndarray:
    """The response at ``frequencies[k]`` for the element values ``values[k]``.

    For element values that change along the sweep (a resistance that grows with
    frequency, :mod:`xcheck.fitting.frequency_laws`): one system per frequency, all
    solved at once (``numpy.linalg.solve`` on the stack), rather than every value set
    at every frequency.

    Parameters
    ----------
    engine
        The frequency engine.
    values
        ``(n_f, n_elements)`` element values, row k used at ``frequencies[k]``.
    frequencies
        ``(n_f,)`` frequencies (Hz).

    Returns
    -------
    numpy.ndarray
        ``(n_f,)`` complex response in :attr:`FrequencyEngine.unit`.
    """
    f = np.asarray(frequencies, dtype=float).reshape(-1)
    values = np.asarray(values, dtype=float)
    a, b, c, d = engine.matrices(values)
    s = 2j * np.pi * f
    if a.shape[-1] == 0:
        h = d[:, 0, 0].astype(complex)
    else:
        system = s[:, None, None] * np.eye(a.shape[-1]) - a
        try:
            x = np.linalg.solve(system, b.astype(complex))[..., 0]
            h = np.einsum("fn,fn->f", c[:, 0, :].astype(complex), x) + d[:, 0, 0]
        except np.linalg.LinAlgError:  # one exactly singular system: row by row
            h = np.array([response_matrix(a[k:k + 1], b[k:k + 1, :, 0], c[k:k + 1, 0, :],
                                          d[k:k + 1, 0, 0], f[k:k + 1])[0, 0]
                          for k in range(f.size)])
    return engine.from_matrices(h)
