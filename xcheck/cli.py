"""Command line: ``xcheck deck|simulate|ringdown|compare|demo ...``.

Each subcommand lives in :mod:`xcheck.commands` as a module with ``add_arguments(parser)``
and ``run(args) -> int``. This module only dispatches and turns every
:class:`~xcheck.errors.XcheckError` into one paragraph on stderr with exit status 2.

Exit status: 0 done; 1 a comparison missed its threshold; 2 bad input or environment.
"""

from __future__ import annotations

import argparse
import importlib
import sys
import textwrap
from collections.abc import Sequence

from xcheck import __version__
from xcheck.errors import XcheckError

#: Subcommand name -> (module under xcheck.commands, one-line help).
COMMANDS: dict[str, tuple[str, str]] = {
    "deck": ("deck", "write the SPICE deck (parasitics included) for a fixture"),
    "simulate": ("simulate", "predict the fixture's waveform with ngspice and closed-form theory"),
    "ringdown": ("ringdown", "estimate frequency and decay of a measured trace or peak table"),
    "compare": ("compare", "rank candidate models against a measurement and write a report"),
    "demo": ("demo", "run the whole comparison on the embedded, invented demo"),
}

EXIT_OK = 0
EXIT_THRESHOLD = 1
EXIT_BAD_INPUT = 2


class _Parser(argparse.ArgumentParser):
    """argparse that reports usage errors as one paragraph and exit status 2."""

    def error(self, message: str) -> None:  # type: ignore[override]
        sys.stderr.write(f"xcheck: {message}. Run '{self.prog} --help' for the usage.\n")
        raise SystemExit(EXIT_BAD_INPUT)


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every available subcommand registered."""
    parser = _Parser(prog="xcheck", description=__doc__.splitlines()[0])
    parser.add_argument("--version", action="version", version=f"xcheck {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name, (module_name, help_text) in COMMANDS.items():
        try:
            module = importlib.import_module(f"xcheck.commands.{module_name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"xcheck.commands.{module_name}":
                continue  # not built yet
            raise
        command = sub.add_parser(name, help=help_text, description=help_text)
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
    parser = build_parser()
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
        sys.stderr.write("xcheck: " + _paragraph(str(exc)))
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        sys.stderr.write("xcheck: interrupted; nothing further was written.\n")
        return EXIT_BAD_INPUT


def entry() -> None:
    """Console-script entry point."""
    raise SystemExit(main())
