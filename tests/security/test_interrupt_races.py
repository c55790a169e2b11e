"""Ctrl-C landing at the awkward moments test_interrupt.py hit only by chance.

Each test sends a real SIGINT to this process (``os.kill(os.getpid(), SIGINT)``; POSIX
runs Python's handler for it in the main thread at the next bytecode) at one chosen
point, so the outcome does not
depend on timing. Expected behaviour, common practice for command-line tools (no
source): Ctrl-C is reported as an interruption (exit 130), never as bad input (exit 2)
or a traceback, and leaves no stray descriptor or process.
"""

from __future__ import annotations

import multiprocessing.context
import os
import signal
import sys
from pathlib import Path

import pytest

from xcheck import cli
from xcheck.atomic import write_folder_atomically
from xcheck.errors import XcheckError
from xcheck.input_file import open_regular
from xcheck.interrupts import (
    caused_by_interrupt,
    sigint_held,
    stop_if_interrupted,
    watching_for_ctrl_c,
)

def _sigint_self() -> None:
    os.kill(os.getpid(), signal.SIGINT)


def _open_descriptors() -> set[str]:
    return set(os.listdir("/proc/self/fd"))


def _ki_then(error: BaseException, *, hide: bool) -> BaseException:
    """``error`` raised while a KeyboardInterrupt was handled (``from None`` if hide)."""
    try:
        try:
            raise KeyboardInterrupt
        except KeyboardInterrupt:
            if hide:
                raise error from None
            raise error
    except BaseException as exc:  # noqa: BLE001 - the exception is the result
        return exc


@pytest.mark.parametrize("hide", [False, True], ids=["context", "context hidden"])
def test_an_error_raised_while_ctrl_c_unwinds_is_found(hide):
    assert caused_by_interrupt(_ki_then(OSError(9, "Bad file descriptor"), hide=hide))


def test_an_error_caused_by_ctrl_c_is_found():
    # A C extension's module initialisation: "ImportError: initialization failed",
    # raised from the KeyboardInterrupt.
    error = ImportError("initialization failed")
    error.__cause__ = KeyboardInterrupt()
    assert caused_by_interrupt(error)


def test_an_ordinary_error_is_not_an_interrupt():
    error = ValueError("bad")
    error.__context__ = OSError("disk")
    assert not caused_by_interrupt(error)
    assert not caused_by_interrupt(error.__context__)


@pytest.mark.parametrize("error", [
    _ki_then(XcheckError("capture.csv: cannot read the file (Bad file descriptor)"), hide=True),
    _ki_then(ImportError("initialization failed"), hide=False),
], ids=["bad-input error", "import error"])
def test_main_reports_ctrl_c_turned_into_another_error_as_an_interruption(
        monkeypatch, capsys, error):
    def dispatch(_argv):
        raise error

    monkeypatch.setattr(cli, "_dispatch", dispatch)
    assert cli.main(["compare"]) == cli.EXIT_INTERRUPTED == 130
    assert capsys.readouterr().err == "xcheck: interrupted; nothing further was written.\n"


def test_main_reports_ctrl_c_a_library_lost_as_an_interruption(monkeypatch, capsys):
    # A C++ drawing routine reported the interrupt as "ValueError: Invalid bounding box"
    # with no chain back to it; the watcher saw the signal arrive.
    def dispatch(_argv):
        try:
            _sigint_self()
        except KeyboardInterrupt:
            pass  # the library swallows it ...
        raise ValueError("Invalid bounding box")  # ... and fails in its own words

    monkeypatch.setattr(cli, "_dispatch", dispatch)
    assert cli.main(["compare"]) == 130
    assert capsys.readouterr().err == "xcheck: interrupted; nothing further was written.\n"
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler  # restored


def test_a_process_ignoring_sigint_keeps_ignoring_it():
    # nohup and shells' background jobs start a process with SIGINT ignored.
    previous = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        with watching_for_ctrl_c():
            assert signal.getsignal(signal.SIGINT) is signal.SIG_IGN
            _sigint_self()
            stop_if_interrupted()  # nothing arrived
    finally:
        signal.signal(signal.SIGINT, previous)


