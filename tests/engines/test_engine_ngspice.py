"""ngspice engine: results of hand-written decks, failures, timeouts, crashes, memory.

References: the RC discharge v(t) = V0 exp(-t/RC) (Nilsson & Riedel, "Electric
Circuits", chapter "Response of First-Order RL and RC Circuits", from memory); the sign
of a voltage source's branch current, positive when current enters its positive node
and flows through it to its negative node (ngspice manual, chapter on independent
sources, from memory). All decks here are hand-written, so these tests do not depend on
the deck writer.
"""

from __future__ import annotations

import math
import os
import signal
import sys
import threading
import time

import numpy as np
import pytest

from xcheck.circuit.model import Circuit, Element
from xcheck.engines import ngspice
from xcheck.engines.ngspice import (
    DeckRun,
    NgspicePool,
    NgspiceWorker,
    ngspice_version,
    run_deck,
    run_decks,
    simulate_ngspice,
)
from xcheck.errors import SimulationError

pytestmark = pytest.mark.ngspice  # skipped, with the install hint, without libngspice

RC_DECK = """* rc discharge, hand written
V_sense 0 n1 dc 0
C_1 n1 n2 {c} ic=5
R_1 n2 0 1e3
.options method=trap reltol=1e-6 abstol=1e-12 vntol=1e-9 chgtol=1e-16
.tran 1e-7 {stop} 0 1e-7 uic
.end
"""

#: A run that would take minutes: 1e10 time points.
SLOW_DECK = RC_DECK.format(c="1e-6", stop="10").replace("0 1e-7 uic", "0 1e-9 uic")


def _rc_deck(c: float = 1e-6, stop: float = 5e-3) -> str:
    return RC_DECK.format(c=f"{c:.6e}", stop=f"{stop:.6e}")


def test_rc_discharge_matches_textbook_and_sign_conventions() -> None:
    waveform = run_deck(_rc_deck(), probe=("n1", "n2"), current_sense="V_sense", name="rc")
    expected = 5.0 * np.exp(-waveform.time / 1e-3)
    # 1e-4 of V0: the accuracy the engines are held to; a 1e-7 s step on a 1e-3 s
    # time constant is far finer than that needs.
    np.testing.assert_allclose(waveform.probe_voltage, expected, rtol=0, atol=1e-4 * 5.0)
    # The capacitor (first terminal n1 at +5 V) discharges through R_1 and back through
    # the sense source from n1 to 0: against the source's first -> second direction,
    # so SPICE's branch current is negative, -V/R.
    np.testing.assert_allclose(waveform.loop_current, -expected / 1e3, rtol=0, atol=1e-4 * 5e-3)
    assert waveform.engine == "ngspice"
    assert waveform.time[-1] == pytest.approx(5e-3, rel=1e-9)  # ran to the stop time
    assert np.all(np.diff(waveform.time) > 0)


def test_ground_as_probe_node_and_no_current_sense() -> None:
    waveform = run_deck(_rc_deck(), probe=("n2", "0"), name="rc")
    # v(n2) - 0 = -v_C: the resistor's top sits below ground by the capacitor voltage.
    np.testing.assert_allclose(waveform.probe_voltage, -5.0 * np.exp(-waveform.time / 1e-3), rtol=0, atol=5e-4)
    assert waveform.loop_current is None


def test_version_is_reported() -> None:
    assert ngspice_version().startswith("ngspice-")


def test_rejected_deck_names_the_deck_and_quotes_ngspice() -> None:
    bad = "* broken jig deck\nR_1 n1 0 1k\nfoo bar baz\n.tran 1e-6 1e-3 uic\n.end\n"
    with pytest.raises(SimulationError, match=r"ngspice rejected deck 'bad\.cir' \(\* broken jig deck\).*[Ee]rror"):
        run_deck(bad, probe=("n1", "0"), name="bad.cir")
    # The worker survives a rejected deck and runs the next one.
    assert run_deck(_rc_deck(), probe=("n1", "n2"), name="rc").time.size > 10


