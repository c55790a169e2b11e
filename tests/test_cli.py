"""The command-line dispatcher: exit codes, help, and a start-up that imports only what
the chosen command needs (checked through ``sys.modules``, never by timing)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from xcheck import cli

HEAVY = ("numpy", "scipy", "matplotlib", "pyarrow", "PySpice", "networkx")


def _modules_after(argv: list[str]) -> set[str]:
    code = (
        "import sys\n"
        "from xcheck.cli import main\n"
        f"code = main({argv!r})\n"
        "print(' '.join(sorted(m.split('.')[0] for m in sys.modules)))\n"
    )
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                            timeout=120)
    return set(result.stdout.split())


@pytest.mark.parametrize("argv", [["--version"], ["--help"], []])
def test_version_and_help_import_no_numerical_library(argv: list[str]) -> None:
    loaded = _modules_after(argv)
    assert "xcheck" in loaded  # the probe itself worked
    assert not loaded & set(HEAVY), sorted(loaded & set(HEAVY))


def test_a_command_imports_what_it_needs() -> None:
    # The check above can fail: a real command does pull numpy in.
    assert "numpy" in _modules_after(["ringdown", "--help"])


def test_every_command_is_listed_and_parses(printed) -> None:
    assert cli.main(["--help"]) == 0
    out = printed().out
    for name in cli.COMMANDS:
        assert name in out
    parser = cli.build_parser()  # every subcommand registered fully
    for name in cli.COMMANDS:
        with pytest.raises(SystemExit) as exit_info:
            parser.parse_args([name, "--help"])
        assert exit_info.value.code == 0


def test_unknown_command_and_no_command_exit_2(printed) -> None:
    assert cli.main(["no-such-command"]) == 2
    assert "xcheck:" in printed().err
    assert cli.main([]) == 2


def test_the_console_entry_flushes_and_keeps_the_exit_status(tmp_path) -> None:
    # The entry point ends the process with os._exit after flushing the streams and
    # running the exit handlers: what was printed must arrive whole through a pipe, the
    # written deck must be there, and the status must be the command's (0; 2 for bad
    # input, the project's stated convention).
    deck = tmp_path / "out.cir"
    fixture = Path(__file__).resolve().parent.parent / "examples" / "film_ringdown.toml"
    ok = subprocess.run([sys.executable, "-m", "xcheck", "deck", str(fixture), "--out", str(deck)],
                        capture_output=True, text=True, timeout=120)
    assert ok.returncode == 0, ok.stderr
    assert deck.read_text(encoding="utf-8").rstrip().endswith(".end")
    assert str(deck) in ok.stdout
    bad = subprocess.run([sys.executable, "-m", "xcheck", "deck", str(tmp_path / "missing.toml")],
                         capture_output=True, text=True, timeout=120)
    assert bad.returncode == 2
    assert bad.stderr.startswith("xcheck: ") and "missing.toml" in bad.stderr
    assert "Traceback" not in bad.stderr
