"""Shared pytest fixtures. Keep this file small; add fixtures next to the tests that
use them unless several test modules need them."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import pytest

from compare_cases import data_text

#: The format's documented example fixture (README.md; natural response, invented
#: scenario), without its [step] table, which a natural response does not take.
EXAMPLE_FIXTURE_TOML = data_text("film_jig.toml")


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
