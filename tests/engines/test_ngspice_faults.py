"""ngspice faults: a library that cannot be loaded, a run that does not converge, a hang,
and a child process killed during a run, each through the engine and through compare.

References: the RC discharge v(t) = V0 exp(-t/RC) and the RC low-pass H(jw) =
1 / (1 + jwRC) (Nilsson & Riedel, "Electric Circuits", chapters on first-order circuits
and on frequency response; from memory); the dynamic loader refuses a path that does not
exist and a file that is not a shared object (dlopen(3), from memory); a node joined to
the rest of a circuit only through an inductor between two otherwise unconnected nodes
leaves the MNA matrix singular (common practice, no source), and what ngspice prints
for it is checked against the ngspice program itself where it is installed. The
exit-status convention (0 done, 1 threshold missed, 2 bad input or environment) is common
practice for command-line checkers, no source. Every child killed here is one these
tests started, by its pid.
"""

from __future__ import annotations

import os
import re
import shutil
import signal
import subprocess
import sys
import threading
import time
from collections.abc import Callable, Iterator
from pathlib import Path

import numpy as np
import pytest

from compare_cases import LOSSY_JIG_TOML, write_trace
from xcheck.cli import main
from xcheck.compare import run_comparison
from xcheck.engines import ngspice
from xcheck.engines.ngspice import (
    INSTALL_HELP,
    INSTALL_WAYS,
    NO_CONVERGENCE_HINT,
    RETRY_NOTE_START,
    DeckRun,
    NgspiceCrashed,
    NgspicePool,
    NgspiceUnavailable,
    NgspiceWorker,
    run_ac_deck,
    run_deck,
)
from xcheck.errors import SimulationError
from xcheck.fixture.reader import load_fixture

needs_sigkill = pytest.mark.skipif(sys.platform == "win32", reason="uses SIGKILL")

RC_DECK = """* rc discharge, hand written
V_sense 0 n1 dc 0
C_1 n1 n2 1e-6 ic=5
R_1 n2 0 1e3
.options method=trap reltol=1e-6 abstol=1e-12 vntol=1e-9 chgtol=1e-16
.tran {step} {stop} 0 {step} uic
.end
"""

#: A short run (5e4 points).
QUICK_DECK = RC_DECK.format(step="1e-7", stop="5e-3")
#: A run long enough to be killed in the middle (5e5 points, about a second).
MEDIUM_DECK = RC_DECK.format(step="1e-8", stop="5e-3")
#: A run that would take hours (1e10 points).
SLOW_DECK = RC_DECK.format(step="1e-9", stop="10")

#: An inductor between two nodes nothing else touches: a singular matrix, which ngspice
#: reports as "Timestep too small" and aborts.
FLOATING_DECK = """* floating inductor, hand written
C_1 n1 0 1e-6 ic=1
R_1 n1 0 1e3
L_float fa fb 1e-3
.tran 1e-6 1e-3 0 1e-6 uic
.end
"""

AC_DECK = """* rc low pass, hand written
V_in in 0 dc 0 ac 1
R_1 in out 1e3
C_1 out 0 1e-6
.ac dec 10 10 1e5
.end
"""


def _check_rc_discharge(time_s: np.ndarray, volts: np.ndarray) -> None:
    # 1e-4 of V0: the accuracy the engines are held to; the decks' steps (1e-7 s and
    # finer on a 1e-3 s time constant) are far finer than that needs.
    np.testing.assert_allclose(volts, 5.0 * np.exp(-time_s / 1e-3), rtol=0, atol=1e-4 * 5.0)
    assert time_s[-1] == pytest.approx(5e-3, rel=1e-9)  # ran to the stop time


def _stop_shared_child() -> None:
    ngspice.recycle_shared_worker(lambda pid, runs: True)


@pytest.fixture
def fresh_shared_child() -> Iterator[None]:
    """The module's shared child is stopped before and after the test, so a changed
    environment reaches a new child and no broken child outlives the test."""
    _stop_shared_child()
    yield
    _stop_shared_child()


@pytest.fixture
def lossy_fixture(tmp_path: Path):
    path = tmp_path / "lossy_jig.toml"
    path.write_text(LOSSY_JIG_TOML, encoding="utf-8")
    return load_fixture(path)


