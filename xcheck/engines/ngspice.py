"""ngspice engine: run a SPICE deck (text) in ngspice's shared library, in a child process.

Why a child process: the shared library keeps global state, a malformed deck can crash
it, and a run can hang. Each :class:`NgspiceWorker` is one long-lived child process
(started with the ``spawn`` method, which is safe on every platform) that loads the
library once and then serves decks one at a time over a pipe; the parent waits for each
answer with a timeout, and a hang or crash becomes a :class:`SimulationError` naming the
deck, after which the child is stopped and a fresh one started on demand. Reusing the
child avoids paying interpreter and library start-up (about a second) for each deck.

The faults, each a :class:`SimulationError` subclass or message the callers can tell
apart: a library that cannot be loaded (missing, or not a library) is
:class:`NgspiceUnavailable`, with the install help and the loader's reason; a deck
ngspice rejects or cannot finish (non-convergence, "Timestep too small") names the deck
and quotes ngspice's own lines; a run past its timeout has its child killed; a child
that dies during a run is :class:`NgspiceCrashed`, and :func:`run_deck`,
:func:`run_ac_deck` and :class:`NgspicePool` then repeat the run once on a fresh child
(:data:`CRASH_RETRIES`), with a note on the result saying so. As
with any use of Python's ``spawn`` start method, a script that calls this module must
keep its top-level code under ``if __name__ == "__main__":``.

Inside the child, a small subclass of PySpice 1.5's ``NgSpiceShared`` keeps everything
ngspice prints instead of treating every stderr line as an error (ngspice 42 and later
print harmless notes on stderr, which PySpice 1.5 reports as failures). Whether a run
failed is decided from its results: error lines (``Error``, ``aborted``, ``Timestep too
small``), a missing transient plot, or a run that stopped before its ``.tran`` stop time.
After every run the plots and the circuit are freed (``destroy all``, ``remcirc``), so
memory does not grow from run to run.

Sign conventions: the probe voltage is ``v(plus) - v(minus)`` (ground is node ``0``);
a voltage source's branch current is SPICE's: the current entering its positive (first)
node and flowing through it, which for the loop's current-sense source, oriented in loop
order, is the loop current in the direction the loop is written. With a current probe
(:attr:`DeckRun.probe_current`) the probed signal is that 0 V source's branch current
(``v_probe_l1#branch``), in amperes where a voltage probe's volts would be.

The same child also runs small-signal ``.ac`` decks (:class:`AcDeckRun`,
:func:`run_ac_deck`): their vectors are complex and come back as an :class:`AcPlot`
(ngspice's frequencies and the complex output); the decks are written by
:mod:`xcheck.engines.ac_deck`.
"""

from __future__ import annotations

import atexit
import logging
import multiprocessing
import os
import queue
import re
import signal
import threading
from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from multiprocessing.connection import Connection
from typing import TYPE_CHECKING, Any

import numpy as np

from xcheck.errors import SimulationError, XcheckError
from xcheck.engines.waveform import Waveform
from xcheck.interrupts import sigint_held

if TYPE_CHECKING:  # the ngspice child imports this module: it needs no circuit graph
    from xcheck.circuit.model import Circuit

#: The ways to install the shared library (a clause, no capital, no full stop).
INSTALL_WAYS = (
    "Debian/Ubuntu 'apt-get install libngspice0-dev' (provides libngspice.so); macOS "
    "Homebrew 'brew install libngspice'; conda 'conda install -c conda-forge ngspice-lib'; "
    "or set NGSPICE_LIBRARY_PATH to the full path of the library file (libngspice.so, "
    "libngspice.dylib or ngspice.dll)"
)

#: What to install when the shared library cannot be loaded.
INSTALL_HELP = f"ngspice's shared library could not be loaded. Install it: {INSTALL_WAYS}"

#: Times :func:`run_deck`, :func:`run_ac_deck` and :class:`NgspicePool` repeat a run
#: whose child process died during it (on a fresh child each time).
CRASH_RETRIES = 1

#: How the note on a result that needed a fresh child begins.
RETRY_NOTE_START = "ngspice's child process died during this run"

#: Seconds allowed for a child process to start and load the library.
START_TIMEOUT = 120.0

#: Most ngspice lines quoted in an error message.
MAX_MESSAGE_LINES = 10

