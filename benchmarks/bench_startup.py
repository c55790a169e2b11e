"""Start-up time of the command line against a bare Python interpreter.

Medians over ``--runs`` alternating runs of ``python -c pass`` (the same interpreter as
the virtual environment's), ``xcheck --version`` and ``xcheck deck`` on an example
fixture (writing into a temporary directory). Goal: ``--version`` within 0.3 s of bare
Python; the deck's figure is reported without a goal.

Usage: python -m benchmarks.bench_startup [--runs 7]
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from benchmarks.table import INFO, Row, judged

REPO = Path(__file__).resolve().parent.parent
FIXTURE = REPO / "examples" / "film_ringdown.toml"
VERSION_GOAL = 0.3


def _xcheck() -> list[str]:
    """The console script beside this interpreter."""
    script = Path(sys.executable).parent / "xcheck"
    if not script.exists():
        raise FileNotFoundError(f"no xcheck console script beside {sys.executable}")
    return [str(script)]


def _seconds(command: list[str]) -> float:
    start = time.perf_counter()
    subprocess.run(command, cwd=REPO, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - start


def rows(runs: int = 7) -> list[Row]:
    """The ``--version`` and ``deck`` rows.

    Parameters
    ----------
    runs
        Runs of each command (alternating); the median is kept.

    Returns
    -------
    list of Row
        Extra seconds over bare Python, for ``--version`` then ``deck``.
    """
    with tempfile.TemporaryDirectory() as tmp:
        commands = {
            "bare": [sys.executable, "-c", "pass"],
            "version": _xcheck() + ["--version"],
            "deck": _xcheck() + ["deck", str(FIXTURE), "--out", str(Path(tmp) / "deck.cir")],
        }
        times: dict[str, list[float]] = {name: [] for name in commands}
        for _ in range(runs):
            for name, command in commands.items():
                times[name].append(_seconds(command))
    median = {name: statistics.median(values) for name, values in times.items()}
    bare = median["bare"]
    extra_version = median["version"] - bare
    extra_deck = median["deck"] - bare
    fixture = FIXTURE.relative_to(REPO)
    return [
        Row(
            "f-version", "start-up: xcheck --version", f"<= +{VERSION_GOAL} s",
            "python -c pass (same interpreter)", f"{extra_version:+.3f} s",
            judged(extra_version <= VERSION_GOAL),
            f"medians of {runs}: bare {bare:.3f} s, --version {median['version']:.3f} s"
            + ("" if extra_version <= VERSION_GOAL else
               "; likely reason: heavy imports (numpy, scipy, pyarrow) reached before the "
               "version is printed"),
        ),
        Row(
            "f-deck", f"start-up: xcheck deck {fixture}", "none (reported)",
            "python -c pass (same interpreter)", f"{extra_deck:+.3f} s", INFO,
            f"medians of {runs}: deck {median['deck']:.3f} s ({median['deck'] / bare:.1f}x bare)",
        ),
    ]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=7)
    args = parser.parse_args()
    for row in rows(args.runs):
        print(row.line())


if __name__ == "__main__":
    main()