def test_main_keeps_an_ordinary_defect_as_a_traceback(monkeypatch):
    def dispatch(_argv):
        raise ImportError("initialization failed")

    monkeypatch.setattr(cli, "_dispatch", dispatch)
    with pytest.raises(ImportError):
        cli.main(["compare"])


def test_sigint_held_delivers_the_signal_after_the_block():
    reached_end_of_block = False
    with pytest.raises(KeyboardInterrupt):
        with sigint_held():
            _sigint_self()
            reached_end_of_block = True
    assert reached_end_of_block


def test_ctrl_c_while_an_input_file_is_opened_is_an_interrupt_and_leaks_nothing(
        tmp_path, monkeypatch):
    # The SIGINT lands once the file object owns the descriptor, inside os.fdopen:
    # closing the bare descriptor in a handler as well once reported "Bad file
    # descriptor" as the input's fault (exit 2).
    path = tmp_path / "capture.csv"
    path.write_text("t,v\n0,1\n", encoding="utf-8")
    real_fdopen = os.fdopen

    def fdopen_then_sigint(*args, **kwargs):
        handle = real_fdopen(*args, **kwargs)
        _sigint_self()
        return handle

    monkeypatch.setattr(os, "fdopen", fdopen_then_sigint)
    before = _open_descriptors()
    with pytest.raises(KeyboardInterrupt) as raised:
        open_regular(path, 1 << 20, "a CSV file")
    monkeypatch.setattr(os, "fdopen", real_fdopen)
    assert not isinstance(raised.value.__context__, OSError)
    assert _open_descriptors() <= before


@pytest.mark.ngspice
def test_ctrl_c_as_the_ngspice_child_starts_leaves_a_child_xcheck_can_stop(monkeypatch):
    from xcheck.engines.ngspice import NgspiceWorker

    real_start = multiprocessing.context.SpawnProcess.start

    def start_then_sigint(self):
        real_start(self)
        _sigint_self()

    monkeypatch.setattr(multiprocessing.context.SpawnProcess, "start", start_then_sigint)
    worker = NgspiceWorker()
    with pytest.raises(KeyboardInterrupt):
        worker._ensure_started()
    monkeypatch.setattr(multiprocessing.context.SpawnProcess, "start", real_start)
    assert worker.pid is not None, "the started child was not recorded, so nobody stops it"
    pid = worker.pid
    worker.stop(force=True)
    assert worker.pid is None
    with pytest.raises(ProcessLookupError):  # killed and reaped
        os.kill(pid, 0)


class _Watched:
    """An object whose weak reference's callback raises KeyboardInterrupt, as a Ctrl-C
    landing in a library's weakref callback does."""


def _drop_an_interrupt_in_a_weakref_callback() -> None:
    import weakref

    def callback(_ref):
        raise KeyboardInterrupt

    watched = _Watched()
    ref = weakref.ref(watched, callback)
    del watched  # the callback runs here; Python can only report and drop its error
    assert ref() is None


def test_ctrl_c_dropped_in_a_callback_stops_the_run_and_is_not_printed(capsys):
    with watching_for_ctrl_c():
        _drop_an_interrupt_in_a_weakref_callback()
        assert "Exception ignored" not in capsys.readouterr().err
        with pytest.raises(KeyboardInterrupt):
            stop_if_interrupted()
    stop_if_interrupted()  # forgotten once the run's watch ends


def test_other_callback_errors_still_reach_the_hook_in_place(monkeypatch):
    import weakref

    seen = []
    monkeypatch.setattr(sys, "unraisablehook", lambda unraisable: seen.append(
        unraisable.exc_type))

    def callback(_ref):
        raise ValueError("from a callback")

    watched = _Watched()
    ref = weakref.ref(watched, callback)
    with watching_for_ctrl_c():
        del watched
        stop_if_interrupted()  # not a Ctrl-C: nothing to raise
    assert ref() is None
    assert seen == [ValueError]
    assert sys.unraisablehook is not None and sys.unraisablehook.__name__ == "<lambda>"