class NgspiceUnavailable(SimulationError):
    """ngspice could not be started: its shared library is missing or is not a library,
    PySpice is missing, or the child process did not come up.

    Attributes
    ----------
    reason
        The cause in a few words (the loader's own message, shortened), without the
        install help that the full message carries.
    """

    def __init__(self, message: str, reason: str = "") -> None:
        super().__init__(message)
        self.reason = reason or message


class NgspiceCrashed(SimulationError):
    """The child process died during a run (killed, or crashed inside the library).

    Attributes
    ----------
    exit_code
        The child's exit code (negative: the signal that ended it), or None.
    """

    def __init__(self, message: str, exit_code: int | None = None) -> None:
        super().__init__(message)
        self.exit_code = exit_code


def _how_it_ended(code: int | None) -> str:
    """``"exit code -9, signal SIGKILL"`` for a child's exit code."""
    if code is None:
        return "exit code unknown"
    if code < 0:
        try:
            return f"exit code {code}, signal {signal.Signals(-code).name}"
        except ValueError:
            return f"exit code {code}"
    return f"exit code {code}"


def _short_load_error(exc: BaseException) -> str:
    """The loader's message without cffi's note about ``find_library``."""
    text = " ".join(str(exc).split())
    return text.split(" Additionally, ctypes.util.find_library()", 1)[0].rstrip(". ")


_ERROR_LINE = re.compile(
    r"(^\s*error\b|\berror:|\baborted\b|timestep too small|\bfatal\b)",
    re.IGNORECASE,
)
_NO_CONVERGENCE = re.compile(
    r"(timestep too small|singular matrix|no convergence|gmin stepping failed|"
    r"source stepping failed|iteration limit)", re.IGNORECASE)

#: Added after ngspice's own lines when they say the run did not converge.
NO_CONVERGENCE_HINT = (
    "(the run did not converge; usual causes: a node with no DC path to ground, a loop "
    "of ideal voltage sources and inductors, or element values many decades apart)"
)
_TRAN_LINE = re.compile(r"^\s*\.tran\s+(\S+)\s+(\S+)", re.IGNORECASE | re.MULTILINE)


@dataclass(frozen=True)
class DeckRun:
    """One deck to run and what to read back.

    Attributes
    ----------
    deck_text
        The whole deck, title line first, ``.end`` last.
    probe
        (plus node, minus node) of the probe voltage; ground is ``"0"``.
    current_sense
        Name of the voltage source whose branch current is the loop current, or None.
    name
        What to call the deck in messages (a file name or the fixture's title).
    probe_current
        Name of the 0 V source whose branch current is the probed signal (a current
        probe), or None to read the probe voltage.
    """

    deck_text: str
    probe: tuple[str, str]
    current_sense: str | None = None
    name: str = "deck"
    probe_current: str | None = None


@dataclass(frozen=True)
class AcDeckRun:
    """One ``.ac`` deck to run and what to read back (see :func:`run_ac_deck`).

    Attributes
    ----------
    deck_text
        The whole deck, title line first, one ``.ac`` line, ``.end`` last.
    probe
        (plus node, minus node) of the output voltage; ground is ``"0"``.
    name
        What to call the deck in messages.
    probe_current
        Name of the 0 V source whose branch current is the output, or None to read
        the voltage between the ``probe`` nodes.
    """

    deck_text: str
    probe: tuple[str, str]
    name: str = "deck"
    probe_current: str | None = None


@dataclass(frozen=True)
class AcPlot:
    """ngspice's small-signal sweep.

    Attributes
    ----------
    frequency
        ngspice's frequencies (Hz), increasing.
    response
        Complex output at each frequency (per unit of the ``ac 1`` drive).
    notes
        ngspice's warnings, each prefixed ``"ngspice: "``.
    """

    frequency: np.ndarray
    response: np.ndarray
    notes: tuple[str, ...] = ()


# --------------------------------------------------------------------------------------
# Child process side
# --------------------------------------------------------------------------------------


def _quiet_shared_class() -> type:
    """A subclass of PySpice's NgSpiceShared whose output callback only records lines."""
    from PySpice.Spice.NgSpice.Shared import NgSpiceShared, ffi, ffi_string_utf8

    class QuietNgSpiceShared(NgSpiceShared):
        """Keeps stdout and stderr lines; never flags an error from stderr alone."""

        @staticmethod
        def _send_char(message_c: Any, ngspice_id: int, user_data: Any) -> int:
            self = ffi.from_handle(user_data)
            message = ffi_string_utf8(message_c)
            if isinstance(message, bytes):
                message = message.decode("utf-8", "replace")
            prefix, _, content = message.partition(" ")
            if prefix == "stderr":
                self._stderr.append(content)
            else:
                self._stdout.append(content)
            return 0

    return QuietNgSpiceShared