def _bad_library(tmp_path: Path, kind: str) -> Path:
    if kind == "missing":
        return tmp_path / "no-such-folder" / "libngspice.so"
    path = tmp_path / "libngspice.so"
    # Longer than an ELF header, so the loader reads it and finds it is not one.
    path.write_text("this is a text file, not a shared library\n" * 20, encoding="ascii")
    return path


# --------------------------------------------------------------------------------------
# 1. The library cannot be loaded (needs no ngspice: nothing is ever loaded)
# --------------------------------------------------------------------------------------


@pytest.mark.parametrize("kind", ["missing", "text file"])
def test_load_refuses_a_missing_or_non_library_file(tmp_path, monkeypatch, fresh_shared_child,
                                                    kind):
    library = _bad_library(tmp_path, kind)
    # PySpice reads NGSPICE_LIBRARY_PATH when it is imported, which happens in the child,
    # so _load_ngspice runs there against the bad path.
    monkeypatch.setenv("NGSPICE_LIBRARY_PATH", str(library))
    with pytest.raises(NgspiceUnavailable) as info:
        run_deck(QUICK_DECK, probe=("n1", "0"), name="rc")
    assert str(info.value).startswith(INSTALL_HELP)
    assert str(library) in info.value.reason
    assert "find_library" not in info.value.reason  # cffi's aside is left out
    assert ngspice._shared_worker is None or ngspice._shared_worker.pid is None


@pytest.mark.parametrize("kind", ["missing", "text file"])
def test_compare_without_a_library_skips_the_spice_leg_once(tmp_path, monkeypatch,
                                                            fresh_shared_child, lossy_fixture,
                                                            kind):
    trace = write_trace(tmp_path, 11)
    plain = run_comparison(lossy_fixture, trace=trace, use_ngspice=False)
    library = _bad_library(tmp_path, kind)
    monkeypatch.setenv("NGSPICE_LIBRARY_PATH", str(library))
    failed_starts = []
    original = NgspiceWorker._ensure_started

    def counting(self: NgspiceWorker) -> None:
        try:
            original(self)
        except NgspiceUnavailable:
            failed_starts.append(1)
            raise

    monkeypatch.setattr(NgspiceWorker, "_ensure_started", counting)
    result = run_comparison(lossy_fixture, trace=trace, use_ngspice=True)
    assert len(failed_starts) == 1  # tried once for the comparison, not per candidate
    assert result.ngspice_version == "unavailable"
    assert str(library) in result.ngspice_skipped
    fitted = [o for o in result.outcomes if not o.failed]
    assert len(fitted) >= 3
    for outcome, alone in zip(result.outcomes, plain.outcomes):
        assert outcome.name == alone.name and outcome.ranked.rank == alone.ranked.rank
        if outcome.failed:
            continue
        assert outcome.ngspice is None and outcome.ngspice_curve is None
        # The same fit on the same data: equal but for rounding order, hence 1e-12.
        assert outcome.theory.nrmse == pytest.approx(alone.theory.nrmse, rel=1e-12)
        assert outcome.ngspice_error == ""
        note = next(n for n in outcome.engine_notes if n.startswith("ngspice leg skipped"))
        assert "could not be loaded" in note and INSTALL_WAYS in note
    # The verdict is the ngspice-less one plus one sentence, with the install help once.
    assert result.verdict.startswith(plain.verdict + " ")
    extra = result.verdict[len(plain.verdict) + 1:]
    assert extra.startswith("The SPICE leg was skipped for every candidate because ngspice "
                            "could not be loaded (")
    assert str(library) in extra and extra.endswith(INSTALL_WAYS + ".")
    assert result.verdict.count("could not be loaded") == 1
    assert result.verdict.count("apt-get install libngspice0-dev") == 1


