"""Command line: ``xcheck deck|simulate|ringdown|compare|demo ...``.

Each subcommand lives in :mod:`xcheck.commands` as a module with ``add_arguments(parser)``
and ``run(args) -> int``. This module only dispatches and turns every
:class:`~xcheck.errors.XcheckError` into one paragraph on stderr with exit status 2.

Exit status: 0 done; 1 a comparison missed its threshold; 2 bad input or environment;
130 interrupted (Ctrl-C, SIGINT: 128 + the signal's number, as shells report it), after a
one-line message and with no traceback.
"""

from __future__ import annotations

import argparse
import atexit
import importlib
import os
import signal
import sys
import textwrap
from collections.abc import Sequence

from xcheck import __version__
from xcheck.errors import XcheckError
from xcheck.interrupts import (
    caused_by_interrupt,
    silence_unraisable_errors,
    watching_for_ctrl_c,
)

#: Subcommand name -> (module under xcheck.commands, one-line help).
COMMANDS: dict[str, tuple[str, str]] = {
    "deck": ("deck", "write the SPICE deck (parasitics included) for a fixture"),
    "simulate": ("simulate", "predict the fixture's waveform with ngspice and closed-form theory"),
    "ringdown": ("ringdown", "estimate frequency and decay of a measured trace or peak table"),
    "compare": ("compare", "rank candidate models against a measurement and write a report"),
    "demo": ("demo", "run the whole comparison on the embedded, invented demo"),
    "batch": ("batch", "compare every fixture in a folder with its capture, in parallel, "
              "and write an index"),
    "sweep": ("sweep", "Monte Carlo over the tolerances: the spread of the waveform, f_d and "
              "alpha, sensitivities, and which tolerance explains the measurement"),
    "doctor": ("doctor", "show what is installed (Python, libraries, ngspice) and what is missing"),
}

EXIT_OK = 0
EXIT_THRESHOLD = 1
EXIT_BAD_INPUT = 2
EXIT_INTERRUPTED = 130


class _Parser(argparse.ArgumentParser):
    """argparse that reports usage errors as one paragraph and exit status 2."""

    def error(self, message: str) -> None:  # type: ignore[override]
        sys.stderr.write(f"xcheck: {message}. Run '{self.prog} --help' for the usage.\n")
        raise SystemExit(EXIT_BAD_INPUT)


def _chosen_command(argv: Sequence[str]) -> str | None:
    """The subcommand named in ``argv`` (its first word that is one), or None."""
    for word in argv:
        if word in COMMANDS:
            return word
        if not word.startswith("-"):
            return None
    return None


def build_parser(argv: Sequence[str] | None = None) -> argparse.ArgumentParser:
    """The argument parser.

    Parameters
    ----------
    argv
        The arguments about to be parsed. Only the subcommand they name is imported and
        given its arguments, so ``xcheck --help`` and ``xcheck --version`` import none of
        the numerical libraries. None registers every subcommand fully.
    """
    parser = _Parser(prog="xcheck", description=__doc__.splitlines()[0])
    parser.add_argument("--version", action="version", version=f"xcheck {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    wanted = None if argv is None else _chosen_command(argv)
    for name, (module_name, help_text) in COMMANDS.items():
        command = sub.add_parser(name, help=help_text, description=help_text)
        if argv is not None and name != wanted:
            continue
        module = importlib.import_module(f"xcheck.commands.{module_name}")
        module.add_arguments(command)
        command.set_defaults(_run=module.run)
    return parser


def _paragraph(message: str) -> str:
    # Break only at spaces: never inside a file path, a key or a hyphenated word.
    return (
        textwrap.fill(
            " ".join(str(message).split()),
            width=100,
            break_long_words=False,
            break_on_hyphens=False,
        )
        + "\n"
    )


def main(argv: Sequence[str] | None = None) -> int:
    """Run xcheck with ``argv`` (default: the process arguments); return the exit status."""
    with watching_for_ctrl_c():
        try:
            return _dispatch(argv)
        except KeyboardInterrupt:  # also while the chosen command's libraries are imported
            return _interrupted()
        except Exception as exc:
            # Ctrl-C that other code turned into its own error while it unwound (a C
            # extension's "initialization failed", a clean-up step that failed) is still
            # Ctrl-C; anything else is a defect and keeps its traceback.
            if caused_by_interrupt(exc):
                return _interrupted()
            raise


def _interrupted() -> int:
    _stop_ngspice_child()
    sys.stderr.write("xcheck: interrupted; nothing further was written.\n")
    return EXIT_INTERRUPTED


def _stop_ngspice_child() -> None:
    """Kill ngspice's child process at once when one was started, so that it cannot
    print after the message (a child still loading the library would otherwise report
    the parent's closed pipe when it is done)."""
    engine = sys.modules.get("xcheck.engines.ngspice")
    worker = getattr(engine, "_shared_worker", None)
    if worker is not None:
        try:
            worker.stop(force=True)
        except Exception:  # noqa: BLE001 - stopping is a courtesy; the message matters
            pass


def _dispatch(argv: Sequence[str] | None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser(argv)
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # usage errors (2), --help and --version (0)
        return exc.code if isinstance(exc.code, int) else EXIT_BAD_INPUT
    if not getattr(args, "_run", None):
        parser.print_help(sys.stderr)
        return EXIT_BAD_INPUT
    try:
        return int(args._run(args))
    except XcheckError as exc:
        if caused_by_interrupt(exc):  # not the input's fault: see main()
            raise
        sys.stderr.write("xcheck: " + _paragraph(str(exc)))
        return EXIT_BAD_INPUT


def entry() -> None:
    """Console-script entry point.

    When the command is done the process ends at once: Ctrl-C is ignored from then on,
    the exit handlers run (the ngspice child is stopped) and the standard streams are
    flushed, then ``os._exit`` skips the interpreter's own teardown. Every file xcheck
    writes is closed by then (reports are written whole and renamed into place); the
    teardown of the libraries' modules and of a long measurement's arrays took about
    half a second the user waited for.
    """
    try:
        code = main()
    except KeyboardInterrupt:  # in the instant between main's own handling and here
        code = _interrupted()
    finally:
        # The command is done: the exit handlers only stop child processes (in bounded
        # time), so a Ctrl-C now would only print a traceback from inside them.
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    if code == EXIT_INTERRUPTED:
        silence_unraisable_errors()
    run_exit_handlers = getattr(atexit, "_run_exitfuncs", None)
    if run_exit_handlers is None:  # not CPython: the ordinary exit
        raise SystemExit(code)
    run_exit_handlers()  # first: what a handler prints is flushed below
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):  # a closed pipe: nothing more can be said there
            pass
    os._exit(code)