def _load_ngspice() -> Any:
    """Load the shared library in this (child) process.

    Raises
    ------
    NgspiceUnavailable
        The library (``NGSPICE_LIBRARY_PATH``, else the loader's search path) is
        missing or not a loadable library, or PySpice is missing; the message says what
        to install, :attr:`NgspiceUnavailable.reason` what the loader said.
    """
    logging.getLogger("PySpice").setLevel(logging.CRITICAL + 1)
    try:
        cls = _quiet_shared_class()
        return cls(ngspice_id=0, send_data=False)
    except (OSError, ImportError) as exc:  # dlopen failure or PySpice missing
        raise NgspiceUnavailable(f"{INSTALL_HELP}. (Loading failed with: {exc})",
                                 _short_load_error(exc)) from None


def _version_of(shared: Any) -> str:
    for line in shared.exec_command("version -f", join_lines=False):
        match = re.search(r"ngspice-(\S+)", line)
        if match:
            return f"ngspice-{match.group(1)}"
    return f"ngspice-{shared.ngspice_version}"


def _error_lines(shared: Any) -> list[str]:
    """ngspice's messages when any of them reports an error, else an empty list."""
    lines = shared._stdout + shared._stderr
    if not any(_ERROR_LINE.search(line) for line in lines):
        return []
    wanted = [line for line in shared._stdout if _ERROR_LINE.search(line)] + shared._stderr
    unique = list(dict.fromkeys(line.strip() for line in wanted if line.strip()))
    return unique[:MAX_MESSAGE_LINES]


def _failure_detail(errors: list[str], rc: int, missing: str) -> str:
    """ngspice's error lines joined (with :data:`NO_CONVERGENCE_HINT` when they say the
    run did not converge), else the return code, else ``missing``."""
    if errors:
        hint = (f" {NO_CONVERGENCE_HINT}"
                if any(_NO_CONVERGENCE.search(line) for line in errors) else "")
        return "; ".join(errors) + hint
    return f"return code {rc}" if rc else missing


def _returned_code(call: Any, *args: Any) -> int:
    """Call a PySpice method; PySpice raises NameError("... returned <code>") when the
    library returns a non-zero code, turned back into that code here."""
    try:
        call(*args)
    except NameError as exc:
        match = re.search(r"returned (-?\d+)", str(exc))
        return int(match.group(1)) if match else 1
    return 0


def _expected_stop(deck_text: str) -> float | None:
    match = _TRAN_LINE.search(deck_text)
    if match is None:
        return None
    try:
        return float(match.group(2))
    except ValueError:
        return None


def _vector(plot: dict[str, Any], node: str) -> np.ndarray | None:
    if node == "0":
        return None
    for key in (node.lower(), f"v({node.lower()})"):
        if key in plot:
            return np.asarray(plot[key]._data, dtype=float)
    raise KeyError(node)


def _branch(plot: dict[str, Any], source: str, label: str) -> np.ndarray:
    """The branch current of voltage source ``source`` (SPICE's sign)."""
    key = f"{source.lower()}#branch"
    if key not in plot:
        raise SimulationError(
            f"{label}: no branch current {key!r} in ngspice's results "
            f"(vectors: {', '.join(sorted(plot))})"
        )
    return np.asarray(plot[key]._data, dtype=float)


