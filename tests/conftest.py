"""Shared pytest fixtures. Keep this file small; add fixtures next to the tests that
use them unless several test modules need them."""

from __future__ import annotations

import os
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


def _hypothesis_profiles() -> None:
    """Property tests (hypothesis) run the same examples on every machine: the "ci"
    profile, loaded unless HYPOTHESIS_PROFILE names another, is derandomized (no
    example database), bounded in examples and without a per-example deadline, so a
    slow or busy machine does not fail them. "thorough" tries many more examples."""
    try:
        from hypothesis import HealthCheck, settings
    except ImportError:  # the property tests skip themselves
        return
    common = dict(deadline=None, derandomize=True, database=None, print_blob=False,
                  suppress_health_check=[HealthCheck.too_slow])
    settings.register_profile("ci", max_examples=60, **common)
    settings.register_profile("thorough", max_examples=2000, **common)
    settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))


_hypothesis_profiles()


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
