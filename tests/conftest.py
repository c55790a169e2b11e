"""Shared pytest fixtures. Keep this file small; add fixtures next to the tests that
use them unless several test modules need them."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import pytest

#: The format's documented example fixture (natural response, invented scenario),
#: without its [step] table, which a natural response does not take.
EXAMPLE_FIXTURE_TOML = '''\
title = "Film capacitor ring-down, jig B (invented example)"
response = "natural"
loop = ["SW1", "C1", "R1", "L1"]
probe = "C1"

[parts.C1]
kind = "capacitor"
nominal = "47u"
measured = "49.1u"
tolerance = "20%"
esr = "40m"
initial = "12"

[parts.R1]
kind = "resistor"
nominal = "0.22"
measured = { reading = "0.291", leads = "0.058" }

[parts.L1]
kind = "inductor"
nominal = "470u"
dcr = "?"

[parts.SW1]
kind = "switch"
resistance = "5m"

[loop_reading]
reading = "0.512"
leads = "0.058"

[probe_loading]
resistance = "10meg"
capacitance = "11p"
'''


@pytest.fixture
def example_fixture_toml() -> str:
    """TOML text of a valid natural-response fixture (invented scenario)."""
    return EXAMPLE_FIXTURE_TOML


@pytest.fixture
def write_toml(tmp_path: Path) -> Callable[[str, str], Path]:
    """Factory writing TOML text to ``tmp_path/<name>`` and returning the path."""

    def write(text: str, name: str = "fixture.toml") -> Path:
        path = tmp_path / name
        path.write_text(text, encoding="utf-8")
        return path

    return write


def unwrap(text: str) -> str:
    """``text`` with every run of white space folded to one space.

    The CLI wraps its error paragraph at a fixed width, so where a line breaks depends on
    how long the file paths in it are (the temporary folder's name). Tests match against
    the unwrapped text so that no result depends on path length or terminal width.
    """
    return " ".join(text.split())


@dataclass(frozen=True)
class Printed:
    """What a CLI call printed: ``out`` and ``err`` unwrapped (see :func:`unwrap`), and
    the raw text for checks of the layout itself (one paragraph, no blank line)."""

    out: str
    err: str
    raw_out: str
    raw_err: str


@pytest.fixture
def printed(capsys: pytest.CaptureFixture[str]) -> Callable[[], Printed]:
    """Read what was printed since the last call, unwrapped; the one way tests read CLI
    output."""

    def read() -> Printed:
        captured = capsys.readouterr()
        return Printed(unwrap(captured.out), unwrap(captured.err), captured.out, captured.err)

    return read


def ngspice_available() -> bool:
    """True when ngspice's shared library can be loaded the way PySpice loads it."""
    import ctypes
    import os

    path = os.environ.get("NGSPICE_LIBRARY_PATH") or "libngspice.so"
    try:
        ctypes.CDLL(path)
    except OSError:
        return False
    return True


def pytest_configure(config: pytest.Config) -> None:
    config.addinivalue_line("markers", "ngspice: needs ngspice's shared library (libngspice)")


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    """Skip tests marked ``ngspice`` when the library is missing, saying what to install."""
    if ngspice_available():
        return
    skip = pytest.mark.skip(
        reason="ngspice's shared library is not installed: apt-get install libngspice0-dev "
        "(Debian/Ubuntu), brew install libngspice, conda install -c conda-forge ngspice-lib, "
        "or set NGSPICE_LIBRARY_PATH"
    )
    for item in items:
        if "ngspice" in item.keywords:
            item.add_marker(skip)