def _run_in_child(shared: Any, run: DeckRun) -> dict[str, Any]:
    """Load, run, read back and free one deck. Raises SimulationError on failure."""
    title = run.deck_text.splitlines()[0].strip() if run.deck_text.strip() else ""
    label = f"deck {run.name!r}" + (f" ({title})" if title and title != run.name else "")
    try:
        rc = _returned_code(shared.load_circuit, run.deck_text)  # clears old output first
        errors = _error_lines(shared)
        if rc or errors:
            raise SimulationError(
                f"ngspice rejected {label}: " + ("; ".join(errors) or f"return code {rc}")
            )
        rc = _returned_code(shared.run)  # exec_command clears old output first
        errors = _error_lines(shared)
        plot_name = shared.last_plot
        if rc or errors or not plot_name.startswith("tran"):
            detail = _failure_detail(errors, rc,
                                     f"no transient results (last plot {plot_name!r})")
            raise SimulationError(f"ngspice failed to run {label}: {detail}")
        plot = shared.plot(None, plot_name)
        time = np.asarray(plot["time"]._data, dtype=float)
        stop = _expected_stop(run.deck_text)
        if time.size < 2 or (stop is not None and time[-1] < stop * (1 - 1e-6)):
            reached = time[-1] if time.size else 0.0
            raise SimulationError(
                f"ngspice stopped {label} early, at {reached:.6g} s of {stop} s"
            )
        if run.probe_current:
            probe = _branch(plot, run.probe_current, label)
        else:
            try:
                plus, minus = (_vector(plot, node) for node in run.probe)
            except KeyError as exc:
                raise SimulationError(
                    f"{label}: the probe node {exc.args[0]!r} is not in ngspice's results "
                    f"(vectors: {', '.join(sorted(plot))})"
                ) from None
            probe = (plus if plus is not None else 0.0) - (minus if minus is not None else 0.0)
        current = _branch(plot, run.current_sense, label) if run.current_sense else None
        return {
            "time": time,
            "probe": np.broadcast_to(probe, time.shape).astype(float),
            "current": current,
            "warnings": [
                line.strip() for line in shared._stdout + shared._stderr if "warning" in line.lower()
            ],
        }
    finally:
        shared.destroy()  # "destroy all": free every plot's vectors
        shared.remove_circuit()  # "remcirc": free the circuit


_AC_LINE = re.compile(r"^\s*\.ac\s+\S+\s+\S+\s+\S+\s+(\S+)", re.IGNORECASE | re.MULTILINE)


def _complex_vector(plot: dict[str, Any], key: str) -> np.ndarray:
    return np.asarray(plot[key]._data, dtype=complex)


def _run_ac_in_child(shared: Any, run: AcDeckRun) -> dict[str, Any]:
    """Load, run, read back and free one ``.ac`` deck. Raises SimulationError on failure."""
    title = run.deck_text.splitlines()[0].strip() if run.deck_text.strip() else ""
    label = f"deck {run.name!r}" + (f" ({title})" if title and title != run.name else "")
    try:
        rc = _returned_code(shared.load_circuit, run.deck_text)
        errors = _error_lines(shared)
        if rc or errors:
            raise SimulationError(
                f"ngspice rejected {label}: " + ("; ".join(errors) or f"return code {rc}")
            )
        rc = _returned_code(shared.run)
        errors = _error_lines(shared)
        plot_name = shared.last_plot
        if rc or errors or not plot_name.startswith("ac"):
            detail = _failure_detail(errors, rc, f"no AC results (last plot {plot_name!r})")
            raise SimulationError(f"ngspice failed to run {label}: {detail}")
        plot = shared.plot(None, plot_name)
        frequency = _complex_vector(plot, "frequency").real
        match = _AC_LINE.search(run.deck_text)
        stop = float(match.group(1)) if match else None
        if frequency.size < 2 or (stop is not None and frequency[-1] < stop * (1 - 1e-6)):
            reached = frequency[-1] if frequency.size else 0.0
            raise SimulationError(
                f"ngspice stopped {label} early, at {reached:.6g} Hz of {stop} Hz"
            )
        if run.probe_current:
            key = f"{run.probe_current.lower()}#branch"
            if key not in plot:
                raise SimulationError(
                    f"{label}: no branch current {key!r} in ngspice's results "
                    f"(vectors: {', '.join(sorted(plot))})"
                )
            response = _complex_vector(plot, key)
        else:
            parts = []
            for node in run.probe:
                if node == "0":
                    parts.append(0.0)
                    continue
                keys = [k for k in (node.lower(), f"v({node.lower()})") if k in plot]
                if not keys:
                    raise SimulationError(
                        f"{label}: the probe node {node!r} is not in ngspice's results "
                        f"(vectors: {', '.join(sorted(plot))})"
                    )
                parts.append(_complex_vector(plot, keys[0]))
            response = parts[0] - parts[1]
        return {
            "frequency": frequency,
            "response": np.broadcast_to(response, frequency.shape).astype(complex),
            "warnings": [
                line.strip() for line in shared._stdout + shared._stderr if "warning" in line.lower()
            ],
        }
    finally:
        shared.destroy()
        shared.remove_circuit()