def test_a_report_is_not_moved_into_place_after_a_dropped_ctrl_c(tmp_path):
    target = tmp_path / "out"

    def writer(staging: Path) -> None:
        (staging / "report.md").write_text("half\n", encoding="utf-8")
        _drop_an_interrupt_in_a_weakref_callback()

    with watching_for_ctrl_c(), pytest.raises(KeyboardInterrupt):
        write_folder_atomically(target, writer, is_ours=lambda _folder: True)
    assert sorted(p.name for p in tmp_path.iterdir()) == []  # no report, no staging left


_ENDING_AFTER_CTRL_C = """
import atexit
import xcheck.cli as cli

class HalfBuilt:
    def __del__(self):
        self.never_set  # AttributeError, as a half-imported library's object gives

def interrupted_run():
    atexit.register(lambda: HalfBuilt() and None)
    return cli.EXIT_INTERRUPTED

cli.main = interrupted_run
cli.entry()
"""


def test_a_process_ending_after_ctrl_c_prints_no_finalizer_errors():
    import subprocess

    ended = subprocess.run([sys.executable, "-c", _ENDING_AFTER_CTRL_C], capture_output=True,
                           text=True, timeout=120, check=False)
    assert ended.returncode == 130
    assert ended.stderr == ""


_CHILD_MASK = """
import signal
from pathlib import Path
from xcheck.engines.ngspice import NgspiceWorker
from xcheck.interrupts import watching_for_ctrl_c

with watching_for_ctrl_c():
    worker = NgspiceWorker()
    try:
        worker._ensure_started()
        status = Path(f"/proc/{worker.pid}/status").read_text(encoding="ascii")
    finally:
        worker.stop(force=True)
print(next(line for line in status.splitlines() if line.startswith("SigBlk:")).split()[1])
print(signal.SIGINT in signal.pthread_sigmask(signal.SIG_BLOCK, set()))
"""


@pytest.mark.ngspice
@pytest.mark.skipif(not Path("/proc/self/status").exists(), reason="reads Linux /proc")
def test_the_ngspice_child_starts_with_ctrl_c_masked():
    # Ctrl-C to the whole process group must not reach the child while Python starts
    # it (before its own code ignores SIGINT): it inherits the mask through exec. In a
    # fresh interpreter, as the command runs it: the first spawn also starts
    # multiprocessing's resource tracker, whose start unmasks SIGINT.
    import subprocess

    ran = subprocess.run([sys.executable, "-c", _CHILD_MASK], capture_output=True, text=True,
                         timeout=120, check=False,
                         env=dict(os.environ, OPENBLAS_NUM_THREADS="1"))
    assert ran.returncode == 0, ran.stderr
    child_mask, parent_still_masked = ran.stdout.split()
    assert int(child_mask, 16) & (1 << (signal.SIGINT - 1))
    assert parent_still_masked == "False"


_CTRL_C_DURING_EXIT_HANDLERS = """
import atexit, os, signal, time
import xcheck.cli as cli

def finished_run():
    def late_ctrl_c():
        os.kill(os.getpid(), signal.SIGINT)
        time.sleep(0.01)  # where the ngspice child's stop waits for it
    atexit.register(late_ctrl_c)
    return 0

cli.main = finished_run
cli.entry()
"""


def test_ctrl_c_after_the_work_is_done_changes_nothing():
    # The report is whole once the command returns; a Ctrl-C while the exit handlers
    # stop the ngspice child keeps the run's status and prints no traceback.
    import subprocess

    ended = subprocess.run([sys.executable, "-c", _CTRL_C_DURING_EXIT_HANDLERS],
                           capture_output=True, text=True, timeout=120, check=False)
    assert (ended.returncode, ended.stderr) == (0, "")