def test_compare_command_without_a_library_keeps_its_exit_status(tmp_path, monkeypatch,
                                                                 fresh_shared_child, printed):
    fixture = tmp_path / "lossy_jig.toml"
    fixture.write_text(LOSSY_JIG_TOML, encoding="utf-8")
    trace = write_trace(tmp_path, 11)
    monkeypatch.setenv("NGSPICE_LIBRARY_PATH", str(_bad_library(tmp_path, "text file")))
    args = ["compare", str(fixture), "--trace", str(trace), "--quiet"]
    assert main([*args, "--out", str(tmp_path / "a")]) == 0
    out = printed().out
    assert out.count("The SPICE leg was skipped for every candidate") == 1
    assert (tmp_path / "a" / "report.md").read_text(encoding="utf-8").count(
        "could not be loaded") == 1
    # 8-bit noise leaves the best NRMSE near 0.2 %: 1e-4 is missed, so exit 1, not 2.
    assert main([*args, "--out", str(tmp_path / "b"), "--max-nrmse", "0.0001"]) == 1
    assert "exceeds --max-nrmse" in printed().out


def test_simulate_command_without_a_library_says_what_to_install(tmp_path, monkeypatch,
                                                                 fresh_shared_child, printed):
    fixture = tmp_path / "lossy_jig.toml"
    fixture.write_text(LOSSY_JIG_TOML, encoding="utf-8")
    monkeypatch.setenv("NGSPICE_LIBRARY_PATH", str(_bad_library(tmp_path, "missing")))
    out = tmp_path / "sim"
    assert main(["simulate", str(fixture), "--out", str(out)]) == 2
    err = printed().err
    assert "apt-get install libngspice0-dev" in err and "NGSPICE_LIBRARY_PATH" in err
    assert "Traceback" not in err
    assert not (out / "prediction.csv").exists()


# --------------------------------------------------------------------------------------
# 2. ngspice cannot finish the run (non-convergence)
# --------------------------------------------------------------------------------------


@pytest.mark.ngspice
def test_non_convergence_names_the_deck_and_quotes_ngspice(fresh_shared_child):
    with pytest.raises(SimulationError) as info:
        run_deck(FLOATING_DECK, probe=("n1", "0"), name="jig.toml")
    message = str(info.value)
    assert message.startswith(
        "ngspice failed to run deck 'jig.toml' (* floating inductor, hand written): ")
    assert "Timestep too small" in message and "singular matrix" in message
    assert message.endswith(NO_CONVERGENCE_HINT)
    # The child survives a failed run and serves the next deck.
    wave = run_deck(QUICK_DECK, probe=("n1", "n2"), name="rc")
    _check_rc_discharge(wave.time, wave.probe_voltage)


@pytest.mark.ngspice
@pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs the ngspice program")
def test_the_quoted_lines_are_what_the_ngspice_program_prints(tmp_path, fresh_shared_child):
    # Reference: the ngspice program in batch mode on the same deck, with a control
    # block so that it runs the analysis.
    deck = tmp_path / "floating.cir"
    deck.write_text(FLOATING_DECK.replace(".end\n", ".control\nrun\n.endc\n.end\n"),
                    encoding="ascii")
    done = subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True,
                          timeout=120, check=False)
    wanted = re.compile(r"singular matrix|timestep too small|aborted", re.IGNORECASE)
    lines = {line.strip() for line in (done.stdout + done.stderr).splitlines()
             if wanted.search(line)}
    assert len(lines) >= 3, lines
    with pytest.raises(SimulationError) as info:
        run_deck(FLOATING_DECK, probe=("n1", "0"), name="floating")
    for line in lines:
        # The program and the library word the time of failure differently ("initial
        # timepoint" against "time = 1e-17"), so each line is compared up to its ';'.
        assert line.split(";")[0] in str(info.value), line