def test_unknown_probe_node_is_reported() -> None:
    with pytest.raises(SimulationError, match=r"probe node 'nowhere' is not in ngspice's results"):
        run_deck(_rc_deck(), probe=("nowhere", "0"), name="rc")
    with pytest.raises(SimulationError, match=r"no branch current 'v_missing#branch'"):
        run_deck(_rc_deck(), probe=("n1", "0"), current_sense="V_missing", name="rc")


def test_failed_run_is_an_error() -> None:
    # Two capacitors' worth of charge with a floating node: ngspice reports a singular
    # matrix / too small a time step and aborts.
    floating = "* floating node\nC_1 n1 0 1e-6 ic=1\nL_1 a b 1e-3\n.tran 1e-6 1e-3 0 1e-6 uic\n.end\n"
    with pytest.raises(SimulationError, match=r"deck 'floating'.*(singular|Timestep too small|aborted)"):
        run_deck(floating, probe=("n1", "0"), name="floating")


def test_hang_becomes_a_timeout_error_and_the_worker_restarts() -> None:
    worker = NgspiceWorker()
    try:
        worker.run(DeckRun(_rc_deck(), ("n1", "0"), None, "warm-up"))  # start-up not timed
        first_pid = worker.pid
        started = time.monotonic()
        with pytest.raises(SimulationError, match=r"deck 'slow\.cir': ngspice did not finish within 0\.5 s"):
            worker.run(DeckRun(SLOW_DECK, ("n1", "0"), None, "slow.cir"), timeout=0.5)
        assert time.monotonic() - started < 10  # stopped promptly (generous for slow CI)
        assert worker.pid is None
        assert worker.run(DeckRun(_rc_deck(), ("n1", "0"), None, "after")).time.size > 10
        assert worker.pid != first_pid
    finally:
        worker.stop()


@pytest.mark.skipif(sys.platform == "win32", reason="uses SIGKILL")
def test_crash_during_a_run_is_an_error() -> None:
    worker = NgspiceWorker()
    try:
        worker.run(DeckRun(_rc_deck(), ("n1", "0"), None, "warm-up"))
        pid = worker.pid
        assert pid is not None
        # Simulate a crash of the child we started: kill it while it runs a long deck.
        killer = threading.Timer(0.5, os.kill, args=(pid, signal.SIGKILL))
        killer.start()
        with pytest.raises(SimulationError, match=r"deck 'doomed': ngspice crashed during the run \(exit code -9\)"):
            worker.run(DeckRun(SLOW_DECK, ("n1", "0"), None, "doomed"), timeout=30)
        killer.join()
    finally:
        worker.stop()


def test_missing_library_says_what_to_install(monkeypatch: pytest.MonkeyPatch) -> None:
    # PySpice reads NGSPICE_LIBRARY_PATH when the child imports it.
    monkeypatch.setenv("NGSPICE_LIBRARY_PATH", "/nonexistent/libngspice.so")
    worker = NgspiceWorker()
    try:
        with pytest.raises(SimulationError, match=r"apt-get install libngspice0-dev.*libngspice.*ngspice-lib.*NGSPICE_LIBRARY_PATH"):
            worker.run(DeckRun(_rc_deck(), ("n1", "0"), None, "rc"))
    finally:
        worker.stop()


class _FakeShared:
    """Stands in for an NgSpiceShared instance in the output callback."""

    def __init__(self) -> None:
        self._stdout: list[str] = []
        self._stderr: list[str] = []
        self._error_in_stdout = False
        self._error_in_stderr = False
        self._spinit_not_found = False
        import logging

        self._logger = logging.getLogger("xcheck.tests.fake")
        self._logger.disabled = True

    def send_char(self, message: str, ngspice_id: int) -> int:
        return 0