def _serve(conn: Connection) -> None:
    """Child process entry point: :func:`_load_and_answer`, quietly ended when the
    parent stops listening."""
    # Ctrl-C reaches the whole process group; the parent decides (it stops this child),
    # so the child never prints a KeyboardInterrupt traceback of its own.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        _load_and_answer(conn)
    except (BrokenPipeError, ConnectionResetError, EOFError):
        # The parent stopped listening (it was interrupted while this child loaded
        # ngspice): nothing to say, and nothing on the shared stderr.
        os._exit(0)


def _load_and_answer(conn: Connection) -> None:
    """Load ngspice, tell the parent, then answer its requests until told to stop."""
    try:
        shared = _load_ngspice()
        conn.send(("ready", _version_of(shared)))
    except NgspiceUnavailable as exc:
        conn.send(("missing", (str(exc), exc.reason)))
        conn.close()
        return
    while True:
        try:
            request = conn.recv()
        except (EOFError, OSError):
            request = None
        if request is None:
            # Done: end at once. The interpreter's teardown with the ngspice library
            # loaded took a few tenths of a second the parent waited for; this child
            # holds no file to flush.
            conn.close()
            os._exit(0)
        try:
            runner = _run_ac_in_child if isinstance(request, AcDeckRun) else _run_in_child
            conn.send(("ok", runner(shared, request)))
        except SimulationError as exc:
            conn.send(("error", str(exc)))
        except Exception as exc:  # noqa: BLE001 - report anything else as a failed run
            conn.send(("error", f"deck {request.name!r}: {type(exc).__name__}: {exc}"))


# --------------------------------------------------------------------------------------
# Parent side
# --------------------------------------------------------------------------------------


