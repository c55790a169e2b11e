"""``xcheck demo [--out DIR]``: the whole comparison on the embedded, invented demo."""

from __future__ import annotations

import argparse
import dataclasses
from pathlib import Path

from xcheck.commands.compare import (add_force_argument, check_report_folder, finish,
                                     progress_printer)
from xcheck.compare import run_comparison
from xcheck.demo.data import DEMO_SEED, demo_fixture_path, demo_trace_path
from xcheck.fixture.reader import load_fixture


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Register the demo options."""
    parser.add_argument("--out", default=str(Path("reports") / "demo"),
                        help="report folder (default reports/demo/)")
    parser.add_argument("--no-ngspice", action="store_true", help="closed form only")
    parser.add_argument("--quiet", action="store_true", help="no progress lines")
    add_force_argument(parser)


def run(args: argparse.Namespace) -> int:
    """Compare the demo fixture with its shipped synthetic capture."""
    say = progress_printer(args.quiet)
    check_report_folder(Path(args.out), args.force, (demo_fixture_path(), demo_trace_path()))
    fixture = load_fixture(demo_fixture_path())
    comparison = run_comparison(fixture, trace=demo_trace_path(), use_ngspice=not args.no_ngspice,
                                progress=say)
    comparison = dataclasses.replace(comparison, seeds={"demo capture noise": DEMO_SEED})
    return finish(comparison, Path(args.out), None, say, args.force)
