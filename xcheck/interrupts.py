"""Ctrl-C (SIGINT) handling shared by the command line, the report writer, the input
reader and the ngspice worker.

Python turns SIGINT into :class:`KeyboardInterrupt` at whatever line the main thread is
running, and that line may belong to a library that does not pass it on:

- a C extension's module initialisation reports ``ImportError: initialization
  failed``; a C++ drawing routine reports ``ValueError: Invalid bounding box``; a
  clean-up step that fails while the interrupt unwinds raises its own error;
- a weak reference's callback or a ``__del__`` can only print it ("Exception ignored
  in ...") and carry on.

So a run watches for the signal itself (:func:`watching_for_ctrl_c`): once it has been
received, any error that follows is the interruption (:func:`caused_by_interrupt`), and
a run still going checks at its next safe point (:func:`stop_if_interrupted`).
Separately, some steps must not be cut in half (removing a staging folder, handing a
file's descriptor to its file object, starting the ngspice child process and recording
it so that it can be stopped): :func:`sigint_held` holds the interrupt off for their
length and raises it as soon as the step is done.
"""

from __future__ import annotations

import contextlib
import signal
import sys
import threading
from collections.abc import Iterator
from types import FrameType
from typing import Any

#: Set by the watcher's handler when SIGINT arrives, cleared when the watch ends.
_received = threading.Event()


def _on_sigint(_signum: int, _frame: FrameType | None) -> None:
    _received.set()
    raise KeyboardInterrupt


def _note_unraisable(previous: Any) -> Any:
    def hook(unraisable: Any) -> None:
        # A Ctrl-C raised where Python can only drop it, or an error a half-built object
        # gives after one: the run stops at its next safe point and says so once.
        exc_type = unraisable.exc_type
        if _received.is_set() or (exc_type is not None
                                  and issubclass(exc_type, KeyboardInterrupt)):
            _received.set()
            return
        previous(unraisable)

    return hook


@contextlib.contextmanager
def watching_for_ctrl_c() -> Iterator[None]:
    """Run the block with SIGINT noted as it arrives (still raised as
    :class:`KeyboardInterrupt`), and with the errors Python would print and drop
    after it kept quiet.

    A process started with SIGINT ignored (``nohup``, a background job) keeps ignoring
    it, and outside the main thread, which alone receives signals, only the
    dropped-error part applies.
    """
    _received.clear()
    previous_hook = sys.unraisablehook
    sys.unraisablehook = _note_unraisable(previous_hook)
    swap = (threading.current_thread() is threading.main_thread()
            and signal.getsignal(signal.SIGINT) is signal.default_int_handler)
    if swap:
        signal.signal(signal.SIGINT, _on_sigint)
    try:
        yield
    finally:
        if swap:
            signal.signal(signal.SIGINT, signal.default_int_handler)
        sys.unraisablehook = previous_hook
        _received.clear()


def stop_if_interrupted() -> None:
    """Raise :class:`KeyboardInterrupt` when a Ctrl-C arrived that a library did not
    pass on; called between the stages of a run and before a report is moved into
    place."""
    if _received.is_set():
        raise KeyboardInterrupt


def caused_by_interrupt(exc: BaseException) -> bool:
    """Whether ``exc`` is the interruption: a :class:`KeyboardInterrupt`, an error
    raised while one was handled (its ``__cause__`` or ``__context__`` chain holds one;
    ``raise ... from None`` hides the context from tracebacks but keeps it here), or
    any error after a Ctrl-C the watcher saw (a library may have lost the chain)."""
    if _received.is_set():
        return True
    seen: set[int] = set()
    pending: list[BaseException] = [exc]
    while pending:
        current = pending.pop()
        if id(current) in seen:
            continue
        if isinstance(current, KeyboardInterrupt):
            return True
        seen.add(id(current))
        pending.extend(e for e in (current.__cause__, current.__context__) if e is not None)
    return False


@contextlib.contextmanager
def sigint_held() -> Iterator[None]:
    """Hold Ctrl-C off while the block runs; a SIGINT received meanwhile is raised again
    (to whatever handler was in place) as soon as the block is done.

    Python runs signal handlers in the main thread only, so the handler is swapped for
    one that notes the signal (a library's worker thread may take a process-wide
    signal, and a per-thread mask alone would not stop it). SIGINT is also masked in
    this thread: a child process started in the block inherits the mask through
    ``exec`` and so cannot be interrupted before its own start-up code has decided
    what Ctrl-C means to it (a group-wide Ctrl-C otherwise printed the child's
    KeyboardInterrupt traceback from its imports). Elsewhere than in the main thread
    the block runs unchanged.
    """
    if (threading.current_thread() is not threading.main_thread()
            or signal.getsignal(signal.SIGINT) is None):  # a handler Python did not set
        yield
        return
    received: list[int] = []
    previous = signal.signal(signal.SIGINT, lambda signum, _frame: received.append(signum))
    masks = hasattr(signal, "pthread_sigmask")
    if masks:
        signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
    try:
        yield
    finally:
        if masks:  # a SIGINT held pending by the mask reaches the noting handler here
            signal.pthread_sigmask(signal.SIG_UNBLOCK, {signal.SIGINT})
        signal.signal(signal.SIGINT, previous)
        if received:
            signal.raise_signal(signal.SIGINT)


def silence_unraisable_errors() -> None:
    """For a process about to end after Ctrl-C: objects that were half built when it
    landed (a library module interrupted while it was imported) can fail in their
    finalizers, and Python would print each as "Exception ignored in ..."; those are
    echoes of the interruption already reported, not news for the user."""
    sys.unraisablehook = lambda _unraisable: None