@pytest.mark.ngspice
def test_compare_reports_the_candidate_ngspice_could_not_run(tmp_path, monkeypatch,
                                                             fresh_shared_child, lossy_fixture):
    import xcheck.engines.deck as deck_module

    original = deck_module.write_deck
    broken: list[str] = []

    def first_deck_broken(circuit, **kwargs):
        text = original(circuit, **kwargs)
        if not broken:  # the first candidate's deck gets a floating inductor
            broken.append(text)
            text = text.replace("\n.end", "\nL_float fa fb 1e-3\n.end", 1)
        return text

    monkeypatch.setattr(deck_module, "write_deck", first_deck_broken)
    result = run_comparison(lossy_fixture, trace=write_trace(tmp_path, 11), use_ngspice=True)
    assert len(broken) == 1
    failed = [o for o in result.outcomes if o.ngspice_error]
    assert len(failed) == 1
    bad = failed[0]
    assert bad.ngspice is None and bad.theory is not None
    assert bad.ngspice_error.startswith(
        f"ngspice failed to run deck {str(lossy_fixture.source)!r}")
    assert "Timestep too small" in bad.ngspice_error
    assert f"ngspice: {bad.ngspice_error}" in bad.engine_notes
    assert f"Candidate '{bad.name}' has no SPICE leg: ngspice failed to run deck" in result.verdict
    others = [o for o in result.outcomes if o is not bad and not o.failed]
    assert len(others) >= 2
    for outcome in others:
        assert outcome.ngspice is not None and outcome.ngspice_error == ""
        # Engines agree to about 1e-4 of the amplitude; 1e-3 is the flagging limit.
        assert outcome.engine_disagreement < 1e-3
    assert result.ngspice_version.startswith("ngspice-")
    # The report and summary.json carry the failing candidate's note with ngspice's words.
    from xcheck.report.markdown import markdown
    from xcheck.report.summary import summary

    data = summary(result)
    row = next(c for c in data["candidates"] if c["name"] == bad.name)
    assert f"ngspice: {bad.ngspice_error}" in row["engine_notes"]
    assert all(not c["engine_notes"] for c in data["candidates"] if c["name"] != bad.name)
    text = markdown(result, data)
    assert "Engine notes:" in text and "Timestep too small" in text


# --------------------------------------------------------------------------------------
# 3. A hang
# --------------------------------------------------------------------------------------


@pytest.mark.ngspice
def test_a_hung_run_is_killed_and_the_next_run_gets_a_fresh_child(fresh_shared_child):
    run_deck(QUICK_DECK, probe=("n1", "0"), name="warm-up")  # start-up is not timed
    first = ngspice._shared_worker.pid
    with pytest.raises(SimulationError) as info:
        run_deck(SLOW_DECK, probe=("n1", "0"), name="slow.cir", timeout=0.5)
    assert not isinstance(info.value, NgspiceCrashed)  # a hang is not repeated
    assert str(info.value).startswith(
        "deck 'slow.cir': ngspice did not finish within 0.5 s, so its process was killed "
        "(the next run starts a fresh one)")
    assert ngspice._shared_worker.pid is None
    wave = run_deck(QUICK_DECK, probe=("n1", "n2"), name="after")
    assert ngspice._shared_worker.pid not in (None, first)
    _check_rc_discharge(wave.time, wave.probe_voltage)
    assert not any(note.startswith(RETRY_NOTE_START) for note in wave.notes)


# --------------------------------------------------------------------------------------
# 4. The child killed during a run
# --------------------------------------------------------------------------------------


def _killer(worker_of: Callable[[], NgspiceWorker], count: int) -> tuple[threading.Thread, list[int]]:
    """A started thread that SIGKILLs the worker's child as soon as each of its next
    ``count`` runs has been handed to a child (at most 120 s, then it gives up)."""
    worker = worker_of()
    start = (worker.pid, worker.runs)
    killed: list[int] = []

    def watch() -> None:
        end = time.monotonic() + 120
        while len(killed) < count and time.monotonic() < end:
            current = worker_of()
            pid, runs = current.pid, current.runs
            if pid is not None and runs >= 1 and (pid, runs) != start and pid not in killed:
                os.kill(pid, signal.SIGKILL)  # a child this test started
                killed.append(pid)
            time.sleep(0.001)

    thread = threading.Thread(target=watch, daemon=True)
    thread.start()
    return thread, killed


@pytest.mark.ngspice
@needs_sigkill
def test_a_child_killed_mid_run_is_replaced_and_the_run_repeated(fresh_shared_child):
    run_deck(QUICK_DECK, probe=("n1", "0"), name="warm-up")
    worker = ngspice._shared_worker
    replaced = worker.replaced
    thread, killed = _killer(lambda: ngspice._shared_worker, 1)
    wave = run_deck(MEDIUM_DECK, probe=("n1", "n2"), name="medium")
    thread.join()
    assert len(killed) == 1
    assert worker.replaced == replaced + 1
    assert worker.pid not in (None, killed[0])
    assert wave.notes[0] == (f"{RETRY_NOTE_START} (exit code -9, signal SIGKILL); a fresh one "
                             "was started and ran it again")
    _check_rc_discharge(wave.time, wave.probe_voltage)  # the repeat ran the whole deck