class NgspiceWorker:
    """One child process running ngspice; started on first use, restarted after a
    hang or crash. Not thread-safe: use one worker per thread (see :class:`NgspicePool`)."""

    def __init__(self) -> None:
        self._process: multiprocessing.process.BaseProcess | None = None
        self._conn: Connection | None = None
        self._version = ""
        self.runs = 0  # decks the running child has served (for recycling it)
        self.replaced = 0  # children this worker started afresh to repeat a run

    @property
    def pid(self) -> int | None:
        """Process id of the child, or None when none is running."""
        return self._process.pid if self._process is not None else None

    @property
    def version(self) -> str:
        """ngspice version reported by the running child (``"ngspice-39"``)."""
        self._ensure_started()
        return self._version

    def _ensure_started(self) -> None:
        if self._process is not None and self._process.is_alive():
            return
        self.stop()
        context = multiprocessing.get_context("spawn")
        parent_conn, child_conn = context.Pipe()
        process = context.Process(target=_serve, args=(child_conn,), daemon=True)
        if os.name == "posix":
            # The first spawn of a process starts multiprocessing's resource tracker,
            # which unmasks SIGINT when it is done; started here, it leaves the mask
            # that sigint_held sets for the child in place.
            from multiprocessing import resource_tracker

            resource_tracker.ensure_running()
        # Ctrl-C between starting the child and recording it would leave a child
        # nobody stops, and a Ctrl-C to the whole group must not reach the child before
        # its own code ignores it (sigint_held's mask, inherited through exec).
        with sigint_held():
            process.start()
            child_conn.close()
            self._process, self._conn = process, parent_conn
        if not parent_conn.poll(START_TIMEOUT):
            self.stop()
            raise NgspiceUnavailable(
                f"ngspice did not start within {START_TIMEOUT:g} s; {INSTALL_HELP}",
                f"the child process did not start within {START_TIMEOUT:g} s")
        try:
            status, payload = parent_conn.recv()
        except EOFError:
            process.join(5.0)
            code = process.exitcode
            self.stop()
            raise NgspiceUnavailable(
                f"the ngspice child process exited during start-up (exit code {code}). "
                "When xcheck is called from a script, the script's top-level code must sit "
                "under 'if __name__ == \"__main__\":' (Python's spawn start method re-imports "
                f"it in the child). Otherwise the library may be broken: {INSTALL_HELP}",
                f"the child process exited during start-up ({_how_it_ended(code)})") from None
        if status != "ready":
            self.stop()
            message, reason = payload
            raise NgspiceUnavailable(message, reason)
        self._version = payload

    def run(self, run: DeckRun, timeout: float = 60.0, retries: int = 0) -> Waveform:
        """Run one deck and return its probe voltage (and loop current).

        Parameters
        ----------
        run
            The deck and what to read back.
        timeout
            Seconds the run may take once the child is up; beyond it the child is
            killed and SimulationError raised (the next run starts a fresh child).
        retries
            Times to repeat the run on a fresh child when the child dies during it
            (the module's functions and :class:`NgspicePool` pass
            :data:`CRASH_RETRIES`); a repeated run says so in ``notes``.

        Returns
        -------
        Waveform
            ngspice's own time points; ``engine="ngspice"``.

        Raises
        ------
        NgspiceUnavailable
            The library cannot be loaded (the message says what to install).
        NgspiceCrashed
            The child died during the run, on every try.
        SimulationError
            Deck rejected or run failed (ngspice's lines quoted), or hung.
        """
        payload, retry_notes = self._exchange(
            run, timeout, "check the deck's .tran stop time and maximum step, or allow a "
            "longer timeout", retries)
        notes = tuple(f"ngspice: {line}" for line in dict.fromkeys(payload["warnings"]))
        return Waveform(
            time=payload["time"],
            probe_voltage=payload["probe"],
            loop_current=payload["current"],
            engine="ngspice",
            notes=retry_notes + notes,
        )

    def run_ac(self, run: AcDeckRun, timeout: float = 60.0, retries: int = 0) -> AcPlot:
        """Run one ``.ac`` deck and return its complex output.

        Parameters
        ----------
        run
            The deck and what to read back.
        timeout
            Seconds the run may take once the child is up.
        retries
            Times to repeat the run on a fresh child when the child dies during it.

        Returns
        -------
        AcPlot

        Raises
        ------
        SimulationError
            ngspice missing (:class:`NgspiceUnavailable`), deck rejected, run failed,
            hung, or crashed on every try (:class:`NgspiceCrashed`).
        """
        payload, retry_notes = self._exchange(
            run, timeout, "check the deck's .ac points per decade and range, or allow a "
            "longer timeout", retries)
        notes = tuple(f"ngspice: {line}" for line in dict.fromkeys(payload["warnings"]))
        return AcPlot(payload["frequency"], payload["response"], retry_notes + notes)

    def _exchange(self, run: DeckRun | AcDeckRun, timeout: float, hint: str,
                  retries: int = 0) -> tuple[dict[str, Any], tuple[str, ...]]:
        """One request's answer, repeated on a fresh child up to ``retries`` times when
        the child dies during it; also the notes saying it was repeated."""
        deaths: list[NgspiceCrashed] = []
        while True:
            try:
                payload = self._exchange_once(run, timeout, hint)
            except NgspiceCrashed as exc:
                deaths.append(exc)
                if len(deaths) > retries:
                    raise self._crashed_again(run, deaths) if len(deaths) > 1 else exc
                self.replaced += 1
                continue
            notes = tuple(
                f"{RETRY_NOTE_START} ({_how_it_ended(death.exit_code)}); a fresh one "
                f"was started and ran it again" for death in deaths)
            return payload, notes

    @staticmethod
    def _crashed_again(run: DeckRun | AcDeckRun, deaths: list[NgspiceCrashed]) -> NgspiceCrashed:
        ends = ", then ".join(_how_it_ended(d.exit_code) for d in deaths)
        return NgspiceCrashed(
            f"deck {run.name!r}: the ngspice child process died during the run "
            f"{len(deaths)} times, each time on a fresh process ({ends}); the deck itself "
            "may crash ngspice (try it with the ngspice program: 'ngspice -b DECK'), or "
            "something on this machine is killing the process (an out-of-memory killer, "
            "a job limit)", deaths[-1].exit_code)

    def _exchange_once(self, run: DeckRun | AcDeckRun, timeout: float,
                       hint: str) -> dict[str, Any]:
        """Send one request to the child and return its answer's payload."""
        self._ensure_started()
        assert self._conn is not None and self._process is not None
        self.runs += 1
        try:
            self._conn.send(run)
        except (BrokenPipeError, OSError):
            process = self._process
            process.join(5)
            code = process.exitcode
            self.stop()
            raise NgspiceCrashed(
                f"deck {run.name!r}: the ngspice process is gone ({_how_it_ended(code)})",
                code) from None
        if not self._conn.poll(timeout):
            self.stop(force=True)
            raise SimulationError(
                f"deck {run.name!r}: ngspice did not finish within {timeout:g} s, so its "
                f"process was killed (the next run starts a fresh one); {hint}"
            )
        try:
            status, payload = self._conn.recv()
        except (EOFError, OSError):
            self._process.join(5)
            code = self._process.exitcode
            self.stop()
            raise NgspiceCrashed(
                f"deck {run.name!r}: ngspice crashed during the run (exit code {code})", code
            ) from None
        if status != "ok":
            raise SimulationError(payload)
        return payload

    def stop(self, force: bool = False) -> None:
        """Stop the child process: ask it to exit (unless ``force``), then kill it if it
        is still there after a second."""
        process, conn = self._process, self._conn
        self._process, self._conn, self.runs = None, None, 0
        if force and process is not None and process.is_alive():
            process.kill()  # before its pipe closes, which it would otherwise notice
        if conn is not None:
            try:
                if not force and process is not None and process.is_alive():
                    conn.send(None)
            except (BrokenPipeError, OSError):
                pass
            conn.close()
        if process is not None:
            if not force:
                process.join(1.0)
            if process.is_alive():
                process.kill()
            process.join(5.0)
            if not process.is_alive():
                process.close()


