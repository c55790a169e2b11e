"""``xcheck deck FIXTURE [--out PATH]``: write the SPICE deck of a fixture.

The deck holds the values the fixture states (measured where given, else the label),
every parasitic it states and the probe loading. It is written atomically (a temporary
file in the same folder, then a rename), and an existing file is replaced only when it
is itself a deck xcheck wrote, so nothing the user made is ever overwritten. Values
outside what bench parts span are printed as notes
(:func:`xcheck.fixture.plausibility.implausible_values`).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from xcheck.atomic import (DECK_HINT, deck_is_ours, replacing_anyway, require_writable,
                           write_text_atomically)
from xcheck.circuit.expand import build_circuit
from xcheck.engines.deck import write_deck
from xcheck.fixture.plausibility import implausible_values
from xcheck.fixture.reader import load_fixture
from xcheck.circuit.parameters import parameters_from_fixture
from xcheck.values import format_eng

#: Folder (relative to the current directory) the deck goes to without ``--out``.
DEFAULT_FOLDER = Path("netlists")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the ``deck`` subcommand's arguments."""
    parser.add_argument("fixture", type=Path, metavar="FIXTURE", help="fixture file (TOML)")
    parser.add_argument(
        "--out",
        type=Path,
        metavar="PATH",
        default=None,
        help="deck file to write (default: netlists/<fixture name>.cir)",
    )
    parser.add_argument(
        "--force",
        action="store_true",
        help="replace the --out file even when it is not a deck xcheck wrote (still written "
        "whole, then renamed into place)",
    )


def default_path(fixture_path: Path) -> Path:
    """Where the deck of ``fixture_path`` goes without ``--out``."""
    return DEFAULT_FOLDER / f"{fixture_path.stem}.cir"


def run(args: argparse.Namespace) -> int:
    """Write the deck; return 0, or raise :class:`~xcheck.errors.XcheckError` on bad input."""
    fixture = load_fixture(args.fixture)
    circuit = build_circuit(fixture, parameters_from_fixture(fixture))
    text = write_deck(circuit, source_name=Path(args.fixture).as_posix())
    out = Path(args.out) if args.out is not None else default_path(Path(args.fixture))
    require_writable(out, "--out")
    with replacing_anyway(out, args.force):
        write_text_atomically(out, text, is_ours=deck_is_ours, option="--out", hint=DECK_HINT)
    tran = text.splitlines()[-2].split()
    sys.stdout.write(
        f"wrote {out}: {len(circuit.elements)} elements, "
        f"transient to {format_eng(float(tran[2]), 's')} "
        f"in steps of at most {format_eng(float(tran[4]), 's')}\n"
    )
    for note in implausible_values(fixture):
        sys.stdout.write(f"note: {note}\n")
    return 0