@pytest.mark.ngspice
@needs_sigkill
def test_a_child_killed_twice_gives_a_clear_error(fresh_shared_child):
    run_deck(QUICK_DECK, probe=("n1", "0"), name="warm-up")
    thread, killed = _killer(lambda: ngspice._shared_worker, 2)
    with pytest.raises(NgspiceCrashed, match=re.escape(
            "deck 'doomed': the ngspice child process died during the run 2 times, each "
            "time on a fresh process (exit code -9, signal SIGKILL, then exit code -9, "
            "signal SIGKILL)")):
        run_deck(SLOW_DECK, probe=("n1", "0"), name="doomed")
    thread.join()
    assert len(killed) == 2 and killed[0] != killed[1]
    wave = run_deck(QUICK_DECK, probe=("n1", "n2"), name="after")  # and then it works
    _check_rc_discharge(wave.time, wave.probe_voltage)


@pytest.fixture
def kill_first_exchange(monkeypatch) -> list[int]:
    """SIGKILL the child just as the first request of the test is handed to it (the
    signal is pending before the request is written, so the child cannot answer);
    returns the list of killed pids."""
    killed: list[int] = []
    original = NgspiceWorker._exchange_once

    def exchange_once(self: NgspiceWorker, run, timeout, hint):
        if not killed:
            self._ensure_started()
            conn, pid = self._conn, self.pid
            send = conn.send

            def kill_then_send(request) -> None:
                os.kill(pid, signal.SIGKILL)  # a child this test started
                killed.append(pid)
                conn.send = send
                send(request)

            conn.send = kill_then_send
        return original(self, run, timeout, hint)

    monkeypatch.setattr(NgspiceWorker, "_exchange_once", exchange_once)
    return killed


@pytest.mark.ngspice
@needs_sigkill
def test_the_pool_repeats_a_run_whose_child_died(kill_first_exchange):
    runs = [DeckRun(QUICK_DECK, ("n1", "n2"), "V_sense", f"rc{k}") for k in range(2)]
    with NgspicePool(max_workers=1) as pool:
        first, second = pool.run_all(runs)
    assert len(kill_first_exchange) == 1
    for wave in (first, second):
        assert not isinstance(wave, SimulationError), wave
        _check_rc_discharge(wave.time, wave.probe_voltage)
    assert first.notes[0].startswith(RETRY_NOTE_START)
    assert not any(note.startswith(RETRY_NOTE_START) for note in second.notes)


@pytest.mark.ngspice
@needs_sigkill
def test_an_ac_run_whose_child_died_is_repeated(fresh_shared_child, kill_first_exchange):
    plot = run_ac_deck(AC_DECK, probe=("out", "0"), name="lowpass")
    assert len(kill_first_exchange) == 1
    assert plot.notes[0].startswith(RETRY_NOTE_START)
    expected = 1.0 / (1.0 + 2j * np.pi * plot.frequency * 1e3 * 1e-6)
    # A linear solve in double precision: 1e-6 leaves ample room for its rounding.
    np.testing.assert_allclose(plot.response, expected, rtol=1e-6)
    assert plot.frequency[0] == pytest.approx(10.0) and plot.frequency[-1] == pytest.approx(1e5)


@pytest.mark.ngspice
@needs_sigkill
def test_compare_notes_the_repeated_run_on_its_candidate(tmp_path, fresh_shared_child,
                                                         kill_first_exchange, lossy_fixture):
    result = run_comparison(lossy_fixture, trace=write_trace(tmp_path, 11), use_ngspice=True)
    assert len(kill_first_exchange) == 1
    noted = [o for o in result.outcomes
             if any(n.startswith(f"ngspice: {RETRY_NOTE_START}") for n in o.engine_notes)]
    assert len(noted) == 1
    for outcome in result.outcomes:
        if not outcome.failed:
            assert outcome.ngspice is not None and outcome.ngspice_error == ""
            assert outcome.engine_disagreement < 1e-3  # the flagging limit, as above