class NgspicePool:
    """Several :class:`NgspiceWorker` children that run many decks in parallel.

    Use as a context manager so the children are stopped afterwards::

        with NgspicePool(max_workers=2) as pool:
            results = pool.run_all(runs)
    """

    def __init__(self, max_workers: int | None = None) -> None:
        count = max_workers if max_workers is not None else (os.cpu_count() or 1)
        if count < 1:
            raise ValueError(f"max_workers must be at least 1, got {max_workers!r}")
        self._workers = [NgspiceWorker() for _ in range(count)]
        self._free: queue.SimpleQueue[NgspiceWorker] = queue.SimpleQueue()
        for worker in self._workers:
            self._free.put(worker)

    def __enter__(self) -> "NgspicePool":
        return self

    def __exit__(self, *exc_info: object) -> None:
        self.close()

    def close(self) -> None:
        """Stop every child process."""
        for worker in self._workers:
            worker.stop()

    def run_all(
        self, runs: Sequence[DeckRun], timeout: float = 60.0
    ) -> list[Waveform | SimulationError]:
        """Run every deck; failures are returned in place, not raised.

        Parameters
        ----------
        runs
            Decks to run.
        timeout
            Seconds allowed for each run.

        Returns
        -------
        list
            For each run, in order, its :class:`Waveform` or the
            :class:`SimulationError` saying why it failed.
        """

        def one(run: DeckRun) -> Waveform | SimulationError:
            worker = self._free.get()
            try:
                return worker.run(run, timeout, CRASH_RETRIES)
            except SimulationError as exc:
                return exc
            finally:
                self._free.put(worker)

        if not runs:
            return []
        with ThreadPoolExecutor(max_workers=min(len(self._workers), len(runs))) as executor:
            return list(executor.map(one, runs))


def run_decks(
    runs: Sequence[DeckRun], *, max_workers: int | None = None, timeout: float = 60.0
) -> list[Waveform | SimulationError]:
    """Run many decks on a temporary pool of ngspice child processes.

    Parameters
    ----------
    runs
        Decks to run.
    max_workers
        Child processes to use (default: the number of CPUs, at most one per deck).
    timeout
        Seconds allowed for each run.

    Returns
    -------
    list
        One :class:`Waveform` or :class:`SimulationError` per run, in order.
    """
    count = min(max_workers or os.cpu_count() or 1, max(len(runs), 1))
    with NgspicePool(count) as pool:
        return pool.run_all(runs, timeout)


_shared_worker: NgspiceWorker | None = None
_shared_lock = threading.Lock()


def _default_worker() -> NgspiceWorker:
    global _shared_worker
    if _shared_worker is None:
        _shared_worker = NgspiceWorker()
        atexit.register(_shared_worker.stop)
    return _shared_worker


def recycle_shared_worker(should_stop: Callable[[int, int], bool]) -> bool:
    """Stop the shared child of :func:`run_deck` when ``should_stop(pid, runs)`` is true
    (``runs``: decks it has served); the next run starts a fresh one. Long sweeps use it
    because the library's memory grows run after run. Returns True when it was stopped."""
    with _shared_lock:
        worker = _shared_worker
        if worker is None or worker.pid is None or not should_stop(worker.pid, worker.runs):
            return False
        worker.stop()
        return True