def test_harmless_stderr_lines_are_kept_not_errors() -> None:
    # ngspice 42+ prints notes such as this on stderr; PySpice 1.5's own callback flags
    # any stderr line not starting with "Warning:" as an error, ours only records it.
    from PySpice.Spice.NgSpice.Shared import NgSpiceShared, ffi

    line = b"stderr Using SPARSE 1.3 as Direct Linear Solver"
    quiet_class = ngspice._quiet_shared_class()
    fake = _FakeShared()
    handle = ffi.new_handle(fake)
    quiet_class._send_char(ffi.new("char[]", line), 0, handle)
    assert fake._stderr == ["Using SPARSE 1.3 as Direct Linear Solver"]
    assert not fake._error_in_stderr
    assert ngspice._error_lines(fake) == []  # not an error for the run either
    original = _FakeShared()
    NgSpiceShared._send_char(ffi.new("char[]", line), 0, ffi.new_handle(original))
    assert original._error_in_stderr  # the behaviour the subclass exists to avoid
    fake._stderr.append("Error: unknown subckt: x1 a b")
    assert "Error: unknown subckt: x1 a b" in ngspice._error_lines(fake)


def test_pool_runs_many_decks_and_returns_failures_in_place() -> None:
    capacitances = [0.5e-6, 1e-6, 2e-6]
    runs = [DeckRun(_rc_deck(c, 2e-3), ("n1", "n2"), "V_sense", f"rc{k}") for k, c in enumerate(capacitances)]
    runs.insert(1, DeckRun("* bad\nQ_nonsense\n.end\n", ("n1", "0"), None, "bad"))
    results = run_decks(runs, max_workers=2)
    assert isinstance(results[1], SimulationError)
    assert "bad" in str(results[1])
    for c, result in zip(capacitances, results[:1] + results[2:]):
        assert not isinstance(result, SimulationError)
        expected = 5.0 * np.exp(-result.time / (1e3 * c))
        np.testing.assert_allclose(result.probe_voltage, expected, rtol=0, atol=5e-4)  # 1e-4 of V0
    with NgspicePool(max_workers=1) as pool:
        assert pool.run_all([]) == []
    with pytest.raises(ValueError, match="at least 1"):
        NgspicePool(max_workers=0)


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
def test_memory_does_not_grow_over_many_runs() -> None:
    # Each 1 ms run keeps ~10 000 points x 4 vectors; without freeing plots and circuits
    # ngspice's resident memory was measured to grow ~12 MB over 30 such runs, with
    # freeing ~1 MB (allocator noise). 4 MB is a loose bound that still catches a leak.
    def resident_mb(pid: int) -> float:
        with open(f"/proc/{pid}/status", encoding="ascii") as handle:
            for line in handle:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1]) / 1024
        raise AssertionError("no VmRSS line")

    worker = NgspiceWorker()
    try:
        run = DeckRun(_rc_deck(stop=1e-3), ("n1", "n2"), "V_sense", "rc")
        for _ in range(3):  # warm-up: library buffers, first allocations
            worker.run(run)
        assert worker.pid is not None
        before = resident_mb(worker.pid)
        for _ in range(30):
            worker.run(run)
        assert resident_mb(worker.pid) - before < 4.0
    finally:
        worker.stop()


def test_simulate_ngspice_on_a_circuit() -> None:
    circuit = Circuit(
        "rl step",
        (
            Element("V_step", "V", ("n1", "0"), 2.0),
            Element("V_sense", "V", ("n1", "n2"), 0.0),
            Element("R_1", "R", ("n2", "n3"), 10.0),
            Element("L_1", "L", ("n3", "0"), 10e-3, initial=0.0),
        ),
        probe=("n3", "0"),
        response="step",
        current_sense="V_sense",
    )
    waveform = simulate_ngspice(circuit, stop_time=5e-3)
    tau = 1e-3  # L/R
    # RL step (Nilsson & Riedel, from memory): i = E/R (1 - e^{-t/tau}), v_L = E e^{-t/tau};
    # 1e-4 of the step, the engines' accuracy target.
    np.testing.assert_allclose(waveform.probe_voltage, 2.0 * np.exp(-waveform.time / tau), rtol=0, atol=2e-4)
    np.testing.assert_allclose(waveform.loop_current, 0.2 * (1 - np.exp(-waveform.time / tau)), rtol=0, atol=2e-5)
    assert any("maximum step" in note for note in waveform.notes)
    assert math.isclose(waveform.time[-1], 5e-3, rel_tol=1e-9)