def run_deck(
    deck_text: str,
    *,
    probe: tuple[str, str],
    current_sense: str | None = None,
    name: str = "deck",
    timeout: float = 60.0,
    probe_current: str | None = None,
) -> Waveform:
    """Run one deck in the module's shared ngspice child process.

    Parameters
    ----------
    deck_text
        The deck (title line first, ``.tran`` and ``.end`` included).
    probe
        (plus node, minus node): the probe voltage is ``v(plus) - v(minus)``.
    current_sense
        Voltage source whose branch current is returned as the loop current, or None.
    name
        The deck's name for messages (file or fixture).
    timeout
        Seconds the run may take (the child's one-off start-up is not counted); a
        longer run is stopped and reported.
    probe_current
        Voltage source whose branch current is the probed signal (a current probe), or
        None for the probe voltage.

    Returns
    -------
    Waveform
        ngspice's time points, probe signal and loop current; ``engine="ngspice"``.

    Raises
    ------
    SimulationError
        ngspice missing (:class:`NgspiceUnavailable`; the message says what to
        install), deck rejected (ngspice's error lines quoted), run failed, hung past
        ``timeout``, or its child died on the run and on its one repeat on a fresh child
        (:class:`NgspiceCrashed`; a repeat that succeeds says so in ``notes``).
    """
    with _shared_lock:
        return _default_worker().run(
            DeckRun(deck_text, tuple(probe), current_sense, name, probe_current), timeout,
            CRASH_RETRIES)


def run_ac_deck(
    deck_text: str,
    *,
    probe: tuple[str, str],
    name: str = "deck",
    timeout: float = 60.0,
    probe_current: str | None = None,
) -> AcPlot:
    """Run one ``.ac`` deck in the module's shared ngspice child process.

    Parameters
    ----------
    deck_text
        The deck (title line first, one ``.ac`` line and ``.end`` included).
    probe
        (plus node, minus node): the output is ``v(plus) - v(minus)``.
    name
        The deck's name for messages.
    timeout
        Seconds the run may take.
    probe_current
        Voltage source whose branch current is the output, or None.

    Returns
    -------
    AcPlot
        ngspice's frequencies (Hz) and complex output.

    Raises
    ------
    SimulationError
        ngspice missing, deck rejected, run failed, hung past ``timeout`` or crashed.
    """
    with _shared_lock:
        return _default_worker().run_ac(AcDeckRun(deck_text, tuple(probe), name, probe_current),
                                        timeout, CRASH_RETRIES)


def simulate_ngspice(
    circuit: Circuit, *, stop_time: float | None = None, timeout: float = 60.0
) -> Waveform:
    """Write ``circuit``'s deck and run it in ngspice.

    Parameters
    ----------
    circuit
        The circuit.
    stop_time
        End of the run in seconds; None lets :func:`xcheck.engines.timing.transient_settings`
        choose it.
    timeout
        Seconds the run may take.

    Returns
    -------
    Waveform
        ``engine="ngspice"``; ``notes`` include the time step used. With a current
        probe, ``probe_voltage`` holds the probed current (A).
    """
    from xcheck.engines.deck import deck_names, write_deck
    from xcheck.engines.timing import transient_settings

    deck = write_deck(circuit, stop_time=stop_time)
    names = deck_names(circuit)
    settings = transient_settings(circuit, stop_time=stop_time)
    waveform = run_deck(
        deck,
        probe=names.probe,
        current_sense=names.current_sense,
        name=circuit.source or circuit.title,
        timeout=timeout,
        probe_current=names.probe_current,
    )
    notes = (
        f"trapezoidal integration, maximum step {settings.max_step:.4g} s, "
        f"stop {settings.stop:.4g} s",
        *settings.notes,
        *waveform.notes,
    )
    return Waveform(waveform.time, waveform.probe_voltage, waveform.loop_current, "ngspice", notes)


def ngspice_status() -> tuple[str, NgspiceUnavailable | None]:
    """ngspice's version and None, or ``("unavailable", why)`` when it cannot be started.

    A comparison checks this once, so a missing library costs one child start, not one
    per candidate.
    """
    try:
        return ngspice_version(), None
    except NgspiceUnavailable as exc:
        return "unavailable", exc
    except (XcheckError, ImportError, OSError) as exc:
        return "unavailable", NgspiceUnavailable(str(exc))


def ngspice_version() -> str:
    """The version of the ngspice shared library (``"ngspice-39"``).

    Raises
    ------
    SimulationError
        When the library cannot be loaded (the message says what to install).
    """
    with _shared_lock:
        return _default_worker().version
